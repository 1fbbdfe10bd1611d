// Integrator behaviour that the analytic tests do not reach: failures are reported with the SUNDIALS flag, the
// time reached and the offending component by name; exceptions from callbacks keep their message.
#include <catch2/catch.hpp>

#include <algorithm>
#include <cmath>
#include <cstdio>
#include <stdexcept>
#include <string>
#include <vector>

#include "solver/assembly.hpp"
#include "solver/integrator.hpp"

using namespace thermorph;

namespace {

//! Newton cooling that refuses to be evaluated after t = 5 s (a stand-in for a model failure).
class FailingSurface : public SurfaceModel {
 public:
  void faceHeat(Index, double Ts, double time, std::span<double> heat, std::span<double> derivative) const override {
    if (time > 5.0) throw std::runtime_error("surface model failed on purpose");
    heat[0] += 2.0 * (280.0 - Ts);
    derivative[0] -= 2.0;
  }
};

//! Newton cooling by a fixed 2 W/K to 280 K.
class Cooling : public SurfaceModel {
 public:
  void faceHeat(Index, double Ts, double, std::span<double> heat, std::span<double> derivative) const override {
    heat[0] += 2.0 * (280.0 - Ts);
    derivative[0] -= 2.0;
  }
};

Network twoNodes(const SurfaceModel* surface) {
  Network n;
  n.groups = {"part"};
  n.groupWeights = {1.0};
  n.channel("convection");
  n.addNode(100.0, 0, "part: inner");
  n.addNode(50.0, 0, "part: outer");
  n.addConductance(0, 1, 3.0);
  n.faces.push_back({1, 10.0, 0.01});
  n.surface = surface;
  return n;
}

}  // namespace

TEST_CASE("a failing model stops CVODE with the flag, the time and a clear cause", "[solver]") {
  FailingSurface surface;
  Network network = twoNodes(&surface);
  NetworkSystem system(network, NetworkSystem::Mode::Transient);
  std::vector<double> y{310.0, 310.0, 0.0, 0.0};  // nodes, the channel's energy, the group's energy
  IntegratorOptions options;
  options.atol = {1e-8, 1e-8, 1e30, 1e30};
  Integrator integrator(system, y, 0.0, options);
  integrator.advanceTo(4.0);
  CHECK(integrator.time() == 4.0);
  try {
    integrator.advanceTo(100.0);
    FAIL("no error");
  } catch (const SolverError& e) {
    std::string message = e.what();
    CHECK_THAT(message, Catch::Contains("CVODE failed with CV_") && Catch::Contains("at t = ") &&
                            Catch::Contains("surface model failed on purpose") && Catch::Contains("part: "));
  }
}

TEST_CASE("two-node network relaxes to the exact steady state and conserves energy", "[solver]") {
  // Series conductances (common practice, no source): Q = (T_inner - T_inf) / (1/3 + 1/10 + 1/(2*0.01*...)).
  // Here the face exchange is 2 W/K to 280 K through a 10 W/K half-cell: the steady state of an unheated
  // network is uniform at 280 K.
  Cooling surface;
  Network network = twoNodes(&surface);
  NetworkSystem system(network, NetworkSystem::Mode::Transient);
  std::vector<double> y{310.0, 300.0, 0.0, 0.0};  // nodes, the channel's energy, the group's energy
  IntegratorOptions options;
  options.rtol = 1e-10;
  options.atol = {1e-10, 1e-10, 1e30, 1e30};
  Integrator integrator(system, y, 0.0, options);
  integrator.advanceTo(2000.0);
  auto state = integrator.state();
  CHECK(state[0] == Approx(280.0).margin(1e-6));
  CHECK(state[1] == Approx(280.0).margin(1e-6));
  // Energy: the convection channel's cumulative heat equals the change of stored heat (-> -4000 J at rest).
  double stored = 100.0 * (state[0] - 310.0) + 50.0 * (state[1] - 300.0);
  CHECK(state[2] == Approx(stored).epsilon(1e-10));
  CHECK(state[2] == Approx(-4000.0).epsilon(1e-6));
  // Both nodes are one group: its energy is the body's.
  CHECK(state[3] == Approx(stored).epsilon(1e-10));
}

