// The environment timeline ([[events]]): steps and ramps per integration interval, values that follow others,
// the resolved case round trip, a transient run that stops at each breakpoint (HDF5 output read back), and the
// wording of environment input errors.
#include <catch2/catch.hpp>

#include <hdf5.h>
#include <unistd.h>

#include <cmath>
#include <filesystem>
#include <fstream>
#include <memory>
#include <string>
#include <vector>

#include "test_common.hpp"
#include "models/body.hpp"
#include "models/case.hpp"
#include "drivers/simulation.hpp"

using namespace thermorph;

namespace {

using V = EnvironmentVariable;

constexpr double kZero = 273.15;

const std::string leg = R"toml(
[circulation]
fixed_arterial_temperature = "37 degC"
[[segments]]
name = "leg"
shape = "cylinder"
length = "10 cm"
axial_cells = 2
layers = [{ tissue = "muscle", thickness = "1 cm", cells = 3 }, { tissue = "skin", thickness = "0.2 cm", cells = 1 }]
surface = { ends = "insulated" }
)toml";

// Steps and ramps; event C starts where B's ramp ends and sets the radiant temperature explicitly, after which it
// no longer follows the air temperature (event D).
const std::string timeline = leg + R"toml(
[run]
duration = "1 h"
output_interval = "5 min"
[environment]
temperature = "20 degC"
speed = "1 m/s"
[[events]]
at = "20 min"
ramp = "10 min"
environment = { solar_irradiance = "600 W/m2", speed = "3 m/s" }
[[events]]
at = "10 min"
environment = { temperature = "5 degC" }
[[events]]
at = "30 min"
environment = { temperature = "10 degC", radiant_temperature = "0 degC" }
[[events]]
at = "50 min"
environment = { temperature = "15 degC" }
)toml";



//! Environment values by interval: {interval, time, variable, expected [SI]}.
struct Expectation {
  std::size_t interval;
  double time;
  V variable;
  double value;
};

void checkTimeline(Body& body) {
  // Steps apply from their interval on; ramps are linear in time from the value at `at` to the target at
  // `at + ramp` (README, "Environment": events; common practice, no source).
  EnvironmentModel& env = body.environment();
  REQUIRE(env.breakpoints() == std::vector<double>{600.0, 1200.0, 1800.0, 3000.0});
  const Expectation expectations[] = {
      {0, 0.0, V::Temperature, 20 + kZero},          {0, 599.0, V::RadiantTemperature, 20 + kZero},
      {1, 600.0, V::Temperature, 5 + kZero},         {1, 600.0, V::RadiantTemperature, 5 + kZero},
      {1, 900.0, V::SkyTemperature, 5 + kZero},      {1, 900.0, V::SubstrateTemperature, 5 + kZero},
      {2, 1200.0, V::SolarIrradiance, 0.0},          {2, 1500.0, V::SolarIrradiance, 300.0},
      {2, 1500.0, V::Speed, 2.0},                    {2, 1800.0, V::SolarIrradiance, 600.0},
      {3, 1800.0, V::Temperature, 10 + kZero},       {3, 1800.0, V::RadiantTemperature, kZero},
      {3, 2400.0, V::SkyTemperature, kZero},         {3, 2400.0, V::SolarIrradiance, 600.0},
      {3, 2400.0, V::Speed, 3.0},                    {3, 2400.0, V::SubstrateTemperature, 10 + kZero},
      {4, 3000.0, V::Temperature, 15 + kZero},       {4, 3600.0, V::RadiantTemperature, kZero},
      {4, 3600.0, V::SubstrateTemperature, 15 + kZero},
  };
  for (const Expectation& e : expectations) {
    env.setInterval(e.interval);
    INFO("interval " << e.interval << ", t = " << e.time << " s, " << environmentKey(e.variable));
    CHECK(env.value(e.variable, e.time) == Approx(e.value).epsilon(1e-14).margin(1e-12));
  }
  env.setInterval(0);
}

}  // namespace

TEST_CASE("Events step and ramp environment values interval by interval", "[environment][events]") {
  Body body(loadCaseFromString(timeline, "timeline.toml"));
  checkTimeline(body);

  // The resolved case states every followed value explicitly and reproduces the same timeline.
  Body again(loadCaseFromString(resolvedCaseToml(body.spec()), "resolved.toml"));
  checkTimeline(again);
  CHECK(again.spec().events.size() == 4);
}

