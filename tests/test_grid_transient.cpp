// The automatic grid under a transient (models/grid.cpp, penetration depth delta = sqrt(alpha tau)): a plane wall
// plunged from a uniform temperature into cold water, checked against the exact series of the plane wall with
// convection (Carslaw & Jaeger 1959, sec. 3.11; Incropera et al. 2007, eqs. 5.39a-c and 5.45-5.46) and, while the
// heat has not reached the mid-plane, the semi-infinite solid with surface convection (Incropera et al. 2007,
// eq. 5.60; Carslaw & Jaeger 1959, sec. 2.7).
#include <catch2/catch.hpp>

#include <algorithm>
#include <cmath>
#include <numbers>
#include <cstdio>
#include <string>
#include <vector>

#include "models/grid.hpp"
#include "test_support.hpp"

using namespace thermorph;
using namespace thermorph::testing;

namespace {

// Invented test material: alpha = k / (rho c) = 1.25e-7 m2/s; half-thickness L = 2 cm; water film h = 2000
// W/(m2 K) (a body swimming in cold water, order of the diver case), Bi = h L / k = 80. Duration tau = 120 s:
// delta = sqrt(alpha tau) = 3.9 mm, Fo = alpha tau / L^2 = 0.0375 (the heat has not reached the mid-plane).
constexpr double kTissue = 0.5, rhoTissue = 1000.0, cTissue = 4000.0, halfThickness = 0.02, hWater = 2000.0;
constexpr double tau = 120.0, initialK = 310.15, waterK = 277.15;
constexpr double alpha = kTissue / (rhoTissue * cTissue);

std::string plungedWall(const std::string& cells) {
  return "title = \"plane wall plunged into cold water\"\n[run]\nduration = " + num(tau) +
         "\noutput_interval = " + num(tau) + "\ninitial_temperature = " + num(initialK) +
         "\nrtol = 1e-9\natol = 1e-9\n[tissues.slab]\nconductivity = " + num(kTissue) + "\ndensity = " + num(rhoTissue) +
         "\nspecific_heat = " + num(cTissue) + "\nmetabolic_heat = 0\nperfusion = 0\nq10 = 1\n" +
         "[[segments]]\nname = \"wall\"\nshape = \"plate\"\nlength = 0.1\nwidth = 0.1\nlayers = [{ tissue = \"slab\", "
         "thickness = " + num(halfThickness) + cells + " }]\n[environment]\ntemperature = " + num(waterK) +
         "\nconvection = " + num(hWater) + "\n";
}

//! Plane wall with convection, Incropera et al. (2007) eqs. 5.39b-c: zeta_n tan zeta_n = Bi,
//! C_n = 4 sin zeta_n / (2 zeta_n + sin 2 zeta_n).
struct WallSeries {
  std::vector<double> zeta, coefficient;
  explicit WallSeries(double bi, int terms) {
    // Root n (from 0) lies in (n pi, (n + 1/2) pi); zeta tan zeta = Bi written without poles: zeta sin - Bi cos.
    for (int n = 0; n < terms; ++n) {
      const double a = n * std::numbers::pi + 1e-12, b = (n + 0.5) * std::numbers::pi - 1e-12;
      const double z = bisect([bi](double x) { return x * std::sin(x) - bi * std::cos(x); }, a, b);
      zeta.push_back(z);
      coefficient.push_back(4.0 * std::sin(z) / (2.0 * z + std::sin(2.0 * z)));
    }
  }
  //! theta* at the surface x* = 1 (eq. 5.39a).
  double surface(double fo) const {
    double s = 0.0;
    for (std::size_t n = 0; n < zeta.size(); ++n)
      s += coefficient[n] * std::exp(-zeta[n] * zeta[n] * fo) * std::cos(zeta[n]);
    return s;
  }
  //! Q / Q0, the share of the initial excess heat lost (eq. 5.46 with every term).
  double heatLost(double fo) const {
    double s = 0.0;
    for (std::size_t n = 0; n < zeta.size(); ++n)
      s += coefficient[n] * std::sin(zeta[n]) / zeta[n] * std::exp(-zeta[n] * zeta[n] * fo);
    return 1.0 - s;
  }
};

//! Semi-infinite solid with surface convection at x = 0 (Incropera et al. 2007, eq. 5.60):
//! (T_s - T_inf) / (T_i - T_inf) = exp(H^2 alpha t) erfc(H sqrt(alpha t)), H = h / k.
double semiInfiniteSurface(double t) {
  const double x = hWater / kTissue * std::sqrt(alpha * t);
  return std::exp(x * x) * std::erfc(x);
}

struct WallErrors {
  double flux = 0.0, heat = 0.0;  //!< largest relative error over the checked times [1]
};

//! Relative errors of the surface heat flux (from the heat content, central difference over +-0.25 s) and of the
//! heat lost, at tau/2, 3 tau/4 and tau.
WallErrors wallErrors(const Case& c) {
  Body body(c);
  const SegmentMesh& m = body.segments()[0];
  const WallSeries series(hWater * halfThickness / kTissue, 400);
  std::vector<double> times;
  for (double f : {0.5, 0.75, 1.0})
    for (double d : {-0.25, 0.0, 0.25}) times.push_back(f * tau + d);
  const auto states = temperaturesAt(body, times);
  // Heat lost per unit of the wall's initial excess heat rho c V (T_i - T_inf), V the tissue volume.
  auto lost = [&](const std::vector<double>& y) {
    double q = 0.0, v = 0.0;
    for (int iz = 0; iz < m.nz; ++iz)
      for (int ir = 0; ir < m.nr; ++ir) {
        const double cellVolume = m.volume[iz * m.nr + ir];
        q += cellVolume * (initialK - y[m.node(iz, ir)]);
        v += cellVolume;
      }
    return q / (v * (initialK - waterK));
  };
  WallErrors e;
  for (std::size_t k = 0; k < 3; ++k) {
    const double t = times[3 * k + 1], fo = alpha * t / (halfThickness * halfThickness);
    const double heat = lost(states[3 * k + 1]);
    // Flux through one face per rho c L (T_i - T_inf) [1/s]: d(Q/Q0)/dt; exact: h theta*_s / (rho c L).
    const double flux = (lost(states[3 * k + 2]) - lost(states[3 * k])) / 0.5;
    const double fluxExact = hWater * series.surface(fo) / (rhoTissue * cTissue * halfThickness);
    const double heatExact = series.heatLost(fo);
    std::printf("[grid] plunged wall, %d cells: t %5.1f s  flux %.6e (exact %.6e, %+.2e)  heat lost %.6f (exact "
                "%.6f, %+.2e)\n", m.nr, t, flux, fluxExact, flux / fluxExact - 1.0, heat, heatExact,
                heat / heatExact - 1.0);
    e.flux = std::max(e.flux, std::abs(flux / fluxExact - 1.0));
    e.heat = std::max(e.heat, std::abs(heat / heatExact - 1.0));
  }
  return e;
}

bool anyContains(const std::vector<std::string>& lines, const std::string& a, const std::string& b) {
  for (const std::string& l : lines)
    if (l.find(a) != std::string::npos && l.find(b) != std::string::npos) return true;
  return false;
}

}  // namespace

