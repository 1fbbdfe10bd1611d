// The junction of a child segment with its parent (models/body.cpp, Body::attachChildren): second-order grid
// convergence of a whole body, exact conservation across the junction, and the single-cell limit.
// Observed order p = log2(|f1 - f2| / |f2 - f4|) on grids refined 2x and 4x: common practice, no source
// (grid-convergence studies: Roache 1998).
#include <catch2/catch.hpp>
#include <Eigen/Dense>

#include <algorithm>
#include <cmath>
#include <cstdio>
#include <numbers>
#include <string>

#include "solver/newton_solver.hpp"
#include "test_support_body.hpp"

using namespace thermorph;
using namespace thermorph::testing;

namespace {

//! A trunk (cylinder, 30 cm, heated core) with one bare limb (cylinder, 8 cm) joined at 37 % of its length, in
//! 10 degC air with a fixed h; no blood, so the limb is a fin fed through the junction only. Values illustrative.
std::string trunkAndLimb(int refinement, int count = 1, const std::string& extra = "") {
  return R"toml(
title = "trunk and limb"
[run]
initial = "steady"
duration = "1 h"
output_interval = "30 min"
initial_temperature = "37 degC"
grid_refinement = )toml" + std::to_string(refinement) + R"toml(
[tissues.core]
conductivity = 0.5
density = 1050
specific_heat = 3600
metabolic_heat = 10000
perfusion = 0
q10 = 1
[tissues.flesh]
conductivity = 0.45
density = 1050
specific_heat = 3600
metabolic_heat = 0
perfusion = 0
q10 = 1
[[segments]]
name = "trunk"
shape = "cylinder"
length = "30 cm"
axial_cells = 10
layers = [{ tissue = "core", thickness = "3 cm", cells = 3 }, { tissue = "flesh", thickness = "2 cm", cells = 2 }]
surface = { ends = "insulated", convection = "5 W/(m2 K)" }
[[segments]]
name = "limb"
parent = "trunk"
attach_position = 0.37
attach_tissue = "flesh"
count = )toml" + std::to_string(count) + R"toml(
shape = "cylinder"
length = "8 cm"
axial_cells = 10
layers = [{ tissue = "flesh", thickness = "1.5 cm", cells = 3 }]
surface = { ends = "insulated", convection = "3 W/(m2 K)" }
[environment]
temperature = "10 degC"
)toml" + extra;
}

struct JunctionResult {
  double junction;  //!< heat flow from the trunk into one limb [W]
  double tip;       //!< the limb's cross-section mean at 90 % of its length, interpolated [degC]
  double trunkConduction, residual;
};

JunctionResult solveTrunkAndLimb(int refinement, int count = 1) {
  auto body = bodyFromToml(trunkAndLimb(refinement, count));
  RunSummary s = runSteady(*body, silentRun());
  REQUIRE(s.complete);
  const Network& n = body->network();
  const Index limb = segmentIndex(*body, "limb"), trunk = segmentIndex(*body, "trunk");
  const Index conduction = channelIndex(n, "conduction");
  JunctionResult r;
  r.junction = s.flows[limb * n.channels.size() + conduction];
  r.trunkConduction = s.flows[trunk * n.channels.size() + conduction];
  // Cross-section means (cell averages, second order), then linear interpolation between cell centres.
  const SegmentMesh& m = body->segments()[limb];
  std::vector<double> mean(static_cast<std::size_t>(m.nz));
  for (int iz = 0; iz < m.nz; ++iz) {
    double tv = 0.0, v = 0.0;
    for (int ir = 0; ir < m.nr; ++ir) {
      const double vol = m.volume[static_cast<std::size_t>(iz * m.nr + ir)];
      tv += vol * s.finalState[m.node(iz, ir)];
      v += vol;
    }
    mean[static_cast<std::size_t>(iz)] = tv / v - 273.15;
  }
  const double z = 0.9 * m.nz - 0.5;  // in cell-centre units
  const auto k = static_cast<std::size_t>(z);
  r.tip = mean[k] + (z - static_cast<double>(k)) * (mean[k + 1] - mean[k]);
  double total = 0.0;
  for (double f : s.flows) total += std::abs(f);
  r.residual = total;
  return r;
}

}  // namespace