TEST_CASE("A step lands exactly at its time and energy is conserved across restarts", "[environment][events]") {
  // Correlation convection and radiation; a step of the air temperature at 600 s (an output time) and a solar ramp
  // from 700 to 1000 s. The output at 600 s must show the new value (the run stops at the breakpoint, then the
  // environment switches before the output is written), and the energy balance must close across the restarts
  // (conservation of energy; criterion 1e-6 of the heat exchanged).
  const std::string text = leg + R"toml(
[run]
duration = "20 min"
output_interval = "5 min"
[environment]
temperature = "20 degC"
speed = "1 m/s"
[[events]]
at = 600
environment = { temperature = "5 degC" }
[[events]]
at = 700
ramp = 300
environment = { solar_irradiance = 600 }
)toml";
  Body body(loadCaseFromString(text, "step.toml"));
  const std::filesystem::path out =
      std::filesystem::temp_directory_path() / ("thermorph-events-" + std::to_string(::getpid()) + ".h5");
  RunOptions options;
  options.output = out.string();
  options.quiet = true;
  RunSummary s = runTransient(body, options);
  REQUIRE(s.complete);
  const std::vector<double> time = common::readDataset(out.string(), "/time");
  const std::vector<double> temperature = common::readDataset(out.string(), "/environment/temperature");
  const std::vector<double> solar = common::readDataset(out.string(), "/environment/solar_irradiance");
  const std::vector<double> radiant = common::readDataset(out.string(), "/environment/radiant_temperature");
  std::filesystem::remove(out);
  REQUIRE(time == std::vector<double>{0.0, 300.0, 600.0, 900.0, 1200.0});
  CHECK(temperature == std::vector<double>{20.0, 20.0, 5.0, 5.0, 5.0});
  CHECK(radiant[2] == Approx(5.0).epsilon(1e-12));  // follows the air temperature
  CHECK(solar[2] == 0.0);
  CHECK(solar[3] == Approx(400.0).epsilon(1e-12));  // 600 (900 - 700) / 300
  CHECK(solar[4] == Approx(600.0).epsilon(1e-12));
  std::printf("[environment] events run: energy balance error %.2e J of %.4g J exchanged (%.1e); %ld steps, %.2f "
              "Newton iterations per step\n",
              s.energyBalanceError, s.throughput, std::abs(s.energyBalanceError) / s.throughput, s.statistics.steps,
              static_cast<double>(s.statistics.nonlinearIterations) / static_cast<double>(s.statistics.steps));
  CHECK(std::abs(s.energyBalanceError) <= 1e-6 * s.throughput);
}

TEST_CASE("Environment input errors name the key path and what is allowed", "[environment][errors]") {
  // Wording is part of the interface (DEVELOPERS.md, "Error handling").
  std::string e = common::caseErrorOf(leg + "[run]\nduration = \"1 h\"\n[[events]]\nat = \"2 h\"\nenvironment = { speed = 2 }\n");
  CHECK_THAT(e, Catch::Contains("case.toml:") && Catch::Contains("events.0.at") &&
                    Catch::Contains("not before the end of the run") && Catch::Contains("3600"));

  e = common::caseErrorOf(leg + "[[events]]\nat = 0\nramp = 600\nenvironment = { speed = 2 }\n"
                    "[[events]]\nat = 300\nenvironment = { speed = 1 }\n");
  CHECK_THAT(e, Catch::Contains("events.1.at") && Catch::Contains("inside the ramp of events.0"));

  e = common::caseErrorOf(leg + "[[events]]\nat = 60\nenvironment = { temprature = \"5 degC\" }\n");
  CHECK_THAT(e, Catch::Contains("events.0.environment.temprature") && Catch::Contains("did you mean \"temperature\""));

  e = common::caseErrorOf(leg + "[environment]\nmedium = \"water\"\nwater_temperature = \"4 degC\"\n");
  CHECK_THAT(e, Catch::Contains("environment.water_temperature") && Catch::Contains("use \"temperature\""));

  e = common::caseErrorOf(leg + "[environment]\nconvection = \"corelation\"\n");
  CHECK_THAT(e, Catch::Contains("environment.convection") && Catch::Contains("\"correlation\" or a fixed coefficient"));

  e = common::caseErrorOf(leg, {"segments.leg.surface.contact_fraction=0.2"});
  CHECK_THAT(e, Catch::Contains("environment.substrate_conductance") && Catch::Contains("required"));

  e = common::caseErrorOf(leg, {"segments.leg.surface.orientation=horizontal"});
  CHECK_THAT(e, Catch::Contains("segments.leg.surface.orientation") && Catch::Contains("plates"));

  e = common::caseErrorOf(leg, {"segments.leg.surface.emissivity=1.2"});
  CHECK_THAT(e, Catch::Contains("segments.leg.surface.emissivity") && Catch::Contains("out of range"));

  // Units and defaults: "50 %" is a relative humidity; a fixed coefficient switches the default emissivity off.
  Case c = loadCaseFromString(leg + "[environment]\nrelative_humidity = \"50 %\"\nconvection = 12\n", "case.toml");
  CHECK(c.environment.relativeHumidity == Approx(0.5).epsilon(1e-14));
  CHECK(c.environment.convection.fixed);
  CHECK(Body(c).environment().emissivity(0) == 0.0);
}

