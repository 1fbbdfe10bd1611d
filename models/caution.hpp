#pragma once
//! The one caution text of thermorph. It is printed on stderr by every subcommand that computes (cli/main.cpp),
//! shown in `--help`, stored as the `caution` attribute of every results and sweep file (drivers/simulation.cpp,
//! drivers/sweep_output.cpp), printed by postproc/report.py and drawn on every figure (postproc). A test
//! (tests/test_caution.py) checks that the copies in postproc/ and the study notes are this exact text.

namespace thermorph {

inline constexpr const char* caution =
    "Model estimates for research only; not veterinary or medical advice. Follow local regulations, "
    "animal-welfare rules and licensed veterinary or medical practice.";

}  // namespace thermorph
