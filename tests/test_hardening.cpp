// Hardening (issue 15): each fault of the fault harness reproduced, with the behaviour it now has. Bad input is a
// CaseError (exit 2) naming the file, key and reason; output paths are checked before any work; a stop request
// ends a run at its next step with its outputs so far; sweep tables hold any number of values.
// The command-line side (exit codes, signals, a full disk, locks) is tests/e2e_hardening.sh.
#include <fcntl.h>
#include <hdf5.h>
#include <sys/stat.h>
#include <unistd.h>

#include <catch2/catch.hpp>
#include <cmath>
#include <filesystem>
#include <fstream>
#include <numeric>

#include "test_common.hpp"
#include "drivers/output_file.hpp"
#include "drivers/simulation.hpp"
#include "drivers/sweep.hpp"
#include "drivers/sweep_output.hpp"
#include "models/body.hpp"
#include "models/case.hpp"

using namespace thermorph;
using thermorph::common::caseErrorOf;

namespace {

const std::string limb = R"toml(
[run]
duration = "10 min"
output_interval = "1 min"
[circulation]
fixed_arterial_temperature = "37 degC"
[[segments]]
name = "leg"
shape = "cylinder"
length = "10 cm"
axial_cells = 4
layers = [{ tissue = "bone", thickness = "0.5 cm", cells = 2 },
          { tissue = "muscle", thickness = "1 cm", cells = 4 }]
[environment]
temperature = "5 degC"
)toml";

//! `limb` with `from` replaced by `to` (which must occur).
std::string edited(const std::string& from, const std::string& to) {
  std::string text = limb;
  const auto at = text.find(from);
  REQUIRE(at != std::string::npos);
  return text.replace(at, from.size(), to);
}

//! A chain of `n` small cylinders, each the parent of the next.
std::string chain(int n) {
  std::string text = "[circulation]\nfixed_arterial_temperature = \"37 degC\"\n";
  for (int i = 0; i < n; ++i)
    text += "[[segments]]\nname = \"s" + std::to_string(i) + "\"\n" +
            (i ? "parent = \"s" + std::to_string(i - 1) + "\"\n" : std::string()) +
            "shape = \"cylinder\"\nlength = \"1 cm\"\nlayers = [{ tissue = \"muscle\", thickness = \"0.5 cm\" }]\n";
  return text;
}

struct Scratch {
  std::filesystem::path dir;
  Scratch() {
    dir = std::filesystem::temp_directory_path() /
          ("thermorph-hardening-" + std::to_string(::getpid()) + "-" +
           std::to_string(reinterpret_cast<std::uintptr_t>(this)));
    std::filesystem::create_directories(dir);
  }
  ~Scratch() {
    std::error_code e;
    std::filesystem::remove_all(dir, e);
  }
  std::string path(const std::string& name) const { return (dir / name).string(); }
  std::size_t temporaries() const {
    std::size_t n = 0;
    for (const auto& entry : std::filesystem::directory_iterator(dir))
      if (entry.path().filename().string().rfind(".thermorph-", 0) == 0) ++n;
    return n;
  }
};

std::string outputErrorOf(const std::string& output, const std::vector<std::string>& inputs = {},
                          const std::vector<std::string>& derived = {}) {
  try {
    checkOutputPath(output, inputs, derived);
  } catch (const CaseError& e) {
    return e.what();
  }
  return "no error";
}

}  // namespace

TEST_CASE("row 1: nesting deeper than 64 levels is refused before the TOML parser recurses", "[hardening]") {
  // Before: a dotted key 40 000 parts deep overflowed the stack in the parser (SIGSEGV).
  std::string dotted = "a";
  for (int i = 0; i < 40000; ++i) dotted += ".a";
  CHECK_THAT(caseErrorOf(dotted + " = 1\n"), Catch::Contains("case.toml:1:") && Catch::Contains("nesting too deep"));
  CHECK_THAT(caseErrorOf("[" + dotted + "]\n"), Catch::Contains("nesting too deep"));
  CHECK_THAT(caseErrorOf("x = " + std::string(40000, '[') + std::string(40000, ']') + "\n"),
             Catch::Contains("nesting too deep"));
  std::string inlineTables = "x = ";
  for (int i = 0; i < 40000; ++i) inlineTables += "{a=";
  CHECK_THAT(caseErrorOf(inlineTables + "1" + std::string(40000, '}') + "\n"), Catch::Contains("nesting too deep"));
  // --set: the key and the value alike.
  CHECK_THAT(caseErrorOf(limb, {dotted + "=1"}), Catch::Contains("--set") && Catch::Contains("nesting too deep"));
  CHECK_THAT(caseErrorOf(limb, {"title={" + dotted + "=1}"}), Catch::Contains("nesting too deep"));
  // Strings, comments and ordinary values are not nesting: dots in them do not count.
  CHECK(caseErrorOf("title = \"" + dotted + "\" # " + dotted + "\n" + limb) == "no error");
  CHECK(caseErrorOf(limb + "[tissues.skin.\"quoted\"]\n") != "no error");  // unknown key, not nesting
  CHECK_THAT(caseErrorOf(limb + "[tissues.skin.\"quoted\"]\n"), !Catch::Contains("nesting"));
}

