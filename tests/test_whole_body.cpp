// Whole-body verification (models/body.cpp): a segment tree with counts, attachment conduction, the central blood
// pool, arterial / deep-venous / superficial-venous streams with countercurrent exchange and shunts, and metabolic
// scaling; checked against conservation, the counterflow exchanger, the pin fin and Kleiber's law.
#include <catch2/catch.hpp>

#include <algorithm>
#include <cmath>
#include <cstdio>
#include <numbers>
#include <string>
#include <vector>

#include "test_support_body.hpp"

using namespace thermorph;
using namespace thermorph::testing;

namespace {

using std::numbers::pi;

constexpr double rhoBlood = 1050.0, cBlood = 3617.0;  // schema defaults (case_schema.cpp) [kg/m3], [J/(kg K)]

//! Geometry of the three-level test body, shared by the case text and the hand calculations [m].
struct TestBody {
  double trunkLength = 0.3, trunkFlesh = 0.04, trunkSkin = 0.005, trunkCoat = 0.01;
  double legLength = 0.2, legProximal = 0.015, legDistal = 0.008, legSkin = 0.002;
  double toeLength = 0.03, toeFlesh = 0.003, toeSkin = 0.001;
  double fleshPerfusion = 0.004, skinPerfusion = 0.008;  // [1/s]
  double fleshHeat = 0.0, skinHeat = 0.0, q10 = 1.0;     // [W/m3], [1]
  double legShuntMax = 3e-6 / 60.0, legShunt = 0.5, legSkinMultiplier = 1.5;  // [m3/s], [1], [1]
  double trunkSuperficial = 0.2, legSuperficial = 0.3, legCountercurrent = 0.05;  // [1], [1], [W/K]
  std::string environment = "[environment]\ntemperature = \"0 degC\"\nconvection = \"0 W/(m2 K)\"\n";
  std::string ends = "insulated";
  std::string extra;  //!< appended TOML (run, body, circulation tables)

