// Physiological sense of the example studies (cases/wading_bird.toml, cases/large_bill.toml): a countercurrent
// exchanger in the legs saves heat; a bill sheds more heat the longer it is when the air is cooler than the blood
// and gains more when the air is much hotter, less per unit length the longer it is (as a fin), and more with its
// shunts open. Each expectation is named beside its check; the numbers are printed for the studies' notes.
#include <catch2/catch.hpp>

#include <cmath>
#include <cstdio>
#include <string>
#include <vector>

#include "test_support_body.hpp"

using namespace thermorph;
using namespace thermorph::testing;

namespace {

constexpr double kZero = 273.15;

std::string casePath(const std::string& name) { return std::string(THERMORPH_SOURCE_DIR) + "/cases/" + name; }

//! Channels through which the body exchanges heat with its surroundings (blood, conduction, metabolism, shivering
//! and storage are internal or production).
const char* const environmentChannels[] = {"convection", "radiation", "solar", "evaporation", "substrate",
                                           "respiration"};

//! Net heat lost to the surroundings by the whole body (counts included) from flows [groups x channels] [W].
double bodyLoss(const Network& n, std::span<const double> flows) {
  double gain = 0.0;
  for (const char* c : environmentChannels)
    for (Index k = 0; k < n.channels.size(); ++k)
      if (n.channels[k] == c) gain += bodyChannelTotal(n, flows, k);
  return -gain;
}

//! Net heat lost to the surroundings by one copy of a segment [W].
double segmentLoss(const Network& n, std::span<const double> flows, Index group) {
  double gain = 0.0;
  for (const char* c : environmentChannels)
    for (Index k = 0; k < n.channels.size(); ++k)
      if (n.channels[k] == c) gain += flows[group * n.channels.size() + k];
  return -gain;
}

//! One wading-bird run: losses at every output and over the run.
struct BirdRun {
  std::vector<double> time, loss, legLoss, shivering;  //!< [s], [W] (legLoss per leg)
  double initialCore = 0.0;                            //!< [degC]
  double meanLoss = 0.0;                               //!< environment channels' energy over the run / duration [W]
  double meanShivering = 0.0;                          //!< [W]
};

BirdRun runBird(const std::vector<std::string>& overrides) {
  Body body(loadCase(casePath("wading_bird.toml"), overrides));
  const Network& n = body.network();
  const Index leg = segmentIndex(body, "leg"), shiver = channelIndex(n, "shivering");
  BirdRun r;
  RunOptions options = silentRun();
  bool first = true;
  options.observer = [&](double t, std::span<const double> T, const RunSummary& s) {
    if (first) {
      const SegmentMesh& m = body.segments()[body.coreSegment()];
      double sum = 0.0, volume = 0.0;
      for (int iz = 0; iz < m.nz; ++iz)
        for (int ir = 0; ir < m.innermostLayerCells; ++ir) {
          double v = m.volume[static_cast<std::size_t>(iz * m.nr + ir)];
          sum += v * T[m.node(iz, ir)];
          volume += v;
        }
      r.initialCore = sum / volume - kZero;
      first = false;
    }
    r.time.push_back(t);
    r.loss.push_back(bodyLoss(n, s.flows));
    r.legLoss.push_back(segmentLoss(n, s.flows, leg));
    r.shivering.push_back(bodyChannelTotal(n, s.flows, shiver));
  };
  RunSummary s = runTransient(body, options);
  REQUIRE(s.complete);
  double energy = 0.0;
  for (const char* c : environmentChannels)
    for (Index k = 0; k < n.channels.size(); ++k)
      if (n.channels[k] == c) energy += s.channelEnergy[k];
  r.meanLoss = -energy / s.finalTime;
  r.meanShivering = s.channelEnergy[shiver] / s.finalTime;
  return r;
}

}  // namespace

