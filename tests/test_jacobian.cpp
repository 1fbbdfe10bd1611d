// Verification of the analytic network Jacobian (solver/assembly.hpp) against finite differences of evaluate(),
// entry by entry, for every shape, and of a few entries derived by hand.
#include <catch2/catch.hpp>

#include <algorithm>
#include <cmath>
#include <cstdio>
#include <numbers>
#include <string>
#include <vector>

#include "test_support.hpp"

using namespace thermorph;
using namespace thermorph::testing;

namespace {

using std::numbers::pi;

// Tissues with metabolism (Q10 = 2.5, so the source is nonlinear) and perfusion; values invented for the test.
const std::string tissueTables = R"toml(
[run]
initial_temperature = 305
[tissues.flesh]
conductivity = 0.5
density = 1050
specific_heat = 3600
metabolic_heat = 1500
perfusion = 6e-4
q10 = 2.5
[tissues.lard]
conductivity = 0.2
density = 900
specific_heat = 2300
metabolic_heat = 100
perfusion = 1e-4
q10 = 2.5
)toml";

// Pinned arterial supply and a fixed convection coefficient (no radiation, the schema's rule for fixed h).
const std::string tissues = tissueTables + R"toml(
[circulation]
fixed_arterial_temperature = 310.15
[environment]
temperature = 280
convection = 15
)toml";

struct ShapeCase {
  const char* name;
  std::string segment;  //!< [[segments]] tables (whole case text once assembled)
};

const ShapeCase shapeCases[] = {
    {"sphere with a coat", R"toml(
[[segments]]
name = "head"
shape = "sphere"
layers = [{ tissue = "flesh", thickness = 0.03, cells = 4 }, { tissue = "lard", thickness = 0.005, cells = 2 }]
coat = { material = "fur", thickness = 0.01, cells = 2 }
)toml"},
    {"cylinder, 3 axial cells, exposed ends", R"toml(
[[segments]]
name = "leg"
shape = "cylinder"
length = 0.2
axial_cells = 3
layers = [{ tissue = "flesh", thickness = 0.02, cells = 3 }, { tissue = "lard", thickness = 0.004, cells = 2 }]
surface = { ends = "exposed" }
)toml"},
    {"cone, exposed ends", R"toml(
[[segments]]
name = "tail"
shape = "cone"
length = 0.3
radius_proximal = 0.03
radius_distal = 0.012
axial_cells = 3
layers = [{ tissue = "flesh", cells = 3 }, { tissue = "lard", thickness = 0.004, cells = 2 }]
surface = { ends = "exposed", convection = 25 }
)toml"},
    {"plate", R"toml(
[[segments]]
name = "ear"
shape = "plate"
length = 0.08
width = 0.05
thickness = 0.006
axial_cells = 3
layers = [{ tissue = "flesh", cells = 2 }, { tissue = "lard", thickness = 0.001, cells = 2 }]
)toml"},
};

// Whole body: a central blood pool, arterial and venous streams, countercurrent exchange, shunts, a pair of
// legs (count = 2, weighted budgets), and surface exchange by correlations with radiation, sun and a wet skin.
const std::string wholeBody = tissueTables + R"toml(
[[segments]]
name = "trunk"
shape = "sphere"
layers = [{ tissue = "flesh", thickness = 0.05, cells = 3 }, { tissue = "lard", thickness = 0.005, cells = 1 }]
[[segments]]
name = "leg"
parent = "trunk"
count = 2
shape = "cylinder"
length = 0.15
axial_cells = 3
layers = [{ tissue = "flesh", thickness = 0.01, cells = 2 }, { tissue = "skin", thickness = 0.002, cells = 1 }]
vessels = { countercurrent_conductance = 0.05, shunt_flow_max = 1e-7 }
vasomotor = { shunt = 0.5, superficial_return = 0.3 }
surface = { wetted_fraction = 0.3 }
[environment]
temperature = 280
speed = 2
convection = "correlation"
solar_irradiance = 300
)toml";

//! A non-uniform state: temperatures 292-318 K, channel energies of a few kJ [K, J].
std::vector<double> testState(const NetworkSystem& system) {
  std::vector<double> y(system.size());
  for (Index i = 0; i < system.size(); ++i) {
    double x = static_cast<double>(i);
    y[i] = i < system.nodeCount() ? 305.0 + 13.0 * std::sin(1.3 * x + 0.4) : 1e3 * (1.0 + x);
  }
  return y;
}

struct JacobianComparison {
  double worstRelative = 0.0;  //!< max |J - J_fd| / row scale [1]
  int outsidePattern = 0;      //!< FD entries above 1e-9 of the row scale where the pattern has none
  Index states = 0;
};

