#pragma once
//! Discretises a case into the thermal network: control volumes per segment, conductances, sources, faces.
#include <algorithm>
#include <memory>
#include <stdexcept>
#include <optional>
#include <span>
#include <string>
#include <utility>
#include <vector>

#include "models/case.hpp"
#include "models/environment.hpp"
#include "models/physiology.hpp"
#include "network/network.hpp"

namespace thermorph {

//! Marks a blood node that does not exist because no blood flows there.
inline constexpr Index noNode = static_cast<Index>(-1);

//! The layer index of each radial ring of a segment (coat last). The layers are contiguous runs of rings in
//! ascending order, so the runs' ends are kept (a few per segment), not an int per ring (0.4 MB at 10^5 rings).
class RingLayers {
 public:
  //! Appends one ring of `layer` (not below the last ring's layer; layers skipped have no rings).
  void push_back(int layer) {
    const auto l = static_cast<std::size_t>(layer);
    if (layer < 0 || l + 1 < end_.size()) throw std::logic_error("ring layers must come in ascending order");
    while (end_.size() <= l) end_.push_back(rings_);
    end_[l] = ++rings_;
  }
  //! Layer of ring `ring` (< size()).
  int operator[](std::size_t ring) const {
    return static_cast<int>(std::upper_bound(end_.begin(), end_.end(), ring) - end_.begin());
  }
  std::size_t size() const { return rings_; }
  //! One entry per ring (for the results file).
  std::vector<int> expanded() const {
    std::vector<int> out(rings_);
    for (std::size_t r = 0; r < rings_; ++r) out[r] = (*this)[r];
    return out;
  }

 private:
  std::vector<std::size_t> end_;  //!< one past the last ring of each layer
  std::size_t rings_ = 0;
};

//! Where one segment's cells sit in the state vector and in space.
struct SegmentMesh {
  std::string name;
  Shape shape = Shape::Cylinder;
  Index offset = 0;                 //!< first node of the segment; node (iz, ir) = offset + iz * nr + ir
  int nz = 1;                       //!< axial cells
  int nr = 0;                       //!< radial cells, coat included
  std::vector<double> radius;       //!< [nr] cell-centre distance from the axis or mid-plane at mid-length [m]
  std::vector<double> axial;        //!< [nz] cell-centre distance from the proximal end [m]
  RingLayers layer;                 //!< [nr] layer index of each radial cell (coat last)
  std::vector<std::string> layerNames;  //!< tissue of each layer, then the coat material
  std::vector<Index> lateralFace;   //!< [nz] face index of the outer lateral face of each axial cell
  std::vector<double> volume;       //!< [nz * nr] cell volumes [m3]
  double area = 0.0;                //!< exposed surface area [m2]
  double tissueVolume = 0.0;        //!< [m3], coat excluded
  double tissueMass = 0.0;          //!< [kg], coat excluded
  double weight = 1.0;              //!< copies represented (count times the parent's weight)
  int innermostLayerCells = 0;      //!< radial cells of layer 0 (core temperature)
  int skinCell = 0;                 //!< radial index of the outermost tissue cell
  int skinFirst = 0;                //!< radial index of the first cell of the outermost tissue layer
  std::vector<Index> arterial;      //!< [nz] arterial blood nodes (empty: no flow; noNode where none flows)
  std::vector<Index> venous;        //!< [nz] deep-venous blood nodes (empty or noNode where none flows)
  std::vector<Index> superficial;   //!< [nz] superficial-venous blood nodes (empty or noNode where none flows)
  double bloodFlow = 0.0;           //!< arterial inflow of one copy, children included [m3/s]
  double perfusionFlow = 0.0;       //!< tissue perfusion of one copy [m3/s]
  double shuntFlow = 0.0;           //!< shunt flow of one copy [m3/s]
  Index node(int iz, int ir) const { return offset + static_cast<Index>(iz * nr + ir); }
  //! Skin temperature of axial cell iz: the volume mean of the outermost tissue layer's cells (under any coat).
  //! A layer mean converges at second order in the cell size; the outermost cell's own value would converge
  //! at first order to the surface value as that cell thins.
  template <class Values>
  double skinAt(int iz, const Values& y) const {
    double sum = 0.0, total = 0.0;
    for (int ir = skinFirst; ir <= skinCell; ++ir) {
      const double v = volume[static_cast<std::size_t>(iz * nr + ir)];
      sum += v * y[node(iz, ir)];
      total += v;
    }
    return sum / total;
  }
  //! The nodes and weights (summing to `share`) of skinAt(iz).
  template <class Out>
  void skinNodes(int iz, double share, Out& out) const {
    double total = 0.0;
    for (int ir = skinFirst; ir <= skinCell; ++ir) total += volume[static_cast<std::size_t>(iz * nr + ir)];
    for (int ir = skinFirst; ir <= skinCell; ++ir)
      out.emplace_back(node(iz, ir), share * volume[static_cast<std::size_t>(iz * nr + ir)] / total);
  }
};

//! The discretised body: network, meshes and the environment model it points to.
class Body {
 public:
  explicit Body(const Case& c);
  //! The same body from a case that is not needed afterwards (a sweep, fit or sensitivity run's): moved, not copied.
  explicit Body(Case&& c);
  Body(const Body&) = delete;
  Body& operator=(const Body&) = delete;

