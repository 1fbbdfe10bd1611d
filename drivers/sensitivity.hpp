#pragma once
//! Sensitivity of sweep metrics to case parameters: local (central differences at the base case, normalised
//! coefficients), Morris (1991) elementary effects and Sobol' (1993) indices with the Saltelli et al. (2010)
//! estimators. The runs go through the sweep engine (threads, MPI, resume, failure isolation).
#include <cstdint>
#include <string>
#include <vector>

namespace thermorph {

struct SensitivityOptions {
  std::string casePath;
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
};

//! Run the command; exit 0, 2 bad input, 130/143 stopped (continue with --resume).
int runSensitivityCommand(const SensitivityOptions& options);

}  // namespace thermorph
