// Tucking (`segments[].surface.tucked_into`, `tucked_fraction`, `events[].surface.NAME.tucked_fraction`): a share of a
// segment's lateral surface pressed against another segment of the body (feet in the plumage, a head under a wing)
// exchanges nothing with the medium and conducts through both coats into the host (Body::addTucking). Checks:
//  1. two lumped spheres (Bi <= 2e-4 against the coupling) joined only by tucking, the guest wholly tucked into the
//     coated host: the steady temperatures of a heated guest from the series-resistance formula, the coupling a
//     radial sector of the host's coat (spherical shell, Incropera et al. 2007 eq. 3.36, over the patch's share of
//     the solid angle) and the host's coat and film to the air (eq. 3.36 and Newton cooling in series); the transient
//     from a uniform start against the analytic solution of the two-node linear system (eigen-decomposition of the
//     2x2 matrix, common practice, no source); energy: the guest's loss is the host's gain and the run's balance
//     closes to round-off;
//  2. a coated guest cylinder of several cells tucked into a coated host, with contact and tucking stepped by events:
//     the Jacobian against central differences in each interval, the energy balance, the tucking channel summing to
//     zero over the body;
//  2b. the host's exposed area loses the patch: the exposed areas of host and guest count A_host + A_guest - 2 a_t
//     (a_t the tucked area) in every interval, for convection and the sun, and the host's coat rings lose the same
//     share; a half-tucked lumped guest reaches the steady state of the parallel and series conductances;
//  3. tucked fraction 0 (tucked_into given, no event) leaves every temperature bit for bit as without the keys;
//  4. bad input names file, line and key path (exit 2 through CaseError); the resolved case keeps the keys.
#include <catch2/catch.hpp>

#include <unistd.h>

#include <algorithm>
#include <cmath>
#include <cstdio>
#include <filesystem>
#include <fstream>
#include <numbers>
#include <sstream>
#include <string>
#include <vector>

#include "test_common.hpp"
#include "test_run_datasets.hpp"
#include "test_support.hpp"
#include "test_support_body.hpp"
#include "drivers/simulation.hpp"
#include "models/body.hpp"
#include "models/case.hpp"

using namespace thermorph;

namespace {

constexpr double pi = std::numbers::pi;

using Run = testing::RunDatasets;
Run runCase(const std::string& text, const std::vector<std::string>& datasets,
            const std::vector<std::string>& overrides = {}) {
  return testing::runDatasets(text, "tucking.toml", datasets, overrides);
}

// Host: a sphere of radius 4 cm of a very conductive tissue (k = 1000 W/(m K), rho c = 1e5 J/(m3 K)) under 1 cm of a
// down of k = 0.05 W/(m K) with next to no heat capacity, fixed h = 10 W/(m2 K) to air at 10 degC (no radiation: a
// fixed coefficient without emissivity). Guest: a bare sphere of radius 2 cm of the same tissue, a child of the host
// attached by a contact patch of radius 1e-12 m (its spreading conductance 4 k a = 4e-9 W/K, 2e-7 of the tucking
// conductance), wholly tucked into the host.
std::string lumpedPair(const std::string& guestTissue = "lump") {
  return R"toml(title = "tucked lumped spheres"
[run]
duration = "1800 s"
output_interval = "30 s"
initial_temperature = "40 degC"
rtol = 1e-10
atol = 1e-10
[tissues.lump]
base = "muscle"
conductivity = "1000 W/(m K)"
density = "1000 kg/m3"
specific_heat = "100 J/(kg K)"
metabolic_heat = "0 W/m3"
perfusion = "0 1/s"
q10 = 1
[tissues.warm]
base = "lump"
metabolic_heat = "5968.31 W/m3"
[tissues.down]
base = "feathers"
conductivity = "0.05 W/(m K)"
density = "0.001 kg/m3"
[[segments]]
name = "body"
shape = "sphere"
layers = [{ tissue = "lump", thickness = "4 cm", cells = 1 }]
coat = { material = "down", thickness = "1 cm", cells = 1 }
[[segments]]
name = "head"
parent = "body"
shape = "sphere"
contact_radius = "1e-12 m"
layers = [{ tissue = ")toml" + guestTissue + R"toml(", thickness = "2 cm", cells = 1 }]
surface = { tucked_into = "body", tucked_fraction = 1 }
[environment]
temperature = "10 degC"
convection = "10 W/(m2 K)"
)toml";
}

// The pair's conductances from their own formulas: the host's coat shell (Incropera et al. 2007 eq. 3.36) in series
// with the film 1 / (h 4 pi r_o^2) to the air, both over the share s of the host's outer surface that the tucked
// guest leaves exposed (parallel radial sectors: a sector of solid-angle share s conducts s times the shell); the
// tucked patch (the guest's whole surface, 4 pi r_g^2, times the tucked fraction f_t) on the host's outer surface, a
// radial sector of the coat shell of solid-angle share f_t r_g^2 / r_o^2: R_shell r_o^2 / (f_t r_g^2).
struct Pair {
  double rg = 0.02, ri = 0.04, ro = 0.05, kCoat = 0.05, h = 10.0, rhoC = 1e5, ft = 1.0;
  bool inCoat = false;  // tucked_placement = "in_coat": the host's outer surface stays whole
  double shell() const { return (1.0 / ri - 1.0 / ro) / (4.0 * pi * kCoat); }
  double exposedShare() const { return inCoat ? 1.0 : 1.0 - ft * rg * rg / (ro * ro); }
  double H() const { return exposedShare() / (shell() + 1.0 / (h * 4.0 * pi * ro * ro)); }
  double G() const { return ft / (shell() * ro * ro / (rg * rg)); }
  double Cg() const { return rhoC * 4.0 / 3.0 * pi * rg * rg * rg; }
  double Ch() const { return rhoC * 4.0 / 3.0 * pi * ri * ri * ri; }
};

