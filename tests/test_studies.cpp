// Physiological sense of the example studies (cases/wading_bird.toml, cases/hare_ears.toml): a countercurrent
// exchanger in the legs saves heat, and an ear sheds more heat the larger it is when the air is cooler than the
// skin and gains more when the air is much hotter. Each expectation is common practice, no source; the numbers are
// printed for the studies' notes.
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

TEST_CASE("Hare ears: heat loss rises with ear size in cool air and turns into a gain in hot air", "[studies]") {
  // Expectation (common practice, no source): an ear is a fin; with its shunts open and the arterial supply held
  // at 38.5 degC (a clamped core), its surface exchange h A (T_air - T_surface) + radiation grows with its area,
  // negative (a loss) when the air and surroundings are cooler than the skin (20 degC) and positive (a gain) when
  // they are much hotter (45 degC). Steady states, no sun, radiant and sky temperatures equal to the air's; ear
  // length 6, 9, 12 and 15 cm at 5 cm width. Exchange per ear = convection + radiation (no sun, a dry surface).
  const double lengths[] = {6.0, 9.0, 12.0, 15.0};  // [cm]
  for (double air : {20.0, 45.0}) {
    std::vector<double> exchange;
    for (double length : lengths) {
      const std::string t = std::to_string(air) + " degC";
      Body body(loadCase(casePath("hare_ears.toml"),
                         {"segments.ears.length=" + std::to_string(length) + " cm", "environment.temperature=" + t,
                          "environment.radiant_temperature=" + t, "environment.sky_temperature=" + t,
                          "environment.solar_irradiance=0", "circulation.fixed_arterial_temperature=38.5 degC",
                          "segments.ears.vasomotor.shunt=1"}));
      RunSummary s = runSteady(body, silentRun());
      REQUIRE(s.complete);
      const Network& n = body.network();
      const Index ears = segmentIndex(body, "ears");
      const double perEar = s.flows[ears * n.channels.size() + channelIndex(n, "convection")] +
                            s.flows[ears * n.channels.size() + channelIndex(n, "radiation")];
      exchange.push_back(perEar);
      std::printf("[studies] hare ear %4.1f cm at %2.0f degC air: %+.4f W per ear (convection + radiation)\n", length,
                  air, perEar);
    }
    INFO("air " << air << " degC");
    for (std::size_t i = 0; i < exchange.size(); ++i) {
      if (air < 38.5) CHECK(exchange[i] < 0.0);  // a loss in air cooler than the skin
      if (air > 38.5) CHECK(exchange[i] > 0.0);  // a gain in air much hotter than the skin
      if (i == 0) continue;
      CHECK(std::abs(exchange[i]) > std::abs(exchange[i - 1]));  // larger ears exchange more
    }
  }
}
