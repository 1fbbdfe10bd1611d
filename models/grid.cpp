#include "models/grid.hpp"

#include <algorithm>
#include <cmath>
#include <functional>
#include <limits>
#include <numbers>

#include <fmt/format.h>

#include "models/environment.hpp"

namespace thermorph {

namespace {

using std::numbers::pi;

//! Relative error of the heat flow into a semi-infinite fin discretised by cell-centred finite volumes of length
//! dz, a = m dz, with a half-cell conductance 2kA/dz from the junction to the first node. Derivation (ours; the
//! continuous answer q = kAm theta_b is Incropera et al. 2007, Table 3.4, case D): node temperatures theta_i =
//! theta_0 r^i with G (theta_{i-1} - 2 theta_i + theta_{i+1}) = G a^2 theta_i, so r + 1/r = 2 + a^2; the balance
//! of node 0, 2G (theta_b - theta_0) = G (1 - r + a^2) theta_0, gives q_h / (kAm theta_b) =
//! 2 (1 - r + a^2) / (a (3 - r + a^2)) = 1 - a^2/8 + O(a^3).
double finError(double a) {
  if (!(a > 0.0)) return 0.0;
  if (a < 1e-3) return a * a / 8.0;
  const double b = 2.0 + a * a;
  const double r = 0.5 * (b - std::sqrt(b * b - 4.0));
  const double ratio = 2.0 * (1.0 - r + a * a) / (a * (3.0 - r + a * a));
  return std::abs(1.0 - ratio);
}

//! Relative error of the heat a balanced counterflow exchanger of N mixed cells (upwind streams) transfers:
//! it transfers NTU / (1 + NTU + NTU/N) of the largest possible heat where the exact exchanger transfers
//! NTU / (1 + NTU) (Incropera et al. 2007, eq. 11.35 with C_r = 1). Derivation (ours): with upwind cells the
//! stream difference is the same in every cell, d = (T_a,in - T_v,in) / (1 + (N + 1) NTU/N).
double exchangerError(double ntu, int n) {
  if (!(ntu > 0.0)) return 0.0;
  const double x = ntu / n;
  return x / (1.0 + ntu + x);
}


//! Radial error estimate of a layer with cells of thickness dr against its length scale (second order; the
//! constant 1/48 calibrated on the example cases against 4x refinement, `thermorph refine`).
double radialError(double dr, double scale) {
  if (!(scale > 0.0) || !std::isfinite(scale)) return 0.0;
  const double x = dr / scale;
  return x * x / 48.0;
}

//! One radial layer as the estimator sees it.
struct Layer {
  double inner = 0.0, outer = 0.0;  //!< [m] from the axis or mid-plane (cones: at mid-length)
  double k = 0.0, kWet = 0.0;       //!< [W/(m K)]
  double perfusion = 0.0;           //!< [1/s]
  bool coat = false;
};

std::vector<Layer> layersOf(const Case& c, const SegmentSpec& s) {
  const double scale = s.shape == Shape::Cone ? 0.5 * (1.0 + s.radiusDistal / s.radiusProximal) : 1.0;
  std::vector<Layer> out;
  double r = 0.0;
  for (const LayerSpec& l : s.layers) {
    const TissueProperties& t = c.tissues.at(l.tissue);
    Layer L;
    L.inner = r;
    r += l.thickness * scale;
    L.outer = r;
    L.k = L.kWet = t.conductivity;
    L.perfusion = t.perfusion;
    out.push_back(L);
  }
  if (s.coat) {
    const TissueProperties& t = c.tissues.at(s.coat->material);
    Layer L;
    L.inner = r;
    L.outer = r + s.coat->thickness;
    L.k = t.conductivity;
    L.kWet = t.wetConductivity > 0.0 ? t.wetConductivity : t.conductivity;
    L.coat = true;
    out.push_back(L);
  }
  return out;
}

//! Largest surface conductance (convection + radiation + evaporation + substrate slopes) of a segment's lateral
//! face over the timeline [W/(m2 K)], and whether the segment is ever in water.
struct SurfaceProbe {
  std::vector<double> conductance;
  std::vector<bool> everWet;
};

SurfaceProbe probeSurfaces(const Case& c) {
  Network network;
  EnvironmentModel env(c, network);
  const std::size_t n = c.segments.size();
  for (Index g = 0; g < n; ++g) {
    const SegmentSpec& s = c.segments[g];
    const double outer = s.tissueRadius() + (s.coat ? s.coat->thickness : 0.0);
    env.addFace({g, s.shape, true, 1.0, s.shape == Shape::Plate ? s.length : 2.0 * outer, 0.0});
  }
  SurfaceProbe probe;
  probe.conductance.assign(n, 0.0);
  probe.everWet.assign(n, false);
  std::vector<double> times{0.0};
  for (double b : env.breakpoints()) times.push_back(b);
  times.push_back(c.run.duration);
  std::vector<double> heat(network.channels.size()), slope(network.channels.size());
  const double body = std::max(c.run.initialTemperature, 300.0);
  for (std::size_t k = 0; k + 1 < times.size(); ++k) {
    env.setInterval(k);
    for (double t : {times[k], times[k + 1]}) {
      for (Index g = 0; g < n; ++g) {
        if (env.immersed(g, t)) probe.everWet[g] = true;
        const double fluid = env.fluid(g, t).temperature;
        for (double Ts : {fluid + 0.5 * (body - fluid), fluid + 0.1 * (body - fluid), fluid + 1.0}) {
          std::fill(heat.begin(), heat.end(), 0.0);
          std::fill(slope.begin(), slope.end(), 0.0);
          env.faceHeat(g, Ts, t, heat, slope);
          double total = 0.0;
          for (double d : slope) total -= d;
          if (std::isfinite(total)) probe.conductance[g] = std::max(probe.conductance[g], total);
        }
      }
    }
  }
  takeValidityWarnings();  // the probe's own range warnings: the run reports its own
  return probe;
}

}  // namespace

double axialGridError(const SegmentGridEstimate& e, double length, int nz) {
  double fin = e.axialForced && e.decayLength > 0.0 && std::isfinite(e.decayLength)
                   ? e.endWeight * finError(length / nz / e.decayLength)
                   : 0.0;
  return std::max(fin, exchangerError(e.ntu, nz));
}

std::vector<SegmentGridEstimate> estimateGrid(const Case& c) {
  const std::size_t n = c.segments.size();
  const SurfaceProbe probe = probeSurfaces(c);
  const double rc = c.circulation.bloodDensity * c.circulation.bloodSpecificHeat;

  // Own perfusion flow of one copy [m3/s], then children's flows added bottom-up (any order: repeat n times).
  std::vector<double> own(n, 0.0), flow(n, 0.0);
  std::vector<std::vector<Layer>> layers(n);
  for (Index g = 0; g < n; ++g) {
    const SegmentSpec& s = c.segments[g];
    layers[g] = layersOf(c, s);
    for (const Layer& L : layers[g]) {
      if (L.coat) continue;
      double volume = 0.0;
      switch (s.shape) {
        case Shape::Sphere: volume = 4.0 / 3.0 * pi * (std::pow(L.outer, 3) - std::pow(L.inner, 3)); break;
        case Shape::Plate: volume = 2.0 * s.width * s.length * (L.outer - L.inner); break;
        default: volume = pi * (L.outer * L.outer - L.inner * L.inner) * s.length; break;
      }
      own[g] += L.perfusion * volume;
    }
  }
  std::vector<std::vector<Index>> children(n);
  for (Index g = 0; g < n; ++g)
    for (Index p = 0; p < n; ++p)
      if (c.segments[g].parent == c.segments[p].name) children[p].push_back(g);
  std::function<double(Index)> total = [&](Index g) {
    double q = own[g];
    for (Index ch : children[g]) q += c.segments[ch].count * total(ch);
    return q;
  };
  for (Index g = 0; g < n; ++g) flow[g] = total(g);

  const double target = kGridTargetError;
  std::vector<SegmentGridEstimate> out;
  for (Index g = 0; g < n; ++g) {
    const SegmentSpec& s = c.segments[g];
    const std::vector<Layer>& ls = layers[g];
    SegmentGridEstimate e;
    e.segment = s.name;
    const bool plate = s.shape == Shape::Plate, curved = !plate;
    const bool wet = probe.everWet[g];

    // Radial length scales per layer: the perfusion length, and for curved shapes the inner radius.
    for (std::size_t i = 0; i < ls.size(); ++i) {
      const Layer& L = ls[i];
      double scale = std::numeric_limits<double>::infinity();
      if (L.perfusion > 0.0) scale = std::sqrt(L.k / (L.perfusion * rc));
      if (curved) scale = std::min(scale, i == 0 ? L.outer : L.inner);
      e.layerScale.push_back(scale);
      int cells = 1;
      if (std::isfinite(scale)) {
        const double dr = scale * std::sqrt(48.0 * target);
        cells = static_cast<int>(std::ceil((L.outer - L.inner) / dr - 1e-9));
      }
      e.layerNeeded.push_back(std::clamp(cells, L.coat ? 2 : 2, kMaxAutoLayerCells));
    }
    if (s.shape == Shape::Sphere) {
      e.decayLength = std::numeric_limits<double>::infinity();
      out.push_back(e);
      continue;
    }

    // Fin parameter: per unit length, the conductance to the surroundings U' and to the arterial blood, over
    // the axial conductance of every layer.
    double axial = 0.0, blood = 0.0, resistance = 0.0;  // [W m/K], [W/(m K)], [m K/W]
    for (std::size_t i = 0; i < ls.size(); ++i) {
      const Layer& L = ls[i];
      const double k = L.coat && wet ? L.kWet : L.k;
      const double section = plate ? 2.0 * s.width * (L.outer - L.inner) : pi * (L.outer * L.outer - L.inner * L.inner);
      axial += k * section;
      blood += L.perfusion * rc * section;
      // Radial resistance per unit length: the first layer from its mean temperature (uniform source:
      // 1/(8 pi k) for a rod, delta/(3 k) per area for a slab), then each layer across its thickness.
      if (plate) resistance += (i == 0 ? (L.outer - L.inner) / 3.0 : (L.outer - L.inner)) / (k * 2.0 * s.width);
      else resistance += i == 0 ? 1.0 / (8.0 * pi * k) : std::log(L.outer / L.inner) / (2.0 * pi * k);
    }
    const double perimeter = plate ? 2.0 * s.width : 2.0 * pi * ls.back().outer;
    const double h = probe.conductance[g];
    const double surface = h > 0.0 ? 1.0 / (resistance + 1.0 / (h * perimeter)) : 0.0;
    const double m = std::sqrt((surface + blood) / axial);
    e.decayLength = m > 0.0 ? 1.0 / m : std::numeric_limits<double>::infinity();
    e.axialForced = !s.parent.empty() || !children[g].empty() ||
                    (s.shape != Shape::Plate && s.surface.ends == EndCondition::Exposed);
    e.ntu = s.vessels.countercurrentConductance > 0.0 && flow[g] > 0.0
                ? s.vessels.countercurrentConductance / (rc * flow[g])
                : 0.0;
    // An appendage's junction carries a large share of its heat (conduction from the parent), so its fin error
    // counts in full; a root's ends and attachments carry about ends / (ends + mL) of it.
    // Where perfusion rather than the surroundings sets the decay, the tissue beyond the junction sits near the
    // arterial (the parent's) temperature and little heat crosses it: weight U' / (U' + perfusion term).
    e.endWeight = surface + blood > 0.0 ? surface / (surface + blood) : 1.0;
    if (s.parent.empty()) {
      const int ends = (s.shape != Shape::Plate && s.surface.ends == EndCondition::Exposed ? 2 : 0) +
                       static_cast<int>(children[g].size());
      e.endWeight *= ends / (ends + m * s.length);
    }
    int nz = 4;
    if (e.axialForced && m > 0.0)
      while (nz < kMaxAutoAxialCells && axialGridError(e, s.length, nz) > target) nz = std::max(nz + 1, nz * 11 / 10);
    if (e.ntu > 0.0)
      nz = std::max(nz, static_cast<int>(std::ceil(e.ntu * (1.0 - target) / (target * (1.0 + e.ntu)) - 1e-9)));
    // Shunts open over the distal half and children attach at a position: enough cells that both sit where
    // the case puts them.
    if (s.vessels.shuntFlowMax > 0.0 || !children[g].empty()) nz = std::max(nz, 10);
    if (nz % 2) ++nz;
    e.axialNeeded = std::min(nz, kMaxAutoAxialCells);
    out.push_back(e);
  }
  return out;
}

void resolveGrid(Case& c) {
  const std::vector<SegmentGridEstimate> estimates = estimateGrid(c);
  // run.grid_refinement multiplies every count, given or chosen, before the checks (which then describe the grid
  // actually used); the counts are then explicit, so the resolved case reproduces the refined run.
  const int f = std::max(1, c.run.gridRefinement);
  for (std::size_t g = 0; g < c.segments.size(); ++g) {
    SegmentSpec& s = c.segments[g];
    const SegmentGridEstimate& e = estimates[g];
    // Axial cells.
    if (s.shape != Shape::Sphere) {
      if (!s.axialAuto) s.axialCells *= f;
      if (s.axialAuto) {
        s.axialCells = e.axialNeeded * f;
        if (axialGridError(e, s.length, s.axialCells) > kGridWarnError)
          c.warnings.push_back(fmt::format(
              "grid: segment {}: {} axial cells (the automatic limit) leave an estimated error of {:.2g} % in its "
              "heat flows; give axial_cells to go further",
              s.name, s.axialCells, 100.0 * axialGridError(e, s.length, s.axialCells)));
      } else {
        const double err = axialGridError(e, s.length, s.axialCells);
        if (err > kGridWarnError) {
          int need = s.axialCells;
          while (need < 100000 && axialGridError(e, s.length, need) > kGridWarnError) need = std::max(need + 1, need * 21 / 20);
          std::string why;
          if (e.axialForced && std::isfinite(e.decayLength)) why = fmt::format("decay length {:.3g} mm", 1e3 * e.decayLength);
          if (e.ntu > 0.0) why += fmt::format("{}countercurrent NTU {:.3g}", why.empty() ? "" : ", ", e.ntu);
          c.warnings.push_back(fmt::format(
              "grid: segment {}: axial_cells = {} leaves an estimated error of {:.2g} % in its heat flows ({}); "
              "{} axial cells meet 1 % (leave axial_cells out to choose automatically)",
              s.name, s.axialCells, 100.0 * err, why, need));
        }
      }
    }
    // Radial cells per layer, the coat last.
    auto radial = [&](std::size_t i, int& cells, bool automatic, const std::string& what, double thickness) {
      if (automatic) {
        cells = e.layerNeeded[i] * f;
        return;
      }
      cells *= f;
      const double err = radialError(thickness / cells, e.layerScale[i]);
      if (err > kGridWarnError) {
        int need = cells;
        while (need < 100000 && radialError(thickness / need, e.layerScale[i]) > kGridWarnError) ++need;
        c.warnings.push_back(fmt::format(
            "grid: segment {}: {} has {} radial cells, an estimated error of {:.2g} % (length scale {:.3g} mm); {} "
            "cells meet 1 % (leave cells out to choose automatically)",
            s.name, what, cells, 100.0 * err, 1e3 * e.layerScale[i], need));
      }
    };
    const double scale = s.shape == Shape::Cone ? 0.5 * (1.0 + s.radiusDistal / s.radiusProximal) : 1.0;
    for (std::size_t i = 0; i < s.layers.size(); ++i)
      radial(i, s.layers[i].cells, s.layers[i].cellsAuto, fmt::format("layer {} ({})", i, s.layers[i].tissue),
             s.layers[i].thickness * scale);
    if (s.coat) radial(s.layers.size(), s.coat->cells, s.coat->cellsAuto, "the coat", s.coat->thickness);
    if (f > 1) {
      s.axialAuto = false;
      for (LayerSpec& l : s.layers) l.cellsAuto = false;
      if (s.coat) s.coat->cellsAuto = false;
    }
  }
  c.run.gridRefinement = 1;  // applied: the counts above are the refined ones
}

}  // namespace thermorph

