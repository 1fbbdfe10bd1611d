// Sweating ([control.sweating]): the wetted fraction of the skin of the segments that sweat is their own
// (surface.wetted_fraction and its events) plus the controller's state s, s following clamp(gain (T - set_point),
// 0, max) through a first-order lag, the sum at most max; the evaporation of their faces scales with it
// (EnvironmentModel::sweatingWettedFraction, the face solve's controlled heats in solver/assembly.cpp).
// Checks, against references outside the code:
//  1. a lumped sphere (Bi < 1e-3) with a heat source in warm air: its steady state with sweating solves
//     Q + h A (T_a - T) = E(T, w(T)), w = w_0 + clamp(g (T - T_set), 0, max - w_0), with E the Chilton-Colburn
//     evaporation of tests/test_evaporation_reference.hpp (Incropera et al. 2007 eq. 6.92, Tables A.4/A.6/A.8; e_s from
//     Alduchov & Eskridge 1996; table rows from memory), solved here by bisection; and the same sphere with the
//     controller's steady output given as a fixed surface.wetted_fraction has the same steady temperature;
//  2. the lag: a sphere at the temperature of saturated air (no evaporation, so a constant signal) whose set point
//     steps by an event: s = s* (1 - exp(-(t - t1)/tau)) (the analytic solution of the first-order lag), and after
//     an event that switches it off, s* exp(-(t - t2)/tau);
//  3. the Jacobian (controller columns included) against central differences, transient and steady;
//  4. the energy balance of a whole body (a trunk, a head and four legs, bare skin) that sweats in hot air;
//  5. bad input names file, line and key path; the resolved case keeps [control.sweating].
#include <catch2/catch.hpp>

#include <algorithm>
#include <cmath>
#include <cstdio>
#include <numbers>
#include <string>
#include <vector>

#include "test_common.hpp"
#include "test_evaporation_reference.hpp"
#include "test_wet_sphere.hpp"
#include "test_lumped_sphere.hpp"
#include "test_run_datasets.hpp"
#include "test_support.hpp"
#include "test_support_body.hpp"
#include "drivers/simulation.hpp"
#include "models/body.hpp"
#include "models/case.hpp"

using namespace thermorph;

namespace {

constexpr double pi = std::numbers::pi;
using Run = testing::RunDatasets;

using namespace testing::wet_sphere;  // R, V, A, h, Ta, RH, Q; evaporation()

// The wet sphere's overrides for a steady start of 600 s with outputs every 60 s, then `more`.
std::vector<std::string> sphereOverrides(std::vector<std::string> more) {
  std::vector<std::string> o = {"run.duration=600", "run.output_interval=60", "run.initial=steady"};
  o.insert(o.end(), more.begin(), more.end());
  return overrides(o);
}

//! The sweating law as the case states it (README, cases/REFERENCE.md): w_0 + clamp(g (T - T_set), 0, max - w_0).
double wettedBySweating(double T, double own, double gain, double setPoint, double max) {
  return own + std::clamp(gain * (T - setPoint), 0.0, std::max(0.0, max - own));
}

std::string sweatingTable(double setPointC, double gain, double max, const std::string& more = "") {
  return "[control.sweating]\nset_point = \"" + testing::num(setPointC) + " degC\"\ngain = \"" + testing::num(gain) +
         " 1/K\"\nmax = " + testing::num(max) + "\ntime_constant = \"1 min\"\n" + more;
}

}  // namespace

