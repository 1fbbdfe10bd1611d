// A medium that changes by event (a diver between sea water and air): the step lands at its time in the HDF5
// output (convection coefficient and radiation, solar and evaporation channels against calculations written out
// here), energy is conserved across the restarts, the Jacobian matches finite differences in both media, values
// follow the medium of their interval, and the input errors of a medium event name its key path.
#include <catch2/catch.hpp>

#include <hdf5.h>
#include <unistd.h>

#include <cmath>
#include <cstdio>
#include <filesystem>
#include <numbers>
#include <string>
#include <tuple>
#include <vector>

#include "test_common.hpp"
#include "models/media.hpp"
#include "models/surface_physics.hpp"
#include "test_support_body.hpp"

using namespace thermorph;
using namespace thermorph::testing;

namespace {

using V = EnvironmentVariable;
using std::numbers::pi;

constexpr double kZero = 273.15;

// The diver: testing::divingLeg (tests/test_support.hpp).
const std::string& diver = testing::divingLeg;

constexpr double kRadius = 0.012, kLength = 0.10;



//! Convection coefficient of a horizontal cylinder of diameter D in cross flow, written out [W/(m2 K)]:
//! forced, Churchill & Bernstein (1977) Nu = 0.3 + 0.62 Re^1/2 Pr^1/3 [1 + (0.4/Pr)^2/3]^-1/4
//! [1 + (Re/282000)^5/8]^4/5; free, Churchill & Chu (1975) Nu = {0.60 + 0.387 Ra^1/6 / [1 + (0.559/Pr)^9/16]^8/27}^2
//! with Gr = g b D^3 / nu^2, b = (T_s - T_inf)/T_film in air (ideal gas, Incropera eq. 9.12 with beta = 1/T) and
//! b = (rho_inf - rho_s)/rho_film in water; mixed, Churchill-Usagi Nu^3 = Nu_F^3 + Nu_N^3 (Incropera sec. 9.9).
//! Film-temperature properties from fluidProperties (checked against Incropera Table A.4 and Sharqawy et al.
//! 2010 in test_media.cpp).
double cylinderCoefficient(Medium medium, double Ts, double Tinf, double speed, double D) {
  const double film = 0.5 * (Ts + Tinf);
  const FluidProperties p = fluidProperties(medium, film);
  const double nu = p.viscosity / p.density, Pr = p.prandtl;
  const double Re = speed * D / nu;
  const double nuForced = 0.3 + 0.62 * std::sqrt(Re) * std::cbrt(Pr) / std::pow(1.0 + std::pow(0.4 / Pr, 2.0 / 3.0), 0.25) *
                                    std::pow(1.0 + std::pow(Re / 282000.0, 5.0 / 8.0), 4.0 / 5.0);
  const double b = medium == Medium::Air ? std::abs(Ts - Tinf) / film
                                         : std::abs(mediumDensity(medium, Tinf) - mediumDensity(medium, Ts)) / p.density;
  const double Ra = 9.80665 * b * D * D * D / (nu * nu) * Pr;
  const double nuFree =
      std::pow(0.60 + 0.387 * std::pow(Ra, 1.0 / 6.0) / std::pow(1.0 + std::pow(0.559 / Pr, 9.0 / 16.0), 8.0 / 27.0), 2);
  return std::cbrt(std::pow(nuForced, 3) + std::pow(nuFree, 3)) * p.conductivity / D;
}

}  // namespace

