// Substrate contact changed by [[events]] (`surface = { SEGMENT = { contact_fraction = F } }`): a bird that lands,
// a seal that hauls out, an animal that lies down. The body is built for each segment's largest contact of the run
// and every interval scales it (Body::setInterval, EnvironmentModel::faceHeat). Checks:
//  1. a lumped sphere (Biot 2e-4) with a fixed coefficient and contact on, then off by an event, cools with the
//     exact time constant of Newton cooling in each phase, rho c V / (h (1 - f) A + h_sub f A), then
//     rho c V / (h A) (Incropera et al. 2007, eq. 5.6, lumped capacitance), and its energy balance closes;
//  2. a coated cylinder whose contact is switched on by an event reaches the two parallel coat-shell paths of the
//     static case (Incropera et al. 2007 eq. 3.28, as tests/test_contact_coat.cpp), and one switched off reaches
//     the single shell; the Jacobian after the switch against central differences;
//  3. bad input names file, line and key path; the resolved case round-trips the events' contact;
//  4. a warning when a segment's fluid changes while its static contact holds (a diver's feet), none for a wader.
#include <catch2/catch.hpp>

#include <unistd.h>

#include <algorithm>
#include <cmath>
#include <cstdio>
#include <filesystem>
#include <numbers>
#include <string>
#include <vector>

#include "test_common.hpp"
#include "test_run_datasets.hpp"
#include "test_lumped_sphere.hpp"
#include "test_support.hpp"
#include "test_support_body.hpp"
#include "drivers/simulation.hpp"
#include "models/body.hpp"
#include "models/case.hpp"

using namespace thermorph;

namespace {

constexpr double pi = std::numbers::pi;

using Run = testing::RunDatasets;
Run runCase(const std::string& text, const std::vector<std::string>& datasets,
            const std::vector<std::string>& overrides = {}) {
  return testing::runDatasets(text, "contact-events.toml", datasets, overrides);
}

// The lumped sphere of tests/test_lumped_sphere.hpp (R = 2 cm, k = 1000 W/(m K)) with rho c = 1e5 J/(m3 K):
// Bi = h_eff R / k <= 25 * 0.02 / 1000 = 5e-4. Air and substrate at 10 degC, start at 40 degC; fixed h = 10 (no
// radiation: the default emissivity with a fixed coefficient is 0), h_sub = 40, contact 0.5 until 60 s, then 0.
const std::string lumpedOnOff =
    std::string(testing::lumpedSphere) + "[[events]]\nat = \"60 s\"\nsurface = { ball = { contact_fraction = 0 } }\n";
const std::vector<std::string> lumpedOverrides = {
    "run.duration=300",        "run.rtol=1e-9",
    "run.atol=1e-9",           "tissues.lump.density=1000",
    "environment.convection=10", "environment.substrate_conductance=40",
    "segments.ball.surface.contact_fraction=0.5"};

//! The diver of tests/test_support.hpp (a bare leg in sea water, in air from 10 to 20 min) standing on the substrate.
const std::vector<std::string> diverContact = {"segments.leg.surface.contact_fraction=0.4",
                                               "environment.substrate_conductance=100"};
std::vector<std::string> diverWith(std::vector<std::string> more) {
  more.insert(more.begin(), diverContact.begin(), diverContact.end());
  return more;
}

bool hasWarning(const Body& body, const std::string& text) {
  for (const std::string& w : body.warnings())
    if (w.find(text) != std::string::npos) return true;
  return false;
}

}  // namespace

