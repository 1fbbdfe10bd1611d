// A steady state in which a heat defence is exhausted (shivering at its maximum power) is reported: the run or
// steady solve warns with the signal's temperature and its distance from the set point. Found in a new-user trial:
// a swimmer started with initial = "steady" in cold water began its run at a core of 17 degC, with nothing said.
#include <catch2/catch.hpp>
#include <fmt/format.h>

#include <cmath>
#include <string>
#include <vector>

#include "test_support_body.hpp"

using namespace thermorph;
using namespace thermorph::testing;

namespace {

// A lumped sphere (R = 2 cm, one cell, k = 1000 W/(m K)) of a muscle-role tissue with Q10 = 1, basal heat 1 W,
// shivering up to 2 W under a proportional law s = clamp(1/K (37 degC - T_core), 0, 1), fixed h with
// h A = 0.1 W/K (A = 4 pi R^2) and no radiation, blood flow or respiration. Its steady energy balance is
// h A (T - T_env) = 1 W + 2 W s(T) (lumped capacitance, Incropera et al. 2007 sec. 5.1; the proportional law as
// README "Physiology over time" states it): T = T_env + 30 K when s = 1, i.e. when T_env <= 6 degC.
std::string lumpedShiverer(double environmentC, const std::string& initial) {
  const double area = 4.0 * 3.14159265358979323846 * 0.02 * 0.02;
  return R"toml(
[run]
duration = "600 s"
output_interval = "600 s"
)toml" + initial + R"toml(
[body]
basal_metabolic_rate = "1 W"
[tissues.lump]
base = "muscle"
conductivity = "1000 W/(m K)"
metabolic_heat = "1000 W/m3"
q10 = 1
perfusion = "0 1/s"
[control.shivering]
set_point = "37 degC"
gain = "1 1/K"
max_power = "2 W"
[[segments]]
name = "ball"
shape = "sphere"
layers = [{ tissue = "lump", thickness = "2 cm", cells = 1 }]
[environment]
temperature = ")toml" + std::to_string(environmentC) + R"toml( degC"
convection = ")toml" + std::to_string(0.1 / area) + R"toml( W/(m2 K)"
)toml";
}

std::vector<std::string> defenceWarnings(const RunSummary& s) {
  std::vector<std::string> out;
  for (const std::string& w : s.warnings)
    if (w.find("shivering at its maximum power") != std::string::npos) out.push_back(w);
  return out;
}

}  // namespace

TEST_CASE("A steady state with shivering at its maximum warns, with the core's distance from the set point",
          "[control][steady]") {
  // Conduction inside the sphere adds to the lumped value: with uniform generation T(r) = T_s + q (R^2 - r^2) / (6 k)
  // (the sphere's form of Incropera et al. 2007 sec. 3.5, from memory), 3 W over 3.35e-5 m3 puts the volume mean
  // q R^2 / (15 k) = 2.4e-3 K and the centre q R^2 / (6 k) = 6.0e-3 K above the surface; one cell's node lies
  // between, within the 1e-2 K allowed below.
  SECTION("cold surroundings: saturated, T = T_env + 30 K") {
    const auto body = bodyFromToml(lumpedShiverer(0.0, "initial = \"steady\""));
    const RunSummary s = runSteady(*body, silentRun());
    REQUIRE(s.complete);
    CHECK(std::abs(s.finalState[0] - (273.15 + 30.0)) < 1e-2);
    const std::vector<std::string> w = defenceWarnings(s);
    REQUIRE(w.size() == 1);
    INFO(w[0]);
    CHECK(w[0].find("steady state: shivering at its maximum power and the core at 30.0 degC, 7.0 K below") == 0);
    // The run from the same steady start says so too, as its start's property.
    const RunSummary r = runTransient(*body, silentRun());
    REQUIRE(r.complete);
    const std::vector<std::string> wr = defenceWarnings(r);
    REQUIRE(wr.size() == 1);
    CHECK(wr[0].find("steady start: shivering at its maximum power") == 0);
  }
  SECTION("milder surroundings: partial shivering, no warning") {
    // 0.1 (T - 10) = 1 + 2 (37 - T): T = 76 / 2.1 = 36.190 degC, s = 0.81.
    const auto body = bodyFromToml(lumpedShiverer(10.0, "initial = \"steady\""));
    const RunSummary s = runSteady(*body, silentRun());
    REQUIRE(s.complete);
    CHECK(std::abs(s.finalState[0] - (273.15 + 76.0 / 2.1)) < 1e-2);
    CHECK(defenceWarnings(s).empty());
    CHECK(defenceWarnings(runTransient(*body, silentRun())).empty());
  }
  SECTION("a run from a uniform temperature is not a steady start: no warning") {
    const auto body = bodyFromToml(lumpedShiverer(0.0, "initial_temperature = \"37 degC\""));
    const RunSummary r = runTransient(*body, silentRun());
    REQUIRE(r.complete);
    CHECK(defenceWarnings(r).empty());
  }
}

