// A sphere as a child segment (a head on a neck or trunk). The sphere touches its parent over a contact patch, a
// disc of radius a (`contact_radius`) cut from the parent's surface and from the sphere's; across it the parent's
// attachment cell and the sphere's outermost tissue cell exchange heat through the spreading resistance of an
// isothermal disc on a semi-infinite medium, R = 1 / (4 k a) (Incropera et al. 2007, Table 4.1 case 10, S = 2D;
// from memory), which stands for the conduction from the patch into the sphere's tissue. Blood reaches the sphere's own arterial and venous
// nodes from the parent's, like any child.
//
// Checks: (1) the first law to round-off for a sphere head on a cylinder trunk with blood, metabolism and a
// pool; (2) a limit: as the patch shrinks (a -> 0) the child sphere equals the same sphere alone in the same
// surroundings (independent of the contact formula); (3) the steady state of an insulated, isothermal parent
// heating an unperfused sphere without metabolism against the series circuit parent -> patch -> film,
// T_p - T_inf = Q [1/(4 k a) + 1/(h (4 pi R^2 - pi a^2))] (Incropera et al. 2007 eq. 3.19 for resistances in
// series; the sphere's interior is a dead end at steady state, so no shell resistance enters).
#include <catch2/catch.hpp>

#include <cmath>
#include <cstdio>
#include <numbers>
#include <string>

#include "test_support_body.hpp"

using namespace thermorph;
using std::numbers::pi;

namespace {

const std::string headOnTrunk = R"toml(
[run]
duration = "1 h"
output_interval = "10 min"
[environment]
temperature = "5 degC"
speed = "2 m/s"
[[segments]]
name = "trunk"
shape = "cylinder"
length = "20 cm"
axial_cells = 6
layers = [{ tissue = "viscera", thickness = "3 cm", cells = 3 }, { tissue = "muscle", thickness = "1 cm", cells = 2 },
          { tissue = "skin", thickness = "0.2 cm", cells = 1 }]
coat = { material = "fur", thickness = "1 cm", cells = 2 }
[[segments]]
name = "head"
parent = "trunk"
attach_position = 0.0
shape = "sphere"
contact_radius = "2 cm"
layers = [{ tissue = "brain", thickness = "2.5 cm", cells = 4 }, { tissue = "bone", thickness = "0.3 cm", cells = 1 },
          { tissue = "skin", thickness = "0.2 cm", cells = 1 }]
coat = { material = "fur", thickness = "0.5 cm", cells = 1 }
)toml";

}  // namespace

TEST_CASE("A sphere head on a cylinder trunk conserves energy to round-off", "[wholebody][sphere_child]") {
  Body body(loadCaseFromString(headOnTrunk, "head.toml", {}));
  const SegmentMesh& head = body.segments()[testing::segmentIndex(body, "head")];
  REQUIRE(!head.arterial.empty());  // the head has its own blood nodes, fed from the trunk
  const RunSummary s = runTransient(body, testing::silentRun());
  REQUIRE(s.complete);
  const double relative = std::abs(s.energyBalanceError) / s.throughput;
  std::printf("[sphere_child] energy balance error %.3g J of %.4g J exchanged (%.2g)\n", s.energyBalanceError,
              s.throughput, relative);
  CHECK(relative < 1e-9);
  // The trunk's surface loses the footprint pi a^2, and so does the head's (per copy).
  const double a = 0.02, R = 0.03 + 0.005;
  CHECK(std::abs(head.area - (4.0 * pi * R * R - pi * a * a)) < 1e-12);
}

namespace {

std::string sphereCase(bool child, double contactRadius, bool insulatedParent = true) {
  std::string text = R"toml(
[environment]
temperature = "5 degC"
convection = "10 W/(m2 K)"
[tissues.core]
conductivity = 0.5
density = 1000
specific_heat = 3600
metabolic_heat = 2000
perfusion = 0
q10 = 1
)toml";
  if (child)
    text += R"toml(
[tissues.block]
conductivity = 1000
density = 1000
specific_heat = 3600
metabolic_heat = 5000
perfusion = 0
q10 = 1
[[segments]]
name = "trunk"
shape = "cylinder"
length = "10 cm"
axial_cells = 2
layers = [{ tissue = "block", thickness = "2 cm", cells = 1 }]
)toml";
  if (child && insulatedParent) text += "surface = { ends = \"insulated\", convection = \"0 W/(m2 K)\" }\n";
  text += "[[segments]]\nname = \"ball\"\nshape = \"sphere\"\n"
          "layers = [{ tissue = \"core\", thickness = \"3 cm\", cells = 40 }]\n";
  if (child) text += "parent = \"trunk\"\nattach_tissue = \"block\"\ncontact_radius = " + testing::num(contactRadius) + "\n";
  return text;
}

}  // namespace

