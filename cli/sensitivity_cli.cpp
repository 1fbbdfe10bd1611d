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
  namespace h = sensitivity_help;  // the texts the Python module's docstring shares (drivers/sensitivity.hpp)
  CLI::App* s = app.add_subcommand("sensitivity", h::command);
  s->add_option("case", o.casePath, "Case file (TOML)")->required();
  s->add_option("--set", o.overrides, h::set)->take_all()->allow_extra_args(false);
  s->add_option("--method", o.method, h::method);
  s->add_option("--param", o.params, h::param)->take_all()->allow_extra_args(false);
  s->add_option("--metric", o.metrics, h::metric)->take_all()->allow_extra_args(false);
  s->add_option("--window", o.window, h::window);
  s->add_flag("--steady", o.steady, h::steady);
  s->add_option("-N,--samples", o.samples, h::samples);
  s->add_option("--levels", o.levels, h::levels);
  s->add_option("--gradient", o.gradient, h::gradient)->check(CLI::IsMember({"auto", "fd"}));
  s->add_option("--step", o.step, h::step);
  s->add_option("--bootstrap", o.bootstrap, h::bootstrap);
  s->add_option("--seed", o.seed, h::seed);
  s->add_option("-j,--jobs", o.jobs, h::jobs);
  s->add_flag("--resume", o.resume, "Continue an interrupted analysis (the runs' sweep progress file)");
  s->add_flag("-q,--quiet", o.quiet, "No progress bar");
  s->add_option("-o,--output", o.output, h::output);
  return s;
}

int runSensitivityCli(SensitivityOptions& options, const std::string& commandLine) {
  return guarded(options, commandLine, &runSensitivityCommand);
}

CLI::App* addUncertaintySubcommand(CLI::App& app, UncertaintyOptions& o) {
  namespace h = uncertainty_help;  // shared with the Python module's docstring (drivers/uncertainty.hpp)
  CLI::App* u = app.add_subcommand("uncertainty", h::command);
  u->add_option("case", o.casePath, "Case file (TOML)")->required();
  u->add_option("--set", o.overrides, h::set)->take_all()->allow_extra_args(false);
  u->add_option("--param", o.params, h::param)->take_all()->allow_extra_args(false);
  u->add_option("--from-fit", o.fromFit, h::fromFit);
  u->add_option("--series", o.series, h::series)->take_all()->allow_extra_args(false);
  u->add_option("--metric", o.metrics, h::metric)->take_all()->allow_extra_args(false);
  u->add_option("--window", o.window, h::window);
  u->add_option("-N,--samples", o.samples, h::samples);
  u->add_option("--design", o.design, h::design);
  u->add_option("--seed", o.seed, h::seed);
  u->add_option("-j,--jobs", o.jobs, h::jobs);
  u->add_flag("-q,--quiet", o.quiet, "No progress");
  u->add_option("-o,--output", o.output, h::output);
  return u;
}

int runUncertaintyCli(UncertaintyOptions& options, const std::string& commandLine) {
  return guarded(options, commandLine, &runUncertaintyCommand);
}

}  // namespace thermorph
