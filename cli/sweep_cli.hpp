#pragma once
//! The `sweep` subcommand of the command-line driver: its options (CLI11) and its dispatch.
#include <CLI/CLI.hpp>

#include "drivers/sweep.hpp"

namespace thermorph {

//! Register `sweep` on `app`, filling `options` when parsed.
CLI::App* addSweepSubcommand(CLI::App& app, SweepOptions& options);

//! Run the parsed sweep; prints input errors and returns the exit code (0, 2 bad input, 3 failure,
//! 130/143 stopped by SIGINT/SIGTERM).
int runSweepCli(SweepOptions& options, const std::string& commandLine);

}  // namespace thermorph
