#include "models/body.hpp"

#include <algorithm>
#include <cmath>
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
  buildCirculation();
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
  double factor = (tissueSum > 0.0 ? target / tissueSum : 1.0) * case_.body.activity;
  for (HeatSource& src : network_.sources) src.power *= factor;
  basalRate_ = target * case_.body.activity;
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
    double scale = 1.0;  // proximal cross-section of a cone is at its stated radii
    double covered = 0.0;
    double r = 0.0;
    for (int ir = 0, li = 0, inLayer = 0; ir < cm.nr; ++ir) {
      const bool coat = s.coat && ir >= cm.nr - s.coat->cells;
      double dr = coat ? s.coat->thickness / s.coat->cells
                       : s.layers[static_cast<std::size_t>(li)].thickness * scale / s.layers[static_cast<std::size_t>(li)].cells;
      double a = r, b = r + dr;
      r = b;
      double area = s.shape == Shape::Plate ? 2.0 * s.width * (b - a) : pi * (b * b - a * a);
      covered += area;
      const TissueProperties& t = case_.tissues.at(coat ? s.coat->material : s.layers[static_cast<std::size_t>(li)].tissue);
      network_.conductances.push_back({cm.node(0, ir), pm.node(k, pr), t.conductivity * area / (0.5 * dz), conductionChannel_});
      if (!coat && ++inLayer == s.layers[static_cast<std::size_t>(li)].cells) {
        ++li;
        inLayer = 0;
      }
    }
    (void)covered;
  }
}