//! Compare the analytic Jacobian with a central finite difference of evaluate() over the full dense matrix.
JacobianComparison compareWithFiniteDifferences(const NetworkSystem& system, double time) {
  const Index n = system.size();
  std::vector<double> y = testState(system);
  std::vector<double> dense(n * n, 0.0);  // analytic, row-major: the pattern's values and the junctions' rank-one terms
  system.denseJacobian(time, y, dense);
  const std::vector<char> structure = jacobianStructure(system);

  // Central differences: step 1e-3 K on temperatures (the state is ~300 K, rounding ~1e-16 * 300 / 1e-3);
  // energies enter no rate, their step is immaterial. Truncation error of the Q10 source ~ (ln 2.5 / 10)^2 * 1e-6.
  std::vector<double> fd(n * n, 0.0), plus(n), minus(n);
  for (Index col = 0; col < n; ++col) {
    const double step = col < system.nodeCount() ? 1e-3 : 1.0;
    std::vector<double> yp = y, ym = y;
    yp[col] += step;
    ym[col] -= step;
    system.evaluate(time, yp, plus);
    system.evaluate(time, ym, minus);
    for (Index row = 0; row < n; ++row) fd[row * n + col] = (plus[row] - minus[row]) / (2.0 * step);
  }
  // Row scale: the row's largest entry, but not below 1e-3 of the largest entry of all rows of its kind (node
  // rows, channel rows): a channel whose flows cancel identically, as blood circulating in a closed loop, has a
  // zero row whose entries are rounding noise (~1e-16 analytic, ~1e-12 by differences).
  auto rowMax = [&](Index row) {
    double m = 0.0;
    for (Index col = 0; col < n; ++col) m = std::max({m, std::abs(dense[row * n + col]), std::abs(fd[row * n + col])});
    return m;
  };
  double kindMax[2] = {0.0, 0.0};
  for (Index row = 0; row < n; ++row) {
    double& k = kindMax[row < system.nodeCount() ? 0 : 1];
    k = std::max(k, rowMax(row));
  }
  JacobianComparison result;
  result.states = n;
  for (Index row = 0; row < n; ++row) {
    double scale = std::max(rowMax(row), 1e-3 * kindMax[row < system.nodeCount() ? 0 : 1]);
    if (scale == 0.0) continue;
    for (Index col = 0; col < n; ++col) {
      double d = std::abs(dense[row * n + col] - fd[row * n + col]) / scale;
      result.worstRelative = std::max(result.worstRelative, d);
      if (!structure[row * n + col] && std::abs(fd[row * n + col]) > 1e-9 * scale) ++result.outsidePattern;
    }
  }
  return result;
}

}  // namespace

TEST_CASE("Analytic Jacobian matches central finite differences for every shape", "[validation][jacobian]") {
  // Reference: central differences of the right-hand side (common practice, no source). Criterion: every entry
  // within 1e-6 of its row's scale; no FD entry above 1e-9 of the row scale outside the pattern.
  std::vector<ShapeCase> cases;
  for (const ShapeCase& sc : shapeCases) cases.push_back({sc.name, tissues + sc.segment});
  cases.push_back({"whole body, pool, streams, correlations", wholeBody});
  for (const ShapeCase& sc : cases) {
    auto body = bodyFromToml(sc.segment);
    for (auto mode : {NetworkSystem::Mode::Transient, NetworkSystem::Mode::Steady}) {
      NetworkSystem system(body->network(), mode);
      JacobianComparison c = compareWithFiniteDifferences(system, 0.0);
      const char* modeName = mode == NetworkSystem::Mode::Transient ? "transient" : "steady";
      std::printf("[validation] Jacobian %-38s %-9s %3zu states: max relative error %.2e, %d FD entries outside "
                  "the pattern\n",
                  sc.name, modeName, static_cast<std::size_t>(c.states), c.worstRelative, c.outsidePattern);
      INFO(sc.name << " (" << modeName << "): max relative error " << c.worstRelative);
      CHECK(c.states <= 200);
      CHECK(c.worstRelative <= 1e-6);
      CHECK(c.outsidePattern == 0);
    }
  }
}

