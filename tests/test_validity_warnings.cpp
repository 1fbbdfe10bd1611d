// Range warnings of correlations and property tables describe states a run reports, not the solvers' trial states
// (models/media.hpp, ValidityLogScope): a steady solve started from a guess far below the water's range warns of
// nothing when its solution lies inside it, and a state the run reports outside a range still warns.
#include <catch2/catch.hpp>

#include <string>
#include <vector>

#include "models/media.hpp"
#include "test_support_body.hpp"

using namespace thermorph;
using namespace thermorph::testing;

namespace {

bool anyContains(const std::vector<std::string>& lines, const std::string& text) {
  for (const std::string& l : lines)
    if (l.find(text) != std::string::npos) return true;
  return false;
}

//! A bare perfused cylinder in 20 degC fresh water at 0.5 m/s (film temperature 20-37 degC at the steady state),
//! its steady solve started from a uniform `guess`.
std::string limbInWater(const std::string& guess, const std::string& speed = "0.5 m/s") {
  return R"toml(
[run]
initial = "steady"
initial_temperature = ")toml" + guess + R"toml("
duration = "60 s"
output_interval = "60 s"
[circulation]
fixed_arterial_temperature = "37 degC"
[[segments]]
name = "limb"
shape = "cylinder"
length = "20 cm"
axial_cells = 4
layers = [{ tissue = "muscle", thickness = "2 cm", cells = 4 }, { tissue = "skin", thickness = "0.2 cm", cells = 2 }]
surface = { ends = "insulated" }
[environment]
medium = "water"
temperature = "20 degC"
speed = ")toml" + speed + R"toml("
)toml";
}

}  // namespace

TEST_CASE("Range checks in a ValidityLogScope(false) answer but log nothing - later checks log", "[media][validity]") {
  resetValidityWarnings();
  {
    const ValidityLogScope deferred(false);
    CHECK_FALSE(validityLogging());
    CHECK(fluidProperties(Medium::Air, 450.0).outsideValidity);  // Incropera et al. Table A.4 ends at 400 K
    CHECK(takeValidityWarnings().empty());
    {
      const ValidityLogScope logging(true);  // the recorder's scope inside a run's
      CHECK(validityLogging());
      CHECK(fluidProperties(Medium::FreshWater, 270.0).outsideValidity);  // Table A.6 starts at 273.15 K
      CHECK(takeValidityWarnings().size() == 1);
    }
    CHECK_FALSE(validityLogging());
  }
  CHECK(validityLogging());
  // The deferred check did not count as issued: the same (correlation, parameter) warns now.
  CHECK(fluidProperties(Medium::Air, 450.0).outsideValidity);
  const std::vector<std::string> w = takeValidityWarnings();
  REQUIRE(w.size() == 1);
  CHECK(w[0].find("air properties") == 0);
  resetValidityWarnings();
}

TEST_CASE("A steady solve started far below the water's range warns of no state it does not report", "[validity]") {
  // Started from -30 degC, the relaxation's first evaluations put the water film at -5 degC, below fresh water's
  // table (Incropera et al. 2007, Table A.6, from 273.15 K); the solution's film lies at 20-37 degC. Before the
  // deferral the run warned of a water temperature that none of its outputs has.
  const auto body = bodyFromToml(limbInWater("-30 degC"));
  const RunSummary s = runTransient(*body, silentRun());
  REQUIRE(s.complete);
  for (const std::string& w : s.warnings) INFO(w);
  CHECK_FALSE(anyContains(s.warnings, "outside the validity range"));
  for (double t : s.finalState) CHECK(t > 273.15 + 19.9);  // the reported states lie inside the table
  // A state the run reports outside a range still warns, whatever the guess: a sphere of 5 cm radius in water at
  // 2 m/s has Re = 2 m/s 0.1 m / 1.0e-6 m2/s, about 2e5, above Whitaker's (1972) 7.6e4 (the range of
  // models/convection.hpp; Incropera et al. 2007 eq. 7.56, equation number from memory).
  auto sphereRun = [](const std::string& guess) {
    std::string toml = limbInWater(guess, "2 m/s");
    const std::string cylinder = toml.substr(toml.find("shape = \"cylinder\""), toml.find("surface =") - toml.find("shape = \"cylinder\""));
    toml.replace(toml.find(cylinder), cylinder.size(),
                 "shape = \"sphere\"\nlayers = [{ tissue = \"muscle\", thickness = \"4.8 cm\", cells = 6 }, "
                 "{ tissue = \"skin\", thickness = \"0.2 cm\", cells = 2 }]\n");
    toml.erase(toml.find("surface = { ends = \"insulated\" }"), std::string("surface = { ends = \"insulated\" }").size());
    const auto b = bodyFromToml(toml);
    const RunSummary r = runTransient(*b, silentRun());
    REQUIRE(r.complete);
    std::vector<std::string> out;
    for (const std::string& w : r.warnings)
      if (w.find("outside the validity range") != std::string::npos) out.push_back(w);
    return out;
  };
  const std::vector<std::string> warm = sphereRun("37 degC"), cold = sphereRun("-30 degC");
  REQUIRE(warm.size() == 1);
  CHECK(warm[0].find("Whitaker (1972) sphere in forced flow: Re = ") == 0);
  CHECK(cold == warm);
}
