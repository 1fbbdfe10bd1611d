#pragma once
//! The thermal network: the one seam between models/ (which builds it) and solver/ (which integrates it).
//!
//! A node has a heat capacity and a temperature (a state). Heat flows into node i [W]:
//!   conductance  G (T_j - T_i)                       between two nodes
//!   advection    F (T_from - T_to) into `to`           blood carrying heat downstream, F = mdot c [W/K]
//!   exchange     G (T_b - T_i)                        to a prescribed boundary temperature T_b
//!   source       P_ref Q10^((T_i - T_ref)/10)        volumetric heat (metabolism)
//!   surface      q(T_s, t), through a half-cell conductance to the face temperature T_s
//! Every term except conductances names a budget channel; every node a group (a body segment).
//! A group may stand for several identical copies (groupWeights): advection flows are per copy of the
//! receiving node; a conductance between groups of different weight carries its flow once per copy of the
//! more numerous group. Stored heat and budgets are weighted, so energy is conserved exactly.
#include <algorithm>
#include <cstddef>
#include <cstdint>
#include <functional>
#include <iterator>
#include <stdexcept>
#include <span>
#include <string>
#include <utility>
#include <vector>

namespace thermorph {

using Index = std::size_t;

//! "No such entry" for optional indices (modulator, control, schedule).
inline constexpr Index none = static_cast<Index>(-1);

//! An Index stored in the unsigned type U (a network index that does not fit, none included, is refused where it
//! is stored; written and read as an Index). Index32: the endpoints, groups, channels and part ranges of the
//! network's terms (there are several terms per node: at 10^5 nodes each 64-bit index costs about 1 MB). Index16:
//! the few-valued indices of the heat sources (budget channel, Q10 law): a source is 20 bytes instead of 24 (at
//! 10^5 cells 0.4 MB).
template <class U>
class CompactIndex {
  static_assert(sizeof(U) == 2 || sizeof(U) == 4, "16- or 32-bit indices");
 public:
  constexpr CompactIndex() = default;
  constexpr CompactIndex(Index i) : value_(static_cast<U>(i)) {  // NOLINT: implicit on purpose
    if (i >= U(-1))
      throw std::length_error(sizeof(U) == 2 ? "a network index does not fit in 16 bits"
                                             : "a network index does not fit in 32 bits");
  }
  constexpr operator Index() const { return value_; }  // NOLINT: implicit on purpose

 private:
  U value_ = 0;
};
using Index32 = CompactIndex<std::uint32_t>;
using Index16 = CompactIndex<std::uint16_t>;

//! An optional Index in 32 bits (none stays none): modulators of sources and flow parts.
class OptionalIndex32 {
 public:
  constexpr OptionalIndex32() = default;
  constexpr OptionalIndex32(Index i) : value_(i == none ? noValue : static_cast<std::uint32_t>(i)) {  // NOLINT
    if (i != none && i >= noValue) throw std::length_error("a network index does not fit in 32 bits");
  }
  constexpr operator Index() const { return value_ == noValue ? none : value_; }  // NOLINT: implicit on purpose

