// Giving back the resident pages of the code and constants after a run's set-up (drivers/resident_code.hpp). The
// reference is the Linux manual, madvise(2), MADV_DONTNEED: "subsequent accesses of pages in the range will succeed,
// but will result in ... repopulating the memory contents from the up-to-date contents of the underlying mapped
// file" for private file mappings; the pages given back leave the process's resident set (proc(5), RssFile).
#include <catch2/catch.hpp>

#include <fstream>
#include <sstream>
#include <string>

#include "drivers/resident_code.hpp"
#include "test_support.hpp"

using namespace thermorph;
using namespace thermorph::testing;

namespace {

//! RssFile of /proc/self/status [KiB] (-1 where there is none).
long residentFileKiB() {
  std::ifstream status("/proc/self/status");
  std::string line;
  while (std::getline(status, line))
    if (line.rfind("RssFile:", 0) == 0) return std::stol(line.substr(8));
  return -1;
}

}  // namespace

TEST_CASE("A large run gives back its code's resident pages after the set-up, with the same results", "[memory]") {
  // A radial grid of 6000 cells (above kReleasePagesNodes; illustrative values), 10 min.
  auto body = bodyFromToml(R"toml(
[run]
duration = "10 min"
output_interval = "1 min"
initial_temperature = "37 degC"
[circulation]
fixed_arterial_temperature = "37 degC"
[[segments]]
name = "trunk"
shape = "cylinder"
length = "20 cm"
axial_cells = 1
layers = [{ tissue = "muscle", thickness = "4 cm", cells = 6000 }]
surface = { ends = "insulated", convection = "20 W/(m2 K)" }
[environment]
temperature = "10 degC"
)toml");
  REQUIRE(body->network().nodes.size() >= kReleasePagesNodes);
  RunSummary kept = runTransient(*body, silentRun());
  RunOptions options = silentRun();
  options.releaseStartupPages = true;
  RunSummary released = runTransient(*body, options);
  REQUIRE(kept.complete);
  REQUIRE(released.complete);
  // The code and constants read again from the file are the same: the same steps and states, bit for bit.
  CHECK(released.statistics.steps == kept.statistics.steps);
  CHECK(released.finalState == kept.finalState);
  CHECK(released.energyBalanceError == kept.energyBalanceError);
#if defined(__linux__)
  // The pages leave the resident set (RssFile falls) and the process goes on.
  const long before = residentFileKiB();
  const unsigned long bytes = releaseReadOnlyPages();
  const long after = residentFileKiB();
  INFO("RssFile " << before << " -> " << after << " KiB, " << bytes << " bytes of read-only segments");
  CHECK(bytes > 0);
  CHECK(before > 0);
  CHECK(after < before);
  RunSummary again = runTransient(*body, silentRun());
  CHECK(again.finalState == kept.finalState);
#endif
}
