// Physiology over time ([[events]] vasomotor, circulation, metabolism and respiration targets; models/physiology.cpp):
// a dive response switches at exactly its time, bradycardia spares the brain, hypometabolism scales metabolic heat,
// panting scales the respiratory loss of the hand calculation, and energy is conserved across every restart.
#include <catch2/catch.hpp>

#include <algorithm>
#include <cmath>
#include <cstdio>
#include <map>
#include <numbers>
#include <string>
#include <vector>

#include "test_common.hpp"
#include "test_support_body.hpp"

using namespace thermorph;
using namespace thermorph::testing;

namespace {

constexpr double rhoC = 1050.0 * 3617.0;  // blood rho c, schema defaults (case_schema.cpp) [J/(m3 K)]

//! Node temperatures, heat flows and the energy balance at every output of a transient run (observer hook).
struct Trace {
  std::vector<double> time;                  //!< [s]
  std::vector<std::vector<double>> nodes;    //!< [outputs][nodes] [K]
  std::vector<std::vector<double>> flows;    //!< [outputs][groups x channels] [W], unweighted
  double worstBalance = 0.0;                 //!< max |energy-balance error| / throughput over the outputs [1]
  std::size_t at(double t) const {
    for (std::size_t i = 0; i < time.size(); ++i)
      if (std::abs(time[i] - t) < 1e-9) return i;
    throw std::invalid_argument("no output at the requested time");
  }
};

Trace traceRun(const Body& body) {
  Trace trace;
  RunOptions options = silentRun();
  options.observer = [&](double t, std::span<const double> temperatures, const RunSummary& s) {
    trace.time.push_back(t);
    trace.nodes.emplace_back(temperatures.begin(), temperatures.end());
    trace.flows.push_back(s.flows);
    if (s.throughput > 0.0)
      trace.worstBalance = std::max(trace.worstBalance, std::abs(s.energyBalanceError) / s.throughput);
  };
  RunSummary summary = runTransient(body, options);
  REQUIRE(summary.complete);
  return trace;
}

//! Modulator values by name at node temperatures `T`, time t, in timeline interval k [1].
std::map<std::string, double> modulatorsAt(const Body& body, std::span<const double> T, double t, std::size_t k) {
  NetworkSystem system(body.network(), NetworkSystem::Mode::Transient);
  std::vector<double> y(system.size(), 0.0), m(body.network().modulators.size());
  std::copy(T.begin(), T.end(), y.begin());
  body.setInterval(k);
  system.modulatorValues(t, y, m);
  body.setInterval(0);
  std::map<std::string, double> out;
  for (Index i = 0; i < m.size(); ++i) out[body.network().modulators[i].name] = m[i];
  return out;
}

//! Blood flow from a segment's arterial nodes into its tissue cells of layer `layer` (shunts included), per copy,
//! at node temperatures `T`, time t, interval k [m3/s].
double arterialFlowInto(const Body& body, const std::string& segment, int layer, std::span<const double> T, double t,
                        std::size_t k) {
  const Network& n = body.network();
  const SegmentMesh& m = body.segments()[segmentIndex(body, segment)];
  NetworkSystem system(n, NetworkSystem::Mode::Transient);
  std::vector<double> y(system.size(), 0.0), mods(n.modulators.size());
  std::copy(T.begin(), T.end(), y.begin());
  body.setInterval(k);
  system.modulatorValues(t, y, mods);
  body.setInterval(0);
  double flow = 0.0;
  for (const Advection& a : n.advections)
    forEachHop(a, [&](Index from, Index to) {
      if (std::find(m.arterial.begin(), m.arterial.end(), from) == m.arterial.end()) return;
      if (to < m.offset || to >= m.offset + static_cast<Index>(m.nz * m.nr)) return;
      if (m.layer[static_cast<std::size_t>((to - m.offset) % static_cast<Index>(m.nr))] != layer) return;
      double F = Network::constantFlow(a);
      n.forEachPart(a, [&](Index, const FlowPart& p) { F += p.coefficient * mods[p.modulator]; });
      flow += F / rhoC;
    });
  return flow;
}

//! Heat flows by group and channel at node temperatures `T`, time t, interval k, unweighted [W].
std::vector<double> flowsAt(const Body& body, std::span<const double> T, double t, std::size_t k) {
  const Network& n = body.network();
  NetworkSystem system(n, NetworkSystem::Mode::Transient);
  std::vector<double> y(system.size(), 0.0), flows(n.groups.size() * n.channels.size()), storage(n.groups.size()),
      faces(n.faces.size());
  std::copy(T.begin(), T.end(), y.begin());
  body.setInterval(k);
  system.groupFlows(t, y, flows, storage, faces);
  body.setInterval(0);
  return flows;
}

// An invented diving mammal of about 80 kg in 8 degC sea water: trunk, head (brain), a pair of fore-flippers
// with shunts and a countercurrent exchanger. Every tissue has Q10 = 1, so metabolic heat is exactly the basal
// rate times the multipliers whatever the temperatures.
constexpr double flipperLength = 0.25, flipperWidth = 0.12, flipperSkin = 0.002;  // [m]
constexpr double skinPerfusion = 1e-3, fleshPerfusion = 6e-4, brainPerfusion = 8e-3;  // [1/s]
constexpr double shuntMax = 20e-6 / 60.0;  // [m3/s]
const std::string diver = R"toml(
[run]
duration = "30 min"
output_interval = "5 min"
initial_temperature = "37 degC"
[body]
basal_metabolic_rate = "40 W"
[tissues.flesh]
conductivity = 0.5
density = 1050
specific_heat = 3600
metabolic_heat = 1000
perfusion = 6e-4
q10 = 1
[tissues.blubber]
conductivity = 0.18
density = 930
specific_heat = 2700
metabolic_heat = 100
perfusion = 2e-4
q10 = 1
[tissues.skin]
conductivity = 0.37
density = 1109
specific_heat = 3391
metabolic_heat = 500
perfusion = 1e-3
q10 = 1
[tissues.brain]
metabolic_heat = 10000
perfusion = 8e-3
q10 = 1
[[segments]]
name = "trunk"
shape = "cylinder"
length = "1 m"
axial_cells = 4
layers = [{ tissue = "flesh", thickness = "12 cm", cells = 3 }, { tissue = "blubber", thickness = "3 cm", cells = 2 },
          { tissue = "skin", thickness = "0.5 cm", cells = 1 }]
surface = { ends = "insulated" }
[[segments]]
name = "head"
parent = "trunk"
attach_position = 0.0
shape = "cylinder"
length = "15 cm"
axial_cells = 2
layers = [{ tissue = "brain", thickness = "5 cm", cells = 2 }, { tissue = "flesh", thickness = "3 cm", cells = 1 },
          { tissue = "blubber", thickness = "1 cm", cells = 1 }, { tissue = "skin", thickness = "0.3 cm", cells = 1 }]
surface = { ends = "insulated" }
[[segments]]
name = "flippers"
parent = "trunk"
count = 2
attach_position = 0.2
shape = "plate"
length = "25 cm"
width = "12 cm"
axial_cells = 4
layers = [{ tissue = "flesh", thickness = "0.6 cm", cells = 2 }, { tissue = "skin", thickness = "0.2 cm", cells = 1 }]
vessels = { countercurrent_conductance = "0.3 W/K", shunt_flow_max = "20 mL/min" }
vasomotor = { shunt = 0.5 }
[environment]
medium = "sea_water"
temperature = "8 degC"
speed = "1 m/s"
[[events]]
at = "10 min"
label = "dive 1"
span = "10 min"
vasomotor = { all = { skin_perfusion = 0.2 }, flippers = { shunt = 0 } }
circulation = { bradycardia = 0.4 }
metabolism = { hypometabolism = 0.7 }
[[events]]
at = "20 min"
label = "surface"
vasomotor = { all = { skin_perfusion = 1 }, flippers = { shunt = 1 } }
circulation = { bradycardia = 1 }
metabolism = { hypometabolism = 1 }
)toml";

}  // namespace

