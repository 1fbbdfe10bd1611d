// The grid error of a controller output, estimated after the run (drivers/record_control_grid.hpp), against the
// exact steady state of a body whose heat flows have a closed form: a muscle core with uniform generation in a fat
// shell, cooled by a fixed film coefficient (Incropera et al. 2007, eqs. 3.28 and 3.53: shell resistance
// ln(r2/r1)/(2 pi k L), uniform generation T(r) = T_1 + q (r1^2 - r^2)/(4 k)), with proportional thermogenesis
// u = g (T_set - T_core) of max_power P in the muscle. The core temperature is the mean of the muscle disc:
//   T_core = T_inf + Q R,  R = 1/(h A) + ln(r2/r1)/(2 pi k_f L) + 1/(8 pi k_m L),  Q = Q_basal + u P,
// so the steady output solves u (1 + g P R) = g (T_set - T_inf - Q_basal R) exactly (energy balance; the mean of
// (r1^2 - r^2) over the disc is r1^2/2). Values invented for the test, illustrative.
#include <unistd.h>

#include <catch2/catch.hpp>

#include <algorithm>
#include <cmath>
#include <cstdio>
#include <cstring>
#include <filesystem>
#include <fstream>
#include <numbers>
#include <span>
#include <string>
#include <vector>

#include "drivers/record_control_grid.hpp"
#include "drivers/sweep.hpp"
#include "test_steady_watch.hpp"
#include "test_support.hpp"

using namespace thermorph;
using namespace thermorph::testing;

namespace {

using std::numbers::pi;

constexpr double r1 = 0.02, r2 = 0.03, length = 0.2;  // [m]
constexpr double kMuscle = 0.5, kFat = 0.2;           // [W/(m K)]
constexpr double basalHeat = 10000.0;                  // [W/m3] in the muscle
constexpr double film = 10.0;                          // [W/(m2 K)]
constexpr double fluid = 293.15, setPoint = 310.15;    // [K]
constexpr double gain = 0.5, maxPower = 20.0;          // [1/K], [W]

//! The case: `cells` ("" for automatic) on both layers, and extra run keys.
std::string thermogenesisCase(const std::string& muscleCells, const std::string& fatCells, const std::string& run = "") {
  auto cells = [](const std::string& n) { return n.empty() ? std::string() : ", cells = " + n; };
  return "title = \"Core and shell with thermogenesis (illustrative)\"\n[run]\ninitial_temperature = 310.15\n" + run +
         "\n[control.shivering]\nset_point = " + num(setPoint) + "\ngain = " + num(gain) + "\nmax_power = " +
         num(maxPower) + "\n[tissues.core]\nrole = \"muscle\"\nconductivity = " + num(kMuscle) +
         "\ndensity = 1000\nspecific_heat = 3500\nmetabolic_heat = " + num(basalHeat) +
         "\nperfusion = 0\nq10 = 1\n[tissues.shell]\nrole = \"fat\"\nconductivity = " + num(kFat) +
         "\ndensity = 900\nspecific_heat = 2300\nmetabolic_heat = 0\nperfusion = 0\nq10 = 1\n[[segments]]\nname = "
         "\"body\"\nshape = \"cylinder\"\nlength = " + num(length) +
         "\naxial_cells = 1\nsurface = { ends = \"insulated\" }\nlayers = [{ tissue = \"core\", thickness = " + num(r1) +
         cells(muscleCells) + " }, { tissue = \"shell\", thickness = " + num(r2 - r1) + cells(fatCells) +
         " }]\n[environment]\ntemperature = " + num(fluid) + "\nconvection = " + num(film) + "\n";
}

//! The exact steady output u (Incropera et al. 2007, eqs. 3.28, 3.53; energy balance above).
double exactOutput() {
  const double area = 2.0 * pi * r2 * length;
  const double R = 1.0 / (film * area) + std::log(r2 / r1) / (2.0 * pi * kFat * length) + 1.0 / (8.0 * pi * kMuscle * length);
  const double basal = basalHeat * pi * r1 * r1 * length;
  return gain * (setPoint - fluid - basal * R) / (1.0 + gain * maxPower * R);
}

struct Measured {
  double output = 0.0;    //!< u of the run
  double estimate = 0.0;  //!< estimated relative error of u
  double magnification = 0.0;
  std::vector<std::string> warnings;
};

Measured steadyOutput(const std::string& toml) {
  const SteadyWatch r = steadyWatch(toml, "core.toml");
  REQUIRE(r.run.controls.size() == 1);
  REQUIRE(r.active);
  REQUIRE(r.estimates.size() == 1);
  REQUIRE(r.estimates[0].observed);
  return {r.run.controls[0], r.estimates[0].error, r.estimates[0].magnification, r.run.runWarnings};
}

}  // namespace