 private:
  static constexpr std::uint32_t noValue = static_cast<std::uint32_t>(-1);
  std::uint32_t value_ = noValue;
};

// The network's per-term structs are packed to 4-byte alignment: a double after a 32-bit index (or a 32-bit index
// after the last double) no longer pads the struct to a multiple of 8 bytes (at 10^5 nodes the radial case has
// about six such terms per node: 28 bytes per node less). x86-64 and AArch64 read a double at a 4-byte boundary
// at full speed within a cache line; the values and their order are unchanged. Members are read and written by
// value (no reference or pointer to a packed member: the compiler refuses to bind one).
//! Coefficients that change within a timeline interval (models/: a wet coat's conductances follow its segment's
//! wetted fraction while it dries, linear in time over an event's ramp). NetworkSystem calls at(t) before it reads
//! the network's conductances and face half-conductances at time t (right-hand side, Jacobian, budgets, parameter
//! derivatives); the model writes that time's values into the network it built. The values are a function of the
//! time alone (the interval set by the model's own setInterval), so a report at an output time does not change the
//! integrator's path, and the Jacobian's form in the state is unchanged.
class TimedCoefficients {
 public:
  virtual ~TimedCoefficients() = default;
  virtual void at(double time) const = 0;
};

#pragma pack(push, 4)

//! One part of a modulated flow: coefficient times the value of a modulator [W/K].
struct FlowPart {  // 12 bytes
  OptionalIndex32 modulator = none;
  double coefficient = 0.0;
};

#pragma pack(pop)

//! A multiplier on terms: a time function from the model (events, ramps) times a control state:
//! m(t, u) = schedule(t) * u_control (either factor is 1 when absent).
struct Modulator {
  Index schedule = none;  //!< index for ScheduleModel::value
  Index control = none;   //!< controller whose state multiplies
  std::string name;
};

//! Feedback control state u with first-order lag: du/dt = (u* - u)/tau,
//! u* = clamp(bias + gain (signal - setpoint), lower, upper) when enabled, else offValue;
//! signal = sum of weight * node temperature [K]. Proportional control about a set point with limits.
struct Controller {
  std::string name;
  std::vector<std::pair<Index, double>> signal;  //!< (node, weight), weights sum to 1
  double setpoint = 310.15;                       //!< [K], unless setpointSchedule gives it
  Index setpointSchedule = none;
  Index enableSchedule = none;                    //!< schedule value > 0.5: enabled
  double gain = 0.0;                              //!< [1/K]
  double bias = 1.0, lower = 0.0, upper = 1.0, offValue = 1.0;
  double timeConstant = 60.0;                     //!< [s]
  double initial = 1.0;
};

class ScheduleModel {
 public:
  virtual ~ScheduleModel() = default;
  //! Value of time function `schedule` at time t (steps resolved by the model's current interval).
  virtual double value(Index schedule, double time) const = 0;
};

#pragma pack(push, 4)

//! A node: 12 bytes (a double and a 32-bit group). Its human-readable label is generated on demand (Network::label), not stored.
struct NetworkNode {
  double capacity = 0.0;  //!< heat capacity [J/K]
  Index32 group = 0;      //!< owning group (segment)
};

//! Conduction between two nodes [W/K]. Its budget channel (where a and b belong to different groups) is not stored
//! here: Network::conductanceChannel (most conductances join cells of one segment; 4 bytes per conductance less).
struct Conductance {  // 16 bytes
  Index32 a = 0, b = 0;
  double conductance = 0.0;
};

//! A conductance's budget channel other than 0 (Network::conductanceChannels).
struct ConductanceChannel {
  Index32 conductance = 0, channel = 0;
  bool operator==(const ConductanceChannel& o) const {
    return Index(conductance) == Index(o.conductance) && Index(channel) == Index(o.channel);
  }
};

//! Heat carried by a fluid stream from `from` into `to`: F (T_from - T_to) [W/K]. A stream through a node on its
//! way (`via`: perfusion, artery -> tissue cell -> vein) is two hops of the same flow in one term, in this order:
//! F (T_from - T_via) into `via`, then F (T_via - T_to) into `to` (the same sums as two advections, one term less
//! per perfused cell).
//! The flow F = flowCapacity + the sum of its modulated parts (Network::flowParts[partsBegin, partsEnd)). A flow of
//! exactly one part and no constant (a perfused cell's draw: its layer's perfusion modulator times the cell's flow)
//! holds that part itself: partsEnd == kInlinePart, partsBegin its modulator, flowCapacity its coefficient, and F =
//! coefficient * modulator, the number 0 + (0 + coefficient * modulator) gave (12 bytes per perfused cell less: at
//! 10^5 cells 1.2 MB). Read flows through Network::forEachPart and Network::constantFlow.
struct Advection {  // 32 bytes
  Index32 from = 0, to = 0;
  double flowCapacity = 0.0;  //!< mass flow times specific heat [W/K] (constant part; the inline part's coefficient)
  Index32 channel = 0;
  Index32 partsBegin = 0, partsEnd = 0;  //!< modulated parts in Network::flowParts, added to flowCapacity
  OptionalIndex32 via = none;            //!< the node the stream passes through first (none: straight to `to`)
};

//! Advection::partsEnd of an advection that holds its one modulated part itself.
inline constexpr Index kInlinePart = 0xFFFFFFFEu;
inline bool hasInlinePart(const Advection& a) { return Index(a.partsEnd) == kInlinePart; }

//! Calls f(from, to) for each hop of an advection, in order.
template <class F>
void forEachHop(const Advection& a, F&& f) {
  if (a.via == none) {
    f(Index(a.from), Index(a.to));
  } else {
    f(Index(a.from), Index(a.via));
    f(Index(a.via), Index(a.to));
  }
}

//! Exchange with a prescribed boundary temperature: G (T_b - T_i).
struct BoundaryExchange {  // 32 bytes
  Index32 node = 0;
  double conductance = 0.0;  //!< [W/K] (constant part)
  double temperature = 0.0;  //!< [K]
  Index32 channel = 0;
  Index32 partsBegin = 0, partsEnd = 0;  //!< modulated parts in Network::flowParts
};

//! Temperature-dependent heat source P_ref Q10^((T - T_ref)/10) [W]; its Q10 and T_ref are one of the network's
//! few Q10 laws (Network::q10Laws: a body has one per tissue Q10), not stored per source (16 bytes per cell).
struct HeatSource {  // 20 bytes
  Index32 node = 0;
  double power = 0.0;                 //!< at the reference temperature [W]
  Index16 law = 0;                    //!< index in Network::q10Laws
  Index16 channel = 0;
  OptionalIndex32 modulator = none;           //!< multiplies the power
};

//! One exterior face: node -> (half-cell conductance) -> face at T_s -> environment.
struct SurfaceFace {  // 20 bytes
  Index32 node = 0;
  double halfConductance = 0.0;  //!< node-to-face conductance [W/K]
  double area = 0.0;             //!< face area [m2]
};

#pragma pack(pop)
static_assert(sizeof(FlowPart) == 12 && sizeof(NetworkNode) == 12 && sizeof(Conductance) == 16 &&
              sizeof(Advection) == 32 && sizeof(BoundaryExchange) == 32 && sizeof(HeatSource) == 20 &&
              sizeof(SurfaceFace) == 20, "the network's terms are packed");

//! How a term of one kind continues a run in TermRuns: Key(t) the fields that a run shares once its node indices are
//! taken back to the run's first term (at(head, offset, value) moves them forward by offset), value(t) the one
//! coefficient each term stores (setValue(t, v) sets it).
template <class T>
struct TermTraits;

template <>
struct TermTraits<Conductance> {  // a and b advance by one: a 1-D chain of cells
  static double value(const Conductance& c) { return c.conductance; }
  static void setValue(Conductance& c, double value) { c.conductance = value; }
  static Conductance at(Conductance c, Index offset, double value) {
    c.a = Index(c.a) + offset;
    c.b = Index(c.b) + offset;
    c.conductance = value;
    return c;
  }
  static bool same(const Conductance& x, const Conductance& y) {
    return Index(x.a) == Index(y.a) && Index(x.b) == Index(y.b);
  }
};

template <>
struct TermTraits<Advection> {  // a stream through consecutive cells (via advances by one; from, to, parts shared)
  static double value(const Advection& a) { return a.flowCapacity; }
  static void setValue(Advection& a, double value) { a.flowCapacity = value; }
  static Advection at(Advection a, Index offset, double value) {
    if (a.via != none) a.via = Index(a.via) + offset;
    a.flowCapacity = value;
    return a;
  }
  static bool same(const Advection& x, const Advection& y) {
    return Index(x.from) == Index(y.from) && Index(x.to) == Index(y.to) && Index(x.channel) == Index(y.channel) &&
           Index(x.partsBegin) == Index(y.partsBegin) && Index(x.partsEnd) == Index(y.partsEnd) &&
           Index(x.via) == Index(y.via);
  }
};

template <>
struct TermTraits<HeatSource> {  // the sources of consecutive cells of one tissue (law, channel, modulator shared)
  static double value(const HeatSource& s) { return s.power; }
  static void setValue(HeatSource& s, double value) { s.power = value; }
  static HeatSource at(HeatSource s, Index offset, double value) {
    s.node = Index(s.node) + offset;
    s.power = value;
    return s;
  }
  static bool same(const HeatSource& x, const HeatSource& y) {
    return Index(x.node) == Index(y.node) && Index(x.law) == Index(y.law) && Index(x.channel) == Index(y.channel) &&
           Index(x.modulator) == Index(y.modulator);
  }
};

//! A list of terms of one kind (conductances, advections, heat sources): plain (a vector of the terms) while it is
//! built and in small networks, or stored as runs once packed (pack(); Network::compact packs the lists of a network
//! of more than Network::kPlainNodes nodes). Packed, a term that continues the last one's run (TermTraits: the same
//! fields but its node indices one further along, as a radial layer's cells give) adds only its coefficient, a
//! double: at 10^5 cells of one tissue a source costs 8 bytes instead of 20, a conductance 8 instead of 16, a
//! perfused cell's stream 8 instead of 32 (3.6 MB less in the radial case). The terms, their order and their values
//! are those pushed in either form: read by value (operator[]: an index, or a search among the runs; iteration;
//! forEach, a loop over the terms or over each run's coefficients). The coefficient of term k can be changed in
//! place (setValue: an interval's conductances), its other fields only by rebuilding the list (transform).
//! Plain lists keep the small networks of sweeps free of the runs' costs (building them, reading terms back: about
//! 1.5 % of a small study's run, DEVELOPERS.md "Term runs without their cost"); a plain list that grows past
//! kPlainLimit terms packs itself (the set-up of a large network never holds the whole plain list).
template <class T>
class TermRuns {
  using Traits = TermTraits<T>;
#pragma pack(push, 4)
  struct Run {
    std::uint32_t first = 0;  //!< index of the run's first term
    T head;                   //!< the run's first term (its coefficient unused: values_)
  };
#pragma pack(pop)

