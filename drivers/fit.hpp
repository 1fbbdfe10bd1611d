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
//! CaseError (exit 2). With `boundsOptional`, a bare KEY is an unbounded parameter at the case's value. `option`
//! names the command line's option in messages (sensitivity and uncertainty: --param). `steady`: the runs solve
//! steady states (sensitivity --steady), so the [run] keys of the integration over time are refused too.
std::vector<FitParameter> parseFitParameters(const std::vector<std::string>& free, const std::vector<std::string>& starts,
                                             const std::vector<std::string>& priors, const std::string& caseText,
                                             const std::string& casePath, const std::vector<std::string>& overrides,
                                             bool boundsOptional = false, const std::string& option = "--free",
                                             bool steady = false);

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
  //! RunOptions::coarseSteadyStart of every run (a steady start on a refined grid, e.g. the grid check's, from the
  //! unrefined grid's steady state); false: `fit --cold-start`.
  bool coarseSteadyStart = true;
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

//! The grid check of a fit (drivers/fit_grid.cpp): one run at the fitted values on the grid refined N x and the
//! first-order shift of the optimum it implies (a Gauss-Newton step from the case-grid optimum with the fit's own
//! Jacobian; Bates & Watts 1988, sec. 2.1-2.2, the linear approximation of the model about the estimate).
struct FitGridCheck {
  int refinement = 0;                 //!< N (0: not run)
  long nodes = 0;                     //!< nodes of the refined grid
  double seconds = 0.0;               //!< wall time of the refined run and the estimate
  bool ok = false;
  std::string error;                  //!< why there is no estimate (the refined run failed, no covariance)
  std::vector<double> shift;          //!< per parameter: optimum on the N x grid minus the fitted value, in its unit
  std::vector<double> shiftSe;        //!< shift / standard error
  std::vector<double> bias;           //!< fitted value minus a converged grid's (estimated): -shift N^2 / (N^2 - 1)
  std::vector<double> biasSe;         //!< bias / standard error
  std::vector<double> biasRelative;   //!< |bias / value|
  std::vector<bool> held;             //!< parameters at a bound whose shift points out of the box (held: shift 0)
  std::vector<double> finePredictions;  //!< at the observations, on the N x grid
  std::vector<double> seriesRms;      //!< per series: RMS of (fine - case prediction) / sd
  std::vector<double> seriesMax;      //!< per series: largest |fine - case prediction|, in the series' unit
  std::vector<std::string> warnings;
};

//! Warning levels of the grid check. A bias b standard errors lowers the coverage of a nominal 95 % interval to
//! Phi(1.96 - b) - Phi(-1.96 - b): 94.5 % at b = 0.2 (92.1 % at 0.5, 83 % at 1), below what a coverage study
//! of 50 draws can see (its binomial SE is 3 percentage points), and it adds b^2 = 4 % to the mean squared error
//! (normal distribution; common practice, no source). 1 % of the value: issue 9's criterion for quoted numbers.
constexpr double gridCheckSeFraction = 0.2;
constexpr double gridCheckRelative = 0.01;

//! The least-squares shift of the parameters when the model's predictions change by `change` (weighted, one entry
//! per residual row; prior rows 0): delta = -(J^T J)^-1 J^T change for the weighted Jacobian J [rows x p]
//! (row-major, d weighted residual / d value), columns with `held` dropped (their shift 0). Exact for a model
//! linear in its parameters whose change does not depend on them; first order otherwise. Empty when J is rank
//! deficient.
std::vector<double> leastSquaresShift(const std::vector<double>& jacobian, std::size_t p, const std::vector<double>& change,
                                      const std::vector<bool>& held = {});

//! Run the fitted model on the grid refined `refinement` x and estimate the shift of the optimum (FitGridCheck).
//! `problem` is the fit's problem as given; the run uses the result's pinned grid (r.caseText, r.overrides).
FitGridCheck gridCheck(const FitProblem& problem, const FitResult& r, int refinement);

//! Minimise the weighted squared residuals. Throws CaseError for bad input and SolverError when the model
//! fails at the start; a fit that does not converge returns converged = false with its history.
FitResult runFit(const FitProblem& problem);

//! The `fit` command line.
struct FitOptions {
  std::string casePath;              //!< the case file, or the name a case given as text goes by (relative files)
  std::string caseText;              //!< the case as TOML text ("": read casePath)
  std::vector<std::string> overrides;
  std::vector<std::string> data;     //!< observed CSV files
  std::string dataStart;             //!< ISO date-time of t = 0 for datetime columns
  ObservedData observed;             //!< observed series read elsewhere (the Python module's DataFrames), after the files
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
  //! After the fit: run the fitted model once on the grid refined this many times (0: no check) and estimate
  //! the grid's bias of the fitted values (gridCheck). Default 2: on the example fit (cases/quadruped_fit.md) the
  //! 2x run costs 2.3 s against the fit's 37 s (6 %); 4x about 20x that.
  int gridCheck = 2;
  //! The steady starts of refined runs (the grid check's) by the relaxation from the case's initial temperature
  //! instead of from the unrefined grid's steady state (FitProblem::coarseSteadyStart).
  bool coldStart = false;
  std::string commandLine;
};

//! The problem `fit` solves for these options: the case (text, or the file read), overrides with the fit's
//! tolerances, the observed series (the files, then options.observed) checked against the body, the free
//! parameters and the solver's settings. Appends warnings about the input (series in different units without
//! standard deviations) to `warnings`. Throws CaseError for bad input (exit 2), naming file, column, key and unit.
FitProblem makeFitProblem(const FitOptions& options, std::vector<std::string>& warnings);

//! A fit and its grid check (none when `gridCheck` is 0 or the fit did not converge); the check's warnings are
//! added to the result's.
struct FitOutcome {
  FitResult result;
  FitGridCheck grid;
};
FitOutcome fitAndCheck(const FitProblem& problem, int gridCheck);

//! The names of the observed series in results (/fit/series/NAME): the output's name, "#2", "#3" after repeats.
std::vector<std::string> fitSeriesNames(const ObservedData& data);

//! The report `fit` prints: parameters (value, SE, 95 % interval), correlations, Jacobian methods, RMSE per series,
//! SSR, s^2, AIC/BIC, and the grid check.
std::string fitReport(const FitProblem& problem, const FitResult& result, const FitGridCheck& grid);

//! The case at the fitted values, on the grid the fit's runs used (result.caseText, result.overrides).
Case fittedCase(const FitProblem& problem, const FitResult& result);

//! The fitted run: `body` (built from fittedCase) run with the observation sampler and `observer` (optional).
//! With an `output`, its results go there with the /fit group (written as OUTPUT.fitting.h5, then renamed) and
//! the fitted case beside it as STEM_fitted.toml; without, no file. summary.complete false: the run failed (no file).
struct FittedRun {
  RunSummary summary;
  std::string results, fittedCase;  //!< the files written ("" without an output)
  std::vector<double> modelTimes;   //!< the run's output times [s]
  std::vector<std::vector<double>> modelSeries;  //!< per observed series: the model at every output
};
FittedRun runFitted(const FitProblem& problem, const FitOutcome& outcome, const FitOptions& options, const Body& body,
                    const std::string& output, const OutputObserver& observer);

//! A fit that did not converge: its history in STEM.incomplete.h5 beside `output` (returns the path).
std::string writeIncompleteFit(const FitProblem& problem, const FitResult& result, const FitOptions& options,
                               const std::string& output);

//! Run the `fit` command: exit 0, 2 (bad input) or 3 (no convergence or a model failure; history written).
int runFitCommand(const FitOptions& options);

}  // namespace thermorph
