#include "drivers/simulation.hpp"

#include <chrono>
#include <cmath>
#include <ctime>
#include <filesystem>
#include <numeric>

#include <fmt/format.h>

#include "drivers/results.hpp"

namespace thermorph {
namespace {

constexpr double kelvinOffset = 273.15;
const char* caution =
    "Model estimates for research; not veterinary or medical advice. Thresholds such as critical tissue "
    "temperatures vary by species and must come from your own sources; follow local regulations and licensed "
    "practice.";

std::string nowIso() {
  std::time_t t = std::time(nullptr);
  char buffer[32];
  std::tm utc{};
  gmtime_r(&t, &utc);  // thread safe (sweeps)
  std::strftime(buffer, sizeof buffer, "%Y-%m-%dT%H:%M:%SZ", &utc);
  return buffer;
}

//! /events: start, end [s] and label of every labelled event, for shading in figures.
void writeEvents(ResultsFile& f, const Case& c) {
  // Labelled events only: weather-file rows and unlabelled changes are not intervals to shade.
  std::vector<double> start, end;
  std::vector<std::string> labels;
  for (const EventSpec& e : c.events) {
    if (e.label.empty()) continue;
    start.push_back(e.at);
    end.push_back(std::min(e.at + e.span, c.run.duration));
    labels.push_back(e.label);
  }
  if (labels.empty()) return;
  f.writeArray("/events/start", start, {start.size()}, "s");
  f.writeArray("/events/end", end, {end.size()}, "s");
  f.writeStringArray("/events/label", labels);
}

//! Writes outputs as they come: one time point per call.
class Recorder {
 public:
  Recorder(const Body& body, const NetworkSystem& system, const RunOptions& options)
      : body_(body), system_(system), network_(body.network()), observer_(options.observer) {
    if (options.output.empty()) return;
    file_ = std::make_unique<ResultsFile>(options.output);
    ResultsFile& f = *file_;
    f.setAttribute("/", "tool_version", std::string(THERMORPH_VERSION));
    f.setAttribute("/", "command_line", options.commandLine);
    f.setAttribute("/", "case", resolvedCaseToml(body.spec()));
    f.setAttribute("/", "title", body.spec().title);
    f.setAttribute("/", "created", nowIso());
    f.setAttribute("/", "caution", std::string(caution));
    f.setAttribute("/", "complete", 0L);
    time_ = f.createSeries("/time", {}, "s");
    for (Index c = 0; c < network_.channels.size(); ++c)
      bodyFlow_.push_back(f.createSeries("/body/heat_flow/" + network_.channels[c], {}, "W"));
    bodyStorage_ = f.createSeries("/body/heat_flow/storage", {}, "W");
    for (Index c = 0; c < network_.channels.size(); ++c)
      bodyEnergy_.push_back(f.createSeries("/body/cumulative_heat/" + network_.channels[c], {}, "J"));
    balance_ = f.createSeries("/body/energy_balance_error", {}, "J");
    core_ = f.createSeries("/body/core_temperature", {}, "degC");
    blood_ = f.createSeries("/body/blood_temperature", {}, "degC");
    skin_ = f.createSeries("/body/mean_skin_temperature", {}, "degC");
    f.setAttribute("/body/core_temperature", "definition",
                   "volume-weighted mean of the innermost layer of segment " + body.segments()[body.coreSegment()].name);
    f.setAttribute("/body/blood_temperature", "definition",
                   "central blood pool (or the pinned arterial temperature)");
    f.setAttribute("/body/mean_skin_temperature", "definition",
                   "outermost tissue cells (under any coat), weighted by exposed area and segment count");
    f.setAttribute("/body", "mass", body.bodyMass());
    f.setAttribute("/body", "blood_volume", body.bloodVolume());
    f.setAttribute("/body", "blood_flow", body.totalBloodFlow());
    f.setAttribute("/body", "cardiac_output", body.cardiacOutput());
    f.setAttribute("/body", "basal_metabolic_rate", body.basalMetabolicRate());
    writeEvents(f, body.spec());
    for (const Controller& c : network_.controllers) {
      control_.push_back(f.createSeries("/control/" + c.name, {}, "1"));
      f.setAttribute("/control/" + c.name, "definition",
                     fmt::format("controller state (multiplier or open fraction), limits {:g} to {:g}", c.lower, c.upper));
    }
    for (const EnvironmentSeries& e : body.environment().series())
      environment_.push_back(f.createSeries("/environment/" + e.name, {}, e.units));
    for (const SegmentMesh& m : body.segments()) {
      std::string g = "/segments/" + m.name;
      f.writeArray(g + "/radius", m.radius, {m.radius.size()}, "m");
      f.writeArray(g + "/axial", m.axial, {m.axial.size()}, "m");
      f.writeIntArray(g + "/layer", m.layer, "1");
      f.writeStringArrayAttribute(g + "/layer", "layer_names", m.layerNames);
      f.writeArray(g + "/volume", m.volume, {static_cast<std::uint64_t>(m.nz), static_cast<std::uint64_t>(m.nr)}, "m3");
      f.setAttribute(g, "shape", std::string(shapeName(m.shape)));
      f.setAttribute(g, "surface_area", m.area);
      Segment s;
      s.temperature = f.createSeries(g + "/temperature", {static_cast<std::uint64_t>(m.nz), static_cast<std::uint64_t>(m.nr)}, "degC");
      s.surface = f.createSeries(g + "/surface_temperature", {static_cast<std::uint64_t>(m.nz)}, "degC");
      for (Index c = 0; c < network_.channels.size(); ++c)
        s.flows.push_back(f.createSeries(g + "/heat_flow/" + network_.channels[c], {}, "W"));
      s.storage = f.createSeries(g + "/heat_flow/storage", {}, "W");
      s.convection = f.createSeries(g + "/convection_coefficient", {}, "W m-2 K-1");
      s.arterial = f.createSeries(g + "/arterial_temperature", {static_cast<std::uint64_t>(m.nz)}, "degC");
      s.venous = f.createSeries(g + "/venous_temperature", {static_cast<std::uint64_t>(m.nz)}, "degC");
      segments_.push_back(s);
    }
  }

