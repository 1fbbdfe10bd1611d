// Parameter sweeps: value specs, size series, metrics against single runs written to HDF5, threads, the
// progress file and failed runs.
#include <hdf5.h>
#include <unistd.h>

#include <catch2/catch.hpp>
#include <cmath>
#include <filesystem>
#include <fstream>
#include <numeric>
#include <optional>
#include <thread>
#include <variant>

#include "test_common.hpp"
#include "models/body.hpp"
#include "models/grid.hpp"
#include "drivers/sweep.hpp"
#include "drivers/sweep_engine.hpp"
#include "drivers/sweep_output.hpp"

using namespace thermorph;

namespace {

const std::string quadruped = std::string(THERMORPH_SOURCE_DIR) + "/tests/data/quadruped_coarse.toml";

//! A scratch folder removed at the end of the test.
struct Scratch {
  std::filesystem::path dir;
  Scratch() {
    dir = std::filesystem::temp_directory_path() / ("thermorph-sweep-" + std::to_string(::getpid()) + "-" +
                                                     std::to_string(reinterpret_cast<std::uintptr_t>(this)));
    std::filesystem::create_directories(dir);
  }
  ~Scratch() { std::filesystem::remove_all(dir); }
  std::string path(const std::string& name) const { return (dir / name).string(); }
};


double column(const SweepPlan& plan, const RunRow& row, const std::string& name) {
  for (std::size_t c = 0; c < plan.columns.size(); ++c)
    if (plan.columns[c].name == name) return row.metrics[c];
  FAIL("no metric column " << name);
  return 0.0;
}

std::vector<RunRow> runAll(const SweepPlan& plan, int jobs) {
  std::vector<std::size_t> todo(plan.runs);
  std::iota(todo.begin(), todo.end(), std::size_t{0});
  std::vector<RunRow> rows(plan.runs);
  std::atomic<bool> stop{false};
  runLocal(plan, todo, jobs, stop, [&](RunRow&& r) { rows[r.index] = std::move(r); }, [] {});
  return rows;
}

}  // namespace

TEST_CASE("sweep specs: linear, geometric and list values", "[sweep]") {
  // Evenly spaced and geometric sequences with both ends included, as numpy.linspace / numpy.logspace define
  // them (common practice, no source).
  std::vector<std::string> linear = expandSpec("2 cm:12 cm:11", "test");
  REQUIRE(linear.size() == 11);
  CHECK(linear.front() == "2 cm");
  CHECK(linear[1] == "3 cm");
  CHECK(linear[5] == "7 cm");
  CHECK(linear.back() == "12 cm");
  std::vector<std::string> geometric = expandSpec("log:1 mL/min:100 mL/min:5", "test");
  REQUIRE(geometric.size() == 5);
  CHECK(geometric[1] == "3.16227766017 mL/min");  // 10^0.5
  CHECK(geometric[2] == "10 mL/min");
  CHECK(geometric.back() == "100 mL/min");
  // Ends in different but convertible units: the values are in the start's unit.
  std::vector<std::string> mixed = expandSpec("20 mm:4 cm:3", "test");
  CHECK(mixed[1] == "30 mm");
  CHECK(mixed[2] == "40 mm");
  std::vector<std::string> list = expandSpec("20degC, 40degC", "test");
  REQUIRE(list.size() == 2);
  CHECK(list[1] == "40degC");
  CHECK_THROWS_WITH(expandSpec("2 cm:12 cm", "--vary x"), Catch::Contains("a range has a start, an end and a count"));
  CHECK_THROWS_WITH(expandSpec("2 cm:12 kg:3", "--vary x"), Catch::Contains("not convertible"));
  CHECK_THROWS_WITH(expandSpec("log:0 cm:1 cm:3", "--vary x"), Catch::Contains("positive ends"));
  CHECK_THROWS_WITH(expandSpec("1 cm:2 cm:two", "--vary x"), Catch::Contains("not a whole number"));
}