TEST_CASE("The plane-wall series used as reference agrees with the semi-infinite solid at early times",
          "[grid][validation]") {
  // Two independent solutions of the same problem (Incropera et al. 2007, eq. 5.39 with 400 terms against eq.
  // 5.60): at Fo = 0.0375 the mid-plane has not felt the surface, so they agree to far better than the 1 % test.
  const WallSeries series(hWater * halfThickness / kTissue, 400);
  for (double t : {0.5 * tau, tau}) {
    const double fo = alpha * t / (halfThickness * halfThickness);
    CHECK(series.surface(fo) == Approx(semiInfiniteSurface(t)).epsilon(1e-6));
  }
  // Table 5.1 of Incropera et al. (2007), Bi = 100 (our Bi 80 lies between 50 and 100): zeta_1 = 1.5552.
  const WallSeries table(100.0, 1);
  CHECK(table.zeta[0] == Approx(1.5552).margin(1e-4));
}

TEST_CASE("Automatic grid of a wall plunged into cold water resolves the penetration depth: within 1 % of the "
          "exact series where the steady rule alone misses", "[grid][validation]") {
  const Case automatic = loadCaseFromString(plungedWall(""), "wall.toml");
  const Case steadyOnly = loadCaseFromString(plungedWall(", cells = 2"), "wall.toml");  // the steady rule's count
  CHECK(forcingInterval(automatic) == Approx(tau));
  const int cells = automatic.segments[0].layers[0].cells;
  CHECK(automatic.segments[0].layers[0].cellsAuto);
  const WallErrors a = wallErrors(automatic), s = wallErrors(steadyOnly);
  std::printf("[grid] plunged wall (Bi 80, tau 120 s, delta %.2f mm): automatic %d cells: flux error %.2e, heat "
              "error %.2e; 2 cells (steady rule): %.2e, %.2e\n",
              1e3 * std::sqrt(alpha * tau), cells, a.flux, a.heat, s.flux, s.heat);
  CHECK(cells > 2);
  CHECK(a.flux <= 0.01);
  CHECK(a.heat <= 0.01);
  CHECK(std::max(s.flux, s.heat) > 0.05);
  // The given coarse grid says so, naming the penetration depth and a cell count that meets 1 %.
  CHECK(anyContains(steadyOnly.warnings, "segment wall", "penetration depth"));
  CHECK(anyContains(steadyOnly.warnings, "segment wall", "cells meet 1 %"));
  CHECK_FALSE(anyContains(automatic.warnings, "segment wall", "radial cells"));
}

