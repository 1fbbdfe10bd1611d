#pragma once
//! Uncertainty propagation: parameter distributions (uniform, normal, log-normal, triangular) or a fit's
//! covariance (multivariate normal), sampled by Latin hypercube or Sobol' points, every sample run on threads
//! (a failed run is recorded and left out); quantiles of every sweep metric and 5-95 % bands of time series.
#include <cstdint>
#include <cstdio>
#include <string>
#include <vector>

namespace thermorph {

struct UncertaintyOptions {
  std::string casePath;              //!< the case file, or the name of caseText in messages
  std::string caseText;              //!< the case as TOML text ("": read casePath; the Python module's dicts)
  std::vector<std::string> overrides;
  std::vector<std::string> params;   //!< KEY[UNIT]=DIST
  std::string fromFit;               //!< a fit's results file: its values and covariance
  std::vector<std::string> series;   //!< outputs to band (observed-data names)
  std::vector<std::string> metrics;  //!< as sweep --metric: selectors and time_to: thresholds (default: every column)
  std::string window;                //!< as sweep --window (default: the whole run)
  std::size_t samples = 200;
  std::string design = "lhs";        //!< lhs | sobol
  std::uint64_t seed = 1;
  int jobs = 0;
  bool quiet = false;
  std::string output;
  std::string commandLine;
  std::FILE* report = stdout;  //!< the report a person reads (the Python module: a memory stream)
  std::FILE* log = stderr;     //!< warnings, progress and errors
};

//! The options' help texts, shared by the command line (cli/sensitivity_cli.cpp) and the Python module's
//! thermorph.uncertainty (python/thermorph_module.cpp).
namespace uncertainty_help {
inline constexpr const char* command =
    "Propagate parameter distributions (or a fit's covariance) through the model: quantiles of metrics and 5-95 % "
    "bands of time series";
inline constexpr const char* set = "Override a case key in every run: KEY=VALUE";
inline constexpr const char* param =
    "KEY=DIST in the unit of UNIT: KEY[UNIT]=uniform:LO:HI | normal:MEAN:SD | lognormal:MEDIAN:GSD | "
    "triangular:LO:MODE:HI, e.g. \"environment.temperature[degC]=normal:10:2\"";
inline constexpr const char* fromFit =
    "Sample the fitted parameters from a fit's results (multivariate normal, its covariance)";
inline constexpr const char* series =
    "Time series to band, as observed-data outputs (body.core_temperature, segments.NAME.mean_temperature, ...)";
inline constexpr const char* metric =
    "Metrics as in `sweep --metric` (default: every column), e.g. \"time_to:body.core_temperature<35 degC\"";
inline constexpr const char* window = "Averaging window START:END (as in sweep)";
inline constexpr const char* samples = "Runs (default 200)";
inline constexpr const char* design = "lhs (Latin hypercube, default) or sobol (quasi-random)";
inline constexpr const char* seed = "Seed of the Latin hypercube (default 1)";
inline constexpr const char* jobs = "Threads (default: all cores)";
inline constexpr const char* output = "Quantiles and bands (HDF5). Default: CASE-NAME_uncertainty.h5";
}  // namespace uncertainty_help

//! Exit 0, 2 bad input, 3 when every run failed.
int runUncertaintyCommand(const UncertaintyOptions& options);

}  // namespace thermorph