TEST_CASE("A trunk with a limb converges: junction heat flow and limb temperature near the tip, 1x to 8x",
          "[junction][grid][validation]") {
  // Before the junction spread over the parent's attachment layer under the footprint, the junction flow of this
  // kind of body fell with every refinement (a ring source in the parent's (r, z) plane: log divergence).
  JunctionResult r1 = solveTrunkAndLimb(1), r2 = solveTrunkAndLimb(2), r4 = solveTrunkAndLimb(4),
                 r8 = solveTrunkAndLimb(8);
  auto order = [](double a, double b, double c) { return std::log2(std::abs(a - b) / std::abs(b - c)); };
  const double pJunction = order(r1.junction, r2.junction, r4.junction);
  const double pJunctionFine = order(r2.junction, r4.junction, r8.junction);
  const double pTip = order(r1.tip, r2.tip, r4.tip), pTipFine = order(r2.tip, r4.tip, r8.tip);
  std::printf("[junction] trunk + limb, steady, 1x/2x/4x/8x: junction %.7g / %.7g / %.7g / %.7g W (orders %.2f, %.2f); "
              "limb at 0.9 L %.7g / %.7g / %.7g / %.7g degC (orders %.2f, %.2f)\n",
              r1.junction, r2.junction, r4.junction, r8.junction, pJunction, pJunctionFine, r1.tip, r2.tip, r4.tip,
              r8.tip, pTip, pTipFine);
  CHECK(r1.junction > 0.05);  // a junction that carries heat
  // Monotone convergence on every level (a junction into one cell fell at every refinement instead).
  CHECK((r2.junction - r1.junction) * (r4.junction - r2.junction) > 0.0);
  CHECK((r4.junction - r2.junction) * (r8.junction - r4.junction) > 0.0);
  CHECK((r2.tip - r1.tip) * (r4.tip - r2.tip) > 0.0);
  CHECK((r4.tip - r2.tip) * (r8.tip - r4.tip) > 0.0);
  // Each limb ring meets the trunk's flesh at its own depth (the one-layer limb spans the flesh layer). Measured
  // junction 0.1727705 / 0.1725833 / 0.1723434 / 0.1722914 W: the 1x value is already within 0.3 % of the finest,
  // so the 1-2-4 differences (2e-4 W) are not asymptotic (order -0.36); on 2-4-8 the order is 2.21. Tip 1.66, 2.22.
  // (When every ring met the attachment layer as a whole: 0.17692 / 0.17843 / 0.17868 / 0.17877 W, orders 2.56,
  // 1.57, 1x 1 % off.)
  CHECK(pJunctionFine >= 1.8);
  CHECK(pTipFine >= 1.8);
  CHECK(pTipFine <= 2.6);
  // The 1x junction flow within 0.5 % of the Richardson value from the finest grids (Roache 1998; measured 0.29 %).
  const double richardson = r8.junction + (r8.junction - r4.junction) / (std::pow(2.0, pJunctionFine) - 1.0);
  CHECK(std::abs(r1.junction - richardson) <= 0.005 * std::abs(richardson));
}

TEST_CASE("The junction conserves energy exactly: what the trunk gives, the limbs take", "[junction][validation]") {
  // First law (common practice, no source). A pair of limbs (count 2): the trunk's conduction loss equals twice
  // one limb's gain to round-off, in steady state and over a transient run.
  JunctionResult r = solveTrunkAndLimb(2, 2);
  const double mismatch = std::abs(r.trunkConduction + 2.0 * r.junction);
  std::printf("[junction] steady, pair of limbs: trunk conduction %.15g W, limbs 2 x %.15g W, mismatch %.2e W\n",
              r.trunkConduction, r.junction, mismatch);
  CHECK(r.junction > 0.05);
  CHECK(mismatch <= 1e-12 * r.residual);

  std::string toml = trunkAndLimb(2, 2);
  toml.erase(toml.find("initial = \"steady\"\n"), std::string("initial = \"steady\"\n").size());
  auto transient = bodyFromToml(toml);
  RunSummary s = runTransient(*transient, silentRun());
  REQUIRE(s.complete);
  const double relative = std::abs(s.energyBalanceError) / s.throughput;
  std::printf("[junction] transient 1 h from 37 degC, pair of limbs: energy balance error %.3e J of %.4e J (%.2e)\n",
              s.energyBalanceError, s.throughput, relative);
  CHECK(s.throughput > 1e4);
  CHECK(relative <= 1e-11);
}

