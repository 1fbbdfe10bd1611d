// Local vasomotor controllers ([control.local.NAME]) and cold-induced vasodilation (CIVD): a segment's own skin
// as the signal, precedence over the body-wide controller, energy conservation, the Jacobian against central
// differences, CIVD when and only when the local skin is below its threshold, and bad input.
#include <catch2/catch.hpp>

#include <algorithm>
#include <cmath>
#include <cstdio>
#include <string>
#include <vector>

#include "test_support_body.hpp"

using namespace thermorph;
using namespace thermorph::testing;

namespace {

constexpr double kZero = 273.15;

//! A foot's skin temperature and every controller state at each output of a transient run.
struct LocalTrace {
  std::vector<double> time, skin;             //!< [s], [K] (local skin of segment "foot")
  std::vector<std::vector<double>> controls;  //!< [outputs][controllers]
  std::vector<double> finalNodes;             //!< [K]
  double worstBalance = 0.0;                  //!< max |energy-balance error| / throughput over the outputs
};

//! Area-weighted mean of a segment's outermost tissue layer (each axial cell's layer mean, by volume), written out
//! from the mesh's layer indices and the face areas [K]
//! (the definition of the local skin signal, README "Local control").
double localSkin(const Body& body, std::span<const double> T, const std::string& segment) {
  for (std::size_t g = 0; g < body.spec().segments.size(); ++g) {
    if (body.spec().segments[g].name != segment) continue;
    const SegmentMesh& m = body.segments()[g];
    double sum = 0.0, area = 0.0;
    for (int iz = 0; iz < m.nz; ++iz) {
      double a = body.network().faces[m.lateralFace[static_cast<std::size_t>(iz)]].area;
      double layerSum = 0.0, volume = 0.0;
      for (int ir = 0; ir < m.nr; ++ir)
        if (m.layer[static_cast<std::size_t>(ir)] == m.layer[static_cast<std::size_t>(m.skinCell)]) {
          double v = m.volume[static_cast<std::size_t>(iz * m.nr + ir)];
          layerSum += v * T[m.node(iz, ir)];
          volume += v;
        }
      sum += a * layerSum / volume;
      area += a;
    }
    return sum / area;
  }
  throw std::invalid_argument("no segment " + segment);
}

LocalTrace traceFoot(const Body& body) {
  LocalTrace trace;
  RunOptions options = silentRun();
  options.observer = [&](double t, std::span<const double> T, const RunSummary& s) {
    trace.time.push_back(t);
    trace.skin.push_back(localSkin(body, T, "foot"));
    trace.controls.push_back(s.controls);
    if (s.throughput > 0.0)
      trace.worstBalance = std::max(trace.worstBalance, std::abs(s.energyBalanceError) / s.throughput);
  };
  RunSummary summary = runTransient(body, options);
  REQUIRE(summary.complete);
  trace.finalNodes = summary.finalState;
  return trace;
}

Index controllerIndex(const Network& network, const std::string& name) {
  for (Index k = 0; k < network.controllers.size(); ++k)
    if (network.controllers[k].name == name) return k;
  throw std::invalid_argument("no controller " + name);
}

// A warm trunk in 5 degC air and a pair of bare feet standing in 2 degC water (fixed coefficients), arterial blood
// pinned at 37 degC; the feet have shunts through their skin (open fraction `shunt`). Values invented for the test.
std::string footCase(const std::string& shunt, const std::string& extra, const std::string& water = "2 degC") {
  return R"toml(
[run]
duration = "3 h"
output_interval = "5 min"
[circulation]
fixed_arterial_temperature = "37 degC"
[tissues.flesh]
conductivity = 0.5
density = 1050
specific_heat = 3600
metabolic_heat = 1000
perfusion = 6e-4
q10 = 1
[tissues.skin]
conductivity = 0.37
density = 1109
specific_heat = 3391
metabolic_heat = 0
perfusion = 1e-3
q10 = 1
[[segments]]
name = "trunk"
shape = "cylinder"
length = "20 cm"
axial_cells = 4
layers = [{ tissue = "flesh", thickness = "3 cm", cells = 4 }, { tissue = "skin", thickness = "0.2 cm", cells = 1 }]
coat = { material = "fur", thickness = "1.5 cm", cells = 2 }
surface = { ends = "insulated" }
[[segments]]
name = "foot"
parent = "trunk"
count = 2
attach_position = 1.0
shape = "cylinder"
length = "6 cm"
axial_cells = 6
layers = [{ tissue = "flesh", thickness = "0.4 cm", cells = 2 }, { tissue = "skin", thickness = "0.2 cm", cells = 2 }]
surface = { immersion = "always", convection = "150 W/(m2 K)" }
vessels = { shunt_flow_max = "3 mL/min" }
vasomotor = { shunt = )toml" + shunt + R"toml( }
[environment]
temperature = "5 degC"
water_temperature = ")toml" + water + R"toml("
convection = "10 W/(m2 K)"
)toml" + extra;
}