  std::string toml() const {
    return extra + "[tissues.flesh]\nconductivity = 0.5\ndensity = 1050\nspecific_heat = 3600\nmetabolic_heat = " +
           num(fleshHeat) + "\nperfusion = " + num(fleshPerfusion) + "\nq10 = " + num(q10) +
           "\n[tissues.skin]\nconductivity = 0.37\ndensity = 1109\nspecific_heat = 3391\nmetabolic_heat = " +
           num(skinHeat) + "\nperfusion = " + num(skinPerfusion) + "\nq10 = " + num(q10) + R"(
[[segments]]
name = "trunk"
shape = "cylinder"
length = )" + num(trunkLength) + R"(
axial_cells = 4
layers = [{ tissue = "flesh", thickness = )" + num(trunkFlesh) + R"(, cells = 3 }, { tissue = "skin", thickness = )" +
           num(trunkSkin) + R"(, cells = 1 }]
coat = { material = "fur", thickness = )" + num(trunkCoat) + R"(, cells = 2 }
surface = { ends = ")" + ends + R"(" }
vasomotor = { superficial_return = )" + num(trunkSuperficial) + R"( }
[[segments]]
name = "legs"
parent = "trunk"
count = 2
attach_position = 0.8
shape = "cone"
length = )" + num(legLength) + R"(
radius_proximal = )" + num(legProximal) + R"(
radius_distal = )" + num(legDistal) + R"(
axial_cells = 4
layers = [{ tissue = "flesh", cells = 2 }, { tissue = "skin", thickness = )" + num(legSkin) + R"(, cells = 1 }]
surface = { ends = ")" + ends + R"(" }
vessels = { countercurrent_conductance = )" + num(legCountercurrent) + ", shunt_flow_max = " + num(legShuntMax) + R"( }
vasomotor = { shunt = )" + num(legShunt) + ", superficial_return = " + num(legSuperficial) +
           ", skin_perfusion = " + num(legSkinMultiplier) + R"( }
[[segments]]
name = "toes"
parent = "legs"
count = 2
attach_position = 1.0
shape = "cylinder"
length = )" + num(toeLength) + R"(
axial_cells = 2
layers = [{ tissue = "flesh", thickness = )" + num(toeFlesh) + R"(, cells = 1 }, { tissue = "skin", thickness = )" +
           num(toeSkin) + R"(, cells = 1 }]
surface = { ends = ")" + ends + R"(" }
)" + environment;
  }

  // Tissue volumes of one copy by hand [m3]: cylinders pi r^2 L; the cone's layers scale with its radius, so each
  // layer boundary is a frustum pi L/3 (a0^2 + a0 a1 + a1^2).
  static double frustum(double L, double a0, double a1) { return pi * L / 3.0 * (a0 * a0 + a0 * a1 + a1 * a1); }
  double trunkFleshVolume() const { return pi * trunkFlesh * trunkFlesh * trunkLength; }
  double trunkSkinVolume() const {
    double R = trunkFlesh + trunkSkin;
    return pi * R * R * trunkLength - trunkFleshVolume();
  }
  double legFleshVolume() const {
    double a0 = legProximal - legSkin;
    return frustum(legLength, a0, a0 * legDistal / legProximal);
  }
  double legSkinVolume() const { return frustum(legLength, legProximal, legDistal) - legFleshVolume(); }
  double toeFleshVolume() const { return pi * toeFlesh * toeFlesh * toeLength; }
  double toeSkinVolume() const {
    double R = toeFlesh + toeSkin;
    return pi * R * R * toeLength - toeFleshVolume();
  }
  //! Weighted tissue volume of the body (trunk 1, legs 2, toes 4 copies) [m3].
  double tissueVolume() const {
    return trunkFleshVolume() + trunkSkinVolume() + 2.0 * (legFleshVolume() + legSkinVolume()) +
           4.0 * (toeFleshVolume() + toeSkinVolume());
  }
};

//! A hand-made non-uniform state: 297-313 K by node index, legs and toes 6 K warmer, energies zero [K, J].
std::vector<double> unevenState(const Body& body, const NetworkSystem& system) {
  std::vector<double> y(system.size(), 0.0);
  const Network& n = body.network();
  for (Index i = 0; i < system.nodeCount(); ++i) {
    const std::string& group = n.groups[n.nodes[i].group];
    y[i] = 305.0 + 8.0 * std::sin(1.7 * static_cast<double>(i) + 0.3) + (group == "legs" || group == "toes" ? 6.0 : 0.0);
  }
  return y;
}

}  // namespace

TEST_CASE("Insulated body without metabolism keeps its heat and relaxes to the capacity-weighted mean",
          "[wholebody]") {
  // First law (common practice, no source): with no surface exchange, no metabolism and blood that only moves
  // heat inside the body, sum w C T is invariant and every node relaxes to sum(w C T0) / sum(w C), w the copies a
  // node stands for (legs x2, toes x4). Criteria: heat content constant to 1e-9 relative; final temperatures
  // within 1e-6 K of that mean.
  TestBody spec;
  auto body = bodyFromToml(spec.toml());
  REQUIRE(body->poolNode().has_value());
  REQUIRE(body->segments()[segmentIndex(*body, "toes")].weight == 4.0);
  NetworkSystem system(body->network(), NetworkSystem::Mode::Transient);
  std::vector<double> y0 = unevenState(*body, system);
  const double content0 = system.storedHeat(y0);
  const double mean = capacityWeightedMean(body->network(), y0);
  // The initial imbalance the circulation and conduction must redistribute: sum w C |T0 - mean| [J].
  double redistributable = 0.0, unweightedSum = 0.0, unweightedCapacity = 0.0;
  for (Index i = 0; i < system.nodeCount(); ++i) {
    const double C = body->network().nodes[i].capacity;
    redistributable += nodeWeight(body->network(), i) * C * std::abs(y0[i] - mean);
    unweightedSum += C * y0[i];
    unweightedCapacity += C;
  }
  const double unweightedMean = unweightedSum / unweightedCapacity;

  const std::vector<double> times = {100.0, 1e3, 1e4, 4e4};
  auto states = integrateFrom(system, y0, times, 1e-10, 1e-10);
  double worstContent = 0.0;
  for (const auto& y : states) worstContent = std::max(worstContent, std::abs(system.storedHeat(y) / content0 - 1.0));
  double worstDeviation = 0.0;
  for (Index i = 0; i < system.nodeCount(); ++i) worstDeviation = std::max(worstDeviation, std::abs(states.back()[i] - mean));
  const double contentChange = std::abs(system.storedHeat(states.back()) - content0);
  std::printf("[wholebody] insulated body, %zu nodes: heat content drift %.2e relative (%.2e of the %.3g J "
              "redistributed); relaxed to %.6f K, worst node %.2e K off (unweighted mean would be %.4f K)\n",
              static_cast<std::size_t>(system.nodeCount()), worstContent, contentChange / redistributable,
              redistributable, mean, worstDeviation, unweightedMean);
  CHECK(worstContent <= 1e-9);
  CHECK(worstDeviation <= 1e-6);
  CHECK(std::abs(unweightedMean - mean) > 0.1);  // the weighting matters: the check can tell
}

TEST_CASE("Insulated body with metabolism stores exactly its metabolic heat", "[wholebody]") {
  // First law (common practice, no source): with Q10 = 1 and no surface exchange, stored heat rises at exactly
  // M = sum over copies of q V, computed here from the case geometry. Criteria: stored change and metabolic
  // energy within 1e-6 of M t; energy-balance error <= 1e-6 of the throughput; the blood channel sums to zero over
  // the body and the pool (it only moves heat), within 1e-9 of its gross flow.
  TestBody spec;
  spec.fleshHeat = 1000.0;
  spec.skinHeat = 400.0;
  spec.extra = "[run]\nduration = 3600\noutput_interval = 600\ninitial_temperature = \"37 degC\"\n";
  auto body = bodyFromToml(spec.toml());
  const double M = spec.fleshHeat * (spec.trunkFleshVolume() + 2.0 * spec.legFleshVolume() + 4.0 * spec.toeFleshVolume()) +
                   spec.skinHeat * (spec.trunkSkinVolume() + 2.0 * spec.legSkinVolume() + 4.0 * spec.toeSkinVolume());
  const double duration = 3600.0;
  RunSummary s = runTransient(*body, silentRun());
  REQUIRE(s.complete);
  const Network& n = body->network();
  const Index metabolism = channelIndex(n, "metabolism"), blood = channelIndex(n, "blood");
  const double eStored = std::abs(s.storedChange / (M * duration) - 1.0);
  const double eChannel = std::abs(s.channelEnergy[metabolism] / (M * duration) - 1.0);
  const double eBasal = std::abs(body->basalMetabolicRate() / M - 1.0);
  const double balance = std::abs(s.energyBalanceError) / s.throughput;
  double bloodGross = 0.0;
  for (Index g = 0; g < n.groups.size(); ++g) bloodGross += n.groupWeights[g] * std::abs(s.flows[g * n.channels.size() + blood]);
  const double bloodNet = bodyChannelTotal(n, s.flows, blood);
  std::printf("[wholebody] insulated body with M = %.6f W: stored-heat error %.2e, metabolic-energy error %.2e, "
              "basal-rate error %.2e, balance error %.2e of throughput; blood channel net %.2e W of %.3g W gross\n",
              M, eStored, eChannel, eBasal, balance, bloodNet, bloodGross);
  CHECK(eStored <= 1e-6);
  CHECK(eChannel <= 1e-6);
  CHECK(eBasal <= 1e-12);
  CHECK(balance <= 1e-6);
  CHECK(bloodGross > 1e-3);  // blood does carry heat between segments at the end of the run
  CHECK(std::abs(bloodNet) <= 1e-9 * bloodGross);
}

namespace {

//! A leg arranged as a counterflow exchanger: `cells` axial cells of unperfused, insulated tissue carrying an
//! artery and a deep vein with countercurrent conductance G; a small perfused foot at its distal end, cooled hard,
//! returns the share 1 - `superficial` of its blood by the deep vein (the rest by superficial veins that exchange
//! no heat). Arterial supply pinned at 37 degC. Capacity rates: artery C_a = rho c Q, deep vein (1 - superficial) C_a.
std::string exchangerLeg(double G, int cells, double superficial = 0.0) {
  return R"(
[circulation]
fixed_arterial_temperature = "37 degC"
[tissues.inert]
conductivity = 0.5
density = 1000
specific_heat = 4000
metabolic_heat = 0
perfusion = 0
q10 = 1
[tissues.perfused]
conductivity = 0.5
density = 1000
specific_heat = 4000
metabolic_heat = 0
perfusion = 0.01
q10 = 1
[[segments]]
name = "leg"
shape = "cylinder"
length = 0.4
axial_cells = )" + std::to_string(cells) + R"(
layers = [{ tissue = "inert", thickness = 0.01, cells = 1 }]
surface = { ends = "insulated", convection = 0 }
vessels = { countercurrent_conductance = )" + num(G) + R"(, superficial_conductance = 0 }
[[segments]]
name = "foot"
parent = "leg"
attach_position = 1.0
shape = "cylinder"
length = 0.05
axial_cells = 2
layers = [{ tissue = "perfused", thickness = 0.01, cells = 2 }]
surface = { ends = "exposed", convection = 1e4 }
vasomotor = { superficial_return = )" + num(superficial) + R"( }
[environment]
temperature = "0 degC"
)";
}

//! Counterflow effectiveness (Incropera et al. 2007, Table 11.3, counterflow: epsilon = [1 - exp(-NTU (1 - C_r))] /
//! [1 - C_r exp(-NTU (1 - C_r))] for C_r < 1, epsilon = NTU / (1 + NTU) for C_r = 1, eq. 11.35; equation numbers
//! from memory), NTU = UA / C_min, C_r = C_min / C_max.
double counterflowEffectiveness(double ntu, double cr) {
  if (cr == 1.0) return ntu / (1.0 + ntu);
  const double e = std::exp(-ntu * (1.0 - cr));
  return (1.0 - e) / (1.0 - cr * e);
}

}  // namespace