TEST_CASE("A junction inside one parent cell joins that cell alone, as a single conductance per child ring",
          "[junction]") {
  // The limit the spread junction must keep (geometry, common practice, no source): the footprint of a thin limb
  // at a cell centre lies inside one axial cell, and an attachment layer of one cell is one radial cell, so every
  // ring of the child conducts k A / (dz / 2) to exactly that node and there are no pair terms.
  auto body = bodyFromToml(R"toml(
[run]
duration = "1 min"
output_interval = "1 min"
[[segments]]
name = "trunk"
shape = "cylinder"
length = "30 cm"
axial_cells = 5
layers = [{ tissue = "viscera", thickness = "3 cm", cells = 2 }, { tissue = "muscle", thickness = "2 cm", cells = 1 }]
[[segments]]
name = "limb"
parent = "trunk"
attach_position = 0.5
shape = "cylinder"
length = "10 cm"
axial_cells = 4
layers = [{ tissue = "bone", thickness = "0.4 cm", cells = 1 }, { tissue = "muscle", thickness = "0.6 cm", cells = 2 }]
)toml");
  const Network& n = body->network();
  const SegmentMesh& trunk = body->segments()[segmentIndex(*body, "trunk")];
  const SegmentMesh& limb = body->segments()[segmentIndex(*body, "limb")];
  const Case& c = body->spec();
  const Index expected = trunk.node(2, 2);  // axial cell 2 of 5 holds 0.5; the one muscle cell is radial cell 2
  const double dz = 0.10 / 4, r[] = {0.0, 0.004, 0.007, 0.010};
  const double k[] = {c.tissues.at("bone").conductivity, c.tissues.at("muscle").conductivity,
                      c.tissues.at("muscle").conductivity};
  int found = 0, negative = 0;
  for (const Conductance& g : n.conductances) {
    if (g.conductance < 0.0) ++negative;
    for (int ir = 0; ir < limb.nr; ++ir)
      if (g.a == limb.node(0, ir) && n.nodes[g.b].group != n.nodes[g.a].group) {
        CHECK(g.b == expected);
        const double area = std::numbers::pi * (r[ir + 1] * r[ir + 1] - r[ir] * r[ir]);
        CHECK(g.conductance == Approx(k[ir] * area / (0.5 * dz)).epsilon(1e-12));
        ++found;
      }
  }
  CHECK(found == limb.nr);
  CHECK(negative == 0);
}

namespace {

//! A heated core in a passive flesh shell, 2 cm across, in water held near 10 degC by a very large h (1e5 W/(m2 K):
//! the surface sits within ~1 mK of the water), insulated ends, no blood. As one straight cylinder of 20 cm, or as a
//! 12 cm parent with a child of the same layers and radius continuing it at its distal end (attach_position 1).
//! Values illustrative.
std::string heatedRod(int refinement, bool split, const std::string& childSurface = "") {
  std::string toml = R"toml(
[run]
initial = "steady"
duration = "1 h"
output_interval = "30 min"
initial_temperature = "37 degC"
grid_refinement = )toml" + std::to_string(refinement) + R"toml(
[tissues.core]
conductivity = 0.5
density = 1050
specific_heat = 3600
metabolic_heat = 40000
perfusion = 0
q10 = 1
[tissues.flesh]
conductivity = 0.4
density = 1050
specific_heat = 3600
metabolic_heat = 0
perfusion = 0
q10 = 1
[[segments]]
name = "rod"
shape = "cylinder"
length = ")toml" + std::string(split ? "12 cm" : "20 cm") + R"toml("
axial_cells = )toml" + std::string(split ? "6" : "10") + R"toml(
layers = [{ tissue = "core", thickness = "0.6 cm", cells = 2 }, { tissue = "flesh", thickness = "0.4 cm", cells = 2 }]
surface = { ends = "insulated", convection = "1e5 W/(m2 K)", emissivity = 0 }
[environment]
temperature = "10 degC"
)toml";
  if (split)
    toml += R"toml(
[[segments]]
name = "continuation"
parent = "rod"
attach_position = 1
shape = "cylinder"
length = "8 cm"
axial_cells = 4
layers = [{ tissue = "core", thickness = "0.6 cm", cells = 2 }, { tissue = "flesh", thickness = "0.4 cm", cells = 2 }]
surface = { ends = "insulated", convection = ")toml" + (childSurface.empty() ? std::string("1e5") : childSurface) +
            R"toml( W/(m2 K)", emissivity = 0 }
)toml";
  return toml;
}

