// The resolved case (`check --resolved`, and the case stored in every result file: both resolvedCaseToml) reloads
// to the identical run, for every shipped case: same network size, the same resolved text again, and the same
// node temperatures after a short run, to round-off (identity; no outside source needed: the two runs must agree
// bit for bit when every value is written exactly).
#include <catch2/catch.hpp>

#include <algorithm>
#include <cmath>
#include <cstdio>
#include <filesystem>
#include <string>
#include <vector>

#include "test_support.hpp"

using namespace thermorph;
using thermorph::testing::temperaturesAt;

namespace {

//! The resolved text without its "# Written by ... from FILE." line (which names the file it came from).
std::string withoutSourceLine(const std::string& text) {
  std::string out;
  std::size_t start = 0;
  while (start < text.size()) {
    std::size_t end = text.find('\n', start);
    if (end == std::string::npos) end = text.size();
    if (text.compare(start, 13, "# Written by ") != 0) out.append(text, start, end - start + 1);
    start = end + 1;
  }
  return out;
}

}  // namespace

TEST_CASE("Every shipped case's resolved text reloads to the identical run", "[case][resolved]") {
  std::vector<std::filesystem::path> files;
  for (const auto& entry : std::filesystem::directory_iterator(THERMORPH_SOURCE_DIR "/cases"))
    if (entry.path().extension() == ".toml") files.push_back(entry.path());
  std::sort(files.begin(), files.end());
  REQUIRE(files.size() >= 5);
  for (const auto& file : files) {
    INFO(file.filename().string());
    const Case original = loadCase(file.string());
    const std::string text = resolvedCaseToml(original);
    // Reloaded as if it sat beside the case (weather files are found relative to it).
    Case again;
    REQUIRE_NOTHROW(again = loadCaseFromString(text, (file.parent_path() / "resolved.toml").string()));
    CHECK(withoutSourceLine(resolvedCaseToml(again)) == withoutSourceLine(text));
    Body a(original), b(again);
    REQUIRE(a.network().nodes.size() == b.network().nodes.size());
    REQUIRE(a.network().faces.size() == b.network().faces.size());
    // Ten minutes from the uniform initial temperature (within the first timeline interval of every case).
    const double times[] = {600.0};
    const std::vector<double> ta = temperaturesAt(a, times).back(), tb = temperaturesAt(b, times).back();
    double worst = 0.0;
    for (std::size_t i = 0; i < ta.size(); ++i) worst = std::max(worst, std::abs(ta[i] - tb[i]));
    std::printf("[resolved] %-20s %zu nodes, largest difference after 600 s %.3g K\n", file.filename().c_str(),
                ta.size(), worst);
    CHECK(worst <= 1e-12 * 310.0);
  }
}
