#pragma once
//! The `fit` subcommand: options (CLI11) and dispatch.
#include <CLI/CLI.hpp>

#include "drivers/fit.hpp"

namespace thermorph {

//! Register `fit` on `app`, filling `options` when parsed.
CLI::App* addFitSubcommand(CLI::App& app, FitOptions& options);
//! Run the parsed fit; prints input errors; exit 0, 2 bad input, 3 no convergence or a model failure.
int runFitCli(FitOptions& options, const std::string& commandLine);

}  // namespace thermorph
