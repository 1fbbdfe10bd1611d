#pragma once
//! SUNDIALS wrappers: CVODE (BDF, Newton, KLU) for transients, KINSOL for steady states. Every SUNDIALS object
//! is owned through an RAII handle by one class; the system integrated is referenced, never copied.
#include <atomic>
#include <exception>
#include <functional>
#include <memory>
#include <span>
#include <stdexcept>
#include <string>
#include <vector>

#include "solver/assembly.hpp"

struct _generic_N_Vector;
struct _generic_SUNMatrix;
struct _generic_SUNLinearSolver;
struct _SUNContext;

namespace thermorph {

class NewtonSolver;

//! The solver failed (CVODE or KINSOL flag, time reached, worst components by name). Exit code 3.
class SolverError : public std::runtime_error {
 public:
  using std::runtime_error::runtime_error;
};

//! A right-hand-side failure CVODE may retry with a smaller step (returns 1 to SUNDIALS).
class RecoverableError : public std::runtime_error {
 public:
  using std::runtime_error::runtime_error;
};

enum class LinearSolverKind { Klu, Dense };

struct IntegratorOptions {
  double rtol = 1e-6;
  //! Per state component. A component with atol >= excludedTolerance (the cumulative energies) is left out of the
  //! error and Newton convergence norms altogether: the others' weights are scaled by sqrt(N / counted), so the
  //! norms (RMS over N components in CVODE) and the steps are those of a system without the excluded components,
  //! whatever their number.
  std::vector<double> atol;
  static constexpr double excludedTolerance = 1e20;
  double maxStep = 0.0;      //!< [s], 0: none
  LinearSolverKind linearSolver = LinearSolverKind::Klu;
  int maxOrder = 5;
  //! CVODE's BDF stability limit detection (CVodeSetStabLimDet; Hindmarsh et al. 2005, sec. 3.6 of the CVODE
  //! guide): BDF of order 3-5 is not A-stable, and the blood streams' upwind advection gives eigenvalues near the
  //! imaginary axis that order 5 cannot follow at large steps. Without it, a new-user trial's countercurrent legs on
  //! a 2x refined grid (an invented 6 kg swimmer, 19 017 nodes) took 27 124 steps (265 s) where 642 do.
  bool stabilityLimitDetection = true;
  //! Update the Newton matrix I - gamma J at every step (CVodeSetLSetupFrequency 1) instead of CVODE's default
  //! (every 20 steps or when gamma changed by 30 %): the steady start's fallback (drivers/simulation.cpp).
  bool setupEveryStep = false;
};

struct SolverStatistics {
  long steps = 0, rhsEvaluations = 0, jacobianEvaluations = 0, nonlinearIterations = 0, errorTestFailures = 0,
       nonlinearFailures = 0, linearSetups = 0;
  double wallSeconds = 0.0;
  long jacobianNonzeros = 0;  //!< stored entries of the sparse Jacobian
  long factorNonzeros = 0;    //!< entries of KLU's L + U (fill), or of the band LU's storage; 0 for the dense solver
  //! Of the transient Newton solver (solver/newton_solver.hpp): factorisations with a pivot search, numeric
  //! refactorisations with the kept pivots, and KLU's floating-point operations of one factorisation (0: band).
  long factorizations = 0, refactorizations = 0;
  double factorFlops = 0.0;
  long bandwidth = -1;        //!< the band LU's lower + upper bandwidth of the factorised block; -1: KLU (or dense)
  long bandBorder = 0;        //!< components after the band, eliminated by their Schur complement
};

namespace detail {
struct SundialsDeleter {
  void operator()(_SUNContext* p) const;
  void operator()(_generic_N_Vector* p) const;
  void operator()(_generic_SUNMatrix* p) const;
  void operator()(_generic_SUNLinearSolver* p) const;
};
struct MemoryDeleter {
  void (*free)(void**);
  void operator()(void* p) const { free(&p); }
};
template <class T>
using Handle = std::unique_ptr<T, SundialsDeleter>;
using SolverMemory = std::unique_ptr<void, MemoryDeleter>;

//! Exception captured inside a SUNDIALS callback, rethrown (type intact) when the SUNDIALS call returns.
struct CallbackGuard {
  std::exception_ptr error;
  template <class F>
  int run(F&& f) noexcept {
    try {
      f();
      return 0;
    } catch (const RecoverableError&) {
      error = std::current_exception();
      return 1;
    } catch (...) {
      error = std::current_exception();
      return -1;
    }
  }
  void rethrow() {
    if (error) {
      std::exception_ptr e = error;
      error = nullptr;
      std::rethrow_exception(e);
    }
  }
};
}  // namespace detail

//! Forward sensitivities of the state with respect to parameters (CVODES, staggered corrector): for each
//! parameter j, ds_j/dt = J s_j + df/dp_j, with df/dp_j supplied by `derivative` (e.g.
//! NetworkSystem::parameterDerivative) and J the assembly's analytic Jacobian.
struct SensitivityProblem {
  std::size_t count = 0;
  //! df/dp_j at (t, y) given f(t, y) = rhs, into out[j] [size], for every parameter at once.
  std::function<void(double t, std::span<const double> y, std::span<const double> rhs,
                     std::span<const std::span<double>> out)>
      derivative;
  std::vector<std::vector<double>> initial;  //!< s_j(t0) [count][size]
  std::vector<double> scale;                 //!< |p_j|: absolute tolerances of s_j are atol / |p_j|
  bool errorControl = true;                  //!< include the sensitivities in the local error test
};

//! CVODE BDF integrator of a NetworkSystem in transient mode (CVODES library, which holds CVODE's integrator;
//! without sensitivities it takes the same steps as CVODE).
class Integrator {
 public:
  //! `options` by value: a caller that moves them in gives up its absolute tolerances (8 bytes per state component)
  //! before CVODE's vectors are allocated.
  Integrator(const NetworkSystem& system, std::span<const double> initialState, double initialTime,
             IntegratorOptions options);
  ~Integrator();
  Integrator(const Integrator&) = delete;
  Integrator& operator=(const Integrator&) = delete;