TEST_CASE("Contact stepped off by an event: Newton cooling with each phase's time constant", "[environment][contact]") {
  const Run r = runCase(lumpedOnOff, {"/segments/ball/temperature"}, lumpedOverrides);
  REQUIRE(r.summary.complete);
  const std::vector<double>& T = r.data[0];
  REQUIRE(T.size() == r.time.size());
  const double R = 0.02, rhoC = 1000.0 * 100.0, h = 10.0, hSub = 40.0, f = 0.5, Tinf = 10.0, T0 = 40.0;
  const double V = 4.0 / 3.0 * pi * R * R * R, A = 4.0 * pi * R * R;
  // Incropera et al. 2007 eq. 5.6: theta / theta_i = exp(-t / tau), tau = rho c V / (sum of h A).
  const double tauOn = rhoC * V / (h * (1.0 - f) * A + hSub * f * A), tauOff = rhoC * V / (h * A);
  double worstTau[2] = {0.0, 0.0}, worstT = 0.0;
  for (std::size_t k = 1; k < r.time.size(); ++k) {
    const double t0 = r.time[k - 1], t1 = r.time[k];
    const bool on = t1 <= 60.0;
    if (t0 < 60.0 && t1 > 60.0) continue;  // no output interval straddles the step here (60 s is an output)
    // The time constant of each output interval: -dt / ln(theta_1 / theta_0).
    const double tau = -(t1 - t0) / std::log((T[k] - Tinf) / (T[k - 1] - Tinf));
    double& worst = worstTau[on ? 0 : 1];
    worst = std::max(worst, std::abs(tau / (on ? tauOn : tauOff) - 1.0));
    const double exact = t1 <= 60.0 ? Tinf + (T0 - Tinf) * std::exp(-t1 / tauOn)
                                    : Tinf + (T0 - Tinf) * std::exp(-60.0 / tauOn) * std::exp(-(t1 - 60.0) / tauOff);
    worstT = std::max(worstT, std::abs(T[k] - exact) / (T0 - Tinf));
  }
  std::printf("[contact events] lumped sphere: tau on %.6g s (analytic %.6g, worst rel. error %.1e), off %.6g s "
              "(analytic %.6g, %.1e); temperature vs piecewise exponential %.1e of the initial difference; energy "
              "balance %.2e J of %.4g J exchanged (%.1e)\n",
              tauOn, tauOn, worstTau[0], tauOff, tauOff, worstTau[1], worstT, r.summary.energyBalanceError,
              r.summary.throughput, std::abs(r.summary.energyBalanceError) / r.summary.throughput);
  // The one cell's half-cell resistance against the film: Bi <= 5e-4 sets the lumped model's error (sec. 5.1).
  CHECK(worstTau[0] < 1e-3);
  CHECK(worstTau[1] < 1e-3);
  CHECK(worstT < 1e-3);
  CHECK(std::abs(r.summary.energyBalanceError) <= 1e-10 * r.summary.throughput);
}

