// The environment example case (cases/env_day_cycle.toml): a body half in water under an hourly weather file.
// Checks what follows from the inputs alone: breakpoints at the rows, immersion, channels that must vanish, the
// absorbed solar energy against the integral of the tabulated irradiance, and energy conservation.
#include <catch2/catch.hpp>

#include <algorithm>
#include <cmath>
#include <cstdio>
#include <string>
#include <vector>

#include "models/body.hpp"
#include "models/case.hpp"
#include "drivers/simulation.hpp"
#include "test_support.hpp"

using namespace thermorph;

TEST_CASE("Day-cycle example: weather rows, immersion and the absorbed solar energy", "[environment][example]") {
  // rtol 1e-8: the channel energies are quadratures outside CVODE's error test, as accurate as the steps the
  // temperatures need (4e-5 of the solar total at the case's 1e-6).
  Body body(loadCase(THERMORPH_SOURCE_DIR "/cases/env_day_cycle.toml", {"run.rtol=1e-8"}));
  const Network& n = body.network();
  EnvironmentModel& env = body.environment();
  // Hourly rows 0..24 h: a breakpoint at every row inside the run (1 h .. 23 h).
  const std::vector<double> breakpoints = env.breakpoints();
  REQUIRE(breakpoints.size() == 23);
  for (std::size_t k = 0; k < breakpoints.size(); ++k) CHECK(breakpoints[k] == 3600.0 * static_cast<double>(k + 1));

  Index feet = 0;
  for (Index g = 0; g < n.groups.size(); ++g)
    if (n.groups[g] == "feet") feet = g;
  CHECK(env.immersed(feet));
  for (Index g = 0; g < n.groups.size(); ++g)
    if (g != feet && n.groups[g] != "blood_pool") CHECK_FALSE(env.immersed(g));

  // Absorbed solar energy: alpha S times the shadow of each segment in air for a beam normal to its axis
  // (geometry, common practice, no source: cylinder 2 R L, cone (R0 + R1) L, outer radii with the coat; end
  // faces parallel to the beam take none), copies counted, times the time integral of S, which the linear
  // interpolation between rows makes the trapezoid rule over the hourly values of env_day_cycle.csv (exact).
  // Where a child joins, the parent's lateral face loses the child's cross-section (README), and with it the
  // shadow share 1/pi of that area.
  const double irradiance[] = {0, 0, 0, 0, 0, 0, 0, 189, 369, 530, 665, 766, 829,
                               850, 829, 766, 665, 530, 369, 189, 0, 0, 0, 0, 0};
  double integral = 0.0;  // [J/m2]
  for (int h = 0; h < 24; ++h) integral += 0.5 * (irradiance[h] + irradiance[h + 1]) * 3600.0;
  const double pi = 3.14159265358979323846;
  const double trunk = 2.0 * 0.060 * 0.18 - (pi * 0.014 * 0.014 + 2.0 * pi * 0.0045 * 0.0045) / pi;  // R 2.5+1.2+0.2+0.1+2 cm
  const double neck = 2.0 * 0.014 * 0.15 - 0.019 * 0.019;  // R 0.8 + 0.1 + 0.5 cm; the head (R0 1.9 cm) joins
  const double head = (0.019 + 0.011) * 0.07;               // R0 1.6 + 0.3 cm, R1 0.8 + 0.3 cm
  const double legs = 2.0 * (2.0 * 0.0045 * 0.12 - 0.003 * 0.003);  // two legs, R 0.45 cm, bare; a foot (0.3 cm) joins
  // alpha x shadow [m2]: trunk and neck 0.6 (case), head and legs the default 0.7; the feet are in water.
  const double absorbing = 0.6 * (trunk + neck) + 0.7 * (head + legs);
  RunOptions options;
  options.quiet = true;
  RunSummary s = runTransient(body, options);
  REQUIRE(s.complete);
  auto channel = [&](const std::string& name) {
    for (Index c = 0; c < n.channels.size(); ++c)
      if (n.channels[c] == name) return c;
    FAIL("no channel " << name);
    return Index(0);
  };
  const double solar = s.channelEnergy[channel("solar")];
  const double expected = absorbing * integral;
  std::printf("[environment] day cycle: solar %.6g J vs alpha S shadow integrated %.6g J (rel %.1e); energy "
              "balance %.1e of %.4g J\n",
              solar, expected, std::abs(solar / expected - 1.0), std::abs(s.energyBalanceError) / s.throughput,
              s.throughput);
  CHECK(std::abs(solar / expected - 1.0) < 1e-6);
  CHECK(std::abs(s.energyBalanceError) <= 1e-6 * s.throughput);
  // No radiation or evaporation reaches the feet in water; nobody is wet, nothing touches the ground.
  CHECK(s.flows[feet * n.channels.size() + channel("radiation")] == 0.0);
  CHECK(s.channelEnergy[channel("evaporation")] == 0.0);
  CHECK(s.channelEnergy[channel("substrate")] == 0.0);
}

TEST_CASE("Day-cycle example: progress lines do not change the steps or the results", "[environment][example]") {
  // A result must not depend on whether progress was shown (on the wall clock). Progress interpolates at times
  // inside an output interval; as the first time after a restart (each weather row is one) such a time bounded
  // CVODE's first step (a tenth of the distance to it, cvHin; Hindmarsh et al. 2005, from memory) and changed the
  // step sequence: 537 against 523 steps on this case refined 3x. Progress from the first instant here.
  const Case c = loadCase(THERMORPH_SOURCE_DIR "/cases/env_day_cycle.toml");
  RunOptions quiet = testing::silentRun();
  RunOptions shown = testing::silentRun();
  shown.quiet = false;
  shown.progressAfter = 0.0;
  Body a(c), b(c);
  const RunSummary q = runTransient(a, quiet), p = runTransient(b, shown);
  REQUIRE(q.complete);
  REQUIRE(p.complete);
  std::printf("[example] day cycle: %ld steps quiet, %ld with progress from the start\n", q.statistics.steps,
              p.statistics.steps);
  CHECK(p.statistics.steps == q.statistics.steps);
  CHECK(p.statistics.rhsEvaluations == q.statistics.rhsEvaluations);
  REQUIRE(p.finalState.size() == q.finalState.size());
  double largest = 0.0;
  for (std::size_t i = 0; i < q.finalState.size(); ++i)
    largest = std::max(largest, std::abs(p.finalState[i] - q.finalState[i]));
  CHECK(largest == 0.0);
}