TEST_CASE("Vasoconstriction and bradycardia at a dive start act at exactly that time", "[physiology][events]") {
  // The dive starts at 600 s, an output time. The run stops at the breakpoint and switches the physiology before
  // writing, so the output at 600 s must carry the dive's flows, and the same state evaluated in the interval before
  // must carry the surface flows (README, "Physiology over time"; common practice, no source). Expected multipliers: skin
  // 0.2 x bradycardia 0.4 = 0.08; other tissues 0.4 except brain (1); flipper shunts 0.5 -> 0 -> 1 (flushing at
  // the surface). Flows by hand per flipper (a plate: skin volume 2 w L t_skin on both faces): arterial flow into
  // the skin = omega_skin V_skin m_skin + Q_shunt,max m_shunt.
  Body body(loadCaseFromString(diver, "diver.toml"));
  Trace trace = traceRun(body);
  const std::size_t i = trace.at(600.0), j = trace.at(1200.0);
  const std::vector<double>& T = trace.nodes[i];
  auto before = modulatorsAt(body, T, 600.0, 0), during = modulatorsAt(body, T, 600.0, 1),
       after = modulatorsAt(body, trace.nodes[j], 1200.0, 2);
  struct Row {
    const char* name;
    double before, during, after;
  };
  const Row rows[] = {{"trunk skin perfusion", 1.0, 0.08, 1.0},    {"flippers skin perfusion", 1.0, 0.08, 1.0},
                      {"flippers shunts", 0.5, 0.0, 1.0},          {"trunk flesh perfusion", 1.0, 0.4, 1.0},
                      {"trunk blubber perfusion", 1.0, 0.4, 1.0},  {"flippers flesh perfusion", 1.0, 0.4, 1.0},
                      {"head brain perfusion", 1.0, 1.0, 1.0},     {"head flesh perfusion", 1.0, 0.4, 1.0}};
  for (const Row& r : rows) {
    INFO(r.name);
    REQUIRE(before.count(r.name) == 1);
    CHECK(before[r.name] == Approx(r.before).epsilon(1e-14).margin(1e-15));
    CHECK(during[r.name] == Approx(r.during).epsilon(1e-14).margin(1e-15));
    CHECK(after[r.name] == Approx(r.after).epsilon(1e-14).margin(1e-15));
  }

  // Arterial flow into the flipper skin and the brain, by hand.
  const double skinVolume = 2.0 * flipperWidth * flipperLength * flipperSkin;
  const int skinLayer = 1, brainLayer = 0, headFlesh = 1;
  const double flipperBefore = arterialFlowInto(body, "flippers", skinLayer, T, 600.0, 0);
  const double flipperDuring = arterialFlowInto(body, "flippers", skinLayer, T, 600.0, 1);
  const double flipperAfter = arterialFlowInto(body, "flippers", skinLayer, trace.nodes[j], 1200.0, 2);
  const double e1 = std::abs(flipperBefore / (skinPerfusion * skinVolume + 0.5 * shuntMax) - 1.0);
  const double e2 = std::abs(flipperDuring / (0.08 * skinPerfusion * skinVolume) - 1.0);
  const double e3 = std::abs(flipperAfter / (skinPerfusion * skinVolume + shuntMax) - 1.0);
  // Brain: a cylinder of radius 5 cm and length 15 cm; the head's flesh shell 5-8 cm.
  const double brainVolume = std::numbers::pi * 0.05 * 0.05 * 0.15;
  const double fleshVolume = std::numbers::pi * (0.08 * 0.08 - 0.05 * 0.05) * 0.15;
  const double e4 = std::abs(arterialFlowInto(body, "head", brainLayer, T, 600.0, 1) / (brainPerfusion * brainVolume) - 1.0);
  const double e5 = std::abs(arterialFlowInto(body, "head", headFlesh, T, 600.0, 1) / (0.4 * fleshPerfusion * fleshVolume) - 1.0);
  std::printf("[physiology] dive start: flipper skin + shunt flow %.4g -> %.4g mL/min (hand: rel. errors %.1e, %.1e), "
              "at the surface %.4g mL/min (%.1e); brain %.1e, head flesh x0.4 %.1e\n",
              flipperBefore * 6e7, flipperDuring * 6e7, e1, e2, flipperAfter * 6e7, e3, e4, e5);
  CHECK(e1 < 1e-12);
  CHECK(e2 < 1e-12);
  CHECK(e3 < 1e-12);
  CHECK(e4 < 1e-12);
  CHECK(e5 < 1e-12);

  // The output at 600 s carries the dive's flows: equal to the same state evaluated in interval 1, not 0.
  const Network& n = body.network();
  const Index blood = channelIndex(n, "blood"), flippers = segmentIndex(body, "flippers");
  const Index slot = flippers * n.channels.size() + blood;
  const std::vector<double> dive = flowsAt(body, T, 600.0, 1), surface = flowsAt(body, T, 600.0, 0);
  std::printf("[physiology] flipper blood heat at 600 s: recorded %.5g W, dive %.5g W, surface %.5g W (per flipper)\n",
              trace.flows[i][slot], dive[slot], surface[slot]);
  CHECK(trace.flows[i][slot] == Approx(dive[slot]).epsilon(1e-12));
  CHECK(std::abs(dive[slot]) < 0.5 * std::abs(surface[slot]));  // vasoconstriction: far less heat delivered
  CHECK(std::abs(dive[slot] - surface[slot]) > 1e-3 * std::abs(surface[slot]));

  // Hypometabolism: metabolic heat is 40 W x 0.7 during the dive (Q10 = 1, so exact at any temperature).
  const Index metabolism = channelIndex(n, "metabolism");
  for (std::size_t k = 0; k < trace.time.size(); ++k) {
    double t = trace.time[k];
    double expected = 40.0 * (t >= 600.0 && t < 1200.0 ? 0.7 : 1.0);
    INFO("t = " << t);
    CHECK(bodyChannelTotal(n, trace.flows[k], metabolism) == Approx(expected).epsilon(1e-12));
  }
  // Conservation across both restarts (criterion 1e-6 of the heat exchanged; common practice, no source).
  std::printf("[physiology] dive run: worst energy balance %.1e of the heat exchanged\n", trace.worstBalance);
  CHECK(trace.worstBalance <= 1e-6);
}