void Body::buildCirculation() {
  const CirculationSpec& circ = case_.circulation;
  const double rc = circ.bloodDensity * circ.bloodSpecificHeat;  // [J/(m3 K)]
  const std::size_t n = case_.segments.size();
  // Per segment and axial cell: perfusion, shunt, and what the children draw and return (per copy).
  std::vector<std::vector<double>> perf(n), shunt(n), childDraw(n), childDeep(n), childSuperficial(n);
  std::vector<double> draw(n, 0.0), deep(n, 0.0), superficialFlow(n, 0.0);
  std::vector<Index> parentOf(n, n);
  std::vector<int> attachCell(n, 0);
  for (Index g = 0; g < n; ++g) {
    const SegmentSpec& s = case_.segments[g];
    const SegmentMesh& m = meshes_[g];
    perf[g].assign(static_cast<std::size_t>(m.nz), 0.0);
    shunt[g].assign(static_cast<std::size_t>(m.nz), 0.0);
    childDraw[g] = childDeep[g] = childSuperficial[g] = std::vector<double>(static_cast<std::size_t>(m.nz), 0.0);
    for (int iz = 0; iz < m.nz; ++iz)
      for (int ir = 0; ir < m.nr; ++ir) perf[g][static_cast<std::size_t>(iz)] += cellPerfusion_[g][static_cast<std::size_t>(iz * m.nr + ir)];
    // Shunts open through the skin of the distal half of the axial cells.
    double shuntTotal = s.vessels.shuntFlowMax * s.vasomotor.shunt;
    int firstDistal = m.nz / 2;
    for (int iz = firstDistal; iz < m.nz; ++iz) shunt[g][static_cast<std::size_t>(iz)] = shuntTotal / (m.nz - firstDistal);
    if (!s.parent.empty()) {
      Index p = 0;
      while (case_.segments[p].name != s.parent) ++p;
      parentOf[g] = p;
      attachCell[g] = std::clamp(static_cast<int>(s.attachPosition * meshes_[p].nz), 0, meshes_[p].nz - 1);
    }
  }
  // Flows bottom-up (reverse of root-first order): mass is conserved at every junction by construction.
  for (auto it = order_.rbegin(); it != order_.rend(); ++it) {
    Index g = *it;
    const SegmentSpec& s = case_.segments[g];
    double sigma = s.vasomotor.superficialReturn;
    double perfusion = 0.0, shunted = 0.0;
    for (std::size_t iz = 0; iz < perf[g].size(); ++iz) {
      perfusion += perf[g][iz];
      shunted += shunt[g][iz];
      draw[g] += perf[g][iz] + shunt[g][iz] + childDraw[g][iz];
      deep[g] += (1.0 - sigma) * perf[g][iz] + childDeep[g][iz];
      superficialFlow[g] += sigma * perf[g][iz] + shunt[g][iz] + childSuperficial[g][iz];
    }
    meshes_[g].bloodFlow = draw[g];
    meshes_[g].perfusionFlow = perfusion;
    meshes_[g].shuntFlow = shunted;
    if (parentOf[g] < n) {
      auto k = static_cast<std::size_t>(attachCell[g]);
      childDraw[parentOf[g]][k] += s.count * draw[g];
      childDeep[parentOf[g]][k] += s.count * deep[g];
      childSuperficial[parentOf[g]][k] += s.count * superficialFlow[g];
    }
  }
  const Index root = order_.front();
  totalFlow_ = draw[root];
  bloodVolume_ = case_.body.bloodVolume.value_or(0.07 * bodyMass_ / circ.bloodDensity);  // ~7 % of mass (Stahl 1967, from memory)
  // Default cardiac output 187 M^0.81 mL/min (Stahl 1967, J. Appl. Physiol. 22:453; from memory).
  cardiacOutput_ = case_.body.cardiacOutput.value_or(187e-6 / 60.0 * std::pow(bodyMass_, 0.81));
  if (totalFlow_ > cardiacOutput_)
    warnings_.push_back(fmt::format("total blood flow {:.4g} mL/min exceeds the cardiac output {:.4g} mL/min",
                                    totalFlow_ * 6e7, cardiacOutput_ * 6e7));
  if (!(totalFlow_ > 0.0)) return;  // no circulation: tissues exchange heat by conduction only

  // Flow through each axial cell's vessels (per copy): arterial inflow, and what each vein carries proximally
  // out of the cell. A blood node exists only where its flow is positive (no isolated nodes).
  std::vector<std::vector<double>> arterialIn(n), deepOut(n), superficialOut(n);
  for (Index g = 0; g < n; ++g) {
    const auto nz = static_cast<std::size_t>(meshes_[g].nz);
    const double sigma = case_.segments[g].vasomotor.superficialReturn;
    arterialIn[g].assign(nz + 1, 0.0);
    deepOut[g].assign(nz + 1, 0.0);
    superficialOut[g].assign(nz + 1, 0.0);
    for (std::size_t z = nz; z-- > 0;) {
      arterialIn[g][z] = arterialIn[g][z + 1] + perf[g][z] + shunt[g][z] + childDraw[g][z];
      deepOut[g][z] = deepOut[g][z + 1] + (1.0 - sigma) * perf[g][z] + childDeep[g][z];
      superficialOut[g][z] = superficialOut[g][z + 1] + sigma * perf[g][z] + shunt[g][z] + childSuperficial[g][z];
    }
  }

  // Blood nodes; capacities from the large-vessel blood volume of the cell's tissue (coat excluded).
  double vesselVolume = 0.0;
  for (Index g : order_) {
    SegmentMesh& m = meshes_[g];
    const SegmentSpec& s = case_.segments[g];
    if (!(draw[g] > 0.0)) continue;
    for (int iz = 0; iz < m.nz; ++iz) {
      auto z = static_cast<std::size_t>(iz);
      double tissue = 0.0;
      for (int ir = 0; ir <= m.skinCell; ++ir) tissue += m.volume[static_cast<std::size_t>(iz * m.nr + ir)];
      double vb = s.vessels.bloodFraction * tissue;
      auto add = [&](double flow, double share, const char* what) {
        if (!(flow > 0.0)) return noNode;
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

  auto link = [&](Index from, Index to, double flow) {
    if (!(flow > 0.0)) return;
    if (from == noNode || to == noNode) throw std::logic_error("blood link to a node that carries no flow");
    network_.advections.push_back({from, to, rc * flow, bloodChannel_});
  };
  for (Index g : order_) {
    const SegmentMesh& m = meshes_[g];
    const SegmentSpec& s = case_.segments[g];
    if (!(draw[g] > 0.0)) continue;
    const double sigma = s.vasomotor.superficialReturn;
    // Arterial inflow at the proximal cell: from the parent's arterial stream, the pool, or pinned blood.
    if (parentOf[g] < n) {
      const SegmentMesh& pm = meshes_[parentOf[g]];
      auto k = static_cast<std::size_t>(attachCell[g]);
      link(pm.arterial[k], m.arterial[0], draw[g]);
      link(m.venous[0], pm.venous[k], s.count * deep[g]);
      link(m.superficial[0], pm.superficial[k], s.count * superficialFlow[g]);
    } else if (pool_) {
      link(*pool_, m.arterial[0], draw[g]);
      link(m.venous[0], *pool_, deep[g]);
      link(m.superficial[0], *pool_, superficialFlow[g]);
    } else {
      network_.exchanges.push_back({m.arterial[0], rc * draw[g], *circ.fixedArterialTemperature, bloodChannel_});
    }
    for (int iz = 0; iz < m.nz; ++iz) {
      auto z = static_cast<std::size_t>(iz);
      if (iz > 0) link(m.arterial[z - 1], m.arterial[z], arterialIn[g][z]);
      // Pennes term at the local arterial temperature; venous blood leaves at tissue temperature.
      for (int ir = 0; ir < m.nr; ++ir) {
        double q = cellPerfusion_[g][static_cast<std::size_t>(iz * m.nr + ir)];
        if (!(q > 0.0)) continue;
        link(m.arterial[z], m.node(iz, ir), q);
        link(m.node(iz, ir), m.venous[z], (1.0 - sigma) * q);
        link(m.node(iz, ir), m.superficial[z], sigma * q);
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
    }
    if (s.vessels.countercurrentConductance > 0.0 && !(deep[g] > 0.0))
      warnings_.push_back(fmt::format("{}: all venous return is superficial, so the countercurrent exchanger carries "
                                      "no flow", s.name));
  }
  // Mass balance at every node: inflow equals outflow (to round-off).
  std::vector<double> in(network_.nodes.size(), 0.0), out(network_.nodes.size(), 0.0);
  for (const Advection& a : network_.advections) {
    double w = network_.groupWeights[network_.nodes[a.to].group];
    in[a.to] += w * a.flowCapacity;
    out[a.from] += w * a.flowCapacity;
  }
  for (const BoundaryExchange& e : network_.exchanges)
    if (e.channel == bloodChannel_) in[e.node] += e.conductance;
  for (Index i = 0; i < network_.nodes.size(); ++i) {
    double w = network_.groupWeights[network_.nodes[i].group];
    bool sink = pool_ ? false : (out[i] == 0.0 && in[i] > 0.0);  // pinned supply: returns leave the body
    if (!sink && std::abs(in[i] - out[i]) > 1e-9 * (in[i] + out[i]))
      throw std::logic_error(fmt::format("blood mass not conserved at {} (in {:g}, out {:g} W/K, weight {:g})",
                                         network_.nodes[i].label, in[i], out[i], w));
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
      if (!t.isCoat) {
        m.tissueVolume += volume;
        m.tissueMass += t.density * volume;
      }
      if (t.metabolicHeat > 0.0)
        network_.sources.push_back({node, t.metabolicHeat * volume, t.q10, case_.body.q10Reference, metabolismChannel_});
      // Pennes (1948) perfusion omega V [m3/s]; the blood streams are linked in buildCirculation().
      double multiplier = m.layerNames[static_cast<std::size_t>(m.layer[static_cast<std::size_t>(ir)])].find("skin") != std::string::npos
                              ? s.vasomotor.skinPerfusion : 1.0;
      cellPerfusion_[group][static_cast<std::size_t>(iz * nr + ir)] = t.isCoat ? 0.0 : t.perfusion * multiplier * volume;
    }
    // Radial conduction: node centre -> shared face -> next node centre (harmonic-mean interface conductance).
    for (int ir = 0; ir + 1 < nr; ++ir) {
      double ri = 0.5 * (cm.bounds[ir] + cm.bounds[ir + 1]);
      double rj = 0.5 * (cm.bounds[ir + 1] + cm.bounds[ir + 2]);
      double face = cm.bounds[ir + 1];
      double resistance = radialResistance(s.shape, ri, face, rj, tissue[ir]->conductivity,
                                           tissue[ir + 1]->conductivity, dz, s.width);
      network_.conductances.push_back({m.node(iz, ir), m.node(iz, ir + 1), 1.0 / resistance, 0});
    }
    // Outer lateral face.
    double rLast = 0.5 * (cm.bounds[nr - 1] + cm.bounds[nr]);
    double rOut = cm.bounds[nr];
    double half = 1.0 / radialResistance(s.shape, rLast, rOut, rOut, tissue[nr - 1]->conductivity, 1.0, dz, s.width);
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
      area = remaining;
    }
    m.lateralFace.push_back(network_.faces.size());
    network_.faces.push_back({m.node(iz, nr - 1), half, area});
    environment_->addFace({group, s.shape, true, area, s.shape == Shape::Plate ? s.length : 2.0 * rOut, 0.0});
    m.area += area;
    // Axial conduction through the shared face at z1 (same tissue on both sides).
    if (iz + 1 < nz) {
      for (int ir = 0; ir < nr; ++ir) {
        double section = sectionArea(s.shape, c1.bounds[ir], c1.bounds[ir + 1], s.width);
        network_.conductances.push_back({m.node(iz, ir), m.node(iz + 1, ir), tissue[ir]->conductivity * section / dz, 0});
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
        environment_->addFace({group, s.shape, false, section, 2.0 * ce.bounds[nr], 0.0});
        m.area += section;
      }
    }
  }
  meshes_.push_back(std::move(m));
}

}  // namespace thermorph