TEST_CASE("sweep plan: grid order, zip, bad keys", "[sweep]") {
  SweepOptions o;
  o.casePath = quadruped;
  o.vary = {"segments.ears.length=4 cm:8 cm:3", "environment.temperature=20degC,40degC"};
  SweepPlan grid = makeSweepPlan(o);
  CHECK(grid.runs == 6);
  CHECK(grid.axes[1].units == "degC");
  CHECK(grid.axes[1].numbers[1] == 40.0);
  // The last axis varies fastest.
  CHECK(grid.keyOverrides(3) == std::vector<std::string>{"segments.ears.length=6 cm", "environment.temperature=40degC"});
  o.zip = true;
  CHECK_THROWS_WITH(makeSweepPlan(o), Catch::Contains("same number of values"));
  o.vary[1] = "environment.temperature=10degC:30degC:3";
  CHECK(makeSweepPlan(o).runs == 3);
  o.zip = false;
  o.vary = {"segments.ear.length=4 cm:8 cm:3"};
  CHECK_THROWS_WITH(makeSweepPlan(o), Catch::Contains("no segment \"ear\"") && Catch::Contains("ears"));
  o.vary = {"environment.temprature=1 K:2 K:2"};
  CHECK_THROWS_WITH(makeSweepPlan(o), Catch::Contains("no such case key"));
  o.vary = {"environment.temperature=20degC"};
  o.metrics = {"body.heat_flow.wind"};
  CHECK_THROWS_WITH(makeSweepPlan(o), Catch::Contains("matches no metric"));
}

TEST_CASE("sweep plan: [sweep] in the case gives metric and window defaults - the command line wins", "[sweep]") {
  // Issue: metrics "chosen on the command line or in the case" (common practice, no source).
  const std::string path = (std::filesystem::temp_directory_path() / "thermorph_sweep_defaults.toml").string();
  {
    std::ifstream in(quadruped);
    std::ofstream out(path);
    out << in.rdbuf() << "\n[sweep]\nmetrics = \"body.core_temperature.max, segments.ears.heat_flow.convection\"\n"
        << "window = \"30 min:1 h\"\n";
  }
  SweepOptions o;
  o.casePath = path;
  o.vary = {"segments.ears.length=4 cm,8 cm"};
  SweepPlan fromCase = makeSweepPlan(o);
  REQUIRE(fromCase.columns.size() == 2);
  CHECK(fromCase.columns[0].name == "body.core_temperature.max");
  CHECK(fromCase.window.start == 1800.0);
  o.metrics = {"body.heat_flow.metabolism"};
  SweepPlan fromCommandLine = makeSweepPlan(o);
  REQUIRE(fromCommandLine.columns.size() == 1);
  CHECK(fromCommandLine.columns[0].name == "body.heat_flow.metabolism");
  std::filesystem::remove(path);
}