TEST_CASE("Wading bird: the leg exchanger saves heat", "[studies]") {
  // Expectation (common practice, no source): a countercurrent exchanger between artery and deep vein cools the
  // blood on its way down the leg and rewarms it on its way back, so the legs standing in cold water lose less
  // heat, and the whole bird, its core defended by shivering, loses less heat and shivers less, than with the
  // exchanger off (countercurrent_conductance = 0). Both runs start from their steady state; the check that the
  // steady solve found the physiological state (core 36-41 degC) guards the comparison.
  BirdRun on = runBird({});
  BirdRun off = runBird({"segments.leg.vessels.countercurrent_conductance=0"});
  REQUIRE(on.time == off.time);
  CHECK(on.initialCore > 36.0);
  CHECK(on.initialCore < 41.0);
  CHECK(off.initialCore > 36.0);
  CHECK(off.initialCore < 41.0);
  for (std::size_t i = 0; i < on.time.size(); ++i) {
    INFO("t = " << on.time[i] << " s");
    CHECK(on.loss[i] < off.loss[i]);
    CHECK(on.legLoss[i] < off.legLoss[i]);
    CHECK(on.shivering[i] < off.shivering[i]);
  }
  const double saved = off.meanLoss - on.meanLoss;
  std::printf("[studies] wading bird, 2 h mean: heat loss %.3f W with the exchanger, %.3f W without: %.3f W saved "
              "(%.1f %%); shivering %.3f vs %.3f W; per leg at t = 0 %.3f vs %.3f W (%.1f %% less); initial core "
              "%.2f vs %.2f degC\n",
              on.meanLoss, off.meanLoss, saved, 100.0 * saved / off.meanLoss, on.meanShivering, off.meanShivering,
              on.legLoss[0], off.legLoss[0], 100.0 * (1.0 - on.legLoss[0] / off.legLoss[0]), on.initialCore,
              off.initialCore);
  CHECK(saved > 0.0);
}

TEST_CASE("Large bill: exchange grows with bill length, falls per unit length, and rises with open shunts",
          "[studies]") {
  // Steady states with the arterial supply held at 40 degC (a clamped core), the controllers off, no sun, radiant
  // and sky temperatures equal to the air's; bill length 6, 12, 18 and 24 cm with the base and tip radii kept.
  // Exchange of the bill = convection + radiation (no sun, a dry surface).
  // Expectations: (1) the exchange is a loss in air cooler than the blood (20 degC) and a gain in air much hotter
  // (45 degC), and grows in size with the bill's area (common practice, no source); (2) in cool air the loss per
  // unit length falls with length: the bill is a fin whose efficiency tanh(mL)/(mL) falls with L (Incropera et al.,
  // fin efficiency, Table 3.4 / eq. 3.89); (3) open arteriovenous shunts carry warm blood past the exchanger into
  // the distal skin and raise the loss (common practice, no source).
  const double lengths[] = {6.0, 12.0, 18.0, 24.0};  // [cm]
  auto exchange = [&](double length, double air, double shunt) {
    const std::string t = std::to_string(air) + " degC";
    Body body(loadCase(casePath("large_bill.toml"),
                       {"segments.bill.length=" + std::to_string(length) + " cm", "environment.temperature=" + t,
                        "environment.radiant_temperature=" + t, "environment.sky_temperature=" + t,
                        "environment.substrate_temperature=" + t, "environment.solar_irradiance=0",
                        "circulation.fixed_arterial_temperature=40 degC", "control.vasomotor.enabled=off",
                        "control.panting.enabled=off", "segments.bill.vasomotor.shunt=" + std::to_string(shunt)}));
    RunSummary s = runSteady(body, silentRun());
    REQUIRE(s.complete);
    const Network& n = body.network();
    const Index bill = segmentIndex(body, "bill");
    const double q = s.flows[bill * n.channels.size() + channelIndex(n, "convection")] +
                     s.flows[bill * n.channels.size() + channelIndex(n, "radiation")];
    std::printf("[studies] bill %4.1f cm at %2.0f degC air, shunts %.0f: %+.4f W (%+.4f W/cm)\n", length, air, shunt,
                q, q / length);
    return q;
  };
  for (double air : {20.0, 45.0}) {
    std::vector<double> open, closed;
    for (double length : lengths) {
      open.push_back(exchange(length, air, 1.0));
      closed.push_back(exchange(length, air, 0.0));
    }
    INFO("air " << air << " degC");
    for (std::size_t i = 0; i < open.size(); ++i) {
      if (air < 40.0) CHECK(open[i] < 0.0);  // a loss in air cooler than the blood
      if (air > 40.0) CHECK(open[i] > 0.0);  // a gain in air much hotter than the blood
      if (air < 40.0) CHECK(open[i] < closed[i]);  // open shunts shed more
      if (i == 0) continue;
      CHECK(std::abs(open[i]) > std::abs(open[i - 1]));  // longer bills exchange more
      if (air < 40.0) {
        CHECK(open[i] / lengths[i] > open[i - 1] / lengths[i - 1]);      // less loss per cm (a fin)
        CHECK(closed[i] / lengths[i] > closed[i - 1] / lengths[i - 1]);
      }
    }
  }
}
