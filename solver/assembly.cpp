#include "solver/assembly.hpp"

#include <algorithm>
#include <cmath>
#include <limits>
#include <optional>
#include <stdexcept>

#include <fmt/format.h>

#include "solver/scratch.hpp"

namespace thermorph {

NetworkSystem::NetworkSystem(const Network& network, Mode mode)
    : network_(network),
      mode_(mode),
      nodes_(network.nodes.size()),
      controls_(network.controllers.size()),
      channels_(network.channels.size()) {
  const bool transient = mode == Mode::Transient;
  groups_ = transient ? network.groups.size() : 0;
  {
    // The junctions' pair parts in rank-one form: J = J_pattern + sum over rings of u v^T, u = -G_r w / C
    // (steady: -G_r w), v = w (d q_i / d T_j = -G_r w_i w_j + delta_ij G_r w_i S_r for q_i = G_r w_i (S_r T_i -
    // Tbar_r): the diagonal part G_r w_i S_r stays in the pattern, jacobian()).
    for (const Junction& j : network.junctions) {
      for (const JunctionRing& ring : j.rings) {
        RankOneTerm t;
        for (auto [node, w] : ring.shares) {
          if (node >= nodes_) throw std::invalid_argument("a junction ring's share names a missing node");
          if (transient && !(network.nodes[node].capacity > 0.0)) continue;  // refused below with the node's name
          t.u.emplace_back(node, transient ? -ring.conductance * w / network.nodes[node].capacity : -ring.conductance * w);
          t.v.emplace_back(node, w);
        }
        junctionTerms_.push_back(std::move(t));
      }
    }
  }
  pattern_.size = nodes_ + controls_ + (transient ? channels_ + groups_ * channels_ : 0);
  if (pattern_.size >= std::numeric_limits<Slot>::max())
    throw std::invalid_argument(fmt::format("the state has {} components, more than this build supports", pattern_.size));
  // Q10^((T - T_ref)/10) = exp(a (T - T_ref)), a = ln(Q10)/10: one rate per Q10 law (a body has a few tissues).
  for (const Q10Law& law : network.q10Laws) q10Rates_.emplace_back(std::log(law.q10) / 10.0, law.referenceTemperature);
  for (const HeatSource& src : network.sources)
    if (src.law >= q10Rates_.size()) throw std::invalid_argument("a heat source refers to a missing Q10 law");
  for (const NetworkNode& node : network.nodes)
    if (node.group >= groupWeight_.size()) groupWeight_.resize(node.group + 1, 1.0);
  for (Index g = 0; g < groupWeight_.size() && g < network.groupWeights.size(); ++g)
    groupWeight_[g] = network.groupWeights[g];
  if (transient)
    for (Index i = 0; i < nodes_; ++i)
      if (!(network.nodes[i].capacity > 0.0))
        throw std::invalid_argument(fmt::format("node {} has no heat capacity", network.label(i)));
  if (transient && pattern_.size <= kSlotReplayLimit) {
    inverseCapacity_.resize(nodes_);
    for (Index i = 0; i < nodes_; ++i) inverseCapacity_[i] = 1.0 / network.nodes[i].capacity;
    nodeGroupRow_.resize(nodes_);
    nodeWeight_.resize(nodes_);
    for (Index i = 0; i < nodes_; ++i) {
      nodeGroupRow_[i] = groupRowOf(i);
      nodeWeight_[i] = nodeWeight(i);
    }
    conductanceFactors_.resize(network.conductances.size());
    network.conductances.forEach([&](Index k, const Conductance& c) {
      const auto [fa, fb] = conductanceFactors(c);
      conductanceFactors_[k] = {fa, fb, network.nodes[c.a].group != network.nodes[c.b].group,
                                static_cast<std::uint32_t>(network.conductanceChannel(k))};
    });
  }
  for (const Modulator& m : network.modulators)
    if ((m.schedule != none && !network.schedules) || (m.control != none && m.control >= controls_))
      throw std::invalid_argument(fmt::format("modulator {} refers to a missing schedule or controller", m.name));

  // Collect (row, col) of every term as one 64-bit key (column in the high half, so that sorting orders by
  // column, then row), counted first so that the list is allocated once at its exact size; then compress into
  // CSC. The Jacobian finds each term's value slot again by a search in its column (slot()).
  auto accumulator = [&](Index channel) { return nodes_ + controls_ + channel; };
  auto visitEntries = [&](auto&& add) {
    auto forPart = [&](Index modulator, Index row, Index channel) {
      Index u = controlColumn(modulator);
      if (u == none) return;
      add(row, u);
      if (transient) add(accumulator(channel), u);
    };
    auto forParts = [&](Index begin, Index end, Index row, Index channel) {
      for (Index p = begin; p < end; ++p) forPart(network.flowParts[p].modulator, row, channel);
    };
    for (Index i = 0; i < pattern_.size; ++i) add(i, i);
    network.conductances.forEach([&](Index, const Conductance& c) {
      add(c.a, c.b);
      add(c.b, c.a);
    });
    network.advections.forEach([&](Index, const Advection& a) {
      const bool cancels = viaCancels(a);
      forEachHop(a, [&](Index from, Index to) {
        add(to, from);
        if (transient) {
          if (!(cancels && from == a.via)) add(accumulator(a.channel), from);
          if (!(cancels && to == a.via)) add(accumulator(a.channel), to);
        }
        network.forEachPart(a, [&](Index, const FlowPart& p) { forPart(p.modulator, to, a.channel); });
      });
    });
    for (const BoundaryExchange& e : network.exchanges) {
      if (transient) add(accumulator(e.channel), e.node);
      forParts(e.partsBegin, e.partsEnd, e.node, e.channel);
    }
    network.sources.forEach([&](Index, const HeatSource& s) {
      if (transient) add(accumulator(s.channel), s.node);
      if (Index u = controlColumn(s.modulator); u != none) {
        add(s.node, u);
        if (transient) add(accumulator(s.channel), u);
      }
    });
    for (const SurfaceFace& f : network.faces)
      if (transient)
        for (Index c = 0; c < channels_; ++c) add(accumulator(c), f.node);
    // A face whose heats depend on a controller's state: its node's row and the energy rows in that state's column.
    for (const FaceControl& fc : network.faceControls) {
      const Index node = network.faces[fc.face].node, u = nodes_ + fc.controller;
      add(node, u);
      if (transient)
        for (Index c = 0; c < channels_; ++c) add(accumulator(c), u);
    }
    for (Index k = 0; k < controls_; ++k)
      for (auto [node, weight] : network.controllers[k].signal) add(nodes_ + k, node);
    if (!transient) return;
    // Group energies: each term's flow into a group, in that group's row of the term's channel (the entries that
    // jacobian() fills through groupSlot()).
    auto row = [&](Index node, Index channel) { return groupRowOf(node) == none ? none : groupRowOf(node) + channel; };
    auto visit = [&](Index r, Index col) {
      if (r != none && col != none) add(r, col);
    };
    auto partColumns = [&](Index begin, Index end, Index r) {
      for (Index p = begin; p < end; ++p)
        if (Index u = controlColumn(network.flowParts[p].modulator); u != none) visit(r, u);
    };
    network.conductances.forEach([&](Index k, const Conductance& c) {
      if (network.nodes[c.a].group == network.nodes[c.b].group) return;
      const Index channel = conductanceChannel(k);  // (from the table of small transient systems)
      const Index ra = row(c.a, channel), rb = row(c.b, channel);
      for (auto [r, col] : {std::pair{ra, c.a}, {ra, c.b}, {rb, c.a}, {rb, c.b}}) visit(r, col);
    });
    network.advections.forEach([&](Index, const Advection& a) {
      const bool cancels = viaCancels(a);
      forEachHop(a, [&](Index from, Index to) {
        if (!(cancels && from == a.via)) visit(row(to, a.channel), from);
        if (!(cancels && to == a.via)) visit(row(to, a.channel), to);
        network.forEachPart(a, [&](Index, const FlowPart& p) {
          if (Index u = controlColumn(p.modulator); u != none) visit(row(to, a.channel), u);
        });
      });
    });
    for (const BoundaryExchange& e : network.exchanges) {
      visit(row(e.node, e.channel), e.node);
      partColumns(e.partsBegin, e.partsEnd, row(e.node, e.channel));
    }
    network.sources.forEach([&](Index, const HeatSource& s) {
      visit(row(s.node, s.channel), s.node);
      visit(row(s.node, s.channel), controlColumn(s.modulator));
    });
    for (const SurfaceFace& f : network.faces)
      for (Index c = 0; c < channels_; ++c) visit(row(f.node, c), f.node);
    for (const FaceControl& fc : network.faceControls)
      for (Index c = 0; c < channels_; ++c) visit(row(network.faces[fc.face].node, c), nodes_ + fc.controller);
  };
  // The terms' rows bucketed by column (counted first, so that the buckets are allocated once at their exact
  // size), then each column's rows sorted and made unique: the CSC pattern that sorting (column, row) keys of all
  // terms gave, without the sort of the whole list (2-3 % of a sweep run's cycles in the quadruped study).
  std::size_t count = 0;
  std::vector<std::uint32_t>& start = pattern_.columnStart;
  start.assign(pattern_.size + 1, 0);
  visitEntries([&](Index, Index col) {
    ++count;
    ++start[col + 1];
  });
  if (count > std::numeric_limits<std::uint32_t>::max())
    throw std::invalid_argument(fmt::format("the Jacobian has {} terms, more than this build supports", count));
  for (Index c = 0; c < pattern_.size; ++c) start[c + 1] += start[c];
  std::vector<std::uint32_t> rows(count);
  visitEntries([&](Index row, Index col) { rows[start[col]++] = static_cast<std::uint32_t>(row); });
  // start[c] is now the end of column c's bucket (its beginning is the end of column c - 1's).
  std::size_t unique = 0;
  for (Index c = 0, begin = 0; c < pattern_.size; ++c) {
    const Index end = start[c];
    std::sort(rows.begin() + static_cast<std::ptrdiff_t>(begin), rows.begin() + static_cast<std::ptrdiff_t>(end));
    const std::size_t first = unique;
    for (Index k = begin; k < end; ++k)
      if (k == begin || rows[k] != rows[k - 1]) rows[unique++] = rows[k];
    begin = end;
    start[c] = static_cast<std::uint32_t>(first);
  }
  if (unique > std::numeric_limits<Slot>::max() || pattern_.size >= std::numeric_limits<Slot>::max())
    throw std::invalid_argument(fmt::format("the Jacobian has {} entries, more than this build supports", unique));
  start[pattern_.size] = static_cast<std::uint32_t>(unique);
  pattern_.rowIndex.assign(rows.begin(), rows.begin() + static_cast<std::ptrdiff_t>(unique));
  std::vector<std::uint32_t>().swap(rows);
  faceGuess_.assign(network.faces.size(), std::nan(""));
  faceNodeTemperature_.assign(network.faces.size(), 0.0);
  faceSlope_.assign(network.faces.size(), 0.0);
  faceEvalTemperature_.assign(network.faces.size(), std::nan(""));
  faceEvalSlope_.assign(network.faces.size(), 0.0);
  faceScratch_.resize(2 * channels_);
  if (network.surface) faceChannels_ = network.surface->faceChannels();
  if (faceChannels_.empty())
    for (Index c = 0; c < channels_; ++c) faceChannels_.push_back(c);
  for (Index k = 0; k < faceChannels_.size(); ++k)
    if (faceChannels_[k] >= channels_ || (k > 0 && faceChannels_[k] <= faceChannels_[k - 1]))
      throw std::invalid_argument("the surface model's face channels are not ascending channels of the network");
  if (!network.faceControls.empty()) {
    faceControl_.assign(network.faces.size(), none);
    for (const FaceControl& fc : network.faceControls) {
      if (fc.face >= network.faces.size() || fc.controller >= controls_)
        throw std::invalid_argument("a face control refers to a missing face or controller");
      faceControl_[fc.face] = fc.controller;
    }
    controlDerivative_.resize(channels_);
  }
  modulators_.resize(network.modulators.size());
  scheduleValues_.resize(network.modulators.size());
}

Index NetworkSystem::controlColumn(Index modulator) const {
  if (modulator == none) return none;
  Index c = network_.modulators[modulator].control;
  return c == none ? none : nodes_ + c;
}

NetworkSystem::Slot NetworkSystem::slot(Index row, Index col) const {
  // Binary search for the row in its column without data-dependent branches (the column's first entry not below
  // the row, as std::lower_bound; its branches mispredicted at every step: 1.5 % of a quadruped sweep run's cycles).
  const std::uint32_t* base = pattern_.rowIndex.data() + pattern_.columnStart[col];
  std::size_t length = pattern_.columnStart[col + 1] - pattern_.columnStart[col];
  if (length == 0) throw std::logic_error("sparse pattern misses an entry");
  while (length > 1) {
    const std::size_t half = length / 2;
    base += base[half - 1] < row ? half : 0;
    length -= half;
  }
  if (*base != row) throw std::logic_error("sparse pattern misses an entry");
  return static_cast<Slot>(base - pattern_.rowIndex.data());
}

void NetworkSystem::modulatorValues(double time, std::span<const double> y, std::span<double> values) const {
  for (Index k = 0; k < network_.modulators.size(); ++k) {
    const Modulator& m = network_.modulators[k];
    scheduleValues_[k] = m.schedule == none ? 1.0 : network_.schedules->value(m.schedule, time);
    values[k] = m.control == none ? scheduleValues_[k] : scheduleValues_[k] * y[nodes_ + m.control];
  }
}

[[gnu::always_inline]] inline double NetworkSystem::partsValue(Index begin, Index end, std::span<const double> m) const {
  double sum = 0.0;
  for (Index p = begin; p < end; ++p) sum += network_.flowParts[p].coefficient * m[network_.flowParts[p].modulator];
  return sum;
}

[[gnu::always_inline]] inline double NetworkSystem::flowOf(const Advection& a, std::span<const double> m) const {
  // The inline part: coefficient * m, the value flowCapacity (0) + (0 + coefficient * m) of a part in flowParts.
  if (hasInlinePart(a)) return a.flowCapacity * m[a.partsBegin];
  return a.flowCapacity + partsValue(a.partsBegin, a.partsEnd, m);
}

double NetworkSystem::controlTarget(const Controller& c, double time, std::span<const double> y, bool* active) const {
  // Proportional control about a set point with limits (the common form in thermoregulation models).
  bool enabled = c.enableSchedule == none || network_.schedules->value(c.enableSchedule, time) > 0.5;
  if (!enabled) {
    if (active) *active = false;
    return c.offValue;
  }
  double signal = 0.0;
  for (auto [node, weight] : c.signal) signal += weight * y[node];
  double setpoint = c.setpointSchedule == none ? c.setpoint : network_.schedules->value(c.setpointSchedule, time);
  double raw = c.bias + c.gain * (signal - setpoint);
  if (active) *active = raw > c.lower && raw < c.upper;
  return std::clamp(raw, c.lower, c.upper);
}

NetworkSystem::FaceSolution NetworkSystem::solveFace(Index face, double time, double nodeTemperature,
                                                     std::span<double> channelHeat,
                                                     std::span<double> channelDerivative, bool remember,
                                                     const double* control) const {
  // Face balance G (T_n - T_s) + q(T_s) = 0, solved by Newton for T_s; then by the implicit function theorem
  // dT_s/dT_n = G / (G - q'(T_s)).
  const SurfaceFace& f = network_.faces[face];
  const double G = f.halfConductance;
  // Newton starts from the last solution moved along its tangent dT_s/dT_n (clamped to [0, 1], the range of
  // G / (G - q') for q' <= 0): first order in the change of the node temperature, so that from one evaluation to
  // the next the first step is already of second order and the second one meets the test below.
  double Ts = nodeTemperature;
  if (std::isfinite(faceGuess_[face]))
    Ts = faceGuess_[face] + faceSlope_[face] * (nodeTemperature - faceNodeTemperature_[face]);
  // Only the surface model's channels are zeroed, summed and moved to the solution (faceChannels_): the others are
  // never written and stay 0, so the sums are those over every channel, term for term.
  const Index* const faceChannel = faceChannels_.data();
  const Index faceChannelCount = faceChannels_.size();
  // The secant of q' within this solve (the last iteration's evaluation at the same time): the error estimate of
  // iterations after the first (see below).
  double lastEvaluated = std::numeric_limits<double>::quiet_NaN(), lastSlope = 0.0;
  for (int iteration = 0; iteration < 60; ++iteration) {
    for (Index k = 0; k < faceChannelCount; ++k) {
      channelHeat[faceChannel[k]] = 0.0;
      channelDerivative[faceChannel[k]] = 0.0;
    }
    if (control) {
      std::fill(controlDerivative_.begin(), controlDerivative_.end(), 0.0);
      network_.surface->controlledFaceHeat(face, Ts, time, *control, channelHeat, channelDerivative, controlDerivative_);
    } else {
      network_.surface->faceHeat(face, Ts, time, channelHeat, channelDerivative);
    }
    double q = 0.0, dq = 0.0;
    for (Index k = 0; k < faceChannelCount; ++k) {
      q += channelHeat[faceChannel[k]];
      dq += channelDerivative[faceChannel[k]];
    }
    const double residual = G * (nodeTemperature - Ts) + q;
    const double step = residual / (G - dq);
    const double evaluated = Ts;
    Ts += step;
    bool converged = std::abs(step) < 1e-11 * (1.0 + std::abs(Ts));
    if (!converged && (iteration == 0 || !remember) && std::abs(step) < 1e-5 * (1.0 + std::abs(Ts))) {
      // One Newton step from the tangent start is usually enough: its error is q'' step^2 / (2 (G - q')) (Taylor),
      // with q'' estimated by the secant of q' between the last evaluation of this face and this one (times 10 for
      // safety). Accepted when that is below 1e-11 (1 + T_s) (about 3e-9 K, the distance from the root at which the
      // test above accepts: the estimated error itself is under 3e-10 K) and the step itself is under 1e-5 (1 + T_s)
      // (about 3 mK, so that a kink of q' inside the step cannot move the root far); otherwise Newton goes on as
      // before. Saves the second evaluation of the face's heats in most right-hand sides (95 % of the face solves
      // of the quadruped study; DEVELOPERS.md "Per-run CPU in sweeps, eighth round").
      // From the second iteration on, the same test with q'' from the secant of q' between this iteration's
      // evaluation and the last one, at the same time (the surroundings unchanged: at the first iteration the
      // secant to the last solve's evaluation also carries the change of the surroundings since then).
      const double dT = evaluated - (iteration == 0 ? faceEvalTemperature_[face] : lastEvaluated);
      if (std::isfinite(dT) && dT != 0.0) {
        const double curvature = std::abs(dq - (iteration == 0 ? faceEvalSlope_[face] : lastSlope)) / std::abs(dT);
        converged = 10.0 * curvature * step * step < 2e-11 * (1.0 + std::abs(Ts)) * std::abs(G - dq);
      }
    }
    lastEvaluated = evaluated;
    lastSlope = dq;
    if (converged) {
      // The heats at the solution to first order from this evaluation, instead of another evaluation there: the
      // error 1/2 q'' step^2 is below round-off for a converged step (see above); the slopes are those of this
      // evaluation (relative change of order q''/q' * step, far below the Jacobian's needs).
      for (Index k = 0; k < faceChannelCount; ++k) {
        const Index c = faceChannel[k];
        channelHeat[c] += channelDerivative[c] * step;
      }
      const double slope = G / (G - dq);
      if (remember) {
        faceGuess_[face] = Ts;
        faceNodeTemperature_[face] = nodeTemperature;
        faceSlope_[face] = std::clamp(slope, 0.0, 1.0);
        faceEvalTemperature_[face] = evaluated;
        faceEvalSlope_[face] = dq;
      }
      return {Ts, slope, dq};
    }
  }
  throw std::runtime_error(fmt::format("face temperature did not converge at {}", network_.label(f.node)));
}

void NetworkSystem::evaluate(double time, std::span<const double> T, std::span<double> out) const {
  time = at(time);
  network_.coefficientsAt(time);
  // A body without a stable state (e.g. Q10 metabolism outrunning its losses) leaves any sensible range long
  // before the numbers fail: stop with a message that says so (one pass without a branch per node, then the first
  // node outside for the message).
  bool outside = false;
  for (Index i = 0; i < nodes_; ++i) outside |= !(T[i] > 150.0 && T[i] < 450.0);
  if (outside)
    for (Index i = 0; i < nodes_; ++i)
      if (!(T[i] > 150.0 && T[i] < 450.0))
        throw std::runtime_error(fmt::format(
            "temperature {:.5g} K at {} is outside 150-450 K: the body has no stable state here (for example Q10 "
            "metabolism outrunning the heat losses of a body without thermoregulation, or a cooling runaway)",
            T[i], network_.label(i)));
  const bool transient = mode_ == Mode::Transient;
  std::fill(out.begin(), out.end(), 0.0);
  std::span<double> acc = transient ? out.subspan(nodes_ + controls_, channels_) : std::span<double>();
  modulatorValues(time, T, modulators_);
  // Small transient systems read each node's group row and multiplicity from tables (the same values).
  const bool tables = !nodeGroupRow_.empty();
  const Index groupOffset = groupEnergyOffset(), groups = groups_, channels = channels_;
  auto rowOf = [&](Index node) -> Index {
    if (tables) return nodeGroupRow_[node];
    const Index g = network_.nodes[node].group;
    return g < groups ? groupOffset + g * channels : none;
  };
  auto weightOf = [&](Index node) { return tables ? nodeWeight_[node] : nodeWeight(node); };
  // Flow q of channel c into one copy of the node's group (group energies, transient only).
  auto toGroup = [&](Index node, Index channel, double q) {
    if (const Index r = rowOf(node); r != none) out[r + channel] += q;
  };
  network_.conductances.forEach([&](Index k, const Conductance& c) __attribute__((always_inline)) {
    const ConductanceFactors f =
        tables ? conductanceFactors_[k]
               : [&] {
                   const auto [fa, fb] = conductanceFactors(c);
                   return ConductanceFactors{fa, fb, network_.nodes[c.a].group != network_.nodes[c.b].group};
                 }();
    double q = c.conductance * (T[c.b] - T[c.a]);
    out[c.a] += f.a * q;
    out[c.b] -= f.b * q;
    if (transient && f.acrossGroups) {
      const Index channel = tables ? Index(f.channel) : network_.conductanceChannel(k);  // = conductanceChannel(k)
      toGroup(c.a, channel, f.a * q);
      toGroup(c.b, channel, -f.b * q);
    }
  });

  // The junction rings' pair parts, O(m) per ring (within the parent's group: no budget or group-energy rows).
  for (const Junction& j : network_.junctions)
    for (const JunctionRing& ring : j.rings) ringFlows(ring, T, [&](Index node, double q) { out[node] += q; });
  // (A small system's network keeps its streams plain: Network::kPlainNodes.)
  const std::span<const Advection> plainAdvections = network_.advections.plain();
  if (transient && tables && !plainAdvections.empty()) {
    // The small transient systems' hops (the same terms in the same order as the loop below) with the rows that
    // take one hop after another kept in registers: the channel's total and the group's share of it that the hop
    // goes to (acc[channel], toGroup), and the node that second hops go to (a segment's vein, which every perfused
    // cell's stream enters), each stored when a hop goes to another row and at the end. The same additions in the
    // same order, so the same values. Through memory each hop waited for the store of the one before
    // (store-to-load forwarding): the three chains of 500-1000 additions were the slowest part of the 500-cell
    // radial run's evaluation (perf annotate), and lambdas holding the sums kept them on the stack.
    double* const o = out.data();
    const Index* const groupRow = nodeGroupRow_.data();
    const double* const weight = nodeWeight_.data();
    const Index channelRow = nodes_ + controls_;  // acc[c] is out[channelRow + c]
    Index chRow = none, grRow = none, toRow = none;
    double chSum = 0.0, grSum = 0.0, toSum = 0.0;
    // One hop into `to`; `second`: the second hop of a stream through a node (the one that moves toRow).
    auto hop = [&](Index from, Index to, double F, Index channel, bool second) __attribute__((always_inline)) {
      const double q = F * (T[from] - T[to]);
      if (to == toRow) {
        toSum += q;
      } else if (second) {
        if (toRow != none) o[toRow] = toSum;
        toRow = to;
        toSum = o[to];
        toSum += q;
      } else {
        o[to] += q;
      }
      chSum += weight[to] * q;
      if (const Index g = groupRow[to]; g != none) {
        if (const Index r = g + channel; r != grRow) {
          if (grRow != none) o[grRow] = grSum;
          grRow = r;
          grSum = o[r];
        }
        grSum += q;
      }
    };
    for (const Advection& a : plainAdvections) {
      const double F = flowOf(a, modulators_);
      const Index channel = a.channel;
      // The channel's row, the same for both hops: moved to before the first (as it was at each hop).
      if (const Index r = channelRow + channel; r != chRow) {
        if (chRow != none) o[chRow] = chSum;
        chRow = r;
        chSum = o[r];
      }
      if (a.via == none) {
        hop(a.from, a.to, F, channel, false);
      } else {
        hop(a.from, a.via, F, channel, false);
        hop(a.via, a.to, F, channel, true);
      }
    }
    if (toRow != none) o[toRow] = toSum;
    if (chRow != none) o[chRow] = chSum;
    if (grRow != none) o[grRow] = grSum;
  } else {
    network_.advections.forEach([&](Index, const Advection& a) __attribute__((always_inline)) {
      double F = flowOf(a, modulators_);
      forEachHop(a, [&](Index from, Index to) {
        double q = F * (T[from] - T[to]);
        out[to] += q;
        if (transient) {
          acc[a.channel] += weightOf(to) * q;
          toGroup(to, a.channel, q);
        }
      });
    });
  }
  for (const BoundaryExchange& e : network_.exchanges) {
    double G = e.conductance + partsValue(e.partsBegin, e.partsEnd, modulators_);
    double q = G * (e.temperature - T[e.node]);
    out[e.node] += q;
    if (transient) {
      acc[e.channel] += weightOf(e.node) * q;
      toGroup(e.node, e.channel, q);
    }
  }
  network_.sources.forEach([&](Index, const HeatSource& s) __attribute__((always_inline)) {
    double m = s.modulator == none ? 1.0 : modulators_[s.modulator];
    const auto [rate, reference] = q10Rates_[s.law];
    double q = s.power * m * std::exp(rate * (T[s.node] - reference));
    out[s.node] += q;
    if (transient) {
      acc[s.channel] += weightOf(s.node) * q;
      toGroup(s.node, s.channel, q);
    }
  });
  for (Index f = 0; f < network_.faces.size(); ++f) {
    Index node = network_.faces[f].node;
    solveFace(f, time, T[node], heatScratch(), slopeScratch(), true, faceControl(f, T));
    // The node's sum in a register (the same additions in the same order; out[node] is none of the energy rows
    // written meanwhile): a store and reload of out[node] per channel was the longest chain of the evaluation.
    double sum = out[node];
    for (const Index c : faceChannels_) {  // the other channels' heats are 0
      sum += heatScratch()[c];
      if (transient) {
        acc[c] += weightOf(node) * heatScratch()[c];
        toGroup(node, c, heatScratch()[c]);
      }
    }
    out[node] = sum;
  }
  for (Index k = 0; k < controls_; ++k) {
    const Controller& c = network_.controllers[k];
    double difference = controlTarget(c, time, T, nullptr) - T[nodes_ + k];
    out[nodes_ + k] = transient ? difference / c.timeConstant : difference;
  }
  if (transient) {
    if (!inverseCapacity_.empty())
      for (Index i = 0; i < nodes_; ++i) out[i] *= inverseCapacity_[i];
    else
      for (Index i = 0; i < nodes_; ++i) out[i] *= 1.0 / network_.nodes[i].capacity;
  }
}

void NetworkSystem::jacobian(double time, std::span<const double> T, std::span<double> values) const {
  time = at(time);
  network_.coefficientsAt(time);
  const bool transient = mode_ == Mode::Transient;
  std::fill(values.begin(), values.end(), 0.0);
  modulatorValues(time, T, modulators_);
  // d m_k / d u_control = schedule(t) for a part whose modulator has a control (evaluated just above).
  auto scheduleOf = [&](Index modulator) { return scheduleValues_[modulator]; };
  // Each entry is found by a search in its column (slot()), in the order in which the terms were once read from
  // slot tables (the same sums in the same order: the same values). A small system records the positions at its
  // first call and replays them afterwards (the same positions in the same order).
  const bool replay = !slotSequence_.empty();
  const bool record = !replay && pattern_.size <= kSlotReplayLimit;
  std::size_t cursor = 0;
  std::vector<Slot> recorded;  // kept only when the whole call completes
  auto position = [&](Index row, Index col) __attribute__((always_inline)) -> Slot {
    if (replay) return slotSequence_[cursor++];
    const Slot s = slot(row, col);
    if (record) recorded.push_back(s);
    return s;
  };
  auto add = [&](Index row, Index col, double d) __attribute__((always_inline)) { values[position(row, col)] += d; };
  // Group-energy rows (transient only): the flow of `channel` into the group of `node`; skipped where there is
  // no such row (or no such column: a source without a control).
  auto toGroup = [&](Index node, Index channel, Index col, double d) {
    if (!transient) return;
    const Index r = groupRowOf(node);
    if (r != none && col != none) values[position(r + channel, col)] += d;
  };
  network_.conductances.forEach([&](Index k, const Conductance& c) __attribute__((always_inline)) {
    const double G = c.conductance;
    const auto [fa, fb] = conductanceFactors(c);
    add(c.a, c.a, -fa * G);
    add(c.a, c.b, fa * G);
    add(c.b, c.b, -fb * G);
    add(c.b, c.a, fb * G);
    if (!transient || network_.nodes[c.a].group == network_.nodes[c.b].group)
      return;  // no group-energy entries within a group
    const Index channel = conductanceChannel(k);
    toGroup(c.a, channel, c.a, -fa * G);
    toGroup(c.a, channel, c.b, fa * G);
    toGroup(c.b, channel, c.a, fb * G);
    toGroup(c.b, channel, c.b, -fb * G);
  });
  // The junction rings' pair parts q_i = G_r w_i (S_r T_i - Tbar_r): the diagonal G_r w_i S_r here, the rest
  // -G_r w w^T in rank-one form (junctionTerms_, before the row scaling).
  for (const Junction& j : network_.junctions)
    for (const JunctionRing& ring : j.rings) {
      double sum = 0.0;
      for (auto [node, w] : ring.shares) sum += w;
      for (auto [node, w] : ring.shares) add(node, node, ring.conductance * w * sum);
    }
  // Flow parts with a control of a term into `row` of budget `channel`.
  auto partDerivative = [&](Index modulator, double coefficient, Index row, Index channel, double difference,
                            double weight) {
    const Index u = controlColumn(modulator);
    if (u == none) return;
    double d = coefficient * scheduleOf(modulator) * difference;
    add(row, u, d);
    if (transient) add(nodes_ + controls_ + channel, u, weight * d);
    toGroup(row, channel, u, d);
  };
  auto partDerivatives = [&](Index begin, Index end, Index row, Index channel, double difference, double weight) {
    for (Index p = begin; p < end; ++p)
      partDerivative(network_.flowParts[p].modulator, network_.flowParts[p].coefficient, row, channel, difference,
                     weight);
  };
  network_.advections.forEach([&](Index, const Advection& adv) __attribute__((always_inline)) {
    double F = flowOf(adv, modulators_);
    const bool cancels = viaCancels(adv);
    forEachHop(adv, [&](Index from, Index to) {
      add(to, to, -F);
      add(to, from, F);
      const double w = nodeWeight(to);
      const Index acc = nodes_ + controls_ + adv.channel;
      // The energy rows' entries in via's column: -w F from the first hop, +w F from the second (the same w):
      // zero, left out of the pattern and not added (viaCancels).
      const bool fromVia = cancels && from == adv.via, toVia = cancels && to == adv.via;
      if (transient) {
        if (!fromVia) add(acc, from, w * F);
        if (!toVia) add(acc, to, -(w * F));
      }
      if (!fromVia) toGroup(to, adv.channel, from, F);
      if (!toVia) toGroup(to, adv.channel, to, -F);
      if (hasInlinePart(adv))
        partDerivative(Index(adv.partsBegin), adv.flowCapacity, to, adv.channel, T[from] - T[to], w);
      else
        partDerivatives(adv.partsBegin, adv.partsEnd, to, adv.channel, T[from] - T[to], w);
    });
  });
  for (const BoundaryExchange& ex : network_.exchanges) {
    double G = ex.conductance + partsValue(ex.partsBegin, ex.partsEnd, modulators_);
    add(ex.node, ex.node, -G);
    if (transient) add(nodes_ + controls_ + ex.channel, ex.node, -(nodeWeight(ex.node) * G));
    toGroup(ex.node, ex.channel, ex.node, -G);
    partDerivatives(ex.partsBegin, ex.partsEnd, ex.node, ex.channel, ex.temperature - T[ex.node],
                    nodeWeight(ex.node));
  }
  network_.sources.forEach([&](Index, const HeatSource& s) __attribute__((always_inline)) {
    double m = s.modulator == none ? 1.0 : modulators_[s.modulator];
    const auto [rate, reference] = q10Rates_[s.law];
    double base = s.power * std::exp(rate * (T[s.node] - reference));
    // d/dT [P m Q10^((T - T_ref)/10)] = P m Q10^(...) ln(Q10)/10.
    double dq = base * m * rate;
    const Index acc = nodes_ + controls_ + s.channel;
    add(s.node, s.node, dq);
    if (transient) add(acc, s.node, nodeWeight(s.node) * dq);
    toGroup(s.node, s.channel, s.node, dq);
    const Index u = controlColumn(s.modulator);
    const double du = u != none ? base * scheduleOf(s.modulator) : 0.0;
    if (u != none) {
      add(s.node, u, du);
      if (transient) add(acc, u, nodeWeight(s.node) * du);
    }
    toGroup(s.node, s.channel, u, du);
  });
  for (Index f = 0; f < network_.faces.size(); ++f) {
    Index node = network_.faces[f].node;
    const double* control = faceControl(f, T);
    FaceSolution sol = solveFace(f, time, T[node], heatScratch(), slopeScratch(), true, control);
    double total = 0.0;
    for (const Index c : faceChannels_) total += slopeScratch()[c];  // the other channels' slopes are 0
    add(node, node, total * sol.dTsdTn);
    if (transient)
      for (const Index c : faceChannels_) {
        add(nodes_ + controls_ + c, node, nodeWeight(node) * slopeScratch()[c] * sol.dTsdTn);
        toGroup(node, c, node, slopeScratch()[c] * sol.dTsdTn);
      }
    if (!control) continue;
    // The face's controller u: G (T_n - T_s) + q(T_s, u) = 0 gives dT_s/du = (dq/du) / (G - q'(T_s)); channel c
    // carries dq_c/du + q_c'(T_s) dT_s/du into the node.
    const Index u = nodes_ + faceControl_[f];
    double dqdu = 0.0;
    for (const Index c : faceChannels_) dqdu += controlDerivative_[c];
    const double dTsdu = dqdu / (network_.faces[f].halfConductance - sol.dqdTs);
    add(node, u, dqdu + sol.dqdTs * dTsdu);
    if (transient)
      for (const Index c : faceChannels_) {
        const double d = controlDerivative_[c] + slopeScratch()[c] * dTsdu;
        add(nodes_ + controls_ + c, u, nodeWeight(node) * d);
        toGroup(node, c, u, d);
      }
  }
  for (Index kk = 0; kk < controls_; ++kk) {
    const Controller& c = network_.controllers[kk];
    const double scale = transient ? 1.0 / c.timeConstant : 1.0;
    bool active = false;
    controlTarget(c, time, T, &active);
    add(nodes_ + kk, nodes_ + kk, -scale);
    for (auto [node, weight] : c.signal) add(nodes_ + kk, node, active ? scale * c.gain * weight : 0.0);
  }
  if (record) slotSequence_ = std::move(recorded);
  if (transient) {
    // Row scaling by 1/C for node rows.
    for (Index col = 0; col < pattern_.size; ++col)
      for (Index p = pattern_.columnStart[col]; p < pattern_.columnStart[col + 1]; ++p)
        if (const Index r = pattern_.rowIndex[p]; r < nodes_)
          values[p] *= inverseCapacity_.empty() ? 1.0 / network_.nodes[r].capacity : inverseCapacity_[r];
  }
}

void NetworkSystem::groupFlows(double time, std::span<const double> T, std::span<double> flows,
                               std::span<double> storage, std::span<double> faceTemperatures) const {
  flowsByGroup(time, T, {}, flows, storage, faceTemperatures);
}

void NetworkSystem::channelFlows(double time, std::span<const double> T, std::span<const char> channels,
                                 std::span<double> flows) const {
  if (channels.size() < channels_) throw std::invalid_argument("channelFlows needs one mark per channel");
  flowsByGroup(time, T, channels, flows, {}, {});
}

void NetworkSystem::flowsByGroup(double time, std::span<const double> T, std::span<const char> channels,
                                 std::span<double> flows, std::span<double> storage,
                                 std::span<double> faceTemperatures) const {
  // Every channel (groupFlows), or the marked ones (channelFlows): a flow of a marked channel gets the same terms
  // in the same order either way. Without storage the nodes' rates are not formed.
  const bool all = channels.empty(), rates = !storage.empty();
  auto wanted = [&](Index channel) { return all || channels[channel] != 0; };
  time = at(time);
  network_.coefficientsAt(time);
  std::fill(flows.begin(), flows.end(), 0.0);
  std::fill(storage.begin(), storage.end(), 0.0);
  modulatorValues(time, T, modulators_);
  auto group = [&](Index node) { return network_.nodes[node].group; };
  auto at = [&](Index node, Index channel) -> double& { return flows[group(node) * channels_ + channel]; };
  // The per-node rates in a block leased from the thread's spares (solver/scratch.hpp): new at every output, more than
  // 16 384 nodes' were mapped and faulted in afresh each time.
  std::optional<ScratchLease> rateBlock;
  double* rate = nullptr;
  if (rates) {
    rateBlock.emplace(nodes_ * sizeof(double));
    rate = rateBlock->as<double>();
    std::fill(rate, rate + nodes_, 0.0);
  }
  auto conductance = [&](Index k, const Conductance& c) __attribute__((always_inline)) {
    const auto [fa, fb] = conductanceFactors(c);
    double q = c.conductance * (T[c.b] - T[c.a]);
    if (rates) {
      rate[c.a] += fa * q;
      rate[c.b] -= fb * q;
    }
    if (group(c.a) != group(c.b)) {
      const Index channel = conductanceChannel(k);
      if (!wanted(channel)) return;
      at(c.a, channel) += fa * q;
      at(c.b, channel) -= fb * q;
    }
  };
  if (rates || wanted(0)) {
    network_.conductances.forEach(conductance);
  } else {  // only the conductances booked to another channel than 0 can carry a marked one (ascending, as above)
    for (const ConductanceChannel& c : network_.conductanceChannels)
      if (wanted(c.channel)) conductance(c.conductance, network_.conductances[c.conductance]);
  }
  if (rates)
    for (const Junction& j : network_.junctions)  // within the parent's group: its storage, no channel
      for (const JunctionRing& ring : j.rings) ringFlows(ring, T, [&](Index node, double q) { rate[node] += q; });
  network_.advections.forEach([&](Index, const Advection& a) __attribute__((always_inline)) {
    if (!rates && !wanted(a.channel)) return;
    const double F = flowOf(a, modulators_);
    forEachHop(a, [&](Index from, Index to) {
      double q = F * (T[from] - T[to]);
      if (rates) rate[to] += q;
      if (wanted(a.channel)) at(to, a.channel) += q;
    });
  });
  for (const BoundaryExchange& e : network_.exchanges) {
    if (!rates && !wanted(e.channel)) continue;
    double q = (e.conductance + partsValue(e.partsBegin, e.partsEnd, modulators_)) * (e.temperature - T[e.node]);
    if (rates) rate[e.node] += q;
    if (wanted(e.channel)) at(e.node, e.channel) += q;
  }
  network_.sources.forEach([&](Index, const HeatSource& s) __attribute__((always_inline)) {
    if (!rates && !wanted(s.channel)) return;
    double m = s.modulator == none ? 1.0 : modulators_[s.modulator];
    const auto [q10Rate, reference] = q10Rates_[s.law];
    double q = s.power * m * std::exp(q10Rate * (T[s.node] - reference));
    if (rates) rate[s.node] += q;
    if (wanted(s.channel)) at(s.node, s.channel) += q;
  });
  // A report: the face solves leave the Newton starts and the surface model's caches as they were, so outputs
  // never change the integrator's path.
  struct Reporting {
    const SurfaceModel* surface;
    explicit Reporting(const SurfaceModel* s) : surface(s) { if (surface) surface->setReporting(true); }
    ~Reporting() { if (surface) surface->setReporting(false); }
  } reporting(network_.faces.empty() ? nullptr : network_.surface);
  for (Index f = 0; f < network_.faces.size(); ++f) {
    Index node = network_.faces[f].node;
    FaceSolution sol = solveFace(f, time, T[node], heatScratch(), slopeScratch(), false, faceControl(f, T));
    if (f < faceTemperatures.size()) faceTemperatures[f] = sol.temperature;
    for (const Index c : faceChannels_) {  // the other channels' heats are 0
      if (rates) rate[node] += heatScratch()[c];
      if (wanted(c)) at(node, c) += heatScratch()[c];
    }
  }
  if (rates)  // each group's sum in a register over a run of its nodes (groupStoredHeat): the same additions, in order
    for (Index i = 0; i < nodes_;) {
      const Index g = group(i);
      double sum = storage[g];
      for (; i < nodes_ && group(i) == g; ++i) sum += rate[i];
      storage[g] = sum;
    }
}

void NetworkSystem::addJunctionProduct(std::span<const double> x, std::span<double> out) const {
  for (const RankOneTerm& t : junctionTerms_) {
    double dot = 0.0;
    for (auto [col, v] : t.v) dot += v * x[col];
    if (dot == 0.0) continue;
    for (auto [row, u] : t.u) out[row] += u * dot;
  }
}

void NetworkSystem::denseJacobian(double time, std::span<const double> state, std::span<double> rowMajor) const {
  const Index n = size();
  if (rowMajor.size() != n * n) throw std::invalid_argument("denseJacobian needs size^2 values");
  std::vector<double> values(pattern_.nonzeros());
  jacobian(time, state, values);
  std::fill(rowMajor.begin(), rowMajor.end(), 0.0);
  for (Index col = 0; col < n; ++col)
    for (Index p = pattern_.columnStart[col]; p < pattern_.columnStart[col + 1]; ++p)
      rowMajor[pattern_.rowIndex[p] * n + col] = values[p];
  for (const RankOneTerm& t : junctionTerms_)
    for (auto [row, u] : t.u)
      for (auto [col, v] : t.v) rowMajor[row * n + col] += u * v;
}

double NetworkSystem::storedHeat(std::span<const double> T) const {
  double e = 0.0;
  for (Index i = 0; i < nodes_; ++i) e += nodeWeight(i) * network_.nodes[i].capacity * T[i];
  return e;
}

void NetworkSystem::groupStoredHeat(std::span<const double> T, std::span<double> out) const {
  std::fill(out.begin(), out.end(), 0.0);
  // A group's sum in a register over each run of consecutive nodes in it: the same additions in the same order as
  // adding into `out` node by node, without waiting for the store of the one before (a segment's nodes are
  // consecutive: the radial 20 000-cell run's 61 outputs, 1.5 % of its CPU samples before).
  const std::vector<NetworkNode>& nodes = network_.nodes;
  for (Index i = 0; i < nodes_;) {
    const Index g = nodes[i].group;
    if (g >= out.size()) {
      ++i;
      continue;
    }
    double sum = out[g];
    for (; i < nodes_ && nodes[i].group == g; ++i) sum += nodes[i].capacity * T[i];
    out[g] = sum;
  }
}


// ---- forward sensitivities --------------------------------------------------------------------------

std::string structuralDifference(const Network& a, const Network& b) {
  auto sizes = [](const Network& n) {
    return std::vector<std::size_t>{n.nodes.size(),      n.conductances.size(), n.advections.size(),
                                    n.exchanges.size(),  n.sources.size(),      n.faces.size(),
                                    n.groups.size(),     n.channels.size(),     n.flowParts.size(),
                                    n.modulators.size(), n.controllers.size()};
  };
  if (sizes(a) != sizes(b)) return "the number of nodes or terms differs (cell counts, segments or vessels)";
  if (a.groupWeights != b.groupWeights || a.channels != b.channels) return "segment counts or channels differ";
  if ((a.surface == nullptr) != (b.surface == nullptr) || (a.schedules == nullptr) != (b.schedules == nullptr))
    return "one network has surroundings or schedules the other lacks";
  for (Index i = 0; i < a.nodes.size(); ++i)
    if (a.nodes[i].group != b.nodes[i].group) return "a node moved to another segment";
  for (auto i = a.conductances.begin(), j = b.conductances.begin(); i != a.conductances.end(); ++i, ++j) {
    const Conductance x = *i, y = *j;
    if (x.a != y.a || x.b != y.b) return "conductances join other nodes";
  }
  if (a.junctions.size() != b.junctions.size()) return "the number of nodes or terms differs (cell counts, segments or vessels)";
  for (Index j = 0; j < a.junctions.size(); ++j) {
    const auto &x = a.junctions[j].rings, &y = b.junctions[j].rings;
    if (x.size() != y.size()) return "a child's junction meets other cells of its parent";
    for (Index r = 0; r < x.size(); ++r) {
      if (x[r].shares.size() != y[r].shares.size()) return "a child's junction meets other cells of its parent";
      for (Index k = 0; k < x[r].shares.size(); ++k)
        if (x[r].shares[k].first != y[r].shares[k].first) return "a child's junction meets other cells of its parent";
    }
  }
  if (a.conductanceChannels != b.conductanceChannels) return "conductances join other nodes";
  for (auto i = a.advections.begin(), j = b.advections.begin(); i != a.advections.end(); ++i, ++j) {
    const Advection x = *i, y = *j;
    if (x.from != y.from || x.to != y.to || x.via != y.via || x.channel != y.channel ||
        x.partsBegin != y.partsBegin || x.partsEnd != y.partsEnd)
      return "blood streams join other nodes";
  }
  for (Index i = 0; i < a.exchanges.size(); ++i) {
    const BoundaryExchange &x = a.exchanges[i], &y = b.exchanges[i];
    if (x.node != y.node || x.channel != y.channel || x.partsBegin != y.partsBegin || x.partsEnd != y.partsEnd)
      return "boundary exchanges differ";
  }
  for (auto i = a.sources.begin(), j = b.sources.begin(); i != a.sources.end(); ++i, ++j) {
    const HeatSource x = *i, y = *j;
    if (x.node != y.node || x.channel != y.channel || x.modulator != y.modulator || x.law != y.law ||
        x.law >= a.q10Laws.size() || y.law >= b.q10Laws.size() || a.q10Laws[x.law] != b.q10Laws[y.law])
      return "a heat source's Q10 law or reference temperature differs";
  }
  for (Index i = 0; i < a.faces.size(); ++i)
    if (a.faces[i].node != b.faces[i].node) return "faces sit on other nodes";
  if (a.faceControls != b.faceControls) return "other faces sweat (control.sweating.segments)";
  for (Index i = 0; i < a.flowParts.size(); ++i)
    if (a.flowParts[i].modulator != b.flowParts[i].modulator) return "modulated flows differ";
  for (Index i = 0; i < a.modulators.size(); ++i)
    if (a.modulators[i].schedule != b.modulators[i].schedule || a.modulators[i].control != b.modulators[i].control)
      return "modulators differ";
  for (Index i = 0; i < a.controllers.size(); ++i) {
    const Controller &x = a.controllers[i], &y = b.controllers[i];
    if (x.signal != y.signal || x.gain != y.gain || x.bias != y.bias || x.lower != y.lower || x.upper != y.upper ||
        x.offValue != y.offValue || x.timeConstant != y.timeConstant || x.setpointSchedule != y.setpointSchedule ||
        x.enableSchedule != y.enableSchedule)
      return "a controller's law (gain, limits, time constant) differs";
  }
  return "";
}

void NetworkSystem::parameterDerivative(double time, std::span<const double> T, std::span<const double> rhs,
                                        const ParameterNetworks& parameter, std::span<double> out) const {
  const std::span<double> outs[1] = {out};
  parameterDerivatives(time, T, rhs, std::span<const ParameterNetworks>(&parameter, 1), outs);
}

void NetworkSystem::parameterDerivatives(double time, std::span<const double> T, std::span<const double> rhs,
                                         std::span<const ParameterNetworks> parameters,
                                         std::span<const std::span<double>> outs) const {
  time = at(time);
  network_.coefficientsAt(time);
  const bool transient = mode_ == Mode::Transient;
  modulatorValues(time, T, modulators_);
  // The base face solutions, shared by every parameter: T_s, each channel's slope q_c'(T_s) and their sum.
  const Index faces = network_.faces.size();
  std::vector<double> faceT(faces), faceSlope(faces * channels_), faceDq(faces);
  for (Index f = 0; f < faces; ++f) {
    const FaceSolution sol =
        solveFace(f, time, T[network_.faces[f].node], heatScratch(), slopeScratch(), true, faceControl(f, T));
    faceT[f] = sol.temperature;
    double dq = 0.0;
    for (Index c = 0; c < channels_; ++c) {
      faceSlope[f * channels_ + c] = slopeScratch()[c];
      dq += slopeScratch()[c];
    }
    faceDq[f] = dq;
  }
  std::vector<double> dm(network_.modulators.size());
  std::vector<double> hp(channels_), dhp(channels_), hm(channels_), dhm(channels_);
  for (std::size_t j = 0; j < parameters.size(); ++j) {
    const ParameterNetworks& parameter = parameters[j];
    std::span<double> out = outs[j];
    const Network& P = *parameter.plus;
    const Network& M = *parameter.minus;
    const double h = parameter.step;
    P.coefficientsAt(time);  // the perturbed bodies' coats at the same wetness time
    M.coefficientsAt(time);
    std::fill(out.begin(), out.end(), 0.0);
    std::span<double> acc = transient ? out.subspan(nodes_ + controls_, channels_) : std::span<double>();
    auto toGroup = [&](Index node, Index channel, double q) {
      if (const Index r = groupRowOf(node); transient && r != none) out[r + channel] += q;
    };
    // d m_k / d p at fixed control state: the schedule's derivative times the control.
    for (Index k = 0; k < dm.size(); ++k) {
      const Modulator& m = network_.modulators[k];
      dm[k] = 0.0;
      if (m.schedule == none) continue;
      const double ds = (P.schedules->value(m.schedule, time) - M.schedules->value(m.schedule, time)) / h;
      dm[k] = m.control == none ? ds : ds * T[nodes_ + m.control];
    }
    auto dParts = [&](Index begin, Index end) {
      double sum = 0.0;
      for (Index p = begin; p < end; ++p) {
        const FlowPart& part = network_.flowParts[p];
        const double dc = (P.flowParts[p].coefficient - M.flowParts[p].coefficient) / h;
        sum += dc * modulators_[part.modulator] + part.coefficient * dm[part.modulator];
      }
      return sum;
    };
    for (auto it = network_.conductances.begin(); it != network_.conductances.end(); ++it) {
      const Index k = it.index();
      const Conductance c = *it;
      const auto [fa, fb] = conductanceFactors(c);
      const double dG = (P.conductances.value(k) - M.conductances.value(k)) / h;
      if (dG == 0.0) continue;
      const double q = dG * (T[c.b] - T[c.a]);
      out[c.a] += fa * q;
      out[c.b] -= fb * q;
      if (network_.nodes[c.a].group != network_.nodes[c.b].group) {
        const Index channel = network_.conductanceChannel(k);
        toGroup(c.a, channel, fa * q);
        toGroup(c.b, channel, -fb * q);
      }
    }
    // The junction rings' pair parts: their flows with the rings of p + h and of p - h (equal structure), differenced
    // share by share (linear in the ring's conductance, as the pair conductances' difference was).
    for (std::size_t jj = 0; jj < network_.junctions.size(); ++jj)
      for (std::size_t r = 0; r < network_.junctions[jj].rings.size(); ++r) {
        const JunctionRing &ringP = P.junctions[jj].rings[r], &ringM = M.junctions[jj].rings[r];
        if (ringP.conductance == ringM.conductance && ringP.shares == ringM.shares) continue;
        std::vector<double>& flowsP = ringScratch_;
        flowsP.clear();
        ringFlows(ringP, T, [&](Index, double q) { flowsP.push_back(q); });
        std::size_t k = 0;
        ringFlows(ringM, T, [&](Index node, double q) { out[node] += (flowsP[k++] - q) / h; });
      }
    for (auto it = network_.advections.begin(); it != network_.advections.end(); ++it) {
      const Index k = it.index();
      const Advection a = *it;
      // The inline part: its coefficient's difference times m plus the coefficient times dm, the number that
      // 0 / h + (0 + that) gave from flowParts.
      const double dF =
          hasInlinePart(a)
              ? (P.advections.value(k) - M.advections.value(k)) / h * modulators_[a.partsBegin] +
                    a.flowCapacity * dm[a.partsBegin]
              : (P.advections.value(k) - M.advections.value(k)) / h + dParts(a.partsBegin, a.partsEnd);
      forEachHop(a, [&](Index from, Index to) {
        const double q = dF * (T[from] - T[to]);
        out[to] += q;
        if (transient) acc[a.channel] += nodeWeight(to) * q;
        toGroup(to, a.channel, q);
      });
    }
    for (std::size_t k = 0; k < network_.exchanges.size(); ++k) {
      const BoundaryExchange& e = network_.exchanges[k];
      const double G = e.conductance + partsValue(e.partsBegin, e.partsEnd, modulators_);
      const double dG =
          (P.exchanges[k].conductance - M.exchanges[k].conductance) / h + dParts(e.partsBegin, e.partsEnd);
      const double dTb = (P.exchanges[k].temperature - M.exchanges[k].temperature) / h;
      const double q = dG * (e.temperature - T[e.node]) + G * dTb;
      out[e.node] += q;
      if (transient) acc[e.channel] += nodeWeight(e.node) * q;
      toGroup(e.node, e.channel, q);
    }
    for (auto it = network_.sources.begin(); it != network_.sources.end(); ++it) {
      const Index i = it.index();
      const HeatSource s = *it;
      const double m = s.modulator == none ? 1.0 : modulators_[s.modulator];
      const double dmv = s.modulator == none ? 0.0 : dm[s.modulator];
      const double dP = (P.sources.value(i) - M.sources.value(i)) / h;
      if (dP == 0.0 && dmv == 0.0) continue;
      const auto [rate, reference] = q10Rates_[s.law];
      const double q = (dP * m + s.power * dmv) * std::exp(rate * (T[s.node] - reference));
      out[s.node] += q;
      if (transient) acc[s.channel] += nodeWeight(s.node) * q;
      toGroup(s.node, s.channel, q);
    }
    // A face: G (T_n - T_s) + q(T_s, p) = 0 with G = G(p). Implicit differentiation at fixed T_n:
    // dT_s/dp = (dq/dp|T_s + dG/dp (T_n - T_s)) / (G - q'(T_s)); the node receives q(T_s), so each channel's
    // flow changes by dq_c/dp|T_s + q_c'(T_s) dT_s/dp.
    for (Index f = 0; f < faces; ++f) {
      const Index node = network_.faces[f].node;
      double dqp = 0.0;
      std::fill(hp.begin(), hp.end(), 0.0);
      if (parameter.surface) {
        std::fill(dhp.begin(), dhp.end(), 0.0);
        std::fill(hm.begin(), hm.end(), 0.0);
        std::fill(dhm.begin(), dhm.end(), 0.0);
        if (const double* control = faceControl(f, T)) {
          std::fill(controlDerivative_.begin(), controlDerivative_.end(), 0.0);
          P.surface->controlledFaceHeat(f, faceT[f], time, *control, hp, dhp, controlDerivative_);
          M.surface->controlledFaceHeat(f, faceT[f], time, *control, hm, dhm, controlDerivative_);
        } else {
          P.surface->faceHeat(f, faceT[f], time, hp, dhp);
          M.surface->faceHeat(f, faceT[f], time, hm, dhm);
        }
        for (Index c = 0; c < channels_; ++c) {
          hp[c] = (hp[c] - hm[c]) / h;
          dqp += hp[c];
        }
      }
      const double G = network_.faces[f].halfConductance;
      const double dG = (P.faces[f].halfConductance - M.faces[f].halfConductance) / h;
      if (dG == 0.0 && dqp == 0.0 && !parameter.surface) continue;
      const double dTs = (dqp + dG * (T[node] - faceT[f])) / (G - faceDq[f]);
      for (Index c = 0; c < channels_; ++c) {
        const double dqc = hp[c] + faceSlope[f * channels_ + c] * dTs;
        out[node] += dqc;
        if (transient) acc[c] += nodeWeight(node) * dqc;
        toGroup(node, c, dqc);
      }
    }
    for (Index k = 0; k < controls_; ++k) {
      const Controller& c = network_.controllers[k];
      bool active = false;
      controlTarget(c, time, T, &active);
      if (!active) continue;
      const double dSetpoint =
          c.setpointSchedule == none
              ? (P.controllers[k].setpoint - M.controllers[k].setpoint) / h
              : (P.schedules->value(c.setpointSchedule, time) - M.schedules->value(c.setpointSchedule, time)) / h;
      const double d = -c.gain * dSetpoint;
      out[nodes_ + k] = transient ? d / c.timeConstant : d;
    }
    if (transient)
      for (Index i = 0; i < nodes_; ++i) {
        // f_i = Q_i / C_i: d f_i / dp = (dQ_i/dp) / C_i - f_i (dC_i/dp) / C_i.
        const double dC = (P.nodes[i].capacity - M.nodes[i].capacity) / h;
        out[i] = (out[i] - rhs[i] * dC) * (1.0 / network_.nodes[i].capacity);
      }
  }
}

}  // namespace thermorph
