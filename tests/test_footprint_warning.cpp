// A child's footprint on its parent that the junction cannot represent warns (models/case.cpp checkFootprints):
// the geometry of the footprint against the parent's diameter, length and perimeter (common practice, no source).
#include <catch2/catch.hpp>

#include <string>
#include <vector>

#include "models/body.hpp"
#include "models/case.hpp"

using namespace thermorph;

namespace {

//! A leg (cone, 6 cm, 0.35 -> 0.3 cm) with a child at its distal end, on a trunk; values illustrative.
std::string legWithChild(const std::string& child) {
  return R"toml(
title = "leg and child"
[[segments]]
name = "trunk"
shape = "cylinder"
length = "17 cm"
axial_cells = 4
layers = [{ tissue = "muscle", thickness = "4 cm", cells = 2 }]
[[segments]]
name = "leg"
parent = "trunk"
attach_position = 0.65
shape = "cone"
length = "6 cm"
radius_proximal = "0.35 cm"
radius_distal = "0.3 cm"
axial_cells = 8
layers = [{ tissue = "bone", thickness = "0.15 cm" }, { tissue = "muscle", thickness = "0.2 cm" }]
)toml" + child;
}

std::vector<std::string> footprintWarnings(const std::vector<std::string>& warnings) {
  std::vector<std::string> out;
  for (const std::string& w : warnings)
    if (w.find("footprint") != std::string::npos || w.find("circumference") != std::string::npos) out.push_back(w);
  return out;
}

}  // namespace

TEST_CASE("A child's footprint much longer than its parent is thick, or wider than its circumference, warns at the "
          "child's line",
          "[junction][warnings]") {
  // Geometry (common practice, no source): the footprint runs along the parent's axis over a plate's width or a
  // disc's diameter; the parent's outer diameter at attach_position 1 of the cone is 2 x 0.3 cm; its perimeter
  // pi x 0.6 cm = 1.885 cm. Warned: a footprint over 2 diameters and a quarter of the length; a cross-section over
  // the perimeter times the footprint's length (models/case.cpp checkFootprints).
  SECTION("a 3 cm wide foot plate on the end of the 6 cm leg: 3 / 0.6 = 5 diameters, 50 % of the length") {
    const Case c = loadCaseFromString(legWithChild(R"toml(
[[segments]]
name = "foot"
parent = "leg"
attach_position = 1.0
shape = "plate"
length = "5 cm"
width = "3 cm"
layers = [{ tissue = "bone", thickness = "0.1 cm" }, { tissue = "skin", thickness = "0.08 cm" }]
)toml"), "snow.toml");
    const auto w = footprintWarnings(c.warnings);
    REQUIRE(w.size() == 1);
    INFO(w[0]);
    CHECK(w[0].rfind("snow.toml:20:1: segment foot: its footprint on leg runs 3 cm along leg's axis (its width), 5 "
                     "times leg's diameter there (0.6 cm) and 50 % of its length", 0) == 0);
    // Reaches the body's warnings (printed at run start, stored in result files).
    const Body body(c);
    CHECK(footprintWarnings(body.warnings()).size() == 1);
  }
  SECTION("a foot as wide as the leg (a 0.6 cm cylinder): no warning") {
    const Case c = loadCaseFromString(legWithChild(R"toml(
[[segments]]
name = "foot"
parent = "leg"
attach_position = 1.0
shape = "cylinder"
length = "2 cm"
layers = [{ tissue = "bone", thickness = "0.1 cm" }, { tissue = "skin", thickness = "0.2 cm" }]
)toml"), "snow.toml");
    CHECK(footprintWarnings(c.warnings).empty());
  }
  SECTION("a narrow plate 4 cm thick across a 0.6 cm leg: cross-section 2 x 1 x 2 = 4 cm2 over 1.885 x 1 cm2") {
    const Case c = loadCaseFromString(legWithChild(R"toml(
[[segments]]
name = "fin"
parent = "leg"
attach_position = 1.0
shape = "plate"
length = "5 cm"
width = "1 cm"
layers = [{ tissue = "muscle", thickness = "2 cm" }]
)toml"), "snow.toml");
    const auto w = footprintWarnings(c.warnings);
    REQUIRE(w.size() == 1);
    INFO(w[0]);
    CHECK(w[0].find("segment fin: its cross-section (4 cm2) is larger than leg's side under its footprint (1.88 cm2") !=
          std::string::npos);
    CHECK(w[0].find("circumference") != std::string::npos);
  }
  SECTION("the examples: no footprint warning") {
    for (const char* name : {"quadruped", "large_bill", "wading_bird", "diving_seal", "env_day_cycle", "cold_feet_demo"}) {
      const Case c = loadCase(std::string(THERMORPH_SOURCE_DIR) + "/cases/" + name + ".toml");
      INFO(name);
      CHECK(footprintWarnings(c.warnings).empty());
    }
  }
}