namespace thermorph {

std::string gridSummary(const Case& c) {
  const std::vector<SegmentGridEstimate> estimates = estimateGrid(c);
  std::string out = fmt::format("Grid (* chosen automatically; decay length 1/m of the fin parameter; error: estimated, "
                                "of the segment's heat flows)\n{:<14}{:>8}  {:<34}{:>12}{:>8}{:>9}\n",
                                "segment", "axial", "radial cells per layer (coat last)", "decay [mm]", "NTU",
                                "error");
  for (std::size_t g = 0; g < c.segments.size(); ++g) {
    const SegmentSpec& s = c.segments[g];
    const SegmentGridEstimate& e = estimates[g];
    std::string radial;
    for (const LayerSpec& l : s.layers) radial += fmt::format("{}{}{} ", l.tissue.substr(0, 0), l.cells, l.cellsAuto ? "*" : "");
    if (s.coat) radial += fmt::format("| {}{}", s.coat->cells, s.coat->cellsAuto ? "*" : "");
    std::string axial = s.shape == Shape::Sphere ? "-" : fmt::format("{}{}", s.axialCells, s.axialAuto ? "*" : "");
    double err = s.shape == Shape::Sphere ? 0.0 : axialGridError(e, s.length, s.axialCells);
    for (std::size_t i = 0; i < s.layers.size(); ++i) {
      const double scale = s.shape == Shape::Cone ? 0.5 * (1.0 + s.radiusDistal / s.radiusProximal) : 1.0;
      err = std::max(err, radialError(s.layers[i].thickness * scale / s.layers[i].cells, e.layerScale[i]));
    }
    if (s.coat) err = std::max(err, radialError(s.coat->thickness / s.coat->cells, e.layerScale.back()));
    out += fmt::format("  {:<14}{:>8}  {:<34}{:>12}{:>8}{:>8.2g}%\n", s.name, axial, radial,
                       std::isfinite(e.decayLength) && e.axialForced ? fmt::format("{:.3g}", 1e3 * e.decayLength) : "-",
                       e.ntu > 0.0 ? fmt::format("{:.3g}", e.ntu) : "-", 100.0 * err);
  }
  return out;
}

}  // namespace thermorph