TEST_CASE("Countercurrent exchange converges to the counterflow effectiveness at second order", "[wholebody][exchanger]") {
  // The leg of exchangerLeg against the effectiveness-NTU relations of a counterflow exchanger (Incropera et al.
  // 2007, Table 11.3; counterflowEffectiveness above), balanced (C_r = 1) and unbalanced (C_r = 0.5: half the
  // foot's blood returns superficially, so the deep vein is C_min), NTU 0.3-14 (14: the wading bird's lower leg).
  // What a cooled appendage loses is the heat the exchanger lets through, 1 - epsilon of the largest possible:
  // its relative error is checked. Criterion (common practice, no source): observed order
  // p = log2(e_N / e_2N) of 2 +- 0.3 at N = 20 / 40 / 80 cells (or errors below 1e-6: exact), and within 1 % at
  // 80 cells. Both sides of the exchanger carry the same heat (first law, to 1e-9). This replaces a check of the
  // old first-order cells (exchange between the outlet temperatures; leak error ~ NTU^2 / N).
  const double Q = 0.01 * pi * 0.01 * 0.01 * 0.05;  // foot perfusion omega V [m3/s]
  const double Ca = rhoBlood * cBlood * Q;           // artery capacity rate [W/K]
  const double Tin = *bodyFromToml(exchangerLeg(1.0, 1))->spec().circulation.fixedArterialTemperature;  // 37 degC
  struct Case {
    double ntu, cr;
  };
  for (Case k : {Case{0.3, 1.0}, Case{1.0, 1.0}, Case{3.0, 1.0}, Case{14.0, 1.0}, Case{1.0, 0.5}, Case{3.0, 0.5},
                 Case{14.0, 0.5}}) {
    const double Cv = k.cr * Ca, Cmin = Cv;
    const double exact = counterflowEffectiveness(k.ntu, k.cr);
    std::vector<double> errors;
    for (int cells : {20, 40, 80}) {
      auto body = bodyFromToml(exchangerLeg(k.ntu * Cmin, cells, 1.0 - k.cr));
      const SegmentMesh& leg = body->segments()[segmentIndex(*body, "leg")];
      const SegmentMesh& foot = body->segments()[segmentIndex(*body, "foot")];
      REQUIRE(leg.arterial.size() == static_cast<std::size_t>(cells));
      REQUIRE(std::abs(leg.bloodFlow / Q - 1.0) < 1e-12);
      RunSummary s = runSteady(*body, silentRun());
      REQUIRE(s.complete);
      const auto& T = s.finalState;
      const double venousIn = T[foot.venous.front()];
      const double qHot = Ca * (Tin - T[leg.arterial.back()]);
      const double qCold = Cv * (T[leg.venous.front()] - venousIn);
      const double epsilon = qHot / (Cmin * (Tin - venousIn));
      const double error = std::abs((1.0 - epsilon) / (1.0 - exact) - 1.0);
      errors.push_back(error);
      std::printf("[exchanger] NTU %5.2f C_r %.1f, %3d cells: epsilon %.7f (exact %.7f), leak 1 - epsilon error "
                  "%.3e (T_v,in %.2f degC)\n",
                  k.ntu, k.cr, cells, epsilon, exact, error, venousIn - 273.15);
      CHECK(std::abs(qCold / qHot - 1.0) <= 1e-9);
      CHECK(Tin - venousIn > 10.0);  // the foot does return cold blood
    }
    for (std::size_t i = 0; i + 1 < errors.size(); ++i) {
      const double p = std::log2(errors[i] / errors[i + 1]);
      std::printf("[exchanger] NTU %5.2f C_r %.1f: observed order %.2f\n", k.ntu, k.cr, p);
      if (errors[i] > 1e-6) {
        CHECK(p >= 1.7);
        CHECK(p <= 2.3);
      }
    }
    CHECK(errors.back() <= 0.01);
  }
}

TEST_CASE("A perfused, cooled limb with an exchanger converges at second order in its axial cells",
          "[wholebody][exchanger]") {
  // A leg-like fin: a perfused cylinder (its blood drawn all along it, so the streams are unbalanced and vary
  // along the segment) in a cold bath (h 500 W/(m2 K), 0 degC), arterial supply pinned at 37 degC, exchanger NTU
  // 10 on the whole flow, insulated ends. What it loses is what the blood brings (the `blood` channel at the
  // steady state). Reference: the same limb on 1280 axial cells (a fine-grid solution; common practice, no
  // source). Criterion: observed order p = log2(e_N / e_2N) >= 1.7 at N = 20 / 40 / 80, and within 0.2 % at 80.
  auto limb = [](int cells) {
    const double Q = 0.002 * pi * 0.01 * 0.01 * 0.3, C = rhoBlood * cBlood * Q;
    return perfusedExchangerLimb(10.0 * C, "axial_cells = " + std::to_string(cells));
  };
  auto loss = [&](int cells) {
    auto body = bodyFromToml(limb(cells));
    RunSummary s = runSteady(*body, silentRun());
    REQUIRE(s.complete);
    const Network& n = body->network();
    return s.flows[segmentIndex(*body, "limb") * n.channels.size() + channelIndex(n, "blood")];
  };
  const double reference = loss(1280);
  std::vector<double> errors;
  for (int cells : {20, 40, 80}) {
    const double q = loss(cells);
    errors.push_back(std::abs(q / reference - 1.0));
    std::printf("[exchanger] limb, %3d cells: blood brings %.6f W (1280 cells: %.6f W), error %.3e\n", cells, q,
                reference, errors.back());
  }
  for (std::size_t i = 0; i + 1 < errors.size(); ++i) {
    const double p = std::log2(errors[i] / errors[i + 1]);
    std::printf("[exchanger] limb: observed order %.2f\n", p);
    CHECK(p >= 1.7);
  }
  CHECK(errors.back() <= 2e-3);
  CHECK(reference > 0.1);  // the limb does lose heat through its blood
}

