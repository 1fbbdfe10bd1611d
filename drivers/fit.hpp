#pragma once
//! Fitting case parameters to observed series: weighted nonlinear least squares with Ceres Solver, gradients by
//! central finite differences of whole runs (run in parallel on threads), covariance, intervals, correlations,
//! identifiability warnings, RMSE, AIC/BIC; the `fit` command writes the fitted run's results with a /fit group
//! and a case file that reproduces the fitted run.
#include <functional>
#include <limits>
#include <optional>
#include <span>
#include <string>
#include <vector>

#include "models/case.hpp"
#include "drivers/observed.hpp"

namespace thermorph {

//! One free parameter, addressed as `--set` addresses a key; values in `unit`.
struct FitParameter {
  std::string key;
  std::string unit;               //!< unit of lower, upper, start and every reported value ("" : dimensionless)
  double lower = 0.0, upper = 0.0;
  double start = 0.0;
  bool log = false;               //!< optimise ln(value) (lower > 0)
  std::optional<double> priorMean, priorSd;  //!< Gaussian prior, as an extra residual (value - mean) / sd
};

//! The `--set` text of a parameter value ("segments.trunk.coat.thickness=0.012345 m").
std::string parameterOverride(const FitParameter& p, double value);

//! Parse `--free KEY=LO:HI[:log]` against the case (text and --set overrides; the start defaults to the case's
//! value) with the optional `--start KEY=VALUE` and `--prior KEY=MEAN:SD` lists. Checks the key (schema,
//! numeric, segment names), the bounds (loaded by the case loader) and that the start lies within them. Throws
//! CaseError (exit 2). With `boundsOptional`, a bare KEY is an unbounded parameter at the case's value.
std::vector<FitParameter> parseFitParameters(const std::vector<std::string>& free, const std::vector<std::string>& starts,
                                             const std::vector<std::string>& priors, const std::string& caseText,
                                             const std::string& casePath, const std::vector<std::string>& overrides,
                                             bool boundsOptional = false);

//! Everything a fit needs.
struct FitProblem {
  std::string casePath, caseText;
  std::vector<std::string> overrides;  //!< --set, applied before the parameters (also the tolerances of fit runs)
  std::vector<FitParameter> parameters;
  ObservedData data;
  int jobs = 0;                        //!< threads for the finite-difference runs (0: every core)
  double step = 1e-4;                  //!< finite-difference step in the scaled variable (relative, or in ln)
  int maxIterations = 50;
  int starts = 1;                      //!< multi-start: starts - 1 extra points of a Sobol design in the bounds
  bool quiet = true;
  //! Jacobian columns: "auto" (CVODES forward sensitivities for parameters that enter the network as
  //! coefficients, central differences of whole runs for the rest) or "fd" (central differences for all).
  std::string gradient = "auto";
  //! Convergence: the Gauss-Newton step from the current point, in standard errors (sqrt(p) times the relative
  //! offset of Bates & Watts 1981), below this. 0.01: the optimum lies within 1 % of a standard error.
  double stepTolerance = 0.01;
  //! Fix every run's cell counts at the grid of the start values (the automatic grid depends on parameters).
  bool pinGrid = true;
};

//! One model evaluation at parameter values x: predictions at every observation (ObservedData order).
struct Evaluation {
  bool ok = false;
  std::string error;
  std::vector<double> predictions;
};
Evaluation evaluateModel(const FitProblem& problem, std::span<const double> x);
//! Many evaluations on `jobs` threads (results in order).
std::vector<Evaluation> evaluateMany(const FitProblem& problem, const std::vector<std::vector<double>>& xs, int jobs);

struct FitIteration {
  int iteration = 0;
  double cost = 0.0;              //!< half the weighted sum of squares (Ceres' cost)
  double gradientNorm = 0.0;      //!< max norm, scaled variables
  double stepNorm = 0.0;
  bool successful = false;
  std::vector<double> values;     //!< parameter values after the iteration
  int start = 0;                  //!< which start of a multi-start
  double stepSe = std::numeric_limits<double>::quiet_NaN();  //!< Gauss-Newton step in standard errors (NaN: none)
};

struct FitResult {
  bool converged = false;
  std::string message;            //!< Ceres' termination message
  std::vector<double> values, standardErrors, lower95, upper95;
  std::vector<double> covariance;   //!< [p x p] row-major, in the parameters' units
  std::vector<double> correlation;  //!< [p x p]
  std::vector<double> jacobian;     //!< [rows x p] d(weighted residual)/d(value), data rows then prior rows
  std::vector<double> singularValues;  //!< of the column-scaled Jacobian, largest first
  std::vector<double> predictions, residuals, weightedResiduals;  //!< at the observations
  std::vector<double> rmse;       //!< per series, in its unit
  double ssr = 0.0;               //!< weighted sum of squared data residuals
  double sigma2 = 0.0;            //!< ssr / (n - p): residual variance factor
  std::size_t n = 0;              //!< observations
  double aic = 0.0, bic = 0.0;
  double tQuantile = 0.0;         //!< Student t, 0.975, n - p degrees of freedom
  std::vector<std::string> warnings;
  std::vector<FitIteration> history;
  std::vector<std::vector<double>> startPoints;  //!< multi-start: initial values of every start
  std::vector<double> startCosts;                //!< final cost of every start (NaN: failed)
  long runs = 0;                  //!< model runs (a run with sensitivities counts once)
  double wallSeconds = 0.0;
  std::vector<std::string> gradientMethods;  //!< per parameter: "cvodes" or "finite differences"
  std::vector<std::string> gradientReasons;  //!< per parameter: why finite differences ("" for cvodes)
  //! The case text and overrides every run of the fit used: the grid of the start values written out (pinned).
  std::string caseText;
  std::vector<std::string> overrides;
  bool gridPinned = false;
  long gridNodes = 0;
};

//! Minimise the weighted squared residuals. Throws CaseError for bad input and SolverError when the model
//! fails at the start; a fit that does not converge returns converged = false with its history.
FitResult runFit(const FitProblem& problem);

//! The `fit` command line.
struct FitOptions {
  std::string casePath;
  std::vector<std::string> overrides;
  std::vector<std::string> data;     //!< observed CSV files
  std::string dataStart;             //!< ISO date-time of t = 0 for datetime columns
  std::vector<std::string> free, starts, priors;
  std::string output;                //!< HDF5 of the fitted run + /fit; the fitted case goes beside it
  int jobs = 0;
  int maxIterations = 50;
  int multiStart = 1;
  double step = 1e-4;
  //! Tolerances of the fit's runs (0: keep the case's). 1e-7: on the example fit (cases/quadruped_fit.md) the
  //! predictions at 1e-7 differ from those at 1e-10 by at most 3e-4 of the noise SD (1e-6: 2.4e-3, 1e-8: 3e-5),
  //! far below the 0.01 SE convergence test; 1.4x fewer steps than 1e-8.
  double rtol = 1e-7;
  double stepTolerance = 0.01;       //!< see FitProblem::stepTolerance
  std::string gradient = "auto";     //!< auto | fd (see FitProblem::gradient)
  bool quiet = false;
  std::string commandLine;
};

//! Run the `fit` command: exit 0, 2 (bad input) or 3 (no convergence or a model failure; history written).
int runFitCommand(const FitOptions& options);

}  // namespace thermorph
