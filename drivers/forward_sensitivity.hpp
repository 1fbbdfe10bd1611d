#pragma once
//! Forward sensitivities of a run's outputs with respect to case parameters, by CVODES.
//!
//! A parameter "enters the network as a coefficient" when the case built at p + h and at p - h (h = 1e-6 |p|)
//! gives networks of the same structure (solver/assembly.hpp: structuralDifference) on the same geometry (every
//! segment's cell radii, positions and volumes equal) and timeline, with a uniform initial state. Then the
//! sensitivity right-hand side df/dp is assembled with the exact chain rule of the assembly
//! (NetworkSystem::parameterDerivative: conductances, flows, sources, boundary temperatures, capacities, set
//! points, the face balance with its surface model, modulator schedules) from the coefficient differences of the
//! two builds (a deterministic function of p with no solver in it: round-off level, exact for coefficients linear
//! in p), and CVODES integrates s = dy/dp beside the state. Every other parameter (geometry, cell counts, Q10,
//! controller laws, run settings, a steady initial state) is reported as needing finite differences, with the
//! reason.
//!
//! Steady states (KINSOL) get exact sensitivities too, by the implicit function theorem (common practice, no
//! source; e.g. any calculus text on implicit functions): the steady residual F(s, p) = 0 (node heat balances,
//! controller equations) gives ds/dp = -(dF/ds)^{-1} dF/dp, with dF/ds the assembly's exact Jacobian (steady
//! mode) and dF/dp the same chain rule as above, solved with a sparse LU (Eigen). This is the whole derivative of
//! a `--steady` local sensitivity (steadySensitivities), and the initial sensitivity s(0) of a transient run with
//! `run.initial = "steady"` (forwardSensitivities), from which CVODES carries it on.
//!
//! Outputs are whatever a probe computes from the run's outputs (an ObservationSampler for fits, a
//! MetricCollector for local sensitivities); their derivatives follow from the state sensitivities by the chain
//! rule: d g / d p = (g(y + e s) - g(y - e s)) / 2e + (g_{p+h}(y) - g_{p-h}(y)) / 2h, exact for outputs linear
//! in the state (temperatures), second order in e = 1e-4 |p| for heat flows.
#include <functional>
#include <memory>
#include <span>
#include <string>
#include <vector>

#include "models/body.hpp"
#include "drivers/simulation.hpp"

namespace thermorph {

//! Something computed from a run's outputs: observes every output (t = 0 included), then gives its values.
class OutputProbe {
 public:
  virtual ~OutputProbe() = default;
  virtual void observe(double time, std::span<const double> temperatures, const RunSummary& summary) = 0;
  virtual std::vector<double> values() const = 0;
  //! Times between the outputs of a run of `body` at which the probe also observes (RunOptions::observerTimes;
  //! a fit's observations), the steps unchanged. Default: none.
  virtual std::vector<double> observerTimes(const Body&) const { return {}; }
};
using ProbeFactory = std::function<std::unique_ptr<OutputProbe>(const Body&)>;

//! A case key addressed as --set addresses it, at `value` in `unit` ("" : the key's SI unit).
struct SensitivityParameter {
  std::string key, unit;
  double value = 0.0;
};

//! Forward: CVODES forward sensitivities (a steady initial state by the implicit function theorem); Steady: the
//! implicit function theorem at a steady state (no integration); FiniteDifference: central differences of runs.
enum class GradientMethod { Forward, FiniteDifference, Steady };
const char* gradientMethodName(GradientMethod m);  //!< "cvodes", "finite differences" or "implicit function"
inline bool isExact(GradientMethod m) { return m != GradientMethod::FiniteDifference; }

struct ParameterGradient {
  GradientMethod method = GradientMethod::FiniteDifference;
  std::string reason;  //!< why finite differences ("" for forward)
};

//! How each parameter's derivative can be taken at these values (builds the case at p +- h for each).
std::vector<ParameterGradient> classifyParameters(const std::string& caseText, const std::string& casePath,
                                                  const std::vector<std::string>& overrides,
                                                  const std::vector<SensitivityParameter>& parameters);

struct ForwardSensitivityResult {
  bool ok = false;
  std::string error;
  std::vector<double> values;                    //!< the probe's values at the base
  std::vector<std::vector<double>> derivatives;  //!< [parameter][value] d value / d parameter (in its unit); empty
                                                 //!< for a parameter that needs finite differences
  std::vector<ParameterGradient> methods;
  SolverStatistics statistics;
  //! A steady start (forwardSensitivities) or state (steadySensitivities): its counters, and, on a refined grid with
  //! coarseSteadyStart, whether Newton from the unrefined grid's steady state found it (RunSummary::steadyWarm) and
  //! that unrefined solve's counters (RunSummary::coarseStatistics).
  SolverStatistics steadyStatistics, coarseStatistics;
  bool steadyWarm = false;
};

//! One transient run of the case (text, overrides, then every parameter at its value) with CVODES forward
//! sensitivities for the parameters that allow them. Never throws for a model failure: ok = false, error.
//! `errorControl`: include the sensitivities in CVODES' local error test (CVodeSetSensErrCon). Off (default),
//! the run takes the plain run's steps and the sensitivities are those of the same discrete solution (agreement
//! with central differences at tolerances 1e-11: about 1e-7 either way, tests/test_forward_sensitivity.cpp); on,
//! their own truncation error is controlled too, at two to three times the steps. `select` (empty: all) limits
//! the sensitivities to some parameters (the others get no derivative and the reason "not selected"), so that
//! groups of parameters can run on separate threads. `coarseSteadyStart`: a steady start on a refined grid
//! (run.grid_refinement = N > 1) is found as runTransient finds it (RunOptions::coarseSteadyStart): by Newton from the
//! unrefined grid's steady state mapped onto the cells (coarseSteadyGuess), else the relaxation; false: the relaxation
//! (`fit --cold-start`).
ForwardSensitivityResult forwardSensitivities(const std::string& caseText, const std::string& casePath,
                                              const std::vector<std::string>& overrides,
                                              const std::vector<SensitivityParameter>& parameters,
                                              const ProbeFactory& probe, bool errorControl = false,
                                              const std::vector<bool>& select = {}, bool coarseSteadyStart = true);

//! The steady state of the case (text, overrides, then every parameter at its value; KINSOL as runSteady finds
//! it) and the exact derivatives of the probe's values there, ds/dp = -(dF/ds)^{-1} dF/dp for the parameters
//! that enter the network as coefficients (methods: Steady), none for the others (FiniteDifference, with the
//! reason). The probe observes the one output at t = 0, as in runSteady. Never throws for a model failure.
//! `coarseSteadyStart` as for forwardSensitivities (runSteady's warm start on a refined grid).
ForwardSensitivityResult steadySensitivities(const std::string& caseText, const std::string& casePath,
                                             const std::vector<std::string>& overrides,
                                             const std::vector<SensitivityParameter>& parameters,
                                             const ProbeFactory& probe, const std::vector<bool>& select = {},
                                             bool coarseSteadyStart = true);

}  // namespace thermorph