  //! Integrate to `time` [s]; the state is interpolated there unless it is the stop time.
  void advanceTo(double time);
  //! The same, one step at a time, returning false as soon as `stop` is set (the state is then that of the last
  //! step taken, and time() its time). Steps and result are those of advanceTo(time): CVODE's normal mode takes
  //! the same steps internally.
  bool advanceTo(double time, const std::atomic<bool>& stop);
  //! The integrator never steps past this time (the next discontinuity or the end of the run) [s].
  void setStopTime(double time);
  //! Restart at a discontinuity (after an event changed the network) from the current state.
  void restart();
  double time() const { return time_; }
  //! True once CVODE has taken a step since its (re)initialisation. Before that, the next advanceTo's time also
  //! bounds CVODE's estimate of the first step (cvHin: at most a tenth of the distance to it), so a caller that
  //! wants the same steps whatever it asks for in between must not ask for an extra time then.
  bool stepped() const;
  //! Before the first step since the (re)initialisation, take that step as a call asking for `target` would (its
  //! size bounded by the distance to `target`, cvHin), so that times asked for before `target` (a fit's
  //! observations between outputs) are interpolated without changing any step; afterwards, nothing. The state
  //! stays that at time() until the next advanceTo.
  void firstStepToward(double target);
  std::span<const double> state() const;
  //! Start forward sensitivities at the current time (before the first advanceTo or after a restart()).
  void enableSensitivities(SensitivityProblem problem);
  //! s_j at time() (after advanceTo(time)); empty without sensitivities.
  std::span<const double> sensitivity(std::size_t j) const;
  std::size_t sensitivityCount() const { return sensitivity_.count; }
  SolverStatistics statistics() const;

