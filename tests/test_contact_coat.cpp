// Substrate contact of a coated segment. The coat over the contact patch (contact_fraction f_c of the lateral
// surface) is a column from the outermost tissue cell to the substrate, in parallel with the rest of the coat,
// whose surface alone meets the air. Before 2026-12-04 both shared one surface temperature, set mostly by the air:
// an animal in fur lying on frozen ground (-2 degC) in colder air (-15 degC) was warmed by the ground.
//
// Checks, with the tissue held isothermal at the blood temperature T_b (very high conductivity and perfusion) and a
// fixed convection coefficient (no radiation), in the steady state:
//  1. the two parallel paths of a cylinder, each a coat shell ln(r_o/r_i) / (2 pi k L) (Incropera et al. 2007
//     eq. 3.28) in series with its film: q_sub = f_c (T_sub - T_b) / (R + 1/(h_sub A_o)) and
//     q_conv = (1 - f_c) (T_a - T_b) / (R + 1/(h A_o));
//  2. a limit (common practice, no source): a substrate at the air's temperature with the air's coefficient changes
//     nothing, for a cylinder, a cone, a sphere and a plate with metabolism and finite tissue conductivity.
#include <catch2/catch.hpp>

#include <cmath>
#include <cstdio>
#include <numbers>
#include <string>

#include "test_support_body.hpp"

using namespace thermorph;

namespace {

// Substrate at 20 degC between the body (37 degC) and the air (0 degC): with a shared surface, set mostly by the air
// (about 16 degC), the ground would warm the body.
const std::string isothermalCase = testing::isothermalFurredCylinder(
    R"(surface = { contact_fraction = 0.2, ends = "insulated" })",
    "substrate_temperature = \"20 degC\"\nsubstrate_conductance = \"50 W/(m2 K)\"\n");

struct Flows {
  double substrate = 0.0, convection = 0.0, metabolism = 0.0;
};

Flows steadyFlows(const std::string& text, const std::vector<std::string>& overrides) {
  Body body(loadCaseFromString(text, "contact-coat.toml", overrides));
  const Network& n = body.network();
  const std::vector<double> flows = testing::steadyGroupFlows(body).flows;
  Flows f;
  f.substrate = testing::bodyChannelTotal(n, flows, testing::channelIndex(n, "substrate"));
  f.convection = testing::bodyChannelTotal(n, flows, testing::channelIndex(n, "convection"));
  f.metabolism = testing::bodyChannelTotal(n, flows, testing::channelIndex(n, "metabolism"));
  return f;
}

//! The error message of isothermalCase with its `contact_fraction = 0.2` replaced by `contactKeys`.
std::string contactError(const std::string& contactKeys) {
  std::string text = isothermalCase;
  const std::string key = "contact_fraction = 0.2";
  text.replace(text.find(key), key.size(), contactKeys);
  return testing::caseErrorMessage(text);
}

}  // namespace

TEST_CASE("A coat's contact patch conducts to the substrate in parallel with the air-side coat", "[environment][coat]") {
  const Flows f = steadyFlows(isothermalCase, {});
  const double pi = std::numbers::pi, L = 0.1, ri = 0.02, ro = 0.03, k = 0.04;  // fur k: cases/REFERENCE.md
  const double fc = 0.2, h = 10.0, hSub = 50.0, Tb = 37.0, Ta = 0.0, Tsub = 20.0;
  const double R = std::log(ro / ri) / (2.0 * pi * k * L), Ao = 2.0 * pi * ro * L;
  const double substrate = fc * (Tsub - Tb) / (R + 1.0 / (hSub * Ao));
  const double convection = (1.0 - fc) * (Ta - Tb) / (R + 1.0 / (h * Ao));
  std::printf("[contact] substrate %.8g W (analytic %.8g, rel. error %.1e), convection %.8g W (analytic %.8g, %.1e)\n",
              f.substrate, substrate, std::abs(f.substrate / substrate - 1.0), f.convection, convection,
              std::abs(f.convection / convection - 1.0));
  // The tissue's finite conductivity and perfusion (not quite isothermal) are the only departures from the analytic
  // paths.
  CHECK(f.substrate < 0.0);  // the ground is colder than the body: it must take heat, whatever the air does
  CHECK(std::abs(f.substrate / substrate - 1.0) < 1e-3);
  CHECK(std::abs(f.convection / convection - 1.0) < 1e-3);
}