const std::string coatedPair = R"toml(title = "tucked coated cylinders"
[run]
duration = "300 s"
output_interval = "30 s"
initial_temperature = "37 degC"
rtol = 1e-9
[circulation]
fixed_arterial_temperature = "37 degC"
[environment]
temperature = "0 degC"
speed = "3 m/s"
substrate_temperature = "-5 degC"
substrate_conductance = "40 W/(m2 K)"
solar_irradiance = "300 W/m2"
[[segments]]
name = "trunk"
shape = "cylinder"
length = "12 cm"
axial_cells = 4
layers = [{ tissue = "muscle", thickness = "3 cm", cells = 2 }, { tissue = "skin", thickness = "0.1 cm", cells = 1 }]
coat = { material = "feathers", thickness = "1.5 cm", cells = 2 }
[[segments]]
name = "foot"
parent = "trunk"
count = 2
attach_position = 0.8
shape = "cylinder"
length = "4 cm"
axial_cells = 3
layers = [{ tissue = "bone", thickness = "0.2 cm", cells = 1 }, { tissue = "skin", thickness = "0.1 cm", cells = 1 }]
coat = { material = "feathers", thickness = "0.2 cm", cells = 1 }
surface = { contact_fraction = 0.2, tucked_into = "trunk", tucked_fraction = 0.3 }
[[events]]
at = "60 s"
surface = { foot = { contact_fraction = 0, tucked_fraction = 0.7 } }
[[events]]
at = "180 s"
surface = { foot = { tucked_fraction = 0 } }
)toml";

}  // namespace

TEST_CASE("Tucking: two lumped spheres reach the series-resistance steady state", "[tucking][validation]") {
  // The guest makes P = 0.2 W (5968.31 W/m3 over its 3.351e-5 m3); at steady state all of it crosses the tucked patch
  // into the host and the host's coat and film to the air: T_h = T_a + P / H, T_g = T_h + P / G.
  Body body(loadCaseFromString(lumpedPair("warm"), "pair.toml"));
  const Pair p;
  const double P = 5968.31 * 4.0 / 3.0 * pi * p.rg * p.rg * p.rg, Ta = 283.15;
  const std::vector<double> T = testing::steadyTemperatures(body);
  const double Th = T[body.segments()[0].node(0, 0)], Tg = T[body.segments()[1].node(0, 0)];
  const double exactH = Ta + P / p.H(), exactG = exactH + P / p.G();
  const testing::SteadyFlows flows = testing::steadyGroupFlows(body);
  const Network& n = body.network();
  const Index tucking = testing::channelIndex(n, "tucking");
  const double intoGuest = flows.flows[1 * n.channels.size() + tucking], intoHost = flows.flows[0 * n.channels.size() + tucking];
  std::printf("[tucking] lumped pair, steady: guest %.6f degC (series formula %.6f, rel. error of the rise %.1e), host "
              "%.6f degC (%.6f, %.1e); tucking flow guest %.6g W, host %.6g W (P = %.6g W), G = %.6g W/K, H = %.6g W/K\n",
              Tg - 273.15, exactG - 273.15, std::abs((Tg - Ta) / (exactG - Ta) - 1.0), Th - 273.15, exactH - 273.15,
              std::abs((Th - Ta) / (exactH - Ta) - 1.0), intoGuest, intoHost, P, p.G(), p.H());
  // Departures: the lumps' half cells (8.2e-3 K/W in the tucked path against 49.7 K/W, 1.2e-3 K/W against the host's
  // 13.2 K/W to the air over its 84 % left exposed) and the junction's 4e-9 W/K.
  CHECK(std::abs((Tg - Ta) / (exactG - Ta) - 1.0) < 2e-4);
  CHECK(std::abs((Th - Ta) / (exactH - Ta) - 1.0) < 2e-4);
  CHECK(std::abs(intoGuest + P) < 1e-4 * P);
  CHECK(std::abs(intoGuest + intoHost) <= 1e-12 * P);  // what the guest loses the host gains (one copy each)
  // The guest exchanges nothing with the air: its convection is zero.
  CHECK(flows.flows[1 * n.channels.size() + testing::channelIndex(n, "convection")] == 0.0);
  REQUIRE(body.tucking().size() == 1);
  std::printf("[tucking] lumped pair: the model's path conductance %.6g W/K, sector formula %.6g W/K (%.1e)\n",
              body.tucking()[0].conductance, p.G(), std::abs(body.tucking()[0].conductance / p.G() - 1.0));
  // The lumps' half cells in the path (guest 2.0e-3 K/W, host 1.0e-3 K/W over its sector: 6.2e-3 K/W) against the
  // coat's 49.7 K/W: 1.65e-4.
  CHECK(std::abs(body.tucking()[0].conductance / p.G() - 1.0) < 2e-4);
}