 public:
  //! A plain list that reaches this many terms is packed (push_back).
  static constexpr Index kPlainLimit = 1 << 15;
  using value_type = T;
  class const_iterator {
   public:
    using iterator_category = std::input_iterator_tag;
    using value_type = T;
    using difference_type = std::ptrdiff_t;
    using reference = T;
    using pointer = void;
    const_iterator() = default;
    const_iterator(const TermRuns* list, Index k, Index run) : list_(list), k_(k), run_(run) {}
    T operator*() const {
      if (!list_->packed_) return list_->plain_[k_];
      const Run& r = list_->runs_[run_];
      return Traits::at(r.head, k_ - r.first, list_->values_[k_]);
    }
    const_iterator& operator++() {
      ++k_;
      if (run_ + 1 < list_->runs_.size() && k_ == list_->runs_[run_ + 1].first) ++run_;
      return *this;
    }
    const_iterator operator++(int) {
      const_iterator old = *this;
      ++*this;
      return old;
    }
    bool operator==(const const_iterator& o) const { return k_ == o.k_; }
    //! The index of the term it points at.
    Index index() const { return k_; }

   private:
    const TermRuns* list_ = nullptr;
    Index k_ = 0, run_ = 0;
  };

  Index size() const { return packed_ ? values_.size() : plain_.size(); }
  bool empty() const { return size() == 0; }
  const_iterator begin() const { return {this, 0, 0}; }
  const_iterator end() const { return {this, size(), runs_.empty() ? 0 : runs_.size() - 1}; }
  T operator[](Index k) const {
    if (!packed_) return plain_[k];
    const Run& r = runOf(k);
    return Traits::at(r.head, k - r.first, values_[k]);
  }
  T back() const { return (*this)[size() - 1]; }
  //! Calls f(k, term) for each term in order: the plain terms themselves, or each run's terms formed from its head
  //! and coefficients (one loop per run).
  template <class F>
  [[gnu::always_inline]] void forEach(F&& f) const {
    if (!packed_) {
      const T* terms = plain_.data();
      for (Index k = 0, n = plain_.size(); k < n; ++k) f(k, terms[k]);
      return;
    }
    const double* values = values_.data();
    for (Index r = 0, runs = runs_.size(); r < runs; ++r) {
      const T head = runs_[r].head;
      const Index first = runs_[r].first, end = r + 1 < runs ? Index(runs_[r + 1].first) : values_.size();
      for (Index k = first; k < end; ++k) f(k, Traits::at(head, k - first, values[k]));
    }
  }
  //! Appends t: plain, or (packed) to the last run if it continues it, else as a new run.
  void push_back(const T& t) {
    if (!packed_ && plain_.size() + 1 < kPlainLimit) plain_.push_back(t);  // (inline: a network's build)
    else pushPacking(t);
  }
  void pop_back() {
    if (!packed_) {
      plain_.pop_back();
      return;
    }
    values_.pop_back();
    if (runs_.back().first == values_.size()) runs_.pop_back();
  }
  //! The coefficient of term k (Conductance::conductance, Advection::flowCapacity, HeatSource::power).
  double value(Index k) const { return packed_ ? values_[k] : Traits::value(plain_[k]); }
  void setValue(Index k, double v) {
    if (packed_) values_[k] = v;
    else Traits::setValue(plain_[k], v);
  }
  //! Replaces every term t by f(t) (a packed list's runs formed again).
  template <class F>
  void transform(F&& f) {
    if (!packed_) {
      for (T& t : plain_) f(t);
      return;
    }
    TermRuns out;
    out.packed_ = true;
    out.runs_.reserve(runs_.size());
    out.values_.reserve(values_.size());
    for (T t : *this) {
      f(t);
      out.push_back(t);
    }
    *this = std::move(out);
  }
  //! Stores the list as runs from now on (the same terms; nothing when packed already).
  void pack() {
    if (packed_) return;
    std::vector<T> plain;
    plain.swap(plain_);
    packed_ = true;
    for (const T& t : plain) pushPacking(t);
  }
  bool packed() const { return packed_; }
  //! The terms of a plain list (empty when packed).
  std::span<const T> plain() const { return packed_ ? std::span<const T>() : std::span<const T>(plain_); }
  void shrink_to_fit() {
    plain_.shrink_to_fit();
    runs_.shrink_to_fit();
    values_.shrink_to_fit();
  }
  //! Runs of a packed list (0 for a plain one).
  Index runCount() const { return runs_.size(); }