TEST_CASE("Panting and hypometabolism scale the respiratory heat loss of the hand calculation", "[physiology][events]") {
  // Respiratory loss (models/surface_physics.hpp): V = M v_W p, Q = V rho_da [(omega_ex - omega_in) L_v(T_ex) +
  // c_p (T_ex - T_in)], with v_W = 9.52177e-7 m3/(s W), exhaled air saturated at 35 degC (default), inspired air
  // 30 degC at 40 % RH, 101325 Pa (common practice, no source). Written out for M = 10 W, p = 1:
  //   e_in = 0.4 x 611.21 exp(17.502 x 30/270.97) = 1697.40 Pa; e_ex = 5625.91 Pa (Buck 1981);
  //   omega_in = 0.621974 x 1697.40/(101325 - 1697.40) = 0.0105969; omega_ex = 0.0365645;
  //   rho_da = (101325 - 1697.40)/(287.055 x 303.15) = 1.144872 kg/m3; V = 9.52177e-6 m3/s;
  //   L_v(35 degC) = 2.501e6 - 2361 x 35 = 2.418365e6 J/kg (FAO-56);
  //   latent = 9.52177e-6 x 1.144872 x 0.0259676 x 2.418365e6 = 0.684585 W;
  //   sensible = 9.52177e-6 x 1.144872 x 1007.1 x 5 = 0.054894 W (c_p Table A.4); total 0.739480 W.
  // Events: panting x4 from 300 s, hypometabolism 0.5 from 600 s (ventilation follows metabolism).
  const double hand = 0.739480;
  Body body(loadCaseFromString(R"toml(
[run]
duration = "15 min"
output_interval = "5 min"
initial_temperature = "37 degC"
[body]
basal_metabolic_rate = "10 W"
respiratory_segment = "head"
[tissues.brain]
q10 = 1   # the respiratory loss carries the Q10 of the respiratory layer: 1 keeps it a function of the air alone
[[segments]]
name = "trunk"
shape = "cylinder"
length = "30 cm"
axial_cells = 2
layers = [{ tissue = "muscle", thickness = "4 cm", cells = 2 }, { tissue = "skin", thickness = "0.3 cm", cells = 1 }]
coat = { material = "fur", thickness = "1 cm", cells = 1 }
surface = { ends = "insulated" }
[[segments]]
name = "head"
parent = "trunk"
attach_position = 0.0
shape = "cylinder"
length = "8 cm"
axial_cells = 1
layers = [{ tissue = "brain", thickness = "2 cm", cells = 1 }, { tissue = "skin", thickness = "0.2 cm", cells = 1 }]
surface = { ends = "insulated" }
[environment]
temperature = "30 degC"
relative_humidity = "40 %"
convection = "10 W/(m2 K)"
[[events]]
at = "5 min"
respiration = { panting = 4 }
[[events]]
at = "10 min"
metabolism = { hypometabolism = 0.5 }
)toml",
                               "panting.toml"));
  Trace trace = traceRun(body);
  const Index respiration = channelIndex(body.network(), "respiration");
  const double factor[] = {1.0, 4.0, 2.0, 2.0};  // t = 0, 300, 600, 900 s
  double worst = 0.0;
  for (std::size_t k = 0; k < trace.time.size(); ++k) {
    const double got = -bodyChannelTotal(body.network(), trace.flows[k], respiration);
    const double error = std::abs(got / (factor[k] * hand) - 1.0);
    worst = std::max(worst, error);
    std::printf("[physiology] respiration at %4.0f s: %.6f W, hand %.6f W (x%.0f), relative error %.1e\n",
                trace.time[k], got, factor[k] * hand, factor[k], error);
  }
  // Tolerance 1e-4: the hand value's six digits and c_p read from the table (the sensible part is 7 % of the total).
  CHECK(worst < 1e-4);
  // Exact ratios between outputs (the state changes between them, but the loss depends only on the air).
  CHECK(-bodyChannelTotal(body.network(), trace.flows[1], respiration) ==
        Approx(-4.0 * bodyChannelTotal(body.network(), trace.flows[0], respiration)).epsilon(1e-12));
  CHECK(trace.worstBalance <= 1e-6);
}