TEST_CASE("The estimated grid error of a thermogenesis output stays above its error against the exact steady state",
          "[control_grid]") {
  const double exact = exactOutput();
  REQUIRE(exact > 0.02);
  REQUIRE(exact < 0.2);  // unclamped, and balancing a loss larger than itself (the magnification)
  struct Grid {
    std::string muscle, fat;
  };
  std::vector<double> measured;
  for (const Grid& g : {Grid{"1", "1"}, Grid{"2", "1"}, Grid{"2", "2"}, Grid{"4", "4"}, Grid{"", ""}}) {
    const Measured m = steadyOutput(thermogenesisCase(g.muscle, g.fat));
    const double error = std::abs(m.output - exact) / exact;
    measured.push_back(error);
    std::printf("[control_grid] cells %s+%s: u = %.6f (exact %.6f): error %.3e, estimate %.3e (magnification %.3g)\n",
                g.muscle.empty() ? "auto" : g.muscle.c_str(), g.fat.empty() ? "auto" : g.fat.c_str(), m.output, exact,
                error, m.estimate, m.magnification);
    INFO("cells " << g.muscle << "+" << g.fat << ": u " << m.output << " exact " << exact);
    // The estimate stays above the measured error ...
    CHECK(m.estimate >= error);
    // ... and is not empty talk: within a factor 30 of it wherever the error is visible at all.
    if (error > 1e-4) CHECK(m.estimate <= 30.0 * error);
    // It sees that the output balances more than itself: the loss Q = Q_basal + u P over the shivering u P.
    const double basal = basalHeat * pi * r1 * r1 * length;
    CHECK(m.magnification >= 0.99 * (basal + exact * maxPower) / (exact * maxPower) * (1.0 - 1e-2));
  }
  // The error falls with refinement (second order: 1+1 -> 2+2 cells about 4x).
  CHECK(measured[2] < 0.5 * measured[0]);
}

TEST_CASE("A controller output whose estimated grid error exceeds 1 % is a warning of the run - a tighter "
          "run.grid_tolerance meets it",
          "[control_grid]") {
  const Measured coarse = steadyOutput(thermogenesisCase("1", "1"));
  REQUIRE(coarse.estimate > 0.01);
  bool found = false;
  for (const std::string& w : coarse.warnings) found = found || w.rfind("grid: controller shivering:", 0) == 0;
  CHECK(found);
  // Automatic cells: the default tolerance, then the one the warning names.
  const Measured automatic = steadyOutput(thermogenesisCase("", ""));
  const Measured tight = steadyOutput(thermogenesisCase("", "", "grid_tolerance = 0.002"));
  std::printf("[control_grid] automatic cells: estimate %.3e at grid_tolerance 0.01, %.3e at 0.002\n", automatic.estimate,
              tight.estimate);
  CHECK(tight.estimate < automatic.estimate);
  CHECK(tight.estimate <= 0.01);
  for (const std::string& w : tight.warnings) CHECK(w.find("grid: controller") == std::string::npos);
}

