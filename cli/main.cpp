//! thermorph command-line driver: run, steady, check, reference.
#include <CLI/CLI.hpp>
#include <malloc.h>

#include <cstdio>
#include <filesystem>
#include <iostream>
#include <optional>

#include <fmt/format.h>

#include "models/body.hpp"
#include "models/case.hpp"
#include "models/caution.hpp"
#include "models/grid.hpp"
#include "drivers/output_file.hpp"
#include "drivers/simulation.hpp"
#include "drivers/stop_signal.hpp"
#include "cli/exit_codes.hpp"
#include "cli/sweep_cli.hpp"
#include "cli/fit_cli.hpp"
#include "cli/sensitivity_cli.hpp"
#include "cli/refine_cli.hpp"

namespace {

using namespace thermorph;


std::string defaultOutput(const std::string& casePath) {
  return std::filesystem::path(casePath).stem().string() + ".h5";
}

void describe(const Body& body) {
  const Case& c = body.spec();
  fmt::print("{}\n{}\n", c.title, std::string(c.title.size(), '='));
  fmt::print("{:<14}{:<9}{:>6}{:>4}{:>28}{:>11}{:>13}{:>10}{:>10}{:>7}{:>14}\n", "segment", "shape", "count", "n",
             "dimensions [cm]", "area [cm2]", "volume [cm3]", "mass [g]", "S/V [1/m]", "cells", "blood mL/min");
  double area = 0, volume = 0, mass = 0;
  long cells = 0;
  for (std::size_t i = 0; i < body.segments().size(); ++i) {
    const SegmentMesh& m = body.segments()[i];
    const SegmentSpec& s = c.segments[i];
    std::string dims;
    double coat = s.coat ? s.coat->thickness : 0.0;
    switch (s.shape) {
      case Shape::Sphere: dims = fmt::format("r {:.3g}", 100 * s.radiusProximal); break;
      case Shape::Cylinder: dims = fmt::format("r {:.3g}, L {:.3g}", 100 * s.radiusProximal, 100 * s.length); break;
      case Shape::Cone:
        dims = fmt::format("r {:.3g}->{:.3g}, L {:.3g}", 100 * s.radiusProximal, 100 * s.radiusDistal, 100 * s.length);
        break;
      case Shape::Plate:
        dims = fmt::format("{:.3g} x {:.3g} x {:.3g}", 100 * s.length, 100 * s.width, 200 * s.tissueRadius());
        break;
    }
    if (coat > 0) dims += fmt::format(" +coat {:.2g}", 100 * coat);
    long n = static_cast<long>(m.nz) * m.nr;
    fmt::print("{:<14}{:<9}{:>6}{:>4}{:>28}{:>11.4g}{:>13.4g}{:>10.4g}{:>10.4g}{:>7}{:>14.4g}\n", m.name,
               shapeName(m.shape), s.count, m.weight, dims, m.area * 1e4, m.tissueVolume * 1e6, m.tissueMass * 1e3, m.area / m.tissueVolume, n,
               m.bloodFlow * 6e7);
    area += m.weight * m.area;
    volume += m.weight * m.tissueVolume;
    mass += m.weight * m.tissueMass;
    cells += n;
  }
  fmt::print("{:<14}{:<9}{:>6}{:>4}{:>28}{:>11.4g}{:>13.4g}{:>10.4g}{:>10.4g}{:>7}{:>14.4g}\n", "body", "", "", "all",
             "", area * 1e4, volume * 1e6, mass * 1e3, area / volume, body.network().nodes.size(),
             body.totalBloodFlow() * 6e7);
  fmt::print("count: the segment's own count; n: copies in the body, its count times the counts of all its ancestors\n"
             "(legs x2 carrying feet x2: 4 feet), each simulated once. Volumes and masses exclude the coat; area is the exposed outer surface\n"
             "(coat included, minus what attached segments cover); blood is the arterial inflow of one copy,\n"
             "children included. Body cells include blood nodes.\n");
  // Body::basalMetabolicRate includes [body] activity; the line names both when activity is not 1 (a new-user trial
  // read "basal metabolism 14.04 W" for a 2 kg body whose Kleiber rate is 5.62 W, at activity 2.5).
  const double activity = c.body.activity;
  const std::string metabolism =
      activity == 1.0 || !(activity > 0.0)
          ? fmt::format("basal metabolism {:.4g} W", body.basalMetabolicRate())
          : fmt::format("basal metabolism {:.4g} W, times activity {:g}: {:.4g} W", body.basalMetabolicRate() / activity,
                        activity, body.basalMetabolicRate());
  fmt::print("Body mass {:.4g} kg, blood volume {:.4g} mL, blood flow {:.4g} of cardiac output {:.4g} mL/min, {}{}\n",
             body.bodyMass(), body.bloodVolume() * 1e6, body.totalBloodFlow() * 6e7, body.cardiacOutput() * 6e7,
             metabolism,
             body.poolNode() ? "" : c.circulation.fixedArterialTemperature ? " (arterial supply pinned)" : " (no blood flow)");
  std::string controllers;
  for (const Controller& k : body.network().controllers)
    controllers += fmt::format("{}{} (set point {:.4g} degC, lag {:g} s)", controllers.empty() ? "" : ", ", k.name,
                               k.setpoint - 273.15, k.timeConstant);
  for (const Body::Tucking& t : body.tucking())
    fmt::print("Tucking: {} into {}, tucked fraction {:g} at t = 0 (largest {:g}); the whole tucked path conducts "
               "{:.4g} W/K per copy at fraction 1 (channel \"tucking\")\n",
               body.segments()[t.guest].name, body.segments()[t.host].name,
               body.environment().tuckedFraction(t.guest), body.environment().maxTuckedFraction(t.guest), t.conductance);
  for (const Body::Tucking& t : body.tucking()) {
    const std::string& host = body.segments()[t.host].name;
    if (c.segments[t.guest].surface.tuckedInCoat) {
      fmt::print("  {} lies inside {}'s coat (tucked_placement = \"in_coat\"): {}'s exposed area and coat rings stay "
                 "whole, the path crosses its whole coat; covered at most {:.3g} % with its own contact and tucking and "
                 "its guests on its coat\n",
                 body.segments()[t.guest].name, host, host, 100.0 * t.largestHostShare);
      continue;
    }
    fmt::print("  {}'s exposed lateral area (convection, radiation, evaporation, sun) and its coat's rings lose the "
               "tucked patch, spread over its lateral cells by area: at the largest tucked fraction {:.4g} m2 per copy "
               "of {} ({:.3g} % of its lateral area {:.4g} m2); covered at most {:.3g} % with its own contact and "
               "tucking and all its guests\n",
               host, t.coveredArea, host, 100.0 * t.coveredArea / t.hostArea, t.hostArea, 100.0 * t.largestHostShare);
  }
  fmt::print("Respiration: {}. Controllers: {}. Events: {}.\n",
             c.body.respiratorySegment.empty() ? "off (no [body] respiratory_segment)" : "from " + c.body.respiratorySegment,
             controllers.empty() ? "none" : controllers, c.events.size());
}

}  // namespace