  const Case& spec() const { return case_; }
  const Network& network() const { return network_; }
  const std::vector<SegmentMesh>& segments() const { return meshes_; }
  //! The surroundings; the run loop sets its timeline interval, hence non-const.
  EnvironmentModel& environment() const { return *environment_; }

  //! Central blood pool node, when the arterial supply is not pinned and blood flows.
  std::optional<Index> poolNode() const { return pool_; }
  //! The wetted fraction of a segment at time t with the controller states `controls` (RunSummary::controls): a
  //! segment that sweats its own plus sweating's ([control.sweating]), any other its own (surface.wetted_fraction
  //! and its events) [1].
  double wettedFraction(Index segment, double time, std::span<const double> controls) const;
  //! The controller of [control.sweating] (index in Network::controllers), or none.
  Index sweatingControl() const { return sweatControl_; }
  //! Index of the segment whose innermost layer defines the core temperature.
  Index coreSegment() const { return core_; }
  //! Total arterial flow leaving the pool (cardiac output used) [m3/s] and the case's cardiac output [m3/s].
  double totalBloodFlow() const { return totalFlow_; }
  double cardiacOutput() const { return cardiacOutput_; }
  double bodyMass() const { return bodyMass_; }
  double bloodVolume() const { return bloodVolume_; }
  //! Move every time-dependent model to timeline interval k (after breakpoint k-1); the coats' conductances are set
  //! at the interval's start (a drying coat's then follow its wetness through Network::timed).
  void setInterval(std::size_t interval) const;
  const PhysiologyModel& physiology() const { return *physiology_; }
  //! Basal metabolic heat at the Q10 reference temperature, static activity included [W].
  double basalMetabolicRate() const { return basalRate_; }
  //! Messages for the user (e.g. perfusion above cardiac output).
  const std::vector<std::string>& warnings() const { return warnings_; }
  //! One tucked segment (surface.tucked_into): its host and the conductance of the whole tucked path at a tucked
  //! fraction of 1, dry coats, per copy of the guest [W/K] (the network's conductances are this times the
  //! interval's tucked fraction; `thermorph check` prints it).
  //! The host's exposed lateral area (and its coat's rings) lose the patch, spread over its lateral cells in
  //! proportion to their areas (not for a guest placed "in_coat": coveredArea 0): coveredArea is the largest tucked fraction of the run times the guest's lateral
  //! area (children's footprints off) times n_guest / n_host, per copy of the host [m2]; hostArea is the host's
  //! lateral area (children's footprints off) per copy [m2]; largestHostShare the largest share of the host's
  //! lateral surface covered in any interval, its own contact and tucking and all its guests together [1].
  struct Tucking {
    Index guest = 0, host = 0;
    double conductance = 0.0;
    double coveredArea = 0.0, hostArea = 0.0;
    double largestHostShare = 0.0;
  };
  const std::vector<Tucking>& tucking() const { return tucking_; }
  //! The warnings that apply to a steady solve (the t = 0 conditions): warnings() without those about the timeline
  //! after t = 0 (Case::timelineWarnings and the body's own, e.g. a contact fraction held in water and in air).
  std::vector<std::string> steadyWarnings() const;
  //! warnings() for a transient run, steadyWarnings() for a steady solve.
  std::vector<std::string> warnings(bool steady) const { return steady ? steadyWarnings() : warnings_; }