TEST_CASE("Tucking: a half-tucked lumped guest and its host follow the parallel and series conductances",
          "[tucking][validation]") {
  // Tucked fraction 0.5: half the guest's surface meets the air (h (1 - f_t) A_g, A_g = 4 pi r_g^2 less its 1e-12 m
  // contact patch), half lies on the host (G = f_t times the sector, Pair), whose outer surface keeps
  // A_o - f_t A_g to the air (H = s / (R_shell + 1 / (h A_o)), Pair). Steady state of the heated guest (P = 0.2 W):
  // P = H_g theta_g + G (theta_g - theta_h), G (theta_g - theta_h) = H theta_h (two nodes, parallel and series
  // conductances; Incropera et al. 2007 eq. 3.36 and Newton cooling). Exposed area in all: A_o + A_g - 2 f_t A_g.
  Pair p;
  p.ft = 0.5;
  Body body(loadCaseFromString(lumpedPair("warm"), "pair.toml", {"segments.head.surface.tucked_fraction=0.5"}));
  const double P = 5968.31 * 4.0 / 3.0 * pi * p.rg * p.rg * p.rg, Ta = 283.15;
  const double Ag = 4.0 * pi * p.rg * p.rg, Hg = p.h * (1.0 - p.ft) * Ag, G = p.G(), H = p.H();
  const double thetaG = P / (Hg + G * H / (G + H)), thetaH = G * thetaG / (G + H);
  const std::vector<double> T = testing::steadyTemperatures(body);
  const double Th = T[body.segments()[0].node(0, 0)], Tg = T[body.segments()[1].node(0, 0)];
  const testing::SteadyFlows flows = testing::steadyGroupFlows(body);
  const Network& n = body.network();
  const Index convection = testing::channelIndex(n, "convection");
  const double hostLoss = -flows.flows[0 * n.channels.size() + convection];
  const double guestLoss = -flows.flows[1 * n.channels.size() + convection];
  std::printf("[tucking] half-tucked lumped pair, steady: guest rise %.6f K (two-node formula %.6f, %.1e), host %.6f K "
              "(%.6f, %.1e); host's loss to the air %.6g W (H theta_h %.6g W), guest's %.6g W (H_g theta_g %.6g W)\n",
              Tg - Ta, thetaG, std::abs((Tg - Ta) / thetaG - 1.0), Th - Ta, thetaH, std::abs((Th - Ta) / thetaH - 1.0),
              hostLoss, H * thetaH, guestLoss, Hg * thetaG);
  // Departures: the lumps' half cells (as the wholly tucked pair; the guest's 4.0e-3 K/W against its 39.8 K/W film).
  CHECK(std::abs((Tg - Ta) / thetaG - 1.0) < 2e-4);
  CHECK(std::abs((Th - Ta) / thetaH - 1.0) < 2e-4);
  CHECK(std::abs(hostLoss / (H * thetaH) - 1.0) < 2e-4);
  CHECK(std::abs(guestLoss / (Hg * thetaG) - 1.0) < 2e-4);
  CHECK(std::abs((hostLoss + guestLoss) / P - 1.0) < 1e-9);  // all of P leaves by convection at steady state

  // The exposed areas themselves, from the faces' convection at a face 1 K above the air (fixed h = 10 W/(m2 K)):
  // A_o - pi a^2 - f_t A_g' for the host, (1 - f_t) A_g' for the guest (A_g' = A_g - pi a^2, a = 1e-12 m).
  const double patch = pi * 1e-24, Ao = 4.0 * pi * p.ro * p.ro - patch, Agp = Ag - patch;
  double area[2] = {0.0, 0.0};
  std::vector<double> heat(n.channels.size()), slope(n.channels.size());
  for (Index g = 0; g < 2; ++g)
    for (Index f : body.segments()[g].lateralFace) {
      std::fill(heat.begin(), heat.end(), 0.0);
      body.environment().faceHeat(f, Ta + 1.0, 0.0, heat, slope);
      area[g] += -heat[convection] / p.h;
    }
  std::printf("[tucking] half-tucked lumped pair: exposed areas host %.8g m2 (geometry %.8g), guest %.8g m2 (%.8g), "
              "together %.8g m2 = A_o + A_g - 2 a_t %.8g m2\n",
              area[0], Ao - 0.5 * Agp, area[1], 0.5 * Agp, area[0] + area[1], Ao + Agp - 2.0 * 0.5 * Agp);
  CHECK(std::abs(area[0] / (Ao - 0.5 * Agp) - 1.0) < 1e-12);
  CHECK(std::abs(area[1] / (0.5 * Agp) - 1.0) < 1e-12);
  CHECK(std::abs((area[0] + area[1]) / (Ao + Agp - 2.0 * 0.5 * Agp) - 1.0) < 1e-12);
}

