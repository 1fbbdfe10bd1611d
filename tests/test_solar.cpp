// Absorbed sun against the shadow of each shape. With a beam normal to the axis (cylinder, cone) or to the face
// (plate), and any beam for a sphere, a body absorbs alpha S times its shadow area (geometry; common practice,
// no source): sphere pi R^2, cylinder 2 R L, cone (frustum) (R0 + R1) L, plate L w, with R the outer radius
// (coat included). End faces lie parallel to the beam: they add nothing, exposed or insulated.
#include <catch2/catch.hpp>

#include <algorithm>
#include <cmath>
#include <cstdio>
#include <numbers>
#include <string>
#include <vector>

#include "models/body.hpp"
#include "models/case.hpp"

using namespace thermorph;
using std::numbers::pi;

namespace {

constexpr double kIrradiance = 1000.0;  // [W/m2]

//! Absorbed sun of the whole body at t = 0 [W]: every face's solar channel, copies counted.
double absorbedSun(const std::string& segments, const std::vector<std::string>& overrides = {}) {
  Body body(loadCaseFromString(R"toml(
[circulation]
fixed_arterial_temperature = "37 degC"
[environment]
temperature = "20 degC"
convection = "10 W/(m2 K)"
solar_irradiance = "1000 W/m2"
)toml" + segments,
                               "solar.toml", overrides));
  const Network& n = body.network();
  const auto it = std::find(n.channels.begin(), n.channels.end(), std::string("solar"));
  REQUIRE(it != n.channels.end());
  const auto solar = static_cast<std::size_t>(it - n.channels.begin());
  std::vector<double> heat(n.channels.size()), slope(n.channels.size());
  double total = 0.0;
  for (Index f = 0; f < n.faces.size(); ++f) {
    std::fill(heat.begin(), heat.end(), 0.0);
    body.environment().faceHeat(f, 305.0, 0.0, heat, slope);
    total += n.groupWeights[n.nodes[n.faces[f].node].group] * heat[solar];
  }
  return total;
}

double relErr(double value, double reference) { return std::abs(value / reference - 1.0); }

}  // namespace

TEST_CASE("Absorbed sun equals alpha S times the shadow area of each shape", "[environment][solar]") {
  const double alpha = 0.8;
  struct Shape {
    const char* name;
    std::string toml;
    double shadow;  //!< [m2], from the outer dimensions
  };
  // Cylinder: tissue radius 2 cm + 0.5 cm coat, 20 cm long -> 2 R L = 2 * 0.025 * 0.20.
  const std::string cylinder = R"toml(
[[segments]]
name = "leg"
shape = "cylinder"
length = "20 cm"
axial_cells = 5
layers = [{ tissue = "muscle", thickness = "1.5 cm", cells = 2 }, { tissue = "skin", thickness = "0.5 cm", cells = 1 }]
coat = { material = "fur", thickness = "0.5 cm", cells = 1 }
surface = { solar_absorptivity = 0.8, ends = "ENDS" }
)toml";
  // Slender cone: tissue 4 -> 1.5 cm + 1 cm coat, 30 cm: (R0 + R1) L = (0.05 + 0.025) * 0.30.
  const std::string cone = R"toml(
[[segments]]
name = "tail"
shape = "cone"
length = "30 cm"
radius_proximal = "4 cm"
radius_distal = "1.5 cm"
axial_cells = 6
layers = [{ tissue = "muscle", cells = 2 }, { tissue = "skin", thickness = "0.5 cm", cells = 1 }]
coat = { material = "fur", thickness = "1 cm", cells = 1 }
surface = { solar_absorptivity = 0.8, ends = "ENDS" }
)toml";
  // Stout cone (half-angle 48 deg): tissue 10 -> 1 cm, 8 cm long, bare: (0.10 + 0.01) * 0.08.
  const std::string stout = R"toml(
[[segments]]
name = "stump"
shape = "cone"
length = "8 cm"
radius_proximal = "10 cm"
radius_distal = "1 cm"
axial_cells = 4
layers = [{ tissue = "muscle", cells = 3 }, { tissue = "skin", thickness = "0.5 cm", cells = 1 }]
surface = { solar_absorptivity = 0.8, ends = "ENDS" }
)toml";
  // Sphere: tissue 3 cm + 1 cm coat -> pi R^2 = pi 0.04^2.
  const std::string sphere = R"toml(
[[segments]]
name = "body"
shape = "sphere"
radius = "3 cm"
layers = [{ tissue = "muscle", cells = 3 }, { tissue = "skin", thickness = "0.3 cm", cells = 1 }]
coat = { material = "feathers", thickness = "1 cm", cells = 2 }
surface = { solar_absorptivity = 0.8 }
)toml";
  // Plate: 10 cm long, 4 cm wide, 1 cm thick: L w = 0.10 * 0.04 (one face of the two is lit).
  const std::string plate = R"toml(
[[segments]]
name = "ear"
shape = "plate"
length = "10 cm"
width = "4 cm"
thickness = "1 cm"
axial_cells = 4
layers = [{ tissue = "bone", cells = 2 }, { tissue = "skin", thickness = "0.1 cm", cells = 1 }]
coat = { material = "fur", thickness = "0.2 cm", cells = 1 }
surface = { solar_absorptivity = 0.8 }
)toml";
  auto with = [](std::string text, const char* ends) {
    text.replace(text.find("ENDS"), 4, ends);
    return text;
  };
  const std::vector<Shape> shapes = {
      {"sphere", sphere, pi * 0.04 * 0.04},
      {"cylinder, ends exposed", with(cylinder, "exposed"), 2.0 * 0.025 * 0.20},
      {"cylinder, ends insulated", with(cylinder, "insulated"), 2.0 * 0.025 * 0.20},
      {"slender cone, ends exposed", with(cone, "exposed"), (0.05 + 0.025) * 0.30},
      {"slender cone, ends insulated", with(cone, "insulated"), (0.05 + 0.025) * 0.30},
      {"stout cone, ends exposed", with(stout, "exposed"), (0.10 + 0.01) * 0.08},
      {"stout cone, ends insulated", with(stout, "insulated"), (0.10 + 0.01) * 0.08},
      {"plate", plate, 0.10 * 0.04},
  };
  for (const Shape& s : shapes) {
    const double q = absorbedSun(s.toml);
    const double expected = alpha * kIrradiance * s.shadow;
    std::printf("[solar] %-28s absorbed %.9g W, alpha S shadow %.9g W, rel. error %.1e\n", s.name, q, expected,
                relErr(q, expected));
    INFO(s.name);
    CHECK(relErr(q, expected) < 1e-12);
  }
}

TEST_CASE("A given solar_exposure scales the lateral area only - end faces never take sun", "[environment][solar]") {
  // solar_exposure = sunlit projected area / lateral area (cases/REFERENCE.md): 0.2 of a 2 cm x 20 cm bare
  // cylinder's lateral area 2 pi R L, whatever its ends.
  const std::string leg = R"toml(
[[segments]]
name = "leg"
shape = "cylinder"
length = "20 cm"
axial_cells = 3
layers = [{ tissue = "muscle", thickness = "2 cm", cells = 2 }]
surface = { solar_absorptivity = 1.0, solar_exposure = 0.2 }
)toml";
  const double expected = 0.2 * kIrradiance * 2.0 * pi * 0.02 * 0.20;
  CHECK(relErr(absorbedSun(leg), expected) < 1e-12);
  CHECK(relErr(absorbedSun(leg, {"segments.leg.surface.ends=\"insulated\""}), expected) < 1e-12);
}