 private:
  //! push_back of a packed list, or of a plain one that reaches kPlainLimit terms with t (packed first).
  [[gnu::noinline]] void pushPacking(const T& t) {
    pack();
    if (values_.size() >= std::uint32_t(-1)) throw std::length_error("a network index does not fit in 32 bits");
    const double v = Traits::value(t);
    if (!runs_.empty()) {
      const Run& r = runs_.back();
      if (Traits::same(Traits::at(r.head, size() - r.first, v), t)) {
        values_.push_back(v);
        return;
      }
    }
    runs_.push_back({static_cast<std::uint32_t>(size()), t});
    values_.push_back(v);
  }
  const Run& runOf(Index k) const {
    return *(std::upper_bound(runs_.begin(), runs_.end(), k,
                              [](Index key, const Run& r) { return key < r.first; }) -
             1);
  }
  std::vector<T> plain_;  //!< the terms of a plain list
  std::vector<Run> runs_;  //!< a packed list's runs and coefficients
  std::vector<double> values_;
  bool packed_ = false;
};

//! The temperature law of heat sources: Q10^((T - T_ref)/10).
struct Q10Law {
  double q10 = 1.0;                   //!< [1]
  double referenceTemperature = 0.0;  //!< [K]
  bool operator==(const Q10Law&) const = default;
};

//! Heat exchange of exterior faces with the surroundings; implemented by models/.
class SurfaceModel {
 public:
  virtual ~SurfaceModel() = default;
  //! Heat flow into the body through face `face` at face temperature `faceTemperature` [K] and time t [s]:
  //! adds each channel's flow [W] to `channelHeat` and its derivative with respect to the face temperature
  //! [W/K] to `channelDerivative` (both of length: number of channels).
  virtual void faceHeat(Index face, double faceTemperature, double time, std::span<double> channelHeat,
                        std::span<double> channelDerivative) const = 0;
  //! As faceHeat for a face whose exchange also depends on a controller's state u (Network::faceControls: sweating's
  //! wetted fraction), at that state; adds each channel's derivative with respect to u [W] to `controlDerivative`.
  //! The default ignores u (the face's heats as faceHeat gives them, derivatives 0).
  virtual void controlledFaceHeat(Index face, double faceTemperature, double time, double control,
                                  std::span<double> channelHeat, std::span<double> channelDerivative,
                                  std::span<double> controlDerivative) const {
    (void)control;
    (void)controlDerivative;
    faceHeat(face, faceTemperature, time, channelHeat, channelDerivative);
  }
  //! While set, faceHeat calls are reports (budgets at outputs), not steps of the integration: a model that keeps
  //! caches between calls reads them but leaves them as they are, so that a report never changes the
  //! integrator's path (a run with a results file and a sweep run without one stay bit for bit equal).
  virtual void setReporting(bool) const {}
  //! The channels that faceHeat and controlledFaceHeat may add to (flows, derivatives), ascending; empty: any
  //! channel. The face solves zero, sum and book only these (NetworkSystem: the other channels of a face are exactly
  //! 0 and are skipped).
  virtual std::vector<Index> faceChannels() const { return {}; }
};

//! One tissue ring of a junction (models/body.cpp Body::attachChildren). The ring gives each cell i of its target
//! region q_i = conductance w_i (T_ring - Tbar), Tbar = sum_j w_j T_j: through an ordinary conductance
//! conductance * w_i from the ring's node to cell i (in Network::conductances) plus the pair part
//! -conductance w_i (Tbar - S T_i), S = sum_j w_j, which the network keeps here in this rank-one form (O(m) per ring of
//! m region cells) and NetworkSystem evaluates as such. As conductances the pair part is -conductance w_i w_j between
//! every two region cells (m^2/2 terms): with the ring's conductances the rank-one form conductance (e_r - w)(e_r - w)^T.
struct JunctionRing {
  double conductance = 0.0;                          //!< G_r per copy of the parent times the child's count [W/K]
  std::vector<std::pair<Index32, double>> shares;    //!< (region cell, w_i), sum 1; all cells of one group
};

//! A junction: its rings' pair parts (JunctionRing), not in Network::conductances.
struct Junction {
  std::vector<JunctionRing> rings;
};

//! A face whose exchange with the surroundings also depends on a controller's state (SurfaceModel::
//! controlledFaceHeat): sweating's wetted fraction of the face's segment.
struct FaceControl {
  Index32 face = 0, controller = 0;
  bool operator==(const FaceControl& o) const {
    return Index(face) == Index(o.face) && Index(controller) == Index(o.controller);
  }
};

struct Network {
  std::vector<NetworkNode> nodes;
  TermRuns<Conductance> conductances;
  //! The budget channel of each conductance whose channel is not 0, by ascending conductance (addConductance):
  //! a conductance's flow is booked to its channel where it joins two groups.
  std::vector<ConductanceChannel> conductanceChannels;
  //! The junctions' pair parts in rank-one form (none for hand-built networks).
  std::vector<Junction> junctions;
  TermRuns<Advection> advections;
  std::vector<BoundaryExchange> exchanges;
  TermRuns<HeatSource> sources;
  std::vector<Q10Law> q10Laws;  //!< the sources' Q10 laws (HeatSource::law)
  std::vector<SurfaceFace> faces;
  //! The faces whose exchange depends on a controller's state, by ascending face (none without [control.sweating]).
  std::vector<FaceControl> faceControls;
  std::vector<std::string> groups;    //!< group names (segments)
  std::vector<double> groupWeights;   //!< multiplicity of each group in the budget (1 unless mirrored)
  std::vector<std::string> channels;  //!< budget channel names
  const SurfaceModel* surface = nullptr;
  std::vector<FlowPart> flowParts;
  std::vector<Modulator> modulators;
  std::vector<Controller> controllers;
  const ScheduleModel* schedules = nullptr;  //!< required when a modulator or controller uses a schedule
  //! Sets the conductances and face half-conductances that vary within an interval (none: all constant).
  const TimedCoefficients* timed = nullptr;
  //! Those values at time t (nothing when none vary).
  void coefficientsAt(double time) const {
    if (timed) timed->at(time);
  }

