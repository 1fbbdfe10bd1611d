#pragma once
//! Assembles a thermal network into heat rates, dT/dt and a sparse CSC Jacobian through an index map built once.
#include <cstdint>
#include <algorithm>
#include <cmath>
#include <limits>
#include <optional>
#include <string>
#include <span>
#include <type_traits>
#include <utility>
#include <vector>

#include "network/network.hpp"

namespace thermorph {

//! Compressed sparse column pattern; positions and rows in 32 bits (NetworkSystem checks that they suffice).
struct SparsePattern {
  Index size = 0;
  std::vector<std::uint32_t> columnStart;  //!< [size + 1]
  std::vector<std::uint32_t> rowIndex;     //!< [nonzeros]
  Index nonzeros() const { return rowIndex.size(); }
};

//! A rank-one part of a Jacobian, u v^T, both vectors sparse: J = (the pattern's values) + the sum of these terms.
struct RankOneTerm {
  std::vector<std::pair<Index, double>> u;  //!< (row, value)
  std::vector<std::pair<Index, double>> v;  //!< (column, value)
};

//! How a network's terms differ from another's in structure ("" when only their coefficients differ): node groups,
//! term endpoints, channels, modulators, Q10 laws, controller laws. Forward sensitivities need equal structures.
std::string structuralDifference(const Network& a, const Network& b);

//! One parameter's effect on a network, for forward sensitivities: the same network built at p + h and p - h
//! (equal structure). The solver differences their coefficients (capacities, conductances, flows, boundary
//! temperatures, source powers, face half-conductances, set points), their schedules at the time asked and their
//! surface models at the face temperature asked, and carries these through the assembly's exact chain rule.
struct ParameterNetworks {
  const Network* plus = nullptr;
  const Network* minus = nullptr;
  double step = 0.0;  //!< (p + h) - (p - h)
  bool surface = true;  //!< the surface models differ (false: skip differencing them, their difference is zero)
};

//! Right-hand side and Jacobian of a network.
//! State: node temperatures [K], then controller states [1], then (transient only) one cumulative energy per
//! channel [J], then (transient only) one cumulative energy per group and channel [J] (row-major [groups x
//! channels], one copy of the group). Transient: dT/dt = Q_i / C_i, du/dt = (u* - u)/tau, dE_c/dt = sum of
//! channel-c flows (weighted by group multiplicity), dE_gc/dt = channel-c flow into one copy of group g (as
//! groupFlows(), conduction across group boundaries included). Steady: residuals Q_i [W] and u* - u.
//! The group energies are linear in the node rates: sum_c dE_gc/dt = sum_(i in g) C_i dT_i/dt identically, and
//! the Jacobian carries the same identity, so BDF with Newton keeps sum_c E_gc = sum_(i in g) C_i (T_i - T_i(0))
//! to round-off whatever the error control (CVODE's corrector preserves linear invariants).
class NetworkSystem {
 public:
  enum class Mode { Transient, Steady };
  NetworkSystem(const Network& network, Mode mode);

  Index size() const { return pattern_.size; }
  Index nodeCount() const { return nodes_; }
  Index controlCount() const { return controls_; }
  Index channelCount() const { return channels_; }
  //! Groups with cumulative energies in the state (transient: every group; steady: 0).
  Index groupCount() const { return groups_; }
  //! First state index of the group energies (after the channel energies).
  Index groupEnergyOffset() const { return nodes_ + controls_ + channels_; }
  const SparsePattern& pattern() const { return pattern_; }
  const Network& network() const { return network_; }