TEST_CASE("sweep: metrics reproduce single runs bit for bit", "[sweep]") {
  Scratch scratch;
  SweepOptions o;
  o.casePath = quadruped;
  o.vary = {"segments.ears.length=3 cm,7.5 cm,12 cm"};
  o.metrics = {"time_to:body.mean_skin_temperature<35.5degC"};
  const SweepPlan plan = makeSweepPlan(o);
  const std::vector<RunRow> rows = runAll(plan, 2);
  const char* lengths[] = {"3 cm", "7.5 cm", "12 cm"};
  for (std::size_t r = 0; r < plan.runs; ++r) {
    INFO("run " << r);
    REQUIRE(rows[r].status == RunStatus::Ok);
    // The same case with the same override, run alone and written to a results file by the recorder.
    Body body(loadCase(quadruped, {std::string("segments.ears.length=") + lengths[r]}));
    RunOptions options;
    options.output = scratch.path("single.h5");
    options.quiet = true;
    RunSummary summary = runTransient(body, options);
    REQUIRE(summary.complete);
    const std::string h5 = options.output;
    const std::vector<double> time = common::readDataset(h5, "/time");
    const double span = time.back() - time.front();
    for (const char* q : {"core_temperature", "blood_temperature", "mean_skin_temperature"}) {
      const std::vector<double> series = common::readDataset(h5, std::string("/body/") + q);
      const std::string name = std::string("body.") + q;
      CHECK(column(plan, rows[r], name + ".final") == series.back());
      CHECK(column(plan, rows[r], name + ".min") == *std::min_element(series.begin(), series.end()));
      CHECK(column(plan, rows[r], name + ".max") == *std::max_element(series.begin(), series.end()));
    }
    for (const char* ch : {"metabolism", "convection", "radiation"}) {
      // Mean over the run from the cumulative channel energy the integrator carries.
      const std::vector<double> energy = common::readDataset(h5, std::string("/body/cumulative_heat/") + ch);
      CHECK(column(plan, rows[r], std::string("body.heat_flow.") + ch) == (energy.back() - energy.front()) / span);
    }
    // A segment's mean from its cumulative channel energy and its storage from its stored-heat change, both as
    // the results file stores them.
    const std::vector<double> ear = common::readDataset(h5, "/segments/ears/cumulative_heat/convection");
    CHECK(column(plan, rows[r], "segments.ears.heat_flow.convection") == (ear.back() - ear.front()) / span);
    const std::vector<double> stored = common::readDataset(h5, "/segments/ears/cumulative_heat/storage");
    CHECK(column(plan, rows[r], "segments.ears.heat_flow.storage") == (stored.back() - stored.front()) / span);
    // Threshold time: linear interpolation of the stored skin temperature between outputs (the skin cools
    // from 37 degC in 15 degC air).
    const std::vector<double> skin = common::readDataset(h5, "/body/mean_skin_temperature");
    double crossing = std::nan("");
    for (std::size_t k = 1; k < skin.size() && std::isnan(crossing); ++k)
      if (skin[k] < 35.5 && skin[k - 1] >= 35.5)
        crossing = time[k - 1] + (35.5 - skin[k - 1]) / (skin[k] - skin[k - 1]) * (time[k] - time[k - 1]);
    REQUIRE(!std::isnan(crossing));
    CHECK(column(plan, rows[r], "time_to.body.mean_skin_temperature<35.5degC") == Approx(crossing).epsilon(1e-12));
    // The tissue mean of a segment from the stored field (degC there, so equal to round-off only).
    const std::vector<double> field = common::readDataset(h5, "/segments/ears/temperature");
    const std::vector<double> volume = common::readDataset(h5, "/segments/ears/volume");
    const SegmentMesh& m = body.segments().back();
    const std::size_t cells = volume.size(), last = field.size() - cells;
    double sum = 0.0, v = 0.0;
    for (int iz = 0; iz < m.nz; ++iz)
      for (int ir = 0; ir <= m.skinCell; ++ir) {
        std::size_t i = static_cast<std::size_t>(iz * m.nr + ir);
        sum += volume[i] * field[last + i];
        v += volume[i];
      }
    CHECK(column(plan, rows[r], "segments.ears.mean_temperature.final") == Approx(sum / v).epsilon(1e-13));
  }
  // First law over the run: the channel means add up to the mean rate of storage (to round-off).
  double channels = 0.0;
  for (const MetricColumn& c : plan.columns)
    if (c.name.rfind("body.heat_flow.", 0) == 0 && c.name != "body.heat_flow.storage")
      channels += column(plan, rows[0], c.name);
  CHECK(channels == Approx(column(plan, rows[0], "body.heat_flow.storage")).margin(1e-9));
}

TEST_CASE("sweep: results identical on one and two threads, a failed run recorded", "[sweep]") {
  SweepOptions o;
  o.casePath = quadruped;
  o.vary = {"segments.ears.length=-2 cm,4 cm,8 cm", "environment.speed=0 m/s,2 m/s"};
  o.metrics = {"body.heat_flow", "segments.ears"};
  const SweepPlan plan = makeSweepPlan(o);
  const std::vector<RunRow> one = runAll(plan, 1), two = runAll(plan, 2);
  for (std::size_t r = 0; r < plan.runs; ++r) {
    INFO("run " << r);
    CHECK(one[r].status == two[r].status);
    CHECK(one[r].error == two[r].error);
    for (std::size_t c = 0; c < plan.columns.size(); ++c)
      if (!std::isnan(one[r].metrics[c])) CHECK(one[r].metrics[c] == two[r].metrics[c]);
  }
  // A negative length inside the grid: both of its runs fail with the loader's message, the others complete.
  for (std::size_t r : {0u, 1u}) {
    CHECK(one[r].status == RunStatus::Failed);
    CHECK_THAT(one[r].error, Catch::Contains("segments.ears.length") && Catch::Contains("out of range"));
  }
  for (std::size_t r = 2; r < plan.runs; ++r) CHECK(one[r].status == RunStatus::Ok);
}