TEST_CASE("rows 3 and 16: segment names are non-empty HDF5 path components", "[hardening]") {
  // Before: "" looped forever in the body builder (the root's empty parent matched it); "fore/limb" was stored
  // as /segments/fore/limb.
  CHECK_THAT(caseErrorOf(edited("name = \"leg\"", "name = \"\"")),
             Catch::Contains("case.toml:") && Catch::Contains("must not be empty"));
  for (const char* bad : {"fore/limb", "fore.limb", "a\\tb"}) {
    INFO(bad);
    CHECK_THAT(caseErrorOf(edited("name = \"leg\"", std::string("name = \"") + bad + "\"")),
               Catch::Contains("may not contain"));
  }
  CHECK(caseErrorOf(edited("name = \"leg\"", "name = \"fore limb-2\"")) == "no error");
}

TEST_CASE("row 4: the segment tree is at most 64 deep below its root - depth is computed in linear time",
          "[hardening]") {
  // Before: memory grew with the square of the depth (a chain 3 000 deep took 2.5 GB).
  CHECK(caseErrorOf(chain(65)) == "no error");  // depth 64
  const std::string message = caseErrorOf(chain(66));
  CHECK_THAT(message, Catch::Contains("segments.s65.parent") && Catch::Contains("more than 64 segments deep"));
  CHECK_THAT(caseErrorOf(chain(1001)), Catch::Contains("1001 segments; the limit is 1000"));
  // A cycle is still named as one.
  std::string cycle = chain(3);
  cycle.replace(cycle.find("name = \"s0\"\n"), 12, "name = \"s0\"\nparent = \"s2\"\n");
  CHECK_THAT(caseErrorOf(cycle), Catch::Contains("cycle: s0 -> s2 -> s1 -> s0"));
  // A 64-deep chain builds (the flow expressions are bounded by the depth).
  Body body(loadCaseFromString(chain(65), "chain.toml"));
  CHECK(body.segments().size() == 65);
}

TEST_CASE("rows 12 and 12b: output count and forced steps are checked against the duration", "[hardening]") {
  // Before: output_interval = 1e-4 s over 2 h (7.2e7 outputs, ~160 GB) was accepted; max_step = 1e-6 s failed
  // after 21 s with CVODE's "mxstep steps taken".
  CHECK_THAT(caseErrorOf(edited("duration = \"10 min\"\noutput_interval = \"1 min\"",
                                "duration = \"2 h\"\noutput_interval = \"1e-4 s\"")),
             Catch::Contains("run.output_interval") && Catch::Contains("7.2e+07 outputs") &&
                 Catch::Contains("limit is 10000000"));
  CHECK_THAT(caseErrorOf(edited("output_interval = \"1 min\"", "output_interval = \"1 min\"\nmax_step = \"1e-6 s\"")),
             Catch::Contains("run.max_step") && Catch::Contains("1000000 per output interval"));
  CHECK(caseErrorOf(edited("output_interval = \"1 min\"", "output_interval = \"1 min\"\nmax_step = \"1 s\"")) ==
        "no error");
  // The projected size of the results is a warning for large but allowed runs (5e6 outputs here).
  Body small(loadCaseFromString(limb, "case.toml"));
  CHECK(projectedOutputWarning(small).empty());
  Body many(loadCaseFromString(edited("duration = \"10 min\"\noutput_interval = \"1 min\"",
                                      "duration = \"5000 h\"\noutput_interval = \"3.6 s\""),
                               "case.toml"));
  CHECK_THAT(projectedOutputWarning(many), Catch::Contains("GB of results"));
}