namespace {

//! A furred trunk cooling from a uniform 37 degC in air at -40 degC, with shivering (the trunk of
//! cases/cold_feet_demo.toml under its 3 cm of fur, illustrative; built-in tissues): the shivering starts after
//! 100 min, as the core crosses its set point. `extra`: more keys of [run] and of the trunk's coat.
std::string furredTrunk(const std::string& run, const std::string& coat = "") {
  return "title = \"Furred trunk cooling from a uniform start (illustrative)\"\n[run]\nduration = \"2 h\"\n"
         "output_interval = \"2 min\"\ninitial_temperature = \"37 degC\"\ngrid_tolerance = 0.004\n" + run +
         "\n[body]\nbasal_metabolic_rate = \"kleiber\"\n[control.shivering]\nset_point = \"36.8 degC\"\n"
         "gain = \"0.5 1/K\"\ntime_constant = \"2 min\"\n[[segments]]\nname = \"trunk\"\nshape = \"cylinder\"\n"
         "length = \"25 cm\"\nlayers = [\n  { tissue = \"viscera\", thickness = \"3.5 cm\" },\n"
         "  { tissue = \"muscle\", thickness = \"1.5 cm\" },\n  { tissue = \"fat\", thickness = \"0.3 cm\" },\n"
         "  { tissue = \"skin\", thickness = \"0.2 cm\" },\n]\ncoat = { material = \"fur\", thickness = \"3 cm\"" + coat +
         " }\nsurface = { ends = \"insulated\" }\n[environment]\nmedium = \"air\"\ntemperature = \"-40 degC\"\n"
         "speed = \"1 m/s\"\nrelative_humidity = \"70 %\"\n";
}

struct Trajectory {
  std::vector<double> t, u;              //!< outputs [s], shivering [1]
  ControlGridWatch::Estimate estimate;   //!< the check's, fed every output as the Recorder does
  std::vector<std::string> warnings;     //!< the run's
};

Trajectory transientOutput(const std::string& toml) {
  Body body(loadCaseFromString(toml, "furred.toml"));
  NetworkSystem system(body.network(), NetworkSystem::Mode::Transient);
  ControlGridWatch watch(body, system);
  REQUIRE(watch.active());
  Trajectory out;
  RunOptions options = silentRun();
  options.observer = [&](double t, std::span<const double> temperatures, const RunSummary& s) {
    std::vector<double> y(temperatures.begin(), temperatures.end());
    y.insert(y.end(), s.controls.begin(), s.controls.end());
    watch.observe(t, y, s.flows);
    out.t.push_back(t);
    out.u.push_back(s.controls.at(0));
  };
  const RunSummary s = runTransient(body, options);
  REQUIRE(s.complete);
  REQUIRE(watch.estimates().size() == 1);
  out.estimate = watch.estimates()[0];
  out.warnings = s.runWarnings;
  return out;
}

//! Largest error of the 1x output against the 4x one (run.grid_refinement = 4, the reference) over the outputs
//! where the reference is open, relative to max(u, 5 % of its range) as the check states it.
double worstError(const Trajectory& coarse, const Trajectory& fine) {
  REQUIRE(coarse.u.size() == fine.u.size());
  double worst = 0.0;
  for (std::size_t i = 0; i < coarse.u.size(); ++i)
    if (fine.u[i] > 0.0) worst = std::max(worst, std::abs(coarse.u[i] - fine.u[i]) / std::max(fine.u[i], 0.05));
  return worst;
}

}  // namespace

TEST_CASE("A transient controller output: the estimate counts the heat the coat stores after a uniform start, and "
          "the automatic grid resolves it, against the 4x refined run",
          "[control_grid]") {
  // The coat on the 2 cells the automatic grid chose before it had a storage rule (given: no automatic count).
  const Trajectory coarse = transientOutput(furredTrunk("", ", cells = 2"));
  const Trajectory coarseFine = transientOutput(furredTrunk("grid_refinement = 4", ", cells = 2"));
  const double measured = worstError(coarse, coarseFine);
  const ControlGridWatch::Estimate& e = coarse.estimate;
  std::printf("[control_grid] furred trunk, coat on 2 cells: shivering %.1f %% off its 4x value at worst, estimated "
              "%.1f %% (storage term %.1f %%, %s layer %zu on %d cells, %d cells asked)\n",
              100.0 * measured, 100.0 * e.error, 100.0 * e.storageError, "trunk", e.layer, e.cells, e.cellsNeeded);
  REQUIRE(measured > 0.1);  // the 3 cm coat on 2 cells (measured 57 %)
  // The estimate stays above the measured error, within a factor 5 of it ...
  CHECK(e.error >= measured);
  CHECK(e.error <= 5.0 * measured);
  // ... where the quasi-static shift alone (the check before 2026-12-04) stayed below it.
  CHECK(e.error - e.storageError < measured);
  // The storage term names the coat and the cells that meet it; the warning says so.
  CHECK(e.layer == 4);  // the coat, after the trunk's four tissue layers
  REQUIRE(e.cellsNeeded > e.cells);
  bool named = false;
  for (const std::string& w : coarse.warnings)
    named = named || (w.rfind("grid: controller shivering:", 0) == 0 &&
                      w.find("segments.trunk.coat.cells: about " + std::to_string(e.cellsNeeded) + " cells") != std::string::npos);
  CHECK(named);
  // The automatic grid (storage rule, models/grid.cpp storageRule) chooses the coat's cells itself: its storage term
  // is below half the limit, and the output's error against its own 4x run falls more than 5x (measured 57 -> 3 %;
  // what remains is the quasi-static part, which the estimate brackets).
  const Trajectory automatic = transientOutput(furredTrunk(""));
  const double refined = worstError(automatic, transientOutput(furredTrunk("grid_refinement = 4")));
  const ControlGridWatch::Estimate& a = automatic.estimate;
  std::printf("[control_grid] furred trunk, automatic grid: coat on %d cells, shivering %.1f %% off its 4x value at "
              "worst, estimated %.1f %% (storage term %.2f %%)\n", a.cells, 100.0 * refined, 100.0 * a.error,
              100.0 * a.storageError);
  CHECK(a.storageError < 0.005);
  CHECK(refined < 0.2 * measured);
  CHECK(a.error >= refined);
}