  //! Record time t with full state y (nodes then channel energies).
  void record(double t, std::span<const double> y, double initialStored, RunSummary& summary) {
    const Index groups = network_.groups.size(), channels = network_.channels.size();
    summary.flows.assign(groups * channels, 0.0);
    summary.storage.assign(groups, 0.0);
    faceTemperatures_.assign(network_.faces.size(), 0.0);
    const Index states = system_.nodeCount() + system_.controlCount();
    system_.groupFlows(t, y.first(states), summary.flows, summary.storage, faceTemperatures_);
    summary.channelEnergy.assign(y.begin() + static_cast<std::ptrdiff_t>(states), y.end());
    summary.controls.assign(y.begin() + static_cast<std::ptrdiff_t>(system_.nodeCount()),
                            y.begin() + static_cast<std::ptrdiff_t>(states));
    summary.storedChange = system_.storedHeat(y) - initialStored;
    double gained = std::accumulate(summary.channelEnergy.begin(), summary.channelEnergy.end(), 0.0);
    summary.energyBalanceError = gained - summary.storedChange;
    summary.throughput = std::abs(summary.storedChange);
    for (double e : summary.channelEnergy) summary.throughput += std::abs(e);
    summary.finalTime = t;
    if (observer_) observer_(t, y.first(system_.nodeCount()), summary);
    if (!file_) return;
    ResultsFile& f = *file_;
    double tt = t;
    f.append(time_, {&tt, 1});
    for (Index c = 0; c < channels; ++c) {
      double total = 0.0;
      for (Index g = 0; g < groups; ++g) total += network_.groupWeights[g] * summary.flows[g * channels + c];
      f.append(bodyFlow_[c], {&total, 1});
      f.append(bodyEnergy_[c], {&summary.channelEnergy[c], 1});
    }
    double storage = 0.0;
    for (Index g = 0; g < groups; ++g) storage += network_.groupWeights[g] * summary.storage[g];
    f.append(bodyStorage_, {&storage, 1});
    f.append(balance_, {&summary.energyBalanceError, 1});
    for (std::size_t k = 0; k < control_.size(); ++k) f.append(control_[k], {&summary.controls[k], 1});
    environmentValues_.resize(environment_.size());
    body_.environment().seriesValues(t, environmentValues_);
    for (std::size_t e = 0; e < environment_.size(); ++e) f.append(environment_[e], {&environmentValues_[e], 1});
    recordBodyTemperatures(y);
    for (Index g = 0; g < body_.segments().size(); ++g) {
      const SegmentMesh& m = body_.segments()[g];
      buffer_.resize(static_cast<std::size_t>(m.nz * m.nr));
      for (std::size_t i = 0; i < buffer_.size(); ++i) buffer_[i] = y[m.offset + i] - kelvinOffset;
      f.append(segments_[g].temperature, buffer_);
      buffer_.resize(static_cast<std::size_t>(m.nz));
      for (int iz = 0; iz < m.nz; ++iz) buffer_[static_cast<std::size_t>(iz)] = faceTemperatures_[m.lateralFace[iz]] - kelvinOffset;
      f.append(segments_[g].surface, buffer_);
      for (Index c = 0; c < channels; ++c) f.append(segments_[g].flows[c], {&summary.flows[g * channels + c], 1});
      f.append(segments_[g].storage, {&summary.storage[g], 1});
      double h = body_.environment().meanConvectionCoefficient(g, t, faceTemperatures_);
      f.append(segments_[g].convection, {&h, 1});
      // Blood streams: arterial and deep-venous temperature per axial cell (NaN where no blood flows).
      for (int which = 0; which < 2; ++which) {
        const std::vector<Index>& nodes = which == 0 ? m.arterial : m.venous;
        buffer_.resize(static_cast<std::size_t>(m.nz));
        for (int iz = 0; iz < m.nz; ++iz)
          buffer_[static_cast<std::size_t>(iz)] =
              (nodes.empty() || nodes[static_cast<std::size_t>(iz)] == noNode ? std::nan("")
                                                                               : y[nodes[static_cast<std::size_t>(iz)]]) -
              kelvinOffset;
        f.append(which == 0 ? segments_[g].arterial : segments_[g].venous, buffer_);
      }
    }
  }

