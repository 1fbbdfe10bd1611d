// `fit` run in this process (executable thermorph-fit, linked with Ceres; see cli/fit_cli.hpp).
#include <fmt/format.h>

#include "cli/fit_cli.hpp"
#include "models/caution.hpp"
#include "solver/integrator.hpp"

namespace thermorph {

int runFitCli(FitOptions& options, const std::string& commandLine) {
  fmt::print(stderr, "Caution: {}\n", caution);
  options.commandLine = commandLine;
  try {
    return runFitCommand(options);
  } catch (const CaseError& e) {
    fmt::print(stderr, "error: {}\n", e.what());
    return 2;
  } catch (const std::exception& e) {
    fmt::print(stderr, "error: {}\n", e.what());
    return 3;
  }
}

}  // namespace thermorph