TEST_CASE("After a steady start, a step of the surroundings moves the estimate only as far as the changed heat-flow "
          "error can have stored, against the 4x refined run",
          "[control_grid]") {
  // The furred trunk at rest in -30 degC air, started from its steady state; at 30 min a cold front (-45 degC,
  // 8 m/s) multiplies the loss at once. The signal (the core) has not moved at that instant, but the quasi-static
  // estimate takes the shift of the whole new loss (found in a new-user trial: a swimmer's shunts warned of at 140 %
  // at the output on the instant of immersion).
  auto frontCase = [](const std::string& run) {
    std::string toml = furredTrunk(run + "\ninitial = \"steady\"\n");
    toml.replace(toml.find("initial_temperature = \"37 degC\"\n"), std::string("initial_temperature = \"37 degC\"\n").size(), "");
    toml.replace(toml.find("temperature = \"-40 degC\""), std::string("temperature = \"-40 degC\"").size(),
                 "temperature = \"-30 degC\"");
    return toml + "[[events]]\nat = \"30 min\"\nenvironment = { temperature = \"-45 degC\", speed = \"8 m/s\" }\n";
  };
  const Trajectory coarse = transientOutput(frontCase(""));
  const Trajectory fine = transientOutput(frontCase("grid_refinement = 4"));
  const double measured = worstError(coarse, fine);
  const ControlGridWatch::Estimate& e = coarse.estimate;
  const double quasiStatic = e.magnification * e.gridError;  // the estimate at that output without the cap
  std::printf("[control_grid] furred trunk, steady start, cold front at 30 min: shivering %.2f %% off its 4x value at "
              "worst, estimated %.2f %% at t = %g s (quasi-static there %.2f %%)\n",
              100.0 * measured, 100.0 * e.error, e.time, 100.0 * quasiStatic);
  // Measured 2026-12-04: 2.51 % off 4x at worst; estimated 3.90 % at 2400 s. Without the cap the worst estimate was
  // the quasi-static one at the front's own output, 1800 s: 5.96 % (2.4x the measured error).
  REQUIRE(e.observed);
  CHECK(e.error >= measured);        // still an upper estimate
  CHECK(e.error <= 2.0 * measured);  // within 2x of it
  CHECK(e.time != 1800.0);           // not at the front's output, where the core has not moved yet
  CHECK(quasiStatic >= e.error);
}

