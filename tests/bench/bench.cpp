//! thermorph_bench: writes the benchmark cases and times them in-process (scaling, 2-D appendage, KLU vs dense).
//!
//!   thermorph_bench cases DIR                  write the benchmark case files into DIR
//!   thermorph_bench table DIR [--repeat N] [--skip-dense]
//!                                              run them in this process and print Markdown tables
//!   thermorph_bench one CASE [--dense]         one in-process run of any case file, one table row
//!   thermorph_bench refine CASE [--levels N] [--cold-start] [--set KEY=VALUE]...
//!                                              the levels of `thermorph refine` (1x, 2x, 4x, ... cells), one
//!                                              table row per level: solver counters, fill, time per phase
//!
//! Whole-process runs (peak memory, results-file size, the SciPy comparison) are made by run_benchmarks.sh with
//! /usr/bin/time -v on the thermorph executable, using the same case files. Not part of ctest: a benchmark
//! measures, it does not pass or fail.
#include <sys/resource.h>

#include <algorithm>
#include <chrono>
#include <cmath>
#include <cstdio>
#include <filesystem>
#include <fstream>
#include <memory>
#include <span>
#include <string>
#include <vector>

#include <fmt/format.h>

#include "models/body.hpp"
#include "models/case.hpp"
#include "drivers/refine.hpp"
#include "drivers/simulation.hpp"
#include "drivers/sweep_metrics.hpp"

namespace {

using namespace thermorph;
namespace fs = std::filesystem;

// ---- benchmark cases --------------------------------------------------------------------------------------
// Values are illustrative (not measured on any animal). Every property is written out in SI units so the SciPy
// reference (scipy_bdf.py) reads the same numbers from the same file.

//! One-tissue radial cylinder (insulated ends, one axial cell): metabolism (Q10), Pennes perfusion with a fixed
//! arterial temperature, convection at the lateral surface. `cells` radial cells, one simulated hour.
std::string radialCase(int cells, double outputInterval = 60.0) {
  return fmt::format(R"(# Benchmark (illustrative values): 1-D radial cylinder, one tissue, {cells} radial cells.
title = "bench: 1-D radial, {cells} cells"

[run]
duration = 3600.0          # s
output_interval = {interval}     # s
initial_temperature = 310.15
rtol = 1e-6
atol = 1e-6

[circulation]
fixed_arterial_temperature = 310.15
blood_density = 1050.0
blood_specific_heat = 3617.0

# Built-in muscle values written out (McIntosh & Anderson 2010, from memory); perfusion 37 mL/(min kg).
[tissues.muscle]
conductivity = 0.49
density = 1090.0
specific_heat = 3421.0
metabolic_heat = 684.0
perfusion = 6.7216666666666667e-4
q10 = 2.0

[[segments]]
name = "trunk"
shape = "cylinder"
length = 0.2
radius = 0.04
axial_cells = 1
layers = [ {{ tissue = "muscle", thickness = 0.04, cells = {cells} }} ]
surface = {{ ends = "insulated", convection = 20.0 }}

[environment]
temperature = 283.15
convection = 20.0
)",
                     fmt::arg("cells", cells), fmt::arg("interval", fmt::format("{:.1f}", outputInterval)));
}

//! 2-D r-z cone with exposed ends: bone, muscle, fat, skin (10 + 20 + 4 + 6 = 40 radial cells).
std::string appendageCase(int axial, double duration, double outputInterval) {
  return fmt::format(R"(# Benchmark (illustrative values): 2-D appendage, {axial} axial x 40 radial cells.
title = "bench: 2-D appendage {axial} x 40"

[run]
duration = {duration}        # s
output_interval = {interval} # s
initial_temperature = 310.15

[circulation]
fixed_arterial_temperature = 310.15

[[segments]]
name = "limb"
shape = "cone"
length = 0.25
radius_proximal = 0.03
radius_distal = 0.015
axial_cells = {axial}
layers = [
  {{ tissue = "bone",   thickness = 0.008, cells = 10 }},
  {{ tissue = "muscle", thickness = 0.015, cells = 20 }},
  {{ tissue = "fat",    thickness = 0.003, cells = 4 }},
  {{ tissue = "skin",   thickness = 0.004, cells = 6 }},
]
surface = {{ ends = "exposed", convection = 25.0 }}

[environment]
temperature = 278.15
)",
                     fmt::arg("axial", axial), fmt::arg("duration", fmt::format("{:.1f}", duration)),
                     fmt::arg("interval", fmt::format("{:.1f}", outputInterval)));
}

