// A coat conducts at its wet conductivity while its segment is in water, also when the medium changes by event.
#include <catch2/catch.hpp>

#include "models/body.hpp"
#include "drivers/simulation.hpp"

using namespace thermorph;

namespace {

const char* furredDiver = R"toml(
[run]
duration = "20 min"
output_interval = "5 min"
[circulation]
fixed_arterial_temperature = "37 degC"
[[segments]]
name = "body"
shape = "cylinder"
length = "30 cm"
axial_cells = 2
layers = [{ tissue = "muscle", thickness = "5 cm", cells = 4 }, { tissue = "skin", thickness = "0.3 cm", cells = 1 }]
coat = { material = "fur", thickness = "1 cm", cells = 2 }
surface = { ends = "insulated" }
[environment]
temperature = "10 degC"
[[events]]
at = "10 min"
environment = { medium = "water", temperature = "10 degC", speed = "0.5 m/s" }
)toml";

//! Conductance between the two coat cells of axial cell 0 (radial cells 5 and 6) [W/K].
double coatConductance(const Body& body) {
  const SegmentMesh& m = body.segments()[0];
  for (const Conductance& c : body.network().conductances)
    if (c.a == m.node(0, 5) && c.b == m.node(0, 6)) return c.conductance;
  FAIL("no coat conductance");
  return 0.0;
}

}  // namespace

TEST_CASE("A coat conducts wet while its segment is in water and dry in air", "[environment][coat]") {
  // Coat-coat conductance k A_f / (r_j - r_i) scales with the coat's conductivity (harmonic mean of two equal
  // cells): the wet/dry ratio equals k_wet / k_dry of the built-in fur (0.45 / 0.04, from memory; Scholander et
  // al. 1950 for the loss of insulation when wet). Common practice: wet fur insulates far less.
  Body body(loadCaseFromString(furredDiver, "diver.toml"));
  const TissueProperties& fur = body.spec().tissues.at("fur");
  body.setInterval(0);
  const double dry = coatConductance(body);
  body.setInterval(1);
  const double wet = coatConductance(body);
  CHECK(wet / dry == Approx(fur.wetConductivity / fur.conductivity).epsilon(1e-12));
  body.setInterval(0);
  CHECK(coatConductance(body) == dry);

  // Energy stays conserved across the switch (conduction inside the body carries no energy in or out).
  RunOptions options;
  options.quiet = true;
  RunSummary s = runTransient(body, options);
  REQUIRE(s.complete);
  CHECK(std::abs(s.energyBalanceError) <= 1e-9 * s.throughput);
}