TEST_CASE("row 13: a quoted number without a unit is refused for a dimensional key", "[hardening]") {
  // Before: length = "18" was taken as 18 m silently. A bare number stays SI (documented).
  CHECK_THAT(caseErrorOf(edited("length = \"10 cm\"", "length = \"18\"")),
             Catch::Contains("segments.leg.length") && Catch::Contains("needs a unit") && Catch::Contains("\"18 m\""));
  CHECK(loadCaseFromString(edited("length = \"10 cm\"", "length = 0.18"), "case.toml").segments[0].length == 0.18);
  CHECK_THAT(caseErrorOf(limb, {"environment.temperature=\"20\""}), Catch::Contains("needs a unit"));
  CHECK_THAT(caseErrorOf(limb, {"body.basal_metabolic_rate=\"45\""}), Catch::Contains("needs a unit"));
  CHECK(caseErrorOf(limb, {"body.basal_metabolic_rate=\"45 W\""}) == "no error");
}

TEST_CASE("row 14: the documented temperature limits -100 degC and 100 degC are accepted exactly", "[hardening]") {
  // Before: "-100 degC" converted to 173.14999999999998 K and was refused against the minimum 173.15 K.
  // -100 degC = 173.15 K by the definition of the Celsius scale (common practice, no source).
  Case cold = loadCaseFromString(edited("temperature = \"5 degC\"", "temperature = \"-100 degC\""), "case.toml");
  CHECK(cold.environment.temperature == 173.15);
  Case hot = loadCaseFromString(edited("temperature = \"5 degC\"", "temperature = \"100 degC\""), "case.toml");
  CHECK(hot.environment.temperature == 373.15);
  CHECK_THAT(caseErrorOf(edited("temperature = \"5 degC\"", "temperature = \"-100.001 degC\"")),
             Catch::Contains("out of range"));
  CHECK_THAT(caseErrorOf(edited("temperature = \"5 degC\"", "temperature = \"100.001 degC\"")),
             Catch::Contains("out of range"));
}

TEST_CASE("row 15: two events changing the same value at the same time are refused", "[hardening]") {
  const std::string twice = limb + R"toml(
[[events]]
at = "5 min"
environment = { temperature = "0 degC" }
[[events]]
at = "5 min"
environment = { temperature = "2 degC", speed = "3 m/s" }
)toml";
  CHECK_THAT(caseErrorOf(twice), Catch::Contains("events.0 and events.1 both change environment.temperature at 300 s"));
  // Different values at one time, or one value at two times, are fine.
  std::string apart = twice;
  apart.replace(apart.rfind("at = \"5 min\""), 12, "at = \"6 min\"");
  CHECK(caseErrorOf(apart) == "no error");
  const std::string physiology = limb + R"toml(
[[events]]
at = "5 min"
metabolism = { activity = 2 }
[[events]]
at = "5 min"
metabolism = { activity = 3 }
)toml";
  CHECK_THAT(caseErrorOf(physiology), Catch::Contains("both change metabolism.activity"));
}

TEST_CASE("row 17: --set on an array element and attach_tissue naming an absent layer", "[hardening]") {
  // Before: --set segments.leg=5 was reported as "segments.0: expected a table".
  const std::string message = caseErrorOf(limb, {"segments.leg=5"});
  CHECK_THAT(message, Catch::Contains("--set segments.leg") && Catch::Contains("is a table") &&
                          !Catch::Contains("segments.0"));
  // Before: an attach_tissue the parent lacks fell back silently to its innermost layer.
  const std::string child = R"toml(
[[segments]]
name = "toe"
parent = "leg"
shape = "cylinder"
length = "2 cm"
layers = [{ tissue = "muscle", thickness = "0.3 cm" }]
)toml";
  CHECK_THAT(caseErrorOf(limb + child + "attach_tissue = \"fat\"\n"),
             Catch::Contains("segments.toe.attach_tissue") && Catch::Contains("no such layer") &&
                 Catch::Contains("bone, muscle"));
  CHECK(caseErrorOf(limb + child + "attach_tissue = \"bone\"\n") == "no error");
  // The default (muscle) still falls back to the innermost layer when the parent has none (documented).
  CHECK(caseErrorOf(edited("tissue = \"muscle\", thickness = \"1 cm\"", "tissue = \"fat\", thickness = \"1 cm\"") +
                    child) == "no error");
}