TEST_CASE("Tucking inside the host's coat (tucked_placement = in_coat) keeps the host's surface whole",
          "[tucking][validation]") {
  // The wholly tucked heated guest inside the host's coat: the host keeps its whole outer surface to the air
  // (H = 1 / (R_shell + 1 / (h A_o)), series; Incropera et al. 2007 eq. 3.36), the path the same sector of its coat.
  Pair p;
  p.inCoat = true;
  Body body(loadCaseFromString(lumpedPair("warm"), "pair.toml", {"segments.head.surface.tucked_placement=in_coat"}));
  const double P = 5968.31 * 4.0 / 3.0 * pi * p.rg * p.rg * p.rg, Ta = 283.15;
  const std::vector<double> T = testing::steadyTemperatures(body);
  const double Th = T[body.segments()[0].node(0, 0)], Tg = T[body.segments()[1].node(0, 0)];
  const double exactH = Ta + P / p.H(), exactG = exactH + P / p.G();
  const Network& n = body.network();
  const Index convection = testing::channelIndex(n, "convection");
  double area = 0.0;
  std::vector<double> heat(n.channels.size()), slope(n.channels.size());
  for (Index f : body.segments()[0].lateralFace) {
    body.environment().faceHeat(f, Ta + 1.0, 0.0, heat, slope);
    area += -heat[convection] / p.h;
  }
  const double whole = 4.0 * pi * p.ro * p.ro - pi * 1e-24;
  std::printf("[tucking] guest in the host's coat, steady: guest rise %.6f K (series %.6f, %.1e), host %.6f K (%.6f, "
              "%.1e); host's exposed area %.8g m2 (whole %.8g)\n",
              Tg - Ta, exactG - Ta, std::abs((Tg - Ta) / (exactG - Ta) - 1.0), Th - Ta, exactH - Ta,
              std::abs((Th - Ta) / (exactH - Ta) - 1.0), area, whole);
  CHECK(std::abs((Tg - Ta) / (exactG - Ta) - 1.0) < 2e-4);
  CHECK(std::abs((Th - Ta) / (exactH - Ta) - 1.0) < 2e-4);
  CHECK(std::abs(area / whole - 1.0) < 1e-12);
  REQUIRE(body.tucking().size() == 1);
  CHECK(body.tucking()[0].coveredArea == 0.0);
  // A bare host has no coat to lie in (refused at the key), and the key without tucking warns as without effect.
  std::string bare = lumpedPair();
  bare.replace(bare.find("coat = { material = \"down\", thickness = \"1 cm\", cells = 1 }"),
               std::string("coat = { material = \"down\", thickness = \"1 cm\", cells = 1 }").size(), "");
  bare.replace(bare.find("tucked_fraction = 1 }"), std::string("tucked_fraction = 1 }").size(),
               "tucked_fraction = 1, tucked_placement = \"in_coat\" }");
  CHECK_THAT(testing::caseErrorMessage(bare), Catch::Contains("segments.head.surface.tucked_placement") &&
                                                  Catch::Contains("body has no coat"));
  std::string loose = lumpedPair();
  loose.replace(loose.find("tucked_into = \"body\", tucked_fraction = 1 }"),
                std::string("tucked_into = \"body\", tucked_fraction = 1 }").size(), "tucked_placement = \"in_coat\" }");
  const Body untucked(loadCaseFromString(loose, "loose.toml"));
  CHECK(std::any_of(untucked.warnings().begin(), untucked.warnings().end(), [](const std::string& w) {
    return w.find("segments.head.surface.tucked_placement") != std::string::npos &&
           w.find("tucked into nothing") != std::string::npos;
  }));
}