  //! Time derivative (transient) or residual (steady) [size].
  void evaluate(double time, std::span<const double> state, std::span<double> out) const;
  //! Jacobian values in the order of pattern().rowIndex [nonzeros]; with junctionTerms() the Jacobian is these plus
  //! the junctions' rank-one terms.
  void jacobian(double time, std::span<const double> state, std::span<double> values) const;
  //! The junctions' pair parts (Network::junctions) are not in the pattern; the Jacobian is J = J_pattern + sum
  //! u v^T over these terms (constant: u = -G_r w_r / C, steady -G_r w_r, v = w_r per junction ring, the pattern's
  //! diagonal carrying G_r w_i S_r (/ C), S_r = sum of the ring's shares). A pair term couples every two cells of a ring's region: as
  //! pattern entries a dense block of m^2 entries per region, m^3/3 flops in the factorisation whatever the order.
  //! Each term's u and v list the same region cells in the same order (u[k].first == v[k].first).
  const std::vector<RankOneTerm>& junctionTerms() const { return junctionTerms_; }
  //! out += sum u (v . x) over junctionTerms() [size].
  void addJunctionProduct(std::span<const double> x, std::span<double> out) const;
  //! The whole Jacobian as a dense row-major matrix [size x size] (tests and small systems): jacobian() plus the
  //! junction terms.
  void denseJacobian(double time, std::span<const double> state, std::span<double> rowMajor) const;

  //! Partial derivative of the right-hand side (transient mode) with respect to a parameter at fixed state:
  //! d f / d p [size]. `rhs` is evaluate()'s result at the same time and state.
  void parameterDerivative(double time, std::span<const double> state, std::span<const double> rhs,
                           const ParameterNetworks& parameter, std::span<double> out) const;
  //! The same for several parameters at one time and state (face temperatures solved once): out[j] for
  //! parameters[j].
  void parameterDerivatives(double time, std::span<const double> state, std::span<const double> rhs,
                            std::span<const ParameterNetworks> parameters, std::span<const std::span<double>> out) const;

  //! Heat flow by group and channel at the state (nodes and controls at least) [W], row-major
  //! [groups x channels], unweighted, plus storage per group sum C dT/dt [W] [groups]; face temperatures [faces].
  void groupFlows(double time, std::span<const double> state, std::span<double> flows, std::span<double> storage,
                  std::span<double> faceTemperatures) const;
  //! groupFlows()'s flows of the channels marked in `channels` [channels] (1: wanted), zero for the others, without
  //! storage and face temperatures: the same terms added in the same order, so the same values bit for bit, but the
  //! terms of other channels, the nodes' rates and the storage are skipped. Every face is still solved (its heats
  //! are in several channels, and a report solve logs the surface model's range warnings as groupFlows does).
  //! For the controller-output check of a sweep (ControlGridWatch), which needs the heat lost to the surroundings
  //! at every output: the internal channels' terms (every conductance and stream) were 20-37 % of groupFlows there.
  void channelFlows(double time, std::span<const double> state, std::span<const char> channels,
                    std::span<double> flows) const;

  //! Stored heat sum w C T of the nodes (weighted by group multiplicity) [J].
  double storedHeat(std::span<const double> state) const;
  //! Stored heat sum C T of one copy of each group [J] [network groups], unweighted.
  void groupStoredHeat(std::span<const double> state, std::span<double> out) const;
  //! Evaluate every term at this time whatever time the caller passes (steady states of the t = 0 surroundings
  //! found by integrating in pseudo-time); nullopt: use the caller's time.
  void freezeTime(std::optional<double> time) { frozenTime_ = time; }
  //! Modulator values m_k(t, u) for the state [modulators].
  void modulatorValues(double time, std::span<const double> state, std::span<double> values) const;