namespace {

//! A thin copper pin (D 5 mm, L 50 mm) on a large sphere whose single cell is clamped at `base` by very high
//! perfusion from a pinned arterial supply; fixed h on the pin and its tip, 20 degC air.
std::string pinFin(int axialCells, double base) {
  return R"(
[circulation]
fixed_arterial_temperature = )" + num(base) + R"(
[tissues.clamp]
conductivity = 0.5
density = 1000
specific_heat = 4000
metabolic_heat = 0
perfusion = 1
q10 = 1
[tissues.copper]
conductivity = 398
density = 8933
specific_heat = 385
metabolic_heat = 0
perfusion = 0
q10 = 1
[[segments]]
name = "reservoir"
shape = "sphere"
layers = [{ tissue = "clamp", thickness = 0.1, cells = 1 }]
surface = { convection = 0 }
[[segments]]
name = "pin"
parent = "reservoir"
shape = "cylinder"
length = 0.05
axial_cells = )" + std::to_string(axialCells) + R"(
layers = [{ tissue = "copper", thickness = 0.0025, cells = 3 }]
surface = { ends = "exposed", convection = 100 }
[environment]
temperature = "20 degC"
)";
}

}  // namespace

TEST_CASE("A conducting appendage reproduces the pin fin with a convective tip", "[wholebody]") {
  // Pin fin with convective tip (Incropera et al., Table 3.4, eqs. 3.72/3.77): m^2 = hP/(k A_c),
  // M = sqrt(h P k A_c) theta_b, q = M [sinh mL + (h/mk) cosh mL] / [cosh mL + (h/mk) sinh mL]. Incropera's
  // example values (docs/references.md): D 5 mm, L 50 mm, k 398, h 100, theta_b 75 K -> 5.160 W. The pin's heat flow is
  // its `conduction` channel (what enters through the attachment). Criterion: within 1 % at 100 axial cells (the
  // 1-D fin neglects the radial gradient; Bi = h r / k = 6e-4, which leaves a floor near 1e-4). Convergence:
  // successive differences q(2N) - q(N) fall by about four per halving (second order, common practice).
  const double D = 0.005, L = 0.05, k = 398.0, h = 100.0, Tair = 293.15, base = Tair + 75.0;
  auto finRate = [&](double thetaB) {
    const double P = pi * D, A = pi * D * D / 4.0, m = std::sqrt(h * P / (k * A)), ratio = h / (m * k);
    return std::sqrt(h * P * k * A) * thetaB * (std::sinh(m * L) + ratio * std::cosh(m * L)) /
           (std::cosh(m * L) + ratio * std::sinh(m * L));
  };
  CHECK(std::abs(finRate(75.0) - 5.160) <= 0.0005);  // Incropera's worked value, 5.160 W (docs/references.md)

  std::vector<double> rates;
  for (int cells : {5, 10, 20, 100}) {
    auto body = bodyFromToml(pinFin(cells, base));
    RunSummary s = runSteady(*body, silentRun());
    REQUIRE(s.complete);
    const Network& n = body->network();
    const Index pin = segmentIndex(*body, "pin"), reservoir = segmentIndex(*body, "reservoir");
    const double q = s.flows[pin * n.channels.size() + channelIndex(n, "conduction")];
    const double lost = -s.flows[pin * n.channels.size() + channelIndex(n, "convection")];
    const double thetaB = s.finalState[body->segments()[reservoir].node(0, 0)] - Tair;
    const double reference = finRate(thetaB);
    const double error = std::abs(q / reference - 1.0);
    rates.push_back(q);
    std::printf("[wholebody] pin fin, %3d axial cells: q %.5f W (convection %.5f W), theta_b %.5f K, reference "
                "%.5f W, error %.2e\n",
                cells, q, lost, thetaB, reference, error);
    CHECK(std::abs(lost / q - 1.0) <= 1e-8);  // steady: what enters by conduction leaves by convection
    CHECK(std::abs(thetaB - 75.0) <= 1e-3);    // the clamp holds the base
    if (cells == 100) CHECK(error <= 0.01);
  }
  const double order = observedOrder(rates[1] - rates[0], rates[2] - rates[1]);
  const double extrapolated = rates[2] + (rates[2] - rates[1]) / 3.0;  // Richardson, second order
  std::printf("[wholebody] pin fin convergence: q(10)-q(5) = %.2e W, q(20)-q(10) = %.2e W, observed order %.2f; "
              "Richardson extrapolation %.5f W\n",
              rates[1] - rates[0], rates[2] - rates[1], order, extrapolated);
  CHECK(std::abs(order - 2.0) <= 0.1);
}