TEST_CASE("Sweating at steady state: a lumped sphere in warm air against a fixed wetted fraction and an independent "
          "balance", "[control][sweating]") {
  struct Row {
    double own, setPoint, gain, max;  // [1], degC, 1/K, [1]
    const char* what;
  };
  // Inside the limits without and with a wetted fraction of its own, and clamped at max (a set point far below). The
  // dry sphere sits at T_a + Q / (h A) = 39.95 degC, wetted at 0.3 at 28.73 degC.
  const Row rows[] = {{0.0, 36.0, 0.1, 0.8, "unclamped"},
                      {0.1, 32.0, 0.1, 0.8, "w_0 = 0.1"},
                      {0.0, 25.0, 1.0, 0.3, "at max 0.3"}};
  const double dry = Ta + Q / (h * A);
  for (const Row& row : rows) {
    const double setPoint = row.setPoint;
    const std::string text = std::string(testing::lumpedSphere) + sweatingTable(setPoint, row.gain, row.max);
    const Run r = testing::runDatasets(
        text, "sweating-steady.toml",
        {"/segments/ball/temperature", "/segments/ball/wetted_fraction", "/segments/ball/heat_flow/evaporation",
         "/control/sweating"},
        sphereOverrides({"segments.ball.surface.wetted_fraction=" + testing::num(row.own)}));
    REQUIRE(r.summary.complete);
    const double T = r.data[0].back() + 273.15, w = r.data[1].back(), evaporationFlow = -r.data[2].back();
    const double s = r.data[3].back();
    // The reference: the balance with the sweating law, by bisection.
    const double Tref = testing::bisect(
        [&](double x) {
          return Q + h * A * (Ta - x) - evaporation(x, wettedBySweating(x, row.own, row.gain, setPoint + 273.15, row.max));
        },
        300.0, 330.0);
    const double wref = wettedBySweating(Tref, row.own, row.gain, setPoint + 273.15, row.max);
    // The same sphere without the controller, its wetted fraction fixed at the controller's steady output.
    const Run fixed = testing::runDatasets(std::string(testing::lumpedSphere), "sweating-fixed.toml",
                                           {"/segments/ball/temperature", "/segments/ball/heat_flow/evaporation"},
                                           sphereOverrides({"segments.ball.surface.wetted_fraction=" + testing::num(w)}));
    REQUIRE(fixed.summary.complete);
    const double Tfixed = fixed.data[0].back() + 273.15;
    const double energy = std::abs(r.summary.energyBalanceError) / r.summary.throughput;
    std::printf("[sweating] lumped sphere %s: T %.6f degC (reference %.6f, %.1e of the drop %.4f K), w %.6f "
                "(reference %.6f, state %.6f), evaporation %.6f W (reference at the run's T and w %.6f, %.1e); fixed "
                "w: T %.6f degC (%.1e K apart); energy %.1e\n",
                row.what, T - 273.15, Tref - 273.15, std::abs(T - Tref) / (dry - Tref), dry - Tref, w, wref, s,
                evaporationFlow, evaporation(T, w), std::abs(evaporationFlow / evaporation(T, w) - 1.0),
                Tfixed - 273.15, std::abs(T - Tfixed), energy);
    // The stored wetted fraction is w_0 plus the stored state, at most max.
    CHECK(std::abs(w - std::min(row.own + s, row.max)) < 1e-15);
    // The controller at its steady state is a fixed wetted surface: the same temperature (to the solver's tolerance).
    CHECK(std::abs(T - Tfixed) < 1e-6);
    // The properties of the reference (handbook rows, Alduchov-Eskridge) against the code's (its tables, Buck 1981)
    // differ by a few 1e-3 in the flux (tests/test_wetting_events.cpp).
    CHECK(std::abs(T - Tref) < 5e-3 * (dry - Tref));
    CHECK(std::abs(w - wref) < 5e-3 * std::max(wref, 1e-3));
    CHECK(std::abs(evaporationFlow / evaporation(T, w) - 1.0) < 5e-3);
    CHECK(energy < 1e-10);
    if (row.max == 0.3) CHECK(w == 0.3);
    else CHECK((s > 0.0 && s < row.max - row.own));
  }
}