TEST_CASE("A sweep row carries the controller grid warning of its run, at the output where the estimate peaks",
          "[control_grid][sweep]") {
  // A transient sweep needs no heat flows for its metrics; until 2026-12-05 it checked the controllers at the last
  // output only, so a row lacked the warning that `run` of the same case gives at an earlier output (found in a
  // new-user trial: a furred forager's shivering, 4.7 % at 13 min of 120, silent in its sweep). The furred trunk in
  // a cold front from its steady start peaks at 2400 s of 7200 s (the test above).
  std::string toml = furredTrunk("\ninitial = \"steady\"\n");
  toml.replace(toml.find("initial_temperature = \"37 degC\"\n"), std::string("initial_temperature = \"37 degC\"\n").size(), "");
  toml.replace(toml.find("temperature = \"-40 degC\""), std::string("temperature = \"-40 degC\"").size(),
               "temperature = \"-30 degC\"");
  toml += "[[events]]\nat = \"30 min\"\nenvironment = { temperature = \"-45 degC\", speed = \"8 m/s\" }\n";
  const Trajectory run = transientOutput(toml);
  auto gridWarning = [](const std::vector<std::string>& warnings) {
    for (const std::string& w : warnings)
      if (w.rfind("grid: controller shivering", 0) == 0) return w;
    return std::string();
  };
  const std::string expected = gridWarning(run.warnings);
  REQUIRE(expected.find("at t = 2400 s") != std::string::npos);  // not at the last output

  const std::filesystem::path path =
      std::filesystem::temp_directory_path() / ("thermorph-front-" + std::to_string(::getpid()) + ".toml");
  std::ofstream(path) << toml;
  SweepOptions o;
  o.casePath = path.string();
  o.scale = {"body=1"};
  const SweepPlan plan = makeSweepPlan(o);
  REQUIRE(plan.runs == 1);
  const RunRow row = runOne(plan, 0, nullptr);
  std::filesystem::remove(path);
  REQUIRE(row.status == RunStatus::Ok);
  CHECK(gridWarning(row.warnings) == expected);
}

TEST_CASE("The watch's flows of the channels to the surroundings are groupFlows' bit for bit, the others zero",
          "[control_grid][sweep]") {
  // A transient sweep computes no flows at outputs; its controller check computes only the channels it reads
  // (NetworkSystem::channelFlows: the same terms in the same order, without the conductances, streams, junctions
  // and storage of the internal channels). Reference: groupFlows of the same state (common practice, no source: the
  // same sums evaluated twice, which must not differ in any bit). The tucked bird (cases/tucked_bird.toml) has every
  // kind of term: conductances booked to `tucking` and `conduction`, blood streams, shunts, a coat, contact faces.
  Body body(loadCase(std::string(THERMORPH_SOURCE_DIR) + "/cases/tucked_bird.toml", {"run.duration=90 min"}));
  RunOptions options = silentRun();
  options.flowsAtOutputs = false;
  const RunSummary run = runTransient(body, options);
  REQUIRE(run.complete);
  NetworkSystem system(body.network(), NetworkSystem::Mode::Transient);
  const Network& net = body.network();
  const Index groups = net.groups.size(), channels = net.channels.size();
  std::vector<char> external(channels, 0);
  for (Index c = 0; c < channels; ++c)
    external[c] = !(net.channels[c] == "blood" || net.channels[c] == "conduction" || net.channels[c] == "tucking");
  REQUIRE(std::count(external.begin(), external.end(), 0) == 3);
  REQUIRE(std::any_of(net.conductanceChannels.begin(), net.conductanceChannels.end(),
                      [&](const ConductanceChannel& c) { return net.channels[c.channel] == "tucking"; }));
  // The run's last state (temperatures, controls) and the state halfway between it and the uniform start.
  std::vector<double> last = run.finalState;
  last.insert(last.end(), run.controls.begin(), run.controls.end());
  std::vector<double> halfway = initialState(body, system);
  halfway.resize(last.size());
  for (std::size_t i = 0; i < last.size(); ++i) halfway[i] = 0.5 * (last[i] + halfway[i]);
  long compared = 0, nonzero = 0;
  for (const std::vector<double>* state : {&last, &halfway}) {
    for (double t : {1800.0, 4800.0}) {  // before and after the feet are lifted and tucked (the event at 60 min)
      body.setInterval(t < 3600.0 ? 0 : 1);
      std::vector<double> all(groups * channels), storage(groups), faces(net.faces.size());
      std::vector<double> some(groups * channels, -1.0);
      system.groupFlows(t, *state, all, storage, faces);
      system.channelFlows(t, *state, external, some);
      for (Index g = 0; g < groups; ++g)
        for (Index c = 0; c < channels; ++c) {
          const double expected = external[c] ? all[g * channels + c] : 0.0;
          CHECK(std::memcmp(&some[g * channels + c], &expected, sizeof(double)) == 0);
          ++compared;
          nonzero += some[g * channels + c] != 0.0 ? 1 : 0;
        }
    }
  }
  CHECK(compared == static_cast<long>(4 * groups * channels));
  CHECK(nonzero > static_cast<long>(groups));  // convection, radiation, ... of every segment
}