TEST_CASE("Jacobian entries of a perfused sphere derived by hand", "[validation][jacobian]") {
  // One tissue, 5 equal cells of a sphere of radius R. Conductance between cell centres c_i = (i + 1/2) R/5
  // through the face at r_f = (i + 1) R/5 with a linear gradient (finite-volume face flux, Patankar 1980 ch. 4):
  // G_i,i+1 = k 4 pi r_f^2 / (c_i+1 - c_i).
  // Perfusion conductance omega rho_b c_b V_i (Pennes 1948). Source P Q10^((T - T_ref)/10), derivative
  // P Q10^(...) ln(Q10)/10. Surface node: half-cell conductance G_h = k 4 pi R^2 / (R - c_4) in series with h A.
  const double R = 0.03, k = 0.5, rho = 1050.0, c = 3600.0, q = 1500.0, omega = 6e-4, q10 = 2.5, h = 15.0;
  const double rhoB = 1050.0, cB = 3617.0, Tref = 310.15;  // schema defaults (case_schema.cpp)
  auto body = bodyFromToml(tissues + R"toml(
[[segments]]
name = "ball"
shape = "sphere"
layers = [{ tissue = "flesh", thickness = 0.03, cells = 5 }]
)toml");
  const int n = 5;
  const double dr = R / n;
  auto centre = [&](int i) { return (i + 0.5) * dr; };
  auto volume = [&](int i) { return 4.0 / 3.0 * pi * (std::pow((i + 1) * dr, 3) - std::pow(i * dr, 3)); };
  auto G = [&](int i) { return k * 4.0 * pi * std::pow((i + 1) * dr, 2) / (centre(i + 1) - centre(i)); };  // i, i+1
  std::vector<double> T = {309.0, 308.0, 306.5, 304.0, 300.0};
  auto sourceDerivative = [&](int i) { return q * volume(i) * std::pow(q10, (T[i] - Tref) / 10.0) * std::log(q10) / 10.0; };

  NetworkSystem transient(body->network(), NetworkSystem::Mode::Transient);
  std::vector<double> y(transient.size(), 0.0);
  std::copy(T.begin(), T.end(), y.begin());
  std::vector<double> values(transient.pattern().nonzeros());
  transient.jacobian(0.0, y, values);

  // Interior node 2, transient: dT2'/dT2 = -(G_12 + G_23 + omega rho_b c_b V_2 - dP_2/dT_2) / C_2.
  const double C2 = rho * c * volume(2);
  const double diagonal = -(G(1) + G(2) + omega * rhoB * cB * volume(2) - sourceDerivative(2)) / C2;
  const double offDiagonal = G(2) / C2;  // dT2'/dT3 = G_23 / C_2
  const double e1 = std::abs(jacobianEntry(transient.pattern(), values, 2, 2) / diagonal - 1.0);
  const double e2 = std::abs(jacobianEntry(transient.pattern(), values, 2, 3) / offDiagonal - 1.0);

  // Surface node 4, steady: dQ4/dT4 = -(G_34 + U + omega rho_b c_b V_4) + dP_4/dT_4, U = 1/(1/G_h + 1/(h A)).
  NetworkSystem steady(body->network(), NetworkSystem::Mode::Steady);
  std::vector<double> steadyValues(steady.pattern().nonzeros());
  std::vector<double> steadyState(steady.size(), 310.0);  // tissue cells, then the blood nodes
  std::copy(T.begin(), T.end(), steadyState.begin());
  steady.jacobian(0.0, steadyState, steadyValues);
  const double Gh = k * 4.0 * pi * R * R / (R - centre(4));  // half cell to the surface, face area at R
  const double U = 1.0 / (1.0 / Gh + 1.0 / (h * 4.0 * pi * R * R));
  const double surface = -(G(3) + U + omega * rhoB * cB * volume(4)) + sourceDerivative(4);
  const double e3 = std::abs(jacobianEntry(steady.pattern(), steadyValues, 4, 4) / surface - 1.0);

  std::printf("[validation] Jacobian by hand: interior diagonal %.3e, off-diagonal %.3e, surface diagonal %.3e "
              "(relative errors)\n",
              e1, e2, e3);
  INFO("interior diagonal " << diagonal << ", off-diagonal " << offDiagonal << ", surface " << surface);
  CHECK(e1 <= 1e-12);
  CHECK(e2 <= 1e-12);
  CHECK(e3 <= 1e-12);
}