TEST_CASE("A weather file interpolates linearly between its rows, with a breakpoint at each", "[environment][events]") {
  // Rows in hours and degC; an [[events]] entry may change another value meanwhile. Linear interpolation between
  // rows (common practice, no source): at 1.5 h the temperature is (10 + 16)/2 = 13 degC and the humidity 65 %.
  const std::filesystem::path dir =
      std::filesystem::temp_directory_path() / ("thermorph-weather-" + std::to_string(::getpid()));
  std::filesystem::create_directories(dir);
  {
    std::ofstream csv(dir / "weather.csv");
    csv << "# hourly field record (invented)\n"
        << "time [h], temperature [degC], relative_humidity [%], solar_irradiance [W/m2]\n"
        << "0, 8, 90, 0\n1, 10, 80, 200\n2, 16, 50, 700\n5, 20, 40, 300\n";
    std::ofstream toml(dir / "case.toml");
    toml << leg << "[run]\nduration = \"3 h\"\n[environment]\nweather = \"weather.csv\"\n"
         << "[[events]]\nat = \"1.5 h\"\nenvironment = { speed = \"2 m/s\" }\n";
  }
  Body body(loadCase((dir / "case.toml").string()));
  EnvironmentModel& env = body.environment();
  CHECK(env.breakpoints() == std::vector<double>{3600.0, 5400.0, 7200.0});  // the 5 h row ends after the run
  env.setInterval(0);
  CHECK(env.value(V::Temperature, 0.0) == Approx(8 + kZero).epsilon(1e-14));
  CHECK(env.value(V::Temperature, 1800.0) == Approx(9 + kZero).epsilon(1e-14));
  env.setInterval(1);
  CHECK(env.value(V::Temperature, 5400.0) == Approx(13 + kZero).epsilon(1e-14));
  CHECK(env.value(V::RelativeHumidity, 5400.0) == Approx(0.65).epsilon(1e-14));
  CHECK(env.value(V::RadiantTemperature, 5400.0) == Approx(13 + kZero).epsilon(1e-14));  // follows
  CHECK(env.value(V::Speed, 5400.0) == 0.0);
  env.setInterval(2);
  CHECK(env.value(V::SolarIrradiance, 5400.0) == Approx(450.0).epsilon(1e-14));
  CHECK(env.value(V::Speed, 5400.0) == 2.0);
  env.setInterval(3);
  // Towards the 5 h row: 16 + (20 - 16) (3 - 2)/3 degC at the end of the run.
  CHECK(env.value(V::Temperature, 10800.0) == Approx(16 + 4.0 / 3.0 + kZero).epsilon(1e-14));

  // The resolved case carries the rows as events and needs no file.
  Body again(loadCaseFromString(resolvedCaseToml(body.spec()), "resolved.toml"));
  again.environment().setInterval(1);
  CHECK(again.environment().value(V::Temperature, 5400.0) == Approx(13 + kZero).epsilon(1e-14));

  // Errors name the file and line.
  {
    std::ofstream csv(dir / "bad.csv");
    csv << "time [h], temperature [kg]\n0, 1\n";
  }
  std::string e = common::caseErrorOf(leg + "[environment]\nweather = \"" + (dir / "bad.csv").string() + "\"\n");
  CHECK_THAT(e, Catch::Contains("environment.weather") && Catch::Contains("bad.csv:1") &&
                    Catch::Contains("unit \"kg\" is not a temperature"));
  // The article follows the quantity's name (common practice, no source): "an irradiance", not "a irradiance".
  CHECK_THAT(common::caseErrorOf(leg + "[environment]\nsolar_irradiance = \"800 W\"\n"),
             Catch::Contains("environment.solar_irradiance") && Catch::Contains("is not an irradiance or heat flux") &&
                 Catch::Contains("expected an irradiance or heat flux in W/m2"));
  {
    std::ofstream csv(dir / "bad.csv");
    csv << "time, temperature\n0, 280\n60, 281\n60, 282\n";
  }
  e = common::caseErrorOf(leg + "[environment]\nweather = \"" + (dir / "bad.csv").string() + "\"\n");
  CHECK_THAT(e, Catch::Contains("bad.csv:4") && Catch::Contains("does not increase"));
  std::filesystem::remove_all(dir);
}