  //! Labels of nodes added with one (few: blood nodes, pools, hand-built test networks).
  std::vector<std::pair<Index, std::string>> namedNodes;
  //! Label of any other node (the model's grid cells), generated when asked; may be empty.
  std::function<std::string(Index)> labeler;

  //! Adds a conductance G [W/K] between a and b whose flow between two groups is booked to `channel`.
  void addConductance(Index a, Index b, double G, Index channel = 0) {
    if (channel != 0) conductanceChannels.push_back({conductances.size(), channel});
    conductances.push_back({a, b, G});
  }
  //! The budget channel of conductance k (0 unless addConductance gave another).
  Index conductanceChannel(Index k) const {
    auto it = std::lower_bound(conductanceChannels.begin(), conductanceChannels.end(), k,
                               [](const ConductanceChannel& c, Index key) { return Index(c.conductance) < key; });
    return it != conductanceChannels.end() && Index(it->conductance) == k ? Index(it->channel) : 0;
  }
  //! Calls f(p, part) for each modulated part of advection a in order: p its index in flowParts (none for the part
  //! the advection holds itself).
  template <class F>
  void forEachPart(const Advection& a, F&& f) const {
    if (hasInlinePart(a)) {
      f(none, FlowPart{Index(a.partsBegin), a.flowCapacity});
      return;
    }
    for (Index p = a.partsBegin; p < a.partsEnd; ++p) f(p, flowParts[p]);
  }
  //! Part p of advection a as forEachPart gives it (p == none: the part it holds itself).
  FlowPart part(const Advection& a, Index p) const {
    return p == none ? FlowPart{Index(a.partsBegin), a.flowCapacity} : flowParts[p];
  }
  //! The constant part of advection a's flow [W/K] (0 when it holds its one part itself).
  static double constantFlow(const Advection& a) { return hasInlinePart(a) ? 0.0 : a.flowCapacity; }
  //! Adds a stream from -> to of channel `channel` whose flow is the parts flowParts[begin, end) (at the end of
  //! flowParts), no constant: one part of a modulator is moved into the advection (Advection, kInlinePart).
  void addModulatedAdvection(Index from, Index to, Index channel, Index begin, Index end) {
    if (end == begin + 1 && end == flowParts.size() && Index(flowParts.back().modulator) != none) {
      const FlowPart p = flowParts.back();
      flowParts.pop_back();
      advections.push_back({from, to, p.coefficient, channel, Index(p.modulator), kInlinePart});
      return;
    }
    advections.push_back({from, to, 0.0, channel, begin, end});
  }