std::string localFloor(const std::string& signal, double gain, const std::string& more = "") {
  return "[control.local.feet]\nsegments = \"foot\"\nsignal = \"" + signal + "\"\nset_point = \"15 degC\"\ngain = \"" +
         num(gain) + " 1/K\"\nshunt_gain = \"" + num(gain) + " 1/K\"\nmin = 0.1\nmax = 4\ntime_constant = \"2 min\"\n" + more;
}

}  // namespace

TEST_CASE("A local controller keeps a foot's skin above its floor where a body-wide signal cannot", "[control][local]") {
  // Proportional control with limits: while a controller is not saturated, its steady signal lies inside its
  // proportional band, T_set - (u_max - u_0)/|g| < T < T_set (so it tends to the set point as the gain grows;
  // control theory, common practice, no source): 1/|g| for the shunts (0 to 1), 3/|g| for skin perfusion (1 to 4). Uncontrolled, the foot's skin sits far below the 15 degC floor; the same
  // controller fed the body's mean skin (dominated by the warm trunk) closes the foot further instead.
  const double floor = 15.0 + kZero;
  auto uncontrolled = traceFoot(*bodyFromToml(footCase("0", "")));
  const double T0 = uncontrolled.skin.back();
  std::printf("[local] foot skin after 3 h: uncontrolled %.3f degC\n", T0 - kZero);
  REQUIRE(T0 < floor - 5.0);
  double previousOffset = 1e9;
  for (double g : {1.0, 10.0, 100.0}) {
    auto body = bodyFromToml(footCase("1", localFloor("local_skin", -g)));
    auto trace = traceFoot(*body);
    const double T = trace.skin.back();
    const double offset = floor - T;
    const Index shunt = controllerIndex(body->network(), "feet_foot_shunts");
    const Index skinPerfusion = controllerIndex(body->network(), "feet_foot_skin_perfusion");
    const double us = trace.controls.back()[shunt], up = trace.controls.back()[skinPerfusion];
    std::printf("[local] local_skin, gain -%g 1/K: foot skin %.4f degC (set point 15; offset %.4f K, bands %.4f K "
                "(shunts) and %.4f K (skin perfusion)), shunts %.4f, skin perfusion %.3f\n",
                g, T - kZero, offset, 1.0 / g, 3.0 / g, us, up);
    INFO("gain " << g);
    // Skin perfusion 1 + g x offset is below its max 4: inside its band, offset < (4 - 1)/g; the shunts' band is
    // 1/g while they are below fully open.
    CHECK(up < 4.0);
    CHECK(offset > 0.0);
    CHECK(offset < 3.0 / g);
    if (us < 1.0 - 1e-6) CHECK(offset < 1.0 / g + 1e-6);
    CHECK(offset < previousOffset);
    previousOffset = offset;
  }
  // Same parameters, the body's mean skin as the signal: nothing protects the foot.
  auto wide = traceFoot(*bodyFromToml(footCase("1", localFloor("mean_skin", -10.0))));
  std::printf("[local] mean_skin signal, gain -10 1/K: foot skin %.3f degC\n", wide.skin.back() - kZero);
  CHECK(wide.skin.back() < floor - 5.0);
  CHECK(wide.skin.back() <= T0 + 1e-9);  // skin perfusion at its minimum: colder than uncontrolled
  // With a body-wide controller on the core as well (closing every other segment in the cold), the foot follows
  // its local controller only (precedence, README "Local control").
  const std::string bodyWide = "[control.vasomotor]\nsignal = \"core\"\nset_point = \"37.5 degC\"\n";
  auto both = bodyFromToml(footCase("1", bodyWide + localFloor("local_skin", -10.0)));
  auto bothTrace = traceFoot(*both);
  std::printf("[local] body-wide core controller + local floor: foot skin %.4f degC\n", bothTrace.skin.back() - kZero);
  CHECK(floor - bothTrace.skin.back() > 0.0);
  CHECK(floor - bothTrace.skin.back() < 0.1 + 1e-3);
  auto onlyWide = traceFoot(*bodyFromToml(footCase("1", bodyWide)));
  std::printf("[local] body-wide core controller alone: foot skin %.3f degC\n", onlyWide.skin.back() - kZero);
  CHECK(onlyWide.skin.back() < floor - 5.0);
}

