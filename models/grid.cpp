#include "models/grid.hpp"

#include <algorithm>
#include <cmath>
#include <cstring>
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

//! Relative error of the heat a countercurrent exchanger of N cells lets through (1 - epsilon of the largest
//! possible heat: what a cooled appendage loses through it). Each cell exchanges g = G/N between the means of its
//! inlet and outlet temperatures of both streams (Body::linkExchanger): exact for a balanced counterflow
//! exchanger away from the segment's ends (Incropera et al. 2007, eq. 11.35 / Table 11.3 with C_r = 1); at the
//! ends the cell's own node stands for the inlet, and with unequal capacity rates the trapezoidal rule has its
//! (dz)^2 error, so the leak's error is second order, about c (NTU/N)^2. c = 0.5 bounds the values measured on
//! tests/test_whole_body.cpp `[exchanger]` (balanced: (NTU/N)^2 / (1 + NTU), C_r = 0.5: 0.2-0.5 (NTU/N)^2 at
//! NTU 1-14, N 20-80). The upwind cells before (exchange between the outlet temperatures) transferred
//! NTU / (1 + NTU + NTU/N) and let through an error about NTU times larger than that, first order.
//! That holds for a stream that passes through to a child; the share `ownShare` of the flow that the segment's own
//! tissue draws along its length misses by kOwnStreamErrorConstant (NTU/N)^2 of its blood heat (grid.hpp).
double exchangerConstant(double ownShare) { return (1.0 - ownShare) * 0.5 + ownShare * kOwnStreamErrorConstant; }
double exchangerError(double ntu, int n, double ownShare) {
  if (!(ntu > 0.0)) return 0.0;
  const double x = ntu / n;
  return exchangerConstant(ownShare) * x * x;
}

//! Radial error estimate of a layer with cells of thickness dr against its length scale (second order; the
//! constant 1/48 calibrated on the example cases against 4x refinement, `thermorph refine`).
double radialError(double dr, double scale) {
  if (!(scale > 0.0) || !std::isfinite(scale)) return 0.0;
  const double x = dr / scale;
  return x * x / 48.0;
}

//! Relative error of the surface heat flux at a time tau after a step of the surroundings (and of the heat
//! exchanged since), cells of size dx, penetration depth delta = sqrt(alpha tau): kPenetrationErrorConstant
//! (dx / delta)^2. The form is that of a second-order scheme; the constant was measured (ours) by solving the
//! cell-centred scheme with a half-cell surface conductance in series with 1/h exactly in time (matrix
//! exponential) against the semi-infinite solid with surface convection (Carslaw & Jaeger 1959, sec. 2.7;
//! Incropera et al. 2007, eq. 5.60): (dx/delta)^-2 times the error of the flux at tau and of the heat lost
//! over [0, tau] stays below 0.076 for h delta / k from 0.8 to 800 and dx / delta from 0.25 to 1.
double transientError(double dx, double delta) {
  if (!(delta > 0.0) || !std::isfinite(delta)) return 0.0;
  const double x = dx / delta;
  return kPenetrationErrorConstant * x * x;
}

//! Volume of the shell between a and b [m3]: a sphere's, a plate's (both halves, width w) or a cylinder's of
//! length L.
double shellVolume(Shape shape, double width, double length, double a, double b) {
  switch (shape) {
    case Shape::Sphere: return 4.0 / 3.0 * pi * (b * b * b - a * a * a);
    case Shape::Plate: return 2.0 * width * length * (b - a);
    default: return pi * (b * b - a * a) * length;
  }
}

//! One radial layer as the estimator sees it.
struct Layer {
  double inner = 0.0, outer = 0.0;  //!< [m] from the axis or mid-plane (cones: at mid-length)
  double k = 0.0, kWet = 0.0;       //!< [W/(m K)]
  double capacity = 0.0;            //!< rho c [J/(m3 K)]
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
    L.capacity = t.density * t.specificHeat;
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
    L.capacity = t.density * t.specificHeat;
    L.coat = true;
    out.push_back(L);
  }
  return out;
}

//! Steady exposed end faces of a cylinder or cone (`ends` of them: a root's two, a child's distal one), filled into
//! e.tissueEndShare, e.coatEndShare and e.coatEndDecay. Near an exposed end the tissue cools towards the face over
//! the decay length 1/m, and a coat's own annular end (the lateral coat is cut flush with the tissue) draws heat
//! out of the coat over the coat's axial decay length; cells longer than these miss the end heat as the discrete
//! fin does (finError). Each end is a semi-infinite fin (Incropera et al. 2007, Table 3.4, case D: q = kAm theta)
//! in series with its face, so the end heat is G theta with 1/G = 1/(kAm) + 1/(h_e A), and only the fin part of
//! that resistance, G/(kAm), carries the grid error. The coat's annulus is a fin of axial conductance k_c A_c tied
//! to the skin (from its mid radius) and to the surroundings (outer half in series with the surface), with its
//! far-field excess gin/(gin + gout) of the skin's. Each counts with its share of the segment's surface heat,
//! against the lateral U' L (theta of the skin taken as the tissue's: conservative for a coat). Tissue end faces
//! under the end coat see h_e = 1/(t_c/k_c + 1/h). Measured on a perfused trunk of radius 5 cm, length 18 cm
//! under 2.5 cm of feathers at -15 degC (tests/test_grid.cpp): bare ends 11 / 3.9 / 1.1 % low on 10 / 20 / 40
//! axial cells against 320 cells (estimate 8.7 / 3.5 / 1.1 %); coated ends 3.6 / 1.3 / 0.37 % (estimate
//! 5 / 1.5 / 0.37 %). Before this term the estimate said 0.13 % on the automatic 4 cells, 8 % (coated) and 30 %
//! (bare) low.
void endFaceTerms(SegmentGridEstimate& e, const std::vector<Layer>& ls, int ends, double m, double h, double lateral,
                  bool wet, bool endCoat) {
  if (ends <= 0 || !(h > 0.0) || ls.empty()) return;
  double kTissue = 0.0, rTissue = 0.0;
  const Layer* coat = nullptr;
  for (const Layer& L : ls) {
    if (L.coat) {
      coat = &L;
      continue;
    }
    kTissue += L.k * pi * (L.outer * L.outer - L.inner * L.inner);
    rTissue = L.outer;
  }
  double tissueEnd = 0.0, tissueFinPart = 0.0, coatEnd = 0.0, coatFinPart = 0.0;
  // Face conductance per area: the surface, under the end coat (Body::addEndFaces) in series with it.
  const double face = coat && endCoat ? 1.0 / ((coat->outer - coat->inner) / (wet ? coat->kWet : coat->k) + 1.0 / h) : h;
  if (kTissue > 0.0 && m > 0.0) {
    const double area = pi * rTissue * rTissue;
    const double fin = kTissue * m;
    tissueEnd = ends / (1.0 / fin + 1.0 / (face * area));
    tissueFinPart = (1.0 / fin) / (1.0 / fin + 1.0 / (face * area));
  }
  if (coat) {
    const double k = wet ? coat->kWet : coat->k;
    const double a = coat->inner, b = coat->outer, mid = 0.5 * (a + b);
    const double gin = 2.0 * pi * k / std::log(mid / a);
    const double gout = 1.0 / (std::log(b / mid) / (2.0 * pi * k) + 1.0 / (h * 2.0 * pi * b));
    const double kA = k * pi * (b * b - a * a);
    const double mc = std::sqrt((gin + gout) / kA);
    const double fin = kA * mc, faceG = face * pi * (b * b - a * a);
    coatEnd = ends * gin / (gin + gout) / (1.0 / fin + 1.0 / faceG);
    coatFinPart = (1.0 / fin) / (1.0 / fin + 1.0 / faceG);
    e.coatEndDecay = 1.0 / mc;
  }
  const double total = tissueEnd + coatEnd + lateral;
  if (!(total > 0.0)) return;
  e.tissueEndShare = tissueEnd / total * tissueFinPart;
  e.coatEndShare = coatEnd / total * coatFinPart;
  e.coatEndRadialShare = coatEnd / total;
}

//! The elimination of crossingShares over one shape's cells (area: face area per unit length at a radius; volume:
//! shellVolume per unit length between two radii), into g (conductance to the next cell) and diag (the eliminated
//! diagonal). The same operations in the same order as building each cell's row and eliminating it (Thomas
//! algorithm) one cell at a time, with the tests of where a cell lies taken out of the loop: the first cell of the
//! body (no cell before it), a layer's last cell (its conductance to the next layer's half cell) and the body's
//! last cell (to the surroundings, gs) are done outside the loop over a layer's inner cells.
template <class Area, class Volume>
void eliminateCells(const std::vector<Layer>& ls, bool wet, double rhoCBlood, double finM2, int perLayer, double gs,
                    Area area, Volume volume, double* g, double* diag) {
  auto conductivity = [&](const Layer& L) { return L.coat && wet ? L.kWet : L.k; };
  auto halfResistance = [&](const Layer& L) {  // 0.5 dr / k of the layer's cells
    return 0.5 * ((L.outer - L.inner) / perLayer) / conductivity(L);
  };
  const std::size_t layers = ls.size();
  double gPrevious = 0.0, diagPrevious = 0.0;  // g and diag of the cell before (none before the first)
  bool first = true;
  for (std::size_t i = 0; i < layers; ++i) {
    const Layer& L = ls[i];
    const bool lastLayer = i + 1 == layers;
    const double d = (L.outer - L.inner) / perLayer;
    const double kk = conductivity(L);
    const double b = L.coat ? 0.0 : L.perfusion * rhoCBlood + kk * finM2;
    const double here = 0.5 * d / kk, next = !lastLayer ? halfResistance(ls[i + 1]) : here;
    const double inside = here + here, across = here + next;  // the two half cells between centres
    // Cell j of this layer: its conductance to the next cell (the sum of the two half resistances over the face
    // area, `halves`; none for the body's last cell), its diagonal with the cell before and after it, eliminated
    // against the cell before.
    auto cell = [&](int j, double halves, bool bodyEnd) {
      const double r0 = L.inner + j * d, r1 = r0 + d;
      const double rf = 0.5 * (r0 + r1) + 0.5 * d;
      const double gHere = bodyEnd ? 0.0 : 1.0 / (halves / area(rf));
      double diagHere = b * volume(r0, r1) + (first ? 0.0 : gPrevious) + (bodyEnd ? gs : gHere);
      if (!first) {
        const double f = -gPrevious / diagPrevious;
        diagHere -= f * -gPrevious;
      }
      *g++ = gHere;
      *diag++ = diagHere;
      gPrevious = gHere;
      diagPrevious = diagHere;
      first = false;
    };
    int j = 0;
    if (first && perLayer > 1) cell(j++, inside, false);
    // The layer's inner cells: no cell is the first or the last of the body, each joins the next across two of
    // this layer's half cells.
    for (; j + 1 < perLayer; ++j) {
      const double r0 = L.inner + j * d, r1 = r0 + d;
      const double rf = 0.5 * (r0 + r1) + 0.5 * d;
      const double gHere = 1.0 / (inside / area(rf));
      double diagHere = b * volume(r0, r1) + gPrevious + gHere;
      const double f = -gPrevious / diagPrevious;
      diagHere -= f * -gPrevious;
      *g++ = gHere;
      *diag++ = diagHere;
      gPrevious = gHere;
      diagPrevious = diagHere;
    }
    cell(j, across, lastLayer);  // the layer's last cell
  }
}