TEST_CASE("The watch without flows at outputs gives the estimates of the watch fed every output's flows, bit for bit, "
          "where it skips outputs and channels",
          "[control_grid][sweep]") {
  // A transient sweep's check (observe(t, y)) computes flows only where they can change it: after a steady start
  // none while every controller is disabled (flowsNeeded), and never the channels to the surroundings that only
  // sources of power >= 0 book to (metabolism, shivering: their loss max(0, -flow) is 0 whatever the flow).
  // Reference: the same check fed groupFlows at every output, as `run` feeds it (common practice, no source: the
  // same estimate computed twice, which must not differ in any bit). The furred trunk from its steady start with
  // its shivering switched off from 20 to 50 min and a cold front at 30 min (the tests above), and from a uniform
  // start (every output's flows).
  auto frontCase = [](bool steady) {
    std::string toml = furredTrunk(steady ? "\ninitial = \"steady\"\n" : "");
    if (steady)
      toml.replace(toml.find("initial_temperature = \"37 degC\"\n"), std::string("initial_temperature = \"37 degC\"\n").size(), "");
    toml.replace(toml.find("temperature = \"-40 degC\""), std::string("temperature = \"-40 degC\"").size(),
                 "temperature = \"-30 degC\"");
    return toml + "[[events]]\nat = \"20 min\"\ncontrol = { shivering = { enabled = \"off\" } }\n"
                  "[[events]]\nat = \"30 min\"\nenvironment = { temperature = \"-45 degC\", speed = \"8 m/s\" }\n"
                  "[[events]]\nat = \"50 min\"\ncontrol = { shivering = { enabled = \"on\" } }\n";
  };
  for (const bool steady : {true, false}) {
    Body body(loadCaseFromString(frontCase(steady), "front.toml"));
    NetworkSystem system(body.network(), NetworkSystem::Mode::Transient);
    const Network& net = body.network();
    ControlGridWatch fed(body, system), alone(body, system);
    REQUIRE(alone.active());
    long outputs = 0, skipped = 0;
    RunOptions options = silentRun();
    options.flowsAtOutputs = false;
    options.observer = [&](double t, std::span<const double> temperatures, const RunSummary& s) {
      std::vector<double> y(temperatures.begin(), temperatures.end());
      y.insert(y.end(), s.controls.begin(), s.controls.end());
      // Reports on the test's own system (no face starts or coefficient cache of the run's): both watches' flows
      // come from the same state of it.
      std::vector<double> flows(net.groups.size() * net.channels.size()), storage(net.groups.size()),
          faces(net.faces.size());
      system.groupFlows(t, y, flows, storage, faces);
      fed.observe(t, y, flows);
      ++outputs;
      skipped += alone.flowsNeeded(t) ? 0 : 1;
      alone.observe(t, y);
    };
    const RunSummary run = runTransient(body, options);
    REQUIRE(run.complete);
    std::printf("[control_grid] furred trunk, %s start, shivering off 20-50 min: %ld of %ld outputs without flows\n",
                steady ? "steady" : "uniform", skipped, outputs);
    if (steady) CHECK(skipped >= 14);  // 22-50 min every 2 min: disabled
    else CHECK(skipped == 0);
    // Metabolism and shivering are gains only (their sources), convection and the rest are not.
    std::vector<std::string> gains;
    for (Index c = 0; c < net.channels.size() && c < alone.gainOnlyChannels().size(); ++c)
      if (alone.gainOnlyChannels()[c]) gains.push_back(net.channels[c]);
    CHECK(gains == std::vector<std::string>{"metabolism", "shivering"});
    const ControlGridWatch::Estimate& a = fed.estimates().at(0);
    const ControlGridWatch::Estimate& b = alone.estimates().at(0);
    REQUIRE(a.observed);
    CHECK(b.observed);
    for (auto field : {&ControlGridWatch::Estimate::time, &ControlGridWatch::Estimate::output,
                       &ControlGridWatch::Estimate::balanced, &ControlGridWatch::Estimate::carried,
                       &ControlGridWatch::Estimate::magnification, &ControlGridWatch::Estimate::gridError,
                       &ControlGridWatch::Estimate::error, &ControlGridWatch::Estimate::storageError})
      CHECK(std::memcmp(&(a.*field), &(b.*field), sizeof(double)) == 0);
    CHECK(a.capped == b.capped);
    CHECK(a.segment == b.segment);
    CHECK(a.layer == b.layer);
    CHECK(a.cellsNeeded == b.cellsNeeded);
    CHECK(fed.warnings() == alone.warnings());
  }
}