TEST_CASE("A coated cylinder's contact switched by an event reaches the static case's steady state",
          "[environment][contact][coat]") {
  // Isothermal tissue at 37 degC, 1 cm of fur (k = 0.04), air at 0 degC with h = 10, substrate at 20 degC with
  // h_sub = 50 (tests/test_contact_coat.cpp). Steady paths (Incropera et al. 2007 eq. 3.28, shells in series with
  // their films): with contact f_c, q_sub = f_c (T_sub - T_b) / (R + 1/(h_sub A_o)) and q_conv = (1 - f_c)
  // (T_a - T_b) / (R + 1/(h A_o)); without, q_conv = (T_a - T_b) / (R + 1/(h A_o)).
  const double L = 0.1, ri = 0.02, ro = 0.03, k = 0.04, fc = 0.2, h = 10.0, hSub = 50.0, Tb = 37.0, Ta = 0.0,
               Tsub = 20.0;
  const double R = std::log(ro / ri) / (2.0 * pi * k * L), Ao = 2.0 * pi * ro * L;
  const double substrateOn = fc * (Tsub - Tb) / (R + 1.0 / (hSub * Ao));
  const double convectionOn = (1.0 - fc) * (Ta - Tb) / (R + 1.0 / (h * Ao));
  const double convectionOff = (Ta - Tb) / (R + 1.0 / (h * Ao));
  const std::string run = "[run]\nduration = \"3 h\"\noutput_interval = \"30 min\"\nrtol = 1e-8\n";
  const std::string environment = "substrate_temperature = \"20 degC\"\nsubstrate_conductance = \"50 W/(m2 K)\"\n";
  struct Scenario {
    const char* name;
    std::string surface, event;
    double substrate, convection;
  };
  const Scenario scenarios[] = {
      {"switched on at 1 s", R"(surface = { ends = "insulated" })",
       "[[events]]\nat = \"1 s\"\nsurface = { trunk = { contact_fraction = 0.2 } }\n", substrateOn, convectionOn},
      {"switched on at 1 s (all)", R"(surface = { ends = "insulated" })",
       "[[events]]\nat = \"1 s\"\nsurface = { all = { contact_fraction = 0.2 } }\n", substrateOn, convectionOn},
      {"switched off at 1 s", R"(surface = { ends = "insulated", contact_fraction = 0.2 })",
       "[[events]]\nat = \"1 s\"\nsurface = { trunk = { contact_fraction = 0 } }\n", 0.0, convectionOff},
      {"0.1, then 0.2 at 1 s", R"(surface = { ends = "insulated", contact_fraction = 0.1 })",
       "[[events]]\nat = \"1 s\"\nsurface = { trunk = { contact_fraction = 0.2 } }\n", substrateOn, convectionOn},
  };
  for (const Scenario& s : scenarios) {
    const std::string text = run + testing::isothermalFurredCylinder(s.surface, environment) + s.event;
    const Run r = runCase(text, {"/segments/trunk/heat_flow/substrate", "/segments/trunk/heat_flow/convection"});
    REQUIRE(r.summary.complete);
    const double substrate = r.data[0].back(), convection = r.data[1].back();
    const double energy = std::abs(r.summary.energyBalanceError) / r.summary.throughput;
    std::printf("[contact events] coated cylinder, %s: substrate %.8g W (analytic %.8g), convection %.8g W (analytic "
                "%.8g, rel. error %.1e); energy balance %.1e of the heat exchanged\n",
                s.name, substrate, s.substrate, convection, s.convection, std::abs(convection / s.convection - 1.0),
                energy);
    INFO(s.name);
    // The tissue's finite conductivity and perfusion are the only departures from the analytic paths (1e-3, as the
    // static test); the coat has reached its steady state after 3 h (time constant of the fur shell ~ minutes).
    if (s.substrate == 0.0) CHECK(std::abs(substrate) < 1e-12);
    else CHECK(std::abs(substrate / s.substrate - 1.0) < 1e-3);
    CHECK(std::abs(convection / s.convection - 1.0) < 1e-3);
    CHECK(energy < 1e-10);
  }

  // A steady start sees the contact of t = 0, here set by an event at 0 s: the first output is already the steady
  // state with contact.
  {
    const std::string text = "[run]\nduration = \"10 min\"\noutput_interval = \"5 min\"\ninitial = \"steady\"\n" +
                             testing::isothermalFurredCylinder(scenarios[0].surface, environment) +
                             "[[events]]\nat = 0\nsurface = { trunk = { contact_fraction = 0.2 } }\n";
    const Run r = runCase(text, {"/segments/trunk/heat_flow/substrate", "/segments/trunk/heat_flow/convection"});
    REQUIRE(r.summary.complete);
    std::printf("[contact events] steady start with contact from an event at 0 s: substrate %.8g W (analytic %.8g), "
                "convection %.8g W (analytic %.8g)\n", r.data[0].front(), substrateOn, r.data[1].front(), convectionOn);
    CHECK(std::abs(r.data[0].front() / substrateOn - 1.0) < 1e-3);
    CHECK(std::abs(r.data[1].front() / convectionOn - 1.0) < 1e-3);
  }

  // The Jacobian before and after the switch (0.1, then 0.2: scaled, then as built) against central differences of
  // the right-hand side.
  Body body(loadCaseFromString(run + testing::isothermalFurredCylinder(scenarios[3].surface, environment) +
                                   scenarios[3].event, "jacobian.toml"));
  for (std::size_t interval : {0, 1}) {
    body.setInterval(interval);
    NetworkSystem system(body.network(), NetworkSystem::Mode::Transient);
    std::vector<double> state = testing::initialState(body, system);
    for (Index i = 0; i < system.nodeCount(); ++i) state[i] = 273.15 + 5.0 + 0.3 * static_cast<double>(i);
    const testing::JacobianCheck j = testing::checkJacobian(system, state, interval == 0 ? 0.5 : 10.0);
    std::printf("[contact events] Jacobian in interval %zu: worst %.1e of the row scale\n", interval, j.worstRelative);
    CHECK(j.worstRelative < 1e-7);
    CHECK(j.outsidePattern == 0);
  }
}