TEST_CASE("As the contact patch shrinks, a child sphere equals the same sphere alone", "[validation][sphere_child]") {
  Body alone(loadCaseFromString(sphereCase(false, 0.0), "alone.toml", {}));
  const std::vector<double> ta = testing::steadyTemperatures(alone);
  const SegmentMesh& ma = alone.segments()[0];
  double previous = 1.0;
  for (double a : {1e-3, 1e-4, 1e-5}) {
    Body child(loadCaseFromString(sphereCase(true, a, false), "child.toml", {}));
    const std::vector<double> tc = testing::steadyTemperatures(child);
    const SegmentMesh& mc = child.segments()[testing::segmentIndex(child, "ball")];
    double worst = 0.0;
    for (int ir = 0; ir < ma.nr; ++ir)
      worst = std::max(worst, std::abs(tc[mc.node(0, ir)] - ta[ma.node(0, ir)]) / (ta[ma.node(0, ir)] - 278.15));
    std::printf("[sphere_child] contact radius %.0e m: child sphere vs sphere alone, max relative difference of the "
                "rise %.3g\n", a, worst);
    CHECK(worst < previous);  // shrinks with the patch
    previous = worst;
  }
  CHECK(previous < 1e-3);
}

TEST_CASE("An insulated parent heats an unperfused sphere through the patch in series with the film",
          "[validation][sphere_child]") {
  const double a = 0.01, R = 0.03, h = 10.0, k = 0.5, Tinf = 278.15;
  std::string text = sphereCase(true, a);
  Body body(loadCaseFromString(text, "series.toml", {"tissues.core.metabolic_heat=0"}));
  const std::vector<double> t = testing::steadyTemperatures(body);
  const SegmentMesh& trunk = body.segments()[testing::segmentIndex(body, "trunk")];
  const double Q = 5000.0 * trunk.tissueVolume;  // the parent's metabolism, all of it through the patch
  const double rise = t[trunk.node(1, 0)] - Tinf;  // the attachment cell (attach_position 0.5 of 2 cells)
  const double expected = Q * (1.0 / (4.0 * k * a) + 1.0 / (h * (4.0 * pi * R * R - pi * a * a)));
  std::printf("[sphere_child] parent rise %.6g K, series circuit %.6g K (rel. %.2g; the half cell under the "
              "sphere's face, 0.375 mm, is not in the circuit)\n", rise, expected, std::abs(rise / expected - 1.0));
  CHECK(std::abs(rise / expected - 1.0) < 5e-3);
}

TEST_CASE("contact_radius: only for a sphere child, not larger than its radius", "[case][sphere_child]") {
  auto message = [](const std::string& text, const std::vector<std::string>& sets) {
    try {
      loadCaseFromString(text, "bad.toml", sets);
    } catch (const CaseError& e) {
      return std::string(e.what());
    }
    return std::string();
  };
  const std::string tooLarge = message(sphereCase(true, 0.05), {});
  CHECK(tooLarge.find("contact_radius") != std::string::npos);
  CHECK(tooLarge.find("bad.toml") != std::string::npos);
  const std::string onRoot = message(sphereCase(false, 0.0) + "contact_radius = \"1 cm\"\n", {});
  CHECK(onRoot.find("contact_radius") != std::string::npos);
}

TEST_CASE("A sphere child's resolved case keeps its contact radius and reloads to the same network",
          "[case][sphere_child]") {
  // Identity (common practice, no source): the resolved text must carry contact_radius and rebuild the same body.
  const Case original = loadCaseFromString(headOnTrunk, "head.toml", {});
  const std::string text = resolvedCaseToml(original);
  CHECK(text.find("contact_radius") != std::string::npos);
  const Case again = loadCaseFromString(text, "resolved.toml");
  Body a(original), b(again);
  REQUIRE(a.network().nodes.size() == b.network().nodes.size());
  REQUIRE(a.network().conductances.size() == b.network().conductances.size());
  double worst = 0.0;
  for (std::size_t i = 0; i < a.network().conductances.size(); ++i)
    worst = std::max(worst, std::abs(a.network().conductances[i].conductance / b.network().conductances[i].conductance - 1.0));
  CHECK(worst < 1e-14);
}