  void finish(RunSummary& summary, bool steady) {
    if (!file_) return;
    ResultsFile& f = *file_;
    const SolverStatistics& s = summary.statistics;
    f.setAttribute("/solver", "method", std::string(steady ? "KINSOL Newton, KLU" : "CVODE BDF, Newton, KLU"));
    f.setAttribute("/solver", "steps", s.steps);
    f.setAttribute("/solver", "rhs_evaluations", s.rhsEvaluations);
    f.setAttribute("/solver", "jacobian_evaluations", s.jacobianEvaluations);
    f.setAttribute("/solver", "nonlinear_iterations", s.nonlinearIterations);
    f.setAttribute("/solver", "error_test_failures", s.errorTestFailures);
    f.setAttribute("/solver", "wall_seconds", s.wallSeconds);
    f.setAttribute("/solver", "state_size", static_cast<long>(system_.size()));
    f.setAttribute("/solver", "jacobian_nonzeros", s.jacobianNonzeros);
    f.setAttribute("/solver", "factor_nonzeros", s.factorNonzeros);
    f.setAttribute("/", "complete", summary.complete ? 1L : 0L);
    if (!summary.complete) f.setAttribute("/", "failure", summary.failure);
    // Never clobber an earlier complete result with a partial one.
    summary.outputPath = summary.complete ? f.commit() : f.commit(incompletePath());
  }

  //! Temperature of the arterial supply: the pool node, or the pinned value [K].
  double supplyTemperature(std::span<const double> y) const {
    if (body_.poolNode()) return y[*body_.poolNode()];
    return body_.spec().circulation.fixedArterialTemperature.value_or(std::nan(""));
  }

  void recordBodyTemperatures(std::span<const double> y) {
    ResultsFile& f = *file_;
    const SegmentMesh& core = body_.segments()[body_.coreSegment()];
    double sum = 0.0, volume = 0.0;
    for (int iz = 0; iz < core.nz; ++iz)
      for (int ir = 0; ir < core.innermostLayerCells; ++ir) {
        double v = core.volume[static_cast<std::size_t>(iz * core.nr + ir)];
        sum += v * y[core.node(iz, ir)];
        volume += v;
      }
    double value = sum / volume - kelvinOffset;
    f.append(core_, {&value, 1});
    value = supplyTemperature(y) - kelvinOffset;
    f.append(blood_, {&value, 1});
    double skin = 0.0, area = 0.0;
    const Network& n = body_.network();
    for (const SegmentMesh& m : body_.segments())
      for (int iz = 0; iz < m.nz; ++iz) {
        double a = m.weight * n.faces[m.lateralFace[static_cast<std::size_t>(iz)]].area;
        skin += a * y[m.node(iz, m.skinCell)];
        area += a;
      }
    value = skin / area - kelvinOffset;
    f.append(skin_, {&value, 1});
  }

  std::string incompletePath() const {
    return incompletePath_;
  }
  void setIncompletePath(std::string p) { incompletePath_ = std::move(p); }

