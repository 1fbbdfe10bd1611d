// Case loading: unit parsing, defaults, --set overrides, and the wording of input errors (part of the interface).
#include <catch2/catch.hpp>

#include <string>

#include "test_common.hpp"
#include "models/case.hpp"
#include "models/units.hpp"

using namespace thermorph;

namespace {

const std::string minimal = R"toml(
[circulation]
fixed_arterial_temperature = "37 degC"
[[segments]]
name = "leg"
shape = "cylinder"
length = "10 cm"
axial_cells = 4
layers = [{ tissue = "bone", thickness = "0.5 cm", cells = 2 },
          { tissue = "muscle", thickness = "1 cm", cells = 4 }]
)toml";


}  // namespace

TEST_CASE("unit strings convert to SI", "[units]") {
  // Unit definitions: udunits2 database (UCAR); conversions are exact by definition (common practice, no source).
  CHECK(parseQuantity("12 cm", "m") == Approx(0.12).epsilon(1e-14));
  CHECK(parseQuantity("37 degC", "K") == Approx(310.15).epsilon(1e-14));
  CHECK(parseQuantity("310.15 K", "K") == Approx(310.15).epsilon(1e-14));
  CHECK(parseQuantity("250 kJ/h", "W") == Approx(250e3 / 3600).epsilon(1e-14));
  CHECK(parseQuantity("20 W/(m2 K)", "W/(m2 K)") == Approx(20.0));
  CHECK(parseQuantity("20 W m-2 K-1", "W/(m2 K)") == Approx(20.0));
  CHECK(parseQuantity("2 h", "s") == Approx(7200.0));
  CHECK(parseQuantity("0.5", "m") == Approx(0.5));  // a bare number is SI
  CHECK_THROWS_AS(parseQuantity("5 kg", "m"), UnitError);
  CHECK_THROWS_AS(parseQuantity("5 furlongz", "m"), UnitError);
  CHECK_THROWS_AS(parseQuantity("cm", "m"), UnitError);
}

TEST_CASE("perfusion in mL/(100 g min) converts with the tissue density", "[units]") {
  // docs/references.md [computed]: 3 mL/(100 g min) <-> omega = 5.45e-4 1/s at rho 1090 kg/m3:
  // 3e-6 m3 / (0.1 kg * 60 s) * 1090 kg/m3 = 5.45e-4 1/s.
  Case c = loadCaseFromString(minimal + R"toml(
[tissues.muscle]
perfusion = "3 mL/(100 g min)"
density = "1090 kg/m3"
)toml", "case.toml");
  CHECK(c.tissues.at("muscle").perfusion == Approx(5.45e-4).epsilon(1e-12));
  Case d = loadCaseFromString(minimal + "[tissues.muscle]\nperfusion = \"5.45e-4 1/s\"\n", "case.toml");
  CHECK(d.tissues.at("muscle").perfusion == Approx(5.45e-4).epsilon(1e-12));
}

TEST_CASE("defaults are filled in and the resolved case reloads to the same values", "[case]") {
  Case c = loadCaseFromString(minimal, "case.toml");
  CHECK(c.run.duration == 3600.0);
  CHECK(c.run.initialTemperature == Approx(310.15));
  CHECK(c.environment.temperature == Approx(293.15));
  REQUIRE(c.segments.size() == 1);
  CHECK(c.segments[0].tissueRadius() == Approx(0.015));
  Case again = loadCaseFromString(resolvedCaseToml(c), "resolved.toml");
  CHECK(again.segments[0].tissueRadius() == Approx(0.015));
  CHECK(again.segments[0].axialCells == 4);
  CHECK(again.tissues.at("muscle").conductivity == c.tissues.at("muscle").conductivity);
  CHECK(*again.circulation.fixedArterialTemperature == Approx(310.15));
}

TEST_CASE("KEY=VALUE overrides (--set) change any key with the same checks", "[case]") {
  Case c = loadCaseFromString(minimal, "case.toml",
                              {"segments.leg.layers.1.thickness=4 cm", "environment.temperature=\"5 degC\"",
                               "run.duration=600", "segments.0.axial_cells=7"});
  CHECK(c.segments[0].layers[1].thickness == Approx(0.04));
  CHECK(c.environment.temperature == Approx(278.15));
  CHECK(c.run.duration == 600.0);
  CHECK(c.segments[0].axialCells == 7);
  std::string e = common::caseErrorOf(minimal, {"segments.leg.layers.0.thickness=5 kg"});
  CHECK_THAT(e, Catch::Contains("--set") && Catch::Contains("segments.leg.layers.0.thickness") &&
                    Catch::Contains("length"));
  CHECK_THAT(common::caseErrorOf(minimal, {"segments.arm.length=1"}), Catch::Contains("no element \"arm\"") && Catch::Contains("leg"));
}