TEST_CASE("Sweating's lag: the wetted fraction follows a step of its target as 1 - exp(-t/tau)", "[control][sweating]") {
  // No heat source, air at the sphere's temperature and saturated: no exchange at all, so the core (the signal) stays
  // at 30 degC. The set point steps from 40 degC (target 0) to 28 degC at t1 = 120 s: target 0.4 x 2 K = 0.8 (below
  // max 0.9); the event at t2 = 900 s switches sweating off (target 0). The wetted fraction w_0 + s is capped at
  // max: w_0 + min(s, 0.9 - w_0), reached at s = 0.75.
  const double tau = 60.0, t1 = 120.0, t2 = 900.0, own = 0.15, target = 0.8, room = 0.9 - own;
  const std::string text =
      std::string(testing::lumpedSphere) + sweatingTable(40.0, 0.4, 0.9) +
      "[[events]]\nat = \"120 s\"\ncontrol = { sweating = { set_point = \"28 degC\" } }\n"
      "[[events]]\nat = \"900 s\"\ncontrol = { sweating = { enabled = \"off\" } }\n";
  const Run r = testing::runDatasets(
      text, "sweating-lag.toml",
      {"/control/sweating", "/segments/ball/wetted_fraction", "/segments/ball/temperature",
       "/segments/ball/heat_flow/evaporation"},
      {"run.rtol=1e-10", "run.atol=1e-12", "run.duration=1500", "run.output_interval=15",
       "run.initial_temperature=30 degC", "environment.temperature=30 degC", "environment.relative_humidity=1",
       "environment.convection=10", "segments.ball.surface.wetted_fraction=" + testing::num(own)});
  REQUIRE(r.summary.complete);
  double worstState = 0.0, worstWet = 0.0, worstT = 0.0, worstEvaporation = 0.0;
  for (std::size_t k = 0; k < r.time.size(); ++k) {
    const double t = r.time[k];
    // The first-order lag's analytic response to the two steps of its target.
    const double atT2 = target * (1.0 - std::exp(-(t2 - t1) / tau));
    const double s = t <= t1 ? 0.0 : t <= t2 ? target * (1.0 - std::exp(-(t - t1) / tau)) : atT2 * std::exp(-(t - t2) / tau);
    worstState = std::max(worstState, std::abs(r.data[0][k] - s));
    worstWet = std::max(worstWet, std::abs(r.data[1][k] - (own + std::min(s, room))));
    worstT = std::max(worstT, std::abs(r.data[2][k] - 30.0));
    worstEvaporation = std::max(worstEvaporation, std::abs(r.data[3][k]));
  }
  std::printf("[sweating] lag: state within %.1e of s* (1 - exp(-t/tau)) and its decay after the switch-off (s* = %.2f, "
              "tau = %.0f s); wetted fraction within %.1e of w_0 + min(s, max - w_0); core moved %.1e K; evaporation into saturated air "
              "at the air's temperature %.1e W\n",
              worstState, target, tau, worstWet, worstT, worstEvaporation);
  CHECK(worstState < 1e-5);
  CHECK(worstWet < 1e-5);
  CHECK(worstT < 1e-9);
  // Saturated air at the surface's temperature takes no water whatever the wetted fraction.
  CHECK(worstEvaporation < 1e-12);
}

