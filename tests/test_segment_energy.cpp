// Per-segment cumulative energies carried in the CVODE state (solver/assembly.hpp, group energies): exact
// bookkeeping per segment, the heat lost across a step change of the convection coefficient against the
// lumped-capacitance solution, sweep means that do not depend on the output spacing, and zero storage at a
// steady state.
#include <catch2/catch.hpp>

#include <algorithm>
#include <cmath>
#include <string>
#include <vector>

#include <fmt/format.h>

#include "drivers/simulation.hpp"
#include "drivers/sweep_metrics.hpp"
#include "models/body.hpp"
#include "models/case.hpp"
#include "solver/assembly.hpp"
#include "solver/integrator.hpp"

using namespace thermorph;

namespace {

const std::string diver = std::string(THERMORPH_SOURCE_DIR) + "/cases/diving_seal.toml";
const std::string wadingBird = std::string(THERMORPH_SOURCE_DIR) + "/cases/wading_bird.toml";

//! Newton cooling to 280 K whose coefficient steps from h1 to h2 at t1 (a diver surfacing, a gust).
class SteppedCooling : public SurfaceModel {
 public:
  double h1 = 5.0, h2 = 50.0, t1 = 700.0, area = 0.01, ambient = 280.0;
  void faceHeat(Index, double Ts, double time, std::span<double> heat, std::span<double> derivative) const override {
    const double hA = (time < t1 ? h1 : h2) * area;
    heat[0] += hA * (ambient - Ts);
    derivative[0] -= hA;
  }
};

//! Index of a metric column by name.
std::size_t columnIndex(const std::vector<MetricColumn>& columns, const std::string& name) {
  auto it = std::find_if(columns.begin(), columns.end(), [&](const MetricColumn& c) { return c.name == name; });
  REQUIRE(it != columns.end());
  return static_cast<std::size_t>(it - columns.begin());
}

//! Metrics of a transient run of `path` with overrides, over the whole run.
std::vector<double> transientMetrics(const std::string& path, const std::vector<std::string>& overrides,
                                     std::vector<MetricColumn>* columns = nullptr) {
  Body body(loadCase(path, overrides));
  MetricCollector collector(body, MetricWindow{}, {}, false);
  RunOptions options;
  options.quiet = true;
  options.observer = [&](double t, std::span<const double> y, const RunSummary& s) { collector.observe(t, y, s); };
  RunSummary summary = runTransient(body, options);
  REQUIRE(summary.complete);
  if (columns) *columns = metricColumns(body, {}, false);
  return collector.values();
}

}  // namespace

TEST_CASE("a lumped body whose convection coefficient steps loses rho c V (T0 - T(t_end)), eq. 5.6 piecewise",
          "[segenergy]") {
  // One node of capacity C = rho c V behind a face half-conductance G, cooled by h A to 280 K: the overall
  // conductance U = 1 / (1/G + 1/(h A)) and the lumped solution T - T_inf = (T_0 - T_inf) exp(-U t / C)
  // (Incropera et al. 2007, eq. 5.6, with U in place of h A), restarted at t1 where h steps from h1 to h2.
  // The heat the surroundings take over [0, t_end] is C (T_0 - T(t_end)).
  SteppedCooling surface;
  Network n;
  n.groups = {"ball"};
  n.groupWeights = {1.0};
  n.channel("convection");
  n.channel("radiation");  // a second channel that stays empty
  const double C = 1000.0, G = 10.0, T0 = 310.0, tEnd = 3000.0;
  n.addNode(C, 0, "ball");
  n.faces.push_back({0, G, surface.area});
  n.surface = &surface;
  NetworkSystem system(n, NetworkSystem::Mode::Transient);
  REQUIRE(system.groupCount() == 1);
  REQUIRE(system.size() == 1 + 2 + 2);  // node, body channels, the group's channels
  std::vector<double> y(system.size(), 0.0);
  y[0] = T0;
  IntegratorOptions options;
  options.rtol = 1e-9;
  options.atol.assign(system.size(), 1e30);
  options.atol[0] = 1e-9;
  Integrator integrator(system, y, 0.0, options);
  integrator.setStopTime(surface.t1);
  integrator.advanceTo(surface.t1);
  integrator.restart();
  integrator.setStopTime(tEnd);
  integrator.advanceTo(tEnd);
  auto state = integrator.state();

  auto U = [&](double h) { return 1.0 / (1.0 / G + 1.0 / (h * surface.area)); };
  const double T1 = surface.ambient + (T0 - surface.ambient) * std::exp(-U(surface.h1) * surface.t1 / C);
  const double T2 = surface.ambient + (T1 - surface.ambient) * std::exp(-U(surface.h2) * (tEnd - surface.t1) / C);
  const double exact = C * (T2 - T0);  // heat gained by the ball [J], negative
  const double convection = state[system.groupEnergyOffset() + 0];
  const double error = std::abs(convection / exact - 1.0);
  fmt::print("[segenergy] lumped ball, h {} -> {} W/(m2 K) at {} s: heat gained by convection {:.9g} J, exact "
             "(Incropera et al. 2007, eq. 5.6 piecewise) {:.9g} J, relative error {:.2e}\n",
             surface.h1, surface.h2, surface.t1, convection, exact, error);
  CHECK(error < 1e-7);
  CHECK(state[system.groupEnergyOffset() + 1] == 0.0);
  // The state's own bookkeeping: the group energy is its stored-heat change to round-off, and equals the body's.
  CHECK(std::abs(convection - C * (state[0] - T0)) < 1e-12 * std::abs(exact));
  CHECK(std::abs(convection - state[1]) < 1e-12 * std::abs(exact));
}

