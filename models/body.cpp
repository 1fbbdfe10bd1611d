#include "models/body.hpp"

#include <algorithm>
#include <cmath>
#include <array>
#include <map>
#include <numbers>

#include <fmt/format.h>

namespace thermorph {

using std::numbers::pi;

namespace {

//! Radial cell boundaries of one cross-section: tissue layers scaled by `scale`, then the coat.
struct CrossSection {
  std::vector<double> bounds;  //!< nr + 1 boundaries from the axis or mid-plane outward [m]
};

CrossSection crossSection(const SegmentSpec& s, double scale) {
  CrossSection cs;
  cs.bounds.push_back(0.0);
  double r = 0.0;
  for (const LayerSpec& l : s.layers) {
    double dr = l.thickness * scale / l.cells;
    for (int i = 0; i < l.cells; ++i) cs.bounds.push_back(r + (i + 1) * dr);
    r += l.thickness * scale;
    cs.bounds.back() = r;
  }
  if (s.coat) {
    double dr = s.coat->thickness / s.coat->cells;
    for (int i = 0; i < s.coat->cells; ++i) cs.bounds.push_back(r + (i + 1) * dr);
    r += s.coat->thickness;
    cs.bounds.back() = r;
  }
  return cs;
}

//! Area of the radial face at distance r from the axis or mid-plane over axial length dz [m2]:
//! cylinder 2 pi r dz, sphere 4 pi r^2, plate (both halves) 2 w dz.
double radialFaceArea(Shape shape, double r, double dz, double width) {
  switch (shape) {
    case Shape::Sphere: return 4.0 * pi * r * r;
    case Shape::Plate: return 2.0 * width * dz;
    case Shape::Cylinder:
    case Shape::Cone: return 2.0 * pi * r * dz;
  }
  return 0.0;
}

//! Conduction resistance between a node at ri, the face at rf and a node at rj [K/W]: the flux through the face
//! is A_f k dT/dr with the gradient taken linearly across each half cell (harmonic mean of the conductivities).
//! Second order for smooth profiles, also next to the axis, where exact shell resistances between cell
//! centres under-conduct (25 % at a sphere's first face).
double radialResistance(Shape shape, double ri, double rf, double rj, double ki, double kj, double dz, double width) {
  return ((rf - ri) / ki + (rj - rf) / kj) / radialFaceArea(shape, rf, dz, width);
}

//! Axial cross-section area of the radial cell between a and b [m2] (plates: both halves).
double sectionArea(Shape shape, double a, double b, double width) {
  return shape == Shape::Plate ? 2.0 * width * (b - a) : pi * (b * b - a * a);
}

}  // namespace

Body::Body(const Case& c) : case_(c) {
  metabolismChannel_ = network_.channel("metabolism");
  bloodChannel_ = network_.channel("blood");
  conductionChannel_ = network_.channel("conduction");
  environment_ = std::make_unique<EnvironmentModel>(case_, network_);
  network_.surface = environment_.get();

  // Root first, then children breadth first; weights multiply down the tree.
  std::map<std::string, Index> index;
  for (Index g = 0; g < case_.segments.size(); ++g) index[case_.segments[g].name] = g;
  std::vector<double> weight(case_.segments.size(), 1.0);
  for (Index g = 0; g < case_.segments.size(); ++g)
    if (case_.segments[g].parent.empty()) order_.push_back(g);
  for (std::size_t k = 0; k < order_.size(); ++k)
    for (Index g = 0; g < case_.segments.size(); ++g)
      if (case_.segments[g].parent == case_.segments[order_[k]].name) {
        order_.push_back(g);
        weight[g] = case_.segments[g].count * weight[order_[k]];
      }
  core_ = case_.body.coreSegment.empty() ? order_.front() : index.at(case_.body.coreSegment);

  // Area each parent's lateral face loses where children attach (their proximal cross-sections).
  coveredArea_.resize(case_.segments.size());
  for (Index g = 0; g < case_.segments.size(); ++g) {
    const SegmentSpec& s = case_.segments[g];
    if (s.parent.empty()) continue;
    const Index p = index.at(s.parent);
    const SegmentSpec& ps = case_.segments[p];
    int nz = ps.shape == Shape::Sphere ? 1 : ps.axialCells;
    coveredArea_[p].resize(static_cast<std::size_t>(nz), 0.0);
    double outer = s.tissueRadius() + (s.coat ? s.coat->thickness : 0.0);
    double section = s.shape == Shape::Plate ? 2.0 * s.width * outer : pi * outer * outer;
    coveredArea_[p][static_cast<std::size_t>(std::clamp(static_cast<int>(s.attachPosition * nz), 0, nz - 1))] += s.count * section;
  }
  cellPerfusion_.resize(case_.segments.size());
  for (Index g = 0; g < case_.segments.size(); ++g) {
    network_.groups.push_back(case_.segments[g].name);
    network_.groupWeights.push_back(weight[g]);
    addSegment(case_.segments[g], g, !case_.segments[g].parent.empty());
    meshes_.back().weight = weight[g];
  }
  for (Index g = 0; g < meshes_.size(); ++g) bodyMass_ += meshes_[g].weight * meshes_[g].tissueMass;
  if (case_.body.mass) bodyMass_ = *case_.body.mass;
  attachChildren();
  scaleMetabolism();
  // Respiration when a respiratory segment is named; it pauses while that segment is in water (checked at each
  // time by the physiology model).
  const Index respiratory = case_.body.respiratorySegment.empty() ? none : index.at(case_.body.respiratorySegment);
  physiology_ = std::make_unique<PhysiologyModel>(case_, *environment_, basalRate_, respiratory);
  basalRate_ *= case_.body.activity;  // reported with the static activity
  network_.schedules = physiology_.get();
  buildControllers();
  addMetabolicModulation(respiratory);
  buildCirculation();
}

void Body::setInterval(std::size_t interval) const {
  environment_->setInterval(interval);
  physiology_->setInterval(interval);
  // Coats conduct wet while their segment is in water (the medium may change by event).
  for (const CoatSwitch& c : coatSwitches_) {
    double value = environment_->immersed(c.segment, 0.0) ? c.wet : c.dry;
    if (c.face) network_.faces[c.index].halfConductance = value;
    else network_.conductances[c.index].conductance = value;
  }
}

Index Body::addModulator(Index schedule, Index control, std::string name) {
  network_.modulators.push_back({schedule, control, std::move(name)});
  return network_.modulators.size() - 1;
}

std::vector<std::pair<Index, double>> Body::signalNodes(ControlSignal signal) const {
  std::vector<std::pair<Index, double>> nodes;
  double total = 0.0;
  if (signal == ControlSignal::Core) {
    const SegmentMesh& m = meshes_[core_];
    for (int iz = 0; iz < m.nz; ++iz)
      for (int ir = 0; ir < m.innermostLayerCells; ++ir) {
        double v = m.volume[static_cast<std::size_t>(iz * m.nr + ir)];
        nodes.emplace_back(m.node(iz, ir), v);
        total += v;
      }
  } else {
    for (const SegmentMesh& m : meshes_)
      for (int iz = 0; iz < m.nz; ++iz) {
        double a = m.weight * network_.faces[m.lateralFace[static_cast<std::size_t>(iz)]].area;
        nodes.emplace_back(m.node(iz, m.skinCell), a);
        total += a;
      }
  }
  for (auto& [node, w] : nodes) w /= total;
  return nodes;
}

void Body::buildControllers() {
  // Proportional control about a set point with limits and a first-order lag: the common form in
  // thermoregulation models. u* = clamp(bias + gain (T - set point), lower, upper); see network/network.hpp.
  using K = PhysiologyModel::Kind;
  auto add = [&](const ControllerSpec& spec, std::size_t k, const char* name, double bias, double gain, double lower,
                 double upper, double offValue) {
    Controller c;
    c.name = name;
    c.signal = signalNodes(spec.signal);
    c.setpoint = spec.setPoint;
    c.setpointSchedule = physiology_->add({K::ControlSetPoint, 0, false, false, k});
    c.enableSchedule = physiology_->add({K::ControlEnabled, 0, false, false, k});
    c.gain = gain;
    c.bias = bias;
    c.lower = lower;
    c.upper = upper;
    c.offValue = offValue;
    c.timeConstant = spec.timeConstant;
    double raw = bias + gain * (case_.run.initialTemperature - spec.setPoint);
    c.initial = spec.enabled ? std::clamp(raw, lower, upper) : offValue;
    network_.controllers.push_back(c);
    return network_.controllers.size() - 1;
  };
  const ControlSpec& cs = case_.control;
  if (cs.vasomotor.present) {
    skinControl_ = add(cs.vasomotor, 0, "vasomotor_skin_perfusion", 1.0, cs.vasomotor.gain, cs.vasomotor.lower,
                       cs.vasomotor.upper, 1.0);
    shuntControl_ = add(cs.vasomotor, 0, "vasomotor_shunts", 0.0, cs.vasomotor.shuntGain, 0.0, 1.0, 1.0);
  }
  if (cs.shivering.present)
    shiverControl_ = add(cs.shivering, 1, "shivering", 0.0, -cs.shivering.gain, 0.0, 1.0, 0.0);
  if (cs.panting.present)
    pantControl_ = add(cs.panting, 2, "panting", 1.0, cs.panting.gain, 1.0, cs.panting.upper, 1.0);
}

void Body::addMetabolicModulation(Index respiratorySegment) {
  using K = PhysiologyModel::Kind;
  // Tissue metabolism follows activity x hypometabolism from the case and its events.
  Index metabolism = addModulator(physiology_->add({K::Metabolism}), none, "metabolism");
  for (HeatSource& src : network_.sources) src.modulator = metabolism;
  // Shivering: extra heat in muscle, distributed by muscle volume (all copies counted).
  if (shiverControl_ != none) {
    Index shivering = addModulator(none, shiverControl_, "shivering");
    Index channel = network_.channel("shivering");
    double maxPower = case_.control.shivering.maxPower > 0.0 ? case_.control.shivering.maxPower
                                                             : 3.0 * basalRate_ / case_.body.activity;
    double muscleVolume = 0.0;
    std::vector<std::pair<Index, double>> cells;
    for (const SegmentMesh& m : meshes_)
      for (int iz = 0; iz < m.nz; ++iz)
        for (int ir = 0; ir < m.nr; ++ir)
          if (case_.tissues.at(m.layerNames[static_cast<std::size_t>(m.layer[static_cast<std::size_t>(ir)])]).role ==
              TissueRole::Muscle) {
            double v = m.volume[static_cast<std::size_t>(iz * m.nr + ir)];
            cells.emplace_back(m.node(iz, ir), v);
            muscleVolume += m.weight * v;
          }
    if (cells.empty())
      throw CaseError(fmt::format("{}: control.shivering: no segment has a layer with role muscle to shiver", case_.sourceFile));
    for (auto [node, v] : cells)
      network_.sources.push_back({node, maxPower * v / muscleVolume, 1.0, case_.body.q10Reference, channel, shivering});
  }
  // Respiration: the loss taken from the innermost layer of the respiratory segment, by volume.
  if (respiratorySegment != none) {
    Index respiration = addModulator(physiology_->add({K::Respiration}), pantControl_, "respiration");
    Index channel = network_.channel("respiration");
    const SegmentMesh& m = meshes_[respiratorySegment];
    double volume = 0.0;
    for (int iz = 0; iz < m.nz; ++iz)
      for (int ir = 0; ir < m.innermostLayerCells; ++ir) volume += m.weight * m.volume[static_cast<std::size_t>(iz * m.nr + ir)];
    for (int iz = 0; iz < m.nz; ++iz)
      for (int ir = 0; ir < m.innermostLayerCells; ++ir)
        // Ventilation follows metabolism: the loss carries the Q10 of the layer's tissue, so it falls with the
        // metabolic rate of a cooling body instead of draining it at the basal rate.
        network_.sources.push_back({m.node(iz, ir), -m.volume[static_cast<std::size_t>(iz * m.nr + ir)] / volume,
                                    case_.tissues.at(case_.segments[respiratorySegment].layers.front().tissue).q10,
                                    case_.body.q10Reference, channel, respiration});
  }
}

void Body::scaleMetabolism() {
  // Whole-body basal rate: the sum of tissue rates, Kleiber's 70 M^0.75 kcal/day (Kleiber 1932, Hilgardia 6:315;
  // 70 kcal/day = 3.3898 W), or a given power; the last two scale every tissue rate by one factor.
  double tissueSum = 0.0;
  for (const HeatSource& src : network_.sources)
    tissueSum += network_.groupWeights[network_.nodes[src.node].group] * src.power;
  double target = tissueSum;
  if (case_.body.basal == BasalRate::Kleiber) target = 70.0 * 4184.0 / 86400.0 * std::pow(bodyMass_, 0.75);
  if (case_.body.basal == BasalRate::Power) target = case_.body.basalPower;
  if (case_.body.basal != BasalRate::Tissues && !(tissueSum > 0.0))
    throw CaseError(fmt::format("{}: body.basal_metabolic_rate: no tissue produces metabolic heat, so there is "
                                "nothing to scale to the whole-body rate",
                                case_.sourceFile));
  // Activity (and later events) multiply through the metabolism modulator.
  double factor = tissueSum > 0.0 ? target / tissueSum : 1.0;
  for (HeatSource& src : network_.sources) src.power *= factor;
  basalRate_ = target;
}

void Body::attachChildren() {
  // A child's proximal end conducts to the parent's attachment tissue through the child's half-cell axial
  // resistance; the parent's lateral face there loses the area the children cover.
  for (Index g = 0; g < case_.segments.size(); ++g) {
    const SegmentSpec& s = case_.segments[g];
    if (s.parent.empty()) continue;
    Index p = 0;
    while (case_.segments[p].name != s.parent) ++p;
    const SegmentSpec& ps = case_.segments[p];
    const SegmentMesh& pm = meshes_[p];
    const SegmentMesh& cm = meshes_[g];
    int k = std::clamp(static_cast<int>(s.attachPosition * pm.nz), 0, pm.nz - 1);
    // Parent radial cell: middle cell of the attachment tissue's layer, else of the innermost layer.
    int layer = 0;
    for (std::size_t l = 0; l < ps.layers.size(); ++l)
      if (ps.layers[l].tissue == s.attachTissue) layer = static_cast<int>(l);
    int first = 0;
    for (int l = 0; l < layer; ++l) first += ps.layers[static_cast<std::size_t>(l)].cells;
    int pr = first + ps.layers[static_cast<std::size_t>(layer)].cells / 2;
    double dz = s.length / cm.nz;
    // The child's proximal cross-section (a cone's layers are at their stated thickness there).
    const std::vector<double> bounds = crossSection(s, 1.0).bounds;
    for (int ir = 0; ir < cm.nr; ++ir) {
      auto r = static_cast<std::size_t>(ir);
      double area = sectionArea(s.shape, bounds[r], bounds[r + 1], s.width);
      const TissueProperties& t = case_.tissues.at(cm.layerNames[static_cast<std::size_t>(cm.layer[r])]);
      network_.conductances.push_back({cm.node(0, ir), pm.node(k, pr), t.conductivity * area / (0.5 * dz), conductionChannel_});
    }
  }
}

namespace {

//! A blood flow as a sum of modulated parts, sum_k c_k m_k(t, u) [m3/s]; every flow in the circulation is one,
//! so mass balance holds at every junction for every modulator separately, at all times.
struct FlowExpr {
  std::map<Index, double> parts;  //!< modulator -> coefficient [m3/s]
  void add(Index modulator, double coefficient) {
    if (coefficient != 0.0) parts[modulator] += coefficient;
  }
  void add(const FlowExpr& other, double factor = 1.0) {
    for (auto [m, c] : other.parts) add(m, factor * c);
  }
  bool empty() const {
    for (auto [m, c] : parts)
      if (c != 0.0) return false;
    return true;
  }
  double value(const std::vector<double>& modulators) const {
    double v = 0.0;
    for (auto [m, c] : parts) v += c * modulators[m];
    return v;
  }
};

}  // namespace

void Body::buildCirculation() {
  using K = PhysiologyModel::Kind;
  const CirculationSpec& circ = case_.circulation;
  const double rc = circ.bloodDensity * circ.bloodSpecificHeat;  // [J/(m3 K)]
  const std::size_t n = case_.segments.size();

  // Modulators: per segment and layer the perfusion factor (total, superficial share), per segment
  // the shunt opening; skin layers and shunts follow the vasomotor controllers when there are any.
  std::vector<std::vector<std::array<Index, 3>>> perfusionModulators(n);
  std::vector<Index> shuntModulator(n, none);
  for (Index g = 0; g < n; ++g) {
    const SegmentSpec& s = case_.segments[g];
    // A superficial return exists when the case or an event gives this segment one.
    bool superficialPossible = s.vasomotor.superficialReturn > 0.0;
    for (const EventSpec& e : case_.events)
      for (const VasomotorTarget& v : e.vasomotor)
        if ((v.segment == "all" || v.segment == s.name) && v.superficialReturn && *v.superficialReturn > 0.0)
          superficialPossible = true;
    for (const LayerSpec& l : s.layers) {
      const TissueRole role = case_.tissues.at(l.tissue).role;
      bool skin = role == TissueRole::Skin;
      // Bradycardia scales the listed tissues (default: all but role brain); `brain` below means "spared".
      const auto& listed = case_.circulation.bradycardiaTissues;
      bool brain = listed.empty() ? role == TissueRole::Brain
                                  : std::find(listed.begin(), listed.end(), l.tissue) == listed.end();
      Index control = skin ? skinControl_ : none;
      std::array<Index, 3> mods{none, none, none};
      mods[0] = addModulator(physiology_->add({K::Perfusion, g, skin, brain, 0}), control,
                             fmt::format("{} {} perfusion", s.name, l.tissue));
      if (superficialPossible)
        mods[2] = addModulator(physiology_->add({K::PerfusionSuperficial, g, skin, brain, 0}), control,
                               fmt::format("{} {} superficial return", s.name, l.tissue));
      perfusionModulators[g].push_back(mods);
    }
    if (s.vessels.shuntFlowMax > 0.0)
      shuntModulator[g] = addModulator(physiology_->add({K::Shunt, g}), shuntControl_, s.name + " shunts");
  }
  // Modulator values at t = 0 with the controllers at their initial states (for the bookkeeping and `check`).
  std::vector<double> m0(network_.modulators.size(), 1.0);
  for (Index k = 0; k < m0.size(); ++k) {
    const Modulator& m = network_.modulators[k];
    m0[k] = (m.schedule == none ? 1.0 : physiology_->value(m.schedule, 0.0)) *
            (m.control == none ? 1.0 : network_.controllers[m.control].initial);
  }

  // Per segment and axial cell (per copy): perfusion of each tissue cell split into deep and superficial
  // return, shunt flow, and what the children draw and return.
  std::vector<std::vector<FlowExpr>> cellTotal(n), cellDeep(n), cellSuperficial(n);  // [nz * nr]
  std::vector<std::vector<FlowExpr>> shunt(n), childDraw(n), childDeep(n), childSuperficial(n);  // [nz]
  std::vector<FlowExpr> draw(n), deep(n), superficialFlow(n);
  std::vector<Index> parentOf(n, n);
  std::vector<int> attachCell(n, 0);
  for (Index g = 0; g < n; ++g) {
    const SegmentSpec& s = case_.segments[g];
    const SegmentMesh& m = meshes_[g];
    const auto nz = static_cast<std::size_t>(m.nz);
    cellTotal[g].resize(nz * static_cast<std::size_t>(m.nr));
    cellDeep[g].resize(cellTotal[g].size());
    cellSuperficial[g].resize(cellTotal[g].size());
    shunt[g].resize(nz);
    childDraw[g].resize(nz);
    childDeep[g].resize(nz);
    childSuperficial[g].resize(nz);
    for (int iz = 0; iz < m.nz; ++iz)
      for (int ir = 0; ir < m.nr; ++ir) {
        auto c = static_cast<std::size_t>(iz * m.nr + ir);
        double q = cellPerfusion_[g][c];
        if (!(q > 0.0)) continue;
        const auto& mods = perfusionModulators[g][static_cast<std::size_t>(m.layer[static_cast<std::size_t>(ir)])];
        cellTotal[g][c].add(mods[0], q);
        cellDeep[g][c].add(mods[0], q);  // deep = total - superficial, so mass balances per modulator
        if (mods[2] != none) {
          cellDeep[g][c].add(mods[2], -q);
          cellSuperficial[g][c].add(mods[2], q);
        }
      }
    // Shunts open through the skin of the distal half of the axial cells.
    int firstDistal = m.nz / 2;
    if (shuntModulator[g] != none)
      for (int iz = firstDistal; iz < m.nz; ++iz)
        shunt[g][static_cast<std::size_t>(iz)].add(shuntModulator[g], s.vessels.shuntFlowMax / (m.nz - firstDistal));
    if (!s.parent.empty()) {
      Index p = 0;
      while (case_.segments[p].name != s.parent) ++p;
      parentOf[g] = p;
      attachCell[g] = std::clamp(static_cast<int>(s.attachPosition * meshes_[p].nz), 0, meshes_[p].nz - 1);
    }
  }
  // Flows bottom-up (reverse of root-first order).
  std::vector<std::vector<FlowExpr>> arterialIn(n), deepOut(n), superficialOut(n);  // [nz + 1]
  for (auto it = order_.rbegin(); it != order_.rend(); ++it) {
    Index g = *it;
    const SegmentSpec& s = case_.segments[g];
    SegmentMesh& m = meshes_[g];
    const auto nz = static_cast<std::size_t>(m.nz);
    arterialIn[g].assign(nz + 1, FlowExpr{});
    deepOut[g].assign(nz + 1, FlowExpr{});
    superficialOut[g].assign(nz + 1, FlowExpr{});
    FlowExpr perfusion, shunted;
    for (std::size_t z = nz; z-- > 0;) {
      FlowExpr a = arterialIn[g][z + 1], d = deepOut[g][z + 1], sf = superficialOut[g][z + 1];
      for (int ir = 0; ir < m.nr; ++ir) {
        auto c = z * static_cast<std::size_t>(m.nr) + static_cast<std::size_t>(ir);
        a.add(cellTotal[g][c]);
        d.add(cellDeep[g][c]);
        sf.add(cellSuperficial[g][c]);
        perfusion.add(cellTotal[g][c]);
      }
      a.add(shunt[g][z]);
      sf.add(shunt[g][z]);
      shunted.add(shunt[g][z]);
      a.add(childDraw[g][z]);
      d.add(childDeep[g][z]);
      sf.add(childSuperficial[g][z]);
      arterialIn[g][z] = a;
      deepOut[g][z] = d;
      superficialOut[g][z] = sf;
    }
    draw[g] = arterialIn[g][0];
    deep[g] = deepOut[g][0];
    superficialFlow[g] = superficialOut[g][0];
    m.bloodFlow = draw[g].value(m0);
    m.perfusionFlow = perfusion.value(m0);
    m.shuntFlow = shunted.value(m0);
    if (parentOf[g] < n) {
      auto k = static_cast<std::size_t>(attachCell[g]);
      childDraw[parentOf[g]][k].add(draw[g], s.count);
      childDeep[parentOf[g]][k].add(deep[g], s.count);
      childSuperficial[parentOf[g]][k].add(superficialFlow[g], s.count);
    }
  }
  const Index root = order_.front();
  totalFlow_ = draw[root].value(m0);
  bloodVolume_ = case_.body.bloodVolume.value_or(0.07 * bodyMass_ / circ.bloodDensity);  // ~7 % of mass (Stahl 1967, from memory)
  // Default cardiac output 187 M^0.81 mL/min (Stahl 1967, J. Appl. Physiol. 22:453; from memory).
  cardiacOutput_ = case_.body.cardiacOutput.value_or(187e-6 / 60.0 * std::pow(bodyMass_, 0.81));
  if (totalFlow_ > cardiacOutput_)
    warnings_.push_back(fmt::format("total blood flow {:.4g} mL/min exceeds the cardiac output {:.4g} mL/min",
                                    totalFlow_ * 6e7, cardiacOutput_ * 6e7));
  if (draw[root].empty()) return;  // no circulation: tissues exchange heat by conduction only

  // Blood nodes where some flow can pass; capacities from the large-vessel blood of the cell's tissue.
  double vesselVolume = 0.0;
  for (Index g : order_) {
    SegmentMesh& m = meshes_[g];
    const SegmentSpec& s = case_.segments[g];
    if (draw[g].empty()) continue;
    for (int iz = 0; iz < m.nz; ++iz) {
      auto z = static_cast<std::size_t>(iz);
      double tissue = 0.0;
      for (int ir = 0; ir <= m.skinCell; ++ir) tissue += m.volume[static_cast<std::size_t>(iz * m.nr + ir)];
      double vb = s.vessels.bloodFraction * tissue;
      auto add = [&](const FlowExpr& flow, double share, const char* what) {
        if (flow.empty()) return noNode;
        vesselVolume += m.weight * vb * share;
        return network_.addNode(rc * vb * share, g, fmt::format("{}: axial {}, {} blood", s.name, iz, what));
      };
      m.arterial.push_back(add(arterialIn[g][z], 1.0 / 3.0, "arterial"));
      m.venous.push_back(add(deepOut[g][z], 1.0 / 2.0, "deep venous"));
      m.superficial.push_back(add(superficialOut[g][z], 1.0 / 6.0, "superficial venous"));
    }
  }
  if (!circ.fixedArterialTemperature) {
    double poolVolume = bloodVolume_ - vesselVolume;
    if (!(poolVolume > 0.0))
      throw CaseError(fmt::format("{}: body.blood_volume: {:.4g} mL is less than the {:.4g} mL held in segment vessels "
                                  "(vessels.blood_fraction); raise the blood volume or lower the fractions",
                                  case_.sourceFile, bloodVolume_ * 1e6, vesselVolume * 1e6));
    network_.groups.push_back("blood_pool");
    network_.groupWeights.push_back(1.0);
    pool_ = network_.addNode(rc * poolVolume, network_.groups.size() - 1, "central blood pool");
  }

  auto parts = [&](const FlowExpr& flow, double factor) {
    std::pair<Index, Index> range{network_.flowParts.size(), 0};
    for (auto [mod, c] : flow.parts)
      if (c != 0.0) network_.flowParts.push_back({mod, factor * rc * c});
    range.second = network_.flowParts.size();
    return range;
  };
  auto link = [&](Index from, Index to, const FlowExpr& flow, double factor = 1.0) {
    if (flow.empty()) return;
    if (from == noNode || to == noNode) throw std::logic_error("blood link to a node that carries no flow");
    auto [begin, end] = parts(flow, factor);
    network_.advections.push_back({from, to, 0.0, bloodChannel_, begin, end});
  };
  for (Index g : order_) {
    const SegmentMesh& m = meshes_[g];
    const SegmentSpec& s = case_.segments[g];
    if (draw[g].empty()) continue;
    // Arterial inflow at the proximal cell: from the parent's arterial stream, the pool, or pinned blood.
    if (parentOf[g] < n) {
      const SegmentMesh& pm = meshes_[parentOf[g]];
      auto k = static_cast<std::size_t>(attachCell[g]);
      link(pm.arterial[k], m.arterial[0], draw[g]);
      link(m.venous[0], pm.venous[k], deep[g], s.count);
      link(m.superficial[0], pm.superficial[k], superficialFlow[g], s.count);
    } else if (pool_) {
      link(*pool_, m.arterial[0], draw[g]);
      link(m.venous[0], *pool_, deep[g]);
      link(m.superficial[0], *pool_, superficialFlow[g]);
    } else {
      auto [begin, end] = parts(draw[g], 1.0);
      network_.exchanges.push_back({m.arterial[0], 0.0, *circ.fixedArterialTemperature, bloodChannel_, begin, end});
    }
    for (int iz = 0; iz < m.nz; ++iz) {
      auto z = static_cast<std::size_t>(iz);
      if (iz > 0) link(m.arterial[z - 1], m.arterial[z], arterialIn[g][z]);
      // Pennes term at the local arterial temperature; venous blood leaves at tissue temperature.
      for (int ir = 0; ir < m.nr; ++ir) {
        auto c = static_cast<std::size_t>(iz * m.nr + ir);
        link(m.arterial[z], m.node(iz, ir), cellTotal[g][c]);
        link(m.node(iz, ir), m.venous[z], cellDeep[g][c]);
        link(m.node(iz, ir), m.superficial[z], cellSuperficial[g][c]);
      }
      // Arteriovenous shunt through the skin cell, back by superficial veins.
      link(m.arterial[z], m.node(iz, m.skinCell), shunt[g][z]);
      link(m.node(iz, m.skinCell), m.superficial[z], shunt[g][z]);
      // Veins flow proximally: cell iz receives from cell iz + 1 what returns beyond it.
      if (iz + 1 < m.nz) {
        link(m.venous[z + 1], m.venous[z], deepOut[g][z + 1]);
        link(m.superficial[z + 1], m.superficial[z], superficialOut[g][z + 1]);
      }
      if (m.arterial[z] != noNode && m.venous[z] != noNode && s.vessels.countercurrentConductance > 0.0)
        network_.conductances.push_back({m.arterial[z], m.venous[z], s.vessels.countercurrentConductance / m.nz, 0});
      if (m.superficial[z] != noNode && s.vessels.superficialConductance > 0.0)
        network_.conductances.push_back(
            {m.superficial[z], m.node(iz, m.skinCell), s.vessels.superficialConductance / m.nz, 0});
    }
    if (s.vessels.countercurrentConductance > 0.0 && deep[g].empty())
      warnings_.push_back(fmt::format("{}: all venous return is superficial, so the countercurrent exchanger carries "
                                      "no flow", s.name));
  }
  // Mass balance at every node for every modulator separately: inflow equals outflow (to round-off).
  std::map<std::pair<Index, Index>, std::array<double, 2>> balance;  // (node, modulator) -> in, out
  for (const Advection& a : network_.advections) {
    double w = network_.groupWeights[network_.nodes[a.to].group];
    for (Index p = a.partsBegin; p < a.partsEnd; ++p) {
      balance[{a.to, network_.flowParts[p].modulator}][0] += w * network_.flowParts[p].coefficient;
      balance[{a.from, network_.flowParts[p].modulator}][1] += w * network_.flowParts[p].coefficient;
    }
  }
  for (const BoundaryExchange& e : network_.exchanges)
    for (Index p = e.partsBegin; p < e.partsEnd; ++p) balance[{e.node, network_.flowParts[p].modulator}][0] += network_.flowParts[p].coefficient;
  for (auto& [key, io] : balance) {
    bool sink = !pool_ && io[1] == 0.0;  // pinned supply: returns leave the body
    if (!sink && std::abs(io[0] - io[1]) > 1e-9 * (std::abs(io[0]) + std::abs(io[1])))
      throw std::logic_error(fmt::format("blood mass not conserved at {} for {} (in {:g}, out {:g} W/K)",
                                         network_.nodes[key.first].label, network_.modulators[key.second].name, io[0],
                                         io[1]));
  }
}

void Body::addSegment(const SegmentSpec& s, Index group, bool attached) {
  SegmentMesh m;
  m.name = s.name;
  m.shape = s.shape;
  m.offset = network_.nodes.size();
  m.nz = s.shape == Shape::Sphere ? 1 : s.axialCells;

  // Tissue and thickness of each radial cell.
  std::vector<const TissueProperties*> tissue;
  for (std::size_t li = 0; li < s.layers.size(); ++li) {
    m.layerNames.push_back(s.layers[li].tissue);
    for (int i = 0; i < s.layers[li].cells; ++i) {
      tissue.push_back(&case_.tissues.at(s.layers[li].tissue));
      m.layer.push_back(static_cast<int>(li));
    }
  }
  if (s.coat) {
    m.layerNames.push_back(s.coat->material);
    // An immersed coat conducts with its wet conductivity (Scholander et al. 1950: wet fur loses most insulation).
    const TissueProperties* coat = &case_.tissues.at(s.coat->material);
    if (environment_->immersed(group) && coat->wetConductivity > 0.0) {
      wetCoats_.push_back(std::make_unique<TissueProperties>(*coat));
      wetCoats_.back()->conductivity = coat->wetConductivity;
      coat = wetCoats_.back().get();
    }
    for (int i = 0; i < s.coat->cells; ++i) {
      tissue.push_back(coat);
      m.layer.push_back(static_cast<int>(s.layers.size()));
    }
  }
  m.nr = static_cast<int>(tissue.size());
  const int nz = m.nz, nr = m.nr;
  // A coat changes conductivity when its segment goes in or out of water (medium events): every conductance and
  // face that involves a coat cell is computed dry and wet, and setInterval() picks one.
  const int firstCoat = s.coat ? nr - s.coat->cells : nr;
  const TissueProperties* coatDry = s.coat ? &case_.tissues.at(s.coat->material) : nullptr;
  const bool coatChanges = coatDry && coatDry->wetConductivity > 0.0 && coatDry->wetConductivity != coatDry->conductivity;
  auto conductivity = [&](int ir, bool wet) {
    if (ir < firstCoat) return tissue[static_cast<std::size_t>(ir)]->conductivity;
    return wet ? coatDry->wetConductivity : coatDry->conductivity;
  };
  auto recordCoat = [&](bool face, Index index, double dry, double wet) {
    if (coatChanges && dry != wet) coatSwitches_.push_back({face, index, group, dry, wet});
  };
  const double length = s.shape == Shape::Sphere ? 0.0 : s.length;
  const double dz = s.shape == Shape::Sphere ? 1.0 : length / nz;
  const double rp = s.radiusProximal;
  // Outer tissue radius along a cone varies linearly; every tissue layer scales with it.
  auto scaleAt = [&](double z) { return s.shape == Shape::Cone ? (rp + (s.radiusDistal - rp) * z / length) / rp : 1.0; };


  CrossSection mid = crossSection(s, scaleAt(0.5 * length));
  for (int ir = 0; ir < nr; ++ir) m.radius.push_back(0.5 * (mid.bounds[ir] + mid.bounds[ir + 1]));
  for (int iz = 0; iz < nz; ++iz) m.axial.push_back((iz + 0.5) * dz);
  m.volume.resize(static_cast<std::size_t>(nz * nr));
  cellPerfusion_[group].assign(static_cast<std::size_t>(nz * nr), 0.0);
  m.innermostLayerCells = s.layers.front().cells;
  m.skinCell = nr - 1 - (s.coat ? s.coat->cells : 0);

  for (int iz = 0; iz < nz; ++iz) {
    const double z0 = iz * dz, z1 = (iz + 1) * dz;
    CrossSection c0 = crossSection(s, scaleAt(z0));
    CrossSection c1 = crossSection(s, scaleAt(z1));
    CrossSection cm = crossSection(s, scaleAt(0.5 * (z0 + z1)));
    // Nodes: exact control volumes.
    for (int ir = 0; ir < nr; ++ir) {
      double volume = 0.0;
      double a0 = c0.bounds[ir], b0 = c0.bounds[ir + 1], a1 = c1.bounds[ir], b1 = c1.bounds[ir + 1];
      switch (s.shape) {
        case Shape::Sphere: volume = 4.0 / 3.0 * pi * (std::pow(b0, 3) - std::pow(a0, 3)); break;
        case Shape::Plate: volume = 2.0 * s.width * dz * (b0 - a0); break;
        case Shape::Cylinder:
        case Shape::Cone:
          // Frustum shell between two linearly varying radii: pi dz/3 (b0^2 + b0 b1 + b1^2 - (a0^2 + a0 a1 + a1^2)).
          volume = pi * dz / 3.0 * ((b0 * b0 + b0 * b1 + b1 * b1) - (a0 * a0 + a0 * a1 + a1 * a1));
          break;
      }
      const TissueProperties& t = *tissue[ir];
      m.volume[static_cast<std::size_t>(iz * nr + ir)] = volume;
      std::string label = fmt::format("{}: axial {}, radial {} ({})", s.name, iz, ir, m.layerNames[m.layer[ir]]);
      Index node = network_.addNode(t.density * t.specificHeat * volume, group, label);
      if (!t.isCoat()) {
        m.tissueVolume += volume;
        m.tissueMass += t.density * volume;
      }
      if (t.metabolicHeat > 0.0)
        network_.sources.push_back({node, t.metabolicHeat * volume, t.q10, case_.body.q10Reference, metabolismChannel_});
      // Pennes (1948) perfusion omega V [m3/s]; the blood streams are linked in buildCirculation().
      // (skin multipliers, bradycardia and controllers act through modulators: see buildCirculation)
      cellPerfusion_[group][static_cast<std::size_t>(iz * nr + ir)] = t.isCoat() ? 0.0 : t.perfusion * volume;
    }
    // Radial conduction: node centre -> shared face -> next node centre (harmonic-mean interface conductance).
    for (int ir = 0; ir + 1 < nr; ++ir) {
      double ri = 0.5 * (cm.bounds[ir] + cm.bounds[ir + 1]);
      double rj = 0.5 * (cm.bounds[ir + 1] + cm.bounds[ir + 2]);
      double face = cm.bounds[ir + 1];
      double resistance = radialResistance(s.shape, ri, face, rj, tissue[ir]->conductivity,
                                           tissue[ir + 1]->conductivity, dz, s.width);
      network_.conductances.push_back({m.node(iz, ir), m.node(iz, ir + 1), 1.0 / resistance, 0});
      if (ir + 1 >= firstCoat)
        recordCoat(false, network_.conductances.size() - 1,
                   1.0 / radialResistance(s.shape, ri, face, rj, conductivity(ir, false), conductivity(ir + 1, false), dz, s.width),
                   1.0 / radialResistance(s.shape, ri, face, rj, conductivity(ir, true), conductivity(ir + 1, true), dz, s.width));
    }
    // Outer lateral face.
    double rLast = 0.5 * (cm.bounds[nr - 1] + cm.bounds[nr]);
    double rOut = cm.bounds[nr];
    double half = 1.0 / radialResistance(s.shape, rLast, rOut, rOut, tissue[nr - 1]->conductivity, 1.0, dz, s.width);
    double halfDry = 1.0 / radialResistance(s.shape, rLast, rOut, rOut, conductivity(nr - 1, false), 1.0, dz, s.width);
    double halfWet = 1.0 / radialResistance(s.shape, rLast, rOut, rOut, conductivity(nr - 1, true), 1.0, dz, s.width);
    double area = 0.0;
    switch (s.shape) {
      case Shape::Sphere: area = 4.0 * pi * rOut * rOut; break;
      case Shape::Plate: area = 2.0 * s.width * dz; break;
      case Shape::Cylinder:
      case Shape::Cone: {
        double R0 = c0.bounds[nr], R1 = c1.bounds[nr];
        area = pi * (R0 + R1) * std::sqrt(dz * dz + (R1 - R0) * (R1 - R0));  // frustum lateral area
        break;
      }
    }
    // Children cover part of this face: keep at least 10 % exposed.
    if (static_cast<std::size_t>(iz) < coveredArea_[group].size() && coveredArea_[group][static_cast<std::size_t>(iz)] > 0.0) {
      double covered = coveredArea_[group][static_cast<std::size_t>(iz)];
      double remaining = std::max(0.1 * area, area - covered);
      if (area - covered < 0.1 * area)
        warnings_.push_back(fmt::format("segments attached to {} cover more than 90 % of its surface at axial cell "
                                        "{}; 10 % is kept exposed", s.name, iz));
      half *= remaining / area;
      halfDry *= remaining / area;
      halfWet *= remaining / area;
      area = remaining;
    }
    m.lateralFace.push_back(network_.faces.size());
    network_.faces.push_back({m.node(iz, nr - 1), half, area});
    if (nr - 1 >= firstCoat) recordCoat(true, network_.faces.size() - 1, halfDry, halfWet);
    environment_->addFace({group, s.shape, true, area, s.shape == Shape::Plate ? s.length : 2.0 * rOut, 0.0});
    m.area += area;
    // Axial conduction through the shared face at z1 (same tissue on both sides).
    if (iz + 1 < nz) {
      for (int ir = 0; ir < nr; ++ir) {
        double section = sectionArea(s.shape, c1.bounds[ir], c1.bounds[ir + 1], s.width);
        network_.conductances.push_back({m.node(iz, ir), m.node(iz + 1, ir), tissue[ir]->conductivity * section / dz, 0});
        if (ir >= firstCoat)
          recordCoat(false, network_.conductances.size() - 1, conductivity(ir, false) * section / dz,
                     conductivity(ir, true) * section / dz);
      }
    }
  }
  // Exposed end faces of cylinders and cones: half-cell axial conductance to the face.
  if ((s.shape == Shape::Cylinder || s.shape == Shape::Cone) && s.surface.ends == EndCondition::Exposed) {
    for (int end = attached ? 1 : 0; end < 2; ++end) {
      int iz = end == 0 ? 0 : nz - 1;
      CrossSection ce = crossSection(s, scaleAt(end == 0 ? 0.0 : length));
      for (int ir = 0; ir < nr; ++ir) {
        double section = sectionArea(s.shape, ce.bounds[ir], ce.bounds[ir + 1], s.width);
        network_.faces.push_back({m.node(iz, ir), tissue[ir]->conductivity * section / (0.5 * dz), section});
        if (ir >= firstCoat)
          recordCoat(true, network_.faces.size() - 1, conductivity(ir, false) * section / (0.5 * dz),
                     conductivity(ir, true) * section / (0.5 * dz));
        environment_->addFace({group, s.shape, false, section, 2.0 * ce.bounds[nr], 0.0});
        m.area += section;
      }
    }
  }
  meshes_.push_back(std::move(m));
}

}  // namespace thermorph