 private:
  struct Segment {
    std::size_t temperature = 0, surface = 0, storage = 0, convection = 0, arterial = 0, venous = 0;
    std::vector<std::size_t> flows;
  };
  const Body& body_;
  const NetworkSystem& system_;
  const Network& network_;
  std::unique_ptr<ResultsFile> file_;
  OutputObserver observer_;
  std::size_t time_ = 0, bodyStorage_ = 0, balance_ = 0, core_ = 0, blood_ = 0, skin_ = 0;
  std::vector<std::size_t> bodyFlow_, bodyEnergy_, environment_, control_;
  std::vector<Segment> segments_;
  std::vector<double> faceTemperatures_, buffer_, environmentValues_;
  std::string incompletePath_;
};

std::string incompleteName(const std::string& output) {
  std::filesystem::path p(output);
  return (p.parent_path() / (p.stem().string() + ".incomplete" + p.extension().string())).string();
}

//! Uniform initial temperature for every node, then the controllers' initial states [nodes + controls].
std::vector<double> initialState(const Body& body, const NetworkSystem& system) {
  std::vector<double> y(system.nodeCount(), body.spec().run.initialTemperature);
  for (const Controller& k : body.network().controllers) y.push_back(k.initial);
  return y;
}

//! Steady state of the surroundings and physiology at t = 0 [K and controller states]. Newton alone may land on
//! an unstable branch (Q10 metabolism can balance large losses at a runaway temperature) or wander to
//! unphysical iterates, so the state is first relaxed in pseudo-time by CVODE with time frozen at 0, from the
//! guess until it changes by less than 1e-7 K/s, then polished by KINSOL: the steady state reached is the
//! stable one the body would settle in from that start.
std::vector<double> steadyTemperatures(const Body& body, std::span<const double> guess, SolverStatistics* stats) {
  NetworkSystem transient(body.network(), NetworkSystem::Mode::Transient);
  transient.freezeTime(0.0);
  const Index states = transient.nodeCount() + transient.controlCount();
  std::vector<double> y(transient.size(), 0.0);
  std::copy(guess.begin(), guess.end(), y.begin());
  IntegratorOptions io;
  io.rtol = 1e-6;
  io.atol.assign(transient.size(), 1e-4);
  for (Index i = states; i < transient.size(); ++i) io.atol[i] = 1e30;
  Integrator relax(transient, y, 0.0, io);
  std::vector<double> rate(transient.size());
  double horizon = 600.0;
  for (int k = 0; k < 40 && horizon < 1e10; ++k, horizon *= 2.0) {
    relax.setStopTime(horizon);
    relax.advanceTo(horizon);
    transient.evaluate(horizon, relax.state(), rate);
    double fastest = 0.0;
    for (Index i = 0; i < transient.nodeCount(); ++i) fastest = std::max(fastest, std::abs(rate[i]));
    if (fastest < 1e-7) break;
  }
  std::vector<double> start(relax.state().begin(), relax.state().begin() + static_cast<std::ptrdiff_t>(states));
  NetworkSystem steady(body.network(), NetworkSystem::Mode::Steady);
  steady.freezeTime(0.0);
  std::vector<double> result = solveSteadyState(steady, start, 0.0, stats);
  if (stats) {
    SolverStatistics r = relax.statistics();
    stats->steps = r.steps;
    stats->rhsEvaluations += r.rhsEvaluations;
    stats->jacobianEvaluations += r.jacobianEvaluations;
    stats->nonlinearIterations += r.nonlinearIterations;
    stats->wallSeconds += r.wallSeconds;
  }
  return result;
}

}  // namespace

RunSummary runTransient(const Body& body, const RunOptions& options) {
  const Case& c = body.spec();
  NetworkSystem system(body.network(), NetworkSystem::Mode::Transient);
  const Index nodes = system.nodeCount();
  const Index states = nodes + system.controlCount();  // temperatures, then controller states
  std::vector<double> y = initialState(body, system);
  y.resize(system.size(), 0.0);  // channel energies start at 0
  if (c.run.initial == InitialCondition::Steady) {
    std::vector<double> steady = steadyTemperatures(body, std::span<const double>(y).first(states), nullptr);
    std::copy(steady.begin(), steady.end(), y.begin());
  }
  IntegratorOptions io;
  io.rtol = c.run.rtol;
  io.maxStep = c.run.maxStep;
  io.linearSolver = options.linearSolver;
  io.atol.assign(system.size(), c.run.atol);
  for (Index i = nodes; i < states; ++i) io.atol[i] = 1e-6;  // controller states are fractions of their range
  // Channel energies are exact quadratures of the flows: excluded from the error test.
  for (Index i = states; i < system.size(); ++i) io.atol[i] = 1e30;

  RunSummary summary;
  Recorder recorder(body, system, options);
  recorder.setIncompletePath(options.output.empty() ? "" : incompleteName(options.output));
  const double initialStored = system.storedHeat(y);
  Integrator integrator(system, y, 0.0, io);
  recorder.record(0.0, integrator.state(), initialStored, summary);

  const auto start = std::chrono::steady_clock::now();
  auto lastReport = start;
  bool reported = false;
  const long outputs = std::lround(std::ceil(c.run.duration / c.run.outputInterval - 1e-9));
  // Discontinuities of the timeline: the integrator stops exactly at each and restarts (never steps across).
  // Outputs in between are interpolated (CVODE's dense output), so they do not shorten the steps.
  std::vector<double> breakpoints = body.environment().breakpoints();
  std::size_t interval = 0;
  body.setInterval(0);
  auto nextStop = [&] { return interval < breakpoints.size() ? breakpoints[interval] : c.run.duration; };
  integrator.setStopTime(nextStop());
  try {
    for (long k = 1; k <= outputs; ++k) {
      double t = std::min(c.run.duration, static_cast<double>(k) * c.run.outputInterval);
      while (interval < breakpoints.size() && breakpoints[interval] <= t) {
        integrator.advanceTo(breakpoints[interval]);
        body.setInterval(++interval);
        integrator.restart();
        integrator.setStopTime(nextStop());
      }
      // Progress on stderr once a run has taken a second: report within long output intervals too, by
      // advancing to interpolated intermediate times (CVODE's steps are not shortened by them).
      auto report = [&](double now_t) {
        auto now = std::chrono::steady_clock::now();
        if (options.quiet || std::chrono::duration<double>(now - start).count() < 1.0 ||
            std::chrono::duration<double>(now - lastReport).count() < 0.25)
          return;
        double wall = std::chrono::duration<double>(now - start).count();
        std::fprintf(stderr, "\r  t = %.0f / %.0f s (%3.0f%%)  %ld steps  %.3g simulated s per wall s   ", now_t,
                     c.run.duration, 100.0 * now_t / c.run.duration, integrator.statistics().steps, now_t / wall);
        lastReport = now;
        reported = true;
      };
      if (!options.quiet) {
        const double from = integrator.time();
        for (int part = 1; part < 16; ++part) {
          integrator.advanceTo(from + (t - from) * part / 16.0);
          report(integrator.time());
        }
      }
      integrator.advanceTo(t);
      recorder.record(t, integrator.state(), initialStored, summary);
      report(t);
    }
  } catch (const SolverError& e) {
    summary.complete = false;
    summary.failure = e.what();
  }
  if (reported) std::fprintf(stderr, "\n");
  summary.statistics = integrator.statistics();
  summary.finalState.assign(integrator.state().begin(), integrator.state().begin() + static_cast<std::ptrdiff_t>(nodes));
  recorder.finish(summary, false);
  return summary;
}

RunSummary runSteady(const Body& body, const RunOptions& options) {
  NetworkSystem transient(body.network(), NetworkSystem::Mode::Transient);
  const Index nodes = transient.nodeCount();
  std::vector<double> guess = initialState(body, transient);
  RunSummary summary;
  Recorder recorder(body, transient, options);
  recorder.setIncompletePath(options.output.empty() ? "" : incompleteName(options.output));
  body.setInterval(0);
  std::vector<double> steady = steadyTemperatures(body, guess, &summary.statistics);
  std::vector<double> y(transient.size(), 0.0);
  std::copy(steady.begin(), steady.end(), y.begin());
  recorder.record(0.0, y, transient.storedHeat(y), summary);
  summary.finalState.assign(steady.begin(), steady.begin() + static_cast<std::ptrdiff_t>(nodes));
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
  const SolverStatistics& st = s.statistics;
  fmt::print(out,
             "Solver: {} steps, {} rhs evaluations, {} Jacobians, {} Newton iterations, {} error-test failures, "
             "{:.3f} s wall",
             st.steps, st.rhsEvaluations, st.jacobianEvaluations, st.nonlinearIterations, st.errorTestFailures,
             st.wallSeconds);
  if (st.factorNonzeros > 0)
    fmt::print(out, "; {} nodes, Jacobian {} nonzeros, KLU L+U {}", n.nodes.size(), st.jacobianNonzeros,
               st.factorNonzeros);
  fmt::print(out, "\n");
}

}  // namespace thermorph