//! Share of a segment's surface heat that crosses the outer face of each layer (coat last), from a fine 1-D radial
//! model of its cross-section: tissue tied to the arterial temperature (0) by its perfusion w rho_b c_b and, where a
//! junction or exposed end draws heat along the segment, by the fin term k m^2 (the heat axial conduction brings
//! per volume, -d/dz(k dT/dz) = k m^2 theta in a fin of parameter m), the surface at conductance h [W/(m2 K)] to
//! surroundings at -1. A layer's own discretisation error (relative, in the heat it delivers to the layers outside
//! it) reaches the segment's heat flows only in that share: a perfused core layer whose temperature sits at the
//! arterial one delivers little of what the surface loses (cold feet trunk viscera: refining 8 -> 32 cells moved
//! its convection by 0.013 %, where the unweighted estimate said 2 %). Outer layers, which the whole surface heat
//! crosses, keep weight 1. 400 cells per layer; cell-centred finite volumes with linear half cells (ours).
std::vector<double> crossingShares(Shape shape, double width, const std::vector<Layer>& ls, bool wet, double rhoCBlood,
                                   double finM2, double h, std::vector<double>* drop = nullptr) {
  std::vector<double> shares(ls.size(), 1.0);
  if (!(h > 0.0) || ls.empty()) return shares;
  constexpr int perLayer = 400;
  auto area = [&](double r) {  // face area per unit length (a sphere: whole)
    switch (shape) {
      case Shape::Sphere: return 4.0 * pi * r * r;
      case Shape::Plate: return 2.0 * width;
      default: return 2.0 * pi * r;
    }
  };
  // One pass per cell builds the tridiagonal system and eliminates it (Thomas algorithm) as it goes (this runs for
  // every segment of every case load, sweep runs included): conductance g[j] between cells j and j + 1 and from the
  // last cell through the surface to the surroundings (gs), rows
  // -g[j-1] t[j-1] + (g[j-1] + g[j] + beta V) t[j] - g[j] t[j+1] = rhs, the surroundings at -1. The arrays are kept
  // per thread and not zeroed: every element read is written first (zeroing them was a quarter of the estimate's
  // instructions).
  const std::size_t n = ls.size() * perLayer;
  auto conductivity = [&](const Layer& L) { return L.coat && wet ? L.kWet : L.k; };
  const double rs = ls.back().outer;
  const double gs = 1.0 / (0.5 * ((ls.back().outer - ls.back().inner) / perLayer) / (conductivity(ls.back()) * area(rs)) +
                           1.0 / (h * area(rs)));
  thread_local std::vector<double> gStore, diagStore, tStore;
  if (gStore.size() < n) {
    gStore.resize(n);
    diagStore.resize(n);
    tStore.resize(n);
  }
  double* g = gStore.data();
  double* diag = diagStore.data();
  double* t = tStore.data();
  // The shape's area and shell volume per unit length (shellVolume with length 1), chosen once per call.
  switch (shape) {
    case Shape::Sphere:
      eliminateCells(ls, wet, rhoCBlood, finM2, perLayer, gs, [](double r) { return 4.0 * pi * r * r; },
                     [](double a, double b) { return shellVolume(Shape::Sphere, 0.0, 1.0, a, b); }, g, diag);
      break;
    case Shape::Plate:
      eliminateCells(ls, wet, rhoCBlood, finM2, perLayer, gs, [&](double) { return 2.0 * width; },
                     [&](double a, double b) { return shellVolume(Shape::Plate, width, 1.0, a, b); }, g, diag);
      break;
    default:
      eliminateCells(ls, wet, rhoCBlood, finM2, perLayer, gs, [](double r) { return 2.0 * pi * r; },
                     [](double a, double b) { return shellVolume(Shape::Cylinder, 0.0, 1.0, a, b); }, g, diag);
      break;
  }
  // The right-hand side is zero but for the last row (-gs), and elimination leaves it so (f 0 subtracted from 0).
  t[n - 1] = -gs / diag[n - 1];
  for (std::size_t j = n - 1; j-- > 0;) t[j] = (0.0 - -g[j] * t[j + 1]) / diag[j];
  // Per layer, as a fraction of the contrast between the arterial temperature and the surroundings: the drop of
  // the steady temperature across the layer (first to last cell centre; storageHeatBound).
  if (drop) {
    drop->assign(ls.size(), 0.0);
    for (std::size_t i = 0; i < ls.size(); ++i) (*drop)[i] = std::abs(t[i * perLayer] - t[(i + 1) * perLayer - 1]);
  }
  const double surface = gs * (t[n - 1] + 1.0);  // outward [W per unit length per K]
  if (!(surface > 0.0)) return shares;
  for (std::size_t i = 0; i + 1 < ls.size(); ++i) {
    const std::size_t j = (i + 1) * perLayer - 1;  // last cell of layer i
    shares[i] = std::clamp(g[j] * (t[j] - t[j + 1]) / surface, 0.0, 1.0);
  }
  return shares;
}

//! crossingShares through a record of the cross-sections this thread has solved: the same inputs, bit for bit, give
//! the same shares and drops, so a cross-section seen before is not solved again. A sweep loads its case once per
//! run, and where the run's overrides leave a segment's layers, blood, fin term and surface conductance as they were
//! (a controller's gain, a metabolic rate; not a size series, whose radii change, nor the surroundings, whose
//! surface conductance changes), its 400 cells per layer were solved again for each run (a third of a quadruped
//! run's case load). Up to kRecorded cross-sections, the oldest replaced first.
std::vector<double> recordedCrossingShares(Shape shape, double width, const std::vector<Layer>& ls, bool wet,
                                           double rhoCBlood, double finM2, double h, std::vector<double>& drop) {
  constexpr std::size_t kRecorded = 64;
  struct Record {
    std::vector<double> key;  // every input, compared as bits (memcmp): -0 and 0 differ, a NaN matches itself
    std::vector<double> shares, drop;
  };
  thread_local std::vector<Record> records;
  thread_local std::size_t next = 0;
  thread_local std::vector<double> key;
  key.clear();
  key.push_back(static_cast<double>(static_cast<int>(shape)));
  key.push_back(wet ? 1.0 : 0.0);
  for (double v : {width, rhoCBlood, finM2, h}) key.push_back(v);
  for (const Layer& L : ls)  // what crossingShares reads of a layer (not its capacity)
    for (double v : {L.inner, L.outer, L.k, L.kWet, L.perfusion, L.coat ? 1.0 : 0.0}) key.push_back(v);
  auto same = [&](const std::vector<double>& k) {
    return k.size() == key.size() && std::memcmp(k.data(), key.data(), key.size() * sizeof(double)) == 0;
  };
  for (const Record& r : records)
    if (same(r.key)) {
      drop = r.drop;
      return r.shares;
    }
  std::vector<double> shares = crossingShares(shape, width, ls, wet, rhoCBlood, finM2, h, &drop);
  Record r{key, shares, drop};
  if (records.size() < kRecorded) records.push_back(std::move(r));
  else records[next++ % kRecorded] = std::move(r);
  return shares;
}

//! Whether an [[events]] entry's control table names the controller `name` (it may enable it during the run).
bool namedByEvent(const Case& c, const std::string& name) {
  for (const EventSpec& ev : c.events)
    for (const ControlTarget& t : ev.control)
      if (t.controller == name) return true;
  return false;
}

