#pragma once
//! Exit codes of every subcommand (README "Exit codes") and the one place that turns errors into them.
#include <exception>

#include <fmt/format.h>

#include "models/case.hpp"

namespace thermorph {

inline constexpr int exitBadInput = 2;       //!< the case, a data file or an option is wrong (CaseError)
inline constexpr int exitSolverFailure = 3;  //!< the solver or the file system failed

//! Run `command` (returning an exit code) and report an escaping error on stderr with its exit code: a CaseError
//! (bad input) gives exitBadInput, any other exception exitSolverFailure.
template <class Command>
int withExitCodes(Command&& command) {
  try {
    return command();
  } catch (const CaseError& e) {
    fmt::print(stderr, "error: {}\n", e.what());
    return exitBadInput;
  } catch (const std::exception& e) {
    fmt::print(stderr, "error: {}\n", e.what());
    return exitSolverFailure;
  }
}

}  // namespace thermorph
