#pragma once
//! The `sensitivity` and `uncertainty` subcommands: options (CLI11) and dispatch.
#include <CLI/CLI.hpp>

#include "drivers/sensitivity.hpp"
#include "drivers/uncertainty.hpp"

namespace thermorph {

CLI::App* addSensitivitySubcommand(CLI::App& app, SensitivityOptions& options);
//! Exit 0, 2 bad input, 3 failure, 130/143 stopped.
int runSensitivityCli(SensitivityOptions& options, const std::string& commandLine);

CLI::App* addUncertaintySubcommand(CLI::App& app, UncertaintyOptions& options);
int runUncertaintyCli(UncertaintyOptions& options, const std::string& commandLine);

}  // namespace thermorph