TEST_CASE("A local controller of gain 0 leaves the run as without it", "[control][local]") {
  // Limit g -> 0: u_skin = 1 and u_shunt = 0 at all times; with static shunts closed the flows are those of the
  // uncontrolled body (the controller states only add components to the integrator's error norm, so the runs
  // agree to its tolerance, here 1e-10, not bit for bit).
  const std::vector<std::string> tight{"run.rtol=1e-10", "run.atol=1e-10 K"};
  auto plain = traceFoot(Body(loadCaseFromString(footCase("0", ""), "test-case", tight)));
  auto body = std::make_unique<Body>(loadCaseFromString(footCase("0", localFloor("local_skin", 0.0)), "test-case", tight));
  auto zero = traceFoot(*body);
  REQUIRE(plain.finalNodes.size() == zero.finalNodes.size());
  double worst = 0.0;
  for (std::size_t i = 0; i < plain.finalNodes.size(); ++i)
    worst = std::max(worst, std::abs(plain.finalNodes[i] - zero.finalNodes[i]));
  std::printf("[local] gain 0 against no controller (tolerances 1e-10): max |dT| %.2e K after 3 h\n", worst);
  CHECK(worst < 1e-7);
  for (const auto& u : zero.controls) {
    CHECK(u[controllerIndex(body->network(), "feet_foot_skin_perfusion")] == 1.0);
    CHECK(u[controllerIndex(body->network(), "feet_foot_shunts")] == 0.0);
  }
}

TEST_CASE("Local controllers and CIVD conserve energy with a blood pool", "[control][local][validation]") {
  // First law: cumulative channel energies equal the change of stored heat (storage = sum of flows), as in
  // tests/test_conservation.cpp; criterion 1e-6 of the heat exchanged.
  std::string text = footCase("1", "[control.vasomotor]\nsignal = \"core\"\n" +
                                        localFloor("local_skin", -2.0,
                                                   "civd = { threshold = \"12 degC\", width = \"2 K\", time_constant = "
                                                   "\"3 min\" }\n"),
                              "1 degC");
  // Replace the pinned arterial supply by the central blood pool.
  text.replace(text.find("fixed_arterial_temperature"), std::string("fixed_arterial_temperature = \"37 degC\"").size(),
               "");
  auto body = bodyFromToml(text);
  auto trace = traceFoot(*body);
  double civdMax = 0.0;
  const Index civd = controllerIndex(body->network(), "feet_foot_civd");
  for (const auto& u : trace.controls) civdMax = std::max(civdMax, u[civd]);
  std::printf("[local] energy balance with local control and CIVD: worst %.2e of the heat exchanged (CIVD up to %.3f)\n",
              trace.worstBalance, civdMax);
  CHECK(civdMax > 0.05);  // CIVD took part
  CHECK(trace.worstBalance < 1e-6);
}