TEST_CASE("Kleiber basal rate of a 10 kg body at the Q10 reference temperature", "[wholebody]") {
  // Kleiber (1932, Hilgardia 6:315; 1961): basal rate 70 M^0.75 kcal/day = 3.39 W x M^0.75 (1 kcal = 4184 J,
  // docs/references.md). With basal_metabolic_rate = "kleiber" the tissue rates are scaled so that the metabolism
  // channel at the Q10 reference temperature is that rate. Criteria: 3.39 x 10^0.75 W within 0.1 % (3.39 is
  // rounded) and 70 kcal/day exactly (1e-12); Q10 = 2 doubles it 10 K above the reference (Q10 definition,
  // docs/references.md); activity multiplies it.
  const std::string bodyText = R"(
[run]
initial_temperature = "36 degC"
[body]
mass = "10 kg"
basal_metabolic_rate = "kleiber"
q10_reference = "36 degC"
[[segments]]
name = "trunk"
shape = "cylinder"
length = "40 cm"
axial_cells = 3
layers = [{ tissue = "viscera", thickness = "5 cm", cells = 2 }, { tissue = "muscle", thickness = "3 cm", cells = 2 },
          { tissue = "skin", thickness = "0.3 cm", cells = 1 }]
[[segments]]
name = "legs"
parent = "trunk"
count = 2
shape = "cone"
length = "25 cm"
radius_proximal = "3 cm"
radius_distal = "1.5 cm"
axial_cells = 3
layers = [{ tissue = "bone", cells = 1 }, { tissue = "muscle", thickness = "1.5 cm", cells = 2 },
          { tissue = "skin", thickness = "0.2 cm", cells = 1 }]
[environment]
temperature = "20 degC"
convection = 10
)";
  const double kleiber = 70.0 * 4184.0 / 86400.0 * std::pow(10.0, 0.75);  // [W]
  auto metabolismAt = [](const Body& body, double temperature) {
    NetworkSystem system(body.network(), NetworkSystem::Mode::Steady);
    const Network& n = body.network();
    std::vector<double> T(system.nodeCount(), temperature), flows(n.groups.size() * n.channels.size()),
        storage(n.groups.size()), faces(n.faces.size());
    system.groupFlows(0.0, T, flows, storage, faces);
    return bodyChannelTotal(n, flows, channelIndex(n, "metabolism"));
  };
  auto body = bodyFromToml(bodyText);
  const double Tref = 309.15;
  const double atReference = metabolismAt(*body, Tref);
  const double warmer = metabolismAt(*body, Tref + 10.0);
  std::string activeText = bodyText;
  activeText.replace(activeText.find("q10_reference"), 0, "activity = 1.5\n");
  auto activeBody = bodyFromToml(activeText);
  const double activeRate = metabolismAt(*activeBody, Tref);
  std::printf("[wholebody] Kleiber, 10 kg: basal %.5f W, metabolism channel at T_ref %.5f W, 3.39 x 10^0.75 = %.5f W "
              "(error %.1e); at T_ref + 10 K %.5f W (ratio %.6f); activity 1.5: %.5f W\n",
              body->basalMetabolicRate(), atReference, 3.39 * std::pow(10.0, 0.75),
              std::abs(atReference / (3.39 * std::pow(10.0, 0.75)) - 1.0), warmer, warmer / atReference, activeRate);
  CHECK(std::abs(body->basalMetabolicRate() / kleiber - 1.0) <= 1e-12);
  CHECK(std::abs(atReference / kleiber - 1.0) <= 1e-12);
  CHECK(std::abs(atReference / (3.39 * std::pow(10.0, 0.75)) - 1.0) <= 1e-3);
  CHECK(std::abs(warmer / atReference - 2.0) <= 1e-12);
  CHECK(std::abs(activeRate / (1.5 * kleiber) - 1.0) <= 1e-12);
  CHECK(std::abs(activeBody->basalMetabolicRate() / (1.5 * kleiber) - 1.0) <= 1e-12);
}

namespace {

//! Blood flows of the test body by hand, per copy [m3/s]: tissue perfusion omega V (skin of the legs times the
//! vasomotor multiplier), shunt = shunt_flow_max x open fraction, and what each segment draws with its children.
struct HandFlows {
  double trunkPerfusion, legPerfusion, toePerfusion, legShunt;
  double toeDraw, legDraw, total;      //!< arterial inflow of one copy, children included
  double legDeep, rootDeep, rootSuperficial;  //!< venous returns leaving a leg copy and the trunk
  explicit HandFlows(const TestBody& b) {
    trunkPerfusion = b.fleshPerfusion * b.trunkFleshVolume() + b.skinPerfusion * b.trunkSkinVolume();
    legPerfusion = b.fleshPerfusion * b.legFleshVolume() + b.legSkinMultiplier * b.skinPerfusion * b.legSkinVolume();
    toePerfusion = b.fleshPerfusion * b.toeFleshVolume() + b.skinPerfusion * b.toeSkinVolume();
    legShunt = b.legShuntMax * b.legShunt;
    toeDraw = toePerfusion;
    legDraw = legPerfusion + legShunt + 2.0 * toeDraw;
    total = trunkPerfusion + 2.0 * legDraw;
    // Toes return everything deep (no superficial share, no shunts); the shunts return superficially.
    legDeep = (1.0 - b.legSuperficial) * legPerfusion + 2.0 * toePerfusion;
    rootDeep = (1.0 - b.trunkSuperficial) * trunkPerfusion + 2.0 * legDeep;
    rootSuperficial = b.trunkSuperficial * trunkPerfusion + 2.0 * (b.legSuperficial * legPerfusion + legShunt);
  }
};

}  // namespace