//! Exact steady temperature of the straight rod at radius r [degC]: uniform q in the core (r < a, k1), none in the
//! shell (k2), all of it through the surface film: T_s = T_w + q a^2 / (2 R h); shell T_s + q a^2 / (2 k2) ln(R/r);
//! core T(a) + q (a^2 - r^2) / (4 k1) (Incropera et al. 2007, eqs. 3.28 and 3.55 with a composite wall; from memory).
double rodExact(double r) {
  const double q = 40000.0, a = 0.006, R = 0.010, k1 = 0.5, k2 = 0.4, h = 1e5, Tw = 10.0;
  const double Ts = Tw + q * a * a / (2.0 * R * h);
  const double Ta = Ts + q * a * a / (2.0 * k2) * std::log(R / a);
  return r >= a ? Ts + q * a * a / (2.0 * k2) * std::log(R / r) : Ta + q * (a * a - r * r) / (4.0 * k1);
}

struct RodResult {
  double continuationError;  //!< largest |T| difference of the continuation's cells from the straight rod's [K]
  double exactError;         //!< largest |T - exact| over the continuation's proximal cells (skin ring incl.) [K]
  double skinProximal;       //!< the continuation's outermost cell at its proximal end [degC]
};

RodResult solveRod(int refinement) {
  auto straight = bodyFromToml(heatedRod(refinement, false));
  RunSummary a = runSteady(*straight, silentRun());
  REQUIRE(a.complete);
  auto split = bodyFromToml(heatedRod(refinement, true));
  RunSummary b = runSteady(*split, silentRun());
  REQUIRE(b.complete);
  const SegmentMesh& rod = straight->segments()[0];
  const SegmentMesh& child = split->segments()[segmentIndex(*split, "continuation")];
  REQUIRE(rod.nr == child.nr);
  RodResult r{0.0, 0.0, b.finalState[child.node(0, child.skinCell)] - 273.15};
  // Axial cells of the straight rod beyond 12 cm are the continuation's (the same dz on both).
  const int offset = rod.nz - child.nz;
  for (int iz = 0; iz < child.nz; ++iz)
    for (int ir = 0; ir <= child.skinCell; ++ir)
      r.continuationError = std::max(r.continuationError, std::abs(b.finalState[child.node(iz, ir)] -
                                                                   a.finalState[rod.node(iz + offset, ir)]));
  for (int ir = 0; ir <= child.skinCell; ++ir)
    r.exactError = std::max(r.exactError, std::abs(b.finalState[child.node(0, ir)] - 273.15 -
                                                   rodExact(child.radius[static_cast<std::size_t>(ir)])));
  return r;
}

}  // namespace

TEST_CASE("A child continuing its parent with the same layers and radius is one straight cylinder", "[junction][validation]") {
  // Geometry limit (common practice, no source): a rod split into a parent and a child of the same layers, radius
  // and cells, joined at the parent's end, must keep the straight rod's temperatures, here the exact radial profile
  // of a heated core in a shell (rodExact). Each ring of the child meets the parent's cells at its own depth (skin
  // to skin, core to core), so no heat crosses the junction beyond the small change where the child's footprint
  // cuts the parent's surface. When every ring met the parent's attachment layer (before), the child's outer rings
  // were held near core temperature at its proximal face.
  RodResult r1 = solveRod(1), r2 = solveRod(2), r4 = solveRod(4);
  const double p = std::log2(r1.exactError / r2.exactError), pFine = std::log2(r2.exactError / r4.exactError);
  std::printf("[junction] continuing rod 1x/2x/4x: continuation vs straight rod %.3e / %.3e / %.3e K; proximal cells vs "
              "exact %.3e / %.3e / %.3e K (orders %.2f, %.2f); proximal outermost cell %.4f / %.4f / %.4f degC\n",
              r1.continuationError, r2.continuationError, r4.continuationError, r1.exactError, r2.exactError,
              r4.exactError, p, pFine, r1.skinProximal, r2.skinProximal, r4.skinProximal);
  // Measured 2.5e-5 / 6.5e-5 / 1.2e-4 K (the footprint's cut of the parent's surface); all rings to the
  // attachment layer: see DEVELOPERS.md "Whole-body grid convergence".
  CHECK(r1.continuationError <= 1e-3);
  CHECK(r4.continuationError <= 1e-3);
  CHECK(p >= 1.8);
  CHECK(pFine >= 1.8);
}