TEST_CASE("Jacobian with local controllers and CIVD matches central differences", "[control][local][jacobian]") {
  // Reference: central differences of the right-hand side (common practice, no source); criterion 1e-6 of the
  // row scale, no FD entry outside the pattern. Set points are placed about the state's signals so every
  // controller is inside its range (the clamps make the Jacobian piecewise). Entries of the CIVD row by hand:
  // d(dc/dt)/dc = -1/tau, d(dc/dT_i) = -(1/width) w_i / tau with w_i the face-area share of skin cell i.
  auto makeState = [](const NetworkSystem& system) {
    std::vector<double> y(system.size(), 0.0);
    for (Index i = 0; i < system.nodeCount(); ++i) y[i] = 300.0 + 6.0 * std::sin(1.7 * static_cast<double>(i) + 0.3);
    return y;
  };
  double skin = 0.0, mean = 0.0;
  {
    auto probe = bodyFromToml(footCase("1", ""));
    NetworkSystem system(probe->network(), NetworkSystem::Mode::Transient);
    auto y = makeState(system);
    skin = localSkin(*probe, y, "foot");
    double sum = 0.0, area = 0.0;
    for (const SegmentMesh& m : probe->segments())
      for (int iz = 0; iz < m.nz; ++iz) {
        double a = m.weight * probe->network().faces[m.lateralFace[static_cast<std::size_t>(iz)]].area;
        sum += a * y[m.node(iz, m.skinCell)];
        area += a;
      }
    mean = sum / area;
  }
  auto degC = [](double k) { return num(k - kZero) + " degC"; };
  // Foot: local skin, g = -1: u_skin = 1 + 0.3 = 1.3, shunts 0.3; CIVD: (threshold - T) / 2 = 0.5. Trunk: a
  // second local controller on the body's mean skin, g = 1: 1 + 0.4 = 1.4.
  std::string controls = "[control.local.feet]\nsegments = \"foot\"\nset_point = \"" + degC(skin + 0.3) +
                         "\"\ngain = \"-1 1/K\"\nshunt_gain = \"-1 1/K\"\ntime_constant = \"90 s\"\n"
                         "civd = { threshold = \"" + degC(skin + 1.0) + "\", width = \"2 K\", time_constant = \"200 s\", stages = 3 }\n"
                         "[control.local.body]\nsegments = \"trunk\"\nsignal = \"mean_skin\"\nset_point = \"" +
                         degC(mean - 0.4) + "\"\ngain = \"1 1/K\"\n";
  std::string text = footCase("1", controls);
  text.replace(text.find("fixed_arterial_temperature"), std::string("fixed_arterial_temperature = \"37 degC\"").size(), "");
  auto body = bodyFromToml(text);
  const Network& n = body->network();
  // feet: skin, shunts, civd in three lag stages; body: skin (the trunk has no shunts)
  REQUIRE(n.controllers.size() == 6);
  // The chain: stage 2 reads stage 1's state, stage 3 stage 2's (state index = nodes + controller index).
  const Index stage1 = controllerIndex(n, "feet_foot_civd"), stage2 = controllerIndex(n, "feet_foot_civd_stage2"),
              stage3 = controllerIndex(n, "feet_foot_civd_stage3");
  CHECK(n.controllers[stage2].signal == std::vector<std::pair<Index, double>>{{n.nodes.size() + stage1, 1.0}});
  CHECK(n.controllers[stage3].signal == std::vector<std::pair<Index, double>>{{n.nodes.size() + stage2, 1.0}});
  for (auto mode : {NetworkSystem::Mode::Transient, NetworkSystem::Mode::Steady}) {
    NetworkSystem system(n, mode);
    auto y = makeState(system);
    const double states[] = {1.25, 0.35, 0.45, 0.5, 0.55, 1.3};
    for (Index k = 0; k < 6; ++k) y[system.nodeCount() + k] = states[k];
    for (Index i = system.nodeCount() + system.controlCount(); i < system.size(); ++i) y[i] = 1e3 * static_cast<double>(i);
    JacobianCheck c = checkJacobian(system, y, 0.0, 1050.0 * 3617.0 * body->totalBloodFlow());
    const bool transient = mode == NetworkSystem::Mode::Transient;
    std::printf("[local] Jacobian with local controllers and CIVD, %s, %zu states: max relative error %.2e, %d FD "
                "entries outside the pattern\n",
                transient ? "transient" : "steady", static_cast<std::size_t>(c.states), c.worstRelative, c.outsidePattern);
    CHECK(c.worstRelative <= 1e-6);
    CHECK(c.outsidePattern == 0);
    if (!transient) continue;
    const Index row = system.nodeCount() + controllerIndex(n, "feet_foot_civd");
    const SegmentMesh& foot = body->segments()[1];
    double area = 0.0;
    for (int iz = 0; iz < foot.nz; ++iz) area += n.faces[foot.lateralFace[static_cast<std::size_t>(iz)]].area;
    // The skin signal is the outermost tissue layer's volume mean at each axial cell: the outermost cell's share.
    double layerVolume = 0.0;
    for (int ir = 0; ir < foot.nr; ++ir)
      if (foot.layer[static_cast<std::size_t>(ir)] == foot.layer[static_cast<std::size_t>(foot.skinCell)])
        layerVolume += foot.volume[static_cast<std::size_t>(2 * foot.nr + ir)];
    const double w = n.faces[foot.lateralFace[2]].area / area *
                     foot.volume[static_cast<std::size_t>(2 * foot.nr + foot.skinCell)] / layerVolume;
    const double tau = 200.0 / 3.0;  // each of the three stages
    const double e1 = std::abs(jacobianEntry(system.pattern(), c.values, row, row) / (-1.0 / tau) - 1.0);
    const double e2 = std::abs(jacobianEntry(system.pattern(), c.values, row, foot.node(2, foot.skinCell)) /
                                   (-0.5 * w / tau) - 1.0);
    // A later stage: d(du3/dt)/du2 = 1/tau.
    const double e3 = std::abs(jacobianEntry(system.pattern(), c.values, system.nodeCount() + stage3,
                                             system.nodeCount() + stage2) / (1.0 / tau) - 1.0);
    CHECK(e3 <= 1e-12);
    std::printf("[local] CIVD Jacobian entries by hand: dc/dc %.1e, dc/dT_skin %.1e\n", e1, e2);
    CHECK(e1 <= 1e-12);
    CHECK(e2 <= 1e-12);
  }
}