namespace {

// The same lumped sphere with bare skin, no shivering, sweating s* = clamp(1/K (T_core - 37 degC), 0, 0.2) in warm
// air at 20 % relative humidity; `fixed` instead gives the skin the wetted fraction 0.2 without a controller.
std::string lumpedSweater(double environmentC, bool fixed) {
  const double area = 4.0 * 3.14159265358979323846 * 0.02 * 0.02;
  return R"toml(
[run]
duration = "600 s"
output_interval = "600 s"
initial = "steady"
[body]
basal_metabolic_rate = "1 W"
[tissues.lump]
base = "skin"
conductivity = "1000 W/(m K)"
metabolic_heat = "1000 W/m3"
q10 = 1
perfusion = "0 1/s"
)toml" + std::string(fixed ? "" : R"toml(
[control.sweating]
set_point = "37 degC"
gain = "1 1/K"
max = 0.2
)toml") + R"toml(
[[segments]]
name = "ball"
shape = "sphere"
layers = [{ tissue = "lump", thickness = "2 cm", cells = 1 }]
)toml" + std::string(fixed ? "surface = { wetted_fraction = 0.2 }\n" : "") + R"toml(
[environment]
temperature = ")toml" + std::to_string(environmentC) + R"toml( degC"
relative_humidity = 0.2
convection = ")toml" + std::to_string(0.1 / area) + R"toml( W/(m2 K)"
)toml";
}

std::vector<std::string> sweatingWarnings(const RunSummary& s) {
  std::vector<std::string> out;
  for (const std::string& w : s.warnings)
    if (w.find("sweating at its largest wetted fraction") != std::string::npos) out.push_back(w);
  return out;
}

}  // namespace

TEST_CASE("A steady state with sweating at its largest wetted fraction warns", "[control][steady][sweating]") {
  SECTION("hot air: the skin wet at max, the steady state that of a fixed wetted fraction of max") {
    const auto body = bodyFromToml(lumpedSweater(45.0, false));
    const RunSummary s = runSteady(*body, silentRun());
    REQUIRE(s.complete);
    // Independent of the controller: the same sphere with the skin's own wetted fraction 0.2 (no controller), whose
    // evaporation tests/test_wetting_events.cpp checks against the Chilton-Colburn balance.
    const auto fixed = bodyFromToml(lumpedSweater(45.0, true));
    const RunSummary f = runSteady(*fixed, silentRun());
    REQUIRE(f.complete);
    CHECK(std::abs(s.finalState[0] - f.finalState[0]) < 1e-6);
    const std::vector<std::string> w = sweatingWarnings(s);
    REQUIRE(w.size() == 1);
    INFO(w[0]);
    const std::string expected = fmt::format(
        "steady state: sweating at its largest wetted fraction (0.2 of the skin of ball) and the core at {:.1f} degC, "
        "{:.1f} K above the sweating set point (37 degC)",
        f.finalState[0] - 273.15, f.finalState[0] - 273.15 - 37.0);
    CHECK(w[0].find(expected) == 0);
    const RunSummary r = runTransient(*body, silentRun());
    REQUIRE(r.complete);
    REQUIRE(sweatingWarnings(r).size() == 1);
    CHECK(sweatingWarnings(r)[0].find("steady start: sweating at its largest") == 0);
    CHECK(sweatingWarnings(f).empty());  // no controller, no warning
  }
  SECTION("mild air: below the set point, no warning") {
    const auto body = bodyFromToml(lumpedSweater(20.0, false));
    const RunSummary s = runSteady(*body, silentRun());
    REQUIRE(s.complete);
    CHECK(s.finalState[0] < 273.15 + 37.0);
    CHECK(sweatingWarnings(s).empty());
  }
}