TEST_CASE("A step of the medium lands at its time - energy is conserved across the restarts", "[environment][medium]") {
  Body body(loadCaseFromString(diver, "diver.toml"));
  const std::filesystem::path out =
      std::filesystem::temp_directory_path() / ("thermorph-medium-" + std::to_string(::getpid()) + ".h5");
  RunOptions options;
  options.output = out.string();
  options.quiet = true;
  RunSummary s = runTransient(body, options);
  REQUIRE(s.complete);
  auto read = [&](const std::string& path) { return common::readDataset(out.string(), path); };
  const std::vector<double> time = read("/time"), h = read("/segments/leg/convection_coefficient"),
                            surface = read("/segments/leg/surface_temperature"),
                            radiation = read("/segments/leg/heat_flow/radiation"),
                            solar = read("/segments/leg/heat_flow/solar"),
                            evaporation = read("/segments/leg/heat_flow/evaporation"),
                            temperature = read("/environment/temperature"),
                            radiant = read("/environment/radiant_temperature");
  std::filesystem::remove(out);
  REQUIRE(time == std::vector<double>{0, 300, 600, 900, 1200, 1500, 1800});

  const double D = 2.0 * kRadius, area = 2.0 * pi * kRadius * kLength;
  double worstH = 0.0, worstRadiation = 0.0;
  for (std::size_t i = 0; i < time.size(); ++i) {
    // Outputs at 600 and 900 s are in air: the output at the step's time shows the new medium (the run stops at
    // the breakpoint and switches before writing). The one at 1200 s is back in sea water.
    const bool air = time[i] >= 600.0 && time[i] < 1200.0;
    const double Ts = surface[i] + kZero;
    INFO("t = " << time[i] << " s, " << (air ? "air" : "sea water"));
    CHECK(temperature[i] == (air ? 15.0 : 4.0));
    const double hHand = air ? cylinderCoefficient(Medium::Air, Ts, 15.0 + kZero, 1.0, D)
                             : cylinderCoefficient(Medium::SeaWater, Ts, 4.0 + kZero, 0.5, D);
    CHECK(h[i] == Approx(hHand).epsilon(1e-9));
    worstH = std::max(worstH, std::abs(h[i] / hHand - 1.0));
    if (air) {
      // Long-wave exchange eps sigma A (T_r^4 - T_s^4), bare skin eps = 0.98 (Steketee 1973), the sky at the
      // radiant temperature, which follows the air temperature (15 degC); sun alpha S exposure A, exposure 1/pi
      // for a cylinder normal to the beam, alpha 0.7 (the schema default); a wet skin evaporates.
      CHECK(radiant[i] == Approx(15.0).epsilon(1e-14));
      const double Tr = 15.0 + kZero;
      const double hand = 0.98 * kStefanBoltzmann * area * (Tr * Tr * Tr * Tr - Ts * Ts * Ts * Ts);
      CHECK(radiation[i] == Approx(hand).epsilon(1e-10));
      worstRadiation = std::max(worstRadiation, std::abs(radiation[i] / hand - 1.0));
      CHECK(solar[i] == Approx(0.7 * 300.0 / pi * area).epsilon(1e-12));
      CHECK(evaporation[i] < 0.0);
    } else {
      // Water is opaque to long-wave radiation and sunlight at the surface of the animal; no evaporation in water.
      CHECK(radiation[i] == 0.0);
      CHECK(solar[i] == 0.0);
      CHECK(evaporation[i] == 0.0);
    }
  }
  // Sea water carries heat away far better than air: h at 300 s over h at 900 s (order 100, as for water over
  // air in test_environment.cpp, Incropera Tables A.4/A.6).
  CHECK(h[1] / h[3] > 30.0);
  std::printf("[medium] sea water -> air -> sea water: h %.1f / %.2f / %.1f W/(m2 K) (hand calc. to %.1e), radiation "
              "at the step %.4f W (to %.1e); energy balance error %.2e J of %.4g J exchanged (%.1e)\n",
              h[1], h[2], h[4], worstH, radiation[2], worstRadiation, s.energyBalanceError, s.throughput,
              std::abs(s.energyBalanceError) / s.throughput);
  // Conservation of energy across the restarts at 600 and 1200 s (criterion 1e-6 of the heat exchanged).
  CHECK(std::abs(s.energyBalanceError) <= 1e-6 * s.throughput);
}