//! Largest surface conductance (convection + radiation + evaporation + substrate slopes) of a segment's lateral
//! face over the timeline [W/(m2 K)], and whether the segment is ever in water. A segment that sweats evaporates
//! over the wetted fraction sweating can reach (the conservative choice: max(w_0, control.sweating.max) at every
//! probed time where sweatingActs), so where sweating is strong its conductance, and the cells it asks for, are
//! those of the wet skin the run may have, not of the dry one.
struct SurfaceProbe {
  std::vector<double> conductance;
  std::vector<bool> everWet;
  std::vector<std::vector<char>> immersed;  //!< per segment, per probed time: in water
  std::vector<std::vector<double>> wetted;  //!< per segment, per probed time: wetted fraction
  std::vector<double> times;                //!< the probed times [s] (as immersed's entries)
  std::vector<double> contrast;             //!< per segment: largest |initial temperature - fluid| [K]
  std::vector<double> sweatingReach;        //!< per segment: the wetted fraction probed for sweating (-1: none)
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
  probe.immersed.assign(n, {});
  probe.wetted.assign(n, {});
  probe.contrast.assign(n, 0.0);
  // Sweating's state at its upper limit: EnvironmentModel::sweatingWettedFraction gives w_0 + clamp(max, 0, max - w_0),
  // i.e. max(w_0, max), on the segments it wets.
  const bool sweating = sweatingActs(c);
  const double reach = c.control.sweating.upper;
  probe.sweatingReach.assign(n, -1.0);
  std::vector<double> times{0.0};
  for (double b : env.breakpoints()) times.push_back(b);
  times.push_back(c.run.duration);
  std::vector<double> heat(network.channels.size()), slope(network.channels.size()), dControl(network.channels.size());
  const double body = std::max(c.run.initialTemperature, 300.0);
  for (std::size_t k = 0; k + 1 < times.size(); ++k) {
    env.setInterval(k);
    for (double t : {times[k], times[k + 1]}) {
      probe.times.push_back(t);
      for (Index g = 0; g < n; ++g) {
        probe.immersed[g].push_back(env.immersed(g, t) ? 1 : 0);
        probe.wetted[g].push_back(env.wettedFraction(g, t));
        if (env.immersed(g, t)) probe.everWet[g] = true;
        const double fluid = env.fluid(g, t).temperature;
        probe.contrast[g] = std::max(probe.contrast[g], std::abs(c.run.initialTemperature - fluid));
        for (double Ts : {fluid + 0.5 * (body - fluid), fluid + 0.1 * (body - fluid), fluid + 1.0}) {
          std::fill(heat.begin(), heat.end(), 0.0);
          std::fill(slope.begin(), slope.end(), 0.0);
          if (sweating && env.sweats(g)) {
            env.controlledFaceHeat(g, Ts, t, reach, heat, slope, dControl);
            probe.sweatingReach[g] = std::max(probe.sweatingReach[g], env.sweatingWettedFraction(g, t, reach));
          } else {
            env.faceHeat(g, Ts, t, heat, slope);
          }
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

bool sweatingActs(const Case& c) {
  const ControllerSpec& s = c.control.sweating;
  return s.present && s.gain > 0.0 && s.upper > 0.0 && (s.enabled || namedByEvent(c, "sweating"));
}

double forcingInterval(const Case& c) {
  // Steps: a start from a uniform temperature (the body meets its surroundings at t = 0) and every event inside
  // the run that steps (ramp 0; a steady start already holds the conditions at t = 0, so an event at 0 is then
  // no step). Ramped events, and weather-file rows (read as ramps between rows), change the surroundings
  // smoothly and count as no steps (our simplification: a ramp's surface history is smooth, so its error is
  // that of the steady rule at the ramp's end). Each step acts until the next change of any kind (a step or a
  // ramp's start) or the end of the run.
  std::vector<double> steps, changes;
  if (c.run.initial == InitialCondition::Temperature) steps.push_back(0.0);
  for (const EventSpec& ev : c.events) {
    if (!(ev.at < c.run.duration)) continue;
    changes.push_back(std::max(ev.at, 0.0));
    if (ev.ramp <= 0.0 && (ev.at > 0.0 || c.run.initial == InitialCondition::Temperature))
      steps.push_back(std::max(ev.at, 0.0));
  }
  double tau = std::numeric_limits<double>::infinity();
  for (double t : steps) {
    double next = c.run.duration;
    for (double u : changes)
      if (u > t) next = std::min(next, u);
    if (next > t) tau = std::min(tau, next - t);
  }
  return std::isfinite(tau) ? tau : 0.0;
}

namespace {

//! axialGridError of graded cells. With `above` finite, the searches' question only: as soon as one term is known to
//! exceed `above`, that term is returned (then the error exceeds `above` too) and the costlier terms are not computed
//! (the fin's exp and the leak's pow per cell). It returns early only where the fin term cannot be NaN (a finite
//! weight, and finError's argument, at most the distal cell over the decay length, below 1e50), since std::max of
//! the five terms is NaN exactly when the fin's, the first, is.
double gradedAxialGridError(const SegmentGridEstimate& e, double length, int nz, double grading, double above) {
  // Each error with the cell lengths where it arises. The edges once (SegmentSpec::axialEdges without a segment,
  // axialLengths' differences inline): this runs for every cell count of the automatic grading's searches
  // (estimateGrid), a few hundred times per case load.
  const std::vector<double> edges = axialCellEdges(length, nz, grading);
  const std::size_t cells = edges.size() - 1;
  const double last = edges[cells] - edges[cells - 1];  // the distal cell, the longest
  const bool finTerm = e.axialForced && e.decayLength > 0.0 && std::isfinite(e.decayLength);
  const bool early = std::isfinite(above) && (!finTerm || (std::isfinite(e.endWeight) && last / e.decayLength < 1e50));
  // Exposed ends (transient and steady): the distal end cell, the longest.
  const double ends = e.endShare * transientError(last, e.endPenetration);
  const double steadyEnds = e.tissueEndShare * finError(last / e.decayLength) +
                            (e.coatEndDecay > 0.0 ? e.coatEndShare * finError(last / e.coatEndDecay) : 0.0);
  if (early && ends > above) return ends;
  if (early && steadyEnds > above) return steadyEnds;
  // The fin's: an appendage's junction at the proximal end, its profile decaying like exp(-z/l) and its error
  // density like the square of the gradient, so the cells count with exp(-2 z/l) (uniform cells: dz itself).
  // A root's ends and attachments may lie anywhere: its longest cell.
  double fin = 0.0;
  if (finTerm) {
    double dzEff = last;
    if (e.appendage) {
      double num = 0.0, den = 0.0;
      for (std::size_t i = 0; i < cells; ++i) {
        const double dz = edges[i + 1] - edges[i];
        const double w = std::exp(-(edges[i] + edges[i + 1]) / e.decayLength) * dz;
        num += w * dz * dz;
        den += w;
      }
      if (den > 0.0) dzEff = std::sqrt(num / den);
    }
    fin = e.endWeight * finError(dzEff / e.decayLength);
  }
  if (early && fin > above) return fin;
  // The exchanger's leak: c NTU^2 times the length-weighted mean of (dz/L)^2 (uniform cells: c (NTU/N)^2). The
  // longer distal cells weigh more than that mean says: c = 1 (not the uniform 0.5) bounds the graded errors
  // measured against Incropera et al. 2007, Table 11.3 (tests/test_graded.cpp `[exchanger]`: C_r = 0.5, NTU 3
  // and 14, Q 10 and 100, 40-160 cells); the segment's own stream kOwnStreamErrorConstant (grid.hpp: at most 0.04
  // measured on graded cells).
  double leak = 0.0;
  if (e.ntu > 0.0) {
    for (std::size_t i = 0; i < cells; ++i) leak += std::pow((edges[i + 1] - edges[i]) / length, 3);
    leak *= e.ntu * e.ntu * ((1.0 - e.ownStreamShare) + e.ownStreamShare * kOwnStreamErrorConstant);
  }
  if (early && leak > above) return leak;
  // The stream to a child (the uniform rule's childStream, kChildStreamErrorConstant (NTU_c dz / L)^2 weighted by the
  // child's blood share): the artery gives up the segment's own perfusion on its way, so near the child's junction
  // it carries little more than the child's flow, and there its capacity rate changes fastest and its exchange
  // per length is largest (NTU_c / L): the error arises in the cells next to the junction, and their length counts
  // (uniform cells: L / N, the uniform term). Graded towards the proximal end, the longest cells lie at the distal
  // end, where a child at attach_position = 1 joins (the cold feet leg: 10 cells graded Q = 30, foot 2.3 % off,
  // DEVELOPERS.md "Cheapest axial grading"). The junction's cell, and where the junction lies on a face between
  // two cells, the longer of them. Measured on the limb of tests/test_grid.cpp (leg graded Q = 10, 30, 100 on 20-160
  // cells, the foot's blood heat against Richardson): within the estimate everywhere, the estimate 1.2-2.0 times
  // the error on 160 cells (Q = 10 there has the local NTU_c dz / L of the counts the rule lands on, 0.09) and far
  // above it on coarse cells. As the uniform term's, the constant falls short beyond those counts (the error there
  // converges at order 1-2, not yet 2: uniform 144 cells 0.36 % against 0.25 % estimated).
  double childStream = 0.0;
  if (e.childNtu > 0.0) {
    const double at = e.childAttach * length;
    double dz = 0.0;
    for (std::size_t i = 0; i < cells; ++i)
      if (edges[i + 1] >= at - 1e-12 * length && edges[i] <= at + 1e-12 * length)
        dz = std::max(dz, edges[i + 1] - edges[i]);
    childStream = e.childBloodShare * kChildStreamErrorConstant * std::pow(e.childNtu * dz / length, 2);
  }
  return std::max({fin, ends, steadyEnds, leak, childStream});
}

//! Whether axialGridError(e, length, nz, grading) > target (the automatic searches' test).
bool axialGridErrorAbove(const SegmentGridEstimate& e, double length, int nz, double grading, double target) {
  return grading > 1.0 ? gradedAxialGridError(e, length, nz, grading, target) > target
                       : axialGridError(e, length, nz, grading) > target;
}

//! Automatic axial cells graded `grading` (> 1) towards the proximal end: the fewest (searched in steps of 10 %) whose
//! estimated error meets `target`, at least the uniform count up to 10 (shunts and children sit where the case puts
//! them), even.
int gradedAxialCells(const SegmentGridEstimate& e, double length, double grading, double target) {
  int n = 4;
  while (n < kMaxAutoAxialCells && axialGridErrorAbove(e, length, n, grading, target)) n = std::max(n + 1, n * 11 / 10);
  n = std::max(n, std::min(e.axialNeeded, 10));
  return n + n % 2;
}

}  // namespace

AxialGrid cheapestAxialGrid(const SegmentGridEstimate& e, double length, double target) {
  AxialGrid best{1.0, e.axialNeeded};
  for (double q : {10.0, 30.0, 100.0, 300.0, 1000.0}) {
    const int n = gradedAxialCells(e, length, q, target);
    if (n < best.cells) best = {q, n};
  }
  return best;
}

double axialGridError(const SegmentGridEstimate& e, double length, int nz, double grading) {
  if (grading > 1.0) return gradedAxialGridError(e, length, nz, grading, std::numeric_limits<double>::infinity());
  double fin = e.axialForced && e.decayLength > 0.0 && std::isfinite(e.decayLength)
                   ? e.endWeight * finError(length / nz / e.decayLength)
                   : 0.0;
  const double ends = e.endShare * transientError(length / nz, e.endPenetration);
  const double dz = length / nz;
  const double steadyEnds = e.tissueEndShare * finError(dz / e.decayLength) +
                            (e.coatEndDecay > 0.0 ? e.coatEndShare * finError(dz / e.coatEndDecay) : 0.0);
  const double childStream = e.childBloodShare * kChildStreamErrorConstant * std::pow(e.childNtu / nz, 2);
  return std::max({fin, ends, steadyEnds, exchangerError(e.ntu, nz, e.ownStreamShare), childStream});
}

double layerGridError(const SegmentGridEstimate& e, std::size_t i, double thickness, int cells, double grading) {
  // Graded cells (layers[].grading): the thickest, innermost cell sets the error of the smooth profile.
  LayerSpec layer;
  layer.cells = std::max(cells, 1);
  layer.grading = grading;
  const double dr = layer.largestCell(thickness);
  double err = std::max(e.layerWeight.at(i) * radialError(dr, e.layerScale.at(i)),
                        i < e.layerCoreScale.size() ? radialError(dr, e.layerCoreScale[i]) : 0.0);
  if (i < e.layerPenetration.size()) err = std::max(err, e.layerStepShare[i] * transientError(dr, e.layerPenetration[i]));
  if (e.coatEndRadialShare > 0.0 && i + 1 == e.layerScale.size())  // the coat (last) at its exposed ends
    err = std::max(err, e.coatEndRadialShare * kCoatCornerConstant / (double(cells) * cells));
  return err;
}

StorageTransientError storageTransientError(const SegmentSpec& s, const SegmentGridEstimate& e, double t) {
  StorageTransientError out;
  if (!(t > 0.0)) return out;
  double depth = 0.0;  // through the layers outside, in units of their own 2 delta
  for (std::size_t j = e.layerDiffusivity.size(); j-- > 0;) {
    const bool coat = j >= s.layers.size();
    if (coat && !s.coat) continue;
    const double thickness = coat ? s.coat->thickness : s.layers[j].thickness;
    const int cells = std::max(coat ? s.coat->cells : s.layers[j].cells, 1);
    const double alpha = e.layerDiffusivity[j];
    if (!(alpha > 0.0)) continue;
    const double delta = std::sqrt(alpha * t);
    const double err = std::erfc(depth) * transientError(thickness / cells, delta);
    if (err > out.error) out = {err, j, cells};
    depth += thickness / (2.0 * delta);
  }
  return out;
}

StorageHeatBound storageHeatBound(const SegmentSpec& s, const SegmentGridEstimate& e) {
  StorageHeatBound out;
  double worst = -1.0;
  for (std::size_t j = 0; j < e.layerStorageHeat.size(); ++j) {
    const bool coat = j >= s.layers.size();
    if (coat && !s.coat) continue;
    LayerSpec layer;
    layer.cells = std::max(coat ? s.coat->cells : s.layers[j].cells, 1);
    layer.grading = coat ? 1.0 : s.layers[j].grading;
    const double x = layer.largestCell(1.0);  // dx / L
    const double heat = kStorageErrorConstant * x * x * e.layerStorageHeat[j];
    out.heat += heat;
    if (heat > worst) worst = heat, out.layer = j, out.cells = layer.cells;
  }
  return out;
}

//! Per unit length of a segment: the conductance U' from the tissue to the surroundings (surface conductance h in
//! series with the coat and tissue radial resistances), the perfusion term sum w rho_b c_b A to the arterial blood
//! and the axial conductance sum k A; the fin parameter m = sqrt((U' + perfusion) / sum k A) (0 for spheres).
struct Fin {
  double axial = 0.0, blood = 0.0, surface = 0.0, m = 0.0;  // [W m/K], [W/(m K)], [W/(m K)], [1/m]
};

Fin finOf(const SegmentSpec& s, const std::vector<Layer>& ls, double h, bool wet, double rc) {
  Fin f;
  if (ls.empty()) return f;
  const bool plate = s.shape == Shape::Plate;
  double resistance = 0.0;  // [m K/W]
  for (std::size_t i = 0; i < ls.size(); ++i) {
    const Layer& L = ls[i];
    const double k = L.coat && wet ? L.kWet : L.k;
    const double section = plate ? 2.0 * s.width * (L.outer - L.inner) : pi * (L.outer * L.outer - L.inner * L.inner);
    f.axial += k * section;
    f.blood += L.perfusion * rc * section;
    // Radial resistance per unit length: the first layer from its mean temperature (uniform source:
    // 1/(8 pi k) for a rod, delta/(3 k) per area for a slab), then each layer across its thickness.
    if (plate) resistance += (i == 0 ? (L.outer - L.inner) / 3.0 : (L.outer - L.inner)) / (k * 2.0 * s.width);
    else resistance += i == 0 ? 1.0 / (8.0 * pi * k) : std::log(L.outer / L.inner) / (2.0 * pi * k);
  }
  const double perimeter = plate ? 2.0 * s.width : 2.0 * pi * ls.back().outer;
  f.surface = h > 0.0 ? 1.0 / (resistance + 1.0 / (h * perimeter)) : 0.0;
  f.m = s.shape == Shape::Sphere || !(f.axial > 0.0) ? 0.0 : std::sqrt((f.surface + f.blood) / f.axial);
  return f;
}

//! The storage transient after a start from a uniform temperature (storageHeatBound), for each controller output
//! that drives a term: the heat misplaced in its scope, over the scope's heat capacity C, shifts its signal, and
//! the output by gain x shift; the check after the run (drivers/record_control_grid.cpp) states that relative to
//! max(u, kControlOutputFloor x range). The automatic radial cells keep the sum over the scope's layers
//! sum_j a_j / N_j^2 (a_j = copies kPenetrationErrorConstant H_j) within B = half the check's limit at the floor:
//! 0.5 max(1 %, run.grid_tolerance) kControlOutputFloor range C / gain [J], at the least cells (Lagrange:
//! N_j proportional to (a_j / c_j)^(1/3), c_j the segment's axial cells, the nodes a radial cell costs).
//! Scopes as the check's: a body-wide controller's (core, mean skin) the whole body, a local_skin controller's its
//! segment. Measured on cases/cold_feet_demo.toml: DEVELOPERS.md "Coats in the automatic grid's storage rule".
void storageRule(const Case& c, const std::vector<std::vector<Layer>>& layers, std::vector<SegmentGridEstimate>& out) {
  if (c.run.initial != InitialCondition::Temperature || out.size() != c.segments.size()) return;
  const std::size_t n = c.segments.size();
  // Copies of each segment in the body (its count times its ancestors').
  std::vector<double> copies(n, 1.0);
  for (Index g = 0; g < n; ++g) {
    copies[g] = c.segments[g].count;
    for (std::string parent = c.segments[g].parent; !parent.empty();) {
      Index p = 0;
      while (p < n && c.segments[p].name != parent) ++p;
      if (p == n) break;
      copies[g] *= c.segments[p].count;
      parent = c.segments[p].parent;
    }
  }
  // A controller named in an event's control table may be enabled by it.
  auto named = [&](const std::string& name) { return namedByEvent(c, name); };
  struct Output {
    double gain, range;
    std::vector<Index> scope;
  };
  std::vector<Output> outputs;
  std::vector<Index> all(n);
  for (Index g = 0; g < n; ++g) all[g] = g;
  std::vector<char> local(n, 0);
  for (const LocalControllerSpec& l : c.control.local)
    for (const std::string& name : l.segments)
      for (Index g = 0; g < n; ++g)
        if (c.segments[g].name == name) local[g] = 1;
  const ControlSpec& cs = c.control;
  if (cs.vasomotor.present && bodyWideVasomotorActs(c) && (cs.vasomotor.enabled || named("vasomotor"))) {
    outputs.push_back({cs.vasomotor.gain, cs.vasomotor.upper - cs.vasomotor.lower, all});
    // Its shunts drive a term only where a segment with shunts follows it (not a local controller).
    for (Index g = 0; g < n; ++g)
      if (!local[g] && c.segments[g].vessels.shuntFlowMax > 0.0) {
        outputs.push_back({cs.vasomotor.shuntGain, 1.0, all});
        break;
      }
  }
  if (cs.shivering.present && (cs.shivering.enabled || named("shivering"))) outputs.push_back({cs.shivering.gain, 1.0, all});
  if (cs.panting.present && (cs.panting.enabled || named("panting")))
    outputs.push_back({cs.panting.gain, cs.panting.upper - cs.panting.lower, all});
  // Sweating drives the evaporation of its segments' faces (Network::faceControls); its signal (core, mean skin)
  // reads the body, so its scope is the whole body, as the check's.
  if (sweatingActs(c)) outputs.push_back({cs.sweating.gain, cs.sweating.upper - cs.sweating.lower, all});
  for (const LocalControllerSpec& l : cs.local) {
    const bool on = l.enabled || named(l.name);
    for (const std::string& name : l.segments)
      for (Index g = 0; g < n; ++g) {
        if (c.segments[g].name != name) continue;
        const std::vector<Index> scope = l.signal == ControlSignal::LocalSkin ? std::vector<Index>{g} : all;
        if (on) {
          outputs.push_back({l.gain, l.upper - l.lower, scope});
          if (c.segments[g].vessels.shuntFlowMax > 0.0) outputs.push_back({l.shuntGain, 1.0, scope});
        }
        if (civdActs(l)) outputs.push_back({1.0 / l.civd->width, 1.0, {g}});  // always on; its own skin
      }
  }
  const double limit = std::max(kGridWarnError, c.run.gridTolerance);
  const int cap = static_cast<int>(std::ceil(kMaxAutoPenetrationCells * std::sqrt(kGridTargetError / gridTargetError(c)) - 1e-9));
  for (const Output& o : outputs) {
    if (!(std::abs(o.gain) > 0.0) || !(o.range > 0.0)) continue;
    double capacity = 0.0;  // of the scope, copies weighted [J/K]
    for (Index g : o.scope)
      for (const Layer& L : layers[g])
        capacity += copies[g] * L.capacity * shellVolume(c.segments[g].shape, c.segments[g].width, c.segments[g].length,
                                                         L.inner, L.outer);
    const double budget = 0.5 * limit * kControlOutputFloor * o.range * capacity / std::abs(o.gain);
    if (!(budget > 0.0)) continue;
    double sum = 0.0;  // sum a^(1/3) c^(2/3)
    auto cost = [&](Index g) {
      const SegmentGridEstimate& e = out[g];
      if (c.segments[g].shape == Shape::Sphere) return 1.0;
      return double(e.gradingNeeded > 1.0 ? e.gradedNeeded : e.axialNeeded);
    };
    for (Index g : o.scope)
      for (double h : out[g].layerStorageHeat)
        if (h > 0.0) sum += std::cbrt(copies[g] * kStorageErrorConstant * h) * std::pow(cost(g), 2.0 / 3.0);
    for (Index g : o.scope)
      for (std::size_t j = 0; j < out[g].layerStorageHeat.size() && j < out[g].layerNeeded.size(); ++j) {
        const double a = copies[g] * kStorageErrorConstant * out[g].layerStorageHeat[j];
        if (!(a > 0.0)) continue;
        const int cells = static_cast<int>(std::ceil(std::cbrt(a / cost(g)) * std::sqrt(sum / budget) - 1e-9));
        out[g].layerNeeded[j] = std::max(out[g].layerNeeded[j], std::min(cells, cap));
      }
  }
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
      own[g] += L.perfusion * shellVolume(s.shape, s.width, s.length, L.inner, L.outer);
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

  std::vector<Fin> fins(n);
  for (Index g = 0; g < n; ++g) fins[g] = finOf(c.segments[g], layers[g], probe.conductance[g], probe.everWet[g], rc);
  // The smallest blood flow of each copy and its children [m3/s]: the skin layers' perfusion at the lowest
  // multiplier the case allows (the segment's static vasomotor state and every event's, times the lower limit of the
  // local or body-wide vasomotor controller that acts on it), other tissues at theirs. A static state that an
  // [[events]] step at t = 0 sets over never acts (vasomotorSetAtStart), so it does not count.
  std::vector<double> ownMin(n, 0.0), flowMin(n, 0.0);
  for (Index g = 0; g < n; ++g) {
    const SegmentSpec& s = c.segments[g];
    double skin = vasomotorSetAtStart(c, s.name, &VasomotorTarget::skinPerfusion).first
                      ? std::numeric_limits<double>::infinity()
                      : s.vasomotor.skinPerfusion;
    for (const EventSpec& ev : c.events)
      for (const VasomotorTarget& v : ev.vasomotor)
        if (targetsSegment(v.segment, s.name) && v.skinPerfusion) skin = std::min(skin, *v.skinPerfusion);
    // A segment a local controller names follows it (on or off), never the body-wide one.
    double lower = 1.0;
    for (const LocalControllerSpec& l : c.control.local)
      if (l.enabled && std::find(l.segments.begin(), l.segments.end(), s.name) != l.segments.end())
        lower = std::min(lower, l.lower);
    if (followsBodyWideVasomotor(c, g) && c.control.vasomotor.present && c.control.vasomotor.enabled)
      lower = std::min(lower, c.control.vasomotor.lower);
    skin *= lower;
    for (std::size_t i = 0; i < s.layers.size(); ++i) {
      const Layer& L = layers[g][i];
      const bool isSkin = c.tissues.at(s.layers[i].tissue).role == TissueRole::Skin;
      ownMin[g] += (isSkin ? skin : 1.0) * L.perfusion * shellVolume(s.shape, s.width, s.length, L.inner, L.outer);
    }
  }
  std::function<double(Index)> totalMin = [&](Index g) {
    double q = ownMin[g];
    for (Index ch : children[g]) q += c.segments[ch].count * totalMin(ch);
    return q;
  };
  for (Index g = 0; g < n; ++g) flowMin[g] = totalMin(g);

  const double target = gridTargetError(c);  // run.grid_tolerance / 2
  const double tau = forcingInterval(c);
  // The core segment: body.core_segment, else the root (as Body).
  Index coreIndex = 0;
  for (Index g = n; g-- > 0;)
    if (c.body.coreSegment.empty() ? c.segments[g].parent.empty() : c.segments[g].name == c.body.coreSegment)
      coreIndex = g;
  std::vector<SegmentGridEstimate> out;
  for (Index g = 0; g < n; ++g) {
    const SegmentSpec& s = c.segments[g];
    const std::vector<Layer>& ls = layers[g];
    SegmentGridEstimate e;
    e.segment = s.name;
    e.surfaceConductance = probe.conductance[g];
    e.sweatingReach = probe.sweatingReach[g];
    e.forcingInterval = tau;
    const bool plate = s.shape == Shape::Plate, curved = !plate;
    const bool wet = probe.everWet[g];
    // A water line at the junction: the child in water and its parent in air (or the reverse) at some time.
    for (Index p = 0; p < n; ++p)
      if (!s.parent.empty() && c.segments[p].name == s.parent && p < probe.immersed.size() && g < probe.immersed.size())
        for (std::size_t k = 0; k < probe.immersed[g].size() && k < probe.immersed[p].size(); ++k)
          if (probe.immersed[g][k] != probe.immersed[p][k]) e.waterLineParent = s.parent;
    // A bare child on a coated parent: the parent's warm skin under its coat meets the child's exposed skin at the
    // junction's rim, a corner whose heat needs cells near the Biot length k/h of the child's skin.
    for (Index p = 0; p < n; ++p)
      if (!s.parent.empty() && c.segments[p].name == s.parent && c.segments[p].coat && !s.coat && !s.layers.empty() &&
          probe.conductance[g] > 0.0)
        e.junctionBiotLength = c.tissues.at(s.layers.back().tissue).conductivity / probe.conductance[g];
    // A coat that leaves the water during the run: its wetted fraction then, and when that reaches 0 in air (the
    // probed times are the intervals' ends: a ramp's end is one).
    if (s.coat && g < probe.immersed.size())
      for (std::size_t k = 1; k < probe.immersed[g].size() && k < probe.times.size(); ++k)
        if (probe.immersed[g][k - 1] && !probe.immersed[g][k] && e.coatLeavesWater < 0.0) {
          e.coatLeavesWater = probe.times[k];
          e.coatWetOnLeaving = probe.wetted[g][k];
          for (std::size_t j = k; j < probe.immersed[g].size() && !probe.immersed[g][j]; ++j) {
            e.coatWetAtEnd = probe.wetted[g][j];
            if (probe.wetted[g][j] <= 0.0) {
              e.coatDriedAt = probe.times[j];
              break;
            }
          }
        }

    // Transient penetration (grid.hpp): from the outside in, each layer's delta = sqrt(alpha tau) and the share
    // erfc(depth / (2 delta)) of a surface step that reaches its outer face, the depth counted through the
    // layers outside it in units of their own 2 delta (the coat at its smaller, dry or wet, diffusivity).
    e.layerPenetration.assign(ls.size(), 0.0);
    e.layerStepShare.assign(ls.size(), 0.0);
    e.layerDiffusivity.assign(ls.size(), 0.0);
    for (std::size_t j = 0; j < ls.size(); ++j)
      if (ls[j].capacity > 0.0) e.layerDiffusivity[j] = std::min(ls[j].k, ls[j].kWet) / ls[j].capacity;
    if (tau > 0.0) {
      double depth = 0.0;
      for (std::size_t j = ls.size(); j-- > 0;) {
        const Layer& L = ls[j];
        if (!(L.capacity > 0.0)) continue;
        const double delta = std::sqrt(std::min(L.k, L.kWet) / L.capacity * tau);
        // A coat (fur, feathers: rho c ~ 1e5, a twentieth of tissue) stores little of the heat a step exchanges
        // over tau: it keeps the steady rule here, and counts in the depth of the layers inside it; what it stores
        // after a uniform start, which controllers see, is storageRule's.
        if (!L.coat) {
          e.layerPenetration[j] = delta;
          e.layerStepShare[j] = std::erfc(depth);
        }
        depth += (L.outer - L.inner) / (2.0 * delta);
      }
    }

    // Fin parameter (not for spheres): per unit length, the conductance to the surroundings U' and to the arterial
    // blood, over the axial conductance of every layer (finOf).
    const double h = probe.conductance[g];
    const double surface = fins[g].surface, blood = fins[g].blood, m = fins[g].m;
    e.appendage = !s.parent.empty();
    e.axialForced = s.shape != Shape::Sphere &&
                    (!s.parent.empty() || !children[g].empty() ||
                     (s.shape != Shape::Plate && s.surface.ends == EndCondition::Exposed));
    // Radial length scales per layer: the perfusion length, and for curved shapes the inner radius; each layer's
    // error weighted by the share of the surface heat that crosses it (crossingShares).
    // The estimate (check, warnings) is weighted; the automatic counts keep the unweighted rule, a margin the 4x
    // checks of the examples need: on weighted counts (inner layers of heads, bills, limbs 3-8 -> 2-5 cells) the
    // large bill's 6 cm bill exchanged 1.28 % less than on a 4x grid (within 1 % before), where refining one layer at a
    // time moved it at most 0.25 % (the estimate: 0.46 %) - the errors of the layers, the axial cells and the
    // junction add. And on the diver's trunk (the core segment) the weighted counts (viscera and muscle 2 and 2
    // cells instead of 8 and 6) moved the surface heat 0.1 % but the core 0.014 K and the thermogenesis over the
    // bout 4.9 %: the core temperature is the innermost layer's volume mean, and controllers magnify its error.
    // So however little heat crosses the core segment's innermost layer, the estimate keeps its curvature (its
    // radius) unweighted (limb_cooling's forelimb, bone of radius 5 mm in 1 cell instead of 4: heat flows 0.06 %,
    // core temperature 0.086 K).
    std::vector<double> drop;
    e.layerWeight = recordedCrossingShares(s.shape, s.width, ls, wet, rc, e.axialForced ? m * m : 0.0, h, drop);
    // The storage transient after a start from a uniform temperature (storageHeatBound): per layer its heat
    // capacity C times the drop D across it on the steady profile times D over the whole contrast.
    e.layerStorageHeat.assign(ls.size(), 0.0);
    if (c.run.initial == InitialCondition::Temperature && drop.size() == ls.size())
      for (std::size_t i = 0; i < ls.size(); ++i)
        e.layerStorageHeat[i] = ls[i].capacity * shellVolume(s.shape, s.width, s.length, ls[i].inner, ls[i].outer) *
                                probe.contrast[g] * drop[i] * drop[i];
    const bool coreSegment = g == coreIndex;
    e.layerCoreScale.assign(ls.size(), std::numeric_limits<double>::infinity());
    if (coreSegment && curved && !ls.empty()) e.layerCoreScale[0] = ls[0].outer;
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
      // The cap grows with a tighter run.grid_tolerance (8 cells at the default), so that tightening still refines.
      cells = std::clamp(cells, 2, static_cast<int>(std::ceil(kMaxAutoLayerCells * std::sqrt(kGridTargetError / target) - 1e-9)));
      // Transient: cells of at most delta sqrt(target / (C share)), up to kMaxAutoPenetrationCells.
      if (e.layerStepShare[i] * transientError(L.outer - L.inner, e.layerPenetration[i]) > target) {
        const double dr = e.layerPenetration[i] * std::sqrt(target / (kPenetrationErrorConstant * e.layerStepShare[i]));
        cells = std::max(cells, std::min(static_cast<int>(std::ceil((L.outer - L.inner) / dr - 1e-9)),
                                         static_cast<int>(std::ceil(kMaxAutoPenetrationCells *
                                                                    std::sqrt(kGridTargetError / target) - 1e-9))));
      }
      e.layerNeeded.push_back(cells);
    }
    if (s.shape == Shape::Sphere) {
      e.decayLength = std::numeric_limits<double>::infinity();
      out.push_back(e);
      continue;
    }

    e.decayLength = m > 0.0 ? 1.0 / m : std::numeric_limits<double>::infinity();
    // Exposed end faces under a transient (cylinders, cones): a root has two, a child its distal one. Their
    // share of the exposed area weights the end-face error; their delta is that of the cross-section's
    // area-weighted diffusivity sum k A / sum rho c A.
    if (tau > 0.0 && s.shape != Shape::Plate && s.surface.ends == EndCondition::Exposed) {
      double kA = 0.0, cA = 0.0;
      for (const Layer& L : ls) {
        const double section = pi * (L.outer * L.outer - L.inner * L.inner);
        kA += std::min(L.k, L.kWet) * section;
        cA += L.capacity * section;
      }
      const double r0 = s.shape == Shape::Cone ? s.radiusProximal : s.tissueRadius();
      const double r1 = s.shape == Shape::Cone ? s.radiusDistal : s.tissueRadius();
      const double coat = s.coat ? s.coat->thickness : 0.0;
      const double a0 = pi * std::pow(r0 + coat, 2), a1 = pi * std::pow(r1 + coat, 2);
      const double ends = s.parent.empty() ? a0 + a1 : a1;
      const double lateral = pi * (r0 + r1 + 2.0 * coat) * s.length;
      if (cA > 0.0) {
        e.endPenetration = std::sqrt(kA / cA * tau);
        e.endShare = ends / (ends + lateral);
      }
    }
    if (s.shape != Shape::Plate && s.surface.ends == EndCondition::Exposed)
      endFaceTerms(e, ls, s.parent.empty() ? 2 : 1, m, h, surface * s.length, wet, s.surface.endCoat);
    if (s.coat && e.coatEndRadialShare > 0.0) {
      const int cells = static_cast<int>(std::ceil(std::sqrt(e.coatEndRadialShare * kCoatCornerConstant / target) - 1e-9));
      e.layerNeeded.back() = std::max(e.layerNeeded.back(), std::min(cells, static_cast<int>(std::ceil(
                                                               kMaxAutoLayerCells * std::sqrt(kGridTargetError / target) - 1e-9))));
    }
    e.ntu = s.vessels.countercurrentConductance > 0.0 && flow[g] > 0.0
                ? s.vessels.countercurrentConductance / (rc * flow[g])
                : 0.0;
    e.ownStreamShare = flow[g] > 0.0 ? std::clamp(own[g] / flow[g], 0.0, 1.0) : 0.0;
    // The stream that reaches a child. The artery gives up the segment's own perfusion along its length, so towards
    // the distal end it carries little more than the children's flow F_c, and the exchanger brings that stream
    // near the vein's temperature with the NTU G / (rho_b c_b F_c), not G / (rho_b c_b F_total); F_c at the
    // smallest flow the vasomotor states allow (flowMin: a constricted child's stream has the largest NTU). The
    // child's blood heat then misses by about kChildStreamErrorConstant (NTU_c / N)^2 (measured, grid.hpp), which
    // reaches the child's heat flows in the share of them that comes with its blood, taken as the resting
    // perfusion term / (U'_c + perfusion term) (the complement of the child's junction weight; a sphere child
    // counts in full). That share is measured, not derived: the constricted cold foot still takes 45 % of its heat
    // from its blood (0.106 of 0.236 W), where the constricted perfusion term says 8 % and the resting one 36 %.
    // The cold feet limb (tests/test_grid.cpp; G 0.02 W/K, foot 0.053 mL/min constricted, NTU_c 5.9, share 0.36),
    // the foot's blood heat and loss against their values on 1152 leg cells: 3.8 and 1.8 % on 18 cells (what the
    // whole stream's NTU, 0.097, asked for), 2.1 and 0.78 % on 36, 0.96 and 0.35 % on 72, 0.36 and 0.13 % on 144;
    // 0.3 % in the loss on 18 cells with the exchanger off (so the exchanger carries it). The rule asks for 62.
    for (Index ch : children[g]) {
      const double fc = c.segments[ch].count * flowMin[ch];
      if (!(s.vessels.countercurrentConductance > 0.0) || !(fc > 0.0)) continue;
      const Fin& cf = fins[ch];
      const double share = c.segments[ch].shape == Shape::Sphere || !(cf.surface + cf.blood > 0.0)
                               ? 1.0
                               : cf.blood / (cf.surface + cf.blood);
      const double ntu = s.vessels.countercurrentConductance / (rc * fc);
      if (ntu * std::sqrt(share) > e.childNtu * std::sqrt(e.childBloodShare)) {
        e.childNtu = ntu;
        e.childBloodShare = share;
        e.childStream = c.segments[ch].name;
        e.childAttach = std::clamp(c.segments[ch].attachPosition, 0.0, 1.0);
      }
    }
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
    if ((e.axialForced && m > 0.0) || e.endShare > 0.0 || e.tissueEndShare > 0.0 || e.coatEndShare > 0.0)
      while (nz < kMaxAutoAxialCells && axialGridError(e, s.length, nz) > target) nz = std::max(nz + 1, nz * 11 / 10);
    if (e.ntu > 0.0)
      nz = std::max(nz, static_cast<int>(std::ceil(
                            e.ntu * std::sqrt(exchangerConstant(e.ownStreamShare) / target) - 1e-9)));
    if (e.childNtu > 0.0)
      nz = std::max(nz, static_cast<int>(std::ceil(
                            e.childNtu * std::sqrt(kChildStreamErrorConstant * e.childBloodShare / target) - 1e-9)));
    // Shunts open over the distal half and children attach at a position: enough cells that both sit where
    // the case puts them.
    if (s.vessels.shuntFlowMax > 0.0 || !children[g].empty()) nz = std::max(nz, 10);
    if (nz % 2) ++nz;
    e.axialNeeded = std::min(nz, kMaxAutoAxialCells);
    e.gradedNeeded = e.axialNeeded;
    // A water line at the junction: the parent's skin under air (or a coat) meets the child's skin in water, a
    // corner whose temperature gradient grows like log(1/r) towards it, which uniform cells resolve only slowly
    // (the example wading bird's knee: conduction into the leg 4.8 % below its Richardson value on 284 uniform
    // cells, 0.5 % on 1136; observed order 1.57). Geometric grading towards the junction puts cells of the
    // corner's own scale there: the smallest Q of 10, 30, 100, 300, 1000 whose proximal cell is at most a tenth of
    // the outermost tissue layer (where the surface condition jumps), on as many graded cells as the estimate
    // asks (the longer distal cells count in the exchanger's and the ends' errors). Measured on the wading bird's
    // leg: DEVELOPERS.md "Graded axial cells".
    // The smallest Q of 10, 30, 100, 300, 1000 whose proximal cell is at most `corner`, on as many graded cells as
    // the estimate asks (the longer distal cells count in the exchanger's and the ends' errors).
    auto gradeTowardsJunction = [&](double corner) {
      for (double q : {10.0, 30.0, 100.0, 300.0, 1000.0}) {
        int cells = 4;
        while (cells < kMaxAutoAxialCells && axialGridErrorAbove(e, s.length, cells, q, target))
          cells = std::max(cells + 1, cells * 11 / 10);
        if (s.vessels.shuntFlowMax > 0.0 || !children[g].empty()) cells = std::max(cells, 10);
        if (cells % 2) ++cells;
        cells = std::min(cells, kMaxAutoAxialCells);
        e.gradingNeeded = q;
        e.gradedNeeded = cells;
        if (s.length * std::expm1(std::log(q) / cells) / std::expm1(std::log(q)) <= corner) return;
      }
      // Q = 1000 is not enough on these cells: more of them.
      const double lnQ = std::log(e.gradingNeeded);
      while (e.gradedNeeded < kMaxAutoAxialCells && s.length * std::expm1(lnQ / e.gradedNeeded) / std::expm1(lnQ) > corner)
        e.gradedNeeded = std::min(kMaxAutoAxialCells, e.gradedNeeded + std::max(2, e.gradedNeeded / 10 * 2));
    };
    if (!e.waterLineParent.empty() && e.appendage && !s.layers.empty()) {
      // The corner is two-dimensional: the outermost tissue layer, where the surface condition jumps, also gets
      // four times its radial cells (wading bird's leg, skin 2 / 4 / 8 cells on 550 graded axial cells: knee
      // conduction 0.1795 / 0.1813 / 0.1820 W, observed order 1.4).
      int& skin = e.layerNeeded[s.layers.size() - 1];
      skin = std::min(4 * skin, kMaxAutoPenetrationCells);
      gradeTowardsJunction(0.1 * s.layers.back().thickness);
    }
    // A bare child on a coated parent: the parent's warm skin under its coat meets the child's skin at the rim of
    // the junction. Where the child's skin has a Biot length k/h shorter than its thickness (in water), its
    // surface sits near the water's temperature a few k/h from the rim, and the heat across that corner converges
    // only once the cells there are a fraction of k/h in both directions (an invented swimmer's feet, k/h =
    // 0.059 mm, skin 1.5 mm: uniform cells 26 % low; kBiotCornerFraction). Axial cells graded towards the junction
    // and the skin's radial cells graded towards its surface put cells of that size at the corner only.
    const double biot = e.junctionBiotLength;
    if (e.waterLineParent.empty() && biot > 0.0 && e.appendage && !s.layers.empty() && s.shape != Shape::Sphere &&
        biot < s.layers.back().thickness) {
      const double corner = kBiotCornerFraction * biot;
      if (s.length / e.axialNeeded > corner) gradeTowardsJunction(corner);
      int& skin = e.layerNeeded[s.layers.size() - 1];
      LayerSpec graded;
      graded.cells = skin;
      if (s.layers.back().thickness / skin > corner) {
        graded.cells = std::max(skin, kBiotCornerSkinCells);
        for (double q : {10.0, 30.0, 100.0, 300.0, 1000.0}) {
          graded.grading = q;
          if (graded.outermostCell(s.layers.back().thickness) <= corner) break;
        }
        while (graded.cells < kMaxAutoPenetrationCells && graded.outermostCell(s.layers.back().thickness) > corner)
          ++graded.cells;
        skin = graded.cells;
        e.skinGradingNeeded = graded.grading;
      }
    }
    out.push_back(e);
  }
  storageRule(c, layers, out);
  return out;
}

namespace {

//! Whether run.axial_grading = "graded" may grade segment g: an appendage (not a sphere) whose axial cells and
//! grading are both left out and that no corner grades already, unless a child meets it at a corner the automatic
//! grid grades the child towards (a water line or a bare skin's Biot corner, the child's gradingNeeded > 1): graded
//! cells of the parent cover that junction with their longest cells where the child joins at its distal end, and
//! the estimate has no term for the parent's side of the corner. Measured (tests/bench/graded_refine.py,
//! DEVELOPERS.md "Cheapest axial grading"): the wading bird's thigh graded 10 cells Q = 10 missed its Richardson
//! value by 5.7 % (estimate 0.30 %; uniform 16 cells 0.33 %), the day-cycle case's legs 20 cells Q = 100 by 1.1 %
//! (estimate 0.46 %; uniform 124 cells 0.18 %).
//! Shunts (their heat enters the skin over the distal half, where graded cells are longest) have no term of their
//! own: the cold feet foot with its shunts open, 26 cells Q = 10, is 0.24 % from its Richardson value against an
//! estimate of 0.19 % (shunts closed: 0.19 %; uniform 72 cells 0.07 %); the winged mammal's wings, with shunts,
//! within theirs. Left as it is (DEVELOPERS.md "Cheapest axial grading").
bool gradingOffered(const Case& c, const std::vector<SegmentGridEstimate>& estimates, std::size_t g) {
  const SegmentSpec& s = c.segments[g];
  const SegmentGridEstimate& e = estimates[g];
  if (s.shape == Shape::Sphere || !e.appendage || !s.axialAuto || !s.gradingAuto || e.gradingNeeded > 1.0) return false;
  for (std::size_t ch = 0; ch < c.segments.size(); ++ch)
    if (c.segments[ch].parent == s.name && (estimates[ch].gradingNeeded > 1.0 || !estimates[ch].waterLineParent.empty()))
      return false;
  return true;
}

}  // namespace

void resolveGrid(Case& c) {
  c.gridEstimates = std::make_shared<const std::vector<SegmentGridEstimate>>(estimateGrid(c));
  const std::vector<SegmentGridEstimate>& estimates = *c.gridEstimates;
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
        // Graded automatically only when neither axial_cells nor axial_grading is given; a given grading gets
        // as many cells as the estimate asks for it.
        if (s.gradingAuto && e.gradingNeeded > 1.0) {
          s.axialGrading = e.gradingNeeded;
          s.axialCells = e.gradedNeeded * f;
        } else if (s.axialGrading > 1.0) {
          s.axialCells = gradedAxialCells(e, s.length, s.axialGrading, gridTargetError(c)) * f;
        } else if (c.run.axialGrading == AxialGradingRule::Graded && gradingOffered(c, estimates, g)) {
          // run.axial_grading = "graded": the cheapest of uniform and graded cells meeting the same estimate.
          const AxialGrid cheapest = cheapestAxialGrid(e, s.length, gridTargetError(c));
          s.axialGrading = cheapest.grading;
          s.axialCells = cheapest.cells * f;
        } else {
          s.axialCells = e.axialNeeded * f;
        }
        if (axialGridError(e, s.length, s.axialCells, s.axialGrading) > kGridWarnError)
          c.warnings.push_back(fmt::format(
              "grid: segment {}: {} axial cells (the automatic limit) leave an estimated error of {:.2g} % in its "
              "heat flows; give axial_cells to go further",
              s.name, s.axialCells, 100.0 * axialGridError(e, s.length, s.axialCells, s.axialGrading)));
      } else {
        const double err = axialGridError(e, s.length, s.axialCells, s.axialGrading);
        if (err > kGridWarnError) {
          int need = s.axialCells;
          while (need < 100000 && axialGridErrorAbove(e, s.length, need, s.axialGrading, kGridWarnError)) need = std::max(need + 1, need * 21 / 20);
          std::string why;
          if (e.axialForced && std::isfinite(e.decayLength)) why = fmt::format("decay length {:.3g} mm", 1e3 * e.decayLength);
          if (e.ntu > 0.0) why += fmt::format("{}countercurrent NTU {:.3g}", why.empty() ? "" : ", ", e.ntu);
          if (e.childNtu > 0.0)
            why += fmt::format("{}countercurrent NTU {:.3g} for the blood to {}", why.empty() ? "" : ", ", e.childNtu,
                               e.childStream);
          if (e.endShare > 0.0)
            why += fmt::format("{}penetration depth {:.3g} mm at the exposed ends over {:.3g} s between steps of "
                               "the surroundings", why.empty() ? "" : ", ", 1e3 * e.endPenetration,
                               e.forcingInterval);
          c.warnings.push_back(fmt::format(
              "grid: segment {}: axial_cells = {} leaves an estimated error of {:.2g} % in its heat flows ({}); "
              "{} axial cells meet 1 % (leave axial_cells out to choose automatically)",
              s.name, s.axialCells, 100.0 * err, why, need));
        }
      }
    }
    // The grid estimate assumes smooth surroundings along a segment. Where the water line lies at a junction, the
    // parent's skin under air (or a coat) meets the child's skin in water: the temperature gradient grows like
    // log(1/r) towards that corner and the heat across the junction converges more slowly than the estimate says
    // (the wading bird's knee: observed order about 1.6, the loss per leg 4.0 % below its 4x value on 284 uniform
    // leg cells, 0.8 % on 1136; DEVELOPERS.md "Whole-body grid convergence"). The automatic grid grades the cells
    // towards that junction (estimateGrid); on uniform cells (axial_cells given without axial_grading) it is said,
    // so a user grades them or checks with `thermorph refine`.
    if (!e.waterLineParent.empty() && !(s.axialGrading > 1.0))
      c.warnings.push_back(fmt::format(
          "grid: segment {}: the water line lies at its junction with {} (one in water, the other in air): on "
          "uniform axial cells the heat across that corner converges more slowly than the grid estimate assumes "
          "(the example wading bird's leg: 4 % below its 4x value on 284 uniform cells); leave axial_cells out "
          "to grade the cells towards the junction automatically, give axial_grading (e.g. {:g}), or check the "
          "numbers you use with `thermorph refine`",
          s.name, e.waterLineParent, e.gradingNeeded > 1.0 ? e.gradingNeeded : 100.0));
    // A coat that leaves the water: wet (its wetted fraction > 0 then), it evaporates and conducts as wet as that
    // fraction says while it dries (Body::setCoat); dry, it is dry at once, said so it is not silent.
    if (e.coatLeavesWater >= 0.0) {
      const TissueProperties& coat = c.tissues.at(s.coat->material);
      const bool conducts = coat.wetConductivity > 0.0 && coat.wetConductivity != coat.conductivity;
      if (e.coatWetOnLeaving > 0.0) {
        const std::string until =
            e.coatDriedAt >= 0.0 ? fmt::format("until it reaches 0 at t = {:g} s", e.coatDriedAt)
                                 : fmt::format("while it is above 0 ({:g} at the last time in air)", e.coatWetAtEnd);
        c.warnings.push_back(
            conducts ? fmt::format("segment {}: its coat leaves the water at t = {:g} s wet (wetted fraction {:g}): "
                                   "modelled are evaporation from its surface and a coat conductivity that follows "
                                   "the wetted fraction w, k_dry + w (k_wet - k_dry) between {:g} and {:g} W/(m K), "
                                   "{}",
                                   s.name, e.coatLeavesWater, e.coatWetOnLeaving, coat.conductivity,
                                   coat.wetConductivity, until)
                     : fmt::format("segment {}: its coat leaves the water at t = {:g} s wet (wetted fraction {:g}): "
                                   "modelled is evaporation from its surface {} (its material has no wet_conductivity "
                                   "of its own: it conducts as given, wet or dry)",
                                   s.name, e.coatLeavesWater, e.coatWetOnLeaving, until));
      } else {
        c.warnings.push_back(fmt::format(
            "segment {}: its coat leaves the water at t = {:g} s and is treated as dry from then on (dry conductivity, "
            "no evaporation of the water it holds): its wetted fraction is 0 then, so the heat lost after leaving the "
            "water is underestimated; surface.wetted_fraction = 1 (no evaporation in water) with an [[events]] entry "
            "at that time, ramp = the drying time and surface = {{ {} = {{ wetted_fraction = 0 }} }}, adds "
            "evaporation from the coat's surface and keeps its conductivity wet in proportion while it dries",
            s.name, e.coatLeavesWater, s.name));
      }
      c.timelineWarnings.push_back(c.warnings.back());  // an event after t = 0: not for a steady solve
    }
    // Radial cells per layer, the coat last.
    auto radial = [&](std::size_t i, int& cells, bool automatic, const std::string& what, double thickness,
                      double grading) {
      if (automatic) {
        cells = e.layerNeeded[i] * f;
        return;
      }
      cells *= f;
      const double err = layerGridError(e, i, thickness, cells, grading);
      if (err > kGridWarnError) {
        int need = cells;
        while (need < 100000 && layerGridError(e, i, thickness, need, grading) > kGridWarnError) ++need;
        std::string scale = fmt::format("length scale {:.3g} mm", 1e3 * e.layerScale[i]);
        if (e.layerStepShare[i] * transientError(thickness / cells, e.layerPenetration[i]) >
            radialError(thickness / cells, e.layerScale[i]))
          scale = fmt::format("penetration depth {:.3g} mm over {:.3g} s between steps of the surroundings",
                              1e3 * e.layerPenetration[i], e.forcingInterval);
        c.warnings.push_back(fmt::format(
            "grid: segment {}: {} has {} radial cells, an estimated error of {:.2g} % ({}); {} "
            "cells meet 1 % (leave cells out to choose automatically)",
            s.name, what, cells, 100.0 * err, scale, need));
      }
    };
    // The skin graded towards a Biot corner (estimateGrid) when neither its cells nor its grading are given.
    if (!s.layers.empty() && s.layers.back().cellsAuto && s.layers.back().gradingAuto && e.skinGradingNeeded > 1.0)
      s.layers.back().grading = e.skinGradingNeeded;
    const double scale = s.shape == Shape::Cone ? 0.5 * (1.0 + s.radiusDistal / s.radiusProximal) : 1.0;
    for (std::size_t i = 0; i < s.layers.size(); ++i)
      radial(i, s.layers[i].cells, s.layers[i].cellsAuto, fmt::format("layer {} ({})", i, s.layers[i].tissue),
             s.layers[i].thickness * scale, s.layers[i].grading);
    if (s.coat) radial(s.layers.size(), s.coat->cells, s.coat->cellsAuto, "the coat", s.coat->thickness, 1.0);
    // A bare child on a coated parent whose skin's Biot length is shorter than the skin, its cells at the corner
    // longer than kBiotCornerFraction of it (estimateGrid; the water line's warning above covers the same corner
    // where it applies).
    if (e.waterLineParent.empty() && e.junctionBiotLength > 0.0 && s.shape != Shape::Sphere && !s.layers.empty() &&
        e.junctionBiotLength < s.layers.back().thickness) {
      const double dz = s.axialLengths().front();
      const double dr = s.layers.back().outermostCell(s.layers.back().thickness);  // at the proximal end
      if (std::max(dz, dr) > kBiotCornerFraction * e.junctionBiotLength)
        c.warnings.push_back(fmt::format(
            "grid: segment {}: its bare skin meets the coated {} at the junction, and the Biot length of its skin "
            "k/h = {:.3g} mm is short: the cells at that corner ({:.3g} mm along, {:.3g} mm across the skin's "
            "surface) are longer than a tenth of it, and the heat across the corner is underestimated (an invented "
            "swimmer's bare feet on a furred trunk in water: 26 % low on uniform cells); leave the segment's "
            "axial_cells and its skin's cells out to have both graded towards the corner (README, Grid), or check "
            "the numbers you use with `thermorph refine`",
            s.name, s.parent, 1e3 * e.junctionBiotLength, 1e3 * dz, 1e3 * dr));
    }
    if (f > 1) {
      s.axialAuto = false;
      s.gradingAuto = false;
      for (LayerSpec& l : s.layers) l.cellsAuto = false;
      if (s.coat) s.coat->cellsAuto = false;
    }
  }
  c.run.gridRefinement = 1;  // applied: the counts above are the refined ones
  c.run.appliedRefinement *= f;
}

}  // namespace thermorph

