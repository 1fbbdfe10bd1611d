// The small unit database (models/udunits/thermorph-units.xml) against udunits2's full database: every unit the
// schema and the example cases write converts to the same number with both. The reference is the full
// database of UDUNITS-2 (Unidata, Debian package libudunits2-data), a general-purpose unit library.
#include <catch2/catch.hpp>

#include <cmath>
#include <filesystem>
#include <set>
#include <string>
#include <vector>

#include <toml++/toml.h>

#include "models/case_schema.hpp"
#include "models/units.hpp"

using namespace thermorph;

namespace {

// Every quoted "number unit" string of a TOML file (tables, arrays, inline tables).
void collectUnits(const toml::node& node, std::set<std::string>& out) {
  if (const auto* table = node.as_table()) {
    for (const auto& [key, value] : *table) collectUnits(value, out);
  } else if (const auto* array = node.as_array()) {
    for (const auto& value : *array) collectUnits(value, out);
  } else if (const auto* text = node.as_string()) {
    try {
      ValueWithUnit vu = splitValueUnit(text->get());
      if (!vu.unit.empty()) out.insert(vu.unit);
    } catch (const UnitError&) {
      // not a quantity (a name, a file, a choice)
    }
  }
}

std::set<std::string> schemaSiUnits() {
  std::set<std::string> si;
  for (const Param& p : caseSchema())
    if (!p.unit.empty()) si.insert(std::string(p.unit));
  for (const char* extra : {"1", "J", "Pa", "m3/(kg s)", "m3"}) si.insert(extra);  // also: energies, pressures, perfusion per mass
  return si;
}

// Both databases convert `unit` to every SI unit it is convertible to with the same result, bit for bit;
// returns how many SI units it converted to.
int compareBoth(const std::string& unit, const std::set<std::string>& siUnits) {
  int converted = 0;
  for (const std::string& si : siUnits) {
    double full = 0.0;
    try {
      full = convertUnitWith(UnitDatabase::full, 1.0, unit, si);
    } catch (const UnitError&) {
      continue;  // not this quantity
    }
    for (double x : {1.0, 37.0, -12.5, 0.1, 1e-3, 12345.678}) {
      INFO(unit << " -> " << si << " at " << x);
      CHECK(convertUnitWith(UnitDatabase::small, x, unit, si) == convertUnitWith(UnitDatabase::full, x, unit, si));
    }
    CHECK(convertUnitWith(UnitDatabase::small, 1.0, unit, si) == full);
    ++converted;
  }
  return converted;
}

}  // namespace

TEST_CASE("the small unit database converts every schema and example-case unit as the full one", "[units]") {
  REQUIRE_FALSE(smallUnitDatabasePath().empty());
  const std::set<std::string> si = schemaSiUnits();
  std::set<std::string> units(si);
  for (const Param& p : caseSchema()) {
    try {
      ValueWithUnit vu = splitValueUnit(p.defaultValue);
      if (!vu.unit.empty()) units.insert(vu.unit);
    } catch (const UnitError&) {
    }
  }
  const std::filesystem::path root = THERMORPH_SOURCE_DIR;
  int files = 0;
  for (const auto* folder : {"cases", "tests/bench/studies"})
    for (const auto& entry : std::filesystem::directory_iterator(root / folder))
      if (entry.path().extension() == ".toml") {
        collectUnits(toml::parse_file(entry.path().string()), units);
        ++files;
      }
  CHECK(files >= 6);
  CHECK(units.count("mL/(100 g min)") == 1);
  CHECK(units.count("degC") == 1);
  for (const std::string& unit : units) {
    INFO("unit \"" << unit << "\"");
    CHECK(smallUnitDatabaseCovers(unit));  // read with the small database when a case is loaded
    CHECK(compareBoth(unit, si) >= 1);     // and it means what the full database says
  }
}

TEST_CASE("every identifier read with the small unit database means what it means in the full one", "[units]") {
  const std::set<std::string> si = schemaSiUnits();
  for (std::string_view id : smallUnitIdentifiers()) {
    INFO("identifier \"" << id << "\"");
    CHECK(smallUnitDatabaseCovers(id));
    CHECK(compareBoth(std::string(id), si) >= 1);
  }
  // Values from the definitions (BIPM SI Brochure 2019, Table 8 for min, h, d, L; the IT calorie 4.1868 J).
  CHECK(convertUnit(1.0, "h", "s") == 3600.0);
  CHECK(convertUnit(2.0, "L", "m3") == Approx(2e-3).epsilon(1e-15));
  CHECK(convertUnit(1.0, "kcal", "J") == Approx(4186.8).epsilon(1e-15));
  CHECK(convertUnit(37.0, "degC", "K") == Approx(310.15).epsilon(1e-15));
}

TEST_CASE("units outside the small database's identifiers use the full database", "[units]") {
  // "ft" is not in the small database: there it could only be femto-tonne (a mass). The full database reads the
  // international foot, 0.3048 m exactly (NIST SP 811, 2008, Appendix B.8).
  CHECK_FALSE(smallUnitDatabaseCovers("ft"));
  CHECK(convertUnit(1.0, "ft", "m") == Approx(0.3048).epsilon(1e-15));
  CHECK_THROWS_AS(convertUnitWith(UnitDatabase::small, 1.0, "ft", "m"), UnitError);
  CHECK(convertUnit(1.0, "inch", "cm") == Approx(2.54).epsilon(1e-15));
  CHECK_FALSE(smallUnitDatabaseCovers("W/(m2 degF)"));
  CHECK(unitConvertible("lb", "kg"));
  CHECK_FALSE(unitConvertible("lb", "m"));
}

TEST_CASE("conversions made without a unit database equal udunits2's", "[units]") {
  // The reference is udunits2's own converter with each database (UDUNITS-2, Unidata): x for a unit converted to
  // itself, x + 273.15 for degC to K (the definition of the degree Celsius, BIPM SI Brochure 2019, 2.3.1).
  std::vector<double> values{0.0, -0.0, 1.0, 37.0, -12.5, 0.1, 1e-3, 12345.678, 1e300, -273.15, 5e-324};
  for (int k = 0; k < 200; ++k) values.push_back(-300.0 + 700.0 * std::sin(1.0 + k) * std::sin(1.0 + k) + 1e-7 * k);
  const std::set<std::string> schema = schemaSiUnits();
  for (std::string_view si : databaseFreeSiUnits()) {
    INFO("unit \"" << si << "\"");
    CHECK(schema.count(std::string(si)) == 1);  // a unit the schema converts to
    for (double x : values) {
      CHECK(convertUnit(x, si, si) == convertUnitWith(UnitDatabase::full, x, si, si));
      CHECK(convertUnit(x, si, si) == convertUnitWith(UnitDatabase::small, x, si, si));
    }
  }
  for (double x : values) {
    INFO("degC -> K at " << x);
    CHECK(convertUnit(x, "degC", "K") == convertUnitWith(UnitDatabase::full, x, "degC", "K"));
    CHECK(convertUnit(x, "\u00b0C", "K") == convertUnitWith(UnitDatabase::small, x, "degC", "K"));
  }
  CHECK(convertUnit(37.0, "degC", "K") == Approx(310.15).epsilon(1e-15));
}