TEST_CASE("Forcing interval: steps of the surroundings and how long each acts", "[grid]") {
  // The rule of models/grid.cpp (common practice, no source): a step acts until the next change or the end of the
  // run; a steady start holds the conditions at t = 0 (no step); a ramped event changes the surroundings smoothly
  // (no step, but it ends the interval of the step before it).
  std::string base = plungedWall("");
  Case c = loadCaseFromString(base, "wall.toml");
  c.run.duration = 3600.0;
  CHECK(forcingInterval(c) == Approx(3600.0));
  c.run.initial = InitialCondition::Steady;
  CHECK(forcingInterval(c) == 0.0);
  EventSpec e1, e2;
  e1.at = 600.0;
  e2.at = 900.0;
  c.events = {e1, e2};
  CHECK(forcingInterval(c) == Approx(300.0));  // 600 -> 900 s, then 900 -> 3600 s
  c.events[0].ramp = 1200.0;
  CHECK(forcingInterval(c) == Approx(2700.0));  // only the step at 900 s, acting until the end
  c.run.initial = InitialCondition::Temperature;
  CHECK(forcingInterval(c) == Approx(600.0));  // the start acts until the ramp begins
}

TEST_CASE("Exposed end faces under a transient get axial cells from the penetration depth - a coarse given count warns",
          "[grid]") {
  // A short cylinder (r 3 cm, L 10 cm) with bare ends plunged into water for 120 s, the material above: the rule of
  // models/grid.cpp asks for axial cells of at most a fraction of delta = sqrt(alpha tau) = 3.9 mm near the ends,
  // weighted by the ends' share of the exposed area (2 pi r^2 / (2 pi r^2 + 2 pi r L) = 0.23).
  auto cylinder = [](const std::string& axial) {
    return "[run]\nduration = " + num(tau) + "\noutput_interval = " + num(tau) + "\ninitial_temperature = " +
           num(initialK) + "\n[tissues.slab]\nconductivity = " + num(kTissue) + "\ndensity = " + num(rhoTissue) +
           "\nspecific_heat = " + num(cTissue) + "\nmetabolic_heat = 0\nperfusion = 0\nq10 = 1\n" +
           "[[segments]]\nname = \"rod\"\nshape = \"cylinder\"\nlength = 0.1\n" + axial +
           "layers = [{ tissue = \"slab\", thickness = 0.03 }]\n[environment]\ntemperature = " + num(waterK) +
           "\nconvection = " + num(hWater) + "\n";
  };
  const Case automatic = loadCaseFromString(cylinder(""), "rod.toml");
  const Case coarse = loadCaseFromString(cylinder("axial_cells = 4\n"), "rod.toml");
  const std::vector<SegmentGridEstimate> e = estimateGrid(automatic);
  CHECK(e[0].endShare == Approx(0.03 / (0.03 + 0.1)));
  CHECK(e[0].endPenetration == Approx(std::sqrt(alpha * tau)));
  // The chosen count meets the target: share (L / nz / delta)^2 / 13 <= 0.5 %.
  const int nz = automatic.segments[0].axialCells;
  CHECK(e[0].endShare * std::pow(0.1 / nz / std::sqrt(alpha * tau), 2) / 13.0 <= kGridTargetError);
  CHECK(nz > 4);
  CHECK(anyContains(coarse.warnings, "segment rod", "penetration depth"));
  CHECK(anyContains(coarse.warnings, "segment rod", "axial cells meet 1 %"));
  CHECK_FALSE(anyContains(automatic.warnings, "segment rod", "axial"));
}