const std::vector<int> radialSizes = {1000, 10000, 20000, 100000};

std::string radialFile(int cells) { return fmt::format("radial_{}.toml", cells); }

void writeCases(const fs::path& dir) {
  fs::create_directories(dir);
  auto write = [&](const std::string& name, const std::string& text) {
    std::ofstream(dir / name) << text;
    fmt::print("{}\n", (dir / name).string());
  };
  for (int n : radialSizes) write(radialFile(n), radialCase(n));
  write("radial_20000_hourly.toml", radialCase(20000, 3600.0));  // output only at 0 and 1 h
  write("appendage_100x40.toml", appendageCase(100, 3600.0, 60.0));
  write("appendage_125x40.toml", appendageCase(125, 3600.0, 60.0));
  write("appendage_125x40_day.toml", appendageCase(125, 86400.0, 60.0));
}

// ---- timing -----------------------------------------------------------------------------------------------

//! Processor time of this process, user + system [s].
double cpuSeconds() {
  rusage u{};
  getrusage(RUSAGE_SELF, &u);
  return static_cast<double>(u.ru_utime.tv_sec + u.ru_stime.tv_sec) +
         1e-6 * static_cast<double>(u.ru_utime.tv_usec + u.ru_stime.tv_usec);
}

struct Measurement {
  long cells = 0;  //!< tissue and coat cells of all segments
  long nodes = 0;  //!< network nodes (cells plus any blood nodes)
  SolverStatistics stats;
  double setupWall = 0.0;  //!< case loading and discretisation [s]
  double runWall = 0.0;    //!< runTransient: assembly set-up, integration, budget at every output [s]
  double runCpu = 0.0;     //!< processor time of runTransient [s]
  std::vector<double> finalState;  //!< [K]
};

//! Load, discretise and integrate `path` (no results file); throws when the run is incomplete.
Measurement measureOnce(const fs::path& path, LinearSolverKind solver) {
  Measurement m;
  auto t0 = std::chrono::steady_clock::now();
  Case c = loadCase(path.string());
  Body body(c);
  auto t1 = std::chrono::steady_clock::now();
  RunOptions options;
  options.quiet = true;
  options.linearSolver = solver;
  double cpu0 = cpuSeconds();
  RunSummary s = runTransient(body, options);
  m.runCpu = cpuSeconds() - cpu0;
  auto t2 = std::chrono::steady_clock::now();
  if (!s.complete) throw std::runtime_error(fmt::format("{}: {}", path.string(), s.failure));
  for (const SegmentMesh& seg : body.segments()) m.cells += static_cast<long>(seg.nz) * seg.nr;
  m.nodes = static_cast<long>(body.network().nodes.size());
  m.stats = s.statistics;
  m.setupWall = std::chrono::duration<double>(t1 - t0).count();
  m.runWall = std::chrono::duration<double>(t2 - t1).count();
  m.finalState = std::move(s.finalState);
  return m;
}

//! Best (shortest run wall time) of `repeat` runs: the least disturbed by other load on a shared machine.
Measurement measure(const fs::path& path, LinearSolverKind solver, int repeat) {
  Measurement best = measureOnce(path, solver);
  for (int i = 1; i < repeat; ++i) {
    Measurement m = measureOnce(path, solver);
    if (m.runWall < best.runWall) best = std::move(m);
  }
  return best;
}