TEST_CASE("CIVD opens the shunts when and only when the local skin falls below its threshold", "[control][local]") {
  // Lewis 1930 (Heart 15:177-208): fingers in ice water first cool, then rewarm as their vessels dilate. Here:
  // feet with their shunts closed by a body-wide core controller; CIVD threshold 12 degC. In 20 degC water the
  // foot's skin never reaches 12 degC and the CIVD state stays exactly 0 (its target is 0, a first-order lag from 0
  // does not move); in 2 degC water it opens only after the skin has fallen below 12 degC, and the foot ends
  // warmer than without CIVD.
  const std::string wide = "[control.vasomotor]\nsignal = \"core\"\nset_point = \"37.5 degC\"\n";
  const std::string civd = "[control.local.feet]\nsegments = \"foot\"\nsignal = \"core\"\nset_point = \"37.5 degC\"\n"
                           "civd = { threshold = \"12 degC\", width = \"1 K\", opening = 1, time_constant = \"3 min\" }\n";
  const double threshold = 12.0 + kZero;
  {
    auto body = bodyFromToml(footCase("1", wide + civd, "20 degC"));
    auto trace = traceFoot(*body);
    const Index k = controllerIndex(body->network(), "feet_foot_civd");
    double lowest = 1e9, most = 0.0;
    for (std::size_t i = 0; i < trace.time.size(); ++i) {
      lowest = std::min(lowest, trace.skin[i]);
      most = std::max(most, trace.controls[i][k]);
    }
    std::printf("[local] CIVD, water 20 degC: lowest foot skin %.3f degC, largest CIVD state %.3g\n", lowest - kZero, most);
    REQUIRE(lowest > threshold);
    CHECK(most == 0.0);
  }
  auto withCivd = bodyFromToml(footCase("1", wide + civd));
  auto trace = traceFoot(*withCivd);
  auto without = traceFoot(*bodyFromToml(footCase("1", wide + "[control.local.feet]\nsegments = \"foot\"\nsignal = "
                                                                  "\"core\"\nset_point = \"37.5 degC\"\n")));
  const Index k = controllerIndex(withCivd->network(), "feet_foot_civd");
  std::size_t firstCold = trace.time.size(), firstOpen = trace.time.size();
  double most = 0.0;
  for (std::size_t i = 0; i < trace.time.size(); ++i) {
    if (firstCold == trace.time.size() && trace.skin[i] < threshold) firstCold = i;
    if (firstOpen == trace.time.size() && trace.controls[i][k] > 0.0) firstOpen = i;
    most = std::max(most, trace.controls[i][k]);
  }
  REQUIRE(firstCold < trace.time.size());
  std::printf("[local] CIVD, water 2 degC: skin below 12 degC first at output %.0f s, CIVD open first at %.0f s, largest "
              "state %.3f; foot skin after 3 h %.3f degC with CIVD, %.3f degC without\n",
              trace.time[firstCold], trace.time[std::min(firstOpen, trace.time.size() - 1)], most,
              trace.skin.back() - kZero, without.skin.back() - kZero);
  // Open only after the skin was below the threshold (the output before the first cold one may already see it
  // open when the crossing falls between outputs).
  CHECK(firstOpen + 1 >= firstCold);
  CHECK(firstOpen < trace.time.size());
  CHECK(most > 0.1);
  CHECK(trace.skin.back() > without.skin.back() + 1.0);
  // Without CIVD the two runs agree until the skin first reaches the threshold (the extra state only changes the
  // integrator's error norm).
  for (std::size_t i = 0; i + 1 < firstCold; ++i) CHECK(std::abs(trace.skin[i] - without.skin[i]) < 1e-4);
}