TEST_CASE("A compressed coat under the contact patch is a thinner shell", "[environment][coat]") {
  // surface.contact_coat_thickness t_c: the column's coat is the shell from r_i to r_i + t_c (Incropera et al. 2007
  // eq. 3.28); the contact area and the air side stay those of the full coat.
  const Flows f = steadyFlows(isothermalCase, {"segments.trunk.surface.contact_coat_thickness=\"3 mm\""});
  const double pi = std::numbers::pi, L = 0.1, ri = 0.02, ro = 0.03, tc = 0.003, k = 0.04;
  const double fc = 0.2, h = 10.0, hSub = 50.0, Tb = 37.0, Ta = 0.0, Tsub = 20.0, Ao = 2.0 * pi * ro * L;
  const double Rc = std::log((ri + tc) / ri) / (2.0 * pi * k * L), R = std::log(ro / ri) / (2.0 * pi * k * L);
  const double substrate = fc * (Tsub - Tb) / (Rc + 1.0 / (hSub * Ao));
  const double convection = (1.0 - fc) * (Ta - Tb) / (R + 1.0 / (h * Ao));
  std::printf("[contact] coat compressed to 3 mm: substrate %.8g W (analytic %.8g, rel. error %.1e), convection "
              "%.8g W (analytic %.8g, %.1e)\n", f.substrate, substrate, std::abs(f.substrate / substrate - 1.0),
              f.convection, convection, std::abs(f.convection / convection - 1.0));
  CHECK(std::abs(f.substrate / substrate - 1.0) < 1e-3);
  CHECK(std::abs(f.convection / convection - 1.0) < 1e-3);
  // Thicker than the coat: refused.
  const std::string message = contactError("contact_fraction = 0.2, contact_coat_thickness = \"2 cm\"");
  INFO(message);
  CHECK(message.find("segments.trunk.surface.contact_coat_thickness") != std::string::npos);
  CHECK(message.find("thicker than the coat") != std::string::npos);
}

TEST_CASE("A substrate like the air changes nothing, for every shape", "[environment][coat]") {
  const std::string common = R"toml(
[circulation]
fixed_arterial_temperature = "37 degC"
[environment]
temperature = "5 degC"
convection = "12 W/(m2 K)"
substrate_temperature = "5 degC"
substrate_conductance = "12 W/(m2 K)"
[[segments]]
name = "part"
layers = [{ tissue = "muscle", thickness = "2 cm", cells = 5 }, { tissue = "skin", thickness = "0.2 cm", cells = 2 }]
coat = { material = "fur", thickness = "1.5 cm", cells = 3 }
)toml";
  const std::vector<std::pair<std::string, std::string>> shapes = {
      {"cylinder", "length = \"12 cm\"\naxial_cells = 3\n"},
      {"cone", "length = \"12 cm\"\naxial_cells = 4\nradius_proximal = \"2.2 cm\"\nradius_distal = \"1.2 cm\"\n"},
      {"sphere", ""},
      {"plate", "length = \"12 cm\"\nwidth = \"6 cm\"\naxial_cells = 3\n"}};
  for (const auto& [shape, extra] : shapes) {
    for (const std::string ends : {"insulated", "exposed"}) {
      if (ends == "exposed" && (shape == "sphere" || shape == "plate")) continue;  // no end faces
      std::string text = common + "shape = \"" + shape + "\"\n" + extra;
      if (shape == "cylinder" || shape == "cone") text += "surface = { ends = \"" + ends + "\" }\n";
      const Flows none = steadyFlows(text, {});
      const Flows touching = steadyFlows(text, {"segments.part.surface.contact_fraction=0.3"});
      const double total = none.convection, withContact = touching.convection + touching.substrate;
      std::printf("[contact] %s, ends %s: convection %.10g W without contact, convection + substrate %.10g W with "
                  "(rel. %.1e)\n", shape.c_str(), ends.c_str(), total, withContact, std::abs(withContact / total - 1.0));
      CHECK(touching.substrate < 0.0);
      // Without end faces (or with insulated ones) the column is exactly the rings' share: round-off. With exposed
      // ends the column has no axial conduction and no end face of its own (its share of the coat's annular ends
      // stays with the rings): a few 1e-4 of the loss here.
      // A cone's taper drives axial conduction along the coat too (1.5e-5 here).
      CHECK(std::abs(withContact / total - 1.0) < (ends == "exposed" || shape == "cone" ? 1e-3 : 1e-12));
    }
  }
}

TEST_CASE("A coated segment lying wholly on the substrate is refused", "[environment][coat]") {
  // contact_fraction = 1 would leave the coat's rings with no conductance and their surface with no area.
  const std::string message = contactError("contact_fraction = 1");
  INFO(message);
  CHECK(message.find("segments.trunk.surface.contact_fraction") != std::string::npos);
  CHECK(message.find("below 1") != std::string::npos);
}