TEST_CASE("Tucking: the host loses the tucked area in every interval (convection, sun, coat rings)",
          "[tucking][validation]") {
  // Coated cylinders with a fixed h = 10 W/(m2 K) (no radiation then) and sun: per copy of the trunk, two feet
  // (r 0.3 + 0.2 cm, L 4 cm: A_F = 2 pi r L each) tucked by f_t = 0.3, 0.7, 0 in the three intervals, in contact
  // 0.2, 0, 0; the trunk (r 3.1 + 1.5 cm, L 12 cm) loses the feet's two footprints (pi r^2 each): A_T = 2 pi R L -
  // 2 pi r^2. Exposed to the air: trunk A_T - 2 f_t A_F, each foot (1 - f_c - f_t) A_F; the sun falls on A_T - 2 f_t
  // A_F and (1 - f_t) A_F (elementary geometry); the trunk's coat rings carry 1 - 2 f_t A_F / A_T of their untucked
  // conductance (parallel radial sectors).
  std::string text = coatedPair;
  text.replace(text.find("speed = \"3 m/s\""), std::string("speed = \"3 m/s\"").size(), "convection = \"10 W/(m2 K)\"");
  Body body(loadCaseFromString(text, "areas.toml"));
  const double AF = 2.0 * pi * 0.005 * 0.04, AT = 2.0 * pi * 0.046 * 0.12 - 2.0 * pi * 0.005 * 0.005;
  const double tucked[] = {0.3, 0.7, 0.0}, contact[] = {0.2, 0.0, 0.0};
  const Network& n = body.network();
  const Index convection = testing::channelIndex(n, "convection"), solar = testing::channelIndex(n, "solar");
  const Index trunkFace = body.segments()[0].lateralFace[1];
  body.setInterval(2);
  const double untuckedRing = n.faces[trunkFace].halfConductance;
  std::vector<double> heat(n.channels.size()), slope(n.channels.size());
  for (std::size_t k = 0; k < 3; ++k) {
    body.setInterval(k);
    double exposed[2] = {0.0, 0.0}, sunlit[2] = {0.0, 0.0};
    for (Index g = 0; g < 2; ++g) {
      const SurfaceSpec& s = body.spec().segments[g].surface;
      for (Index f : body.segments()[g].lateralFace) {
        std::fill(heat.begin(), heat.end(), 0.0);
        body.environment().faceHeat(f, 274.15, 0.0, heat, slope);
        exposed[g] += -heat[convection] / 10.0;
        sunlit[g] += heat[solar] / (s.solarAbsorptivity * 300.0 * s.solarExposure);
      }
    }
    const double at = 2.0 * tucked[k] * AF;  // tucked area per trunk
    const double total = exposed[0] + 2.0 * exposed[1], expected = AT + 2.0 * AF - 2.0 * at - 2.0 * contact[k] * AF;
    const double ring = n.faces[trunkFace].halfConductance / untuckedRing;
    std::printf("[tucking] interval %zu (f_t %.1f, f_c %.1f): exposed trunk %.8g m2 (geometry %.8g), foot %.8g m2 "
                "(%.8g), body %.8g m2 (A_T + 2 A_F - 2 a_t - 2 f_c A_F = %.8g); sunlit trunk %.8g (%.8g), foot %.8g "
                "(%.8g); trunk's coat ring %.10f of untucked (%.10f)\n",
                k, tucked[k], contact[k], exposed[0], AT - at, exposed[1], (1.0 - contact[k] - tucked[k]) * AF, total,
                expected, sunlit[0], AT - at, sunlit[1], (1.0 - tucked[k]) * AF, ring, 1.0 - at / AT);
    CHECK(std::abs(exposed[0] / (AT - at) - 1.0) < 1e-12);
    CHECK(std::abs(exposed[1] - (1.0 - contact[k] - tucked[k]) * AF) < 1e-12 * AF);
    CHECK(std::abs(total / expected - 1.0) < 1e-12);
    CHECK(std::abs(sunlit[0] / (AT - at) - 1.0) < 1e-12);
    CHECK(std::abs(sunlit[1] / ((1.0 - tucked[k]) * AF) - 1.0) < 1e-12);
    CHECK(std::abs(ring - (1.0 - at / AT)) < 1e-12);
  }
}

TEST_CASE("Tucking: two lumped spheres cool as the analytic two-node system", "[tucking][validation]") {
  const Run r = runCase(lumpedPair(), {"/segments/head/temperature", "/segments/body/temperature",
                                       "/segments/head/heat_flow/tucking", "/segments/body/heat_flow/tucking",
                                       "/segments/head/tucked_fraction"});
  REQUIRE(r.summary.complete);
  // theta' = A theta, theta = T - T_a, A = [[-G/C_g, G/C_g], [G/C_h, -(G + H)/C_h]], theta(0) = (30, 30) K: the
  // eigenvalues lambda = (tr -+ sqrt(tr^2 - 4 det)) / 2 with eigenvectors (a12, lambda - a11).
  const Pair p;
  const double a11 = -p.G() / p.Cg(), a12 = p.G() / p.Cg(), a21 = p.G() / p.Ch(), a22 = -(p.G() + p.H()) / p.Ch();
  const double tr = a11 + a22, det = a11 * a22 - a12 * a21, root = std::sqrt(tr * tr - 4.0 * det);
  const double l1 = 0.5 * (tr - root), l2 = 0.5 * (tr + root);
  // theta(0) = c1 (a12, l1 - a11) + c2 (a12, l2 - a11).
  const double th0 = 30.0;
  const double c2 = (th0 - th0 * (l1 - a11) / a12) / ((l2 - a11) - (l1 - a11));
  const double c1 = th0 / a12 - c2;
  auto exact = [&](double t, int which) {
    return which == 0 ? c1 * a12 * std::exp(l1 * t) + c2 * a12 * std::exp(l2 * t)
                      : c1 * (l1 - a11) * std::exp(l1 * t) + c2 * (l2 - a11) * std::exp(l2 * t);
  };
  double worst[2] = {0.0, 0.0}, worstFlow = 0.0;
  for (std::size_t k = 0; k < r.time.size(); ++k) {
    const double t = r.time[k];
    worst[0] = std::max(worst[0], std::abs(r.data[0][k] - 10.0 - exact(t, 0)) / th0);
    // (The host's field holds its lump and its coat cell: [time][1][2].)
    worst[1] = std::max(worst[1], std::abs(r.data[1][2 * k] - 10.0 - exact(t, 1)) / th0);
    // The tucking channel: G (T_h - T_g) into the guest, the same out of the host.
    const double q = p.G() * (exact(t, 1) - exact(t, 0));
    worstFlow = std::max(worstFlow, std::abs(r.data[2][k] - q) / (p.G() * th0));
    CHECK(std::abs(r.data[2][k] + r.data[3][k]) <= 1e-12 * p.G() * th0);
    CHECK(r.data[4][k] == 1.0);
  }
  const double balance = std::abs(r.summary.energyBalanceError) / r.summary.throughput;
  std::printf("[tucking] lumped pair, transient (time constants %.4g s and %.4g s): guest within %.1e, host %.1e of the "
              "initial difference of the two-node solution; tucking flow %.1e of G theta_0; energy balance %.1e of the "
              "%.4g J exchanged\n",
              -1.0 / l1, -1.0 / l2, worst[0], worst[1], worstFlow, balance, r.summary.throughput);
  CHECK(worst[0] < 5e-4);
  CHECK(worst[1] < 5e-4);
  CHECK(worstFlow < 5e-4);
  CHECK(balance < 1e-10);
}

