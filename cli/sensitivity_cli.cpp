#include "cli/sensitivity_cli.hpp"

#include <fmt/format.h>

#include "cli/exit_codes.hpp"

namespace thermorph {

namespace {
template <class Options>
int guarded(Options& options, const std::string& commandLine, int (*command)(const Options&)) {
  options.commandLine = commandLine;
  return withExitCodes([&] { return command(options); });
}
}  // namespace

CLI::App* addSensitivitySubcommand(CLI::App& app, SensitivityOptions& o) {
  CLI::App* s = app.add_subcommand(
      "sensitivity", "Sensitivity of sweep metrics to case parameters: local (normalised coefficients), Morris "
                     "elementary effects or Sobol' indices; runs on the sweep engine");
  s->add_option("case", o.casePath, "Case file (TOML)")->required();
  s->add_option("--set", o.overrides, "Override a case key in every run: KEY=VALUE")->take_all()->allow_extra_args(false);
  s->add_option("--method", o.method, "local | morris | sobol (default sobol)");
  s->add_option("--param", o.params,
                "A parameter, addressed as --set addresses it: KEY=LOWER:UPPER[:log] (local: KEY, at the case's value)")
      ->take_all()
      ->allow_extra_args(false);
  s->add_option("--metric", o.metrics, "Metrics as in `sweep --metric` (default: every column)")
      ->take_all()
      ->allow_extra_args(false);
  s->add_option("--window", o.window, "Averaging window START:END (as in sweep)");
  s->add_flag("--steady", o.steady, "Steady state of every run");
  s->add_option("-N,--samples", o.samples, "Sobol: base samples N, N (k + 2) runs (default 512); Morris: trajectories (default 10)");
  s->add_option("--levels", o.levels, "Morris grid levels (even; default 4)");
  s->add_option("--gradient", o.gradient,
                "Local: auto (CVODES forward sensitivities for parameters that enter the network as coefficients, "
                "central differences for geometry and the rest) or fd (central differences for all); default auto")
      ->check(CLI::IsMember({"auto", "fd"}));
  s->add_option("--step", o.step, "Local: relative step of the central difference (default 1e-3)");
  s->add_option("--bootstrap", o.bootstrap, "Sobol: bootstrap resamples for the 95 % intervals (default 1000)");
  s->add_option("--seed", o.seed, "Seed of the Morris design and the bootstrap (default 1)");
  s->add_option("-j,--jobs", o.jobs, "Worker threads (default: all cores); under mpirun one run per rank");
  s->add_flag("--resume", o.resume, "Continue an interrupted analysis (the runs' sweep progress file)");
  s->add_flag("-q,--quiet", o.quiet, "No progress bar");
  s->add_option("-o,--output", o.output, "Indices (HDF5); runs in NAME_runs.h5/.csv beside it. Default: CASE-NAME_METHOD.h5");
  return s;
}

int runSensitivityCli(SensitivityOptions& options, const std::string& commandLine) {
  return guarded(options, commandLine, &runSensitivityCommand);
}

CLI::App* addUncertaintySubcommand(CLI::App& app, UncertaintyOptions& o) {
  CLI::App* u = app.add_subcommand(
      "uncertainty", "Propagate parameter distributions (or a fit's covariance) through the model: quantiles of "
                     "metrics and 5-95 % bands of time series");
  u->add_option("case", o.casePath, "Case file (TOML)")->required();
  u->add_option("--set", o.overrides, "Override a case key in every run: KEY=VALUE")->take_all()->allow_extra_args(false);
  u->add_option("--param", o.params,
                "KEY=DIST in the unit of UNIT: KEY[UNIT]=uniform:LO:HI | normal:MEAN:SD | lognormal:MEDIAN:GSD | "
                "triangular:LO:MODE:HI, e.g. \"environment.temperature[degC]=normal:10:2\"")
      ->take_all()
      ->allow_extra_args(false);
  u->add_option("--from-fit", o.fromFit, "Sample the fitted parameters from a fit's results (multivariate normal, its covariance)");
  u->add_option("--series", o.series,
                "Time series to band, as observed-data outputs (body.core_temperature, segments.NAME.mean_temperature, ...)")
      ->take_all()
      ->allow_extra_args(false);
  u->add_option("--samples", o.samples, "Runs (default 200)");
  u->add_option("--design", o.design, "lhs (Latin hypercube, default) or sobol (quasi-random)");
  u->add_option("--seed", o.seed, "Seed of the Latin hypercube (default 1)");
  u->add_option("-j,--jobs", o.jobs, "Threads (default: all cores)");
  u->add_flag("-q,--quiet", o.quiet, "No progress");
  u->add_option("-o,--output", o.output, "Quantiles and bands (HDF5). Default: CASE-NAME_uncertainty.h5");
  return u;
}

int runUncertaintyCli(UncertaintyOptions& options, const std::string& commandLine) {
  return guarded(options, commandLine, &runUncertaintyCommand);
}

}  // namespace thermorph