TEST_CASE("Jacobian with a changing medium matches finite differences in both media", "[environment][medium][jacobian]") {
  // Central differences of the right-hand side (common practice, no source); h'(T_s) comes from a 0.01 K central
  // difference inside the correlation evaluator, hence 1e-5 of the row scale (as test_environment.cpp).
  Body body(loadCaseFromString(diver, "diver.toml"));
  NetworkSystem system(body.network(), NetworkSystem::Mode::Transient);
  std::vector<double> y(system.size(), 0.0);
  for (Index i = 0; i < system.nodeCount(); ++i) y[i] = 300.0 + 8.0 * std::sin(1.7 * static_cast<double>(i));
  const Index radiation = channelIndex(body.network(), "radiation");
  for (auto [interval, t, name] : {std::tuple{std::size_t{0}, 300.0, "sea water"}, std::tuple{std::size_t{1}, 900.0, "air"}}) {
    body.setInterval(interval);
    const JacobianCheck check = checkJacobian(system, y, t);
    std::printf("[medium] Jacobian in %s (%zu states): max relative error %.2e\n", name,
                static_cast<std::size_t>(check.states), check.worstRelative);
    INFO(name);
    CHECK(check.worstRelative < 1e-5);
    CHECK(check.outsidePattern == 0);
    // The radiation channel is active in air only.
    std::vector<double> rhs(system.size());
    system.evaluate(t, y, rhs);
    CHECK((rhs[system.nodeCount() + radiation] != 0.0) == (interval == 1));
  }
  body.setInterval(0);
}

TEST_CASE("Immersion and followed values track the medium interval by interval", "[environment][medium]") {
  // A head that never goes under (immersion "never"), flippers always in water, a trunk in the medium.
  const std::string text = R"toml(
[run]
duration = "1 h"
[circulation]
fixed_arterial_temperature = "37 degC"
[[segments]]
name = "trunk"
shape = "cylinder"
length = "30 cm"
layers = [{ tissue = "muscle", thickness = "5 cm", cells = 2 }]
[[segments]]
name = "head"
parent = "trunk"
shape = "cylinder"
length = "10 cm"
layers = [{ tissue = "muscle", thickness = "4 cm", cells = 2 }]
surface = { immersion = "never" }
[[segments]]
name = "flipper"
parent = "trunk"
shape = "plate"
length = "10 cm"
width = "5 cm"
layers = [{ tissue = "muscle", thickness = "0.5 cm", cells = 1 }]
surface = { immersion = "always" }
[environment]
temperature = "10 degC"
speed = "2 m/s"
immersion_water = "sea_water"
water_temperature = "4 degC"
[[events]]
at = "10 min"
environment = { medium = "sea_water", temperature = "4 degC", speed = "1 m/s" }
[[events]]
at = "20 min"
environment = { air_temperature = "12 degC" }
[[events]]
at = "30 min"
environment = { medium = "air", temperature = "8 degC", speed = "3 m/s" }
)toml";
  auto check = [](const Body& body) {
    EnvironmentModel& env = body.environment();
    REQUIRE(env.breakpoints() == std::vector<double>{600.0, 1200.0, 1800.0});
    const Index trunk = 0, head = 1, flipper = 2;
    // immersed(segment) is the state at t = 0, whatever the current interval (the coat's wet conductivity is
    // chosen from it once).
    for (std::size_t k = 0; k < 4; ++k) {
      body.setInterval(k);
      const double t = 300.0 + 600.0 * static_cast<double>(k);
      const bool water = k == 1 || k == 2;
      INFO("interval " << k);
      CHECK(env.immersed(trunk) == false);
      CHECK(env.immersed(trunk, t) == water);
      CHECK(env.immersed(head, t) == false);
      CHECK(env.immersed(flipper, t) == true);
      CHECK(env.medium() == (water ? SurroundingMedium::SeaWater : SurroundingMedium::Air));
      const FaceFluid fTrunk = env.fluid(trunk, t), fHead = env.fluid(head, t), fFlipper = env.fluid(flipper, t);
      CHECK(fTrunk.medium == (water ? Medium::SeaWater : Medium::Air));
      CHECK(fFlipper.medium == Medium::SeaWater);  // immersion_water
      CHECK(fHead.medium == Medium::Air);
      // Expected values: the medium's temperature and speed from the events; the air above the water keeps the
      // last air temperature (10 degC) until given (12 degC at 20 min); the radiant temperature follows the air
      // temperature whichever fluid holds it; water_temperature (4 degC, given) is unchanged.
      const double mediumT[] = {10, 4, 4, 8}, airT[] = {10, 10, 12, 8}, speed[] = {2, 1, 1, 3};
      CHECK(fTrunk.temperature == Approx(mediumT[k] + kZero).epsilon(1e-14));
      CHECK(fTrunk.speed == speed[k]);
      CHECK(fHead.temperature == Approx(airT[k] + kZero).epsilon(1e-14));
      CHECK(fHead.speed == (water ? 0.0 : speed[k]));  // air_speed defaults to 0
      CHECK(fFlipper.temperature == Approx((water ? 4.0 : 4.0) + kZero).epsilon(1e-14));
      CHECK(env.value(V::RadiantTemperature, t) == Approx(airT[k] + kZero).epsilon(1e-14));
    }
    body.setInterval(0);
  };
  Body body(loadCaseFromString(text, "alternating.toml"));
  check(body);
  // The resolved case keeps the medium events and every followed value and reproduces the same timeline.
  const std::string resolved = resolvedCaseToml(body.spec());
  CHECK_THAT(resolved, Catch::Contains("medium = 'air'") || Catch::Contains("medium = \"air\""));
  Body again(loadCaseFromString(resolved, "resolved.toml"));
  check(again);
  // Both kinds of keys are series now: the head sits in air while the medium is water, the flipper in water
  // while it is air.
  std::vector<std::string> names;
  for (const EnvironmentSeries& s : body.environment().series()) names.push_back(s.name);
  CHECK(std::count(names.begin(), names.end(), "air_temperature") == 1);
  CHECK(std::count(names.begin(), names.end(), "water_temperature") == 1);
}