TEST_CASE("Tucking of a coated cylinder stepped by events: Jacobian, energy, conservation", "[tucking][jacobian]") {
  const Run r = runCase(coatedPair, {"/segments/foot/heat_flow/tucking", "/segments/trunk/heat_flow/tucking",
                                     "/segments/foot/heat_flow/convection", "/segments/foot/tucked_fraction",
                                     "/segments/foot/heat_flow/substrate"});
  REQUIRE(r.summary.complete);
  const double balance = std::abs(r.summary.energyBalanceError) / r.summary.throughput;
  double worstSum = 0.0;
  for (std::size_t k = 0; k < r.time.size(); ++k) {
    // Per segment the stored flows are of one copy (two feet into one trunk): 2 q_foot + q_trunk = 0.
    worstSum = std::max(worstSum, std::abs(2.0 * r.data[0][k] + r.data[1][k]));
    const double t = r.time[k];
    const double expected = t < 60.0 ? 0.3 : t < 180.0 ? 0.7 : 0.0;
    CHECK(r.data[3][k] == expected);
    if (t >= 180.0) CHECK(r.data[0][k] == 0.0);  // untucked: no flow through the patch
    if (t >= 60.0) CHECK(r.data[4][k] == 0.0);
  }
  std::printf("[tucking] coated cylinders with events: energy balance %.1e of the %.4g J exchanged; tucking flows of the "
              "foot and trunk cancel to %.1e W; one foot's tucking flow at 30/90/210 s: %.4g/%.4g/%.4g W\n",
              balance, r.summary.throughput, worstSum, r.data[0][1], r.data[0][3], r.data[0][7]);
  CHECK(balance < 1e-10);
  CHECK(worstSum < 1e-12);
  CHECK(r.data[0][3] > r.data[0][1]);  // more tucked, more heat into the foot from the warm trunk

  Body body(loadCaseFromString(coatedPair, "jacobian.toml"));
  for (std::size_t interval : {0, 1, 2}) {
    body.setInterval(interval);
    NetworkSystem system(body.network(), NetworkSystem::Mode::Transient);
    std::vector<double> state = testing::initialState(body, system);
    for (Index i = 0; i < system.nodeCount(); ++i) state[i] = 273.15 + 5.0 + 0.07 * static_cast<double>(i % 97);
    const testing::JacobianCheck j = testing::checkJacobian(system, state, 30.0 + 60.0 * static_cast<double>(interval));
    std::printf("[tucking] Jacobian in interval %zu: worst %.1e of the row scale, %d entries outside the pattern\n",
                interval, j.worstRelative, j.outsidePattern);
    CHECK(j.worstRelative < 1e-7);
    CHECK(j.outsidePattern == 0);
  }
}

TEST_CASE("Tucked fraction 0 leaves every result bit for bit unchanged", "[tucking]") {
  std::ifstream in(std::string(THERMORPH_SOURCE_DIR) + "/tests/bench/studies/refine_snowbird.toml");
  std::stringstream text;
  text << in.rdbuf();
  const std::string base = text.str();
  std::string tucked = base;
  const std::string key = "surface = { contact_fraction = 0.5 }";
  REQUIRE(tucked.find(key) != std::string::npos);
  tucked.replace(tucked.find(key), key.size(), R"(surface = { contact_fraction = 0.5, tucked_into = "trunk" })");
  const std::vector<std::string> datasets{"/segments/foot/temperature", "/segments/trunk/temperature",
                                          "/segments/leg/heat_flow/convection", "/body/core_temperature"};
  const Run a = runCase(base, datasets), b = runCase(tucked, datasets);
  for (std::size_t d = 0; d < datasets.size(); ++d) {
    INFO(datasets[d]);
    CHECK(a.data[d] == b.data[d]);
  }
  CHECK(a.summary.energyBalanceError == b.summary.energyBalanceError);
  Body body(loadCaseFromString(tucked, "tucked.toml"));
  CHECK(body.tucking().empty());
  // ... and is warned of as a key without effect (InertKeys), unlike a tucking that an event starts.
  auto warned = [](const Body& b) {
    return std::any_of(b.warnings().begin(), b.warnings().end(), [](const std::string& w) {
      return w.find("segments.foot.surface.tucked_into") != std::string::npos && w.find("never tucked") != std::string::npos;
    });
  };
  CHECK(warned(body));
  Body later(loadCaseFromString(tucked, "tucked.toml", {"events.0.surface.foot.tucked_fraction=0.5"}));
  CHECK_FALSE(warned(later));
  CHECK(later.tucking().size() == 1);
  CHECK(std::find(body.network().channels.begin(), body.network().channels.end(), "tucking") ==
        body.network().channels.end());
}