TEST_CASE("Jacobian with the whole circulation matches central finite differences", "[wholebody][jacobian]") {
  // Reference: central differences of the right-hand side (common practice, no source), transient and steady.
  // The body has a pool, counts (legs x2, toes x4), countercurrent exchange, shunts, superficial return, Q10 = 2.5
  // metabolism and convecting surfaces. Criterion: every entry within 1e-6 of its row's largest entry, no FD entry
  // outside the pattern. Entries by hand (transient, rows scaled by 1/C): the pool receives rho c times the trunk's
  // deep and superficial returns and loses rho c Q_total on its diagonal; a leg's first arterial cell receives
  // rho c times 0.7 of the leg's draw from the trunk's arterial cell 3 and 0.3 from cell 2 (attach_position 0.8 of 4
  // cells, linear between cell centres); the trunk's deep vein in cell 3 receives 0.7 x 2 x the leg's deep return; a leg cell's artery sees its vein through G/N (upwind advection
  // and the countercurrent conductance as in the README, "A whole body").
  TestBody spec;
  spec.fleshHeat = 1000.0;
  spec.skinHeat = 400.0;
  spec.q10 = 2.5;
  spec.ends = "exposed";
  spec.environment = "[environment]\ntemperature = \"5 degC\"\nconvection = \"12 W/(m2 K)\"\n";
  auto body = bodyFromToml(spec.toml());
  REQUIRE(body->poolNode().has_value());
  for (auto mode : {NetworkSystem::Mode::Transient, NetworkSystem::Mode::Steady}) {
    NetworkSystem system(body->network(), mode);
    std::vector<double> y = unevenState(*body, system);
    for (Index i = system.nodeCount(); i < system.size(); ++i) y[i] = 1e3 * static_cast<double>(i);
    // The blood channel's row vanishes identically with a pool (blood only moves heat): judged against rho c Q.
    JacobianCheck c = checkJacobian(system, y, 0.0, rhoBlood * cBlood * body->totalBloodFlow());
    const char* modeName = mode == NetworkSystem::Mode::Transient ? "transient" : "steady";
    std::printf("[wholebody] Jacobian with circulation, %-9s %3zu states: max relative error %.2e, %d FD entries "
                "outside the pattern\n",
                modeName, static_cast<std::size_t>(c.states), c.worstRelative, c.outsidePattern);
    CHECK(c.worstRelative <= 1e-6);
    CHECK(c.outsidePattern == 0);
    if (mode != NetworkSystem::Mode::Transient) continue;

    const HandFlows flows(spec);
    const double rc = rhoBlood * cBlood;
    const Network& n = body->network();
    const SegmentMesh& trunk = body->segments()[segmentIndex(*body, "trunk")];
    const SegmentMesh& legs = body->segments()[segmentIndex(*body, "legs")];
    const Index pool = *body->poolNode();
    auto entry = [&](Index row, Index col) { return jacobianEntry(system.pattern(), c.values, row, col); };
    auto relative = [](double got, double want) { return std::abs(got / want - 1.0); };
    const double Cpool = n.nodes[pool].capacity;
    const double e1 = relative(entry(pool, trunk.venous[0]), rc * flows.rootDeep / Cpool);
    const double e2 = relative(entry(pool, trunk.superficial[0]), rc * flows.rootSuperficial / Cpool);
    const double e3 = relative(entry(pool, pool), -rc * flows.total / Cpool);
    // attach_position 0.8 of 4 cells lies 0.7 of the way from cell 2's centre (0.625) to cell 3's (0.875): the leg
    // draws 0.3 of its flow from cell 2 and 0.7 from cell 3, and returns it there in the same shares.
    const double e4 = relative(entry(legs.arterial[0], trunk.arterial[3]), 0.7 * rc * flows.legDraw / n.nodes[legs.arterial[0]].capacity);
    const double e5 = relative(entry(trunk.venous[3], legs.venous[0]), 0.7 * rc * 2.0 * flows.legDeep / n.nodes[trunk.venous[3]].capacity);
    const double e4b = relative(entry(legs.arterial[0], trunk.arterial[2]), 0.3 * rc * flows.legDraw / n.nodes[legs.arterial[0]].capacity);
    // The exchanger of cell 1 (of 4) is trapezoidal (Body::linkExchanger): the artery node exchanges G/4 with the
    // mean of the vein's outlet (node 1) and inlet (node 2), half of G/4 with each.
    const double e6 = relative(entry(legs.arterial[1], legs.venous[1]),
                               0.5 * spec.legCountercurrent / 4.0 / n.nodes[legs.arterial[1]].capacity);
    const double e6b = relative(entry(legs.arterial[1], legs.venous[2]),
                                0.5 * spec.legCountercurrent / 4.0 / n.nodes[legs.arterial[1]].capacity);
    std::printf("[wholebody] Jacobian entries by hand: pool<-deep %.1e, pool<-superficial %.1e, pool diagonal %.1e, "
                "leg artery<-trunk artery %.1e, trunk vein<-leg vein %.1e, countercurrent %.1e\n",
                e1, e2, e3, e4, e5, e6);
    CHECK(e1 <= 1e-12);
    CHECK(e2 <= 1e-12);
    CHECK(e3 <= 1e-12);
    CHECK(e4 <= 1e-12);
    CHECK(e5 <= 1e-12);
    CHECK(e4b <= 1e-12);
    CHECK(e6 <= 1e-12);
    CHECK(e6b <= 1e-12);
  }
}

TEST_CASE("Total arterial flow equals the sum over copies of perfusion and shunts", "[wholebody]") {
  // Flow bookkeeping (common practice, no source): what leaves the pool is sum over copies of omega V + shunt flow,
  // computed by hand from the case; each segment draws its own flow plus count x its children's. Independently of
  // Body's own check, weighted inflow equals outflow at every node of the advection network. A cardiac output
  // below the total flow is a warning, not an error (issue 3). Criteria: 1e-12 relative.
  TestBody spec;
  spec.extra = "[body]\ncardiac_output = \"1 mL/min\"\n";
  auto body = bodyFromToml(spec.toml());
  const HandFlows flows(spec);
  const SegmentMesh& trunk = body->segments()[segmentIndex(*body, "trunk")];
  const SegmentMesh& legs = body->segments()[segmentIndex(*body, "legs")];
  const SegmentMesh& toes = body->segments()[segmentIndex(*body, "toes")];
  auto relative = [](double got, double want) { return std::abs(got / want - 1.0); };
  std::printf("[wholebody] blood flow: total %.6g mL/min (by hand %.6g), legs %.4g, toes %.4g mL/min per copy\n",
              body->totalBloodFlow() * 6e7, flows.total * 6e7, legs.bloodFlow * 6e7, toes.bloodFlow * 6e7);
  CHECK(relative(body->totalBloodFlow(), flows.total) <= 1e-12);
  CHECK(relative(trunk.bloodFlow, flows.total) <= 1e-12);
  CHECK(relative(legs.bloodFlow, flows.legDraw) <= 1e-12);
  CHECK(relative(toes.bloodFlow, flows.toeDraw) <= 1e-12);
  CHECK(relative(legs.perfusionFlow, flows.legPerfusion) <= 1e-12);
  CHECK(relative(legs.shuntFlow, flows.legShunt) <= 1e-12);
  CHECK(trunk.shuntFlow == 0.0);

  const Network& n = body->network();
  // Flows are sums of modulated parts: evaluate them at t = 0 (controllers at their initial states).
  NetworkSystem system(n, NetworkSystem::Mode::Transient);
  std::vector<double> state(system.size(), 310.15), modulators(n.modulators.size());
  for (Index k = 0; k < n.controllers.size(); ++k) state[system.nodeCount() + k] = n.controllers[k].initial;
  system.modulatorValues(0.0, state, modulators);
  std::vector<double> in(n.nodes.size(), 0.0), out(n.nodes.size(), 0.0);
  for (const Advection& a : n.advections) {
    double flow = Network::constantFlow(a);
    n.forEachPart(a, [&](Index, const FlowPart& p) { flow += p.coefficient * modulators[p.modulator]; });
    forEachHop(a, [&](Index from, Index to) {
      const double w = nodeWeight(n, to) * flow;  // per copy of the receiving node
      in[to] += w;
      out[from] += w;
    });
  }
  double worst = 0.0;
  for (Index i = 0; i < n.nodes.size(); ++i)
    if (in[i] + out[i] > 0.0) worst = std::max(worst, std::abs(in[i] - out[i]) / (in[i] + out[i]));
  CHECK(worst <= 1e-12);
  CHECK(relative(out[*body->poolNode()], rhoBlood * cBlood * flows.total) <= 1e-12);

  std::vector<std::string> warnings;  // other than the coarse-grid warnings of this deliberately small grid
  for (const std::string& w : body->warnings())
    if (w.rfind("grid:", 0) != 0) warnings.push_back(w);
  REQUIRE(warnings.size() == 1);
  CHECK_THAT(warnings.front(), Catch::Contains("exceeds the cardiac output 1 mL/min"));
}