namespace thermorph {

double segmentGridError(const Case& c, std::size_t g, const SegmentGridEstimate& e) {
  const SegmentSpec& s = c.segments[g];
  double err = s.shape == Shape::Sphere ? 0.0 : axialGridError(e, s.length, s.axialCells, s.axialGrading);
  for (std::size_t i = 0; i < s.layers.size(); ++i) {
    const double scale = s.shape == Shape::Cone ? 0.5 * (1.0 + s.radiusDistal / s.radiusProximal) : 1.0;
    err = std::max(err, layerGridError(e, i, s.layers[i].thickness * scale, s.layers[i].cells, s.layers[i].grading));
  }
  if (s.coat) err = std::max(err, layerGridError(e, s.layers.size(), s.coat->thickness, s.coat->cells));
  return err;
}

std::string gridSummary(const Case& c) {
  const std::vector<SegmentGridEstimate> estimates = estimateGrid(c);
  const double tau = estimates.empty() ? 0.0 : estimates.front().forcingInterval;
  std::string out = fmt::format("Grid (* chosen automatically; decay length 1/m of the fin parameter; error: estimated, "
                                "of the segment's heat flows)\n");
  for (const SegmentSpec& s : c.segments)
    if (s.shape != Shape::Sphere && s.axialGrading > 1.0) {
      out += "Axial N/Q: N cells graded towards the junction, Q = axial_grading (distal over proximal cell length)\n";
      break;
    }
  if (tau > 0.0)
    out += fmt::format("Transient: steps of the surroundings act for at least {:.4g} s; penetration depth "
                       "sqrt(alpha tau) of the outermost tissue layer and, for exposed ends, of the cross-section\n", tau);
  // Segments that sweat: their surface conductance counts evaporation over the wetted fraction sweating can reach.
  std::string sweating;
  double reach = -1.0;
  for (const SegmentGridEstimate& e : estimates)
    if (e.sweatingReach >= 0.0) {
      sweating += (sweating.empty() ? "" : ", ") + e.segment;
      reach = std::max(reach, e.sweatingReach);
    }
  if (!sweating.empty())
    out += fmt::format("Sweating: the surface conductance of {} counts evaporation over the wetted fraction sweating "
                       "can reach ({:g}, control.sweating.max or the skin's own if larger) at every time\n",
                       sweating, reach);
  if (std::any_of(estimates.begin(), estimates.end(), [](const SegmentGridEstimate& e) { return e.childNtu > 0.0; }))
    out += "NTU a/b: the exchanger's NTU for the segment's whole stream / for the stream that reaches its children\n";
  out += fmt::format("{:<14}{:>8}  {:<34}{:>12}{:>10}{:>14}{:>9}\n", "segment", "axial",
                     "radial cells per layer (coat last)", "decay [mm]", "NTU", "penetr. [mm]", "error");
  for (std::size_t g = 0; g < c.segments.size(); ++g) {
    const SegmentSpec& s = c.segments[g];
    const SegmentGridEstimate& e = estimates[g];
    std::string radial;
    for (const LayerSpec& l : s.layers)  // graded: Q after a slash, as the axial column
      radial += fmt::format("{}{}{} ", l.cells, l.cellsAuto ? "*" : "",
                            l.grading > 1.0 ? fmt::format("/{:g}{}", l.grading, l.gradingAuto ? "*" : "") : "");
    if (s.coat) radial += fmt::format("| {}{}", s.coat->cells, s.coat->cellsAuto ? "*" : "");
    std::string axial = s.shape == Shape::Sphere ? "-" : fmt::format("{}{}", s.axialCells, s.axialAuto ? "*" : "");
    if (s.shape != Shape::Sphere && s.axialGrading > 1.0)  // graded: Q after a slash
      axial += fmt::format("/{:g}{}", s.axialGrading, s.gradingAuto ? "*" : "");
    const double err = segmentGridError(c, g, e);
    std::string pen = "-";
    const std::size_t skin = s.layers.empty() ? 0 : s.layers.size() - 1;  // the outermost tissue layer
    if (skin < e.layerPenetration.size() && e.layerPenetration[skin] > 0.0) {
      pen = fmt::format("{:.3g}", 1e3 * e.layerPenetration[skin]);
      if (e.endShare > 0.0) pen += fmt::format("/{:.3g}", 1e3 * e.endPenetration);
    }
    out += fmt::format("  {:<14}{:>8}  {:<34}{:>12}{:>10}{:>14}{:>8.2g}%\n", s.name, axial, radial,
                       std::isfinite(e.decayLength) && e.axialForced ? fmt::format("{:.3g}", 1e3 * e.decayLength) : "-",
                       e.ntu > 0.0 ? (e.childNtu > 0.0 ? fmt::format("{:.2g}/{:.2g}", e.ntu, e.childNtu)
                                                       : fmt::format("{:.3g}", e.ntu))
                                   : "-",
                       pen, 100.0 * err);
  }
  // Appendages whose automatic uniform cells cost at least twice the cheapest graded grid's (run.axial_grading).
  std::string hints;
  if (c.run.axialGrading == AxialGradingRule::Uniform)
    for (std::size_t g = 0; g < c.segments.size(); ++g) {
      const SegmentSpec& s = c.segments[g];
      const SegmentGridEstimate& e = estimates[g];
      if (s.axialGrading > 1.0 || !gradingOffered(c, estimates, g)) continue;
      const AxialGrid cheapest = cheapestAxialGrid(e, s.length, gridTargetError(c));
      if (cheapest.grading > 1.0 && 2 * cheapest.cells <= s.axialCells)
        hints += fmt::format("hint: segment {}: {} uniform axial cells; {} cells graded towards its junction (Q = {:g}) "
                             "meet the same estimated error ({:.2g} %): run.axial_grading = \"graded\" chooses them "
                             "(README, Grid)\n",
                             s.name, s.axialCells, cheapest.cells, cheapest.grading,
                             100.0 * axialGridError(e, s.length, cheapest.cells, cheapest.grading));
    }
  return out + hints;
}

}  // namespace thermorph