 private:
  static int rhsCallback(double t, _generic_N_Vector* y, _generic_N_Vector* ydot, void* self);
  static int sensitivityCallback(int count, double t, _generic_N_Vector* y, _generic_N_Vector* ydot,
                                 _generic_N_Vector** yS, _generic_N_Vector** ySdot, void* self, _generic_N_Vector*,
                                 _generic_N_Vector*);
  void fetchSensitivities();
  static int weightCallback(_generic_N_Vector* y, _generic_N_Vector* weights, void* self);
  static int jacobianCallback(double t, _generic_N_Vector* y, _generic_N_Vector* fy, _generic_SUNMatrix* J,
                              void* self, _generic_N_Vector*, _generic_N_Vector*, _generic_N_Vector*);
  //! The Newton matrix A = I - gamma J for CVODE's sparse (KLU) path, handed to newton_ (which holds it; CVODE's
  //! A is an empty shell): J re-evaluated only when CVODE asks (jok false), kept in jacobianValues_ otherwise.
  //! CVODE's own linear-system function does the same arithmetic (copy of J, SUNMatScaleAddI), but it keeps J in
  //! a second sparse matrix (a clone of A with 64-bit indices, ~16 bytes per Jacobian entry).
  static int linearSystemCallback(double t, _generic_N_Vector* y, _generic_N_Vector* fy, _generic_SUNMatrix* A,
                                  int jok, int* jcur, double gamma, void* self, _generic_N_Vector*,
                                  _generic_N_Vector*, _generic_N_Vector*);
  std::string failureMessage(int flag) const;
  //! A SolverError for CVODE's failure `flag`, with the cause a callback raised (if any).
  [[noreturn]] void throwFailure(int flag);
  static void errorHandler(int code, const char* module, const char* function, char* message, void* self);
  std::string lastMessage_;
  void checkFinite(std::span<const double> values, const char* what) const;

  const NetworkSystem& system_;
  IntegratorOptions options_;  //!< without its atol (kept as atolRuns_)
  struct ToleranceRun {
    Index end;    //!< one past the last component of the run
    double atol;  //!< their absolute tolerance
  };
  std::vector<ToleranceRun> atolRuns_;  //!< options.atol as runs of equal values
  detail::CallbackGuard guard_;
  detail::Handle<_SUNContext> context_;
  detail::Handle<_generic_N_Vector> state_, tolerances_;
  std::unique_ptr<NewtonSolver> newton_;  //!< the KLU path's linear solver (null for the dense one)
  detail::Handle<_generic_SUNMatrix> matrix_;
  detail::Handle<_generic_SUNLinearSolver> linearSolver_;
  detail::SolverMemory memory_;
  std::vector<double> jacobianValues_;
  SensitivityProblem sensitivity_;
  _generic_N_Vector** sensitivityVectors_ = nullptr;  //!< CVODES vector array (N_VCloneVectorArray)
  std::vector<double> sensitivityJacobian_;
  double time_ = 0.0;
  double wallSeconds_ = 0.0;
  double weightScale_ = 1.0;  //!< sqrt(N / counted components); 1: every component counted (CVODE's own weights)
  SolverStatistics previous_;  //!< counters of the intervals before the last restart
};

//! Steady state of a NetworkSystem in steady mode by KINSOL (Newton, line search, KLU, analytic Jacobian).
std::vector<double> solveSteadyState(const NetworkSystem& system, std::span<const double> guess, double time,
                                     SolverStatistics* statistics = nullptr);

//! One linearly implicit Euler step of `step` [s] of a transient NetworkSystem from the state `from` (the whole
//! state vector): y + d with (I - step J) d = step f(y), J and f at `from` (KLU on the analytic Jacobian). Modes much
//! faster than `step` land at their quasi-steady values, slower ones move by about step times their rate. Empty
//! when the linear solve fails; the evaluations' exceptions (a state outside the physical band) pass through.
std::vector<double> linearlyImplicitStep(const NetworkSystem& system, std::span<const double> from, double time,
                                         double step);

}  // namespace thermorph
