#pragma once
//! Helpers of the whole-body tests: segment and channel lookup, weighted heat content, integration from a given
//! state, finite-difference Jacobian comparison and case-error capture.
#include <algorithm>
#include <cmath>
#include <stdexcept>
#include <string>
#include <vector>

#include "test_support.hpp"

namespace thermorph::testing {

//! Index of segment `name` in Body::segments() (the segment's network group).
inline Index segmentIndex(const Body& body, const std::string& name) {
  for (Index g = 0; g < body.segments().size(); ++g)
    if (body.segments()[g].name == name) return g;
  throw std::invalid_argument("no segment " + name);
}

//! Index of the budget channel `name`.
inline Index channelIndex(const Network& network, const std::string& name) {
  for (Index c = 0; c < network.channels.size(); ++c)
    if (network.channels[c] == name) return c;
  throw std::invalid_argument("no channel " + name);
}

//! Copies a node stands for: the weight of its group [1].
inline double nodeWeight(const Network& network, Index node) {
  return network.groupWeights.at(network.nodes.at(node).group);
}

//! Heat capacity of the whole body, sum of w C over the nodes [J/K].
inline double weightedCapacity(const Network& network) {
  double sum = 0.0;
  for (Index i = 0; i < network.nodes.size(); ++i) sum += nodeWeight(network, i) * network.nodes[i].capacity;
  return sum;
}

//! Capacity-weighted mean temperature sum(w C T) / sum(w C) [K]; `temperatures` holds at least the nodes.
inline double capacityWeightedMean(const Network& network, std::span<const double> temperatures) {
  double sum = 0.0;
  for (Index i = 0; i < network.nodes.size(); ++i)
    sum += nodeWeight(network, i) * network.nodes[i].capacity * temperatures[i];
  return sum / weightedCapacity(network);
}

//! Body total of one channel, sum over groups of w_g times the group's flow [W]; `flows` is [groups x channels].
inline double bodyChannelTotal(const Network& network, std::span<const double> flows, Index channel) {
  double sum = 0.0;
  for (Index g = 0; g < network.groups.size(); ++g)
    sum += network.groupWeights[g] * flows[g * network.channels.size() + channel];
  return sum;
}

//! Integrate a transient system from `state` (nodes then channel energies) to each of `times` with the given
//! tolerances; the full state at each time ([times.size()][system.size()]).
inline std::vector<std::vector<double>> integrateFrom(const NetworkSystem& system, std::span<const double> state,
                                                     std::span<const double> times, double rtol, double atol) {
  IntegratorOptions options;
  options.rtol = rtol;
  options.atol.assign(system.size(), atol);
  for (Index i = system.nodeCount(); i < system.size(); ++i) options.atol[i] = 1e30;  // quadratures, as runTransient
  Integrator integrator(system, state, 0.0, options);
  std::vector<std::vector<double>> out;
  for (double t : times) {
    integrator.advanceTo(t);
    out.emplace_back(integrator.state().begin(), integrator.state().end());
  }
  return out;
}

//! Analytic Jacobian against central finite differences of evaluate() over the full dense matrix.
struct JacobianCheck {
  double worstRelative = 0.0;  //!< max |J - J_fd| over the entry's scale (see checkJacobian) [1]
  int outsidePattern = 0;      //!< FD entries above 1e-9 of the row scale where the pattern has none
  Index states = 0;
  std::vector<double> values;  //!< analytic values in pattern order
};

//! Compare at `state`; temperature steps of 1e-3 K (state ~300 K, round-off ~1e-16 * 300 / 1e-3 relative).
//! `channelFloor`: least scale of a channel (transient energy) row [W/K], e.g. rho c Q of the circulation.
//! `controlStep`: the difference step of the controller states' columns.
inline JacobianCheck checkJacobian(const NetworkSystem& system, std::span<const double> state, double time,
                                   double channelFloor = 0.0, double controlStep = 1e-3) {
  const Index n = system.size();
  const SparsePattern& p = system.pattern();
  JacobianCheck result;
  result.states = n;
  result.values.resize(p.nonzeros());
  system.jacobian(time, state, result.values);
  std::vector<double> dense(n * n, 0.0), fd(n * n, 0.0), plus(n), minus(n);
  system.denseJacobian(time, state, dense);  // the pattern's values plus the junctions' rank-one terms
  const std::vector<char> structure = jacobianStructure(system);
  std::vector<double> y(state.begin(), state.end());
  for (Index col = 0; col < n; ++col) {
    // Temperatures ~300 K, controller states ~1 (small enough not to cross a clamp of a chained controller).
    const bool control = col >= system.nodeCount() && col < system.nodeCount() + system.controlCount();
    const double step = control ? controlStep : 1e-3;
    const double saved = y[col];
    y[col] = saved + step;
    system.evaluate(time, y, plus);
    y[col] = saved - step;
    system.evaluate(time, y, minus);
    y[col] = saved;
    for (Index row = 0; row < n; ++row) fd[row * n + col] = (plus[row] - minus[row]) / (2.0 * step);
  }
  // Scale of an entry: the largest of its row; for channel rows at least `channelFloor`, so that a channel whose
  // derivative vanishes identically (blood that only moves heat inside the body) is judged against the size of
  // its terms, not against its own round-off.
  std::vector<double> rowScale(n, 0.0);
  for (Index row = 0; row < n; ++row)
    for (Index col = 0; col < n; ++col)
      rowScale[row] = std::max({rowScale[row], std::abs(dense[row * n + col]), std::abs(fd[row * n + col])});
  for (Index row = 0; row < n; ++row) {
    const double scale = row >= system.nodeCount() ? std::max(rowScale[row], channelFloor) : rowScale[row];
    if (scale == 0.0) continue;
    for (Index col = 0; col < n; ++col) {
      result.worstRelative = std::max(result.worstRelative, std::abs(dense[row * n + col] - fd[row * n + col]) / scale);
      if (!structure[row * n + col] && std::abs(fd[row * n + col]) > 1e-9 * scale) ++result.outsidePattern;
    }
  }
  return result;
}

//! The steady state of `body` and its flows: per group and channel [W] ([groups x channels]) and the face
//! temperatures [K], from NetworkSystem::groupFlows.
struct SteadyFlows {
  std::vector<double> flows, faces;
};
inline SteadyFlows steadyGroupFlows(const Body& body) {
  const std::vector<double> t = steadyTemperatures(body);
  NetworkSystem system(body.network(), NetworkSystem::Mode::Steady);
  const Network& n = body.network();
  SteadyFlows out{std::vector<double>(n.groups.size() * n.channels.size()), std::vector<double>(n.faces.size())};
  std::vector<double> storage(n.groups.size());
  system.groupFlows(0.0, t, out.flows, storage, out.faces);
  return out;
}

//! A leg-like fin whose exchanger works on its own perfusion (no child): a cylinder of 0.3 m, radius 1 cm, perfusion
//! 0.002 1/s drawn all along it, arterial supply pinned at 37 degC, h 500 W/(m2 K) to a 0 degC bath, insulated
//! ends, artery-vein conductance `conductance` [W/K]; `axialCells` a TOML line (empty: chosen automatically).
//! Its whole flow is 0.002 pi (0.01)^2 0.3 m3/s.
inline std::string perfusedExchangerLimb(double conductance, const std::string& axialCells) {
  return R"(
[circulation]
fixed_arterial_temperature = "37 degC"
[tissues.flesh]
conductivity = 0.5
density = 1000
specific_heat = 4000
metabolic_heat = 0
perfusion = 0.002
q10 = 1
[[segments]]
name = "limb"
shape = "cylinder"
length = 0.3
)" + axialCells + R"(
layers = [{ tissue = "flesh", thickness = 0.01, cells = 4 }]
surface = { ends = "insulated", convection = 500 }
vessels = { countercurrent_conductance = )" + num(conductance) + R"(, superficial_conductance = 0 }
[environment]
temperature = "0 degC"
)";
}

//! Message of the CaseError thrown while loading `toml` and building its body; empty when both succeed.
inline std::string caseErrorMessage(const std::string& toml) {
  try {
    bodyFromToml(toml);
  } catch (const CaseError& e) {
    return e.what();
  }
  return "";
}

}  // namespace thermorph::testing