TEST_CASE("Medium events: input errors name the key path", "[environment][medium][errors]") {
  const std::string leg = R"toml(
[[segments]]
name = "leg"
shape = "cylinder"
length = "10 cm"
layers = [{ tissue = "muscle", thickness = "1 cm", cells = 2 }]
)toml";
  // A ramp of the medium.
  std::string e = common::caseErrorOf(leg + "[[events]]\nat = 60\nramp = 30\nenvironment = { medium = \"water\", temperature = "
                                "\"4 degC\", speed = 0 }\n");
  CHECK_THAT(e, Catch::Contains("case.toml:") && Catch::Contains("events.0.environment.medium") &&
                    Catch::Contains("step") && Catch::Contains("ramp = 30 s"));
  // The new medium's speed missing.
  e = common::caseErrorOf(leg + "[[events]]\nat = 60\nenvironment = { medium = \"sea_water\", temperature = \"4 degC\" }\n");
  CHECK_THAT(e, Catch::Contains("events.0.environment.medium") && Catch::Contains("speed"));
  // An unknown medium.
  e = common::caseErrorOf(leg + "[[events]]\nat = 60\nenvironment = { medium = \"brine\", temperature = 280, speed = 0 }\n");
  CHECK_THAT(e, Catch::Contains("events.0.environment.medium") && Catch::Contains("air, water, sea_water"));
  // air_temperature still needs water at some time.
  e = common::caseErrorOf(leg + "[[events]]\nat = 60\nenvironment = { air_temperature = \"4 degC\" }\n");
  CHECK_THAT(e, Catch::Contains("events.0.environment.air_temperature") && Catch::Contains("throughout"));
  // ... and is accepted once an event takes the animal into water.
  e = common::caseErrorOf(leg + "[[events]]\nat = 60\nenvironment = { medium = \"water\", temperature = \"4 degC\", speed = 0, "
                    "air_temperature = \"12 degC\" }\n");
  CHECK(e == "no error");
  // A step of the medium inside another event's ramp of the temperature.
  e = common::caseErrorOf(leg + "[[events]]\nat = 0\nramp = 600\nenvironment = { temperature = \"5 degC\" }\n"
                    "[[events]]\nat = 300\nenvironment = { medium = \"water\", temperature = \"4 degC\", speed = 0 }\n");
  CHECK_THAT(e, Catch::Contains("events.1.at") && Catch::Contains("inside the ramp of events.0"));
}
