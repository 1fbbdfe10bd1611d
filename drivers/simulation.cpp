#include "drivers/simulation.hpp"

#include <algorithm>
#include <cmath>
#include <optional>

#include <fmt/format.h>
#include <fmt/ranges.h>

#include "drivers/progress.hpp"
#include "drivers/refine.hpp"
#include "drivers/record_fields.hpp"
#include "drivers/recorder.hpp"
#include "models/media.hpp"
#include "solver/scratch.hpp"

namespace thermorph {
namespace {

//! Pseudo-time of the steady start's first linearly implicit step and of the relaxation's first horizon [s].
constexpr double kFirstStep = 600.0;

//! Uniform initial temperature for every node, then the controllers' initial states [nodes + controls].
std::vector<double> initialState(const Body& body, const NetworkSystem& system) {
  std::vector<double> y(system.nodeCount(), body.spec().run.initialTemperature);
  for (const Controller& k : body.network().controllers) y.push_back(k.initial);
  return y;
}

//! Steady state of the surroundings and physiology at t = 0 [K and controller states]. Newton alone may land on
//! an unstable branch (Q10 metabolism can balance large losses at a runaway temperature) or wander to
//! unphysical iterates, so the state is first relaxed in pseudo-time by CVODE with time frozen at 0 until it
//! changes by less than 1e-5 K/s (1e-7 before KINSOL's extra Newton step made the root independent of where Newton
//! starts), then polished by KINSOL: the steady state reached is the stable one the body would settle in from
//! that start. The relaxation starts from one linearly implicit Euler step of kFirstStep from the guess (the fast
//! initial transient of a uniform start, which took most of the relaxation's steps, in one linear solve); if that
//! step fails or the relaxation from it does (a runaway), the relaxation starts again from the guess itself, and if
//! that fails too, from the guess with the Newton matrix updated at every step, then also at tight tolerances.
//! With `stop` set during the relaxation, returns the relaxed state so far at the next step (no Newton polish)
//! and sets `*stopped`. `transient` is the body's transient system (a run's own, lent for the relaxation: its
//! time is frozen at 0 meanwhile and free again on return; its face temperatures, the Newton starts of the face
//! balances, are left at the relaxed state).
std::vector<double> relaxToSteady(const Body& body, NetworkSystem& transient, std::span<const double> guess,
                                  SolverStatistics* stats, const std::atomic<bool>* stop, bool* stopped) {
  transient.freezeTime(0.0);
  struct Unfreeze {
    NetworkSystem& system;
    ~Unfreeze() { system.freezeTime(std::nullopt); }
  } unfreeze{transient};
  const Index states = transient.nodeCount() + transient.controlCount();
  std::vector<double> y(transient.size(), 0.0);
  std::copy(guess.begin(), guess.end(), y.begin());
  // A loose rtol: the relaxation only has to carry the state into Newton's basin of the stable steady state;
  // KINSOL's polish below sets the accuracy (its root does not depend on the path, only its last digits do, and
  // solveSteadyState's extra Newton step past the test takes those to round-off). rtol 1e-6 took 148 and 216
  // steps for the wading bird and the diver, 1e-4 80 and 99, 1e-3 with atol 1e-2 K 52 and 53. Before that extra
  // step, 1e-3 left KINSOL's last iterate noisier and the central differences of whole steady solves in
  // tests/test_forward_sensitivity.cpp too noisy (3e-5 > 1e-5); with it they agree to 1e-6.
  IntegratorOptions io;
  io.rtol = 1e-3;
  io.atol.assign(transient.size(), 1e-2);
  for (Index i = states; i < transient.size(); ++i) io.atol[i] = 1e30;
  SolverStatistics relaxed;
  // Relaxes from `from` (the whole state) to the state reached (when stopped: so far).
  bool wasStopped = false;
  auto relax = [&](std::span<const double> from) {
    Integrator integrator(transient, from, 0.0, io);
    struct Count {
      Integrator& integrator;
      SolverStatistics& sum;
      ~Count() {
        const SolverStatistics r = integrator.statistics();
        sum.steps += r.steps;
        sum.rhsEvaluations += r.rhsEvaluations;
        sum.jacobianEvaluations += r.jacobianEvaluations;
        sum.nonlinearIterations += r.nonlinearIterations;
        sum.linearSetups += r.linearSetups;
        sum.wallSeconds += r.wallSeconds;
      }
    } count{integrator, relaxed};
    std::vector<double> rate(transient.size());
    double horizon = kFirstStep;
    for (int k = 0; k < 40 && horizon < 1e10; ++k, horizon *= 2.0) {
      integrator.setStopTime(horizon);
      if (stop ? !integrator.advanceTo(horizon, *stop) : (integrator.advanceTo(horizon), false)) {
        wasStopped = true;
        break;
      }
      transient.evaluate(horizon, integrator.state(), rate);
      double fastest = 0.0;
      for (Index i = 0; i < transient.nodeCount(); ++i) fastest = std::max(fastest, std::abs(rate[i]));
      if (fastest < 1e-5) break;
    }
    return std::vector<double>(integrator.state().begin(), integrator.state().end());
  };
  // The first step: kept when its linear solve succeeded and it stays inside the band the evaluations accept
  // (150-450 K); any failure there or in the relaxation from it (a runaway) sends the relaxation back to the guess,
  // which reports its own errors as before.
  std::vector<double> first;
  try {
    first = linearlyImplicitStep(transient, y, 0.0, kFirstStep);
  } catch (const std::exception&) {
    first.clear();
  }
  for (Index i = 0; i < transient.nodeCount() && !first.empty(); ++i)
    if (!(first[i] > 150.0 && first[i] < 450.0)) first.clear();
  std::vector<double> state;
  bool fromFirst = !first.empty();
  if (fromFirst) {
    std::fill(first.begin() + static_cast<std::ptrdiff_t>(states), first.end(), 0.0);  // channel energies at 0
    try {
      state = relax(first);
    } catch (const std::exception&) {
      fromFirst = false;
    }
  }
  // The loose tolerances can make the relaxation unstable where the physical transient is not. Found in a new-user
  // trial: an invented 2 kg swimmer with a 28 cm tail in 10 degC air ran away to 1587 K in the hind feet's
  // superficial venous blood from both starts, while a run from 37 degC at the case's tolerances settles at a
  // 36.43 degC core. At rtol 1e-3, atol 1e-2 K the run's own integration fails too (order 1 as well as 5,
  // stability-limit detection on or off, a new Jacobian at every setup or not); it succeeds when the Newton matrix
  // I - gamma J is updated at every step (CVodeSetLSetupFrequency 1; every 2 or 5 steps failed), and so does this
  // relaxation (70 steps). So from the guess: as set, then with that update, then also at tight tolerances; the last
  // failure is the error reported.
  for (int attempt = 0; !fromFirst; ++attempt) {
    try {
      state = relax(y);
      break;
    } catch (const SolverError& e) {
      if (attempt == 0) {
        io.setupEveryStep = true;
      } else if (attempt == 1) {
        io.rtol = 1e-5;
        std::fill(io.atol.begin(), io.atol.begin() + static_cast<std::ptrdiff_t>(states), 1e-4);
      } else {
        // Its time is pseudo-time at the surroundings of t = 0, not a time of the run: say so.
        throw SolverError(fmt::format("no steady state found: the relaxation towards it (the surroundings and "
                                      "physiology of t = 0 held, in pseudo-time) failed: {}", e.what()));
      }
    }
  }
  std::vector<double> start(state.begin(), state.begin() + static_cast<std::ptrdiff_t>(states));
  if (wasStopped) {
    if (stopped) *stopped = true;  // KINSOL's polish below is not interrupted
    return start;
  }
  NetworkSystem steady(body.network(), NetworkSystem::Mode::Steady);
  steady.freezeTime(0.0);
  std::vector<double> result = solveSteadyState(steady, start, 0.0, stats);
  if (stats) {
    stats->steps = relaxed.steps;
    stats->rhsEvaluations += relaxed.rhsEvaluations;
    stats->jacobianEvaluations += relaxed.jacobianEvaluations;
    stats->nonlinearIterations += relaxed.nonlinearIterations;
    stats->linearSetups += relaxed.linearSetups;
    stats->wallSeconds += relaxed.wallSeconds;
  }
  return result;
}

//! The steady state by Newton (KINSOL, as relaxToSteady's polish) from a warm guess [nodes + controls] near it (a
//! coarser grid's steady state mapped onto this one's cells, drivers/refine.cpp), without the relaxation; empty when
//! Newton fails or its root lies farther from the guess than kWarmStartNodeChange / kWarmStartMeanChange (then the
//! relaxation from the case's guess decides, as without a warm start). The root does not depend on where Newton starts
//! (the extra Newton step of solveSteadyState takes the residual to round-off), so a root kept is the relaxation's to
//! round-off. The transient system's face temperatures (the Newton starts of the face balances) are left at the root,
//! as the relaxation leaves them at its end.
std::vector<double> warmSteadyState(const Body& body, NetworkSystem& transient, std::span<const double> warm,
                                    SolverStatistics* stats) {
  const Index nodes = transient.nodeCount(), states = nodes + transient.controlCount();
  if (warm.size() != states) return {};
  NetworkSystem steady(body.network(), NetworkSystem::Mode::Steady);
  steady.freezeTime(0.0);
  SolverStatistics counted;
  std::vector<double> root;
  try {
    root = solveSteadyState(steady, warm, 0.0, &counted);
  } catch (const SolverError&) {
    return {};
  }
  double largest = 0.0, capacity = 0.0, weighted = 0.0;
  const std::vector<NetworkNode>& n = body.network().nodes;
  for (Index i = 0; i < nodes; ++i) {
    const double change = root[i] - warm[i];
    largest = std::max(largest, std::abs(change));
    capacity += n[i].capacity;
    weighted += n[i].capacity * change;
  }
  if (!(largest <= kWarmStartNodeChange) || !(std::abs(weighted) <= kWarmStartMeanChange * capacity)) return {};
  std::vector<double> y(transient.size(), 0.0), rate(transient.size());
  std::copy(root.begin(), root.end(), y.begin());
  transient.freezeTime(0.0);
  try {
    transient.evaluate(0.0, y, rate);
  } catch (const std::exception&) {
    // the face guesses are only Newton starts; the root was evaluated by KINSOL already
  }
  transient.freezeTime(std::nullopt);
  if (stats) *stats = counted;  // KINSOL's counters alone: no relaxation steps
  return root;
}

//! relaxToSteady with range warnings from the steady state only: the relaxation's and Newton's trial states answer
//! their range checks without logging (models/media.hpp, ValidityLogScope), and the faces whose evaluations fell
//! outside a range are checked again at the state reached. Found in a new-user trial: the wading bird at
//! grid_tolerance 0.0014 warned of fresh water at 273.12 K (Incropera et al. 2007, Table A.6 starts at 273.15 K), a
//! film the relaxation passed through; no output of the run has its leg's surface below 4.00001 degC.
std::vector<double> steadyTemperatures(const Body& body, NetworkSystem& transient, std::span<const double> guess,
                                       SolverStatistics* stats, const std::atomic<bool>* stop = nullptr,
                                       bool* stopped = nullptr, std::span<const double> warm = {},
                                       bool* warmUsed = nullptr) {
  std::vector<double> result;
  if (warmUsed) *warmUsed = false;
  {
    const ValidityLogScope deferred(false);
    if (!warm.empty()) result = warmSteadyState(body, transient, warm, stats);
    if (!result.empty() && warmUsed) *warmUsed = true;
    if (result.empty()) result = relaxToSteady(body, transient, guess, stats, stop, stopped);
  }
  body.environment().confirmRanges(0.0);
  return result;
}

//! Warnings for a steady state in which a heat defence is exhausted: shivering at its maximum power, panting at its
//! largest ventilation or sweating at its largest wetted fraction. The controller's proportional law then no longer
//! holds its signal near the set point, so the state is the passive balance of a body at full effort. Found in a
//! new-user trial: a 2 kg swimmer started with `initial = "steady"` in 6 degC water began its run at a core of
//! 17.2 degC (shivering at its maximum), with nothing said; the user expected a body at rest before the swim.
std::vector<std::string> exhaustedDefences(const Body& body, std::span<const double> state, const char* what) {
  std::vector<std::string> warnings;
  const Network& n = body.network();
  const ControlSpec& cs = body.spec().control;
  for (const Controller& c : n.controllers) {
    const bool shivering = c.name == "shivering", panting = c.name == "panting", sweating = c.name == "sweating";
    if (!shivering && !panting && !sweating) continue;
    if (c.enableSchedule != none && n.schedules && !(n.schedules->value(c.enableSchedule, 0.0) > 0.5)) continue;
    const double setpoint =
        c.setpointSchedule != none && n.schedules ? n.schedules->value(c.setpointSchedule, 0.0) : c.setpoint;
    double signal = 0.0;
    for (auto [node, w] : c.signal) signal += w * state[node];
    // At a steady state the lagged state equals its target clamp(bias + gain (T - set point), lower, upper).
    const double target = c.bias + c.gain * (signal - setpoint);
    const char* signalName = (sweating ? cs.sweating : shivering ? cs.shivering : cs.panting).signal == ControlSignal::Core
                                 ? "core"
                                 : "mean skin";
    const double offset = signal - setpoint;
    std::string reason;
    if (sweating) {
      // Sweating is exhausted where every segment it wets is at `max` (w_0 + s, at most max: a segment wetted by its
      // own w_0 reaches it before s does), its state at the steady state's target.
      std::vector<double> controls(state.begin() + static_cast<std::ptrdiff_t>(n.nodes.size()), state.end());
      const Index k = static_cast<Index>(&c - n.controllers.data());
      if (k >= controls.size()) continue;
      controls[k] = std::clamp(target, c.lower, c.upper);
      std::vector<std::string> wet;
      bool all = true;
      for (Index g = 0; g < body.spec().segments.size(); ++g) {
        if (!body.environment().sweats(g)) continue;
        wet.push_back(body.spec().segments[g].name);
        if (body.wettedFraction(g, 0.0, controls) < c.upper * (1.0 - 1e-9)) all = false;
      }
      if (!all || wet.empty()) continue;
      reason = fmt::format("sweating at its largest wetted fraction ({:.4g} of the skin of {}) and the {} at {:.1f} degC, "
                           "{:.1f} K above the sweating set point ({:.4g} degC): the body cannot shed the heat it gains",
                           c.upper, fmt::join(wet, ", "), signalName, signal - 273.15, offset, setpoint - 273.15);
    } else {
      if (!(target >= c.upper - 1e-9 * std::max(1.0, std::abs(c.upper)))) continue;
      reason =
          shivering ? fmt::format("shivering at its maximum power and the {} at {:.1f} degC, {:.1f} K below the shivering "
                                  "set point ({:.4g} degC): the surroundings take more heat than the body can make",
                                  signalName, signal - 273.15, -offset, setpoint - 273.15)
                    : fmt::format("panting at its largest ventilation ({:.4g} x) and the {} at {:.1f} degC, {:.1f} K above "
                                  "the panting set point ({:.4g} degC): the body cannot shed the heat it gains",
                                  c.upper, signalName, signal - 273.15, offset, setpoint - 273.15);
    }
    warnings.push_back(fmt::format(
        "{}: {}. This is where the body settles after a long exposure at full effort (the surroundings and physiology "
        "of t = 0), not a state at rest before it; to start from rest, start in other surroundings (initial_temperature, "
        "or a steady start in the surroundings before the exposure, changed to it by an event)",
        what, reason));
  }
  return warnings;
}

}  // namespace

std::vector<double> steadyState(const Body& body, std::span<const double> guess, SolverStatistics* statistics,
                                std::span<const double> warm, bool* warmUsed) {
  NetworkSystem transient(body.network(), NetworkSystem::Mode::Transient);
  return steadyTemperatures(body, transient, guess, statistics, nullptr, nullptr, warm, warmUsed);
}

std::vector<double> coarseSteadyGuess(const Body& body, SolverStatistics* statistics, const std::atomic<bool>* stop) {
  const int n = body.spec().run.appliedRefinement;
  if (n <= 1) return {};
  try {
    // The unrefined body's environment resets the thread's log of range warnings when built, and its states are not
    // the run's: every warning it raises goes to a log of its own.
    const ValidityLogIsolation isolation;
    const std::optional<Case> c = coarsenedCase(body.spec(), n);
    if (!c) return {};
    const Body coarse(*c);
    NetworkSystem transient(coarse.network(), NetworkSystem::Mode::Transient);
    const std::vector<double> guess = initialState(coarse, transient);
    SolverStatistics st;
    bool stopped = false;
    const std::vector<double> state = steadyTemperatures(coarse, transient, guess, &st, stop, &stopped);
    if (stopped) return {};
    if (statistics) *statistics = st;
    return mapSteadyState(coarse, state, body);
  } catch (const std::exception&) {
    return {};  // an unrefined grid that cannot be solved: the run's own relaxation decides, as without this
  }
}

RunSummary runTransient(const Body& body, const RunOptions& options) {
  const Case& c = body.spec();
  NetworkSystem system(body.network(), NetworkSystem::Mode::Transient);
  const Index nodes = system.nodeCount();
  const Index states = nodes + system.controlCount();  // temperatures, then controller states
  std::vector<double> y = initialState(body, system);
  y.reserve(system.size());  // exact: growing by doubling held a second node-sized block while CVODE's were allocated
  y.resize(system.size(), 0.0);  // channel energies start at 0
  RunSummary summary;
  std::vector<std::string> startWarnings;
  if (c.run.initial == InitialCondition::Steady) {
    // The relaxation integrates this run's own system (one transient system per run instead of two).
    std::vector<double> coarse;
    if (options.steadyGuess.empty() && options.coarseSteadyStart)
      coarse = coarseSteadyGuess(body, &summary.coarseStatistics, options.stop);
    std::vector<double> steady = steadyTemperatures(
        body, system, std::span<const double>(y).first(states), &summary.steadyStatistics, options.stop,
        &summary.stopped, coarse.empty() ? std::span<const double>(options.steadyGuess) : coarse, &summary.steadyWarm);
    std::copy(steady.begin(), steady.end(), y.begin());
    if (!summary.stopped) {
      startWarnings = exhaustedDefences(body, steady, "steady start");
      // Printed beside the final temperatures: a new-user trial (an invented 6 kg swimmer without controllers,
      // started steady in 4 degC water) began at a core of 4.5 degC and saw only the final 2.1 degC.
      const BodyTemperatures t0 = bodyTemperatures(body, std::span<const double>(steady).first(nodes));
      summary.startTemperatures = {t0.core, t0.blood, t0.skin};
      if (options.keepSteadyState) summary.steadyState = std::move(steady);
    }
  }
  IntegratorOptions io;
  io.rtol = c.run.rtol;
  io.maxStep = c.run.maxStep;
  io.linearSolver = options.linearSolver;
  io.atol.assign(system.size(), c.run.atol);
  for (Index i = nodes; i < states; ++i) io.atol[i] = 1e-6;  // controller states are fractions of their range
  // Channel energies are exact quadratures of the flows: excluded from the error test.
  for (Index i = states; i < system.size(); ++i) io.atol[i] = 1e30;

  const long outputs = std::lround(std::ceil(c.run.duration / c.run.outputInterval - 1e-9));
  Recorder recorder(body, system, options, static_cast<std::uint64_t>(outputs) + 1);
  for (std::string& w : startWarnings) recorder.addRunWarning(std::move(w));
  recorder.setIncompletePath(options.output.empty() ? "" : incompleteName(options.output));
  const double initialStored = system.storedHeat(y);
  // Held until the last state is read: the results file is finished without CVODE's vectors and the Newton
  // matrix (the end of a run was its peak of memory).
  // The tolerances moved in: the integrator keeps them as runs of equal values and frees the vector before it
  // allocates CVODE's vectors (8 bytes per node at the set-up's peak).
  std::optional<Integrator> integrator(std::in_place, system, y, 0.0, std::move(io));
  std::vector<double>().swap(y);  // the integrator holds the state
  recorder.record(0.0, integrator->state(), initialStored, summary);

  ProgressReporter progress(c.run.duration, options.quiet, options.progressAfter);
  // Discontinuities of the timeline: the integrator stops exactly at each and restarts (never steps across).
  // Outputs in between are interpolated (CVODE's dense output), so they do not shorten the steps.
  std::vector<double> breakpoints = body.environment().breakpoints();
  std::size_t interval = 0;
  body.setInterval(0);
  auto nextStop = [&] { return interval < breakpoints.size() ? breakpoints[interval] : c.run.duration; };
  integrator->setStopTime(nextStop());
  // With a stop request to poll (signals), CVODE is driven one step at a time: the same steps, and a stop takes
  // effect at the next step; the outputs so far are kept and none is made at an intermediate time.
  auto advance = [&](double time) {
    if (!options.stop) {
      integrator->advanceTo(time);
      return true;
    }
    if (!integrator->advanceTo(time, *options.stop)) summary.stopped = true;
    return !summary.stopped;
  };
  // Observer-only times (a fit's observations between outputs), each before the next time the loop asks for.
  const std::vector<double>& extras = options.observerTimes;
  std::size_t extra = 0;
  RunSummary scratch;
  auto observeBefore = [&](double limit) {
    for (; extra < extras.size() && extras[extra] < limit; ++extra) {
      if (extras[extra] > integrator->time()) {
        integrator->firstStepToward(limit);
        if (!advance(extras[extra])) return false;
      }
      recorder.observe(extras[extra], integrator->state(), initialStored, scratch);
    }
    return true;
  };
  try {
    for (long k = 1; k <= outputs && !summary.stopped; ++k) {
      double t = std::min(c.run.duration, static_cast<double>(k) * c.run.outputInterval);
      while (interval < breakpoints.size() && breakpoints[interval] <= t) {
        if (!observeBefore(breakpoints[interval]) || !advance(breakpoints[interval])) break;
        recorder.recordStep(breakpoints[interval], integrator->state(), initialStored);  // exact: stopped there
        body.setInterval(++interval);
        integrator->restart();
        integrator->setStopTime(nextStop());
      }
      // Progress within long output intervals too: advance to interpolated intermediate times (CVODE's steps
      // are not shortened by them), once a progress line can be shown (no interpolation nobody reads). The first
      // time after a (re)start bounds CVODE's first step, so the first step is taken towards t as without progress
      // (firstStepToward; before, the steps and results depended on the wall clock: the day cycle refined 3x took
      // 537 steps with progress lines, 523 without).
      if (summary.stopped || !observeBefore(t)) break;
      if (progress.due()) {
        integrator->firstStepToward(t);
        const double from = integrator->time();
        for (int part = 1; part < 16 && !summary.stopped; ++part)
          if (advance(from + (t - from) * part / 16.0)) progress.report(integrator->time(), integrator->statistics().steps);
      }
      if (summary.stopped || !advance(t)) break;
      recorder.record(t, integrator->state(), initialStored, summary);
      progress.report(t, integrator->statistics().steps);
    }
  } catch (const SolverError& e) {
    summary.complete = false;
    summary.failure = e.what();
  }
  if (summary.stopped) {
    summary.complete = false;
    summary.failure = fmt::format("stopped at t = {:g} s before the end of the run ({:g} s)", summary.finalTime,
                                  c.run.duration);
  }
  progress.finish();
  // The spare block of the outputs' and factorisations' temporaries is not kept beside the final state and the
  // results file's finish (solver/scratch.hpp): the peak of a run at 10^5 nodes stays where it was.
  releaseScratch();
  summary.statistics = integrator->statistics();
  summary.finalState.assign(integrator->state().begin(), integrator->state().begin() + static_cast<std::ptrdiff_t>(nodes));
  integrator.reset();
  recorder.finish(summary, false);
  return summary;
}

RunSummary runSteady(const Body& body, const RunOptions& options) {
  NetworkSystem transient(body.network(), NetworkSystem::Mode::Transient);
  const Index nodes = transient.nodeCount();
  std::vector<double> guess = initialState(body, transient);
  RunSummary summary;
  Recorder recorder(body, transient, options, 1);
  recorder.setIncompletePath(options.output.empty() ? "" : incompleteName(options.output));
  recorder.steadyState();
  body.setInterval(0);
  std::vector<double> coarse;
  if (options.steadyGuess.empty() && options.coarseSteadyStart)
    coarse = coarseSteadyGuess(body, &summary.coarseStatistics, options.stop);
  std::vector<double> steady =
      steadyTemperatures(body, transient, guess, &summary.statistics, options.stop, &summary.stopped,
                         coarse.empty() ? std::span<const double>(options.steadyGuess) : coarse, &summary.steadyWarm);
  if (!summary.stopped)
    for (std::string& w : exhaustedDefences(body, steady, "steady state")) recorder.addRunWarning(std::move(w));
  std::vector<double> y(transient.size(), 0.0);
  std::copy(steady.begin(), steady.end(), y.begin());
  recorder.record(0.0, y, transient.storedHeat(y), summary);
  if (summary.stopped) {
    summary.complete = false;
    summary.failure = "stopped before the steady state was reached; the state stored is the pseudo-time relaxation "
                      "reached so far";
  }
  summary.finalState.assign(steady.begin(), steady.begin() + static_cast<std::ptrdiff_t>(nodes));
  if (!summary.stopped) {
    summary.steadyStatistics = summary.statistics;
    if (options.keepSteadyState) summary.steadyState = std::move(steady);
  }
  recorder.finish(summary, true);
  return summary;
}

void printBudget(const Body& body, const RunSummary& s, std::FILE* out) {
  const Network& n = body.network();
  const Index channels = n.channels.size();
  std::string header = fmt::format("{:<16}", "segment [W]");
  for (const std::string& ch : n.channels) header += fmt::format("{:>12}", ch);
  header += fmt::format("{:>12}", "storage");
  fmt::print(out, "\nHeat budget at t = {:g} s (W, positive into the body)\n{}\n", s.finalTime, header);
  std::vector<double> body_(channels + 1, 0.0);
  for (Index g = 0; g < n.groups.size(); ++g) {
    double w = n.groupWeights[g];
    std::string row = fmt::format("{:<16}", w == 1.0 ? n.groups[g] : fmt::format("{} x{:g}", n.groups[g], w));
    for (Index c = 0; c < channels; ++c) {
      row += fmt::format("{:>12.4g}", s.flows[g * channels + c] * w);
      body_[c] += s.flows[g * channels + c] * w;
    }
    row += fmt::format("{:>12.4g}", s.storage[g] * w);
    body_[channels] += s.storage[g] * w;
    fmt::print(out, "{}\n", row);
  }
  std::string total = fmt::format("{:<16}", "whole body");
  for (double v : body_) total += fmt::format("{:>12.4g}", v);
  fmt::print(out, "{}\n", total);
  if (!s.channelEnergy.empty() && s.finalTime > 0.0) {
    std::string energy = fmt::format("{:<16}", "run total [kJ]");
    for (double e : s.channelEnergy) energy += fmt::format("{:>12.4g}", e / 1e3);
    energy += fmt::format("{:>12.4g}", s.storedChange / 1e3);
    fmt::print(out, "{}\n", energy);
    fmt::print(out, "Energy balance error: {:.3g} J ({:.2g} of the {:.4g} kJ exchanged)\n", s.energyBalanceError,
               s.throughput > 0 ? std::abs(s.energyBalanceError) / s.throughput : 0.0, s.throughput / 1e3);
  }
  // The temperatures a reader looks for first, at the same time as the table (a new-user trial had to open the
  // results file to see that a steady start had put the core at 17 degC).
  if (s.finalState.size() == n.nodes.size()) {
    auto temperatures = [](double core, double blood, double skin) {  // [K]; blood NaN without a pool
      return fmt::format("core {:.2f} degC, {}mean skin {:.2f} degC", core - 273.15,
                         std::isnan(blood) ? std::string() : fmt::format("blood {:.2f} degC, ", blood - 273.15),
                         skin - 273.15);
    };
    if (s.startTemperatures.size() == 3)
      fmt::print(out, "Steady start at t = 0 s: {} (the balance of the surroundings and physiology of t = 0)\n",
                 temperatures(s.startTemperatures[0], s.startTemperatures[1], s.startTemperatures[2]));
    const BodyTemperatures t = bodyTemperatures(body, s.finalState);
    fmt::print(out, "Temperatures at t = {:g} s: {}\n", s.finalTime, temperatures(t.core, t.blood, t.skin));
    if (!n.controllers.empty() && s.controls.size() >= n.controllers.size()) {
      std::string states;
      for (std::size_t k = 0; k < n.controllers.size(); ++k)
        states += fmt::format("{}{} {:.3g}", k ? ", " : "", n.controllers[k].name,
                              std::abs(s.controls[k]) < 1e-9 ? 0.0 : s.controls[k]);  // a lag's round-off: 0
      fmt::print(out, "Controllers at t = {:g} s: {}\n", s.finalTime, states);
    }
  }
  const SolverStatistics& st = s.statistics;
  // The solver's wall time (Integrator: CVODE's calls only, DEVELOPERS.md "Benchmarks") to 4 significant digits,
  // in fixed notation for the parsers ("[0-9.]+ s wall"), at most to the microsecond: in whole milliseconds a 3 ms
  // solve (the peer problem at 500 cells) read +-17 %.
  const int decimals =
      std::clamp(3 - static_cast<int>(std::floor(std::log10(std::max(st.wallSeconds, 1e-6)))), 0, 6);
  fmt::print(out,
             "Solver: {} steps, {} rhs evaluations, {} Jacobians, {} linear setups, {} Newton iterations, {} "
             "error-test failures, {:.{}f} s wall",
             st.steps, st.rhsEvaluations, st.jacobianEvaluations, st.linearSetups, st.nonlinearIterations,
             st.errorTestFailures, st.wallSeconds, decimals);
  if (st.factorNonzeros > 0)
    fmt::print(out, "; {} nodes, Jacobian {} nonzeros, {} L+U {}", n.nodes.size(), st.jacobianNonzeros,
               st.bandwidth >= 0 ? fmt::format("band (bandwidth {}, border {})", st.bandwidth, st.bandBorder)
                                 : std::string("KLU"),
               st.factorNonzeros);
  fmt::print(out, "\n");
}

}  // namespace thermorph