TEST_CASE("sweep: size series scale area with the square and volume with the cube", "[sweep]") {
  // Geometric similarity: areas scale with f^2 and volumes with f^3 (the square-cube law; common practice,
  // no source). Exposed areas of attached segments scale too, because the covered sections do.
  const Case base = loadCase(quadruped);
  const Body reference(base);
  auto totals = [](const Body& b) {
    double area = 0.0, volume = 0.0;
    for (const SegmentMesh& m : b.segments()) {
      area += m.weight * m.area;
      volume += m.weight * m.tissueVolume;
    }
    return std::pair{area, volume};
  };
  const auto [area0, volume0] = totals(reference);
  for (double f : {0.5, 1.7, 3.0}) {
    INFO("factor " << f);
    const Body scaled(loadCase(quadruped, scaleOverrides(base, "body", f)));
    const auto [area, volume] = totals(scaled);
    CHECK(area / area0 == Approx(f * f).epsilon(1e-12));
    CHECK(volume / volume0 == Approx(f * f * f).epsilon(1e-12));
  }
  // One segment: the ears alone change; the body's other volumes stay.
  const Body ears(loadCase(quadruped, scaleOverrides(base, "ears", 2.0)));
  for (std::size_t g = 0; g < ears.segments().size(); ++g) {
    const SegmentMesh &a = reference.segments()[g], &b = ears.segments()[g];
    if (a.name == "ears") {
      CHECK(b.area / a.area == Approx(4.0).epsilon(1e-12));
      CHECK(b.tissueVolume / a.tissueVolume == Approx(8.0).epsilon(1e-12));
    } else {
      CHECK(b.tissueVolume == a.tissueVolume);
    }
  }
  CHECK_THROWS_WITH(scaleOverrides(base, "ear", 2.0), Catch::Contains("no segment \"ear\""));
}

TEST_CASE("sweep progress file: exact round trip, cut-short line ignored, other sweep refused", "[sweep]") {
  Scratch scratch;
  SweepOptions o;
  o.casePath = quadruped;
  o.vary = {"environment.temperature=10degC,20degC,30degC"};
  o.metrics = {"body.core_temperature"};
  const SweepPlan plan = makeSweepPlan(o);
  const std::string path = scratch.path("t.progress");
  RunRow a;
  a.index = 2;
  a.status = RunStatus::Ok;
  a.metrics = {0.1, 1.0 / 3.0, -2.5e-300, std::nan("")};
  a.overrides = "environment.temperature=30degC";
  a.steps = 42;
  RunRow b;
  b.index = 0;
  b.status = RunStatus::Failed;
  b.metrics.assign(4, std::nan(""));
  b.error = "file:1:2: a message\twith a tab\nand a newline \\ and a backslash";
  {
    SweepJournal journal(path, plan, false);
    journal.append(a);
    journal.append(b);
  }
  CHECK_THROWS_WITH(SweepJournal(path, plan, false), Catch::Contains("--resume"));
  {
    std::ofstream cut(path, std::ios::app);
    cut << "1\tok\t0.1\t0.2";  // a kill in the middle of a line
  }
  {  // (the journal holds a lock on the file while it lives)
    SweepJournal again(path, plan, true);
    REQUIRE(again.earlierRows().size() == 2);
    const RunRow& b2 = again.earlierRows()[0];
    const RunRow& a2 = again.earlierRows()[1];
    CHECK(b2.error == b.error);
    CHECK(a2.index == 2);
    CHECK(a2.steps == 42);
    CHECK(a2.metrics[1] == 1.0 / 3.0);
    CHECK(a2.metrics[2] == -2.5e-300);
    CHECK(std::isnan(a2.metrics[3]));
  }
  SweepOptions other = o;
  other.vary = {"environment.temperature=10degC,20degC,31degC"};
  CHECK_THROWS_WITH(SweepJournal(path, makeSweepPlan(other), true), Catch::Contains("different sweep"));
}

TEST_CASE("sweep: runs whose warnings differ only in numbers share one summary line", "[sweep]") {
  // The pattern hides numbers (signs and exponents included) and nothing else (common practice, no source).
  const std::string a = "grid: controller shivering: its output 0.403 at t = 0 s (magnification 1.8); tolerance 9.9e-3";
  const std::string b = "grid: controller shivering: its output 0.39 at t = 12 s (magnification 1.82); tolerance 1E+01";
  CHECK(warningPattern(a) == "grid: controller shivering: its output # at t = # s (magnification #); tolerance #");
  CHECK(warningPattern(a) == warningPattern(b));
  CHECK(warningPattern("segment rod: minimum -8.1 degC at axial 3") == "segment rod: minimum # degC at axial #");
  CHECK(warningPattern("grid: segment legs") != warningPattern("grid: segment feet"));
  CHECK(warningPattern("version 2.x, Q10 rates.") == "version #.x, Q# rates.");
}

