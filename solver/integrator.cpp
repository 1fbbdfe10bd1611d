#include "solver/integrator.hpp"

#include <cvodes/cvodes.h>
#include <kinsol/kinsol.h>
#include <nvector/nvector_serial.h>
#include <sundials/sundials_context.h>
#include <sunlinsol/sunlinsol_dense.h>
#include <sunlinsol/sunlinsol_klu.h>
#include <sunmatrix/sunmatrix_dense.h>
#include <sunmatrix/sunmatrix_sparse.h>

#include <algorithm>
#include <cstdlib>
#include <chrono>
#include <cmath>
#include <numeric>

#include <fmt/format.h>

#include "solver/fast_kernels.hpp"
#include "solver/newton_solver.hpp"

namespace thermorph {

namespace detail {
void SundialsDeleter::operator()(_SUNContext* p) const { SUNContext_Free(&p); }
void SundialsDeleter::operator()(_generic_N_Vector* p) const { N_VDestroy(p); }
void SundialsDeleter::operator()(_generic_SUNMatrix* p) const { SUNMatDestroy(p); }
void SundialsDeleter::operator()(_generic_SUNLinearSolver* p) const { SUNLinSolFree(p); }
}  // namespace detail

namespace {

std::span<double> view(N_Vector v) {
  return {N_VGetArrayPointer(v), static_cast<std::size_t>(N_VGetLength(v))};
}

void check(int flag, const char* call) {
  if (flag < 0) throw SolverError(fmt::format("SUNDIALS call {} failed with flag {}", call, flag));
}

template <class T>
T* checkCreated(T* p, const char* what) {
  if (!p) throw SolverError(fmt::format("SUNDIALS could not create {}", what));
  return p;
}

//! The text of a SUNDIALS flag name, which SUNDIALS allocates with malloc for the caller to free.
std::string flagName(char* name) {
  std::string text = name ? name : "unknown flag";
  std::free(name);
  return text;
}

//! Copy the CSC pattern and values into a SUNDIALS matrix (sparse or dense).
void fillMatrix(SUNMatrix J, const SparsePattern& pattern, std::span<const double> values) {
  if (SUNMatGetID(J) == SUNMATRIX_SPARSE) {
    sunindextype* colptr = SUNSparseMatrix_IndexPointers(J);
    sunindextype* rows = SUNSparseMatrix_IndexValues(J);
    double* data = SUNSparseMatrix_Data(J);
    for (Index c = 0; c <= pattern.size; ++c) colptr[c] = static_cast<sunindextype>(pattern.columnStart[c]);
    for (Index p = 0; p < pattern.nonzeros(); ++p) {
      rows[p] = static_cast<sunindextype>(pattern.rowIndex[p]);
      data[p] = values[p];
    }
  } else {
    SUNMatZero(J);
    for (Index c = 0; c < pattern.size; ++c)
      for (Index p = pattern.columnStart[c]; p < pattern.columnStart[c + 1]; ++p)
        SM_ELEMENT_D(J, pattern.rowIndex[p], c) = values[p];
  }
}

}  // namespace

Integrator::Integrator(const NetworkSystem& system, std::span<const double> initialState, double initialTime,
                       IntegratorOptions options)
    : system_(system), options_(std::move(options)), memory_(nullptr, detail::MemoryDeleter{CVodeFree}),
      time_(initialTime) {
  const IntegratorOptions& o = options_;
  SUNContext ctx = nullptr;
  check(SUNContext_Create(nullptr, &ctx), "SUNContext_Create");
  context_.reset(ctx);
  const auto n = static_cast<sunindextype>(system.size());
  state_.reset(checkCreated(N_VNew_Serial(n, ctx), "the state vector"));
  useFastVectorOperations(state_.get());  // CVODE's own vectors are clones of this one
  std::copy(initialState.begin(), initialState.end(), view(state_.get()).begin());
  tolerances_.reset(checkCreated(N_VNew_Serial(n, ctx), "the tolerance vector"));
  useFastVectorOperations(tolerances_.get());
  auto atol = view(tolerances_.get());
  if (o.atol.size() != atol.size()) throw std::invalid_argument("atol must have one entry per state");
  std::copy(o.atol.begin(), o.atol.end(), atol.begin());
  // The weight callback and the sensitivities read the tolerances as runs of equal values (a body has three:
  // temperatures, controller states, energies), not as a copy of the vector (8 bytes per node).
  for (Index i = 0; i < o.atol.size(); ++i)
    if (atolRuns_.empty() || atolRuns_.back().atol != o.atol[i])
      atolRuns_.push_back({i + 1, o.atol[i]});
    else
      atolRuns_.back().end = i + 1;
  atolRuns_.shrink_to_fit();
  const auto counted = std::count_if(o.atol.begin(), o.atol.end(),
                                     [](double a) { return a < IntegratorOptions::excludedTolerance; });
  std::vector<double>().swap(options_.atol);

  memory_.reset(checkCreated(CVodeCreate(CV_BDF, ctx), "CVODE memory"));
  void* mem = memory_.get();
  check(CVodeInit(mem, &Integrator::rhsCallback, initialTime, state_.get()), "CVodeInit");
  if (counted == 0) throw std::invalid_argument("every state component is excluded from the error test");
  if (counted < n) {
    // Excluded components get weight 0; the others sqrt(N / counted) / (rtol |y| + atol), so CVODE's RMS norms
    // over all N components equal the norms over the counted ones (the steps do not depend on how many
    // accumulators ride along).
    weightScale_ = std::sqrt(static_cast<double>(n) / static_cast<double>(counted));
    check(CVodeWFtolerances(mem, &Integrator::weightCallback), "CVodeWFtolerances");
  } else {
    check(CVodeSVtolerances(mem, o.rtol, tolerances_.get()), "CVodeSVtolerances");
  }
  // CVODE keeps its own copy of the tolerances (CVodeSVtolerances clones the vector) and the weight callback and
  // the sensitivities read atolRuns_: one state-sized vector less (8 bytes per node).
  tolerances_.reset();
  check(CVodeSetUserData(mem, this), "CVodeSetUserData");
  // CVODE's own messages go into the failure message, not straight to stderr (sweeps run many solvers).
  check(CVodeSetErrHandlerFn(mem, &Integrator::errorHandler, this), "CVodeSetErrHandlerFn");
  check(CVodeSetMaxNumSteps(mem, 1'000'000), "CVodeSetMaxNumSteps");
  check(CVodeSetMaxOrd(mem, o.maxOrder), "CVodeSetMaxOrd");
  if (o.stabilityLimitDetection) check(CVodeSetStabLimDet(mem, SUNTRUE), "CVodeSetStabLimDet");
  if (o.maxStep > 0.0) check(CVodeSetMaxStep(mem, o.maxStep), "CVodeSetMaxStep");
  if (o.setupEveryStep) check(CVodeSetLSetupFrequency(mem, 1), "CVodeSetLSetupFrequency");
  const SparsePattern& pattern = system.pattern();
  jacobianValues_.resize(pattern.nonzeros());
  if (o.linearSolver == LinearSolverKind::Klu) {
    // Our own direct solver on KLU's 32-bit interface (solver/newton_solver.hpp): it factorises the node and
    // controller block of I - gamma J only (the cumulative energies follow by substitution) and holds the matrix
    // itself; CVODE gets an empty matrix. Row scaling off and no check of the matrix at every factorisation
    // (scale < 0): I - gamma J is well scaled by construction (rows of dT/dt) and the pattern is ours and valid.
    // AMD ordering: half the fill of COLAMD on bodies of many 2-D segments (tests/bench/whole_body_bench.sh).
    // The junctions' pair terms come as rank-one terms (NetworkSystem::junctionTerms), factorised in the
    // augmented sparse form instead of a dense block per junction region.
    newton_ = std::make_unique<NewtonSolver>(pattern, system.nodeCount() + system.controlCount(), -1,
                                             system.junctionTerms());
    matrix_.reset(checkCreated(NewtonSolver::shellMatrix(ctx), "the Newton matrix"));
    linearSolver_.reset(checkCreated(newton_->sundialsSolver(ctx), "the KLU solver"));
  } else {
    matrix_.reset(checkCreated(SUNDenseMatrix(n, n, ctx), "the dense Jacobian"));
    linearSolver_.reset(checkCreated(SUNLinSol_Dense(state_.get(), matrix_.get(), ctx), "the dense solver"));
  }
  check(CVodeSetLinearSolver(mem, linearSolver_.get(), matrix_.get()), "CVodeSetLinearSolver");
  if (o.linearSolver == LinearSolverKind::Klu) {
    check(CVodeSetLinSysFn(mem, &Integrator::linearSystemCallback), "CVodeSetLinSysFn");
  } else {
    check(CVodeSetJacFn(mem, &Integrator::jacobianCallback), "CVodeSetJacFn");
  }
}

int Integrator::weightCallback(N_Vector y, N_Vector weights, void* user) {
  auto* self = static_cast<Integrator*>(user);
  auto v = view(y);
  auto w = view(weights);
  const double rtol = self->options_.rtol, scale = self->weightScale_;
  std::size_t i = 0;
  for (const ToleranceRun& run : self->atolRuns_) {
    const double atol = run.atol;
    if (atol < IntegratorOptions::excludedTolerance)
      for (; i < run.end; ++i) w[i] = scale / (rtol * std::abs(v[i]) + atol);
    else
      for (; i < run.end; ++i) w[i] = 0.0;
  }
  return 0;
}

Integrator::~Integrator() {
  if (sensitivityVectors_) N_VDestroyVectorArray(sensitivityVectors_, static_cast<int>(sensitivity_.count));
}

void Integrator::enableSensitivities(SensitivityProblem problem) {
  if (sensitivityVectors_) throw std::logic_error("sensitivities are already enabled");
  if (problem.count == 0) return;
  if (problem.initial.size() != problem.count || problem.scale.size() != problem.count || !problem.derivative)
    throw std::invalid_argument("a sensitivity problem needs an initial vector, a scale and a derivative per parameter");
  const int ns = static_cast<int>(problem.count);
  sensitivity_ = std::move(problem);
  sensitivityVectors_ = checkCreated(N_VCloneVectorArray(ns, state_.get()), "the sensitivity vectors");
  for (std::size_t j = 0; j < sensitivity_.count; ++j) {
    auto v = view(sensitivityVectors_[j]);
    if (sensitivity_.initial[j].size() != v.size()) throw std::invalid_argument("a sensitivity's initial vector has the wrong size");
    std::copy(sensitivity_.initial[j].begin(), sensitivity_.initial[j].end(), v.begin());
  }
  void* mem = memory_.get();
  check(CVodeSensInit(mem, ns, CV_STAGGERED, &Integrator::sensitivityCallback, sensitivityVectors_), "CVodeSensInit");
  // Absolute tolerance of s_j: the state's over |p_j| (a change of p by its own size moves y by atol at most).
  N_Vector* tolerances = checkCreated(N_VCloneVectorArray(ns, state_.get()), "the sensitivity tolerances");
  for (std::size_t j = 0; j < sensitivity_.count; ++j) {
    const double scale = sensitivity_.scale[j] > 0.0 ? sensitivity_.scale[j] : 1.0;
    auto t = view(tolerances[j]);
    // The state's weight scaling (excluded components) applies to the sensitivities too: tolerances / weightScale_.
    Index i = 0;
    for (const ToleranceRun& run : atolRuns_)
      for (; i < run.end; ++i) t[i] = run.atol / scale / weightScale_;
  }
  const int flag = CVodeSensSVtolerances(mem, options_.rtol / weightScale_, tolerances);
  N_VDestroyVectorArray(tolerances, ns);
  check(flag, "CVodeSensSVtolerances");
  check(CVodeSetSensErrCon(mem, sensitivity_.errorControl ? SUNTRUE : SUNFALSE), "CVodeSetSensErrCon");
  sensitivityJacobian_.resize(system_.pattern().nonzeros());
}

std::span<const double> Integrator::sensitivity(std::size_t j) const {
  if (!sensitivityVectors_ || j >= sensitivity_.count) return {};
  return view(sensitivityVectors_[j]);
}

void Integrator::fetchSensitivities() {
  if (sensitivityVectors_) check(CVodeGetSensDky(memory_.get(), time_, 0, sensitivityVectors_), "CVodeGetSensDky");
}

int Integrator::sensitivityCallback(int count, double t, N_Vector y, N_Vector ydot, N_Vector* yS, N_Vector* ySdot,
                                    void* user, N_Vector, N_Vector) {
  auto* self = static_cast<Integrator*>(user);
  return self->guard_.run([&] {
    // ds_j/dt = J s_j + df/dp_j, J assembled once for all parameters.
    self->system_.jacobian(t, view(y), self->sensitivityJacobian_);
    const SparsePattern& pattern = self->system_.pattern();
    std::vector<std::span<double>> outs;
    for (int j = 0; j < count; ++j) outs.push_back(view(ySdot[j]));
    self->sensitivity_.derivative(t, view(y), view(ydot), outs);
    for (int j = 0; j < count; ++j) {
      auto out = outs[static_cast<std::size_t>(j)];
      auto sj = view(yS[j]);
      for (Index c = 0; c < pattern.size; ++c) {
        const double v = sj[c];
        if (v == 0.0) continue;
        for (Index p = pattern.columnStart[c]; p < pattern.columnStart[c + 1]; ++p)
          out[pattern.rowIndex[p]] += self->sensitivityJacobian_[p] * v;
      }
      self->system_.addJunctionProduct(sj, out);
    }
  });
}

std::span<const double> Integrator::state() const { return view(state_.get()); }

void Integrator::errorHandler(int, const char*, const char*, char* message, void* self) {
  static_cast<Integrator*>(self)->lastMessage_ = message ? message : "";
}

int Integrator::rhsCallback(double t, N_Vector y, N_Vector ydot, void* user) {
  auto* self = static_cast<Integrator*>(user);
  return self->guard_.run([&] {
    self->system_.evaluate(t, view(y), view(ydot));
#ifndef NDEBUG
    self->checkFinite(view(ydot), "the time derivative");
#endif
  });
}

int Integrator::jacobianCallback(double t, N_Vector y, N_Vector, SUNMatrix J, void* user, N_Vector, N_Vector,
                                 N_Vector) {
  auto* self = static_cast<Integrator*>(user);
  return self->guard_.run([&] {
    self->system_.jacobian(t, view(y), self->jacobianValues_);
    fillMatrix(J, self->system_.pattern(), self->jacobianValues_);
    for (const RankOneTerm& term : self->system_.junctionTerms())  // the dense matrix takes them as they are
      for (auto [row, u] : term.u)
        for (auto [col, v] : term.v) SM_ELEMENT_D(J, row, col) += u * v;
  });
}

int Integrator::linearSystemCallback(double t, N_Vector y, N_Vector, SUNMatrix, int jok, int* jcur, double gamma,
                                     void* user, N_Vector, N_Vector, N_Vector) {
  auto* self = static_cast<Integrator*>(user);
  return self->guard_.run([&] {
    if (jok) {
      *jcur = SUNFALSE;
    } else {
      self->system_.jacobian(t, view(y), self->jacobianValues_);
      *jcur = SUNTRUE;
    }
    self->newton_->setMatrix(self->jacobianValues_, 1.0, -gamma);
  });
}

void Integrator::checkFinite(std::span<const double> values, const char* what) const {
  for (Index i = 0; i < values.size(); ++i)
    if (!std::isfinite(values[i])) {
      const Network& n = system_.network();
      const Index channels = system_.channelCount(), controls = system_.nodeCount() + system_.controlCount();
      std::string name = i < system_.nodeCount() ? n.label(i)
                         : i < controls          ? "controller " + std::to_string(i - system_.nodeCount())
                         : i < system_.groupEnergyOffset()
                             ? "energy of channel " + n.channels[i - controls]
                             : "energy of " + n.groups[(i - system_.groupEnergyOffset()) / channels] + " by " +
                                   n.channels[(i - system_.groupEnergyOffset()) % channels];
      throw SolverError(fmt::format("{} is not finite at t = {:g} s: {} = {}", what, time_, name, values[i]));
    }
}

std::string Integrator::failureMessage(int flag) const {
  void* mem = memory_.get();
  double reached = time_;
  CVodeGetCurrentTime(mem, &reached);
  std::string message = fmt::format("CVODE failed with {} ({}) at t = {:.6g} s", flagName(CVodeGetReturnFlagName(flag)),
                                    flag, reached);
  if (!lastMessage_.empty()) message += " (" + lastMessage_ + ")";
  // Name the components with the largest weighted local error.
  const auto n = static_cast<sunindextype>(system_.size());
  detail::Handle<_generic_N_Vector> weights(N_VNew_Serial(n, context_.get()));
  detail::Handle<_generic_N_Vector> errors(N_VNew_Serial(n, context_.get()));
  if (weights && errors && CVodeGetErrWeights(mem, weights.get()) == CV_SUCCESS &&
      CVodeGetEstLocalErrors(mem, errors.get()) == CV_SUCCESS) {
    auto w = view(weights.get());
    auto e = view(errors.get());
    std::vector<Index> order(system_.nodeCount());
    std::iota(order.begin(), order.end(), 0);
    auto score = [&](Index i) { return std::abs(w[i] * e[i]); };
    std::partial_sort(order.begin(), order.begin() + std::min<std::ptrdiff_t>(3, std::ssize(order)), order.end(),
                      [&](Index a, Index b) { return score(a) > score(b); });
    message += "; largest weighted errors:";
    for (std::size_t k = 0; k < std::min<std::size_t>(3, order.size()); ++k)
      message += fmt::format(" [{}: {:.3g}]", system_.network().label(order[k]), score(order[k]));
  }
  return message;
}

void Integrator::advanceTo(double time) {
  if (time <= time_) return;
  auto start = std::chrono::steady_clock::now();
  void* mem = memory_.get();
  double reached = time_;
  int flag = CVode(mem, time, state_.get(), &reached, CV_NORMAL);
  wallSeconds_ += std::chrono::duration<double>(std::chrono::steady_clock::now() - start).count();
  if (flag < 0) {
    CVodeGetCurrentTime(mem, &time_);
    throwFailure(flag);
  }
  time_ = time;
  checkFinite(state(), "the state");
  fetchSensitivities();
}

bool Integrator::advanceTo(double time, const std::atomic<bool>& stop) {
  if (time <= time_) return true;
  auto start = std::chrono::steady_clock::now();
  void* mem = memory_.get();
  double reached = time_;
  CVodeGetCurrentTime(mem, &reached);  // the last step may already have passed `time`
  int flag = CV_SUCCESS;
  bool stopped = false;
  while (reached < time) {
    if (stop.load(std::memory_order_relaxed)) {
      stopped = true;
      break;
    }
    flag = CVode(mem, time, state_.get(), &reached, CV_ONE_STEP);
    if (flag < 0 || flag == CV_TSTOP_RETURN) break;
  }
  // The state at `time` from the last step's interpolating polynomial, as CVODE's normal mode gives it (at the
  // step's end this is the step's own solution).
  if (!stopped && flag >= 0) flag = CVodeGetDky(mem, time, 0, state_.get());
  wallSeconds_ += std::chrono::duration<double>(std::chrono::steady_clock::now() - start).count();
  if (flag < 0) {
    CVodeGetCurrentTime(mem, &time_);
    throwFailure(flag);
  }
  time_ = stopped ? reached : time;
  checkFinite(state(), "the state");
  if (!stopped) fetchSensitivities();
  return !stopped;
}

void Integrator::setStopTime(double time) { check(CVodeSetStopTime(memory_.get(), time), "CVodeSetStopTime"); }

void Integrator::restart() {
  // CVodeReInit zeroes CVODE's counters: keep the totals of the intervals before.
  SolverStatistics s = statistics();
  s.wallSeconds = 0.0;
  previous_ = s;
  check(CVodeReInit(memory_.get(), time_, state_.get()), "CVodeReInit");
  if (sensitivityVectors_) check(CVodeSensReInit(memory_.get(), CV_STAGGERED, sensitivityVectors_), "CVodeSensReInit");
}

bool Integrator::stepped() const {
  long steps = 0;
  CVodeGetNumSteps(memory_.get(), &steps);
  return steps > 0;
}

void Integrator::throwFailure(int flag) {
  std::string message = failureMessage(flag);
  if (guard_.error) {
    try {
      guard_.rethrow();
    } catch (const std::exception& e) {
      throw SolverError(message + "; cause: " + e.what());
    }
  }
  throw SolverError(message);
}

void Integrator::firstStepToward(double target) {
  if (target <= time_ || stepped()) return;
  auto start = std::chrono::steady_clock::now();
  void* mem = memory_.get();
  double reached = time_;
  // CVODE's output vector receives y(t_n): the state at time() is put back (a copy for one step per restart).
  const std::span<const double> now = state();
  const std::vector<double> kept(now.begin(), now.end());
  const int flag = CVode(mem, target, state_.get(), &reached, CV_ONE_STEP);
  std::copy(kept.begin(), kept.end(), view(state_.get()).begin());
  wallSeconds_ += std::chrono::duration<double>(std::chrono::steady_clock::now() - start).count();
  if (flag < 0) throwFailure(flag);
}

SolverStatistics Integrator::statistics() const {
  SolverStatistics s;
  void* mem = memory_.get();
  CVodeGetNumSteps(mem, &s.steps);
  CVodeGetNumRhsEvals(mem, &s.rhsEvaluations);
  CVodeGetNumJacEvals(mem, &s.jacobianEvaluations);
  CVodeGetNumNonlinSolvIters(mem, &s.nonlinearIterations);
  CVodeGetNumErrTestFails(mem, &s.errorTestFailures);
  CVodeGetNumNonlinSolvConvFails(mem, &s.nonlinearFailures);
  CVodeGetNumLinSolvSetups(mem, &s.linearSetups);
  s.steps += previous_.steps;
  s.rhsEvaluations += previous_.rhsEvaluations;
  s.jacobianEvaluations += previous_.jacobianEvaluations;
  s.nonlinearIterations += previous_.nonlinearIterations;
  s.errorTestFailures += previous_.errorTestFailures;
  s.nonlinearFailures += previous_.nonlinearFailures;
  s.linearSetups += previous_.linearSetups;
  s.wallSeconds = wallSeconds_;
  s.jacobianNonzeros = static_cast<long>(system_.pattern().nonzeros());
  if (newton_) {
    s.factorNonzeros = newton_->factorNonzeros();
    s.factorizations = newton_->factorizations();
    s.refactorizations = newton_->refactorizations();
    s.factorFlops = newton_->factorFlops();
    if (newton_->banded()) {
      s.bandwidth = static_cast<long>(newton_->lowerBandwidth() + newton_->upperBandwidth());
      s.bandBorder = static_cast<long>(newton_->bandBorder());
    }
  }
  return s;
}

// ---- KINSOL -------------------------------------------------------------------------------------

namespace {

struct SteadyProblem {
  const NetworkSystem* system;
  double time;
  detail::CallbackGuard guard;
  std::vector<double> values;
  NewtonSolver* newton = nullptr;  //!< the linear solver when the junctions come in rank-one form
};

int steadyResidual(N_Vector u, N_Vector f, void* user) {
  auto* p = static_cast<SteadyProblem*>(user);
  return p->guard.run([&] { p->system->evaluate(p->time, view(u), view(f)); });
}

int steadyJacobian(N_Vector u, N_Vector, SUNMatrix J, void* user, N_Vector, N_Vector) {
  auto* p = static_cast<SteadyProblem*>(user);
  return p->guard.run([&] {
    p->system->jacobian(p->time, view(u), p->values);
    if (p->newton)
      p->newton->setMatrix(p->values, 0.0, 1.0);
    else
      fillMatrix(J, p->system->pattern(), p->values);
  });
}

}  // namespace

std::vector<double> solveSteadyState(const NetworkSystem& system, std::span<const double> guess, double time,
                                     SolverStatistics* statistics) {
  auto start = std::chrono::steady_clock::now();
  SUNContext raw = nullptr;
  check(SUNContext_Create(nullptr, &raw), "SUNContext_Create");
  detail::Handle<_SUNContext> ctx(raw);
  const auto n = static_cast<sunindextype>(system.size());
  const SparsePattern& pattern = system.pattern();
  detail::Handle<_generic_N_Vector> u(checkCreated(N_VNew_Serial(n, raw), "the state"));
  useFastVectorOperations(u.get());
  detail::Handle<_generic_N_Vector> uScale(checkCreated(N_VNew_Serial(n, raw), "scales"));
  detail::Handle<_generic_N_Vector> fScale(checkCreated(N_VNew_Serial(n, raw), "scales"));
  std::copy(guess.begin(), guess.end(), view(u.get()).begin());
  SteadyProblem problem{&system, time, {}, std::vector<double>(pattern.nonzeros())};

  // Scale each residual (W) by its node's diagonal conductance so the norm is in kelvin (the junctions' rank-one
  // terms included: the whole Jacobian's diagonal).
  system.jacobian(time, guess, problem.values);
  auto fs = view(fScale.get());
  std::vector<double> diagonal(pattern.size, 0.0);
  for (Index c = 0; c < pattern.size; ++c)
    for (Index p = pattern.columnStart[c]; p < pattern.columnStart[c + 1]; ++p)
      if (pattern.rowIndex[p] == c) diagonal[c] = problem.values[p];
  for (const RankOneTerm& t : system.junctionTerms())  // u and v list the same region cells in the same order
    for (std::size_t k = 0; k < t.u.size(); ++k) diagonal[t.u[k].first] += t.u[k].second * t.v[k].second;
  for (Index c = 0; c < pattern.size; ++c) fs[c] = 1.0 / std::max(std::abs(diagonal[c]), 1e-300);
  N_VConst(1.0, uScale.get());

  // Junctions in rank-one form: the Newton solver's augmented sparse system (KLU with its default row scaling, as
  // SUNLinSol_KLU), behind an empty matrix; KINSOL's direct-solver path multiplies by no matrix (its line search
  // takes J p = -F from the solve). Otherwise SUNDIALS' KLU module on the pattern.
  std::unique_ptr<NewtonSolver> newton;
  detail::Handle<_generic_SUNMatrix> J;
  detail::Handle<_generic_SUNLinearSolver> LS;
  if (!system.junctionTerms().empty()) {
    newton = std::make_unique<NewtonSolver>(pattern, pattern.size, 2, system.junctionTerms());
    problem.newton = newton.get();
    J.reset(checkCreated(NewtonSolver::shellMatrix(raw), "the Newton matrix"));
    LS.reset(checkCreated(newton->sundialsSolver(raw), "the KLU solver"));
  } else {
    J.reset(checkCreated(SUNSparseMatrix(n, n, static_cast<sunindextype>(pattern.nonzeros()), CSC_MAT, raw),
                         "the Jacobian"));
    useFastSparseOperations(J.get());
    LS.reset(checkCreated(SUNLinSol_KLU(u.get(), J.get(), raw), "KLU"));
    check(SUNLinSol_KLUSetOrdering(LS.get(), 0), "SUNLinSol_KLUSetOrdering");  // AMD, as for CVODE
  }
  detail::SolverMemory mem(checkCreated(KINCreate(raw), "KINSOL memory"), detail::MemoryDeleter{KINFree});
  check(KINInit(mem.get(), steadyResidual, u.get()), "KINInit");
  check(KINSetUserData(mem.get(), &problem), "KINSetUserData");
  check(KINSetErrHandlerFn(mem.get(), [](int, const char*, const char*, char*, void*) {}, nullptr),
        "KINSetErrHandlerFn");
  check(KINSetLinearSolver(mem.get(), LS.get(), J.get()), "KINSetLinearSolver");
  check(KINSetJacFn(mem.get(), steadyJacobian), "KINSetJacFn");
  check(KINSetFuncNormTol(mem.get(), 1e-11), "KINSetFuncNormTol");
  check(KINSetScaledStepTol(mem.get(), 1e-13), "KINSetScaledStepTol");
  check(KINSetMaxSetupCalls(mem.get(), 1), "KINSetMaxSetupCalls");
  check(KINSetNumMaxIters(mem.get(), 200), "KINSetNumMaxIters");
  int flag = KINSol(mem.get(), u.get(), KIN_LINESEARCH, uScale.get(), fScale.get());
  long iters = 0, fevals = 0, jevals = 0;
  if (flag >= 0 && !problem.guard.error) {
    // One more full Newton step past the test (KINSOL again, no line search, one iteration): the residual goes from
    // below 1e-11 K to round-off (quadratic convergence), so the state returned no longer depends on where the
    // relaxation before it stopped, only on the root. Its flag is the step's (KIN_MAXITER_REACHED after the one
    // iteration, or the step or residual test met): the iterate is updated in every case but a linear-solver
    // failure, which keeps the first solve's.
    KINGetNumNonlinSolvIters(mem.get(), &iters);
    KINGetNumFuncEvals(mem.get(), &fevals);
    KINGetNumJacEvals(mem.get(), &jevals);
    std::vector<double> solved(view(u.get()).begin(), view(u.get()).end());
    check(KINSetFuncNormTol(mem.get(), 1e-15), "KINSetFuncNormTol");
    check(KINSetNumMaxIters(mem.get(), 1), "KINSetNumMaxIters");
    const int polish = KINSol(mem.get(), u.get(), KIN_NONE, uScale.get(), fScale.get());
    if (polish < 0 && polish != KIN_MAXITER_REACHED) std::copy(solved.begin(), solved.end(), view(u.get()).begin());
  }
  if (problem.guard.error) {
    try {
      problem.guard.rethrow();
    } catch (const std::exception& e) {
      throw SolverError(fmt::format("KINSOL residual failed: {}", e.what()));
    }
  }
  if (flag < 0) {
    double fnorm = 0.0;
    KINGetFuncNorm(mem.get(), &fnorm);
    throw SolverError(fmt::format(
        "KINSOL found no steady state: {} ({}), scaled residual norm {:.3g} K. A body with no path to the "
        "surroundings (all faces insulated, no fixed arterial temperature) has none.",
        flagName(KINGetReturnFlagName(flag)), flag, fnorm));
  }
  if (statistics) {
    long polishIters = 0, polishFevals = 0, polishJevals = 0;
    KINGetNumNonlinSolvIters(mem.get(), &polishIters);
    KINGetNumFuncEvals(mem.get(), &polishFevals);
    KINGetNumJacEvals(mem.get(), &polishJevals);
    statistics->nonlinearIterations = iters + polishIters;
    statistics->rhsEvaluations = fevals + polishFevals;
    statistics->jacobianEvaluations = jevals + polishJevals;
    statistics->linearSetups = jevals + polishJevals;  // KINSOL evaluates J at every linear setup
    statistics->wallSeconds = std::chrono::duration<double>(std::chrono::steady_clock::now() - start).count();
  }
  auto result = view(u.get());
  return {result.begin(), result.end()};
}

std::vector<double> linearlyImplicitStep(const NetworkSystem& system, std::span<const double> from, double time,
                                         double step) {
  SUNContext raw = nullptr;
  check(SUNContext_Create(nullptr, &raw), "SUNContext_Create");
  detail::Handle<_SUNContext> ctx(raw);
  const auto n = static_cast<sunindextype>(system.size());
  const SparsePattern& pattern = system.pattern();
  // J - I/h (every diagonal entry is in the pattern: CVODE's Newton matrix I - gamma J needs it too).
  std::vector<double> values(pattern.nonzeros());
  system.jacobian(time, from, values);
  for (Index c = 0; c < pattern.size; ++c)
    for (Index p = pattern.columnStart[c]; p < pattern.columnStart[c + 1]; ++p)
      if (pattern.rowIndex[p] == c) values[p] -= 1.0 / step;
  detail::Handle<_generic_N_Vector> rate(checkCreated(N_VNew_Serial(n, raw), "the rates"));
  detail::Handle<_generic_N_Vector> change(checkCreated(N_VNew_Serial(n, raw), "the step"));
  system.evaluate(time, from, view(rate.get()));
  N_VScale(-1.0, rate.get(), rate.get());
  if (!system.junctionTerms().empty()) {
    // Junctions in rank-one form: the Newton solver's augmented sparse system (KLU, its default row scaling).
    NewtonSolver solver(pattern, system.nodeCount() + system.controlCount(), 2, system.junctionTerms());
    system.jacobian(time, from, values);
    solver.setMatrix(values, -1.0 / step, 1.0);
    std::vector<double> d(view(rate.get()).begin(), view(rate.get()).end());
    if (!solver.factor() || !solver.solve(d)) return {};
    std::vector<double> result(from.begin(), from.end());
    for (Index i = 0; i < system.size(); ++i) result[i] += d[i];
    return result;
  }
  detail::Handle<_generic_SUNMatrix> J(
      checkCreated(SUNSparseMatrix(n, n, static_cast<sunindextype>(pattern.nonzeros()), CSC_MAT, raw), "the Jacobian"));
  fillMatrix(J.get(), pattern, values);
  detail::Handle<_generic_SUNLinearSolver> LS(checkCreated(SUNLinSol_KLU(change.get(), J.get(), raw), "KLU"));
  check(SUNLinSol_KLUSetOrdering(LS.get(), 0), "SUNLinSol_KLUSetOrdering");  // AMD, as for CVODE
  if (SUNLinSolInitialize(LS.get()) != 0 || SUNLinSolSetup(LS.get(), J.get()) != 0 ||
      SUNLinSolSolve(LS.get(), J.get(), change.get(), rate.get(), 0.0) != 0)
    return {};
  std::vector<double> result(from.begin(), from.end());
  auto d = view(change.get());
  for (Index i = 0; i < system.size(); ++i) result[i] += d[i];
  return result;
}

}  // namespace thermorph