double maxDifference(const std::vector<double>& a, const std::vector<double>& b) {
  double d = 0.0;
  for (std::size_t i = 0; i < std::min(a.size(), b.size()); ++i) d = std::max(d, std::abs(a[i] - b[i]));
  return d;
}

const char* header =
    "| case | cells | nodes | steps | rhs evals | Jacobians | lin. setups | Newton its | run wall [s] | run CPU [s] |";
const char* rule = "|---|---:|---:|---:|---:|---:|---:|---:|---:|---:|";

std::string row(const std::string& name, const Measurement& m) {
  const SolverStatistics& s = m.stats;
  return fmt::format("| {} | {} | {} | {} | {} | {} | {} | {} | {:.3f} | {:.3f} |", name, m.cells, m.nodes, s.steps,
                     s.rhsEvaluations, s.jacobianEvaluations, s.linearSetups, s.nonlinearIterations, m.runWall,
                     m.runCpu);
}

int table(const fs::path& dir, int repeat, bool dense) {
  fmt::print("In-process runs (no results file), best of {} by wall time; run = runTransient (assembly set-up, "
             "CVODE, heat budget at each of the 61 outputs).\n\n",
             repeat);

  fmt::print("### 1. 1-D radial cylinder, one tissue, one simulated hour\n\n{}{}\n{}{}\n", header,
             " wall per cell [us] | CPU per cell [us] | CPU per cell vs 1e3 | CPU per cell-step [ns] |", rule,
             "---:|---:|---:|---:|");
  double reference = 0.0;
  for (int n : radialSizes) {
    Measurement m = measure(dir / radialFile(n), LinearSolverKind::Klu, repeat);
    double perCell = m.runCpu / static_cast<double>(m.cells);
    if (reference == 0.0) reference = perCell;
    fmt::print("{} {:.2f} | {:.2f} | {:.2f} | {:.0f} |\n", row(fmt::format("radial {}", n), m),
               1e6 * m.runWall / static_cast<double>(m.cells), 1e6 * perCell, perCell / reference,
               1e9 * perCell / static_cast<double>(m.stats.steps));
  }

  fmt::print("\n### 2. 2-D appendage (cone, exposed ends), 100 axial x 40 radial, one simulated hour\n\n{}\n{}\n",
             header, rule);
  Measurement app = measure(dir / "appendage_100x40.toml", LinearSolverKind::Klu, repeat);
  fmt::print("{}\n", row("appendage 100x40", app));

  fmt::print("\n### 3. KLU vs dense at 5,000 cells (appendage 125 x 40, one simulated hour)\n\n{}\n{}\n", header, rule);
  Measurement klu = measure(dir / "appendage_125x40.toml", LinearSolverKind::Klu, repeat);
  fmt::print("{}\n", row("KLU", klu));
  if (dense) {
    Measurement full = measureOnce(dir / "appendage_125x40.toml", LinearSolverKind::Dense);
    fmt::print("{}\n", row("dense (1 run)", full));
    fmt::print("\ndense / KLU: wall {:.1f}x, CPU {:.1f}x (target KLU >= 20x faster: {}); max |T_dense - T_KLU| at "
               "1 h = {:.2e} K\n",
               full.runWall / klu.runWall, full.runCpu / klu.runCpu,
               full.runWall / klu.runWall >= 20.0 ? "met" : "MISSED", maxDifference(full.finalState, klu.finalState));
  }
  return 0;
}

// ---- grid refinement: the levels of `thermorph refine` ----------------------------------------------------

