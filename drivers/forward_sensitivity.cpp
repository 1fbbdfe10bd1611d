//! Forward sensitivities of run outputs (CVODES, staggered corrector): see forward_sensitivity.hpp.
#include "drivers/forward_sensitivity.hpp"

#include <algorithm>
#include <cmath>
#include <cstdlib>
#include <numeric>

#include <Eigen/Sparse>
#include <fmt/format.h>

#include "drivers/record_budget.hpp"
#include "models/case.hpp"
#include "solver/assembly.hpp"
#include "solver/integrator.hpp"
#include "solver/newton_solver.hpp"

namespace thermorph {
namespace {

//! Relative step of the two network builds (coefficient derivatives) and of the output chain rule.
constexpr double buildStep = 1e-6;
constexpr double stateStep = 1e-4;

std::string overrideText(const SensitivityParameter& p, double value) {
  return p.unit.empty() ? fmt::format("{}={:.17g}", p.key, value) : fmt::format("{}={:.17g} {}", p.key, value, p.unit);
}

double stepOf(const SensitivityParameter& p, double relative) {
  return relative * (p.value != 0.0 ? std::abs(p.value) : 1.0);
}

std::vector<std::string> withValues(std::vector<std::string> overrides, const std::vector<SensitivityParameter>& ps,
                                    std::size_t j = 0, double shifted = 0.0, bool shift = false) {
  for (std::size_t k = 0; k < ps.size(); ++k)
    overrides.push_back(overrideText(ps[k], shift && k == j ? shifted : ps[k].value));
  return overrides;
}

bool sameGeometry(const Body& a, const Body& b) {
  if (a.segments().size() != b.segments().size()) return false;
  for (std::size_t g = 0; g < a.segments().size(); ++g) {
    const SegmentMesh &x = a.segments()[g], &y = b.segments()[g];
    if (x.radius != y.radius || x.axial != y.axial || x.volume != y.volume) return false;
  }
  return true;
}

//! Uniform initial temperature, then the controllers' initial states, then zero channel energies.
std::vector<double> initialState(const Body& body, const NetworkSystem& system) {
  std::vector<double> y(system.nodeCount(), body.spec().run.initialTemperature);
  for (const Controller& k : body.network().controllers) y.push_back(k.initial);
  y.resize(system.size(), 0.0);
  return y;
}

//! The run summary at one output, as the recorder fills it (drivers/record_budget.cpp). `initialGroupStored`:
//! groupStoredHeat() of the initial state.
void summaryAt(const NetworkSystem& system, double t, std::span<const double> y, double initialStored,
               std::span<const double> initialGroupStored, RunSummary& s) {
  const Network& n = system.network();
  s.flows.assign(n.groups.size() * n.channels.size(), 0.0);
  s.storage.assign(n.groups.size(), 0.0);
  std::vector<double> faces(n.faces.size(), 0.0);
  const Index states = system.nodeCount() + system.controlCount();
  system.groupFlows(t, y.first(states), s.flows, s.storage, faces);
  s.controls.assign(y.begin() + static_cast<std::ptrdiff_t>(system.nodeCount()),
                    y.begin() + static_cast<std::ptrdiff_t>(states));
  energiesAt(system, y, initialStored, initialGroupStored, s);
  s.finalTime = t;
}

//! groupStoredHeat() of a state.
std::vector<double> groupStored(const NetworkSystem& system, std::span<const double> y) {
  std::vector<double> out(system.network().groups.size());
  system.groupStoredHeat(y, out);
  return out;
}

struct Perturbed {
  std::unique_ptr<Body> plus, minus;
  double step = 0.0;     // (p + h) - (p - h), in the parameter's unit
  bool surface = true;   // the surroundings' heat flows depend on the parameter
};

//! Whether the two bodies' surroundings give different face heat flows: every face at two face temperatures, at
//! the start and the middle of every timeline interval (the models move between intervals at breakpoints).
bool surfaceDiffers(const Body& a, const Body& b) {
  const Network& n = a.network();
  if (!n.surface || n.faces.empty()) return false;
  std::vector<double> breaks = a.environment().breakpoints();
  const double end = a.spec().run.duration;
  std::vector<double> qa(n.channels.size()), da(n.channels.size()), qb(n.channels.size()), db(n.channels.size());
  bool differs = false;
  for (std::size_t k = 0; k <= breaks.size() && !differs; ++k) {
    const double t0 = k == 0 ? 0.0 : breaks[k - 1];
    const double t1 = k < breaks.size() ? breaks[k] : end;
    a.setInterval(k);
    b.setInterval(k);
    for (double t : {t0, 0.5 * (t0 + t1)})
      for (Index f = 0; f < n.faces.size() && !differs; ++f)
        for (double ts : {283.15, 308.15}) {
          std::fill(qa.begin(), qa.end(), 0.0);
          std::fill(da.begin(), da.end(), 0.0);
          std::fill(qb.begin(), qb.end(), 0.0);
          std::fill(db.begin(), db.end(), 0.0);
          a.network().surface->faceHeat(f, ts, t, qa, da);
          b.network().surface->faceHeat(f, ts, t, qb, db);
          if (qa != qb || da != db) differs = true;
        }
    // Sweating's faces at a few states of its controller (control.sweating.max caps the wetted fraction).
    for (double t : {t0, 0.5 * (t0 + t1)})
      for (const FaceControl& fc : n.faceControls)
        for (double u : {0.0, 0.3, 1.0}) {
          std::vector<double> ua(n.channels.size()), ub(n.channels.size());
          std::fill(qa.begin(), qa.end(), 0.0);
          std::fill(da.begin(), da.end(), 0.0);
          std::fill(qb.begin(), qb.end(), 0.0);
          std::fill(db.begin(), db.end(), 0.0);
          a.network().surface->controlledFaceHeat(fc.face, 308.15, t, u, qa, da, ua);
          b.network().surface->controlledFaceHeat(fc.face, 308.15, t, u, qb, db, ub);
          if (qa != qb || da != db || ua != ub) differs = true;
        }
  }
  a.setInterval(0);
  b.setInterval(0);
  return differs;
}

//! Classify one parameter; on success fill the two bodies.
ParameterGradient classifyOne(const std::string& caseText, const std::string& casePath,
                              const std::vector<std::string>& overrides, const std::vector<SensitivityParameter>& ps,
                              std::size_t j, const Body& base, Perturbed* out) {
  const SensitivityParameter& p = ps[j];
  ParameterGradient g;
  if (p.key.rfind("run.", 0) == 0 && p.key != "run.initial_temperature") {
    g.reason = "a run setting";
    return g;
  }
  const double h = stepOf(p, buildStep);
  Perturbed q;
  try {
    q.plus = std::make_unique<Body>(loadCaseFromString(caseText, casePath, withValues(overrides, ps, j, p.value + h, true)));
    q.minus = std::make_unique<Body>(loadCaseFromString(caseText, casePath, withValues(overrides, ps, j, p.value - h, true)));
  } catch (const std::exception& e) {
    g.reason = fmt::format("the case cannot be built at p +- {:.3g}: {}", h, e.what());
    return g;
  }
  q.step = (p.value + h) - (p.value - h);
  for (const Body* b : {q.plus.get(), q.minus.get()}) {
    if (std::string why = structuralDifference(base.network(), b->network()); !why.empty()) {
      g.reason = "it changes the network's structure: " + why;
      return g;
    }
    if (!sameGeometry(base, *b)) {
      g.reason = "it changes the geometry (cell sizes or positions)";
      return g;
    }
    if (b->environment().breakpoints() != base.environment().breakpoints() ||
        b->spec().run.duration != base.spec().run.duration || b->spec().run.outputInterval != base.spec().run.outputInterval) {
      g.reason = "it moves the timeline";
      return g;
    }
  }
  g.method = GradientMethod::Forward;
  q.surface = surfaceDiffers(*q.plus, *q.minus);
  if (out) *out = std::move(q);
  return g;
}

//! Implicit function theorem at a steady state y [nodes + controls] of `body` (surroundings of t = 0, interval 0
//! set on every body): F(y, p) = 0 gives dy/dp = -(dF/dy)^{-1} dF/dp, one vector per parameter [nodes + controls].
//! dF/dy is the assembly's exact steady Jacobian, factorised once by Eigen's sparse LU; dF/dp is
//! NetworkSystem::parameterDerivatives in steady mode (heat rates, not divided by capacities).
std::vector<std::vector<double>> steadyDerivatives(const Body& body, std::span<const double> y,
                                                   std::span<const ParameterNetworks> networks) {
  NetworkSystem steady(body.network(), NetworkSystem::Mode::Steady);
  steady.freezeTime(0.0);
  const Index n = steady.size();
  const SparsePattern& pattern = steady.pattern();
  std::vector<double> values(pattern.nonzeros());
  steady.jacobian(0.0, y, values);
  // The Newton solver's matrix (AugmentedMatrix, alpha = 0, beta = 1: J itself), with the junctions' rank-one terms
  // u v^T (NetworkSystem::junctionTerms) as the augmented system [J_s U; V^T -I], one auxiliary unknown z = v . x
  // per term: its first n components solve J x = b (block elimination).
  AugmentedMatrix aug(pattern, n, steady.junctionTerms());
  aug.setValues(values, 0.0, 1.0);
  std::vector<double>().swap(values);
  const Index augmented = aug.size();
  using Matrix = Eigen::SparseMatrix<double, Eigen::ColMajor, int>;
  const Matrix J = Eigen::Map<const Matrix>(static_cast<int>(augmented), static_cast<int>(augmented),
                                            static_cast<int>(aug.nonzeros()), aug.start.data(), aug.row.data(),
                                            aug.value.data());
  Eigen::SparseLU<Matrix> lu;
  lu.compute(J);
  if (lu.info() != Eigen::Success)
    throw SolverError("steady-state sensitivities: the Jacobian at the steady state is singular (" + lu.lastErrorMessage() + ")");
  std::vector<double> residual(n);
  steady.evaluate(0.0, y, residual);
  std::vector<std::vector<double>> dF(networks.size(), std::vector<double>(n, 0.0));
  std::vector<std::span<double>> outs(dF.begin(), dF.end());
  steady.parameterDerivatives(0.0, y, residual, networks, outs);
  std::vector<std::vector<double>> ds(networks.size(), std::vector<double>(n, 0.0));
  for (std::size_t j = 0; j < networks.size(); ++j) {
    Eigen::VectorXd b = Eigen::VectorXd::Zero(static_cast<Eigen::Index>(augmented));
    b.head(static_cast<Eigen::Index>(n)) = -Eigen::Map<const Eigen::VectorXd>(dF[j].data(), static_cast<Eigen::Index>(n));
    const Eigen::VectorXd x = lu.solve(b);
    if (lu.info() != Eigen::Success || !x.allFinite())
      throw SolverError("steady-state sensitivities: the linear solve failed");
    std::copy(x.data(), x.data() + n, ds[j].begin());
  }
  return ds;
}

}  // namespace

const char* gradientMethodName(GradientMethod m) {
  switch (m) {
    case GradientMethod::Forward: return "cvodes";
    case GradientMethod::Steady: return "implicit function";
    default: return "finite differences";
  }
}

std::vector<ParameterGradient> classifyParameters(const std::string& caseText, const std::string& casePath,
                                                  const std::vector<std::string>& overrides,
                                                  const std::vector<SensitivityParameter>& parameters) {
  const Body base(loadCaseFromString(caseText, casePath, withValues(overrides, parameters)));
  std::vector<ParameterGradient> out;
  for (std::size_t j = 0; j < parameters.size(); ++j)
    out.push_back(classifyOne(caseText, casePath, overrides, parameters, j, base, nullptr));
  return out;
}

namespace {

//! The steady state of `body` from `guess` as runTransient and runSteady find it (the same problem: the body's
//! surroundings and physiology at t = 0): on a refined grid with `coarseStart`, Newton from the unrefined grid's
//! steady state first (coarseSteadyGuess, RunOptions::coarseSteadyStart), else the relaxation. Counters into `r`.
std::vector<double> startingSteadyState(const Body& body, std::span<const double> guess, bool coarseStart,
                                        ForwardSensitivityResult& r) {
  const std::vector<double> coarse = coarseStart ? coarseSteadyGuess(body, &r.coarseStatistics) : std::vector<double>();
  return steadyState(body, guess, &r.steadyStatistics, coarse, &r.steadyWarm);
}

}  // namespace

ForwardSensitivityResult forwardSensitivities(const std::string& caseText, const std::string& casePath,
                                              const std::vector<std::string>& overrides,
                                              const std::vector<SensitivityParameter>& parameters,
                                              const ProbeFactory& makeProbe, bool errorControl,
                                              const std::vector<bool>& select, bool coarseSteadyStart) {
  ForwardSensitivityResult result;
  const std::size_t k = parameters.size();
  result.derivatives.resize(k);
  try {
    const Body body(loadCaseFromString(caseText, casePath, withValues(overrides, parameters)));
    const Case& c = body.spec();
    std::vector<Perturbed> perturbed(k);
    std::vector<std::size_t> forward;  // parameters with sensitivities, in order
    for (std::size_t j = 0; j < k; ++j) {
      if (!select.empty() && !select[j]) {
        result.methods.push_back({GradientMethod::FiniteDifference, "not selected"});
        continue;
      }
      result.methods.push_back(classifyOne(caseText, casePath, overrides, parameters, j, body, &perturbed[j]));
      if (result.methods.back().method == GradientMethod::Forward) forward.push_back(j);
    }
    NetworkSystem system(body.network(), NetworkSystem::Mode::Transient);
    const Index nodes = system.nodeCount();
    const Index states = nodes + system.controlCount();
    std::vector<double> y0 = initialState(body, system);
    // A steady initial state (as runTransient finds it) and its sensitivities by the implicit function theorem.
    const bool steadyStart = c.run.initial == InitialCondition::Steady;
    std::vector<std::vector<double>> steadyS;
    if (steadyStart) {
      body.setInterval(0);
      std::vector<double> ys = startingSteadyState(body, std::span<const double>(y0).first(states), coarseSteadyStart, result);
      std::copy(ys.begin(), ys.end(), y0.begin());
      std::vector<ParameterNetworks> nets;
      for (std::size_t j : forward) {
        perturbed[j].plus->setInterval(0);
        perturbed[j].minus->setInterval(0);
        nets.push_back({&perturbed[j].plus->network(), &perturbed[j].minus->network(), perturbed[j].step,
                        perturbed[j].surface});
      }
      steadyS = steadyDerivatives(body, ys, nets);
    }
    const double initialStored = system.storedHeat(y0);
    const std::vector<double> initialGroupStored = groupStored(system, y0);

    // The perturbed networks' systems (their flows at the base state, for the outputs' explicit dependence).
    struct Side {
      std::unique_ptr<NetworkSystem> plus, minus;
      double plusStored = 0.0, minusStored = 0.0;
      std::vector<double> plusGroupStored, minusGroupStored;
    };
    std::vector<Side> sides(k);
    SensitivityProblem problem;
    problem.count = forward.size();
    problem.errorControl = errorControl;
    for (std::size_t f = 0; f < forward.size(); ++f) {
      const std::size_t j = forward[f];
      Perturbed& q = perturbed[j];
      sides[j].plus = std::make_unique<NetworkSystem>(q.plus->network(), NetworkSystem::Mode::Transient);
      sides[j].minus = std::make_unique<NetworkSystem>(q.minus->network(), NetworkSystem::Mode::Transient);
      // The initial states at p +- h (their stored heat carries the initial state's dependence on p into the
      // stored-heat change): uniform, or the steady state moved by +- h/2 its sensitivity (exact: linear in T).
      std::vector<double> yp = initialState(*q.plus, *sides[j].plus), ym = initialState(*q.minus, *sides[j].minus);
      if (steadyStart)
        for (Index i = 0; i < states; ++i) {
          yp[i] = y0[i] + 0.5 * q.step * steadyS[f][i];
          ym[i] = y0[i] - 0.5 * q.step * steadyS[f][i];
        }
      sides[j].plusStored = sides[j].plus->storedHeat(yp);
      sides[j].minusStored = sides[j].minus->storedHeat(ym);
      sides[j].plusGroupStored = groupStored(*sides[j].plus, yp);
      sides[j].minusGroupStored = groupStored(*sides[j].minus, ym);
      std::vector<double> s0(system.size(), 0.0);
      for (Index i = 0; i < states; ++i) s0[i] = steadyStart ? steadyS[f][i] : (yp[i] - ym[i]) / q.step;
      problem.initial.push_back(std::move(s0));
      problem.scale.push_back(parameters[j].value != 0.0 ? std::abs(parameters[j].value) : 1.0);
    }
    std::vector<ParameterNetworks> networks;
    for (std::size_t j : forward)
      networks.push_back({&perturbed[j].plus->network(), &perturbed[j].minus->network(), perturbed[j].step,
                          perturbed[j].surface});
    problem.derivative = [&](double t, std::span<const double> y, std::span<const double> rhs,
                             std::span<const std::span<double>> out) {
      system.parameterDerivatives(t, y, rhs, networks, out);
    };

    IntegratorOptions io;
    io.rtol = c.run.rtol;
    io.maxStep = c.run.maxStep;
    io.atol.assign(system.size(), c.run.atol);
    for (Index i = nodes; i < states; ++i) io.atol[i] = 1e-6;
    for (Index i = states; i < system.size(); ++i) io.atol[i] = 1e30;
    Integrator integrator(system, y0, 0.0, io);
    integrator.enableSensitivities(std::move(problem));

    // Probes: the base; per forward parameter, the base body at y +- e s, and the two perturbed bodies at y.
    std::unique_ptr<OutputProbe> baseProbe = makeProbe(body);
    const std::vector<double> observerTimes = baseProbe->observerTimes(body);
    struct Probes {
      std::unique_ptr<OutputProbe> up, down, plus, minus;
      double e = 0.0;
    };
    std::vector<Probes> probes(k);
    for (std::size_t j : forward) {
      probes[j].up = makeProbe(body);
      probes[j].down = makeProbe(body);
      probes[j].plus = makeProbe(*perturbed[j].plus);
      probes[j].minus = makeProbe(*perturbed[j].minus);
      probes[j].e = stepOf(parameters[j], stateStep);
    }
    RunSummary summary;
    std::vector<double> shifted(system.size());
    auto observe = [&](double t) {
      std::span<const double> y = integrator.state();
      summaryAt(system, t, y, initialStored, initialGroupStored, summary);
      baseProbe->observe(t, y.first(nodes), summary);
      for (std::size_t s = 0; s < forward.size(); ++s) {
        const std::size_t j = forward[s];
        std::span<const double> sj = integrator.sensitivity(s);
        for (double sign : {1.0, -1.0}) {
          for (Index i = 0; i < shifted.size(); ++i) shifted[i] = y[i] + sign * probes[j].e * sj[i];
          summaryAt(system, t, shifted, initialStored, initialGroupStored, summary);
          (sign > 0 ? probes[j].up : probes[j].down)->observe(t, std::span<const double>(shifted).first(nodes), summary);
        }
        summaryAt(*sides[j].plus, t, y, sides[j].plusStored, sides[j].plusGroupStored, summary);
        probes[j].plus->observe(t, y.first(nodes), summary);
        summaryAt(*sides[j].minus, t, y, sides[j].minusStored, sides[j].minusGroupStored, summary);
        probes[j].minus->observe(t, y.first(nodes), summary);
      }
    };
    auto setInterval = [&](std::size_t interval) {
      body.setInterval(interval);
      for (std::size_t j : forward) {
        perturbed[j].plus->setInterval(interval);
        perturbed[j].minus->setInterval(interval);
      }
    };

    const long outputs = std::lround(std::ceil(c.run.duration / c.run.outputInterval - 1e-9));
    std::vector<double> breakpoints = body.environment().breakpoints();
    std::size_t interval = 0;
    setInterval(0);
    observe(0.0);
    auto nextStop = [&] { return interval < breakpoints.size() ? breakpoints[interval] : c.run.duration; };
    integrator.setStopTime(nextStop());
    // Observer-only times between outputs, as runTransient observes them (RunOptions::observerTimes).
    std::size_t extra = 0;
    auto observeBefore = [&](double limit) {
      for (; extra < observerTimes.size() && observerTimes[extra] < limit; ++extra) {
        if (observerTimes[extra] > integrator.time()) {
          integrator.firstStepToward(limit);
          integrator.advanceTo(observerTimes[extra]);
        }
        observe(observerTimes[extra]);
      }
    };
    for (long n = 1; n <= outputs; ++n) {
      const double t = std::min(c.run.duration, static_cast<double>(n) * c.run.outputInterval);
      while (interval < breakpoints.size() && breakpoints[interval] <= t) {
        observeBefore(breakpoints[interval]);
        integrator.advanceTo(breakpoints[interval]);
        setInterval(++interval);
        integrator.restart();
        integrator.setStopTime(nextStop());
      }
      observeBefore(t);
      integrator.advanceTo(t);
      observe(t);
    }
    result.statistics = integrator.statistics();
    result.values = baseProbe->values();
    for (std::size_t j : forward) {
      const std::vector<double> up = probes[j].up->values(), down = probes[j].down->values();
      const std::vector<double> plus = probes[j].plus->values(), minus = probes[j].minus->values();
      std::vector<double>& d = result.derivatives[j];
      d.resize(result.values.size());
      for (std::size_t i = 0; i < d.size(); ++i)
        d[i] = (up[i] - down[i]) / (2.0 * probes[j].e) + (plus[i] - minus[i]) / perturbed[j].step;
    }
    result.ok = true;
  } catch (const std::exception& e) {
    result.ok = false;
    result.error = e.what();
  }
  return result;
}

ForwardSensitivityResult steadySensitivities(const std::string& caseText, const std::string& casePath,
                                             const std::vector<std::string>& overrides,
                                             const std::vector<SensitivityParameter>& parameters,
                                             const ProbeFactory& makeProbe, const std::vector<bool>& select,
                                             bool coarseSteadyStart) {
  ForwardSensitivityResult result;
  const std::size_t k = parameters.size();
  result.derivatives.resize(k);
  try {
    const Body body(loadCaseFromString(caseText, casePath, withValues(overrides, parameters)));
    std::vector<Perturbed> perturbed(k);
    std::vector<std::size_t> exact;  // parameters with derivatives, in order
    for (std::size_t j = 0; j < k; ++j) {
      if (!select.empty() && !select[j]) {
        result.methods.push_back({GradientMethod::FiniteDifference, "not selected"});
        continue;
      }
      ParameterGradient g = classifyOne(caseText, casePath, overrides, parameters, j, body, &perturbed[j]);
      if (g.method == GradientMethod::Forward) {
        g.method = GradientMethod::Steady;
        exact.push_back(j);
      }
      result.methods.push_back(g);
    }
    // The steady state as runSteady finds it (surroundings at t = 0, interval 0), then dy/dp.
    body.setInterval(0);
    std::vector<ParameterNetworks> networks;
    for (std::size_t j : exact) {
      perturbed[j].plus->setInterval(0);
      perturbed[j].minus->setInterval(0);
      networks.push_back({&perturbed[j].plus->network(), &perturbed[j].minus->network(), perturbed[j].step,
                          perturbed[j].surface});
    }
    NetworkSystem system(body.network(), NetworkSystem::Mode::Transient);
    const Index states = system.nodeCount() + system.controlCount();
    std::vector<double> y = initialState(body, system);
    const std::vector<double> steady =
        startingSteadyState(body, std::span<const double>(y).first(states), coarseSteadyStart, result);
    result.statistics = result.steadyStatistics;
    std::copy(steady.begin(), steady.end(), y.begin());
    std::fill(y.begin() + static_cast<std::ptrdiff_t>(states), y.end(), 0.0);
    const std::vector<std::vector<double>> ds = steadyDerivatives(body, steady, networks);

    // Outputs: the probe at the steady state, as runSteady records it (one output at t = 0, no stored change);
    // their derivatives by the chain rule of forwardSensitivities (state shifted by +- e ds, perturbed bodies).
    RunSummary summary;
    auto observe = [&](OutputProbe& probe, const NetworkSystem& sys, std::span<const double> state) {
      summaryAt(sys, 0.0, state, sys.storedHeat(state), groupStored(sys, state), summary);
      probe.observe(0.0, state.first(sys.nodeCount()), summary);
    };
    std::unique_ptr<OutputProbe> base = makeProbe(body);
    observe(*base, system, y);
    result.values = base->values();
    std::vector<double> shifted(y.size());
    for (std::size_t s = 0; s < exact.size(); ++s) {
      const std::size_t j = exact[s];
      const double e = stepOf(parameters[j], stateStep);
      std::vector<double> up, down;
      for (double sign : {1.0, -1.0}) {
        shifted = y;
        for (Index i = 0; i < states; ++i) shifted[i] = y[i] + sign * e * ds[s][i];
        std::unique_ptr<OutputProbe> probe = makeProbe(body);
        observe(*probe, system, shifted);
        (sign > 0 ? up : down) = probe->values();
      }
      const NetworkSystem plusSystem(perturbed[j].plus->network(), NetworkSystem::Mode::Transient);
      const NetworkSystem minusSystem(perturbed[j].minus->network(), NetworkSystem::Mode::Transient);
      std::unique_ptr<OutputProbe> plus = makeProbe(*perturbed[j].plus), minus = makeProbe(*perturbed[j].minus);
      observe(*plus, plusSystem, y);
      observe(*minus, minusSystem, y);
      const std::vector<double> pv = plus->values(), mv = minus->values();
      std::vector<double>& d = result.derivatives[j];
      d.resize(result.values.size());
      for (std::size_t i = 0; i < d.size(); ++i)
        d[i] = (up[i] - down[i]) / (2.0 * e) + (pv[i] - mv[i]) / perturbed[j].step;
    }
    result.ok = true;
  } catch (const std::exception& e) {
    result.ok = false;
    result.error = e.what();
  }
  return result;
}

}  // namespace thermorph