TEST_CASE("sweep: a window end between outputs that bracket a step of the timeline warns, and is off", "[sweep]") {
  // A cold front at 5 min; outputs every 2 min put 300 s between the outputs at 240 s and 360 s. Outputs every
  // minute give the same CVODE steps (outputs are dense-output interpolations, README "Results"), so there the
  // window's metrics are the exact energy differences; the 2-min sweep interpolates across the jump of the flows.
  auto plan = [](const char* interval) {
    SweepOptions o;
    o.casePath = quadruped;
    o.overrides = {"run.duration=20 min", std::string("run.output_interval=") + interval,
                   "events=[{ at = \"5 min\", environment = { temperature = \"-5 degC\", speed = \"4 m/s\" } }]"};
    o.vary = {"segments.ears.length=5 cm,10 cm"};
    o.metrics = {"body.heat_flow.convection"};
    o.window = "5 min:15 min";
    return makeSweepPlan(o);
  };
  const SweepPlan coarse = plan("2 min"), fine = plan("1 min");
  const std::vector<RunRow> a = runAll(coarse, 1), b = runAll(fine, 1);
  auto windowWarning = [](const RunRow& row) {
    return std::count_if(row.warnings.begin(), row.warnings.end(), [](const std::string& w) {
      return w.find("across a step of the timeline at 300 s") != std::string::npos;
    });
  };
  for (std::size_t r = 0; r < 2; ++r) {
    REQUIRE(a[r].status == RunStatus::Ok);
    REQUIRE(b[r].status == RunStatus::Ok);
    CHECK(windowWarning(a[r]) == 1);
    CHECK(windowWarning(b[r]) == 0);
    const double exact = column(fine, b[r], "body.heat_flow.convection");
    const double interpolated = column(coarse, a[r], "body.heat_flow.convection");
    INFO("exact " << exact << " W, interpolated across the step " << interpolated << " W");
    CHECK(std::abs(interpolated - exact) > 1e-3 * std::abs(exact));  // the warning is not idle
  }
}

TEST_CASE("sweep: --window takes START:END or report.py's START,END - anything else names the option", "[sweep]") {
  // Both separators give the same seconds (SI Brochure 2019, Table 8: 1 min = 60 s, 1 h = 3600 s).
  const MetricWindow colon = parseMetricWindow("30 min:1 h"), comma = parseMetricWindow("30min,1h");
  CHECK(colon.start == 1800.0);
  CHECK(colon.end == 3600.0);
  CHECK(comma.start == colon.start);
  CHECK(comma.end == colon.end);
  CHECK(parseMetricWindow("10 min:").end == -1.0);  // to the end of the run
  CHECK(parseMetricWindow("600,").end == -1.0);
  for (const char* bad : {"30 min", ":1 h", "1:2:3", "1,2:3", "soon:1 h"})
    CHECK_THROWS_WITH(parseMetricWindow(bad), Catch::Contains("--window"));
}