int main(int argc, char** argv) {
  skipHdf5CleanupAtExit();  // before any HDF5 call (drivers/output_file.hpp)
  ignoreFileSizeSignal();   // a file-size limit is a write error, not a kill (drivers/stop_signal.hpp)
  CLI::App app{std::string("thermorph: tissue temperatures and heat budgets of animal bodies built from linked segments.\n"
                           "Caution: ") + caution};
  app.set_version_flag("--version", std::string(THERMORPH_VERSION));
  app.require_subcommand(1);
  std::string casePath, output;
  std::vector<std::string> overrides;
  bool quiet = false, resolved = false, dense = false, coldStart = false;

  auto addCommon = [&](CLI::App* sub) {
    sub->add_option("case", casePath, "Case file (TOML)")->required();
    sub->add_option("--set", overrides, "Override a case key: KEY=VALUE, e.g. environment.temperature=\"5 degC\"")
        ->take_all()
        ->allow_extra_args(false);
  };
  CLI::App* run = app.add_subcommand("run", "Integrate a case and print its heat budget");
  addCommon(run);
  run->add_option("-o,--output", output, "Results file (HDF5); default: CASE-NAME.h5 in the current folder");
  run->add_flag("-q,--quiet", quiet, "No progress on stderr");
  run->add_flag("--dense", dense, "Use the dense linear solver instead of KLU (benchmarks)");
  // The same text for run and steady: how a refined grid's steady state is found (RunOptions::coarseSteadyStart).
  const std::string coldStartHelp =
      "On a refined grid (run.grid_refinement > 1), find the steady state by the relaxation from initial_temperature "
      "instead of by Newton from the unrefined grid's steady state on the refined cells (the default; the same "
      "steady state to KINSOL's tolerance)";
  run->add_flag("--cold-start", coldStart, coldStartHelp);
  CLI::App* steady = app.add_subcommand("steady", "Find the steady state of a case");
  addCommon(steady);
  steady->add_option("-o,--output", output, "Results file (HDF5); default: CASE-NAME.h5");
  steady->add_flag("-q,--quiet", quiet, "No progress on stderr");
  steady->add_flag("--cold-start", coldStart, coldStartHelp);
  CLI::App* check = app.add_subcommand("check", "Validate a case and describe the body");
  addCommon(check);
  check->add_flag("--resolved", resolved, "Print the fully resolved case (SI values, defaults filled in) as TOML");
  CLI::App* reference = app.add_subcommand("reference", "Print the case-file reference (Markdown) generated from the schema");

  // ---- sweep: registration (cli/sweep_cli.cpp) ----
  SweepOptions sweepOptions;
  CLI::App* sweep = addSweepSubcommand(app, sweepOptions);
  // ---- end sweep ----
  FitOptions fitOptions;
  CLI::App* fit = addFitSubcommand(app, fitOptions);  // cli/fit_cli.cpp
  SensitivityOptions sensitivityOptions;
  CLI::App* sensitivity = addSensitivitySubcommand(app, sensitivityOptions);  // cli/sensitivity_cli.cpp
  UncertaintyOptions uncertaintyOptions;
  CLI::App* uncertainty = addUncertaintySubcommand(app, uncertaintyOptions);  // cli/sensitivity_cli.cpp
  CLI::App* refine = addRefineSubcommand(app);  // grid refinement study (cli/refine_cli.cpp)
  for (CLI::App* sub : app.get_subcommands([](CLI::App*) { return true; }))
    sub->footer(sub->get_footer() + (sub->get_footer().empty() ? "" : "\n") + "Caution: " + caution);

  try {
    app.parse(argc, argv);
  } catch (const CLI::ExtrasError& e) {
    // CLI11 2.3's own message lists the arguments it did not expect in reverse order ("24 -N" for "-N 24"): name
    // them in the order given, with the subcommand and where its options are listed.
    std::string command = "thermorph";
    std::vector<std::string> extra;
    for (CLI::App* sub : app.get_subcommands())
      if (sub->parsed()) command += " " + sub->get_name(), extra = sub->remaining();
    if (extra.empty()) extra = app.remaining();
    std::string list;
    for (const std::string& a : extra) list += (list.empty() ? "" : " ") + a;
    fmt::print(stderr, "error: {}: unexpected argument{}: {} (an option this command does not have, or a value "
               "without its option); the options: {} --help\n", command, extra.size() == 1 ? "" : "s", list, command);
    return exitBadInput;
  } catch (const CLI::ParseError& e) {
    // Help and version exit 0; any other command-line error is bad input: exit 2 like a bad case file.
    int code = app.exit(e);
    return code == 0 ? 0 : exitBadInput;
  }

  std::string commandLine;
  for (int i = 0; i < argc; ++i) {
    if (i > 0) commandLine += ' ';
    commandLine += argv[i];
  }

  if (reference->parsed()) {
    std::cout << caseReferenceMarkdown();
    return 0;
  }
  // fit: cli/fit_run.cpp (prints the caution) or, in thermorph, thermorph-fit in its place (cli/fit_exec.cpp).
  if (fit->parsed()) return runFitCli(fitOptions, commandLine);
  // Every other subcommand computes: the caution once on stderr, before anything else it prints.
  fmt::print(stderr, "Caution: {}\n", caution);
  // ---- sweep: dispatch ----
  if (sweep->parsed()) return runSweepCli(sweepOptions, commandLine);
  // ---- end sweep ----
  if (sensitivity->parsed()) return runSensitivityCli(sensitivityOptions, commandLine);
  if (uncertainty->parsed()) return runUncertaintyCli(uncertaintyOptions, commandLine);
  if (refine->parsed()) return runRefineCli();
  return withExitCodes([&]() -> int {
    // SIGINT/SIGTERM: stop at the next step, keep the outputs so far. Installed before the output check and the
    // body's build (run and steady only: `check` has nothing to keep), so a signal at any time after start-up is
    // handled: the output check's probe file is a temporary too, and a signal that came while the body was being
    // built killed the process with no partial result (e2e_hardening, seen once under load).
    std::optional<StopSignalGuard> signals;
    if (!check->parsed()) signals.emplace();
    // One body per process: every block of 128 KiB or more is mapped on its own and returned to the system when
    // freed. glibc's default raises this threshold to the size of the largest mapped block freed so far (the
    // body's build frees some of several MB), after which such blocks come from the heap, whose freed middle
    // stays resident: the set-up's temporaries and the outputs' buffers were 4 MB of the radial 10^5 run's peak
    // RSS (53.8 -> 50.0 MB at main 9f3e7b4). Sweeps (many small runs) keep glibc's default.
    mallopt(M_MMAP_THRESHOLD, 128 * 1024);
    Case c = loadCase(casePath, overrides);
    if (!check->parsed()) {
      // The output is checked before any computing (drivers/output_file.hpp).
      if (output.empty()) output = defaultOutput(casePath);
      checkOutputPath(output, inputPaths(c), {incompleteOutputPath(output)});
    }
    Body body(c);
    // `steady` uses the t = 0 conditions: the warnings about the timeline after t = 0 do not apply to it.
    for (const std::string& w : body.warnings(steady->parsed())) fmt::print(stderr, "warning: {}\n", w);
    if (check->parsed()) {
      if (resolved) std::cout << resolvedCaseToml(c);
      else {
        describe(body);
        fmt::print("{}", gridSummary(c));
      }
      return 0;
    }
    if (run->parsed())
      if (std::string w = projectedOutputWarning(body); !w.empty()) fmt::print(stderr, "warning: {}\n", w);
    RunOptions options;
    options.output = output;
    options.commandLine = commandLine;
    options.quiet = quiet;
    options.linearSolver = dense ? LinearSolverKind::Dense : LinearSolverKind::Klu;
    options.stop = &stopRequested();
    options.coarseSteadyStart = !coldStart;
    RunSummary summary = run->parsed() ? runTransient(body, options) : runSteady(body, options);
    printBudget(body, summary, stdout);
    for (const std::string& w : body.environment().warnings()) fmt::print(stderr, "warning: {}\n", w);
    for (const std::string& w : summary.runWarnings) fmt::print(stderr, "warning: {}\n", w);
    if (summary.stopped) {
      fmt::print(stderr, "stopped by {}.\nPartial results up to t = {:g} s kept in {} (marked incomplete).\n",
                 stopSignalName(), summary.finalTime, summary.outputPath);
      return stopExitCode();
    }
    if (!summary.complete) {
      fmt::print(stderr, "error: {}\nPartial results up to t = {:g} s kept in {} (marked incomplete).\n",
                 summary.failure, summary.finalTime, summary.outputPath);
      return exitSolverFailure;
    }
    fmt::print("Results: {}\n", summary.outputPath);
    return 0;
  });
}