//! A counter of SolverStatistics that older builds lack (the script builds this file against main too): its value,
//! or -1 ("-" in the table).
template <class S>
double factorizations(const S& s) {
  if constexpr (requires { s.factorizations; }) return static_cast<double>(s.factorizations);
  return -1.0;
}
template <class S>
double refactorizations(const S& s) {
  if constexpr (requires { s.refactorizations; }) return static_cast<double>(s.refactorizations);
  return -1.0;
}
template <class S>
double factorFlops(const S& s) {
  if constexpr (requires { s.factorFlops; }) return s.factorFlops;
  return -1.0;
}

std::string countOrDash(double v, const char* format = "{:.0f}") {
  return v < 0.0 ? std::string("-") : fmt::format(fmt::runtime(format), v);
}

//! The coarser level's steady state mapped onto this level's cells, as `thermorph refine` warm-starts a finer level's
//! steady start (drivers/refine.hpp, mapSteadyState); empty for a source without the warm start (older revisions built
//! by refine_cost.sh: every level from the case's initial temperature, as they run), for the first level, or cold.
template <class B>
std::vector<double> warmGuess(const B* coarse, const std::vector<double>& state, const B& fine) {
  if constexpr (requires { mapSteadyState(fine, std::span<const double>(state), fine); }) {
    if (coarse && !state.empty()) return mapSteadyState(*coarse, std::span<const double>(state), fine);
  }
  return {};
}
//! steadyState from `warm` when the source has the warm start (and `warm` is given), else from `guess`; `*warmUsed`
//! whether the warm root was kept.
template <class B>
std::vector<double> timedSteadyState(const B& body, const std::vector<double>& guess, const std::vector<double>& warm,
                                     SolverStatistics* st, bool* warmUsed) {
  *warmUsed = false;
  if constexpr (requires { steadyState(body, std::span<const double>(guess), st, std::span<const double>(warm), warmUsed); })
    return steadyState(body, std::span<const double>(guess), st, std::span<const double>(warm), warmUsed);
  else
    return steadyState(body, std::span<const double>(guess), st);
}
template <class R>
void setSteadyGuess(R& run, const std::vector<double>& warm) {
  if constexpr (requires { run.steadyGuess; }) run.steadyGuess = warm;
}
//! RunOptions::coarseSteadyStart where the source has it (a refined run's steady start from the unrefined grid's).
template <class R>
void setCoarseSteadyStart(R& run, bool on) {
  if constexpr (requires { run.coarseSteadyStart; }) run.coarseSteadyStart = on;
}