 private:
  struct FaceSolution {
    double temperature;  //!< face temperature [K]
    double dTsdTn;       //!< d(face temperature)/d(node temperature) [1]
    double dqdTs;        //!< sum of the channels' dq/dT_s at the solution [W/K]
  };
  //! groupFlows (channels empty) and channelFlows (channels marked; storage and faceTemperatures may be empty).
  void flowsByGroup(double time, std::span<const double> state, std::span<const char> channels,
                    std::span<double> flows, std::span<double> storage, std::span<double> faceTemperatures) const;
  //! `remember`: keep the solution as the face's next Newton start (false for reports: groupFlows).
  //! `control`: the state of the face's controller (Network::faceControls; nullptr: none), whose derivatives d q_c/d u
  //! are left in controlDerivative_.
  FaceSolution solveFace(Index face, double time, double nodeTemperature, std::span<double> channelHeat,
                         std::span<double> channelDerivative, bool remember = true,
                         const double* control = nullptr) const;
  //! The state of face f's controller in `state` (nodes and controls at least), or nullptr for a face without one.
  const double* faceControl(Index f, std::span<const double> state) const {
    if (faceControl_.empty() || faceControl_[f] == none) return nullptr;
    return &state[nodes_ + faceControl_[f]];
  }
  //! Controller of each face (Network::faceControls; none: none), empty when no face has one.
  std::vector<Index> faceControl_;
  mutable std::vector<double> controlDerivative_;  //!< d q_c / d u of the last controlled face solve [channels]
  //! Position of a Jacobian entry in pattern().rowIndex: a search in its column (the Jacobian's terms find their
  //! entries this way; no per-term tables of positions are kept). 32 bits (the constructor checks that they suffice).
  using Slot = std::uint32_t;
  Slot slot(Index row, Index col) const;
  //! The positions jacobian() found, in the order it adds its terms (the order is fixed by the network): recorded
  //! at the first call and replayed at later ones instead of searching, for systems of up to kSlotReplayLimit
  //! states only (4 bytes per term, about 60 bytes per node; large bodies keep the searches and their memory).
  static constexpr Index kSlotReplayLimit = 5000;
  mutable std::vector<Slot> slotSequence_;
  double partsValue(Index begin, Index end, std::span<const double> m) const;
  //! An advection's flow F at modulator values m [W/K] (Advection: flowCapacity plus its parts, or its inline part).
  double flowOf(const Advection& a, std::span<const double> m) const;
  //! A stream through a node of the group it flows on into (perfusion: artery -> tissue cell -> vein of the same
  //! segment): its hops' flows into the energy rows of its channel and group, d/dT_via, are -w F (the stream
  //! leaving via, first hop) and +w F (entering the second), with the same w and F: exactly zero together. These
  //! entries are left out of the pattern and the Jacobian (two per perfused cell: at 10^5 cells 2.4 MB of values
  //! and rows) wherever no other term has them; an entry that another term also fills no longer adds the two.
  bool viaCancels(const Advection& a) const {
    return a.via != none && network_.nodes[a.via].group == network_.nodes[a.to].group;
  }
  double controlTarget(const Controller& c, double time, std::span<const double> state, bool* active) const;
  Index controlColumn(Index modulator) const;  //!< state column of the modulator's control, or none

  //! Calls visit(node, q) for each share of a junction ring with the ring's pair-part flow into that region cell,
  //! q_i = G w_i (S T_i - Tbar), Tbar = sum w_j T_j, S = sum w_j (Network::JunctionRing): O(m) per ring of m cells.
  template <class Visit>
  static void ringFlows(const JunctionRing& ring, std::span<const double> T, Visit&& visit) {
    double mean = 0.0, sum = 0.0;
    for (auto [node, w] : ring.shares) {
      mean += w * T[node];
      sum += w;
    }
    for (auto [node, w] : ring.shares) visit(Index{node}, ring.conductance * w * (sum * T[node] - mean));
  }
  std::vector<RankOneTerm> junctionTerms_;
  mutable std::vector<double> ringScratch_;  //!< one ring's flows (parameterDerivatives)