TEST_CASE("Network terms stored as runs read back as pushed", "[network]") {
  // Reference: the terms pushed, field by field (a storage layout: common practice, no source). A radial layer's
  // cells give one run per kind of term; a term that breaks the pattern starts a new run.
  TermRuns<HeatSource> sources;
  const Index law = 3, channel = 2, modulator = 5;
  std::vector<HeatSource> pushed;
  for (Index i = 0; i < 6; ++i) pushed.push_back({10 + i, 0.5 + static_cast<double>(i), law, channel, modulator});
  pushed.push_back({16, 9.0, law, channel, none});  // another modulator: a new run
  pushed.push_back({40, 1.0, law, channel, none});  // not the next node: a new run
  for (const HeatSource& s : pushed) sources.push_back(s);
  auto same = [](const HeatSource& x, const HeatSource& y) {
    return Index(x.node) == Index(y.node) && x.power == y.power && Index(x.law) == Index(y.law) &&
           Index(x.channel) == Index(y.channel) && Index(x.modulator) == Index(y.modulator);
  };
  // Read back plain (as built), then packed into runs: the same terms by iteration, forEach and index.
  auto readsBack = [&] {
    REQUIRE(sources.size() == pushed.size());
    Index k = 0;
    for (auto it = sources.begin(); it != sources.end(); ++it, ++k) {
      CHECK(it.index() == k);
      CHECK(same(*it, pushed[k]));
      CHECK(same(sources[k], pushed[k]));
    }
    CHECK(k == pushed.size());
    Index visited = 0;
    sources.forEach([&](Index i, const HeatSource& s) {
      CHECK(i == visited);
      CHECK(same(s, pushed[visited]));
      ++visited;
    });
    CHECK(visited == pushed.size());
  };
  CHECK_FALSE(sources.packed());
  readsBack();
  sources.pack();
  CHECK(sources.packed());
  CHECK(sources.runCount() == 3);
  readsBack();
  sources.setValue(2, -1.25);
  CHECK(sources[2].power == -1.25);
  CHECK(sources.value(2) == -1.25);
  sources.pop_back();
  CHECK(sources.runCount() == 2);
  CHECK(same(sources.back(), pushed[6]));
  sources.transform([](HeatSource& s) { s.modulator = 7; });  // one modulator: nodes 10..16 one run
  CHECK(sources.runCount() == 1);
  CHECK(Index(sources[6].modulator) == 7);
  CHECK(Index(sources[6].node) == 16);

  // compact() packs the lists of a network of more than kPlainNodes nodes only; a plain list packs itself at
  // kPlainLimit terms (a large network's set-up never holds the whole plain list).
  for (const Index nodes : {Network::kPlainNodes, Network::kPlainNodes + 1}) {
    Network net;
    for (Index i = 0; i < nodes; ++i) net.addNode(1.0, 0);
    for (Index i = 0; i + 1 < nodes; ++i) net.addConductance(i, i + 1, 2.0 + static_cast<double>(i));
    net.compact();
    CHECK(net.conductances.packed() == (nodes > Network::kPlainNodes));
    CHECK(net.conductances.size() == nodes - 1);
    CHECK(net.conductances[nodes - 2].conductance == 2.0 + static_cast<double>(nodes - 2));
    CHECK(Index(net.conductances[nodes - 2].b) == nodes - 1);
  }
  TermRuns<HeatSource> many;
  for (Index i = 0; i + 1 < TermRuns<HeatSource>::kPlainLimit; ++i) many.push_back({i, 1.0, law, channel, none});
  CHECK_FALSE(many.packed());
  many.push_back({TermRuns<HeatSource>::kPlainLimit - 1, 1.0, law, channel, none});
  CHECK(many.packed());
  CHECK(many.runCount() == 1);

  // A perfused radial layer: one run of conductances, streams and sources for the whole layer.
  auto body = bodyFromToml(tissueTables + R"toml(
[[segments]]
name = "torso"
shape = "cylinder"
axial_cells = 1
length = 0.3
radius = 0.05
layers = [ { tissue = "flesh", thickness = 0.05, cells = 50 } ]
[environment]
convection = 15.0
temperature = 290.0
)toml");
  // (A network of up to Network::kPlainNodes nodes keeps its lists plain: packed here as a large one's are.)
  Network n = body->network();
  CHECK_FALSE(n.sources.packed());
  n.conductances.pack();
  n.advections.pack();
  n.sources.pack();
  std::printf("[network] 50 radial cells: %zu conductances in %zu runs, %zu streams in %zu, %zu sources in %zu\n",
              static_cast<std::size_t>(n.conductances.size()), static_cast<std::size_t>(n.conductances.runCount()),
              static_cast<std::size_t>(n.advections.size()), static_cast<std::size_t>(n.advections.runCount()),
              static_cast<std::size_t>(n.sources.size()), static_cast<std::size_t>(n.sources.runCount()));
  CHECK(n.sources.size() >= 50);
  CHECK(n.sources.runCount() <= 2);
  CHECK(n.conductances.size() >= 49);
  CHECK(n.conductances.runCount() <= 3);
  CHECK(n.advections.size() >= 50);
  CHECK(n.advections.runCount() <= 3);
}
