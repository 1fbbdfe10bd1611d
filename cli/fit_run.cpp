// `fit` run in this process (executable thermorph-fit, linked with Ceres; see cli/fit_cli.hpp).
#include <fmt/format.h>

#include "cli/exit_codes.hpp"
#include "cli/fit_cli.hpp"
#include "models/caution.hpp"
#include "solver/integrator.hpp"

namespace thermorph {

int runFitCli(FitOptions& options, const std::string& commandLine) {
  fmt::print(stderr, "Caution: {}\n", caution);
  options.commandLine = commandLine;
  return withExitCodes([&] { return runFitCommand(options); });
}

}  // namespace thermorph