namespace {

//! An invented bare-skinned quadruped of about 20 kg (every value illustrative): a trunk, a head and four legs, skin
//! as the outer surface everywhere, vasomotor control and sweating on the core.
std::string sweatingQuadruped(const std::string& sweatingKeys) {
  return R"toml(
title = "sweating quadruped (illustrative)"
[run]
duration = "2 h"
output_interval = "5 min"
initial_temperature = "37.5 degC"
[body]
basal_metabolic_rate = "kleiber"
activity = 3
[control.vasomotor]
set_point = "37 degC"
gain = "1 1/K"
[control.sweating]
set_point = "37.3 degC"
gain = "0.4 1/K"
max = 0.7
time_constant = "5 min"
)toml" + sweatingKeys + R"toml(
[[segments]]
name = "trunk"
shape = "cylinder"
length = "60 cm"
axial_cells = 3
layers = [{ tissue = "viscera", thickness = "8 cm" }, { tissue = "muscle", thickness = "3 cm" },
          { tissue = "fat", thickness = "0.5 cm" }, { tissue = "skin", thickness = "0.3 cm" }]
[[segments]]
name = "head"
parent = "trunk"
attach_position = 0.0
shape = "sphere"
layers = [{ tissue = "brain", thickness = "5 cm" }, { tissue = "muscle", thickness = "1.5 cm" },
          { tissue = "skin", thickness = "0.3 cm" }]
[[segments]]
name = "legs"
parent = "trunk"
count = 4
attach_position = 0.8
shape = "cone"
length = "50 cm"
radius_proximal = "4 cm"
radius_distal = "1.5 cm"
axial_cells = 3
layers = [{ tissue = "muscle" }, { tissue = "skin", thickness = "0.2 cm" }]
[environment]
temperature = "36 degC"
relative_humidity = 0.3
speed = "1 m/s"
solar_irradiance = "600 W/m2"
[[events]]
at = "30 min"
ramp = "30 min"
environment = { temperature = "41 degC" }
)toml";
}

}  // namespace

TEST_CASE("Sweating: Jacobian with the controller's columns against central differences", "[control][sweating][jacobian]") {
  Body body(loadCaseFromString(sweatingQuadruped("segments = \"trunk, legs\"\n"), "sweating-jacobian.toml",
                               {"environment.convection=correlation"}));
  REQUIRE(body.sweatingControl() != none);
  REQUIRE(!body.network().faceControls.empty());
  for (auto mode : {NetworkSystem::Mode::Transient, NetworkSystem::Mode::Steady}) {
    NetworkSystem system(body.network(), mode);
    std::vector<double> state = testing::initialState(body, system);
    // Temperatures above the set point (the controller active) and varied; the sweating state inside (0, max), and
    // 1e-3 (the difference step) from neither limit.
    for (Index i = 0; i < system.nodeCount(); ++i) state[i] = 273.15 + 37.8 + 0.01 * static_cast<double>(i % 37);
    state[system.nodeCount() + body.sweatingControl()] = 0.35;
    // The blood channel's row is zero identically (heat moved inside the body): judged against 1 W/K, the order of
    // its terms (rho c Q of the circulation). The sweating state's column by a step of 1e-5: at checkJacobian's 1e-3
    // the central difference's truncation error (h^2/6 times the third derivative; the face temperature moves with
    // the state) was 1e-6 of the channel rows' scale (1e-4 at a step of 1e-2: second order), at 1e-4 and 1e-5 below
    // 1e-7.
    const testing::JacobianCheck j = testing::checkJacobian(system, state, 10.0, 1.0, 1e-5);
    std::printf("[sweating] Jacobian (%s, %zu states): worst %.1e of the row scale, %d entries outside the pattern\n",
                mode == NetworkSystem::Mode::Transient ? "transient" : "steady", system.size(), j.worstRelative,
                j.outsidePattern);
    CHECK(j.worstRelative < 1e-7);
    CHECK(j.outsidePattern == 0);
    // The column is not empty: the evaporation of the sweating faces depends on the state.
    const Index u = system.nodeCount() + body.sweatingControl();
    const Index node = body.network().faces[body.network().faceControls.front().face].node;
    CHECK(testing::jacobianEntry(system.pattern(), j.values, node, u) < 0.0);
  }
}

TEST_CASE("Sweating: the energy balance of a whole body that sweats in hot air", "[control][sweating]") {
  Body body(loadCaseFromString(sweatingQuadruped(""), "sweating-body.toml"));
  RunOptions options = testing::silentRun();
  const RunSummary s = runTransient(body, options);
  REQUIRE(s.complete);
  const double residual = std::abs(s.energyBalanceError) / s.throughput;
  const Index k = body.sweatingControl();
  const Index trunk = 0;
  std::printf("[sweating] whole body (trunk, head, 4 legs) in air 36 -> 41 degC: energy balance %.1e of %.4g J; "
              "sweating state at the end %.4f, trunk wetted fraction %.4f\n",
              residual, s.throughput, s.controls[k], body.wettedFraction(trunk, body.spec().run.duration, s.controls));
  CHECK(residual < 1e-9);
  // Sweating works: above the set point in 41 degC air, inside its limits or at max.
  CHECK(s.controls[k] > 0.0);
  CHECK(s.controls[k] <= 0.7 + 1e-4);  // the lag's state may overshoot its clamped target by the solver's tolerance
}