TEST_CASE("Tucking: input errors name file, line and key path - the resolved case keeps the keys", "[tucking][errors]") {
  auto error = [](const std::string& text) { return testing::caseErrorMessage(text); };
  auto withGuestSurface = [](const std::string& surface) {
    std::string text = coatedPair;
    const std::string key = R"(surface = { contact_fraction = 0.2, tucked_into = "trunk", tucked_fraction = 0.3 })";
    text.replace(text.find(key), key.size(), surface);
    return text;
  };
  auto withoutEvents = [](const std::string& t) { return t.substr(0, t.find("[[events]]")); };
  const auto lineOf = [](const std::string& text, const std::string& what) {
    return ":" + std::to_string(std::count(text.begin(), text.begin() + static_cast<std::ptrdiff_t>(text.find(what)), '\n') + 1) + ":";
  };
  std::string text = withGuestSurface(R"(surface = { tucked_into = "wing", tucked_fraction = 0.5 })");
  std::string e = error(text);
  CHECK_THAT(e, Catch::Contains(lineOf(text, "wing")) && Catch::Contains("segments.foot.surface.tucked_into") &&
                    Catch::Contains("no segment named \"wing\"") && Catch::Contains("segments: trunk"));
  text = withGuestSurface(R"(surface = { tucked_into = "foot", tucked_fraction = 0.5 })");
  e = error(text);
  CHECK_THAT(e, Catch::Contains("segments.foot.surface.tucked_into") && Catch::Contains("into itself"));
  text = withGuestSurface(R"(surface = { tucked_into = "trunk", tucked_fraction = 1.5 })");
  e = error(text);
  CHECK_THAT(e, Catch::Contains(lineOf(text, "tucked_fraction = 1.5")) && Catch::Contains("segments.foot.surface.tucked_fraction") &&
                    Catch::Contains("out of range"));
  text = withGuestSurface(R"(surface = { tucked_fraction = 0.5 })");
  e = error(text);
  CHECK_THAT(e, Catch::Contains("segments.foot.surface.tucked_fraction") && Catch::Contains("into what"));
  // Contact and tucking together above 1 (a coated segment: 1 itself is refused too), statically and from an event.
  text = withGuestSurface(R"(surface = { contact_fraction = 0.5, tucked_into = "trunk", tucked_fraction = 0.5 })");
  e = error(text);
  CHECK_THAT(e, Catch::Contains("segments.foot.surface.tucked_fraction") && Catch::Contains("sum to 1") &&
                    Catch::Contains("below 1"));
  text = withoutEvents(withGuestSurface(R"(surface = { contact_fraction = 0.5, tucked_into = "trunk" })")) +
         "[[events]]\nat = 240\nsurface = { foot = { tucked_fraction = 0.6 } }\n";
  e = error(text);
  CHECK_THAT(e, Catch::Contains(lineOf(text, "at = 240")) && Catch::Contains("events.0.surface.foot") &&
                    Catch::Contains("from t = 240 s") && Catch::Contains("sum to 1.1"));
  // The guests' tucked area above the host's lateral area (with its own contact): a 6 cm guest sphere wholly tucked
  // into a 5 cm host (1.44 of its surface) statically; two feet tucked 0.7 (0.051 of the trunk's side) from an event
  // that also sets the trunk's contact to 0.95 (1.001 in all; 0.9, 0.951, passes).
  {
    std::string big = lumpedPair();
    big.replace(big.find("thickness = \"2 cm\""), std::string("thickness = \"2 cm\"").size(), "thickness = \"6 cm\"");
    e = error(big);
    CHECK_THAT(e, Catch::Contains(lineOf(big, "tucked_into = \"body\"")) &&
                      Catch::Contains("segments.head.surface.tucked_fraction") && Catch::Contains("covers 1.44 of it") &&
                      Catch::Contains("below 1"));
    const std::string lying = "[[events]]\nat = 240\nsurface = { foot = { tucked_fraction = 0.7 }, trunk = { contact_fraction = ";
    text = coatedPair + lying + "0.95 } }\n";
    e = error(text);
    CHECK_THAT(e, Catch::Contains(lineOf(text, "at = 240")) && Catch::Contains("events.2.surface.foot") &&
                      Catch::Contains("from t = 240 s") && Catch::Contains("covers 1.001 of it") &&
                      Catch::Contains("contact_fraction 0.95"));
    std::printf("[tucking] refusal: %s\n", e.c_str());
    CHECK_NOTHROW(loadCaseFromString(coatedPair + lying + "0.9 } }\n", "lying.toml"));
  }
  // A host tucked into its guest.
  text = coatedPair;
  text.replace(text.find("coat = { material = \"feathers\", thickness = \"1.5 cm\", cells = 2 }"),
               std::string("coat = { material = \"feathers\", thickness = \"1.5 cm\", cells = 2 }").size(),
               "coat = { material = \"feathers\", thickness = \"1.5 cm\", cells = 2 }\n"
               "surface = { tucked_into = \"foot\", tucked_fraction = 0.1 }");
  e = error(text);
  CHECK_THAT(e, Catch::Contains("tucked_into") && Catch::Contains("trunk -> foot -> trunk"));
  // Events: not over a ramp, not for `all`, not for a segment tucked into nothing.
  const std::string untucked = withoutEvents(withGuestSurface(R"(surface = { contact_fraction = 0.2 })"));
  e = error(untucked + "[[events]]\nat = 240\nsurface = { foot = { tucked_fraction = 0.2 } }\n");
  CHECK_THAT(e, Catch::Contains("events.0.surface.foot.tucked_fraction") && Catch::Contains("tucked into nothing"));
  e = error(coatedPair + "[[events]]\nat = 240\nsurface = { all = { tucked_fraction = 0.2 } }\n");
  CHECK_THAT(e, Catch::Contains("surface.all.tucked_fraction") && Catch::Contains("name the segment"));
  e = error(coatedPair + "[[events]]\nat = 240\nramp = 10\nsurface = { foot = { tucked_fraction = 0.2 } }\n");
  CHECK_THAT(e, Catch::Contains("surface.foot.tucked_fraction") && Catch::Contains("step, not over ramp = 10 s"));
  e = error(coatedPair + "[[events]]\nat = 60\nsurface = { foot = { tucked_fraction = 0.2 } }\n");
  CHECK_THAT(e, Catch::Contains("both change surface.foot.tucked_fraction"));

  // The resolved case keeps the static keys and the events' tucking.
  Body body(loadCaseFromString(coatedPair, "case.toml"));
  Body again(loadCaseFromString(resolvedCaseToml(body.spec()), "resolved.toml"));
  const double expected[] = {0.3, 0.7, 0.0};
  for (std::size_t k = 0; k < 3; ++k) {
    body.environment().setInterval(k);
    again.environment().setInterval(k);
    CHECK(body.environment().tuckedFraction(1) == expected[k]);
    CHECK(again.environment().tuckedFraction(1) == expected[k]);
  }
  CHECK(again.spec().segments[1].surface.tuckedInto == "trunk");
  CHECK(again.environment().maxCoveredFraction(1) == 0.7);
}