TEST_CASE("The central pool holds the blood volume the segment vessels do not", "[wholebody]") {
  // Schema (segments[].vessels.blood_fraction): large-vessel blood is a fraction of the tissue volume, arteries
  // 1/3, deep veins 1/2, superficial veins 1/6 (the toes have no superficial veins: 5/6); the pool holds
  // blood_volume minus that, with the heat capacity rho c of blood (issue 3, deliverable 2). Tissue volumes by
  // hand, coat excluded. Criterion: 1e-9 relative.
  // History: body.cpp once counted the coat's volume too (vessels 90.82 mL instead of 62.55 mL); fixed.
  TestBody spec;
  spec.extra = "[body]\nblood_volume = \"200 mL\"\n";
  auto body = bodyFromToml(spec.toml());
  const double f = 0.03;  // blood_fraction default
  const double vessels = f * (spec.trunkFleshVolume() + spec.trunkSkinVolume() +
                              2.0 * (spec.legFleshVolume() + spec.legSkinVolume()) +
                              4.0 * 5.0 / 6.0 * (spec.toeFleshVolume() + spec.toeSkinVolume()));
  const double expected = rhoBlood * cBlood * (200e-6 - vessels);
  const double got = body->network().nodes[*body->poolNode()].capacity;
  std::printf("[wholebody] pool capacity %.6g J/K, by hand %.6g J/K (vessels %.4g mL by hand, %.4g mL in the model)\n",
              got, expected, vessels * 1e6, 200.0 - got / (rhoBlood * cBlood) * 1e6);
  CHECK(std::abs(got / expected - 1.0) <= 1e-9);
}

TEST_CASE("Bad trees and negative flows are case errors naming the segments", "[wholebody][errors]") {
  // Error wording is part of the interface (DEVELOPERS.md, "Error handling"): each message names the segment(s) and the problem.
  const std::string tissues = R"(
[tissues.flesh]
conductivity = 0.5
density = 1050
specific_heat = 3600
metabolic_heat = 500
perfusion = 0.001
q10 = 2
)";
  auto segment = [](const std::string& name, const std::string& parent, const std::string& extra) {
    return "[[segments]]\nname = \"" + name + "\"\n" + (parent.empty() ? "" : "parent = \"" + parent + "\"\n") +
           "shape = \"cylinder\"\nlength = 0.1\naxial_cells = 2\n"
           "layers = [{ tissue = \"flesh\", thickness = 0.01, cells = 1 }, { tissue = \"skin\", thickness = 0.002 }]\n" +
           extra;
  };
  struct Bad {
    const char* what;
    std::string toml;
    std::vector<std::string> mentions;
  };
  const std::vector<Bad> cases = {
      {"unknown parent", segment("trunk", "", "") + segment("ear", "skull", ""), {"segments.ear.parent", "\"skull\"", "trunk"}},
      {"cycle", segment("trunk", "", "") + segment("head", "ear", "") + segment("ear", "head", ""),
       {"cycle", "head -> ear -> head"}},
      {"two roots", segment("trunk", "", "") + segment("tail", "", ""), {"2 root segments", "trunk", "tail"}},
      {"root repeated", segment("trunk", "", "count = 2\n"), {"segments.trunk.count", "root"}},
      {"shunts without skin",
       segment("trunk", "", "") + "[[segments]]\nname = \"flipper\"\nparent = \"trunk\"\nshape = \"plate\"\n"
                                  "length = 0.1\nwidth = 0.05\nlayers = [{ tissue = \"flesh\", thickness = 0.005 }]\n"
                                  "vessels = { shunt_flow_max = \"1 mL/min\" }\n",
       {"segments.flipper.vessels.shunt_flow_max", "flipper", "\"flesh\"", "skin"}},
      {"negative shunt fraction", segment("trunk", "", "") + segment("ear", "trunk", "vasomotor = { shunt = -1 }\n"),
       {"segments.ear.vasomotor.shunt", "-1"}},
      {"negative shunt flow",
       segment("trunk", "", "") + segment("ear", "trunk", "vessels = { shunt_flow_max = \"-1 mL/min\" }\n"),
       {"segments.ear.vessels.shunt_flow_max", "-1"}},
      {"negative countercurrent conductance",
       segment("trunk", "", "") + segment("leg", "trunk", "vessels = { countercurrent_conductance = \"-0.1 W/K\" }\n"),
       {"segments.leg.vessels.countercurrent_conductance"}},
      {"negative superficial return",
       segment("trunk", "", "") + segment("leg", "trunk", "vasomotor = { superficial_return = -0.5 }\n"),
       {"segments.leg.vasomotor.superficial_return"}},
      {"negative perfusion", segment("trunk", "", "") + "[tissues.skin]\nperfusion = -0.001\n", {"tissues.skin.perfusion"}},
  };
  for (const Bad& bad : cases) {
    const std::string message = caseErrorMessage(tissues + bad.toml);
    std::printf("[wholebody] %s: %s\n", bad.what, message.c_str());
    INFO(bad.what << ": " << message);
    CHECK(!message.empty());
    for (const std::string& m : bad.mentions) CHECK_THAT(message, Catch::Contains(m));
  }
}

TEST_CASE("Children cover the parent's surface where they attach and have no proximal end face", "[wholebody]") {
  // Exposed area by hand (geometry, common practice): cylinder 2 pi R L + end discs pi R^2, cone frustum
  // pi (R0 + R1) sqrt(L^2 + (R1 - R0)^2), coat included in R; where count copies attach, the parent loses
  // count x their outer cross-section, and an attached segment has no proximal end face (issue 3, deliverable 1).
  TestBody spec;
  spec.ends = "exposed";
  auto body = bodyFromToml(spec.toml());
  const double R = spec.trunkFlesh + spec.trunkSkin + spec.trunkCoat, r = spec.toeFlesh + spec.toeSkin;
  const double trunk = 2.0 * pi * R * spec.trunkLength + 2.0 * pi * R * R - 2.0 * pi * spec.legProximal * spec.legProximal;
  const double dr = spec.legDistal - spec.legProximal;
  const double legs = pi * (spec.legProximal + spec.legDistal) * std::sqrt(spec.legLength * spec.legLength + dr * dr) +
                      pi * spec.legDistal * spec.legDistal - 2.0 * pi * r * r;
  const double toes = 2.0 * pi * r * spec.toeLength + pi * r * r;
  auto relative = [](double got, double want) { return std::abs(got / want - 1.0); };
  const SegmentMesh& toeMesh = body->segments()[segmentIndex(*body, "toes")];
  std::printf("[wholebody] exposed areas: trunk %.6g cm2 (by hand %.6g), legs %.6g (%.6g), toes %.6g (%.6g)\n",
              body->segments()[0].area * 1e4, trunk * 1e4, body->segments()[1].area * 1e4, legs * 1e4,
              toeMesh.area * 1e4, toes * 1e4);
  CHECK(relative(body->segments()[segmentIndex(*body, "trunk")].area, trunk) <= 1e-12);
  CHECK(relative(body->segments()[segmentIndex(*body, "legs")].area, legs) <= 1e-12);
  CHECK(relative(toeMesh.area, toes) <= 1e-12);
  std::size_t toeFaces = 0;
  for (const SurfaceFace& f : body->network().faces)
    if (body->network().nodes[f.node].group == segmentIndex(*body, "toes")) ++toeFaces;
  CHECK(toeFaces == static_cast<std::size_t>(toeMesh.nz + toeMesh.nr));  // lateral faces and the distal end only
}