TEST_CASE("a chain of N first-order lags follows the Erlang step response", "[solver][control]") {
  // Linear chain trick (MacDonald 1978, "Time lags in biological models", ch. 1): N first-order lags of time constant
  // theta in series, driven by a unit step, give u_N(t) = 1 - exp(-t/theta) sum_{k<N} (t/theta)^k / k!, the CDF of
  // a gamma (Erlang) delay of mean N theta. The CIVD response of a local controller with `stages = N` is such a chain
  // (models/body.cpp): the first stage reads a temperature, each further one the state of the one before.
  class NoSurface : public SurfaceModel {
   public:
    void faceHeat(Index, double, double, std::span<double>, std::span<double>) const override {}
  } surface;
  for (int stages : {1, 3, 5}) {
    Network n;
    n.groups = {"part"};
    n.groupWeights = {1.0};
    n.channel("convection");
    n.addNode(100.0, 0, "part: node");
    n.surface = &surface;
    const double mean = 600.0, theta = mean / stages;
    for (int k = 0; k < stages; ++k) {
      Controller c;
      c.name = "stage" + std::to_string(k + 1);
      // The first stage's target: clamp(0 + (-1)(300 - 400), 0, 1) = 1 at T = 300 K (a unit step at t = 0 from
      // the initial state 0); the others follow the previous state: clamp(0 + 1 (u_prev - 0), 0, 1) = u_prev.
      c.signal = {{k == 0 ? Index{0} : static_cast<Index>(k), 1.0}};  // state index: 1 node, then controllers
      c.setpoint = k == 0 ? 400.0 : 0.0;
      c.gain = k == 0 ? -1.0 : 1.0;
      c.bias = 0.0;
      c.timeConstant = theta;
      c.initial = 0.0;
      n.controllers.push_back(c);
    }
    NetworkSystem system(n, NetworkSystem::Mode::Transient);
    std::vector<double> y(system.size(), 0.0);
    y[0] = 300.0;
    IntegratorOptions options;
    options.rtol = 1e-10;
    options.atol.assign(system.size(), 1e-12);
    Integrator integrator(system, y, 0.0, options);
    double worst = 0.0;
    for (double t = 60.0; t <= 3000.0; t += 60.0) {
      integrator.advanceTo(t);
      double term = 1.0, sum = 0.0;
      for (int k = 0; k < stages; ++k) {
        sum += term;
        term *= (t / theta) / (k + 1);
      }
      const double exact = 1.0 - std::exp(-t / theta) * sum;
      worst = std::max(worst, std::abs(integrator.state()[static_cast<std::size_t>(stages)] - exact));
    }
    std::printf("[control] lag chain of %d stages (mean delay 600 s): largest error against the Erlang CDF %.2e\n",
                stages, worst);
    CHECK(worst < 1e-6);
  }
}

TEST_CASE("one linearly implicit step of a linear lumped body is the implicit Euler step", "[solver][steady]") {
  // One node of capacity C behind a face half-conductance G, cooled by a fixed h A to T_inf: T' = -k (T - T_inf)
  // with k = U / C, U = 1 / (1/G + 1/(h A)) (series conductances, common practice). The implicit Euler step of
  // size dt is T_1 = (T_0 + dt k T_inf) / (1 + dt k) (e.g. Hairer & Wanner 1996, "Solving ODEs II", sec. IV.3, from
  // memory); on a linear system the linearly implicit step (the steady start's first step) is exactly that, and
  // for dt -> infinity it lands on the steady state T_inf.
  Cooling surface;
  Network n;
  n.groups = {"ball"};
  n.groupWeights = {1.0};
  n.channel("convection");
  const double C = 1000.0, G = 10.0, T0 = 310.0;
  n.addNode(C, 0, "ball");
  n.faces.push_back({0, G, 0.01});
  n.surface = &surface;
  NetworkSystem system(n, NetworkSystem::Mode::Transient);
  std::vector<double> y(system.size(), 0.0);
  y[0] = T0;
  const double k = 1.0 / (1.0 / G + 1.0 / 2.0) / C;
  for (double dt : {1.0, 600.0, 3600.0}) {
    std::vector<double> step = linearlyImplicitStep(system, y, 0.0, dt);
    REQUIRE(step.size() == y.size());
    CHECK(step[0] == Approx((T0 + dt * k * 280.0) / (1.0 + dt * k)).epsilon(1e-13));
  }
  std::vector<double> steady = linearlyImplicitStep(system, y, 0.0, 1e15);
  REQUIRE(steady.size() == y.size());
  CHECK(steady[0] == Approx(280.0).epsilon(1e-9));
}