TEST_CASE("rows 10 and 11: sweep values per axis and runs are at most a million", "[hardening]") {
  // Before: a count of 1e8 was accepted and ran out of memory (bad_alloc after 5.6 s with --list); 1e9 said
  // "the count must be at least 1".
  CHECK_THROWS_WITH(expandSpec("0 degC:10 degC:100000000", "--vary x"), Catch::Contains("at most 1000000"));
  CHECK_THROWS_WITH(expandSpec("0 degC:10 degC:1000000000", "--vary x"), Catch::Contains("at most 1000000"));
  CHECK_THROWS_WITH(expandSpec("1:2:0", "--vary x"), Catch::Contains("at least 1"));
  CHECK_THROWS_WITH(expandSpec("1:2:600000,1:2:600000", "--vary x"), Catch::Contains("more than 1000000 values"));
  CHECK(expandSpec("1:2:1000000", "--vary x").size() == 1000000);
}

TEST_CASE("row 5: a sweep axis of 6 000 values is written (values in a dataset) and resumes", "[hardening]") {
  // Before: more than about 5 000 values failed with "HDF5: cannot create attribute values" after every run.
  Scratch scratch;
  const std::string casePath = scratch.path("limb.toml");
  std::ofstream(casePath) << limb;
  SweepOptions o;
  o.casePath = casePath;
  o.vary = {"environment.temperature=0 degC:10 degC:6000"};
  o.metrics = {"body.core_temperature.final"};
  const SweepPlan plan = makeSweepPlan(o);
  REQUIRE(plan.runs == 6000);
  const std::string output = scratch.path("limb_sweep.h5");
  std::vector<RunRow> rows(plan.runs);
  for (std::size_t r = 0; r < rows.size(); ++r) rows[r].index = r;
  {
    // Two runs done and journaled, as by an interrupted session; resume reads them back.
    SweepJournal journal(sweepProgressPath(output), plan, false);
    for (std::size_t r : {std::size_t{0}, std::size_t{5999}}) {
      RunRow row = runOne(plan, r, nullptr);
      REQUIRE(row.status == RunStatus::Ok);
      journal.append(row);
    }
  }
  SweepJournal resumed(sweepProgressPath(output), plan, true);
  REQUIRE(resumed.earlierRows().size() == 2);
  for (RunRow& row : resumed.earlierRows()) rows[row.index] = row;
  writeSweepTable(plan, rows, SweepTableInfo{}, output);
  hid_t f = H5Fopen(output.c_str(), H5F_ACC_RDONLY, H5P_DEFAULT);
  REQUIRE(f >= 0);
  hid_t values = H5Dopen2(f, "/parameter_values/environment.temperature", H5P_DEFAULT);
  REQUIRE(values >= 0);
  hid_t space = H5Dget_space(values);
  CHECK(H5Sget_simple_extent_npoints(space) == 6000);
  H5Sclose(space);
  H5Dclose(values);
  H5Fclose(f);
  const std::vector<double> temperatures = common::readDataset(output, "/parameters/environment.temperature");
  REQUIRE(temperatures.size() == 6000);
  CHECK(temperatures.back() == Approx(10.0));
  const std::vector<double> core = common::readDataset(output, "/metrics/body.core_temperature.final");
  CHECK(std::isfinite(core.front()));
  CHECK(std::isfinite(core.back()));
  CHECK(std::isnan(core[1]));
  CHECK(scratch.temporaries() == 0);
}

TEST_CASE("row 17: a second sweep on the same output is refused while the first holds the progress file",
          "[hardening]") {
  // Before: two identical sweeps on one -o both ran in 2 of 20 tries.
  Scratch scratch;
  const std::string casePath = scratch.path("limb.toml");
  std::ofstream(casePath) << limb;
  SweepOptions o;
  o.casePath = casePath;
  o.vary = {"environment.temperature=0 degC,5 degC"};
  const SweepPlan plan = makeSweepPlan(o);
  const std::string progress = scratch.path("out.progress");
  {
    SweepJournal first(progress, plan, false);
    CHECK_THROWS_WITH(SweepJournal(progress, plan, false), Catch::Contains("locked by another sweep"));
    CHECK_THROWS_WITH(SweepJournal(progress, plan, true), Catch::Contains("locked by another sweep"));
  }
  // Released with the first journal: resuming works.
  SweepJournal again(progress, plan, true);
  CHECK(again.earlierRows().empty());
}