//! Each level as `thermorph refine` runs it (refinedCase of the loaded case, a Body, runTransient with the metric
//! collector as observer), with the steady start (initial = "steady") timed once more on its own before the run
//! (steadyState from the same guess: the same work the run repeats; with the warm start, a finer level's from the
//! coarser level's steady state mapped onto its cells, as refine does, unless `cold`). "level [s]" and "level CPU [s]" are the level
//! as refine runs it (build and run, without that extra steady start); "rest of run" is the run's wall time minus
//! CVODE's and the separately timed steady start (a difference of wall times: noisy on a loaded machine).
int refineTable(const std::string& path, int levels, const std::vector<std::string>& overrides, bool cold) {
  const auto l0 = std::chrono::steady_clock::now();
  const Case base = loadCase(path, overrides);
  const double loadWall = std::chrono::duration<double>(std::chrono::steady_clock::now() - l0).count();
  const bool steadyStart = base.run.initial == InitialCondition::Steady;
  fmt::print("{}: case load {:.3f} s; {}\n\n", fs::path(path).filename().string(), loadWall,
             steadyStart ? "steady start (relaxation + KINSOL) timed separately" : "no steady start");
  fmt::print("| level | cells | nodes | build [s] | start | steady start [s] | steady steps | steady Newton its | "
             "steady rhs | steady Jacobians | CVODE [s] | rest of run [s] "
             "| level [s] | level CPU [s] | steps | rhs | Jacobians | lin. setups | Newton its | conv. fails | err. fails | "
             "Jacobian nnz | solver | L+U nnz | fill | factorisations | refactorisations | Mflop per factorisation |\n");
  fmt::print("|---|---:|---:|---:|---|---:|---:|---:|---:|---:|---:|---:|---:|---:|---:|---:|---:|---:|---:|---:|---:|---:"
             "|---|---:|---:|---:|---:|---:|\n");
  std::unique_ptr<Body> coarser;  // the previous level and its steady start (warm start)
  std::vector<double> coarserSteady;
  for (int level = 0; level < levels; ++level) {
    const int factor = 1 << level;
    const double cpu0 = cpuSeconds();
    const auto t0 = std::chrono::steady_clock::now();
    const Case c = refinedCase(base, factor);
    auto owned = std::make_unique<Body>(c);
    Body& body = *owned;
    const auto t1 = std::chrono::steady_clock::now();
    double steadyWall = 0.0, steadyCpu = 0.0;
    SolverStatistics st;
    bool warmUsed = false;
    std::vector<double> warm;
    if (steadyStart) {
      std::vector<double> guess(body.network().nodes.size(), c.run.initialTemperature);
      for (const Controller& k : body.network().controllers) guess.push_back(k.initial);
      const double c0 = cpuSeconds();
      const auto s0 = std::chrono::steady_clock::now();
      if (!cold) warm = warmGuess(coarser.get(), coarserSteady, body);  // the mapping counts as the steady start's
      coarserSteady = timedSteadyState(body, guess, warm, &st, &warmUsed);
      steadyWall = std::chrono::duration<double>(std::chrono::steady_clock::now() - s0).count();
      steadyCpu = cpuSeconds() - c0;
    }
    MetricCollector collector(body, MetricWindow{}, {}, false);
    RunOptions run;
    setSteadyGuess(run, warm);
    setCoarseSteadyStart(run, !cold);
    run.quiet = true;
    run.observer = [&](double t, std::span<const double> temperatures, const RunSummary& summary) {
      collector.observe(t, temperatures, summary);
    };
    const auto r0 = std::chrono::steady_clock::now();
    const RunSummary summary = runTransient(body, run);
    const double runWall = std::chrono::duration<double>(std::chrono::steady_clock::now() - r0).count();
    const double levelCpu = cpuSeconds() - cpu0 - steadyCpu;  // the level as refine runs it: without the extra steady start
    if (!summary.complete) throw std::runtime_error(fmt::format("level {}x: {}", factor, summary.failure));
    const double buildWall = std::chrono::duration<double>(t1 - t0).count();
    const SolverStatistics& s = summary.statistics;
    long cells = 0;
    for (const SegmentMesh& seg : body.segments()) cells += static_cast<long>(seg.nz) * seg.nr;
    const std::string solver =
        s.bandwidth >= 0 ? fmt::format("band {} + border {}", s.bandwidth, s.bandBorder) : std::string("KLU");
    const double flops = factorFlops(s);
    fmt::print("| {}x | {} | {} | {:.3f} | {} | {:.3f} | {} | {} | {} | {} | {:.3f} | {:.3f} | {:.3f} | {:.3f} | {} | {} | {} "
               "| {} | {} | {} | {} | {} | {} | {} | {:.2f} | {} | {} | {} |\n",
               factor, cells, body.network().nodes.size(), buildWall, !steadyStart ? "-" : (warmUsed ? "warm" : "cold"),
               steadyWall, st.steps, st.nonlinearIterations, st.rhsEvaluations, st.jacobianEvaluations,
               s.wallSeconds, runWall - s.wallSeconds - steadyWall, buildWall + runWall, levelCpu, s.steps, s.rhsEvaluations,
               s.jacobianEvaluations, s.linearSetups, s.nonlinearIterations, s.nonlinearFailures, s.errorTestFailures,
               s.jacobianNonzeros, solver, s.factorNonzeros,
               static_cast<double>(s.factorNonzeros) / static_cast<double>(std::max(1L, s.jacobianNonzeros)),
               countOrDash(factorizations(s)), countOrDash(refactorizations(s)),
               flops < 0.0 ? std::string("-") : (flops == 0.0 ? std::string("band") : fmt::format("{:.2f}", 1e-6 * flops)));
    std::fflush(stdout);
    if (steadyStart && level + 1 < levels) coarser = std::move(owned);
  }
  return 0;
}