TEST_CASE("CIVD through a chain of lags hunts - through one lag it settles", "[control][local]") {
  // Lewis 1930 (Heart 15:177-208): a finger in ice water cools, rewarms as its vessels dilate, cools again, in
  // repeated waves (the "hunting" reaction) of several minutes (from memory). A loop skin -> opening -> warm blood
  // -> skin with one short lag and the tissue's own capacities settles; a delay in the opening (three lag stages,
  // a gamma-distributed delay: MacDonald 1978) makes it oscillate (a Hopf bifurcation of a delayed negative
  // feedback loop; common practice, no source). Feet in 2 degC water, shunts closed by a body-wide core signal.
  const std::string wide = "[control.vasomotor]\nsignal = \"core\"\nset_point = \"37.5 degC\"\n";
  auto civd = [](int stages) {
    return "[control.local.feet]\nsegments = \"foot\"\nsignal = \"core\"\nset_point = \"37.5 degC\"\n"
           "civd = { threshold = \"12 degC\", width = \"1 K\", opening = 1, time_constant = \"5 min\", stages = " +
           std::to_string(stages) + " }\n";
  };
  for (int stages : {1, 3}) {
    std::string text = footCase("1", wide + civd(stages));
    text.replace(text.find("output_interval = \"5 min\""), std::string("output_interval = \"5 min\"").size(),
                 "output_interval = \"30 s\"");
    auto body = bodyFromToml(text);
    auto trace = traceFoot(*body);
    // The last 90 minutes: extremes, and the times of the skin's local maxima.
    double low = 1e9, high = -1e9;
    std::vector<double> peaks;
    for (std::size_t i = 1; i + 1 < trace.time.size(); ++i) {
      if (trace.time[i] < 5400.0) continue;
      low = std::min(low, trace.skin[i]);
      high = std::max(high, trace.skin[i]);
      if (trace.skin[i] > trace.skin[i - 1] && trace.skin[i] >= trace.skin[i + 1]) peaks.push_back(trace.time[i]);
    }
    const double period = peaks.size() > 1 ? (peaks.back() - peaks.front()) / static_cast<double>(peaks.size() - 1) : 0.0;
    std::printf("[local] CIVD with %d lag stage(s): foot skin over the last 90 min %.2f .. %.2f degC, %zu peaks, "
                "mean period %.1f min; energy balance %.1e\n",
                stages, low - kZero, high - kZero, peaks.size(), period / 60.0, trace.worstBalance);
    CHECK(trace.worstBalance < 1e-6);
    if (stages == 1) {
      CHECK(high - low < 0.05);  // settled
    } else {
      CHECK(high - low > 1.0);                 // sustained waves, not a decaying ripple
      CHECK(peaks.size() >= 3);
      CHECK(period > 300.0);                   // minutes, as Lewis's waves
      CHECK(period < 1800.0);
    }
  }
}

