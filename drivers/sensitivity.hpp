#pragma once
//! Sensitivity of sweep metrics to case parameters: local (central differences at the base case, normalised
//! coefficients), Morris (1991) elementary effects and Sobol' (1993) indices with the Saltelli et al. (2010)
//! estimators. The runs go through the sweep engine (threads, MPI, resume, failure isolation).
#include <cstdint>
#include <cstdio>
#include <string>
#include <vector>

namespace thermorph {

struct SensitivityOptions {
  std::string casePath;                //!< the case file, or the name of caseText in messages
  std::string caseText;                //!< the case as TOML text ("": read casePath; the Python module's dicts)
  std::vector<std::string> overrides;  //!< --set
  std::string method = "sobol";        //!< local | morris | sobol
  std::vector<std::string> params;     //!< KEY=LOWER:UPPER[:log] (local: KEY, or KEY=... with the base value)
  std::vector<std::string> metrics;    //!< sweep metric selectors (default: every column)
  std::string window;
  bool steady = false;
  std::size_t samples = 0;             //!< sobol: base samples N (default 512); morris: trajectories (default 10)
  std::size_t levels = 4;              //!< morris grid levels
  double step = 1e-3;                  //!< local: relative step of the central difference
  std::string gradient = "auto";       //!< local: auto (CVODES where possible) or fd
  std::size_t bootstrap = 1000;
  std::uint64_t seed = 1;
  int jobs = 0;
  bool resume = false;
  bool quiet = false;
  std::string output;                  //!< indices (HDF5); the runs' sweep table goes beside it as NAME_runs.h5/.csv
  std::string commandLine;
  std::FILE* report = stdout;  //!< the report a person reads (the Python module: a memory stream)
  std::FILE* log = stderr;     //!< warnings, progress and errors
};

//! The options' help texts, shared by the command line (cli/sensitivity_cli.cpp) and the Python module's
//! thermorph.sensitivity (python/thermorph_module.cpp).
namespace sensitivity_help {
inline constexpr const char* command =
    "Sensitivity of sweep metrics to case parameters: local (normalised coefficients), Morris elementary effects or "
    "Sobol' indices; runs on the sweep engine";
inline constexpr const char* set = "Override a case key in every run: KEY=VALUE";
inline constexpr const char* method = "local | morris | sobol (default sobol)";
inline constexpr const char* param =
    "A parameter, addressed as --set addresses it: KEY=LOWER:UPPER[:log] (local: KEY, at the case's value)";
inline constexpr const char* metric = "Metrics as in `sweep --metric` (default: every column)";
inline constexpr const char* window = "Averaging window START:END (as in sweep)";
inline constexpr const char* steady = "Steady state of every run";
inline constexpr const char* samples =
    "Sobol: base samples N, N (k + 2) runs (default 512); Morris: trajectories (default 10)";
inline constexpr const char* levels = "Morris grid levels (even; default 4)";
inline constexpr const char* gradient =
    "Local: auto (CVODES forward sensitivities for parameters that enter the network as coefficients, central "
    "differences for geometry and the rest) or fd (central differences for all); default auto";
inline constexpr const char* step = "Local: relative step of the central difference (default 1e-3)";
inline constexpr const char* bootstrap = "Sobol: bootstrap resamples for the 95 % intervals (default 1000)";
inline constexpr const char* seed = "Seed of the Morris design and the bootstrap (default 1)";
inline constexpr const char* jobs = "Worker threads (default: all cores); under mpirun one run per rank";
inline constexpr const char* output =
    "Indices (HDF5); runs in NAME_runs.h5/.csv beside it. Default: CASE-NAME_METHOD.h5";
}  // namespace sensitivity_help

//! Run the command; exit 0, 2 bad input, 130/143 stopped (continue with --resume).
int runSensitivityCommand(const SensitivityOptions& options);

}  // namespace thermorph
