#include "solver/assembly.hpp"

#include <algorithm>
#include <cmath>
#include <stdexcept>

#include <fmt/format.h>

namespace thermorph {

NetworkSystem::NetworkSystem(const Network& network, Mode mode)
    : network_(network), mode_(mode), nodes_(network.nodes.size()), channels_(network.channels.size()) {
  const bool transient = mode == Mode::Transient;
  pattern_.size = nodes_ + (transient ? channels_ : 0);
  nodeWeight_.resize(nodes_);
  for (Index i = 0; i < nodes_; ++i) {
    Index g = network.nodes[i].group;
    nodeWeight_[i] = g < network.groupWeights.size() ? network.groupWeights[g] : 1.0;
  }
  // Between groups of different multiplicity a conductance carries its flow once per copy of the more
  // numerous group: the single parent receives count times what each child copy gives.
  for (const Conductance& c : network.conductances) {
    double w = std::max(nodeWeight_[c.a], nodeWeight_[c.b]);
    conductanceFactor_.push_back(w / nodeWeight_[c.a]);
    conductanceFactor_.push_back(w / nodeWeight_[c.b]);
  }
  // Q10^((T - T_ref)/10) = exp(a (T - T_ref)), a = ln(Q10)/10.
  for (const HeatSource& src : network.sources) q10Rate_.push_back(std::log(src.q10) / 10.0);
  rowScale_.assign(pattern_.size, 1.0);
  if (transient)
    for (Index i = 0; i < nodes_; ++i) {
      if (!(network.nodes[i].capacity > 0.0))
        throw std::invalid_argument(fmt::format("node {} has no heat capacity", network.nodes[i].label));
      rowScale_[i] = 1.0 / network.nodes[i].capacity;
    }

  // Collect (row, col) of every term, then compress into CSC once.
  std::vector<std::pair<Index, Index>> entries;  // (col, row)
  auto add = [&](Index row, Index col) { entries.emplace_back(col, row); };
  auto accumulator = [&](Index channel) { return nodes_ + channel; };
  for (Index i = 0; i < nodes_; ++i) add(i, i);
  for (const Conductance& c : network.conductances) {
    add(c.a, c.b);
    add(c.b, c.a);
  }
  for (const Advection& a : network.advections) {
    add(a.to, a.from);
    if (transient) {
      add(accumulator(a.channel), a.from);
      add(accumulator(a.channel), a.to);
    }
  }
  if (transient) {
    for (const BoundaryExchange& e : network.exchanges) add(accumulator(e.channel), e.node);
    for (const HeatSource& s : network.sources) add(accumulator(s.channel), s.node);
    for (const SurfaceFace& f : network.faces)
      for (Index c = 0; c < channels_; ++c) add(accumulator(c), f.node);
    for (Index c = 0; c < channels_; ++c) add(accumulator(c), accumulator(c));  // keeps the diagonal structural
  }
  std::sort(entries.begin(), entries.end());
  entries.erase(std::unique(entries.begin(), entries.end()), entries.end());
  pattern_.columnStart.assign(pattern_.size + 1, 0);
  pattern_.rowIndex.reserve(entries.size());
  for (auto& [col, row] : entries) {
    ++pattern_.columnStart[col + 1];
    pattern_.rowIndex.push_back(row);
  }
  for (Index c = 0; c < pattern_.size; ++c) pattern_.columnStart[c + 1] += pattern_.columnStart[c];

  for (const Conductance& c : network.conductances) {
    conductanceSlots_.insert(conductanceSlots_.end(), {slot(c.a, c.a), slot(c.a, c.b), slot(c.b, c.b), slot(c.b, c.a)});
  }
  for (const Advection& a : network.advections) {
    advectionSlots_.insert(advectionSlots_.end(), {slot(a.to, a.to), slot(a.to, a.from)});
    if (transient)
      accumulatorSlots_.insert(accumulatorSlots_.end(),
                               {slot(accumulator(a.channel), a.from), slot(accumulator(a.channel), a.to)});
  }
  for (const BoundaryExchange& e : network.exchanges) {
    exchangeSlots_.push_back(slot(e.node, e.node));
    if (transient) accumulatorSlots_.push_back(slot(accumulator(e.channel), e.node));
  }
  for (const HeatSource& s : network.sources) {
    sourceSlots_.push_back(slot(s.node, s.node));
    if (transient) accumulatorSlots_.push_back(slot(accumulator(s.channel), s.node));
  }
  for (const SurfaceFace& f : network.faces) {
    faceSlots_.push_back(slot(f.node, f.node));
    if (transient)
      for (Index c = 0; c < channels_; ++c) accumulatorSlots_.push_back(slot(accumulator(c), f.node));
  }
  faceGuess_.assign(network.faces.size(), std::nan(""));
  scratchHeat_.resize(channels_);
  scratchDerivative_.resize(channels_);
}

Index NetworkSystem::slot(Index row, Index col) const {
  auto first = pattern_.rowIndex.begin() + static_cast<std::ptrdiff_t>(pattern_.columnStart[col]);
  auto last = pattern_.rowIndex.begin() + static_cast<std::ptrdiff_t>(pattern_.columnStart[col + 1]);
  auto it = std::lower_bound(first, last, row);
  if (it == last || *it != row) throw std::logic_error("sparse pattern misses an entry");
  return static_cast<Index>(it - pattern_.rowIndex.begin());
}

NetworkSystem::FaceSolution NetworkSystem::solveFace(Index face, double time, double nodeTemperature,
                                                     std::span<double> channelHeat,
                                                     std::span<double> channelDerivative) const {
  // Face balance G (T_n - T_s) + q(T_s) = 0, solved by Newton for T_s; then by the implicit function theorem
  // dT_s/dT_n = G / (G - q'(T_s)).
  const SurfaceFace& f = network_.faces[face];
  const double G = f.halfConductance;
  double Ts = std::isfinite(faceGuess_[face]) ? faceGuess_[face] : nodeTemperature;
  double dq = 0.0;
  for (int iteration = 0; iteration < 60; ++iteration) {
    std::fill(channelHeat.begin(), channelHeat.end(), 0.0);
    std::fill(channelDerivative.begin(), channelDerivative.end(), 0.0);
    network_.surface->faceHeat(face, Ts, time, channelHeat, channelDerivative);
    double q = 0.0;
    dq = 0.0;
    for (Index c = 0; c < channels_; ++c) {
      q += channelHeat[c];
      dq += channelDerivative[c];
    }
    double residual = G * (nodeTemperature - Ts) + q;
    double step = residual / (G - dq);
    Ts += step;
    if (std::abs(step) < 1e-11 * (1.0 + std::abs(Ts))) {
      std::fill(channelHeat.begin(), channelHeat.end(), 0.0);
      std::fill(channelDerivative.begin(), channelDerivative.end(), 0.0);
      network_.surface->faceHeat(face, Ts, time, channelHeat, channelDerivative);
      dq = 0.0;
      for (Index c = 0; c < channels_; ++c) dq += channelDerivative[c];
      faceGuess_[face] = Ts;
      return {Ts, G / (G - dq)};
    }
  }
  throw std::runtime_error(fmt::format("face temperature did not converge at {}", network_.nodes[f.node].label));
}

void NetworkSystem::evaluate(double time, std::span<const double> T, std::span<double> out) const {
  const bool transient = mode_ == Mode::Transient;
  std::fill(out.begin(), out.end(), 0.0);
  std::span<double> acc = transient ? out.subspan(nodes_, channels_) : std::span<double>();
  for (std::size_t k = 0; k < network_.conductances.size(); ++k) {
    const Conductance& c = network_.conductances[k];
    double q = c.conductance * (T[c.b] - T[c.a]);
    out[c.a] += conductanceFactor_[2 * k] * q;
    out[c.b] -= conductanceFactor_[2 * k + 1] * q;
  }
  for (const Advection& a : network_.advections) {
    double q = a.flowCapacity * (T[a.from] - T[a.to]);
    out[a.to] += q;
    if (transient) acc[a.channel] += nodeWeight_[a.to] * q;
  }
  for (const BoundaryExchange& e : network_.exchanges) {
    double q = e.conductance * (e.temperature - T[e.node]);
    out[e.node] += q;
    if (transient) acc[e.channel] += nodeWeight_[e.node] * q;
  }
  for (const HeatSource& s : network_.sources) {
    double q = s.power * std::exp(q10Rate_[&s - network_.sources.data()] * (T[s.node] - s.referenceTemperature));
    out[s.node] += q;
    if (transient) acc[s.channel] += nodeWeight_[s.node] * q;
  }
  for (Index f = 0; f < network_.faces.size(); ++f) {
    Index node = network_.faces[f].node;
    solveFace(f, time, T[node], scratchHeat_, scratchDerivative_);
    for (Index c = 0; c < channels_; ++c) {
      out[node] += scratchHeat_[c];
      if (transient) acc[c] += nodeWeight_[node] * scratchHeat_[c];
    }
  }
  if (transient)
    for (Index i = 0; i < nodes_; ++i) out[i] *= rowScale_[i];
}

void NetworkSystem::jacobian(double time, std::span<const double> T, std::span<double> values) const {
  const bool transient = mode_ == Mode::Transient;
  std::fill(values.begin(), values.end(), 0.0);
  std::size_t k = 0;
  for (std::size_t i = 0; i < network_.conductances.size(); ++i) {
    const double G = network_.conductances[i].conductance;
    const double fa = conductanceFactor_[2 * i], fb = conductanceFactor_[2 * i + 1];
    values[conductanceSlots_[k++]] -= fa * G;
    values[conductanceSlots_[k++]] += fa * G;
    values[conductanceSlots_[k++]] -= fb * G;
    values[conductanceSlots_[k++]] += fb * G;
  }
  std::size_t a = 0, acc = 0;
  for (const Advection& adv : network_.advections) {
    values[advectionSlots_[a++]] -= adv.flowCapacity;
    values[advectionSlots_[a++]] += adv.flowCapacity;
    if (transient) {
      values[accumulatorSlots_[acc++]] += nodeWeight_[adv.to] * adv.flowCapacity;
      values[accumulatorSlots_[acc++]] -= nodeWeight_[adv.to] * adv.flowCapacity;
    }
  }
  for (std::size_t i = 0; i < network_.exchanges.size(); ++i) {
    const BoundaryExchange& e = network_.exchanges[i];
    values[exchangeSlots_[i]] -= e.conductance;
    if (transient) values[accumulatorSlots_[acc++]] -= nodeWeight_[e.node] * e.conductance;
  }
  for (std::size_t i = 0; i < network_.sources.size(); ++i) {
    const HeatSource& s = network_.sources[i];
    // d/dT [P Q10^((T - T_ref)/10)] = P Q10^(...) ln(Q10)/10.
    double dq = s.power * std::exp(q10Rate_[i] * (T[s.node] - s.referenceTemperature)) * q10Rate_[i];
    values[sourceSlots_[i]] += dq;
    if (transient) values[accumulatorSlots_[acc++]] += nodeWeight_[s.node] * dq;
  }
  for (Index f = 0; f < network_.faces.size(); ++f) {
    Index node = network_.faces[f].node;
    FaceSolution sol = solveFace(f, time, T[node], scratchHeat_, scratchDerivative_);
    double total = 0.0;
    for (Index c = 0; c < channels_; ++c) total += scratchDerivative_[c];
    values[faceSlots_[f]] += total * sol.dTsdTn;
    if (transient)
      for (Index c = 0; c < channels_; ++c)
        values[accumulatorSlots_[acc++]] += nodeWeight_[node] * scratchDerivative_[c] * sol.dTsdTn;
  }
  if (transient) {
    // Row scaling by 1/C for node rows.
    for (Index col = 0; col < pattern_.size; ++col)
      for (Index p = pattern_.columnStart[col]; p < pattern_.columnStart[col + 1]; ++p)
        values[p] *= rowScale_[pattern_.rowIndex[p]];
  }
}

void NetworkSystem::groupFlows(double time, std::span<const double> T, std::span<double> flows,
                               std::span<double> storage, std::span<double> faceTemperatures) const {
  std::fill(flows.begin(), flows.end(), 0.0);
  std::fill(storage.begin(), storage.end(), 0.0);
  auto group = [&](Index node) { return network_.nodes[node].group; };
  auto at = [&](Index node, Index channel) -> double& { return flows[group(node) * channels_ + channel]; };
  std::vector<double> rate(nodes_, 0.0);
  for (std::size_t k = 0; k < network_.conductances.size(); ++k) {
    const Conductance& c = network_.conductances[k];
    double q = c.conductance * (T[c.b] - T[c.a]);
    rate[c.a] += conductanceFactor_[2 * k] * q;
    rate[c.b] -= conductanceFactor_[2 * k + 1] * q;
    if (group(c.a) != group(c.b)) {
      at(c.a, c.channel) += conductanceFactor_[2 * k] * q;
      at(c.b, c.channel) -= conductanceFactor_[2 * k + 1] * q;
    }
  }
  for (const Advection& a : network_.advections) {
    double q = a.flowCapacity * (T[a.from] - T[a.to]);
    rate[a.to] += q;
    at(a.to, a.channel) += q;
  }
  for (const BoundaryExchange& e : network_.exchanges) {
    double q = e.conductance * (e.temperature - T[e.node]);
    rate[e.node] += q;
    at(e.node, e.channel) += q;
  }
  for (const HeatSource& s : network_.sources) {
    double q = s.power * std::exp(q10Rate_[&s - network_.sources.data()] * (T[s.node] - s.referenceTemperature));
    rate[s.node] += q;
    at(s.node, s.channel) += q;
  }
  for (Index f = 0; f < network_.faces.size(); ++f) {
    Index node = network_.faces[f].node;
    FaceSolution sol = solveFace(f, time, T[node], scratchHeat_, scratchDerivative_);
    if (f < faceTemperatures.size()) faceTemperatures[f] = sol.temperature;
    for (Index c = 0; c < channels_; ++c) {
      rate[node] += scratchHeat_[c];
      at(node, c) += scratchHeat_[c];
    }
  }
  for (Index i = 0; i < nodes_; ++i) storage[group(i)] += rate[i];
}

double NetworkSystem::storedHeat(std::span<const double> T) const {
  double e = 0.0;
  for (Index i = 0; i < nodes_; ++i) e += nodeWeight_[i] * network_.nodes[i].capacity * T[i];
  return e;
}

}  // namespace thermorph
