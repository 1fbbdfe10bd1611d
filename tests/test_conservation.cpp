// Energy conservation of transient runs (drivers/simulation.hpp): the cumulative channel energies must equal the
// change of stored heat, and an insulated body must store exactly its metabolic heat.
#include <catch2/catch.hpp>

#include <cmath>
#include <cstdio>
#include <numbers>
#include <string>

#include "test_support.hpp"

using namespace thermorph;
using namespace thermorph::testing;

TEST_CASE("Transient run with metabolism, perfusion and convection conserves energy", "[validation]") {
  // First law (common practice, no source): sum of channel energies = change of stored heat sum C T.
  // Criterion: |energy balance error| <= 1e-6 of the gross heat exchanged. Built-in tissues (metabolism with
  // Q10 = 2, perfusion), a fixed arterial supply, a fur coat and exposed ends; two segments.
  auto body = bodyFromToml(R"toml(
[run]
duration = "1 h"
output_interval = "10 min"
initial_temperature = "37 degC"
[circulation]
fixed_arterial_temperature = "37 degC"
[[segments]]
name = "limb"
shape = "cylinder"
length = "15 cm"
axial_cells = 6
layers = [{ tissue = "bone", thickness = "0.5 cm", cells = 3 }, { tissue = "muscle", thickness = "1 cm", cells = 6 },
          { tissue = "skin", thickness = "0.2 cm", cells = 2 }]
coat = { material = "fur", thickness = "1 cm", cells = 3 }
surface = { ends = "exposed", convection = "20 W/(m2 K)" }
[environment]
temperature = "-5 degC"
convection = "10 W/(m2 K)"
)toml");
  RunSummary s = runTransient(*body, silentRun());
  REQUIRE(s.complete);
  const double relative = std::abs(s.energyBalanceError) / s.throughput;
  std::printf("[validation] energy balance, perfused limb, 1 h: error %.3e J of %.4e J exchanged "
              "(relative %.2e)\n",
              s.energyBalanceError, s.throughput, relative);
  INFO("energy balance error " << s.energyBalanceError << " J, throughput " << s.throughput << " J");
  CHECK(s.throughput > 1e4);  // the run does exchange heat
  CHECK(relative <= 1e-6);
}

TEST_CASE("Whole-body run with a blood pool, paired limbs and surface correlations conserves energy",
          "[validation]") {
  // First law (common practice, no source), as above, where budgets are weighted by segment counts (a pair of
  // legs simulated once), blood circulates through a central pool with countercurrent exchange and shunts, and
  // the surface exchanges heat by convection correlations, radiation, sun and evaporation.
  auto body = bodyFromToml(R"toml(
[run]
duration = "1 h"
output_interval = "15 min"
initial_temperature = "37 degC"
[[segments]]
name = "trunk"
shape = "sphere"
layers = [{ tissue = "viscera", thickness = "5 cm", cells = 5 }, { tissue = "muscle", thickness = "1 cm", cells = 3 },
          { tissue = "skin", thickness = "0.2 cm", cells = 1 }]
coat = { material = "fur", thickness = "1 cm", cells = 2 }
[[segments]]
name = "leg"
parent = "trunk"
count = 2
shape = "cylinder"
length = "15 cm"
axial_cells = 4
layers = [{ tissue = "muscle", thickness = "1 cm", cells = 3 }, { tissue = "skin", thickness = "0.2 cm", cells = 1 }]
vessels = { countercurrent_conductance = "0.05 W/K", shunt_flow_max = "0.1 mL/s" }
vasomotor = { shunt = 0.5, superficial_return = 0.3 }
surface = { wetted_fraction = 0.2 }
[environment]
temperature = "5 degC"
speed = "2 m/s"
solar_irradiance = "300 W/m2"
)toml");
  RunSummary s = runTransient(*body, silentRun());
  REQUIRE(s.complete);
  const double relative = std::abs(s.energyBalanceError) / s.throughput;
  std::printf("[validation] energy balance, whole body with pool and paired legs, 1 h: error %.3e J of %.4e J "
              "exchanged (relative %.2e)\n",
              s.energyBalanceError, s.throughput, relative);
  INFO("energy balance error " << s.energyBalanceError << " J, throughput " << s.throughput << " J");
  CHECK(s.throughput > 1e4);
  CHECK(relative <= 1e-6);
}

TEST_CASE("An insulated body stores exactly its metabolic heat", "[validation]") {
  // First law (common practice, no source): with insulated ends, no convection (h = 0) and no perfusion the only
  // heat input is metabolism M = q V_tissue, constant because Q10 = 1; stored heat rises by M t. Criterion:
  // relative error 1e-6. M is computed here from the case inputs (V = pi R^2 L), not from the mesh.
  const double q = 800.0, R = 0.02, L = 0.25, duration = 7200.0;
  auto body = bodyFromToml(R"toml(
[run]
duration = 7200
output_interval = 1800
initial_temperature = "30 degC"
[tissues.warm]
conductivity = 0.45
density = 1050
specific_heat = 3500
metabolic_heat = 800
perfusion = 0
q10 = 1
[[segments]]
name = "insulated"
shape = "cylinder"
length = 0.25
axial_cells = 4
layers = [{ tissue = "warm", thickness = 0.02, cells = 10 }]
coat = { material = "fur", thickness = 0.01, cells = 3 }
surface = { ends = "insulated" }
[environment]
temperature = "0 degC"
convection = 0
)toml");
  RunSummary s = runTransient(*body, silentRun());
  REQUIRE(s.complete);
  const double M = q * std::numbers::pi * R * R * L;  // [W]
  const Index metabolism = 0;
  REQUIRE(body->network().channels[metabolism] == "metabolism");
  const double eStored = std::abs(s.storedChange / (M * duration) - 1.0);
  const double eChannel = std::abs(s.channelEnergy[metabolism] / (M * duration) - 1.0);
  const double eRate = std::abs(s.storage[0] / M - 1.0);
  std::printf("[validation] insulated body, M = %.5f W over %g s: stored-heat error %.2e, metabolic-energy error "
              "%.2e, final storage-rate error %.2e (relative)\n",
              M, duration, eStored, eChannel, eRate);
  INFO("stored change " << s.storedChange << " J, expected " << M * duration << " J");
  CHECK(eStored <= 1e-6);
  CHECK(eChannel <= 1e-6);
  CHECK(eRate <= 1e-6);
}