TEST_CASE("Blood nodes carry flow wherever they exist, so a body with a pool has a steady state",
          "[wholebody]") {
  // A node with no heat-flow term makes the steady-state Jacobian singular (common practice, no source) and keeps
  // its initial temperature in a transient. Here the trunk returns all of its own blood deep; the shunted ear
  // (attach_position 0.5 of 4 cells) returns superficially into trunk cell 2, and the unperfused horn draws blood
  // only for its tip segment attached at 0.5. Criterion: no isolated node; KINSOL finds the steady state.
  // History: body.cpp once added blood nodes to every axial cell of a segment with any flow, also where the
  // stream carries none; `thermorph steady cases/quadruped.toml` failed with KIN_LSETUP_FAIL. Fixed: such nodes
  // are now noNode.
  auto body = bodyFromToml(R"(
[tissues.flesh]
conductivity = 0.5
density = 1050
specific_heat = 3600
metabolic_heat = 1000
perfusion = 0.002
q10 = 2
[tissues.horn]
conductivity = 0.5
density = 1300
specific_heat = 1600
metabolic_heat = 0
perfusion = 0
q10 = 1
[[segments]]
name = "trunk"
shape = "cylinder"
length = 0.3
axial_cells = 4
layers = [{ tissue = "flesh", thickness = 0.04, cells = 2 }, { tissue = "skin", thickness = 0.003, cells = 1 }]
[[segments]]
name = "ear"
parent = "trunk"
shape = "plate"
length = 0.08
width = 0.04
axial_cells = 2
layers = [{ tissue = "flesh", thickness = 0.001 }, { tissue = "skin", thickness = 0.001 }]
vessels = { shunt_flow_max = "2 mL/min" }
vasomotor = { shunt = 1 }
[[segments]]
name = "horn"
parent = "trunk"
attach_position = 0.0
shape = "cylinder"
length = 0.1
axial_cells = 4
layers = [{ tissue = "horn", thickness = 0.01 }]
[[segments]]
name = "tip"
parent = "horn"
attach_position = 0.5
shape = "cylinder"
length = 0.02
layers = [{ tissue = "flesh", thickness = 0.005 }]
[environment]
temperature = "10 degC"
convection = 10
)");
  const Network& n = body->network();
  std::vector<int> terms(n.nodes.size(), 0);
  for (const Conductance& c : n.conductances) ++terms[c.a], ++terms[c.b];
  for (const Advection& a : n.advections) forEachHop(a, [&](Index from, Index to) { ++terms[to], ++terms[from]; });
  for (const BoundaryExchange& e : n.exchanges) ++terms[e.node];
  for (const SurfaceFace& f : n.faces) ++terms[f.node];
  std::vector<std::string> isolated;
  for (Index i = 0; i < n.nodes.size(); ++i)
    if (terms[i] == 0) isolated.push_back(n.label(i));
  for (const std::string& label : isolated) std::printf("[wholebody] isolated node: %s\n", label.c_str());
  CHECK(isolated.empty());
  CHECK_NOTHROW(runSteady(*body, silentRun()));
}

// The layer of each radial ring is kept as the layers' runs of rings (RingLayers) and the sources' channels and Q10
// laws in 16 bits. Checked against the case text (the layers' cell counts, inside out, coat last); common practice,
// no source.
TEST_CASE("Ring layers follow the case's cell counts - 16-bit term indices refuse what does not fit", "[wholebody]") {
  auto body = bodyFromToml(R"toml(
[environment]
temperature = "5 degC"
convection = "10 W/(m2 K)"
[[segments]]
name = "trunk"
shape = "cylinder"
length = "20 cm"
axial_cells = 2
layers = [{ tissue = "viscera", thickness = "2 cm", cells = 3 }, { tissue = "muscle", thickness = "1 cm", cells = 1 },
          { tissue = "fat", thickness = "0.5 cm", cells = 2 }]
coat = { material = "fur", thickness = "1 cm", cells = 2 }
)toml");
  const SegmentMesh& m = body->segments().at(0);
  const std::vector<int> expected{0, 0, 0, 1, 2, 2, 3, 3};  // 3 viscera, 1 muscle, 2 fat, 2 coat
  REQUIRE(m.layer.size() == expected.size());
  for (std::size_t r = 0; r < expected.size(); ++r) CHECK(m.layer[r] == expected[r]);
  CHECK(m.layer.expanded() == expected);
  // The labels name each cell's layer from the same runs.
  CHECK_THAT(body->network().label(m.node(1, 3)), Catch::Contains("(muscle)"));
  CHECK_THAT(body->network().label(m.node(0, 7)), Catch::Contains("(fur)"));
  // A layer without rings between two others: its run is empty.
  RingLayers gap;
  for (int l : {0, 0, 2, 2, 2}) gap.push_back(l);
  CHECK(gap.expanded() == std::vector<int>{0, 0, 2, 2, 2});
  CHECK_THROWS_AS(gap.push_back(1), std::logic_error);

  // Every source's channel and Q10 law read back as the names given to them.
  const Network& n = body->network();
  for (const HeatSource& s : n.sources) {
    CHECK(n.channels.at(s.channel) == "metabolism");
    CHECK(n.q10Laws.at(s.law).q10 > 1.0);
  }
  CHECK_THROWS_AS(Index16(65535), std::length_error);
  CHECK(Index(Index16(65534)) == 65534);
}