  const Network& network_;
  Mode mode_;
  Index nodes_ = 0, controls_ = 0, channels_ = 0;
  SparsePattern pattern_;
  // Per-node and per-source factors are not stored (8 bytes per node each at 10^5 nodes): the node rows' scale
  // 1/C is computed where it is applied (the same reciprocal, so the same products), a node's multiplicity is read
  // from its group, and a source's ln(Q10)/10 from a table of the network's Q10 laws.
  //! Group multiplicity of a node (1 unless its group is mirrored).
  double nodeWeight(Index node) const { return groupWeight_[network_.nodes[node].group]; }
  std::vector<double> groupWeight_;  //!< multiplicity of each group that has nodes (1 where groupWeights has none)
  //! Each Q10 law of the network (Network::q10Laws) as (ln(Q10)/10 [1/K], T_ref [K]): Q10^((T - T_ref)/10) =
  //! exp(rate (T - T_ref)).
  std::vector<std::pair<double, double>> q10Rates_;
  // Group energies (transient): the state row of a node's group energy of channel 0, from its group (none: no
  // group energies); the rows of the other channels follow it.
  Index groups_ = 0;
  Index groupRowOf(Index node) const {
    const Index g = network_.nodes[node].group;
    return g < groups_ ? groupEnergyOffset() + g * channels_ : none;
  }
  //! Factors on a conductance's flow into a and into b: between groups of different multiplicity it carries its
  //! flow once per copy of the more numerous group (the single parent receives count times what each child copy
  //! gives); 1 and 1 between nodes of equal multiplicity (w / w = 1 exactly, so the same numbers as dividing).
  std::pair<double, double> conductanceFactors(const Conductance& c) const {
    const Index ga = network_.nodes[c.a].group, gb = network_.nodes[c.b].group;
    if (ga == gb) return {1.0, 1.0};
    const double wa = groupWeight_[ga], wb = groupWeight_[gb];
    if (wa == wb) return {1.0, 1.0};
    const double w = std::max(wa, wb);
    return {w / wa, w / wb};
  }
  //! 1/C of each node (transient systems of up to kSlotReplayLimit states; larger ones divide where needed): the
  //! same quotients as dividing at every evaluation, without a division per node and right-hand side.
  std::vector<double> inverseCapacity_;
  //! The same systems' group-energy row of each node (none: no group energies) and multiplicity, and each
  //! conductance's factors and whether it joins two groups: evaluate() reads them instead of the nodes' groups
  //! (the same values; about 3 % of a sweep run's instructions in the quadruped study).
  struct ConductanceFactors {
    double a = 1.0, b = 1.0;
    bool acrossGroups = false;
    std::uint32_t channel = 0;  //!< Network::conductanceChannel (in the padding: 24 bytes as without it)
  };
  //! Network::conductanceChannel(k), from the table where there is one (a search in the network's list otherwise).
  Index conductanceChannel(Index k) const {
    return conductanceFactors_.empty() ? network_.conductanceChannel(k) : Index(conductanceFactors_[k].channel);
  }
  std::vector<Index> nodeGroupRow_;
  std::vector<double> nodeWeight_;
  std::vector<ConductanceFactors> conductanceFactors_;
  mutable std::vector<double> faceGuess_;  //!< last face temperatures, Newton start values
  mutable std::vector<double> faceNodeTemperature_, faceSlope_;  //!< node temperature and dT_s/dT_n there
  //! Face temperature of the last evaluation of the face's heats in a remembered solve, and dq/dT_s there (the
  //! secant of dq/dT_s between two evaluations estimates q'' for the error of a single Newton step).
  mutable std::vector<double> faceEvalTemperature_, faceEvalSlope_;
  //! The face solves' channel heats (first half) and their slopes dq_c/dT_s (second half) in one block, zeroed by one
  //! fill per Newton iteration (DEVELOPERS.md "Per-run CPU in sweeps, sixteenth round").
  mutable std::vector<double> faceScratch_;
  //! The channels the surface model's face heats may add to (SurfaceModel::faceChannels; every channel when it names
  //! none), ascending: the face solves zero, sum and book only these, the others of the scratch block stay 0 (the
  //! environment's 5 of 9-10 channels; DEVELOPERS.md "Per-run CPU in sweeps, seventeenth round").
  std::vector<Index> faceChannels_;
  std::span<double> heatScratch() const { return {faceScratch_.data(), channels_}; }
  std::span<double> slopeScratch() const { return {faceScratch_.data() + channels_, channels_}; }
  mutable std::vector<double> modulators_;
  mutable std::vector<double> scheduleValues_;  //!< schedule factor of each modulator at the last evaluation
  std::optional<double> frozenTime_;
  double at(double time) const { return frozenTime_ ? *frozenTime_ : time; }
};

}  // namespace thermorph