//! The coarser grids' steady state on a refined body's cells (coarseSteadyGuess) where the source has it, else
//! empty (an older revision: its refined runs relax from the case's initial temperature).
template <class B>
std::vector<double> coarseGuess(const B& body, SolverStatistics* st) {
  if constexpr (requires { coarseSteadyGuess(body, st); }) return coarseSteadyGuess(body, st);
  return {};
}

//! A run on a grid refined N x (`run --set run.grid_refinement=N`, or `steady` with --steady), its steady start
//! found cold (the relaxation from the case's initial temperature, then KINSOL) and warm (Newton from the unrefined
//! grid's steady state mapped onto the cells, coarseSteadyGuess; a source without it: cold again), one after the
//! other in one process on the same body. Per start: the unrefined grid's counters and CPU (and how far Newton
//! moved from its mapped state: largest node change and heat-capacity-weighted mean), the refined grid's steady
//! solve's counters and CPU (the steady start alone, timed on its own), the whole run's CPU (its own steady start
//! included; skipped with --no-run) and transient steps, and the largest difference of the warm steady state from
//! the cold one [K].
int refinedTable(const std::string& path, int factor, const std::vector<std::string>& given, bool steady, bool doRun) {
  std::vector<std::string> overrides = given;
  overrides.push_back(fmt::format("run.grid_refinement={}", factor));
  const Case c = loadCase(path, overrides);
  Body body(c);
  const std::size_t nodes = body.network().nodes.size();
  std::vector<double> guess(nodes, c.run.initialTemperature);
  for (const Controller& k : body.network().controllers) guess.push_back(k.initial);
  std::vector<double> cold;
  for (const bool warmStart : {false, true}) {
    body.setInterval(0);  // the surroundings of t = 0 (the cold run before left the body at its last interval)
    const double c0 = cpuSeconds();
    SolverStatistics coarse, st;
    const std::vector<double> warm = warmStart ? coarseGuess(body, &coarse) : std::vector<double>{};
    const double coarseCpu = cpuSeconds() - c0;
    bool used = false;
    const std::vector<double> state = timedSteadyState(body, guess, warm, &st, &used);
    const double steadyCpu = cpuSeconds() - c0;
    double largest = 0.0;
    if (!warmStart) cold = state;
    else
      for (std::size_t i = 0; i < nodes; ++i) largest = std::max(largest, std::abs(state[i] - cold[i]));
    double runCpu = -1.0;
    long steps = -1;
    if (doRun) {
      RunOptions run;
      run.quiet = true;
      setCoarseSteadyStart(run, warmStart);
      body.setInterval(0);
      const double r0 = cpuSeconds();
      const RunSummary summary = steady ? runSteady(body, run) : runTransient(body, run);
      runCpu = cpuSeconds() - r0;
      if (!summary.complete) throw std::runtime_error(summary.failure);
      steps = steady ? 0 : summary.statistics.steps;
    }
    // The largest change of a node from the warm guess to the root, and of the heat-capacity-weighted mean: what the
    // safeguards of warmSteadyState (kWarmStartNodeChange, kWarmStartMeanChange) bound.
    double moved = 0.0, capacity = 0.0, weighted = 0.0;
    for (std::size_t i = 0; i < nodes && !warm.empty(); ++i) {
      moved = std::max(moved, std::abs(state[i] - warm[i]));
      capacity += body.network().nodes[i].capacity;
      weighted += body.network().nodes[i].capacity * (state[i] - warm[i]);
    }
    const std::string grids =
        warm.empty() ? std::string("-") : fmt::format("1x (moved {:.3g} K, mean {:.2g} K)", moved, std::abs(weighted) / capacity);
    fmt::print("| {} | {}x | {} | {} | {} | {} / {} / {} | {:.3f} | {} / {} / {} / {} | {:.3f} | {} | {} | {} |\n",
               fs::path(path).filename().string(), factor, nodes, used ? "warm" : "cold", grids,
               coarse.steps, coarse.nonlinearIterations, coarse.rhsEvaluations, coarseCpu, st.steps,
               st.nonlinearIterations, st.rhsEvaluations, st.jacobianEvaluations, steadyCpu,
               runCpu < 0.0 ? std::string("-") : fmt::format("{:.3f}", runCpu),
               steps < 0 ? std::string("-") : fmt::format("{}", steps),
               warmStart ? fmt::format("{:.2g}", largest) : std::string("-"));
    std::fflush(stdout);
  }
  return 0;
}

}  // namespace

