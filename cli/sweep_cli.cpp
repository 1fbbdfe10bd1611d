#include "cli/sweep_cli.hpp"

#include "cli/exit_codes.hpp"

#include <fmt/format.h>

#include "solver/integrator.hpp"

namespace thermorph {

CLI::App* addSweepSubcommand(CLI::App& app, SweepOptions& o) {
  CLI::App* sweep = app.add_subcommand(
      "sweep", "Run a case over a grid of parameter values or sizes; one table of metrics per run (HDF5 + CSV)");
  sweep->add_option("case", o.casePath, "Case file (TOML)")->required();
  sweep->add_option("--set", o.overrides, "Override a case key in every run: KEY=VALUE")
      ->take_all()
      ->allow_extra_args(false);
  sweep->add_option("--vary", o.vary,
                    "KEY=SPEC, SPEC \"2 cm:12 cm:11\" (linear), \"log:1 mL/min:100 mL/min:5\" or a list "
                    "\"20degC,40degC\"; several --vary make a full grid (the last varies fastest)")
      ->take_all()
      ->allow_extra_args(false);
  sweep->add_flag("--zip", o.zip, "Vary every axis together (same number of values) instead of a full grid");
  sweep->add_option("--scale", o.scale,
                    "SEGMENT=SPEC or body=SPEC: scale a segment (or every segment) geometrically by each factor")
      ->take_all()
      ->allow_extra_args(false);
  sweep->add_option("--metric", o.metrics,
                    "Keep only these metrics: a name, a prefix (body.heat_flow) or a pattern "
                    "(segments.*.heat_flow.convection); time_to:QUANTITY<VALUE adds a threshold time. Default: all")
      ->take_all()
      ->allow_extra_args(false);
  sweep->add_option("--window", o.window, "Averaging window START:END (or START,END), e.g. \"30 min:1 h\"; default: the whole run");
  sweep->add_flag("--steady", o.steady, "Steady state of every run (KINSOL) instead of the transient run");
  sweep->add_option("-j,--jobs", o.jobs, "Worker threads, up to 1024; 0 or omitted: all cores. Under mpirun one run per rank")
      ->check(CLI::Range(0, 1024));
  sweep->add_option("-o,--output", o.output, "Result table (HDF5); the CSV goes beside it. Default: CASE-NAME_sweep.h5");
  sweep->add_flag("--resume", o.resume, "Continue an interrupted sweep: only runs missing from OUT.progress are run");
  sweep->add_flag("-q,--quiet", o.quiet, "No progress bar");
  sweep->add_flag("--list", o.list, "Print every run's overrides (as --set arguments) and run nothing");
  sweep->footer(sweepHasMpi() ? "\nMPI: built in (mpirun -np N thermorph-mpi sweep ... distributes the runs)\n"
                              : "\nMPI: local threads only; for MPI ranks use thermorph-mpi under mpirun "
                                "(mpirun -np N thermorph-mpi sweep ...)\n");
  return sweep;
}

int runSweepCli(SweepOptions& options, const std::string& commandLine) {
  options.commandLine = commandLine;
  return withExitCodes([&] { return runSweepCommand(options); });
}

}  // namespace thermorph