TEST_CASE("rows 6, 7 and 9: output paths are checked before any work", "[hardening]") {
  Scratch scratch;
  const std::string input = scratch.path("case.toml");
  std::ofstream(input) << limb;
  // Row 6: an input (also through another spelling of the same file).
  CHECK_THAT(outputErrorOf(input, {input}), Catch::Contains("is an input"));
  CHECK_THAT(outputErrorOf(scratch.path("./case.toml"), {input}), Catch::Contains("is an input"));
  CHECK_THAT(outputErrorOf(scratch.path("out.h5"), {input}, {input}), Catch::Contains("is an input"));
  // Row 7: devices and FIFOs.
  CHECK_THAT(outputErrorOf("/dev/null"), Catch::Contains("not a regular file"));
  const std::string fifo = scratch.path("fifo");
  REQUIRE(::mkfifo(fifo.c_str(), 0644) == 0);
  CHECK_THAT(outputErrorOf(fifo), Catch::Contains("not a regular file"));
  // Row 9: a missing folder, a folder, a name too long for the file system, a derived name too long.
  CHECK_THAT(outputErrorOf(scratch.path("missing/out.h5")), Catch::Contains("does not exist"));
  CHECK_THAT(outputErrorOf(scratch.dir.string()), Catch::Contains("is a folder"));
  CHECK_THAT(outputErrorOf(scratch.path(std::string(256, 'a'))), Catch::Contains("256 bytes long"));
  const std::string long251 = scratch.path(std::string(248, 'a') + ".h5");
  CHECK(outputErrorOf(long251) == "no error");
  CHECK_THAT(outputErrorOf(long251, {}, {incompleteOutputPath(long251)}),
             Catch::Contains("written beside it is 262 bytes long"));
  // A folder that takes no new files (skipped as root, who may write anywhere; tests/e2e_hardening.sh covers it
  // as another user).
  const std::string locked = scratch.path("locked");
  std::filesystem::create_directories(locked);
  ::chmod(locked.c_str(), 0555);
  if (::geteuid() != 0) CHECK_THAT(outputErrorOf(locked + "/out.h5"), Catch::Contains("cannot create files"));
  ::chmod(locked.c_str(), 0755);
  // A new file, or an earlier result, is fine; the probe leaves nothing behind.
  CHECK(outputErrorOf(scratch.path("out.h5"), {input}) == "no error");
  CHECK(scratch.temporaries() == 0);
}

TEST_CASE("row 9: temporary names are short whatever the output name, and removed unless committed",
          "[hardening]") {
  // Before: ".NAME.tmp-PID" exceeded 255 bytes for a 251-byte name.
  Scratch scratch;
  const std::string output = scratch.path(std::string(250, 'b') + ".h5");
  {
    TemporaryFile t(output);
    CHECK(std::filesystem::path(t.path()).filename().string().size() < 40);
    CHECK(std::filesystem::path(t.path()).parent_path() == scratch.dir);
    std::ofstream(t.path()) << "x";
    CHECK(scratch.temporaries() == 1);
  }
  CHECK(scratch.temporaries() == 0);
  TemporaryFile t(output);
  std::ofstream(t.path()) << "y";
  t.commit(output);
  CHECK(std::filesystem::exists(output));
  CHECK(scratch.temporaries() == 0);
}

TEST_CASE("row 8: a stop request ends the run at its next step with an incomplete result", "[hardening]") {
  Scratch scratch;
  Body body(loadCaseFromString(limb, "case.toml"));
  const std::string output = scratch.path("limb.h5");
  std::atomic<bool> stop{false};
  RunOptions options;
  options.output = output;
  options.quiet = true;
  options.stop = &stop;
  options.observer = [&](double t, std::span<const double>, const RunSummary&) {
    if (t >= 180.0) stop = true;  // as a signal handler would, during the fourth output interval
  };
  RunSummary summary = runTransient(body, options);
  CHECK(summary.stopped);
  CHECK_FALSE(summary.complete);
  CHECK(summary.finalTime == 180.0);  // the outputs so far, none at an intermediate time
  CHECK(summary.outputPath == incompleteOutputPath(output));
  CHECK_FALSE(std::filesystem::exists(output));
  const std::vector<double> time = common::readDataset(summary.outputPath, "/time");
  CHECK(time.back() == 180.0);
  CHECK(scratch.temporaries() == 0);
  // Steady: stopped during the pseudo-time relaxation.
  stop = true;
  options.observer = nullptr;
  RunSummary steady = runSteady(body, options);
  CHECK(steady.stopped);
  CHECK_FALSE(steady.complete);
  CHECK(scratch.temporaries() == 0);
  // Polling for a request leaves the run as it was: CVODE driven one step at a time takes the same steps.
  stop = false;
  RunOptions plain;
  plain.quiet = true;
  RunOptions polled = plain;
  polled.stop = &stop;
  RunSummary a = runTransient(body, plain), b = runTransient(body, polled);
  CHECK(a.statistics.steps == b.statistics.steps);
  CHECK(a.finalState == b.finalState);
}