TEST_CASE("per-segment energies close: storage = sum of channel energies, and add up to the whole body",
          "[segenergy]") {
  // The diver: five dives (medium steps), counted flippers, blood pool and streams, controllers.
  Body body(loadCase(diver));
  RunOptions options;
  options.quiet = true;
  RunSummary s = runTransient(body, options);
  REQUIRE(s.complete);
  const Network& n = body.network();
  const std::size_t channels = n.channels.size(), groups = n.groups.size();
  REQUIRE(s.segmentEnergy.size() == groups * channels);
  double worst = 0.0;
  for (std::size_t g = 0; g < groups; ++g) {
    double sum = 0.0, gross = std::abs(s.segmentStoredChange[g]);
    for (std::size_t c = 0; c < channels; ++c) {
      sum += s.segmentEnergy[g * channels + c];
      gross += std::abs(s.segmentEnergy[g * channels + c]);
    }
    const double residual = std::abs(sum - s.segmentStoredChange[g]) / gross;
    INFO(n.groups[g] << ": channels " << sum << " J, stored change " << s.segmentStoredChange[g] << " J");
    CHECK(residual < 1e-9);
    CHECK(std::abs(s.segmentBalanceError[g]) <= 1e-9 * gross);
    worst = std::max(worst, residual);
  }
  // Weighted by the counts, the segments' channel energies are the body's (conduction between segments cancels).
  double worstBody = 0.0;
  for (std::size_t c = 0; c < channels; ++c) {
    double total = 0.0;
    for (std::size_t g = 0; g < groups; ++g) total += n.groupWeights[g] * s.segmentEnergy[g * channels + c];
    const double residual = std::abs(total - s.channelEnergy[c]) / s.throughput;
    INFO(n.channels[c] << ": segments " << total << " J, body " << s.channelEnergy[c] << " J");
    CHECK(residual < 1e-9);
    worstBody = std::max(worstBody, residual);
  }
  fmt::print("[segenergy] diver: per-segment closure residual {:.2e} (relative to each segment's gross exchange), "
             "segments vs body {:.2e} (relative to the body's)\n",
             worst, worstBody);
}

TEST_CASE("segment heat-flow means come from the energies: the same whatever the output spacing", "[segenergy]") {
  // CVODE's steps do not depend on the output times (dense output between steps), so energies at the end of the
  // run, and the means from them, are the same for 1 output per 10 s and per 5 min; a trapezoid over the outputs
  // was not (the dives step h between outputs).
  std::vector<MetricColumn> columns;
  const std::vector<double> fine = transientMetrics(diver, {"run.output_interval=10 s"}, &columns);
  const std::vector<double> coarse = transientMetrics(diver, {"run.output_interval=5 min"});
  for (const char* name : {"segments.hind_flippers.heat_flow.convection", "segments.hind_flippers.heat_flow.blood",
                           "segments.trunk.heat_flow.conduction", "segments.fore_flippers.heat_flow.storage",
                           "body.heat_flow.convection"}) {
    const std::size_t k = columnIndex(columns, name);
    INFO(name << ": " << fine[k] << " W every 10 s, " << coarse[k] << " W every 5 min");
    CHECK(std::abs(fine[k] - coarse[k]) <= 1e-9 * std::abs(fine[k]) + 1e-12);
  }
}

TEST_CASE("a steady state stores no heat in any segment (steady sweep metrics)", "[segenergy][steady]") {
  // At a steady state every node's net heat flow is zero, so each segment's storage is zero to the solver's
  // residual (common practice, no source); the flows themselves are of order 1 W.
  Body body(loadCase(wadingBird));
  MetricCollector collector(body, MetricWindow{}, {}, true);
  RunOptions options;
  options.quiet = true;
  options.observer = [&](double t, std::span<const double> y, const RunSummary& s) { collector.observe(t, y, s); };
  RunSummary summary = runSteady(body, options);
  REQUIRE(summary.complete);
  const std::vector<MetricColumn> columns = metricColumns(body, {}, true);
  const std::vector<double> values = collector.values();
  double largest = 0.0;
  for (std::size_t k = 0; k < columns.size(); ++k)
    if (columns[k].units == "W") largest = std::max(largest, std::abs(values[k]));
  REQUIRE(largest > 0.1);
  int storages = 0;
  for (std::size_t k = 0; k < columns.size(); ++k)
    if (columns[k].name.ends_with(".heat_flow.storage")) {
      INFO(columns[k].name << " = " << values[k] << " W");
      CHECK(std::abs(values[k]) < 1e-9 * largest);
      ++storages;
    }
  CHECK(storages == 1 + static_cast<int>(body.segments().size()));
}