namespace {

// A coat on a body held at its initial temperature: a plate (both faces) whose thin tissue layer is tied to a pinned
// arterial temperature by the largest perfusion and holds little heat, under 3 cm of a fur-like coat (k 0.04 W/(m K),
// rho c 2e5 J/(m3 K), alpha 2e-7 m2/s: the cold feet's fur), in water at 47 K below it with h = 15 W/(m2 K)
// (Bi = h L / k = 11.25; water: no radiation, the coat's wet conductivity its dry one). Invented values.
constexpr double kCoat = 0.04, rhoCCoat = 2e5, coatL = 0.03, hCoat = 15.0, bodyK = 310.15, coldK = 263.15;
constexpr double plateSide = 0.1;

std::string coatedPlate(int coatCells) {
  return "title = \"a coat on a body held at its temperature\"\n[run]\nduration = \"6 h\"\noutput_interval = \"1 h\"\n"
         "initial_temperature = " + num(bodyK) + "\nrtol = 1e-10\natol = 1e-10\n[circulation]\nfixed_arterial_temperature = " +
         num(bodyK) + "\n[tissues.core]\nconductivity = 10\ndensity = 100\nspecific_heat = 1000\nmetabolic_heat = 0\n"
         "perfusion = 1\nq10 = 1\n[tissues.pelt]\nrole = \"coat\"\nconductivity = " + num(kCoat) +
         "\ndensity = 100\nspecific_heat = " + num(rhoCCoat / 100.0) + "\n[[segments]]\nname = \"plate\"\nshape = \"plate\"\n"
         "length = " + num(plateSide) + "\nwidth = " + num(plateSide) + "\nlayers = [{ tissue = \"core\", thickness = 0.0005 }]\n"
         "coat = { material = \"pelt\", thickness = " + num(coatL) + ", cells = " + std::to_string(coatCells) +
         " }\n[environment]\nmedium = \"water\"\ntemperature = " + num(coldK) + "\nconvection = " + num(hCoat) + "\n";
}

//! Heat that has crossed the coat's inner face of a slab 0 < x < L from a uniform start, the face x = 0 held at the
//! initial temperature, linear heat transfer h to surroundings Delta colder at x = L [J/m2]: the steady flux times t
//! less the initial excess over the steady profile that leaves through x = 0. Eigenfunctions sin(beta x) with
//! zeta cot zeta = -Bi, zeta = beta L (the method of Carslaw & Jaeger 1959, sec. 3.11; roots and coefficients
//! derived here).
double slabHeatIn(double t, int terms = 400) {
  const double a = kCoat / rhoCCoat, bi = hCoat * coatL / kCoat, delta = bodyK - coldK;
  const double slope = delta * bi / (coatL * (1.0 + bi));  // -d theta_s / dx
  double q = kCoat * slope * t;
  for (int n = 1; n <= terms; ++n) {
    const double z = bisect([bi](double x) { return x * std::cos(x) + bi * std::sin(x); },
                            (n - 0.5) * std::numbers::pi + 1e-12, n * std::numbers::pi - 1e-12);
    const double b = z / coatL;
    // phi_0 = -theta_s = slope x; A_n = int phi_0 sin / int sin^2.
    const double num0 = slope * (std::sin(b * coatL) / (b * b) - coatL * std::cos(b * coatL) / b);
    const double den = 0.5 * coatL - std::sin(2.0 * b * coatL) / (4.0 * b);
    const double A = num0 / den;
    q -= kCoat * A * b * (1.0 - std::exp(-a * b * b * t)) / (a * b * b);
  }
  return q;
}

}  // namespace

