#pragma once
//! The `fit` subcommand: options (CLI11) and dispatch.
#include <CLI/CLI.hpp>

#include "drivers/fit.hpp"

namespace thermorph {

//! Register `fit` on `app`, filling `options` when parsed.
CLI::App* addFitSubcommand(CLI::App& app, FitOptions& options);
//! Run the parsed fit; prints the caution and input errors; exit 0, 2 bad input, 3 no convergence or a model
//! failure. Two definitions, one per executable: cli/fit_run.cpp (thermorph-fit, linked with Ceres) runs it;
//! cli/fit_exec.cpp (thermorph) replaces the process by thermorph-fit beside it with the same arguments, so
//! that `thermorph` neither links nor loads Ceres and its shared libraries (start-up of every run and check).
int runFitCli(FitOptions& options, const std::string& commandLine);

}  // namespace thermorph