TEST_CASE("a text loaded again after overrides has its own values and source positions", "[case]") {
  // Sweeps, fits and sensitivity runs load one text once per run with other overrides; the parsed text is kept per
  // thread and put back after each load. Expected values: the case text and the overrides themselves (no source).
  const std::string text = minimal + "[environment]\ntemperature = \"5 degC\"\n";
  // Overrides that replace a value, then the whole table holding it (the later override wins), add a table that
  // the text does not have, and change an element of an array of tables.
  Case c = loadCaseFromString(text, "case.toml",
                              {"environment.temperature=\"7 degC\"", "environment={ temperature = \"9 degC\" }",
                               "run.duration=600", "segments.leg.layers.1.thickness=4 cm", "segments.0.axial_cells=7",
                               "segments.0.layers.0={ tissue = \"fat\", thickness = \"0.5 cm\", cells = 2 }"});
  CHECK(c.environment.temperature == Approx(282.15));
  CHECK(c.run.duration == 600.0);
  CHECK(c.segments[0].layers[0].tissue == "fat");
  CHECK(c.segments[0].layers[1].thickness == Approx(0.04));
  CHECK(c.segments[0].axialCells == 7);
  Case again = loadCaseFromString(text, "case.toml");
  CHECK(again.environment.temperature == Approx(278.15));
  CHECK(again.run.duration == 3600.0);  // the default: the text has no [run]
  CHECK(again.segments[0].layers[0].tissue == "bone");
  CHECK(again.segments[0].layers[1].thickness == Approx(0.01));
  CHECK(again.segments[0].axialCells == 4);
  // An override list that fails part-way leaves the text as it was.
  CHECK_THAT(common::caseErrorOf(text, {"environment.temperature=\"7 degC\"", "segments.arm.length=1"}),
             Catch::Contains("no element \"arm\""));
  CHECK(loadCaseFromString(text, "case.toml").environment.temperature == Approx(278.15));
  // A bad value replaced by an override in one load is reported at its line and column in the next.
  const std::string bad = minimal + "[environment]\ntemperature = \"5 kg\"\n";
  CHECK(loadCaseFromString(bad, "case.toml", {"environment={ temperature = \"7 degC\" }"}).environment.temperature ==
        Approx(280.15));
  CHECK_THAT(common::caseErrorOf(bad), Catch::Contains("case.toml:12:15") && Catch::Contains("\"5 kg\""));
}

TEST_CASE("bad input names file, line, key path, value and what is allowed", "[case][errors]") {
  // Wrong dimension.
  std::string e = common::caseErrorOf(minimal + "[environment]\ntemperature = \"5 kg\"\n");
  CHECK_THAT(e, Catch::Contains("case.toml:12:15") && Catch::Contains("environment.temperature") &&
                    Catch::Contains("\"5 kg\"") && Catch::Contains("temperature"));
  // Unknown key with the nearest valid key.
  e = common::caseErrorOf(minimal + "[run]\nduraton = \"1 h\"\n");
  CHECK_THAT(e, Catch::Contains("unknown key \"duraton\"") && Catch::Contains("did you mean \"duration\""));
  e = common::caseErrorOf(R"toml(
[[segments]]
name = "leg"
shape = "cylinder"
lenght = "10 cm"
layers = [{ tissue = "muscle", thickness = "1 cm" }]
)toml");
  CHECK_THAT(e, Catch::Contains("case.toml:5:") && Catch::Contains("segments.leg.lenght") &&
                    Catch::Contains("did you mean \"length\""));
  // Unknown tissue, unknown shape.
  e = common::caseErrorOf(R"toml(
[[segments]]
name = "leg"
shape = "cylinder"
length = "10 cm"
layers = [{ tissue = "musle", thickness = "1 cm" }]
)toml");
  CHECK_THAT(e, Catch::Contains("unknown tissue \"musle\"") && Catch::Contains("muscle") &&
                    Catch::Contains("segments.leg.layers.0.tissue"));
  e = common::caseErrorOf(R"toml(
[[segments]]
name = "leg"
shape = "cube"
length = "10 cm"
layers = [{ tissue = "muscle", thickness = "1 cm" }]
)toml");
  CHECK_THAT(e, Catch::Contains("\"cube\" is not one of: sphere, cylinder, cone, plate"));
  // Non-positive sizes and properties.
  e = common::caseErrorOf(minimal + "[tissues.muscle]\nconductivity = -0.4\n");
  CHECK_THAT(e, Catch::Contains("tissues.muscle.conductivity") && Catch::Contains("out of range") &&
                    Catch::Contains("> 0"));
  e = common::caseErrorOf(minimal, {"segments.leg.length=\"0 cm\""});
  CHECK_THAT(e, Catch::Contains("segments.leg.length") && Catch::Contains("out of range"));
  // A bare number for a temperature is kelvin: suggest degC.
  e = common::caseErrorOf(minimal + "[environment]\ntemperature = 20\n");
  CHECK_THAT(e, Catch::Contains("did you mean \"20 degC\""));
  // Too many cells: the limit is stated.
  e = common::caseErrorOf(minimal, {"segments.leg.axial_cells=100000", "segments.leg.layers.1.cells=100"});
  CHECK_THAT(e, Catch::Contains("the limit is 2000000"));
  // Syntax errors carry the position.
  e = common::caseErrorOf("[run\nduration = 1\n");
  CHECK_THAT(e, Catch::Contains("case.toml:1:") && Catch::Contains("TOML syntax error"));
  // A missing file.
  try {
    loadCase("/nonexistent/case.toml");
    FAIL("no error");
  } catch (const CaseError& err) {
    CHECK_THAT(err.what(), Catch::Contains("/nonexistent/case.toml") && Catch::Contains("cannot open"));
  }
}

TEST_CASE("the case reference is generated from the schema and committed up to date", "[case][docs]") {
  std::string generated = caseReferenceMarkdown();
  CHECK_THAT(generated, Catch::Contains("`segments[].layers[].thickness`"));
  std::FILE* f = std::fopen(THERMORPH_SOURCE_DIR "/cases/REFERENCE.md", "rb");
  REQUIRE(f != nullptr);
  std::string committed;
  char buffer[4096];
  for (std::size_t n; (n = std::fread(buffer, 1, sizeof buffer, f)) > 0;) committed.append(buffer, n);
  std::fclose(f);
  INFO("regenerate with: build/thermorph reference > cases/REFERENCE.md");
  CHECK(committed == generated);
}