 private:
  // Building a segment (body.cpp): its radial cells' tissues, then per axial cell the nodes, radial conduction,
  // the lateral face and axial conduction, then the exposed end faces.
  struct CrossSection;
  struct SegmentBuild;
  static CrossSection crossSection(const SegmentSpec& s, double scale);
  //! Where a child's tissue depth meets its parent's at a junction: a monotone piecewise-linear map of the depth
  //! (fraction of the tissue radius, 0 at the axis or mid-plane, 1 at the tissue surface) through anchors.
  struct DepthMap {
    std::vector<std::pair<double, double>> anchors;  //!< (child, parent), from (1, 1) inwards
    double operator()(double x) const;
  };
  static DepthMap junctionDepthMap(const SegmentSpec& s, const SegmentSpec& parent, int attachLayer);
  void addSegment(const SegmentSpec& s, Index group, bool attached);
  SegmentBuild segmentTissues(const SegmentSpec& s, Index group, SegmentMesh& m);
  //! Which share of a coated segment's contact a coat conductance belongs to: none (end faces), the coat's rings
  //! away from the substrate (1 - f_c), or the contact column (f_c).
  enum class ContactPart : unsigned char { None, Rings, Column };
  void recordCoat(const SegmentBuild& b, bool face, Index index, double dry, double wet,
                  ContactPart part = ContactPart::None);
  void addCellNodes(const SegmentBuild& b, SegmentMesh& m, int iz, const CrossSection& c0, const CrossSection& c1);
  void addRadialConduction(const SegmentBuild& b, const SegmentMesh& m, int iz, const CrossSection& cm);
  void addLateralFace(const SegmentBuild& b, SegmentMesh& m, int iz, const CrossSection& c0, const CrossSection& c1,
                      const CrossSection& cm);
  void addAxialConduction(const SegmentBuild& b, const SegmentMesh& m, int iz, const CrossSection& c1);
  void addEndFaces(const SegmentBuild& b, SegmentMesh& m, bool attached);
  void attachChildren();
  void scaleMetabolism();
  // The circulation (body.cpp): perfusion modulators, per-cell flows, flows summed up the tree, blood nodes,
  // the links of each segment, and a mass-balance check.
  struct FlowExpr;
  struct Circulation;
  void buildCirculation();
  void addPerfusionModulators(Circulation& c);
  void planCellFlows(Circulation& c);
  void sumFlowsUpTheTree(Circulation& c);
  void setBloodTotals(const Circulation& c);
  void addBloodNodes(const Circulation& c);
  std::pair<Index, Index> addFlowParts(const Circulation& c, const FlowExpr& flow, double factor);
  void linkBlood(const Circulation& c, Index from, Index to, const FlowExpr& flow, double factor = 1.0);
  void linkSegmentBlood(const Circulation& c, Index g);
  //! One axial cell of the countercurrent exchanger (trapezoidal in the exchange; see body.cpp).
  void linkExchanger(Index artery, Index vein, Index arteryIn, Index veinIn, double g);
  void checkBloodMassBalance() const;
  void buildControllers();
  void addMetabolicModulation(Index respiratorySegment);
  Index addModulator(Index schedule, Index control, std::string name);
  std::vector<std::pair<Index, double>> signalNodes(ControlSignal signal) const;
  std::vector<std::pair<Index, double>> localSkinNodes(Index segment) const;
  void buildLocalControllers();
  //! Warn about a segment whose static contact holds while its fluid changes (no event changes the contact).
  void warnStaticContact();

  //! A coat conductance (or face half-conductance) dry and wet (wet in water; in air partly wet by the segment's
  //! wetted fraction at the time, Body::setCoat), built for the
  //! segment's largest contact fraction f_max and scaled to the interval's f_c: rings (1 - f_c) / (1 - f_max), the
  //! column f_c / f_max.
  struct CoatSwitch {
    bool face;
    Index index;
    Index segment;
    double dry, wet;  //!< [W/K]
    ContactPart part;
  };

