#pragma once
//! The `refine` subcommand: a grid refinement study of one case (drivers/refine.hpp).
#include <string>

#include <CLI/CLI.hpp>

namespace thermorph {

//! Register `refine` on `app` (its options live in cli/refine_cli.cpp).
CLI::App* addRefineSubcommand(CLI::App& app);

//! Run the parsed study; prints the table and returns the exit code (0, 2 bad input, 3 solver failure).
int runRefineCli();

}  // namespace thermorph