int main(int argc, char** argv) {
  std::vector<std::string> args(argv + 1, argv + argc);
  try {
    if (args.size() == 2 && args[0] == "cases") {
      writeCases(args[1]);
      return 0;
    }
    if ((args.size() == 2 || (args.size() == 3 && args[2] == "--dense")) && args[0] == "one") {
      Measurement m = measureOnce(args[1], args.size() == 3 ? LinearSolverKind::Dense : LinearSolverKind::Klu);
      fmt::print("{}\n{}\n{}\n", header, rule, row(fs::path(args[1]).filename().string(), m));
      return 0;
    }
    if (args.size() >= 2 && args[0] == "refine") {
      int levels = 3;
      bool cold = false;
      std::vector<std::string> overrides;
      for (std::size_t i = 2; i < args.size(); ++i) {
        if (args[i] == "--levels" && i + 1 < args.size()) levels = std::stoi(args[++i]);
        else if (args[i] == "--cold-start") cold = true;
        else if (args[i] == "--set" && i + 1 < args.size()) overrides.push_back(args[++i]);
        else throw std::invalid_argument("unknown option " + args[i]);
      }
      return refineTable(args[1], levels, overrides, cold);
    }
    if (args.size() >= 2 && args[0] == "refined") {
      int factor = 4;
      bool steady = false, doRun = true;
      std::vector<std::string> overrides;
      for (std::size_t i = 2; i < args.size(); ++i) {
        if (args[i] == "--factor" && i + 1 < args.size()) factor = std::stoi(args[++i]);
        else if (args[i] == "--steady") steady = true;
        else if (args[i] == "--no-run") doRun = false;
        else if (args[i] == "--set" && i + 1 < args.size()) overrides.push_back(args[++i]);
        else throw std::invalid_argument("unknown option " + args[i]);
      }
      return refinedTable(args[1], factor, overrides, steady, doRun);
    }
    if (args.size() >= 2 && args[0] == "table") {
      int repeat = 3;
      bool dense = true;
      for (std::size_t i = 2; i < args.size(); ++i) {
        if (args[i] == "--repeat" && i + 1 < args.size()) repeat = std::max(1, std::stoi(args[++i]));
        else if (args[i] == "--skip-dense") dense = false;
        else throw std::invalid_argument("unknown option " + args[i]);
      }
      return table(args[1], repeat, dense);
    }
  } catch (const std::exception& e) {
    fmt::print(stderr, "error: {}\n", e.what());
    return 1;
  }
  fmt::print(stderr,
             "usage: thermorph_bench cases DIR\n       thermorph_bench table DIR [--repeat N] [--skip-dense]\n"
             "       thermorph_bench one CASE [--dense]\n"
             "       thermorph_bench refine CASE [--levels N] [--cold-start] [--set KEY=VALUE]...\n"
             "       thermorph_bench refined CASE [--factor N] [--steady] [--no-run] [--set KEY=VALUE]...\n");
  return 2;
}