  //! Tucking (addTucking): one lateral cell of a tucked segment or of a host, as addLateralFace finds it: its
  //! outermost tissue cell, the face's exposed area (children's footprints off) and full area [m2], and the
  //! resistance per unit area from that cell's centre through its half cell and the coat to the outer surface, dry
  //! and wet [K m2/W] (the ring's resistance times its full outer area: a radial sector of the ring).
  struct TuckSide {
    Index node = 0;
    double area = 0.0, fullArea = 0.0, rDry = 0.0, rWet = 0.0;
  };
  //! One conductance of a tucked segment's cell i to a host cell j: f_t(t) a_i w_j / (r_i + r_j) per copy of the
  //! guest (times w_g / max(w_g, w_h) as a network conductance between groups of different weight), w_j the host
  //! cell's share of the host's exposed lateral area, r dry or wet with each segment's medium.
  struct TuckLink {
    Index conductance = 0, guest = 0, host = 0;
    double patch = 0.0;  //!< a_i w_j times the weight factor [m2]
    double guestDry = 0.0, guestWet = 0.0, hostDry = 0.0, hostWet = 0.0;  //!< [K m2/W]
  };
  void addTucking();
  //! The conductances of coat switch (tuck link) `which` at time t in the current interval, every one when `which`
  //! is their count: wet in water, in air partly wet by the segment's wetted fraction (body.cpp partlyWet).
  void setCoat(Index which, double time) const;
  void setTuck(Index which, double time) const;
  //! The coats of the current interval that follow a wetness that events change (the network's TimedCoefficients).
  void coatsAt(double time) const;
  struct CoatWetness final : TimedCoefficients {
    explicit CoatWetness(const Body* b) : body(b) {}
    const Body* body;
    void at(double time) const override { body->coatsAt(time); }
  };

  Case case_;
  void build();  //!< the constructors' work, on case_
  mutable Network network_;  //!< coat conductances follow immersion and contact in setInterval()
  std::vector<CoatSwitch> coatSwitches_;
  std::vector<std::vector<TuckSide>> tuckSides_;  //!< per segment: [nz] when it is tucked or a host, else empty
  std::vector<char> tuckInvolved_;                //!< per segment: tucked (ever) or the host of one
  std::vector<char> tuckHost_;                    //!< per segment: the host of a segment tucked at some time
  std::vector<TuckLink> tuckLinks_;
  //! Per segment: its coat's conductivity dry and wet [W/(m K)] (0, 0 without a coat).
  std::vector<std::pair<double, double>> coatConductivity_;
  //! The coat switches and tuck links that follow the wetness in the current interval (setInterval).
  mutable std::vector<Index> liveCoats_, liveTucks_;
  std::vector<double> intervalStart_;  //!< start time of each timeline interval [s] (0, then the breakpoints)
  CoatWetness coatWetness_{this};
  std::vector<Tucking> tucking_;
  Index tuckingChannel_ = none;
  //! Per child: the parent's axial cells its blood joins, with their shares (sum 1); see attachChildren.
  std::vector<std::vector<std::pair<int, double>>> attachShares_;
  std::vector<SegmentMesh> meshes_;
  std::unique_ptr<EnvironmentModel> environment_;
  std::unique_ptr<PhysiologyModel> physiology_;
  Index skinControl_ = none, shuntControl_ = none, shiverControl_ = none, pantControl_ = none, sweatControl_ = none;
  //! Per segment: the local controller of its skin perfusion and shunts, and its CIVD state (none: the body-wide
  //! controller, or none at all); see buildLocalControllers.
  std::vector<Index> localSkinControl_, localShuntControl_, civdControl_;
  //! (controller, the controller whose state it follows): lag stages of a CIVD chain.
  std::vector<std::pair<Index, Index>> controlChain_;
  std::vector<Index> order_;               //!< segments root first
  std::vector<std::vector<double>> cellPerfusion_;  // per segment [nz * nr] perfusion flow [m3/s] (while building)
  std::vector<std::vector<double>> coveredArea_;    //!< per segment [nz] lateral area covered by children [m2]
  Index metabolismChannel_ = 0, bloodChannel_ = 0, conductionChannel_ = 0;
  std::optional<Index> pool_;
  Index core_ = 0;
  double totalFlow_ = 0.0, cardiacOutput_ = 0.0, bodyMass_ = 0.0, bloodVolume_ = 0.0, basalRate_ = 0.0;
  std::vector<std::string> warnings_;
  std::vector<std::string> timelineWarnings_;  //!< the entries of warnings_ about the timeline after t = 0
  std::vector<std::unique_ptr<TissueProperties>> wetCoats_;  //!< coat properties of immersed segments
};

}  // namespace thermorph