TEST_CASE("Contact events: input errors name file, line and key path - the resolved case keeps them",
          "[environment][contact][errors]") {
  const std::string base = testing::isothermalFurredCylinder(R"(surface = { ends = "insulated" })",
                                                             "substrate_conductance = \"50 W/(m2 K)\"\n");
  auto error = [&](const std::string& events) { return testing::caseErrorMessage(base + events); };
  // Line of the events' `surface` table: after the base's lines, `[[events]]` and `at` (and `ramp`).
  const auto baseLines = std::count(base.begin(), base.end(), '\n');
  const std::string line = ":" + std::to_string(baseLines + 3) + ":", rampLine = ":" + std::to_string(baseLines + 4) + ":";
  std::string e = error("[[events]]\nat = 60\nramp = 30\nsurface = { trunk = { contact_fraction = 0.2 } }\n");
  CHECK_THAT(e, Catch::Contains(rampLine) && Catch::Contains("events.0.surface.trunk.contact_fraction") &&
                    Catch::Contains("step, not over ramp = 30 s"));
  e = error("[[events]]\nat = 60\nsurface = { trunk = { contact_fraction = 1.5 } }\n");
  CHECK_THAT(e, Catch::Contains(line) && Catch::Contains("events.0.surface.trunk.contact_fraction") &&
                    Catch::Contains("out of range"));
  e = error("[[events]]\nat = 60\nsurface = { trunk = { contact_fraction = 1 } }\n");  // a coat: below 1
  CHECK_THAT(e, Catch::Contains("events.0.surface.trunk.contact_fraction") && Catch::Contains("below 1"));
  e = error("[[events]]\nat = 60\nsurface = { feet = { contact_fraction = 0.2 } }\n");
  CHECK_THAT(e, Catch::Contains(line) && Catch::Contains("events.0.surface.feet") &&
                    Catch::Contains("no segment named \"feet\" (segments: trunk, or all)"));
  e = error("[[events]]\nat = 60\nsurface = { trunk = { contact_fracton = 0.2 } }\n");
  CHECK_THAT(e, Catch::Contains("events.0.surface.trunk.contact_fracton") &&
                    Catch::Contains("did you mean \"contact_fraction\""));
  e = error("[[events]]\nat = 60\nsurface = { all = { contact_fraction = 0.1 } }\n"
            "[[events]]\nat = 60\nsurface = { trunk = { contact_fraction = 0.2 } }\n");
  CHECK_THAT(e, Catch::Contains("events.0 and events.1 both change surface.") && Catch::Contains("at 60 s"));
  // Contact that only an event gives still needs the substrate's conductance.
  e = testing::caseErrorMessage(testing::isothermalFurredCylinder() +
                                "[[events]]\nat = 60\nsurface = { trunk = { contact_fraction = 0.2 } }\n");
  CHECK_THAT(e, Catch::Contains("environment.substrate_conductance") && Catch::Contains("required"));

  // The resolved case keeps the events' contact: the same contact in every interval after reloading.
  const std::string text = base + "[[events]]\nat = 60\nsurface = { all = { contact_fraction = 0.1 } }\n"
                                  "[[events]]\nat = 120\nsurface = { trunk = { contact_fraction = 0.3 } }\n";
  Body body(loadCaseFromString(text, "case.toml"));
  Body again(loadCaseFromString(resolvedCaseToml(body.spec()), "resolved.toml"));
  const double expected[] = {0.0, 0.1, 0.3};
  for (std::size_t k = 0; k < 3; ++k) {
    body.environment().setInterval(k);
    again.environment().setInterval(k);
    CHECK(body.environment().contactFraction(0) == expected[k]);
    CHECK(again.environment().contactFraction(0) == expected[k]);
  }
  CHECK(again.environment().maxContactFraction(0) == 0.3);
  // --set reaches an event's contact as any event key.
  Body set(loadCaseFromString(text, "case.toml", {"events.1.surface.trunk.contact_fraction=0.25"}));
  set.environment().setInterval(2);
  CHECK(set.environment().contactFraction(0) == 0.25);
}

TEST_CASE("A static contact that holds while the segment's fluid changes is warned about", "[environment][contact]") {
  const std::string warning =
      "segment leg: contact_fraction 0.4 holds in water (0-600 s, 1200-1800 s) and in air (600-1200 s)";
  // A diver's leg standing on the substrate in the sea and out of it: warned.
  Body diver(loadCaseFromString(testing::divingLeg, "diver.toml", diverContact));
  for (const std::string& w : diver.warnings()) std::printf("[contact events] warning: %s\n", w.c_str());
  CHECK(hasWarning(diver, warning));
  CHECK(hasWarning(diver, "surface = { leg = { contact_fraction = 0 } }"));
  // Its contact given by an event: not warned.
  Body lands(loadCaseFromString(testing::divingLeg, "lands.toml",
                                diverWith({"events.0.surface.leg.contact_fraction=0.2"})));
  CHECK_FALSE(hasWarning(lands, "holds in water"));
  // (the --set of the static contact holds until that event, said as for environment keys)
  CHECK(hasWarning(lands, "segments.leg.surface.contact_fraction = 0.4 (command line) holds until t = 600 s"));
  // A wader's leg, always in water, on the mud: its fluid never changes, not warned.
  Body wader(loadCaseFromString(testing::divingLeg, "wader.toml", diverWith({"segments.leg.surface.immersion=always"})));
  CHECK_FALSE(hasWarning(wader, "holds in water"));
  Body pond(loadCaseFromString(
      testing::isothermalFurredCylinder(R"(surface = { contact_fraction = 0.4, immersion = "always" })",
                                        "substrate_conductance = \"50 W/(m2 K)\"\n"),
      "pond.toml"));
  CHECK_FALSE(hasWarning(pond, "holds in water"));
}