TEST_CASE("Sweating: input errors name file, line and key path - the resolved case keeps it", "[control][sweating][errors]") {
  const std::string sphere = std::string(testing::lumpedSphere);
  const auto lines = std::count(sphere.begin(), sphere.end(), '\n');
  const std::string maxLine = ":" + std::to_string(lines + 4) + ":";
  std::string e = testing::caseErrorMessage(sphere + sweatingTable(37.0, 0.3, 1.5));
  CHECK_THAT(e, Catch::Contains(maxLine) && Catch::Contains("control.sweating.max") && Catch::Contains("out of range"));
  e = testing::caseErrorMessage(sphere + sweatingTable(37.0, 0.3, 0.8, "segments = \"ball, tail\"\n"));
  CHECK_THAT(e, Catch::Contains("control.sweating.segments") && Catch::Contains(":" + std::to_string(lines + 6) + ":") &&
                    Catch::Contains("no segment named \"tail\" (segments: ball)"));
  // A coated segment's outer surface is its coat: named, refused; by default left out; all coated, refused.
  const std::string furred = testing::isothermalFurredCylinder(R"(surface = { ends = "insulated" })");
  e = testing::caseErrorMessage(furred + sweatingTable(37.0, 0.3, 0.8, "segments = \"trunk\"\n"));
  CHECK_THAT(e, Catch::Contains("control.sweating.segments") && Catch::Contains("segment \"trunk\" has a coat"));
  e = testing::caseErrorMessage(furred + sweatingTable(37.0, 0.3, 0.8));
  CHECK_THAT(e, Catch::Contains("control.sweating.segments") && Catch::Contains("every segment has a coat"));
  e = testing::caseErrorMessage(sphere + sweatingTable(37.0, 0.3, 0.8, "segments = \" \"\n"));
  CHECK_THAT(e, Catch::Contains("control.sweating.segments") && Catch::Contains("names no segment"));
  // An event that switches sweating in a case without it.
  e = testing::caseErrorMessage(sphere + "[[events]]\nat = 60\ncontrol = { sweating = { enabled = \"off\" } }\n");
  CHECK_THAT(e, Catch::Contains("control.sweating") && Catch::Contains("the case has no [control.sweating]"));
  // A local controller may not take the name.
  e = testing::caseErrorMessage(sphere + "[control.local.sweating]\nsegments = \"ball\"\n");
  CHECK_THAT(e, Catch::Contains("control.local") && Catch::Contains("may not be named \"sweating\""));

  // The resolved case keeps the table and its segments (a default segment list stays the default).
  for (const std::string& keys : {std::string("segments = \"legs, head\"\n"), std::string()}) {
    const Case c = loadCaseFromString(sweatingQuadruped(keys), "resolved.toml");
    const Case again = loadCaseFromString(resolvedCaseToml(c), "again.toml");
    CHECK(again.control.sweating.present);
    CHECK(again.control.sweating.upper == c.control.sweating.upper);
    CHECK(again.control.sweating.setPoint == c.control.sweating.setPoint);
    CHECK(again.control.sweating.timeConstant == c.control.sweating.timeConstant);
    CHECK(again.control.sweatingSegments == c.control.sweatingSegments);
    CHECK(sweatingSegments(again) == sweatingSegments(c));
  }
  // Default: every segment without a coat.
  const Case c = loadCaseFromString(sweatingQuadruped(""), "default.toml");
  CHECK(sweatingSegments(c) == std::vector<char>{1, 1, 1});
}