TEST_CASE("Storage rule: the heat a coat's cells misplace into the body after a uniform start tends to C D^2 / (12 "
          "Delta cells^2), against the slab series",
          "[grid]") {
  const double area = 2.0 * plateSide * plateSide;  // both faces
  const double duration = 6.0 * 3600.0;  // 4.8 L^2 / alpha: the transient is over
  // Compared: the part of the heat that is not the steady flux times t, the initial excess sent inwards (the pinned
  // blood's tie to the tissue, 1800 W/(m2 K) in series, lowers the model's steady flux by 7e-4, 16 J over the run).
  const double bi0 = hCoat * coatL / kCoat;
  const double exact = (slabHeatIn(duration) - kCoat * (bodyK - coldK) * bi0 / (coatL * (1.0 + bi0)) * duration) * area;
  const double bi = hCoat * coatL / kCoat, delta = bodyK - coldK, drop = delta * bi / (1.0 + bi);
  const double closedForm = rhoCCoat * coatL * area * drop * drop / (12.0 * delta);  // per cells^2
  double last = 0.0;
  for (int cells : {2, 4, 8}) {
    Case c = loadCaseFromString(coatedPlate(cells), "plate.toml");
    Body body(c);
    const RunSummary s = runTransient(body, silentRun());
    REQUIRE(s.complete);
    const Network& net = body.network();
    std::size_t blood = 0;
    while (blood < net.channels.size() && net.channels[blood] != "blood") ++blood;
    REQUIRE(blood < net.channels.size());
    // Heat the body gave to the coat: what the pinned blood brought into the plate less the tissue's own change.
    double tissue = 0.0;
    const SegmentMesh& m = body.segments()[0];
    for (int iz = 0; iz < m.nz; ++iz)
      for (int ir = 0; ir < m.nr; ++ir)
        if (m.layer[ir] == 0) tissue += 100.0 * 1000.0 * m.volume[iz * m.nr + ir] * (s.finalState[m.node(iz, ir)] - bodyK);
    const double model = s.segmentEnergy[blood] + tissue - s.flows[blood] * duration;
    const double misplaced = std::abs(model - exact);
    const StorageHeatBound bound = storageHeatBound(c.segments[0], (*c.gridEstimates)[0]);
    std::printf("[grid] coat on a held body, %d coat cells: initial excess sent inwards %.3f J (series %.3f J), misplaced %.4g J; "
                "closed form %.4g J, storageHeatBound %.4g J\n", cells, model, exact, misplaced,
                closedForm / (cells * cells), bound.heat);
    // The estimate the automatic grid and the check use (the 1-D cross-section's drop, the tie included) ...
    CHECK(bound.heat == Approx(closedForm / (cells * cells)).epsilon(0.02));
    CHECK(bound.layer == 1);  // the coat
    // ... and the model: what halving the cells removes is the closed form's share to 2 % (an offset of 0.7 J that
    // does not fall with the cells, the blood's tie to the tissue, cancels), and the whole within 15 %.
    if (last > 0.0) CHECK(last - misplaced == Approx(closedForm * 0.75 / (cells * cells / 4.0)).epsilon(0.02));
    CHECK(misplaced == Approx(closedForm / (cells * cells)).epsilon(0.15));
    last = misplaced;
  }
}
