#include "models/body.hpp"

#include <cmath>
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

//! Conduction resistance from radius a to b in a material of conductivity k [K/W]:
//! cylinder ln(b/a)/(2 pi k dz); sphere (1/a - 1/b)/(4 pi k); plate, both halves, (b - a)/(2 w dz k).
double radialResistance(Shape shape, double a, double b, double k, double dz, double width) {
  switch (shape) {
    case Shape::Sphere: return (1.0 / a - 1.0 / b) / (4.0 * pi * k);
    case Shape::Plate: return (b - a) / (2.0 * width * dz * k);
    case Shape::Cylinder:
    case Shape::Cone: return std::log(b / a) / (2.0 * pi * k * dz);
  }
  return 0.0;
}

//! Axial cross-section area of the radial cell between a and b [m2] (plates: both halves).
double sectionArea(Shape shape, double a, double b, double width) {
  return shape == Shape::Plate ? 2.0 * width * (b - a) : pi * (b * b - a * a);
}

}  // namespace

Body::Body(const Case& c) : case_(c) {
  metabolismChannel_ = network_.channel("metabolism");
  bloodChannel_ = network_.channel("blood");
  environment_ = std::make_unique<EnvironmentModel>(case_, network_);
  network_.surface = environment_.get();
  if (!case_.circulation.fixedArterialTemperature)
    for (const SegmentSpec& s : case_.segments)
      for (const LayerSpec& l : s.layers)
        if (case_.tissues.at(l.tissue).perfusion > 0.0)
          throw CaseError(fmt::format(
              "{}: segments.{}: tissue \"{}\" is perfused ({:g} 1/s) but the arterial supply is not defined: set "
              "[circulation] fixed_arterial_temperature, or perfusion = 0 under [tissues.{}]",
              case_.sourceFile, s.name, l.tissue, case_.tissues.at(l.tissue).perfusion, l.tissue));
  for (Index g = 0; g < case_.segments.size(); ++g) {
    network_.groups.push_back(case_.segments[g].name);
    network_.groupWeights.push_back(1.0);
    addSegment(case_.segments[g], g);
  }
}

void Body::addSegment(const SegmentSpec& s, Index group) {
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
    for (int i = 0; i < s.coat->cells; ++i) {
      tissue.push_back(&case_.tissues.at(s.coat->material));
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

  const CirculationSpec& circ = case_.circulation;
  const double bloodCapacity = circ.bloodDensity * circ.bloodSpecificHeat;  // [J/(m3 K)]

  CrossSection mid = crossSection(s, scaleAt(0.5 * length));
  for (int ir = 0; ir < nr; ++ir) m.radius.push_back(0.5 * (mid.bounds[ir] + mid.bounds[ir + 1]));
  for (int iz = 0; iz < nz; ++iz) m.axial.push_back((iz + 0.5) * dz);
  m.volume.resize(static_cast<std::size_t>(nz * nr));

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
        network_.sources.push_back({node, t.metabolicHeat * volume, t.q10, circ.q10Reference, metabolismChannel_});
      if (t.perfusion > 0.0) {
        // Pennes (1948): omega rho_b c_b (T_a - T) per unit volume, arterial temperature pinned.
        double arterial = circ.fixedArterialTemperature.value_or(0.0);
        network_.exchanges.push_back({node, t.perfusion * bloodCapacity * volume, arterial, bloodChannel_});
      }
    }
    // Radial conduction: node centre -> shared face -> next node centre, exact shell resistances.
    for (int ir = 0; ir + 1 < nr; ++ir) {
      double ri = 0.5 * (cm.bounds[ir] + cm.bounds[ir + 1]);
      double rj = 0.5 * (cm.bounds[ir + 1] + cm.bounds[ir + 2]);
      double face = cm.bounds[ir + 1];
      double resistance = radialResistance(s.shape, ri, face, tissue[ir]->conductivity, dz, s.width) +
                          radialResistance(s.shape, face, rj, tissue[ir + 1]->conductivity, dz, s.width);
      network_.conductances.push_back({m.node(iz, ir), m.node(iz, ir + 1), 1.0 / resistance, 0});
    }
    // Outer lateral face.
    double rLast = 0.5 * (cm.bounds[nr - 1] + cm.bounds[nr]);
    double rOut = cm.bounds[nr];
    double half = 1.0 / radialResistance(s.shape, rLast, rOut, tissue[nr - 1]->conductivity, dz, s.width);
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
    for (int end = 0; end < 2; ++end) {
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