TEST_CASE("Bad local controller input names the file, line and key path", "[control][local][case]") {
  auto expect = [](const std::string& text, const std::string& where, const std::string& what) {
    std::string message = caseErrorMessage(text);
    INFO(message);
    CHECK(message.find("test-case:") == 0);
    CHECK(message.find(where) != std::string::npos);
    CHECK(message.find(what) != std::string::npos);
  };
  const std::string base = footCase("1", "");
  expect(base + "[control.local.feet]\nsegments = \"foot, paw\"\n", "control.local.feet.segments",
         "no segment named \"paw\"");
  expect(base + "[control.local.feet]\nsegments = \"foot\"\nsignal = \"skin\"\n", "control.local.feet.signal",
         "is not one of: core, mean_skin, local_skin");
  CHECK(caseErrorMessage(base + "[control.local.feet]\nsegments = \"trunk\"\n").empty());
  std::string noSkin = base;
  noSkin.replace(noSkin.find("{ tissue = \"skin\", thickness = \"0.2 cm\", cells = 2 }"),
                 std::string("{ tissue = \"skin\", thickness = \"0.2 cm\", cells = 2 }").size(),
                 "{ tissue = \"fat\", thickness = \"0.2 cm\", cells = 2 }");
  noSkin.replace(noSkin.find("vessels = { shunt_flow_max = \"3 mL/min\" }"),
                 std::string("vessels = { shunt_flow_max = \"3 mL/min\" }").size(), "");
  expect(noSkin + "[control.local.feet]\nsegments = \"foot\"\n", "control.local.feet.segments",
         "segment \"foot\" has no layer with role skin");
  expect(base + "[control.local.a]\nsegments = \"foot\"\n[control.local.b]\nsegments = \"trunk, foot\"\n",
         "control.local.b.segments", "already controlled by [control.local.a]");
  expect(base + "[control.local.feet]\nsegments = \"trunk\"\ncivd = {}\n", "control.local.feet.civd",
         "segment \"trunk\" has no shunts to open");
  expect(base + "[control.local.feet]\nsegments = \"foot\"\ncivd = { width = \"2 degC\" }\n",
         "control.local.feet.civd.width", "give the width in K");
  expect(base + "[control.local.feet]\n", "control.local.feet.segments", "required key \"segments\" is missing");
  expect(base + "[control.local.shivering]\nsegments = \"foot\"\n", "control.local.shivering",
         "may not be named \"shivering\"");
  expect(base + "[control.local.feet]\nsegments = \"foot\"\ngain = \"-200 1/K\"\n", "control.local.feet.gain", "");
  expect(base + "[control.local.feet]\nsegments = \"foot\"\n[[events]]\nat = \"10 min\"\ncontrol = { fet = { enabled = "
                "\"off\" } }\n",
         "events.", "unknown controller \"fet\" (the case has: vasomotor, shivering, panting, feet)");
  // Every message carries a line number: "test-case:LINE:COLUMN: key path: ...".
  std::string m = caseErrorMessage(base + "[control.local.feet]\nsegments = \"foot, paw\"\n");
  CHECK(m.find_first_of("0123456789") == std::string("test-case:").size());
  // An event switches a local controller off by its name.
  auto body = bodyFromToml(base + localFloor("local_skin", -10.0) +
                           "[[events]]\nat = \"1 h\"\ncontrol = { feet = { enabled = \"off\" } }\n");
  auto trace = traceFoot(*body);
  const Index k = controllerIndex(body->network(), "feet_foot_shunts");
  std::printf("[local] event switches feet off at 1 h: shunt state %.3f at 1 h, %.3f at 3 h (off value 1)\n",
              trace.controls[12][k], trace.controls.back()[k]);
  CHECK(std::abs(trace.controls.back()[k] - 1.0) < 1e-3);
}