TEST_CASE("A junction that matches layers by depth conserves energy exactly", "[junction][validation]") {
  // First law (common practice, no source): the continuing rod with its child in a weaker film (100 W/(m2 K)), so
  // heat crosses the junction through every ring: what the parent gives, the child takes, to round-off, steady
  // and over a transient run.
  auto body = bodyFromToml(heatedRod(2, true, "100"));
  RunSummary s = runSteady(*body, silentRun());
  REQUIRE(s.complete);
  const Network& n = body->network();
  const Index conduction = channelIndex(n, "conduction");
  const double parent = s.flows[segmentIndex(*body, "rod") * n.channels.size() + conduction];
  const double child = s.flows[segmentIndex(*body, "continuation") * n.channels.size() + conduction];
  double total = 0.0;
  for (double f : s.flows) total += std::abs(f);
  std::printf("[junction] continuing rod, child in a weaker film: parent conduction %.15g W, child %.15g W, "
              "mismatch %.2e W\n", parent, child, std::abs(parent + child));
  CHECK(std::abs(child) > 0.005);  // measured 0.0118 W
  CHECK(std::abs(parent + child) <= 1e-12 * total);

  std::string toml = heatedRod(2, true, "100");
  toml.erase(toml.find("initial = \"steady\"\n"), std::string("initial = \"steady\"\n").size());
  auto transient = bodyFromToml(toml);
  RunSummary t = runTransient(*transient, silentRun());
  REQUIRE(t.complete);
  const double relative = std::abs(t.energyBalanceError) / t.throughput;
  std::printf("[junction] continuing rod, transient 1 h: energy balance error %.3e J of %.4e J (%.2e)\n",
              t.energyBalanceError, t.throughput, relative);
  CHECK(relative <= 1e-11);
}

namespace {

//! Core temperature (the core segment's innermost layer, volume mean) of cases/cold_feet_demo.toml after 1 h of
//! cooling from 37 degC with every controller off, the trunk on `trunkCells` axial cells.
double coldFeetCore(int trunkCells) {
  Body body(loadCase(THERMORPH_SOURCE_DIR "/cases/cold_feet_demo.toml",
                     {"control.shivering.enabled=off", "control.vasomotor.enabled=off", "control.local.feet.enabled=off",
                      "run.duration=1 h", "segments.trunk.axial_cells=" + std::to_string(trunkCells)}));
  RunSummary s = runTransient(body, silentRun());
  REQUIRE(s.complete);
  const SegmentMesh& m = body.segments()[body.coreSegment()];
  double sum = 0.0, volume = 0.0;
  for (int iz = 0; iz < m.nz; ++iz)
    for (int ir = 0; ir < m.nr; ++ir)
      if (m.layer[static_cast<std::size_t>(ir)] == 0) {
        const double v = m.volume[static_cast<std::size_t>(iz * m.nr + ir)];
        sum += v * s.finalState[m.node(iz, ir)];
        volume += v;
      }
  return sum / volume;
}

}  // namespace

TEST_CASE("The blood of a child's return in its parent does not depend on the parent's axial cells",
          "[junction]") {
  // The legs' superficial return runs in the trunk's superficial veins from their junction (mid-trunk) to the
  // pool; its vessel blood sits at the legs' cold return temperature. Counted over whole junction cells, the blood
  // held there grew by up to 1.5 cells on coarse grids, shifting the body's heat content: the core 1 h into the
  // cooling was +4.8 / +0.9 mK from 160 trunk cells on 10 / 40 cells (first order, 2026-12-04; DEVELOPERS.md
  // "Controller outputs' grid error on the examples"). Reference: the same body on 160 trunk cells (grid
  // refinement, common practice; Roache 1998).
  const double fine = coldFeetCore(160);
  const double d10 = coldFeetCore(10) - fine, d20 = coldFeetCore(20) - fine, d40 = coldFeetCore(40) - fine;
  std::printf("[junction] cold feet core after 1 h, controllers off, minus 160 trunk cells: %.3f / %.3f / %.3f mK on "
              "10 / 20 / 40 cells\n", 1e3 * d10, 1e3 * d20, 1e3 * d40);
  // Measured after the fix: -0.14 / -0.03 / -0.04 mK (what remains is at the level of the run's tolerances).
  CHECK(std::abs(d10) < 0.5e-3);  // was +4.8 mK
  CHECK(std::abs(d20) < 0.2e-3);
  CHECK(std::abs(d40) < 0.2e-3);  // was +0.9 mK
}