TEST_CASE("Bradycardia scales the perfusion of the chosen tissues only", "[physiology][events]") {
  // [circulation] bradycardia_tissues = "muscle": an event factor 0.5 halves muscle perfusion and leaves skin
  // perfusion as it was (the schedule of each layer's modulator; common practice: the dive response spares some
  // organs — here the choice is the user's).
  Body body(loadCaseFromString(R"toml(
[run]
duration = "10 min"
output_interval = "5 min"
[circulation]
bradycardia_tissues = "muscle"
[[segments]]
name = "trunk"
shape = "cylinder"
length = "30 cm"
axial_cells = 2
layers = [{ tissue = "muscle", thickness = "4 cm", cells = 2 }, { tissue = "skin", thickness = "0.3 cm", cells = 1 }]
[[events]]
at = "5 min"
circulation = { bradycardia = 0.5 }
)toml",
                               "brady.toml"));
  const Network& n = body.network();
  NetworkSystem system(n, NetworkSystem::Mode::Transient);
  std::vector<double> state(system.size(), 310.15), before(n.modulators.size()), after(n.modulators.size());
  body.setInterval(0);
  system.modulatorValues(299.0, state, before);
  body.setInterval(1);
  system.modulatorValues(301.0, state, after);
  int checked = 0;
  for (Index k = 0; k < n.modulators.size(); ++k) {
    if (n.modulators[k].name == "trunk muscle perfusion") {
      CHECK(after[k] == Approx(0.5 * before[k]).epsilon(1e-15));
      ++checked;
    }
    if (n.modulators[k].name == "trunk skin perfusion") {
      CHECK(after[k] == before[k]);
      ++checked;
    }
  }
  CHECK(checked == 2);
  CHECK_THAT(common::caseErrorOf("[circulation]\nbradycardia_tissues = \"musle\"\n[[segments]]\nname = \"a\"\n"
                                 "shape = \"sphere\"\nlayers = [{ tissue = \"muscle\", thickness = \"2 cm\" }]\n"),
             Catch::Contains("circulation.bradycardia_tissues") && Catch::Contains("unknown tissue \"musle\""));
}