  //! Human-readable position of node i, e.g. "arm: axial 3, radial 7 (skin)" (for messages; not fast).
  std::string label(Index i) const {
    for (const auto& [node, text] : namedNodes)
      if (node == i) return text;
    if (labeler) return labeler(i);
    return "node " + std::to_string(i);
  }
  Index addNode(double capacity, Index group) {
    nodes.push_back({capacity, group});
    return nodes.size() - 1;
  }
  Index addNode(double capacity, Index group, std::string label) {
    namedNodes.emplace_back(nodes.size(), std::move(label));
    return addNode(capacity, group);
  }
  //! Networks of up to this many nodes keep their conductances, streams and sources plain (TermRuns), larger ones
  //! store them as runs (compact): the systems of sweeps (NetworkSystem's small systems, up to 5000 states) read
  //! plain terms, a large body (10^5 radial cells) keeps its 3.6 MB less.
  static constexpr Index kPlainNodes = 5000;
  //! Return the spare capacity of the term vectors (they grow by doubling while a model builds them), and pack the
  //! term lists of a network of more than kPlainNodes nodes into runs: called once the network is complete; at
  //! 10^5 nodes this is about 100 bytes per node of peak memory.
  void compact() {
    if (nodes.size() > kPlainNodes) {
      conductances.pack();
      advections.pack();
      sources.pack();
    }
    nodes.shrink_to_fit();
    conductances.shrink_to_fit();
    conductanceChannels.shrink_to_fit();
    advections.shrink_to_fit();
    exchanges.shrink_to_fit();
    sources.shrink_to_fit();
    faces.shrink_to_fit();
    faceControls.shrink_to_fit();
    flowParts.shrink_to_fit();
    namedNodes.shrink_to_fit();
    junctions.shrink_to_fit();
  }
  //! The index of the Q10 law (q10, reference temperature) in q10Laws, added if new (a NaN Q10 matches a NaN).
  Index q10Law(double q10, double referenceTemperature) {
    auto same = [](double a, double b) { return a == b || (a != a && b != b); };
    for (Index i = 0; i < q10Laws.size(); ++i)
      if (same(q10Laws[i].q10, q10) && same(q10Laws[i].referenceTemperature, referenceTemperature)) return i;
    q10Laws.push_back({q10, referenceTemperature});
    return q10Laws.size() - 1;
  }
  Index channel(const std::string& name) {
    for (Index i = 0; i < channels.size(); ++i)
      if (channels[i] == name) return i;
    channels.push_back(name);
    return channels.size() - 1;
  }
};

}  // namespace thermorph
