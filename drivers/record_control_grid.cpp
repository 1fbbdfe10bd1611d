#include "drivers/record_control_grid.hpp"

#include <algorithm>
#include <cmath>
#include <map>

#include <fmt/format.h>

#include "models/grid.hpp"

namespace thermorph {
namespace {

//! Below this share of its range an output counts as closed: its error is stated relative to that share (an
//! opening of 0.001 that is 50 % off is 0.0005 of its range, which no reader of the output would see).
constexpr double kOutputFloor = kControlOutputFloor;

//! The signal is a layer mean of cell temperatures (the core's innermost layer, a skin layer), whose own
//! discretisation error adds to the heat flows': kSignalFactor times that layer's estimated error. Measured on
//! the core in a shell of tests/test_control_grid.cpp against its exact steady state (Incropera et al. 2007,
//! eqs. 3.28, 3.53): the core temperature's error relative to its rise above the surroundings is 2.0-2.2 times the
//! estimated error of the layer on 1+1 to 4+4 cells and on the automatic grid; 2.5 keeps a margin.
constexpr double kSignalFactor = 2.5;

//! A tolerance that meets `needed` or less: rounded down to two significant digits.
double roundDown(double needed) {
  if (!(needed > 0.0)) return needed;
  const double scale = std::pow(10.0, std::floor(std::log10(needed)) - 1.0);
  return std::floor(needed / scale + 1e-9) * scale;
}

}  // namespace

ControlGridWatch::ControlGridWatch(const Body& body, const NetworkSystem& system, bool steady)
    : body_(body), system_(system), // A Steady-mode system keeps no group energies in its state.
      steady_(steady || (system.groupCount() == 0 && !body.network().groups.empty())) {
  const Network& net = body.network();
  const Index nodes = system.nodeCount();
  // L counts the heat lost through the channels to the surroundings, not blood, conduction or tucking.
  external_.assign(net.channels.size(), 1);
  for (Index ch = 0; ch < net.channels.size(); ++ch)
    external_[ch] = !(net.channels[ch] == "blood" || net.channels[ch] == "conduction" || net.channels[ch] == "tucking");
  // Controllers that drive terms directly, by modulator.
  std::vector<Index> owner(net.modulators.size(), none);
  for (Index k = 0; k < net.modulators.size(); ++k) owner[k] = net.modulators[k].control;
  std::map<Index, Watched> byControl;
  auto term = [&](Index k, Term t) {
    if (k == none || owner[k] == none) return;
    Watched& w = byControl[owner[k]];
    w.control = owner[k];
    w.terms.push_back(t);
  };
  for (auto it = net.advections.begin(); it != net.advections.end(); ++it) {
    const Advection a = *it;
    for (int hop = 0; hop < (a.via == none ? 1 : 2); ++hop)
      net.forEachPart(a, [&](Index p, const FlowPart& part) { term(part.modulator, {Term::Advection, it.index(), p, hop}); });
  }
  for (Index i = 0; i < net.exchanges.size(); ++i)
    for (Index p = net.exchanges[i].partsBegin; p < net.exchanges[i].partsEnd; ++p)
      term(net.flowParts[p].modulator, {Term::Exchange, i, p});
  for (auto it = net.sources.begin(); it != net.sources.end(); ++it) term((*it).modulator, {Term::Source, it.index(), none});
  // Sweating drives no modulator: the evaporation of its segments' faces (Network::faceControls), one term per group.
  for (Index ch = 0; ch < net.channels.size(); ++ch)
    if (net.channels[ch] == "evaporation") evaporation_ = ch;
  if (evaporation_ != none)
    for (const FaceControl& fc : net.faceControls) {
      const Index g = net.nodes[net.faces[fc.face].node].group;
      Watched& w = byControl[fc.controller];
      w.control = fc.controller;
      const bool known = std::any_of(w.terms.begin(), w.terms.end(), [&](const Term& t) {
        return t.kind == Term::Evaporation && t.term == g;
      });
      if (!known) w.terms.push_back({Term::Evaporation, g, none});
    }
  if (byControl.empty()) return;

  // The core segment's group: a signal that reads it (core temperature, mean skin) balances the whole body.
  const Index groups = net.groups.size();
  const Index core = body.coreSegment();
  std::map<std::vector<Index>, std::size_t> loops;
  for (auto& [c, w] : byControl) {
    // A chained controller (a CIVD stage) reads the state of the one before it: follow it to the chain's head.
    Index head = c;
    while (net.controllers[head].signal.size() == 1 && net.controllers[head].signal[0].first >= nodes)
      head = net.controllers[head].signal[0].first - nodes;
    w.head = head;
    std::vector<Index> signal;
    w.scope.assign(groups, 0);
    bool whole = false;
    for (auto [node, weight] : net.controllers[head].signal) {
      signal.push_back(node);
      if (node >= nodes) continue;
      const Index g = net.nodes[node].group;
      w.scope[g] = 1;
      whole = whole || g == core;
    }
    std::sort(signal.begin(), signal.end());
    if (whole) {
      w.scope.assign(groups, 1);
      w.scopeName = "the body";
    } else {
      for (Index g = 0; g < groups; ++g)
        if (w.scope[g]) w.scopeName += (w.scopeName.empty() ? "" : ", ") + net.groups[g];
    }
    w.loop = loops.emplace(signal, loops.size()).first->second;
    controllers_.push_back(std::move(w));
    Estimate e;
    e.controller = net.controllers[c].name;
    worst_.push_back(e);
  }
  modulators_.assign(net.modulators.size(), 0.0);
  // eps: the largest estimated error of any segment's heat flows on the grid of this run.
  const Case& spec = body.spec();
  // The estimate the case was resolved with (it does not depend on the cell counts), else a new one. Estimating
  // again here builds an EnvironmentModel, which resets this thread's log of validity warnings: a resolved case
  // (every case loaded from a file) keeps the run's warnings; the new estimate is for cases built without it.
  const bool kept = spec.gridEstimates && spec.gridEstimates->size() == spec.segments.size();
  estimates_ = kept ? *spec.gridEstimates : estimateGrid(spec);
  const std::vector<SegmentGridEstimate>& estimates = estimates_;
  for (std::size_t g = 0; g < estimates.size(); ++g)
    gridError_ = std::max(gridError_, segmentGridError(spec, g, estimates[g]));
  // The signal's own reading: the estimated error of each layer its nodes lie in (kSignalFactor above).
  const std::vector<SegmentMesh>& meshes = body.segments();
  for (Watched& w : controllers_) {
    for (auto [node, share] : net.controllers[w.head].signal) {
      for (std::size_t g = 0; g < meshes.size() && g < spec.segments.size(); ++g) {
        const SegmentMesh& m = meshes[g];
        if (node < m.offset || node >= m.offset + static_cast<Index>(m.nz * m.nr)) continue;
        const std::size_t layer = static_cast<std::size_t>(m.layer[(node - m.offset) % static_cast<Index>(m.nr)]);
        const SegmentSpec& s = spec.segments[g];
        if (layer >= s.layers.size()) break;  // the coat
        const double scale = s.shape == Shape::Cone ? 0.5 * (1.0 + s.radiusDistal / s.radiusProximal) : 1.0;
        w.signalError = std::max(w.signalError, kSignalFactor * layerGridError(estimates[g], layer,
                                                                               s.layers[layer].thickness * scale,
                                                                               s.layers[layer].cells,
                                                                               s.layers[layer].grading));
        break;
      }
    }
  }
  // The scope's heat capacity, copies weighted (C of the stored shift and of the storage term).
  std::vector<double> groupCapacity(groups, 0.0);
  for (const NetworkNode& node : net.nodes) groupCapacity[node.group] += node.capacity;
  for (Watched& w : controllers_)
    for (Index g = 0; g < groups; ++g)
      if (w.scope[g]) w.capacity += net.groupWeights[g] * groupCapacity[g];
  steady_ = steady_ || spec.run.initial == InitialCondition::Steady;
  tolerance_ = spec.run.gridTolerance;
  limit_ = std::max(kGridWarnError, tolerance_);
}

void ControlGridWatch::start(double t) {
  if (started_ || controllers_.empty()) return;
  started_ = true;
  start_ = last_ = t;
}

double ControlGridWatch::effectiveGain(const Watched& w) const {
  // Along a chain each stage follows the one before with gain 1 (steady); the head's gain carries the signal.
  const Network& net = body_.network();
  double gain = net.controllers[w.head].gain;
  for (Index c = w.control; c != w.head; c = net.controllers[c].signal[0].first - system_.nodeCount())
    gain *= net.controllers[c].gain;
  return std::abs(gain);
}

void ControlGridWatch::observe(double t, std::span<const double> y, std::span<const double> flows) {
  if (controllers_.empty()) return;
  const Network& net = body_.network();
  if (flows.size() < net.groups.size() * net.channels.size()) return;
  if (std::all_of(flows.begin(), flows.end(), [](double f) { return f == 0.0; })) return;  // flows not computed
  observeFlows(t, y, flows);
}

void ControlGridWatch::findGainChannels() {
  const Network& net = body_.network();
  // Channels to the surroundings whose flows can only be gains (metabolism, shivering: Q10 sources and nothing
  // else): L and the storage term count a channel's loss max(0, -flow) only, 0 for such a channel whatever its
  // value, so observe(t, y) leaves their sources (an exp each) and, for channel 0, the loop over every conductance
  // out of the flows it computes. A channel qualifies when no conductance between groups, stream, exchange, face
  // (SurfaceModel::faceChannels) or source of negative power (respiration's) books to it; its sources' power and
  // modulators are checked >= 0 again at each output (a controller's state can dip below 0 by the integrator's
  // error: then that output computes every channel).
  std::vector<char> signedTerms(net.channels.size(), 0), sourced(net.channels.size(), 0);
  net.conductances.forEach([&](Index k, const Conductance& c) {
    if (net.nodes[c.a].group != net.nodes[c.b].group) signedTerms[net.conductanceChannel(k)] = 1;
  });
  net.advections.forEach([&](Index, const Advection& a) { signedTerms[a.channel] = 1; });
  for (const BoundaryExchange& e : net.exchanges) signedTerms[e.channel] = 1;
  net.sources.forEach([&](Index, const HeatSource& s) {
    sourced[s.channel] = 1;
    if (!(s.power >= 0.0)) signedTerms[s.channel] = 1;  // a loss booked as a source (respiration)
  });
  // The surface model's channels (ascending; empty: any channel).
  const std::vector<Index> surfaceChannels = net.surface ? net.surface->faceChannels() : std::vector<Index>{};
  gainOnly_.assign(net.channels.size(), 0);
  mask_ = external_;
  for (Index ch = 0; ch < net.channels.size(); ++ch) {
    const bool faces = !net.faces.empty() &&
                       (surfaceChannels.empty() ||
                        std::binary_search(surfaceChannels.begin(), surfaceChannels.end(), ch));
    gainOnly_[ch] = external_[ch] && ch != evaporation_ && sourced[ch] && !signedTerms[ch] && !faces;
    if (gainOnly_[ch]) mask_[ch] = 0;
  }
  gainChannels_ = std::any_of(gainOnly_.begin(), gainOnly_.end(), [](char c) { return c != 0; });
  gainScanned_ = true;
}

bool ControlGridWatch::enabled(const Watched& w, double t) const {
  const Controller& head = body_.network().controllers[w.head];
  return head.enableSchedule == none || body_.network().schedules->value(head.enableSchedule, t) > 0.5;
}

bool ControlGridWatch::flowsNeeded(double t) const {
  // From a uniform start the storage term integrates every scope's loss from the start: every output's flows.
  if (!steady_) return true;
  // After a steady start the flows enter only through L of an enabled controller's scope (a disabled one balances
  // nothing: L = 0, its change since the start eps L_0 without flows) and sweating's evaporation at its unclamped
  // outputs, which are enabled ones.
  return std::any_of(controllers_.begin(), controllers_.end(), [&](const Watched& w) { return enabled(w, t); });
}

void ControlGridWatch::observe(double t, std::span<const double> y) {
  if (controllers_.empty()) return;
  if (!flowsNeeded(t)) {
    observeFlows(t, y, {});
    return;
  }
  const Network& net = body_.network();
  if (!gainScanned_) findGainChannels();  // here, not in the constructor: `run`'s check is fed its flows
  flows_.resize(net.groups.size() * net.channels.size());
  // The gain-only channels left out (findGainChannels) where their sources are gains at this output: the coefficients
  // and modulators of time t, as channelFlows takes them.
  bool gains = gainChannels_;
  if (gains) {
    net.coefficientsAt(t);
    system_.modulatorValues(t, y, modulators_);
    net.sources.forEach([&](Index, const HeatSource& s) {
      if (gainOnly_[s.channel] && !(s.power >= 0.0 && (s.modulator == none || modulators_[s.modulator] >= 0.0)))
        gains = false;
    });
  }
  system_.channelFlows(t, y.first(system_.nodeCount() + system_.controlCount()), gains ? mask_ : external_, flows_);
  observeFlows(t, y, flows_, gainChannels_);
}

void ControlGridWatch::observeFlows(double t, std::span<const double> y, std::span<const double> flows,
                                    bool modulatorsKnown) {
  const Network& net = body_.network();
  const Index nodes = system_.nodeCount(), channels = net.channels.size(), groups = net.groups.size();
  start(t);
  const double dt = t - last_;
  // The latest step of the timeline (an event without a ramp) in (last output, t]: the losses jump there, so the
  // change of the heat-flow error since a steady start is integrated as the last output's value up to the step and
  // this output's after it, not by the trapezoid across the jump (which credited half an interval of the new loss to
  // the output on the step's own instant, and so made the estimate depend on the output interval).
  double step = -1.0;
  for (const EventSpec& e : body_.spec().events)
    if (e.ramp == 0.0 && e.at > last_ && e.at <= t) step = std::max(step, e.at);
  const double previous = last_;
  last_ = t;
  if (!modulatorsKnown) system_.modulatorValues(t, y, modulators_);
  // Heat each group (one copy) has lost to its surroundings since the start, for the storage term (trapezoidal
  // over the outputs; the first observation after the start: rectangle).
  exchanged_.resize(groups, 0.0);
  lastLoss_.resize(groups, -1.0);
  // Without flows (flowsNeeded: after a steady start, every controller disabled) the loss is not formed; after a
  // steady start the storage term, its only reader, is never computed.
  for (Index g = 0; g < groups && !flows.empty(); ++g) {
    double loss = 0.0;
    for (Index ch = 0; ch < channels; ++ch)
      if (external_[ch]) loss += std::max(0.0, -flows[g * channels + ch]);
    if (dt > 0.0) exchanged_[g] += (lastLoss_[g] < 0.0 ? loss : 0.5 * (lastLoss_[g] + loss)) * dt;
    lastLoss_[g] = loss;
  }
  auto weight = [&](Index node) { return net.groupWeights[net.nodes[node].group]; };

  struct Now {
    bool active = false;
    double u = 0.0, gain = 0.0, carried = 0.0, balanced = 0.0;
  };
  std::vector<Now> now(controllers_.size());
  std::vector<double> stiffness;
  for (std::size_t i = 0; i < controllers_.size(); ++i) {
    Watched& w = controllers_[i];
    const Controller& head = net.controllers[w.head];
    Now& n = now[i];
    const bool on = enabled(w, t);
    if (on) {
      for (Index g = 0; g < groups; ++g) {
        if (!w.scope[g]) continue;
        for (Index ch = 0; ch < channels; ++ch)
          if (external_[ch]) n.balanced += net.groupWeights[g] * std::max(0.0, -flows[g * channels + ch]);
      }
    }
    // int eps L dt / C: the heat-flow error the scope can have stored by now (trapezoidal over the outputs).
    const double source = (gridError_ + w.signalError) * n.balanced;
    if (w.capacity > 0.0 && dt > 0.0)  // the first observation after the start: rectangle
      w.stored += (w.lastSource < 0.0 ? source : 0.5 * (w.lastSource + source)) * dt / w.capacity;
    w.lastSource = source;
    if (steady_) {  // after a steady start: what the change of the heat-flow error can have stored
      if (w.startLoss < 0.0) w.startLoss = n.balanced;
      const double change = (gridError_ + w.signalError) * std::abs(n.balanced - w.startLoss);
      if (w.capacity > 0.0 && dt > 0.0)
        w.changeStored += (w.lastChange < 0.0 ? change * dt
                           : step >= 0.0    ? w.lastChange * (step - previous) + change * (t - step)
                                            : 0.5 * (w.lastChange + change) * dt) / w.capacity;
      w.lastChange = change;
    }
    if (!on) continue;
    double signal = 0.0;
    for (auto [node, share] : head.signal) signal += share * y[node];
    const double setpoint = head.setpointSchedule == none ? head.setpoint : net.schedules->value(head.setpointSchedule, t);
    const double raw = head.bias + head.gain * (signal - setpoint);
    if (!(raw > head.lower && raw < head.upper)) continue;  // clamped: no grid error of its own
    n.u = y[nodes + w.control];
    n.gain = effectiveGain(w);
    for (const Term& term : w.terms) {
      switch (term.kind) {
        case Term::Advection: {
          const Advection& a = net.advections[term.term];
          const FlowPart p = net.part(a, term.part);
          const Index from = term.hop == 1 ? Index(a.via) : Index(a.from), to = a.via != none && term.hop == 0 ? Index(a.via) : Index(a.to);
          n.carried += weight(to) * std::abs(p.coefficient * modulators_[p.modulator] * (y[from] - y[to]));
          break;
        }
        case Term::Exchange: {
          const BoundaryExchange& e = net.exchanges[term.term];
          const FlowPart& p = net.flowParts[term.part];
          n.carried += weight(e.node) * std::abs(p.coefficient * modulators_[p.modulator] * (e.temperature - y[e.node]));
          break;
        }
        case Term::Source: {
          const HeatSource& s = net.sources[term.term];
          const Q10Law& law = net.q10Laws[s.law];
          n.carried += weight(s.node) * std::abs(s.power * std::pow(law.q10, (y[s.node] - law.referenceTemperature) / 10.0) *
                                                 modulators_[s.modulator]);
          break;
        }
        case Term::Evaporation: {
          // The group's evaporation is that of its controlled faces, linear in w = sweatingWettedFraction(g, t, u):
          // u dQ/du = u (dw/du) Q / w (0 where w is clamped at max).
          const Index g = term.term;
          double slope = 0.0;
          const double wetted = body_.environment().sweatingWettedFraction(g, t, n.u, &slope);
          if (wetted > 0.0 && slope > 0.0)
            n.carried += net.groupWeights[g] * std::abs(flows[g * channels + evaporation_] * slope * n.u / wetted);
          break;
        }
      }
    }
    if (!(n.carried > 0.0) || !(n.balanced > 0.0)) continue;
    n.active = true;
    if (stiffness.size() <= w.loop) stiffness.resize(w.loop + 1, 0.0);
    stiffness[w.loop] += n.gain * n.carried / std::max(std::abs(n.u), 1e-12);
  }
  const Case& spec = body_.spec();
  for (std::size_t i = 0; i < controllers_.size(); ++i) {
    const Now& n = now[i];
    if (!n.active) continue;
    Watched& w = controllers_[i];
    const Controller& c = net.controllers[w.control];
    const double eps = gridError_ + w.signalError;
    double shift = eps * n.balanced / stiffness[w.loop];  // dT of the signal [K], quasi-static
    const double quasiStatic = shift;
    // From a uniform start: at most what the heat-flow error can have stored. A steady start has the shift of its
    // first observation in full, and from there at most what the change of the error can have stored.
    if (!steady_) shift = std::min(shift, w.stored);
    else {
      if (w.startShift < 0.0) w.startShift = shift;
      shift = std::min(shift, w.startShift + w.changeStored);
    }
    // The storage transient since a start from a uniform temperature: sum_g E_g(t) Q_g(t) / C (weighted copies).
    double storage = 0.0, worst = 0.0;
    StorageTransientError worstLayer;
    std::size_t worstSegment = 0;
    if (!steady_ && t > start_ && w.capacity > 0.0) {
      for (std::size_t g = 0; g < spec.segments.size() && g < estimates_.size() && g < groups; ++g) {
        if (!w.scope[g]) continue;
        StorageTransientError s = storageTransientError(spec.segments[g], estimates_[g], t - start_);
        // At most the heat the segment's layers can misplace over their whole transient (storageHeatBound): the
        // error of the heat exchanged since the start no longer grows once each layer has reached its profile.
        double heat = s.error * exchanged_[g];
        const StorageHeatBound bound = storageHeatBound(spec.segments[g], estimates_[g]);
        if (bound.heat < heat) {
          heat = bound.heat;
          s.layer = bound.layer;
          s.cells = bound.cells;
        }
        const double part = heat * net.groupWeights[g] / w.capacity;
        storage += part;
        if (part > worst) worst = part, worstLayer = s, worstSegment = g;
      }
    }
    const double floor = std::max(std::abs(n.u), kOutputFloor * (c.upper - c.lower));
    const double error = n.gain * (shift + storage) / floor;
    Estimate& e = worst_[i];
    if (e.observed && error <= e.error) continue;
    e.observed = true;
    e.time = t;
    e.output = n.u;
    e.balanced = n.balanced;
    e.carried = n.carried;
    e.gridError = eps;
    e.error = error;
    e.magnification = eps > 0.0 ? n.gain * eps * n.balanced / stiffness[w.loop] / floor / eps : 0.0;
    e.capped = shift < quasiStatic;
    e.storageError = n.gain * storage / floor;
    e.segment = worstSegment;
    e.layer = worstLayer.layer;
    e.cells = worstLayer.cells;
    e.cellsNeeded = 0;
    // Cells of that layer that bring the storage term below half the limit (it falls as 1 / cells^2).
    const double part = n.gain * worst / floor;
    if (e.storageError > 0.5 * limit_ && part > 0.0) {
      const double target = std::max(0.5 * limit_ - (e.storageError - part), 0.125 * limit_);
      e.cellsNeeded = static_cast<int>(std::ceil(worstLayer.cells * std::sqrt(part / target) - 1e-9));
    }
  }
}

std::vector<std::string> ControlGridWatch::warnings() const {
  std::vector<std::string> out;
  const Case& spec = body_.spec();
  for (std::size_t i = 0; i < worst_.size(); ++i) {
    const Estimate& e = worst_[i];
    if (!e.observed || !(e.error > limit_)) continue;
    // Automatic counts bring both parts of eps down in proportion to the tolerance (models/grid.cpp).
    const double quasiStatic = e.error - e.storageError;
    std::string text = fmt::format(
        "grid: controller {}: its output {:.3g} at t = {:g} s balances {:.3g} W lost by {} with {:.3g} W it carries "
        "(magnification {:.3g}{}): the grid's estimated {:.2g} % error in heat flows and in the signal makes an estimated {:.2g} % error "
        "in this output (more than {:g} %)",
        e.controller, e.output, e.time, e.balanced, controllers_[i].scopeName, e.carried, e.magnification,
        e.capped ? " at a steady balance; the signal's shift capped by the heat the error can have stored by then" : "",
        100.0 * e.gridError, 100.0 * e.error, 100.0 * limit_);
    if (e.storageError > 0.0) {
      const SegmentSpec& seg = spec.segments.at(e.segment);
      const bool coat = e.layer >= seg.layers.size();
      const std::string where = coat ? fmt::format("segments.{}.coat.cells", seg.name)
                                     : fmt::format("segments.{}.layers[{}].cells", seg.name, e.layer);
      text += fmt::format(", {:.2g} % of it from the heat stored since the uniform start (most in {}'s {} on {} radial "
                          "cells, {}",
                          100.0 * e.storageError, seg.name, coat ? "coat" : seg.layers[e.layer].tissue, e.cells, where);
      text += e.cellsNeeded > 0 ? fmt::format(": about {} cells meet it)", e.cellsNeeded) : ")";
    }
    if (!(e.storageError > 0.0) || quasiStatic > 0.5 * limit_) {
      const bool rest = e.storageError > 0.0;
      const double tolerance = roundDown(tolerance_ * (rest ? 0.5 : 1.0) * limit_ / quasiStatic);
      text += fmt::format("; about run.grid_tolerance = {:g} (now {:g}) meets {} on automatic cell counts (they change "
                          "in steps: rerun to see; given counts: refine them), or measure it with `thermorph refine CASE "
                          "--metric controls.{}`",
                          tolerance, tolerance_, rest ? "the rest" : "it", e.controller);
    } else {
      text += fmt::format("; measure it with `thermorph refine CASE --metric controls.{}`", e.controller);
    }
    out.push_back(std::move(text));
  }
  return out;
}

}  // namespace thermorph
