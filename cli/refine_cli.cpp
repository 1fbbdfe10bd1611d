#include "cli/refine_cli.hpp"

#include <cstdio>
#include <fstream>

#include <fmt/format.h>

#include "cli/exit_codes.hpp"
#include "drivers/refine.hpp"
#include "solver/integrator.hpp"

namespace thermorph {

namespace {
RefineOptions options;
std::string csvPath;
}  // namespace

CLI::App* addRefineSubcommand(CLI::App& app) {
  CLI::App* refine = app.add_subcommand(
      "refine", "Run a case on its grid and on grids refined 2x, 4x (every axial and radial cell count); print the "
                "observed order and Richardson-extrapolated budget and temperatures");
  refine->add_option("case", options.casePath, "Case file (TOML)")->required();
  refine->add_option("--set", options.overrides, "Override a case key: KEY=VALUE")->take_all()->allow_extra_args(false);
  refine->add_option("--levels", options.levels, "Grids 1x, 2x, ... 2^(N-1)x (3 to 5; default 3)");
  refine->add_flag("--steady", options.steady, "Steady states (KINSOL) instead of the transient run");
  refine->add_option("--duration", options.duration, "Shorter run for the study, e.g. \"30 min\" (default: the case's)");
  refine->add_option("--metric", options.metrics,
                     "Quantities as in `thermorph sweep --metric` (default: body budget, core, blood and skin "
                     "temperatures, every segment's budget and mean temperature)")
      ->take_all()
      ->allow_extra_args(false);
  refine->add_option("--window", options.window, "Averaging window START:END (or START,END), e.g. \"30 min:1 h\"; default: the whole run");
  refine->add_option("--csv", csvPath, "Also write the table as CSV to this file");
  refine->add_flag("--cold-start{false}", options.warmStart,
                   "Find every level's steady start (or steady state) from the case's initial temperature (pseudo-time "
                   "relaxation, then KINSOL) instead of by Newton from the coarser level's steady state on the finer "
                   "cells (the default; the same steady state to KINSOL's tolerance)");
  return refine;
}

int runRefineCli() {
  return withExitCodes([&] {
    RefineResult result = runRefinement(options);
    for (const std::string& w : result.warnings) fmt::print(stderr, "warning (1x grid): {}\n", w);
    std::fputs(refineTable(result).c_str(), stdout);
    if (!csvPath.empty()) {
      std::ofstream out(csvPath);
      if (!out) {
        fmt::print(stderr, "error: --csv {}: cannot write the file\n", csvPath);
        return exitBadInput;
      }
      out << refineCsv(result);
    }
    return 0;
  });
}

}  // namespace thermorph
