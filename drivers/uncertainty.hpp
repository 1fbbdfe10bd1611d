#pragma once
//! Uncertainty propagation: parameter distributions (uniform, normal, log-normal, triangular) or a fit's
//! covariance (multivariate normal), sampled by Latin hypercube or Sobol' points, every sample run on threads
//! (a failed run is recorded and left out); quantiles of every sweep metric and 5-95 % bands of time series.
#include <cstdint>
#include <string>
#include <vector>

namespace thermorph {

struct UncertaintyOptions {
  std::string casePath;
  std::vector<std::string> overrides;
  std::vector<std::string> params;   //!< KEY[UNIT]=DIST
  std::string fromFit;               //!< a fit's results file: its values and covariance
  std::vector<std::string> series;   //!< outputs to band (observed-data names)
  std::size_t samples = 200;
  std::string design = "lhs";        //!< lhs | sobol
  std::uint64_t seed = 1;
  int jobs = 0;
  bool quiet = false;
  std::string output;
  std::string commandLine;
};

//! Exit 0, 2 bad input, 3 when every run failed.
int runUncertaintyCommand(const UncertaintyOptions& options);

}  // namespace thermorph