TEST_CASE("Tucking: the host's covered area is reported", "[tucking][validation]") {
  // Body::Tucking reports the area the guests take off the host's exposed area (`thermorph check`), checked here
  // against the shapes' surface areas (sphere 4 pi r^2, cylinder side 2 pi r L, circular footprint pi r^2;
  // elementary geometry): lumped pair, the guest's whole sphere (r 2 cm) on the host's outer sphere (r 5 cm),
  // 16 % of it; coated cylinders, 0.7 of two feet's sides (r 0.5 cm, L 4 cm) per trunk, whose side (r 4.6 cm,
  // L 12 cm) loses the feet's two footprints.
  const Body pair(loadCaseFromString(lumpedPair(), "pair.toml"));
  REQUIRE(pair.tucking().size() == 1);
  const Pair p;
  const double pairGuest = 4.0 * pi * p.rg * p.rg, pairHost = 4.0 * pi * p.ro * p.ro - pi * 1e-24;
  const Body::Tucking& a = pair.tucking()[0];
  const Body cyl(loadCaseFromString(coatedPair, "cylinders.toml"));
  REQUIRE(cyl.tucking().size() == 1);
  const double cylGuest = 0.7 * 2.0 * 2.0 * pi * 0.005 * 0.04, cylHost = 2.0 * pi * 0.046 * 0.12 - 2.0 * pi * 0.005 * 0.005;
  const Body::Tucking& b = cyl.tucking()[0];
  std::printf("[tucking] covered host area: lumped pair %.6g m2 (geometry %.6g, %.1e), %.4g %% of the host's "
              "%.6g m2 (%.6g); cylinders %.6g m2 (%.6g, %.1e), %.4g %% of %.6g m2 (%.6g)\n",
              a.coveredArea, pairGuest, std::abs(a.coveredArea / pairGuest - 1.0),
              100.0 * a.coveredArea / a.hostArea, a.hostArea, pairHost, b.coveredArea, cylGuest,
              std::abs(b.coveredArea / cylGuest - 1.0), 100.0 * b.coveredArea / b.hostArea, b.hostArea, cylHost);
  CHECK(std::abs(a.coveredArea / pairGuest - 1.0) < 1e-12);
  CHECK(std::abs(a.hostArea / pairHost - 1.0) < 1e-12);
  CHECK(std::abs(a.coveredArea / a.hostArea - 0.16) < 1e-12);
  CHECK(std::abs(b.coveredArea / cylGuest - 1.0) < 1e-12);
  CHECK(std::abs(b.hostArea / cylHost - 1.0) < 1e-12);
  // The largest covered share of the host over the run (no contact of its own): 0.16 and 0.7 of two feet's sides.
  CHECK(std::abs(a.largestHostShare - 0.16) < 1e-12);
  CHECK(std::abs(b.largestHostShare - cylGuest / cylHost) < 1e-12);
  // The load-time check's areas (models/case.cpp exposedLateralAreas) against the same geometry.
  const std::vector<double> areas = exposedLateralAreas(cyl.spec());
  CHECK(std::abs(areas[0] / cylHost - 1.0) < 1e-12);
  CHECK(std::abs(areas[1] / (2.0 * pi * 0.005 * 0.04) - 1.0) < 1e-12);
}