TEST_CASE("A wide footprint's junction adds no dense block to the Jacobian - the whole Jacobian and the Newton "
          "solves stay exact",
          "[junction][jacobian]") {
  // A plate 5 cm wide (along the limb's axis) on the 8 cm limb of trunkAndLimb: its proximal rings meet the limb's
  // cells under 5/8 of its length. The pair terms -G_r w_i w_j couple every two cells of a ring's region; as
  // pattern entries they were a dense block (a region cell's row held its whole region: 45 entries here, m^3/3
  // flops per region in any elimination order). In rank-one form (NetworkSystem::junctionTerms) a region cell's row
  // keeps its grid neighbours and the junction rings whose regions hold it.
  // References: central differences of the right-hand side over the dense matrix (common practice, no source);
  // Eigen's dense LU with partial pivoting of the Newton matrix I - gamma J (steady: J), J the whole Jacobian
  // (Golub & Van Loan 2013, sec. 3.4).
  const std::string plate = R"toml(
[[segments]]
name = "paddle"
parent = "limb"
attach_position = 0.5
shape = "plate"
length = "4 cm"
width = "5 cm"
axial_cells = 2
layers = [{ tissue = "flesh", thickness = "0.4 cm", cells = 2 }]
surface = { convection = "5 W/(m2 K)" }
)toml";
  auto body = bodyFromToml(trunkAndLimb(2, 1, plate));
  const Network& network = body->network();
  REQUIRE(!network.junctions.empty());
  std::size_t widest = 0, shares = 0, pairs = 0;  // the largest ring region; shares kept; pairs of region cells
  for (const Junction& j : network.junctions)
    for (const JunctionRing& r : j.rings) {
      widest = std::max(widest, r.shares.size());
      shares += r.shares.size();
      pairs += r.shares.size() * (r.shares.size() - 1) / 2;
    }
  CHECK(widest >= 25);
  {
    // The right-hand side evaluates the pair part in rank-one form, O(m) per ring of m cells, and the network keeps
    // the shares only (no conductance between two cells of one group: the pair part was m^2/2 of them). Reference:
    // the pair part written out as conductances -G_r w_i w_j between every two cells of a ring's region (the
    // definition in Body::attachChildren), on a copy of the network without the rank-one rings, evaluated by the
    // same assembly at the same non-uniform state.
    int negative = 0;  // a negative conductance within a group would be a pair term kept as a conductance
    for (const Conductance& c : network.conductances)
      if (network.nodes[c.a].group == network.nodes[c.b].group && c.conductance < 0.0) ++negative;
    CHECK(negative == 0);
    Network written = network;
    written.junctions.clear();
    for (const Junction& j : network.junctions)
      for (const JunctionRing& r : j.rings)
        for (std::size_t a = 0; a < r.shares.size(); ++a)
          for (std::size_t b = a + 1; b < r.shares.size(); ++b)
            written.addConductance(r.shares[a].first, r.shares[b].first,
                                   -r.conductance * r.shares[a].second * r.shares[b].second);
    std::printf("[junction] pair part: %zu shares kept (%zu pair conductances written out)\n", shares, pairs);
    for (auto mode : {NetworkSystem::Mode::Transient, NetworkSystem::Mode::Steady}) {
      NetworkSystem rankOne(network, mode), pairwise(written, mode);
      std::vector<double> y(rankOne.size());
      for (Index i = 0; i < y.size(); ++i)
        y[i] = i < rankOne.nodeCount() ? 305.0 + 13.0 * std::sin(1.3 * static_cast<double>(i) + 0.4) : 1e3;
      std::vector<double> a(rankOne.size()), b(pairwise.size());
      REQUIRE(a.size() == b.size());
      rankOne.evaluate(0.0, y, a);
      pairwise.evaluate(0.0, y, b);
      // Each node's difference over the scale of its row's flows (sum of |G| |dT| over its terms: here the largest
      // term of the row bounds the round-off of either sum).
      double worst = 0.0, scale = 0.0;
      for (Index i = 0; i < rankOne.nodeCount(); ++i) scale = std::max(scale, std::abs(b[i]));
      for (Index i = 0; i < rankOne.nodeCount(); ++i) worst = std::max(worst, std::abs(a[i] - b[i]) / scale);
      std::printf("[junction] %s right-hand side, rank-one against pair conductances: max difference %.2e of the "
                  "largest rate\n",
                  mode == NetworkSystem::Mode::Transient ? "transient" : "steady", worst);
      CHECK(worst < 1e-12);
    }
  }
  for (auto mode : {NetworkSystem::Mode::Transient, NetworkSystem::Mode::Steady}) {
    const bool transient = mode == NetworkSystem::Mode::Transient;
    const char* name = transient ? "transient" : "steady";
    NetworkSystem system(network, mode);
    // Entries in the longest row of a region cell (the ring's own row and column hold the region's cells in
    // either form: a star, not a block).
    const SparsePattern& p = system.pattern();
    std::vector<std::size_t> count(p.size, 0);
    for (Index k = 0; k < p.nonzeros(); ++k) ++count[p.rowIndex[k]];
    std::size_t longest = 0;
    for (const Junction& j : network.junctions)
      for (const JunctionRing& r : j.rings)
        for (auto [cell, w] : r.shares) longest = std::max(longest, count[cell]);
    std::printf("[junction] %s: widest ring region %zu cells, longest row of a region cell %zu entries; nonzeros %zu "
                "for %zu states\n",
                name, widest, longest, static_cast<std::size_t>(p.nonzeros()), static_cast<std::size_t>(p.size));
    CHECK(longest <= 12);
    CHECK(p.nonzeros() <= 12 * p.size);

    // The whole Jacobian (pattern plus rank-one terms) against central differences, at a non-uniform state.
    std::vector<double> y(system.size());
    for (Index i = 0; i < y.size(); ++i)
      y[i] = i < system.nodeCount() ? 305.0 + 13.0 * std::sin(1.3 * static_cast<double>(i) + 0.4) : 1e3;
    const JacobianCheck c = checkJacobian(system, y, 0.0);
    std::printf("[junction] %s: whole Jacobian against finite differences: max relative error %.2e, %d entries "
                "outside pattern and rank-one terms\n",
                name, c.worstRelative, c.outsidePattern);
    // Measured 5.8e-11 (transient) and 2.6e-11 (steady), the differences' round-off (1e-16 x 300 K / 1e-3 K);
    // 1e-6 before the right-hand side took the pair part in rank-one form.
    CHECK(c.worstRelative <= 1e-9);
    CHECK(c.outsidePattern == 0);

    // The Newton solver's augmented system against a dense LU of the Newton matrix with the whole Jacobian.
    const Index n = system.size();
    std::vector<double> full(n * n), values(p.nonzeros());
    system.denseJacobian(0.0, y, full);
    system.jacobian(0.0, y, values);
    NewtonSolver solver(p, system.nodeCount() + system.controlCount(), transient ? -1 : 2, system.junctionTerms());
    for (double gamma : transient ? std::vector<double>{0.5, 60.0, 3600.0} : std::vector<double>{1.0}) {
      const double alpha = transient ? 1.0 : 0.0, beta = transient ? -gamma : 1.0;
      Eigen::MatrixXd A = alpha * Eigen::MatrixXd::Identity(static_cast<Eigen::Index>(n), static_cast<Eigen::Index>(n));
      for (Index r = 0; r < n; ++r)
        for (Index col = 0; col < n; ++col)
          A(static_cast<Eigen::Index>(r), static_cast<Eigen::Index>(col)) += beta * full[r * n + col];
      Eigen::VectorXd b(static_cast<Eigen::Index>(n));
      for (Index i = 0; i < n; ++i) b(static_cast<Eigen::Index>(i)) = std::cos(0.7 * static_cast<double>(i));
      const Eigen::VectorXd reference = A.partialPivLu().solve(b);
      solver.setMatrix(values, alpha, beta);
      REQUIRE(solver.factor());
      std::vector<double> x(b.data(), b.data() + b.size());
      REQUIRE(solver.solve(x));
      double difference = 0.0;
      for (Index i = 0; i < n; ++i)
        difference = std::max(difference, std::abs(x[i] - reference(static_cast<Eigen::Index>(i))));
      const double relative = difference / reference.lpNorm<Eigen::Infinity>();
      std::printf("[junction] %s Newton solve, gamma %g s: max difference from a dense LU %.2e (relative)\n", name,
                  transient ? gamma : 0.0, relative);
      CHECK(relative < 1e-11);
    }
  }
}