namespace {

//! The case of `overrides` loaded on a thread of its own: its own parse of the file (the per-thread tree of
//! loadCaseFromString and every per-thread cache start empty there), as a single `run --set` loads it. The error
//! message instead when the load fails.
std::variant<Case, std::string> freshLoad(const std::string& path, const std::vector<std::string>& overrides) {
  std::variant<Case, std::string> out;
  std::thread([&] {
    try {
      out = loadCase(path, overrides);
    } catch (const CaseError& e) {
      out = std::string(e.what());
    }
  }).join();
  return out;
}

//! Everything of two loads that a run or its row reads, compared exactly.
void requireSameCase(const Case& a, const Case& b) {
  CHECK(resolvedCaseToml(a) == resolvedCaseToml(b));
  CHECK(a.warnings == b.warnings);
  CHECK(a.timelineWarnings == b.timelineWarnings);
  REQUIRE(a.given.size() == b.given.size());
  for (auto i = a.given.begin(), j = b.given.begin(); i != a.given.end(); ++i, ++j) {
    CHECK(i->first == j->first);
    CHECK(i->second.line == j->second.line);
    CHECK(i->second.column == j->second.column);
  }
  REQUIRE(a.segments.size() == b.segments.size());
  for (std::size_t g = 0; g < a.segments.size(); ++g) {
    const SegmentSpec &s = a.segments[g], &t = b.segments[g];
    CHECK(s.length == t.length);
    CHECK(s.axialCells == t.axialCells);
    CHECK(s.axialGrading == t.axialGrading);
    REQUIRE(s.layers.size() == t.layers.size());
    for (std::size_t i = 0; i < s.layers.size(); ++i) {
      CHECK(s.layers[i].thickness == t.layers[i].thickness);
      CHECK(s.layers[i].cells == t.layers[i].cells);
      CHECK(s.layers[i].grading == t.layers[i].grading);
    }
  }
  // The grid estimate (the cross-section shares, the counts it asks for), bit for bit.
  REQUIRE(a.gridEstimates);
  REQUIRE(b.gridEstimates);
  REQUIRE(a.gridEstimates->size() == b.gridEstimates->size());
  for (std::size_t g = 0; g < a.gridEstimates->size(); ++g) {
    const SegmentGridEstimate &e = (*a.gridEstimates)[g], &f = (*b.gridEstimates)[g];
    CHECK(e.layerWeight == f.layerWeight);
    CHECK(e.layerStorageHeat == f.layerStorageHeat);
    CHECK(e.layerNeeded == f.layerNeeded);
    CHECK(e.surfaceConductance == f.surfaceConductance);
    CHECK(e.axialNeeded == f.axialNeeded);
    CHECK(e.decayLength == f.decayLength);
  }
  // The bodies built from them: the same network.
  const Body x(a), y(b);
  CHECK(x.network().nodes.size() == y.network().nodes.size());
  CHECK(x.warnings(false) == y.warnings(false));
}

}  // namespace

TEST_CASE("sweep: each run's case equals a fresh load of the case with the run's overrides", "[sweep]") {
  // A sweep loads the case once per run on the same thread, reusing the parsed tree (its overrides applied and put
  // back), the grid estimate's scratch arrays and the schema defaults read before (models/case.cpp,
  // models/case_reader.hpp, DEVELOPERS.md "Per-run CPU in sweeps, seventeenth round"). The reference is the plain
  // load path: the file parsed on a thread of its own with the run's overrides (what `run --set` does). The runs
  // are loaded forwards and then backwards, so each follows loads with other overrides; the grid comes once from
  // the case's cell counts and once from the automatic grid (the counts left out), and one value is out of range
  // (the same message both ways).
  Scratch scratch;
  std::string automatic;
  {
    std::ifstream in(quadruped);
    for (std::string line; std::getline(in, line);)
      if (line.rfind("axial_cells", 0) != 0) automatic += line + "\n";
  }
  const std::string automaticPath = scratch.path("quadruped_automatic_axial.toml");
  std::ofstream(automaticPath) << automatic;
  for (const std::string& path : {quadruped, automaticPath}) {
    INFO(path);
    SweepOptions o;
    o.casePath = path;
    o.vary = {"environment.temperature=5 degC,25 degC,900 degC", "segments.ears.layers.1.thickness=1 mm,1.5 mm"};
    o.scale = {"body=0.9,1.1"};
    o.metrics = {"body.core_temperature.final"};
    const SweepPlan plan = makeSweepPlan(o);
    REQUIRE(plan.runs == 12);
    std::size_t failed = 0;
    for (int pass = 0; pass < 2; ++pass)
      for (std::size_t k = 0; k < plan.runs; ++k) {
        const std::size_t r = pass == 0 ? k : plan.runs - 1 - k;
        INFO("run " << r);
        std::optional<std::string> error;
        Case c;
        std::vector<std::string> overrides;
        try {
          overrides = runOverrides(plan, r, &c);
        } catch (const CaseError& e) {
          error = e.what();
        }
        if (error) {
          // The size series' overrides come from the loaded case: a run that fails to load has none.
          ++failed;
          const auto fresh = freshLoad(path, plan.keyOverrides(r));
          REQUIRE(std::holds_alternative<std::string>(fresh));
          CHECK(std::get<std::string>(fresh) == *error);
          CHECK(error->find("environment.temperature") != std::string::npos);
          continue;
        }
        CHECK(overrides.size() > plan.keyOverrides(r).size());  // the size factors' overrides
        const auto fresh = freshLoad(path, overrides);
        REQUIRE(std::holds_alternative<Case>(fresh));
        requireSameCase(c, std::get<Case>(fresh));
      }
    CHECK(failed == 2 * 4);  // 900 degC: 4 runs, loaded twice
  }
}
