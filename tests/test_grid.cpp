// Automatic grids, coarse-grid warnings and the refinement study (models/grid.cpp, drivers/refine.cpp), checked
// against the pin fin with an adiabatic tip (Incropera et al. 2007, Table 3.4, case B: q = sqrt(h P k A_c) theta_b
// tanh(mL)); command-line values that the timeline would override (models/case.cpp).
#include <catch2/catch.hpp>

#include <algorithm>
#include <cmath>
#include <cstdio>
#include <filesystem>
#include <fstream>
#include <map>
#include <numbers>
#include <string>

#include <fmt/format.h>

#include "drivers/refine.hpp"
#include "models/body.hpp"
#include "models/environment.hpp"
#include "models/grid.hpp"
#include "test_support_body.hpp"

using namespace thermorph;
using namespace thermorph::testing;

namespace {

using std::numbers::pi;

//! A copper pin (D 1 mm, L 2 cm, insulated tip) in water on a reservoir sphere clamped at 30 degC by very high
//! perfusion from a pinned arterial supply; a fixed h of 5000 W/(m2 K) (forced convection of water over a thin
//! wire: Re ~ 1e3, Nu ~ 10-20, common practice, no source). m = sqrt(4h/(kD)) = 224 1/m, decay length 4.5 mm;
//! Bi = h r / k = 6e-3, so the 1-D fin holds to ~0.2 %.
std::string pinFinInWater(const std::string& axialCells) {
  return R"toml(
title = "pin fin in water"
[run]
initial = "steady"
duration = "1 s"
output_interval = "1 s"
)toml" + copperPinOnClamp() + R"toml(
length = "2 cm"
)toml" + axialCells + R"toml(
layers = [{ tissue = "copper", thickness = "0.5 mm" }]
surface = { ends = "insulated", convection = "5000 W/(m2 K)" }
[environment]
medium = "water"
temperature = "10 degC"
)toml";
}

//! Incropera et al. (2007), Table 3.4 case B (adiabatic tip): q = sqrt(h P k A_c) theta_b tanh(mL) [W].
double adiabaticFin(double thetaB) {
  const double D = 0.001, L = 0.02, k = 398.0, h = 5000.0;
  const double P = pi * D, A = pi * D * D / 4.0, m = std::sqrt(h * P / (k * A));
  return std::sqrt(h * P * k * A) * thetaB * std::tanh(m * L);
}

struct FinResult {
  double q, reference;
};

FinResult solveFin(const Case& c) {
  Body body(c);
  RunSummary s = runSteady(body, silentRun());
  REQUIRE(s.complete);
  const Network& n = body.network();
  const Index pin = segmentIndex(body, "pin"), reservoir = segmentIndex(body, "reservoir");
  const double q = s.flows[pin * n.channels.size() + channelIndex(n, "conduction")];
  const double thetaB = s.finalState[body.segments()[reservoir].node(0, 0)] - (273.15 + 10.0);
  return {q, adiabaticFin(thetaB)};
}

bool anyContains(const std::vector<std::string>& lines, const std::string& a, const std::string& b) {
  for (const std::string& l : lines)
    if (l.find(a) != std::string::npos && l.find(b) != std::string::npos) return true;
  return false;
}

//! `thermorph refine [--steady]` (drivers/refine.cpp) of a case given as text, on the `metrics` selection.
RefineResult refineText(const std::string& text, const std::string& name, const std::vector<std::string>& metrics,
                        bool steady) {
  const std::filesystem::path path = std::filesystem::temp_directory_path() / ("thermorph_test_refine_" + name + ".toml");
  {
    std::ofstream out(path);
    out << text;
  }
  RefineOptions options;
  options.casePath = path.string();
  options.steady = steady;
  options.metrics = metrics;
  RefineResult r = runRefinement(options);
  std::filesystem::remove(path);
  return r;
}

//! `thermorph refine --steady` of a case given as text, on `metrics` (full names): 1x/2x/4x rows.
RefineResult refineSteady(const std::string& text, const std::string& name, const std::vector<std::string>& metrics) {
  RefineResult r = refineText(text, name, metrics, true);
  REQUIRE(r.rows.size() == metrics.size());
  return r;
}

}  // namespace

TEST_CASE("Automatic axial grid of a pin fin in water is within 1 % of Incropera's adiabatic-tip fin", "[grid][validation]") {
  const Case automatic = loadCaseFromString(pinFinInWater(""), "pin.toml");
  const Case coarse = loadCaseFromString(pinFinInWater("axial_cells = 6"), "pin.toml");
  const FinResult a = solveFin(automatic), k = solveFin(coarse);
  const double errorAuto = a.q / a.reference - 1.0, errorCoarse = k.q / k.reference - 1.0;
  std::printf("[grid] pin fin in water: automatic %d axial cells q %.5f W (reference %.5f W, error %.2e); "
              "6 cells q %.5f W (error %.2e)\n",
              automatic.segments[1].axialCells, a.q, a.reference, errorAuto, k.q, errorCoarse);
  CHECK(std::abs(errorAuto) <= 0.01);
  CHECK(automatic.segments[1].axialAuto);
  CHECK(std::abs(errorCoarse) > 0.02);  // the coarse grid is visibly off ...
  // ... and says so: segment, estimated error and the cell count that meets 1 %.
  CHECK(anyContains(coarse.warnings, "segment pin", "axial_cells = 6"));
  CHECK(anyContains(coarse.warnings, "segment pin", "axial cells meet 1 %"));
  CHECK_FALSE(anyContains(automatic.warnings, "segment pin", "axial"));
  // The warning reaches the body's warnings (the run's list, stored in result files).
  Body body(coarse);
  CHECK(anyContains(body.warnings(), "segment pin", "axial_cells = 6"));
}

TEST_CASE("Refinement study of the coarse pin fin: observed order 2 and Richardson value near the fin formula",
          "[grid][validation]") {
  RefineResult r = refineSteady(pinFinInWater("axial_cells = 6"), "pin", {"segments.pin.heat_flow.conduction"});
  const RefineRow& row = r.rows[0];
  const double reference = adiabaticFin(20.0);  // the clamp holds the base at 30 degC over 10 degC water
  std::printf("[grid] refine pin fin: %.5f / %.5f / %.5f W at 6/12/24 cells, order %.3f, Richardson %.5f W, "
              "reference %.5f W (error %.2e)\n",
              row.values[0], row.values[1], row.values[2], row.order, row.extrapolated, reference,
              row.extrapolated / reference - 1.0);
  CHECK(r.factors == std::vector<double>{1.0, 2.0, 4.0});
  CHECK(std::abs(row.order - 2.0) <= 0.2);  // second-order scheme (DEVELOPERS.md)
  CHECK(std::abs(row.extrapolated / reference - 1.0) <= 0.003);  // 1-D fin vs the 2-D body: Bi = 6e-3
  CHECK(std::abs(row.relative - std::abs(row.values[0] / row.values[2] - 1.0)) <= 1e-12);
}

TEST_CASE("Refinement: a storage row near zero is compared with the body's or segment's largest heat flow",
          "[grid]") {
  // A trunk at its steady state in 20 degC water whose water cools by 0.05 K at 60 s: over the 20-min window its
  // storage is a small negative mean (a few % of the metabolic and convective flows). Relative to itself, the 1x
  // grid's storage difference would read as a large grid error; relative to the largest channel flow of the same
  // body or segment it is bounded, by the first law (storage = the sum of the channel flows, on every grid), by
  // the channels' own differences: |d storage| <= sum |d channel| (Incropera et al. 2007, eq. 1.11c, the energy
  // balance of a control volume). The table's footer says which scale is used.
  const std::string text = R"toml(title = "storage near zero (illustrative)"
[run]
initial = "steady"
duration = "20 min"
output_interval = "5 min"
[body]
basal_metabolic_rate = "2 W"
[[segments]]
name = "trunk"
shape = "cylinder"
length = "15 cm"
axial_cells = 2
layers = [{ tissue = "muscle", thickness = "2 cm", cells = 2 }, { tissue = "fat", thickness = "0.4 cm", cells = 1 },
          { tissue = "skin", thickness = "0.2 cm", cells = 1 }]
[environment]
medium = "water"
temperature = "20 degC"
speed = "0.2 m/s"
[[events]]
at = "1 min"
environment = { temperature = "19.95 degC" }
)toml";
  const RefineResult r = refineText(text, "storage", {"body.heat_flow", "segments.trunk.heat_flow"}, false);
  for (const std::string stem : {"body.heat_flow.", "segments.trunk.heat_flow."}) {
    const RefineRow* storage = nullptr;
    double scale = 0.0, channelDifferences = 0.0;
    for (const RefineRow& row : r.rows) {
      if (row.name.rfind(stem, 0) != 0) continue;
      if (row.name == stem + "storage") storage = &row;
      else {
        scale = std::max(scale, std::abs(row.values.back()));
        channelDifferences += std::abs(row.coarseVsFinest);
      }
    }
    REQUIRE(storage != nullptr);
    const double s = storage->values.back(), self = std::abs(storage->coarseVsFinest / s);
    std::printf("[grid] refine storage %s: %.5g / %.5g / %.5g W, largest channel %.4g W; 1x vs fine %.3g %% "
                "(relative to itself %.3g %%; the channels' differences sum to %.3g %%)\n",
                storage->name.c_str(), storage->values[0], storage->values[1], s, scale, 100.0 * storage->relative,
                100.0 * self, 100.0 * channelDifferences / scale);
    REQUIRE(s < 0.0);
    REQUIRE(std::abs(s) < 0.1 * scale);  // the premise: storage small beside the exchange
    CHECK(storage->relative <= channelDifferences / scale * (1.0 + 1e-3) + 1e-6);  // the first-law bound
    CHECK(storage->relative < self);
  }
  CHECK(refineTable(r).find("storage rows (a small difference of the flows in and out) relative to the largest "
                            "|heat flow|") != std::string::npos);
}

TEST_CASE("Refined case multiplies every cell count", "[grid]") {
  const Case c = loadCaseFromString(pinFinInWater("axial_cells = 6"), "pin.toml");
  const Case r = refinedCase(c, 4);
  CHECK(r.segments[1].axialCells == 24);
  CHECK(r.segments[1].layers[0].cells == 4 * c.segments[1].layers[0].cells);
  CHECK(r.segments[0].layers[0].cells == 4);
}

TEST_CASE("run.grid_refinement refines any command's grid: the coarse pin fin approaches Incropera's fin",
          "[grid][validation]") {
  // The key multiplies given and automatic counts alike and the resolved counts are explicit, so the same case
  // file at --set run.grid_refinement=4 is the 4x grid: its fin heat equals the explicit 24-cell grid's (an
  // independent route to the same mesh), and the error against the adiabatic-tip fin (Incropera et al. 2007,
  // Table 3.4, case B) falls by about 16 (second order) from the 6-cell grid.
  const Case coarse = loadCaseFromString(pinFinInWater("axial_cells = 6"), "pin.toml");
  const Case refined = loadCaseFromString(pinFinInWater("axial_cells = 6"), "pin.toml", {"run.grid_refinement=4"});
  const Case explicit24 = loadCaseFromString(pinFinInWater("axial_cells = 24"), "pin.toml",
                                             {"segments.pin.layers.0.cells=" +
                                              std::to_string(4 * coarse.segments[1].layers[0].cells),
                                              "segments.reservoir.layers.0.cells=4"});
  CHECK(refined.segments[1].axialCells == 24);
  CHECK(refined.segments[0].layers[0].cells == 4);
  CHECK_FALSE(refined.segments[1].axialAuto);
  CHECK(refined.run.gridRefinement == 1);  // applied once: the resolved case reloads to the same grid
  const FinResult c = solveFin(coarse), r = solveFin(refined), e = solveFin(explicit24);
  std::printf("[grid] run.grid_refinement=4: pin fin %.6f W (explicit 24 cells %.6f W, 6 cells %.6f W, fin %.6f W)\n",
              r.q, e.q, c.q, r.reference);
  CHECK(std::abs(r.q - e.q) <= 1e-9 * std::abs(e.q));
  const double ratio = (c.q / c.reference - 1.0) / (r.q / r.reference - 1.0);
  CHECK(ratio > 8.0);  // second order: 16; the 2-D body and the clamp shift it a little
  // An automatic grid is multiplied as well.
  const Case automatic = loadCaseFromString(pinFinInWater(""), "pin.toml");
  const Case automatic2 = loadCaseFromString(pinFinInWater(""), "pin.toml", {"run.grid_refinement=2"});
  CHECK(automatic2.segments[1].axialCells == 2 * automatic.segments[1].axialCells);
}

TEST_CASE("A command-line environment value the timeline overrides at t = 0 is refused - later, it warns",
          "[grid][case]") {
  const std::string base = R"(
[run]
duration = "2 h"
[[segments]]
name = "limb"
shape = "cylinder"
length = "10 cm"
layers = [{ tissue = "muscle", thickness = "1 cm" }]
[environment]
temperature = "10 degC"
)";
  const std::string atZero = base + "[[events]]\nat = 0\nenvironment = { speed = \"3 m/s\" }\n";
  const std::string later = base + "[[events]]\nat = \"1 h\"\nenvironment = { speed = \"3 m/s\" }\n";
  // Without a command-line value, no complaint.
  CHECK_NOTHROW(loadCaseFromString(atZero, "t.toml"));
  // The value would never take effect: exit 2 (CaseError) naming the key path.
  try {
    (void)loadCaseFromString(atZero, "t.toml", {"environment.speed=1 m/s"});
    FAIL("expected a TimelineOverrideError");
  } catch (const TimelineOverrideError& e) {
    CHECK(std::string(e.what()).find("environment.speed") != std::string::npos);
    CHECK(std::string(e.what()).find("never take effect") != std::string::npos);
  }
  // Documented precedence: the command-line value holds until the first change in the timeline, with a warning.
  const Case c = loadCaseFromString(later, "t.toml", {"environment.speed=1 m/s"});
  CHECK(c.environment.speed == Approx(1.0));
  CHECK(anyContains(c.warnings, "environment.speed", "holds until t = 3600 s"));
  // A key the timeline never changes: no warning.
  const Case t = loadCaseFromString(later, "t.toml", {"environment.temperature=5 degC"});
  CHECK_FALSE(anyContains(t.warnings, "environment.temperature", "holds"));
  // A ramp from t = 0 runs from the value before it (events[].ramp: "a linear ramp from the values at its start"),
  // so an override of that value is the ramp's start: accepted with a warning, and the air is the override at
  // t = 0 and the mean of the override and the target halfway (linear ramp: common practice, no source).
  const std::string ramp = base + "[[events]]\nat = 0\nramp = \"1 h\"\nenvironment = { temperature = \"30 degC\" }\n";
  Body body(loadCaseFromString(ramp, "t.toml", {"environment.temperature=20 degC"}));
  CHECK(anyContains(body.spec().warnings, "environment.temperature", "is the start of the ramp of events.0"));
  CHECK(body.environment().value(EnvironmentVariable::Temperature, 0.0) == Approx(293.15).epsilon(1e-12));
  CHECK(body.environment().value(EnvironmentVariable::Temperature, 1800.0) == Approx(298.15).epsilon(1e-12));
  CHECK(body.environment().value(EnvironmentVariable::Temperature, 3600.0) == Approx(303.15).epsilon(1e-12));
  // A step at t = 0 still never lets it act.
  CHECK_THROWS_AS(loadCaseFromString(base + "[[events]]\nat = 0\nenvironment = { temperature = \"30 degC\" }\n",
                                     "t.toml", {"environment.temperature=20 degC"}),
                  TimelineOverrideError);
  // A segment's wetted fraction: stepped by an event at t = 0 it never acts (refused, as contact); ramped from t = 0
  // it is the ramp's start (wetted fraction 0.5 at t = 0, 0.25 halfway to the event's 0; linear ramp: common
  // practice, no source).
  const std::string wetStep = base + "[[events]]\nat = 0\nsurface = { limb = { wetted_fraction = 0 } }\n";
  try {
    (void)loadCaseFromString(wetStep, "t.toml", {"segments.limb.surface.wetted_fraction=0.5"});
    FAIL("expected a TimelineOverrideError");
  } catch (const TimelineOverrideError& e) {
    CHECK(std::string(e.what()).find("segments.limb.surface.wetted_fraction") != std::string::npos);
    CHECK(std::string(e.what()).find("never take effect") != std::string::npos);
  }
  const std::string wetRamp = base + "[[events]]\nat = 0\nramp = \"1 h\"\nsurface = { limb = { wetted_fraction = 0 } }\n";
  Body wet(loadCaseFromString(wetRamp, "t.toml", {"segments.limb.surface.wetted_fraction=0.5"}));
  CHECK(anyContains(wet.spec().warnings, "segments.limb.surface.wetted_fraction", "is the start of the ramp"));
  CHECK(wet.environment().wettedFraction(0, 0.0) == Approx(0.5).epsilon(1e-12));
  CHECK(wet.environment().wettedFraction(0, 1800.0) == Approx(0.25).epsilon(1e-12));
}

namespace {

//! A perfused rod (radius 5 cm, length 18 cm, k 0.5 W/(m K), perfusion giving m = 160 1/m from arterial blood pinned
//! at 37 degC) whose lateral surface is insulated by a coat of negligible conductivity, both bare ends exposed to air
//! at 0 degC with a fixed h of 25 W/(m2 K) and no radiation: a 1-D problem with an exact answer (below).
std::string perfusedRodBareEnds(const std::string& axialCells) {
  return R"toml(
title = "perfused rod, bare ends"
[run]
initial = "steady"
duration = "1 s"
output_interval = "1 s"
[circulation]
fixed_arterial_temperature = "37 degC"
[tissues.core]
conductivity = 0.5
density = 1000
specific_heat = 3600
metabolic_heat = 0
perfusion = 3.3704e-3
q10 = 1
[tissues.insulation]
base = "fur"
conductivity = 1e-8
wet_conductivity = 1e-8
[[segments]]
name = "rod"
shape = "cylinder"
length = "18 cm"
)toml" + axialCells + R"toml(
layers = [{ tissue = "core", thickness = "5 cm", cells = 2 }]
coat = { material = "insulation", thickness = "1 cm", cells = 1 }
surface = { ends = "exposed", end_coat = "off", convection = "25 W/(m2 K)", emissivity = 0 }
[environment]
temperature = "0 degC"
)toml";
}

//! Exact heat lost through both ends of the rod [W]: theta = T - T_a obeys k theta'' = w rho_b c_b theta (Pennes
//! 1948 without metabolism), so theta = C cosh(m (z - L/2)); the convective end condition -k theta' = h (theta +
//! T_a - T_inf) gives per end q = A (T_a - T_inf) / (1/h + 1/(k m tanh(m L/2))) (the fin with convective tip,
//! Incropera et al. 2007, Table 3.4 case A, here with the perfusion term in place of the lateral loss).
double perfusedRodEndHeat(double rhoCBlood) {
  const double k = 0.5, w = 3.3704e-3, r = 0.05, L = 0.18, h = 25.0, dT = 37.0;
  const double m = std::sqrt(w * rhoCBlood / k), A = pi * r * r;
  return 2.0 * A * dT / (1.0 / h + 1.0 / (k * m * std::tanh(0.5 * m * L)));
}

double rodConvection(const Case& c) {
  Body body(c);
  RunSummary s = runSteady(body, silentRun());
  REQUIRE(s.complete);
  const Network& n = body.network();
  return -s.flows[segmentIndex(body, "rod") * n.channels.size() + channelIndex(n, "convection")];
}

}  // namespace

TEST_CASE("Exposed ends of a perfused rod: the automatic axial grid meets the exact end heat within 1 %",
          "[grid][validation]") {
  // Before the end faces had their own term the estimate weighted a root's ends by ends / (ends + mL) of the
  // perfusion-dominated fin and chose 4 cells, 30 % low on a trunk with bare ends.
  const Case automatic = loadCaseFromString(perfusedRodBareEnds(""), "rod.toml");
  const Case coarse = loadCaseFromString(perfusedRodBareEnds("axial_cells = 8"), "rod.toml");
  const double rhoC = automatic.circulation.bloodDensity * automatic.circulation.bloodSpecificHeat;
  const double exact = perfusedRodEndHeat(rhoC);
  const double qa = rodConvection(automatic), qc = rodConvection(coarse);
  const std::vector<SegmentGridEstimate> e = estimateGrid(coarse);
  const double estimated = axialGridError(e[0], 0.18, 8);
  std::printf("[grid] perfused rod, bare ends: exact %.5f W; automatic %d cells %.5f W (error %.2e); 8 cells "
              "%.5f W (error %.2e, estimated %.2e)\n",
              exact, automatic.segments[0].axialCells, qa, qa / exact - 1.0, qc, qc / exact - 1.0, estimated);
  CHECK(std::abs(qa / exact - 1.0) <= 0.01);
  CHECK(std::abs(qc / exact - 1.0) > 0.02);  // 8 cells (m dz = 3.6) are visibly off ...
  CHECK(estimated > 0.5 * std::abs(qc / exact - 1.0));  // ... the estimate sees it (same order) ...
  CHECK(anyContains(coarse.warnings, "segment rod", "axial_cells = 8"));  // ... and warns
}

TEST_CASE("A coated trunk with exposed ends converges at second order - its automatic grid is within 1 % of 4x",
          "[grid][validation]") {
  // Grid-convergence study (Roache 1998): a feathered, perfused trunk at -15 degC in a 4 m/s wind (values
  // illustrative). Before the end coat also covered the coat's own annular ends, the warm skin met the exposed
  // face at the corner: 8 % low on the automatic 4 axial cells and an observed order about 0.8 under refinement.
  const std::string text = R"toml(
title = "coated trunk, exposed ends"
[run]
initial = "steady"
duration = "1 s"
output_interval = "1 s"
[circulation]
fixed_arterial_temperature = "38.5 degC"
[[segments]]
name = "trunk"
shape = "cylinder"
length = "18 cm"
layers = [
  { tissue = "viscera", thickness = "3.2 cm" },
  { tissue = "muscle", thickness = "1.2 cm" },
  { tissue = "fat", thickness = "0.4 cm" },
  { tissue = "skin", thickness = "0.2 cm" },
]
coat = { material = "feathers", thickness = "2.5 cm" }
[environment]
temperature = "-15 degC"
speed = "4 m/s"
)toml";
  RefineResult r = refineSteady(text, "trunk", {"segments.trunk.heat_flow.convection"});
  const RefineRow& row = r.rows[0];
  std::printf("[grid] coated trunk, exposed ends: %.5f / %.5f / %.5f W at 1/2/4x, order %.3f, 1x vs 4x %.2e\n",
              row.values[0], row.values[1], row.values[2], row.order, row.relative);
  CHECK(row.relative <= 0.01);
  CHECK(row.order >= 1.4);
  CHECK(row.order <= 2.6);
}

namespace {

//! A limb with a countercurrent exchanger carrying a constricted bare foot at its distal end, arterial blood clamped
//! at 37 degC, steady in -10 degC air and a 1 m/s wind (the cold feet example's limb; values illustrative). The
//! foot's skin perfusion at 0.1 (constricted) leaves it 0.053 mL/min, so the exchanger (G 0.02 W/K) acts on the
//! stream reaching the foot with an NTU of about 6, where the limb's whole stream (2.9 mL/min) has 0.1.
std::string limbWithFoot(const std::string& legCells) {
  return R"toml(
title = "limb with exchanger and constricted foot"
[run]
initial = "steady"
duration = "1 s"
output_interval = "1 s"
[circulation]
fixed_arterial_temperature = "37 degC"
[[segments]]
name = "trunk"
shape = "cylinder"
length = "25 cm"
layers = [
  { tissue = "viscera", thickness = "3.5 cm" },
  { tissue = "muscle",  thickness = "1.5 cm" },
  { tissue = "fat",     thickness = "0.3 cm" },
  { tissue = "skin",    thickness = "0.2 cm" },
]
coat = { material = "fur", thickness = "3 cm" }
surface = { ends = "insulated" }
[[segments]]
name = "leg"
parent = "trunk"
attach_position = 0.5
shape = "cylinder"
length = "12 cm"
)toml" + legCells + R"toml(
layers = [
  { tissue = "bone",   thickness = "0.3 cm" },
  { tissue = "muscle", thickness = "0.7 cm" },
  { tissue = "skin",   thickness = "0.15 cm" },
]
coat = { material = "fur", thickness = "1.5 cm" }
surface = { ends = "insulated" }
vessels = { countercurrent_conductance = "0.02 W/K" }
[[segments]]
name = "foot"
parent = "leg"
attach_position = 1.0
shape = "cylinder"
length = "5 cm"
layers = [
  { tissue = "bone", thickness = "0.25 cm" },
  { tissue = "skin", thickness = "0.25 cm" },
]
vasomotor = { skin_perfusion = 0.1 }
[environment]
medium = "air"
temperature = "-10 degC"
speed = "1 m/s"
relative_humidity = "70 %"
)toml";
}

RefineResult refineLimb(const std::string& legCells) {
  return refineSteady(limbWithFoot(legCells), "limb", {"segments.foot.heat_flow.blood", "segments.foot.heat_flow.convection"});
}

}  // namespace

namespace {

struct FootFlows {
  double blood, convection;
};

FootFlows solveLimb(const std::string& legCells) {
  const Case c = loadCaseFromString(limbWithFoot(legCells), "limb.toml");
  Body body(c);
  RunSummary s = runSteady(body, silentRun());
  REQUIRE(s.complete);
  const Network& n = body.network();
  const Index foot = segmentIndex(body, "foot");
  return {s.flows[foot * n.channels.size() + channelIndex(n, "blood")],
          s.flows[foot * n.channels.size() + channelIndex(n, "convection")]};
}

}  // namespace

TEST_CASE("The exchanger's stream to a constricted child: the automatic limb grid keeps the foot within 1 % of 4x",
          "[grid][validation]") {
  // The leg's exchanger works on the stream that reaches the foot with NTU G / (rho_b c_b F_foot); the whole
  // stream's NTU (0.1) asked for 18 axial cells. Reference: the same limb on 1152 leg cells (grid convergence,
  // Roache 1998; the differences between successive doublings fall by 1.5, 1.9, 2.5, 3.0, 3.5 from 18 cells up,
  // so 1152 cells are within about 0.01 % of the limit), and a refinement study of the automatic grid.
  const Case automatic = loadCaseFromString(limbWithFoot(""), "limb.toml");
  const std::vector<SegmentGridEstimate> est = estimateGrid(automatic);
  REQUIRE(est[1].segment == "leg");
  CHECK(est[1].childStream == "foot");
  CHECK(est[1].childNtu > 4.0);  // 0.02 W/K over 0.053 mL/min of blood (3.8e6 J/(m3 K)): about 6
  CHECK(est[1].ntu < 0.2);
  const int legCells = automatic.segments[1].axialCells;
  CHECK(legCells >= 40);
  const FootFlows fine = solveLimb("axial_cells = 1152");
  for (int n : {legCells, 36, 18}) {
    const FootFlows f = n == legCells ? solveLimb("") : solveLimb("axial_cells = " + std::to_string(n));
    const double blood = std::abs(f.blood / fine.blood - 1.0), loss = std::abs(f.convection / fine.convection - 1.0);
    // What the rule estimates for the foot's blood heat: the leg's error (the child-stream term) over the share.
    const double estimated = axialGridError(est[1], 0.12, n) / est[1].childBloodShare;
    std::printf("[grid] limb, leg %d axial cells: foot blood heat %.3f %% and loss %.3f %% from 1152 cells; "
                "estimated %.2f %% in the blood heat\n", n, 100.0 * blood, 100.0 * loss, 100.0 * estimated);
    if (n == legCells) {
      CHECK(loss <= kGridTargetError);
      CHECK(estimated >= blood);
      CHECK(estimated <= 2.0 * blood);
    } else if (n == 36) {
      CHECK(estimated >= blood);
      CHECK(estimated <= 2.5 * blood);
    } else {
      CHECK(loss > 0.01);  // the whole stream's NTU left the foot's loss off by more than 1 %
    }
  }
  // And against 4x of the automatic grid (every count, `thermorph refine`): the foot's loss within 1 %.
  const RefineResult r = refineLimb("");
  const RefineRow& convection = r.rows[1];
  std::printf("[grid] limb, automatic grid: foot loss %.5f / %.5f / %.5f W at 1/2/4x, 1x vs 4x %.2e\n",
              convection.values[0], convection.values[1], convection.values[2], convection.relative);
  CHECK(convection.relative <= 0.01);
}

TEST_CASE("run.axial_grading = graded: the pin fin on fewer graded cells within 1 % of Incropera's fin",
          "[grid][graded][validation]") {
  // The cheapest automatic axial grid (models/grid.cpp cheapestAxialGrid) against the analytic fin with an adiabatic
  // tip (Incropera et al. 2007, Table 3.4, case B), as the uniform automatic grid above.
  std::string text = pinFinInWater("");
  text.replace(text.find("[run]\n"), 6, "[run]\naxial_grading = \"graded\"\n");
  const Case uniform = loadCaseFromString(pinFinInWater(""), "pin.toml");
  const Case graded = loadCaseFromString(text, "pin.toml");
  CHECK(uniform.segments[1].axialGrading == 1.0);
  CHECK(graded.segments[1].axialGrading > 1.0);
  CHECK(graded.segments[1].axialCells < uniform.segments[1].axialCells);
  const FinResult u = solveFin(uniform), g = solveFin(graded);
  const double errorUniform = u.q / u.reference - 1.0, errorGraded = g.q / g.reference - 1.0;
  // The axial grid's own share of the error: against the same pin on 768 uniform cells (grid convergence, Roache
  // 1998); the rest (about 0.5 % on both grids) is the model's against the 1-D fin (one radial cell, Bi 6e-3).
  const FinResult fine = solveFin(loadCaseFromString(pinFinInWater("axial_cells = 768"), "pin.toml"));
  const double axialUniform = std::abs(u.q / fine.q - 1.0), axialGraded = std::abs(g.q / fine.q - 1.0);
  const std::vector<SegmentGridEstimate> est = estimateGrid(graded);
  const double estimated = axialGridError(est[1], 0.02, graded.segments[1].axialCells, graded.segments[1].axialGrading);
  std::printf("[grid] pin fin in water: uniform %d cells error %.2e (axial %.2e); graded %d cells Q = %g error %.2e "
              "(axial %.2e, estimated %.2e)\n",
              uniform.segments[1].axialCells, errorUniform, axialUniform, graded.segments[1].axialCells,
              graded.segments[1].axialGrading, errorGraded, axialGraded, estimated);
  const double estimatedUniform = axialGridError(estimateGrid(uniform)[1], 0.02, uniform.segments[1].axialCells);
  std::printf("[grid] pin fin in water: uniform estimate %.2e for axial %.2e\n", estimatedUniform, axialUniform);
  CHECK(std::abs(errorGraded) <= 0.01);
  // The graded fin term is 1 % low here (0.422 % measured, 0.417 % estimated; the uniform one 0.434 % against its
  // 0.47 %): within 1.1 times the estimate, and the estimate within 6 times the error (our factors).
  CHECK(axialGraded <= 1.1 * estimated);
  CHECK(estimated <= 6.0 * axialGraded);
  // Bad values are refused with the key path (exit 2 at the command line: tests/e2e_grid.sh).
  std::string bad = pinFinInWater("");
  bad.replace(bad.find("[run]\n"), 6, "[run]\naxial_grading = \"auto\"\n");
  try {
    loadCaseFromString(bad, "pin.toml");
    FAIL("axial_grading = \"auto\" accepted");
  } catch (const std::exception& e) {
    CHECK_THAT(e.what(), Catch::Contains("run.axial_grading") && Catch::Contains("\"auto\" is not one of: uniform, graded"));
  }
}

TEST_CASE("The exchanger's stream to a constricted child on graded leg cells: the estimate bounds the foot's error",
          "[grid][graded][validation]") {
  // The same limb, its leg graded towards the trunk (axial_grading Q, the longest cells at the distal end, where the
  // foot joins). Reference: the foot's blood heat converged by grid refinement, the Richardson extrapolation of
  // 576 and 1152 uniform leg cells for a second-order scheme (Richardson 1911; Roache 1998, sec. 5.4), which
  // differs from the 1152-cell value by under 0.01 % (checked below). The graded estimate (gradedAxialGridError's
  // child-stream term, over the child's blood share as in the uniform check above) must bound the measured error
  // and stay within a factor 6 of it where the error is asymptotic (1x error under 2 %; the factor is ours, the
  // uniform rule's margin at the counts it lands on is 2-2.5, above).
  const Case automatic = loadCaseFromString(limbWithFoot(""), "limb.toml");
  const std::vector<SegmentGridEstimate> est = estimateGrid(automatic);
  REQUIRE(est[1].childStream == "foot");
  CHECK(est[1].childAttach == 1.0);
  const double f576 = solveLimb("axial_cells = 576").blood, f1152 = solveLimb("axial_cells = 1152").blood;
  const double reference = f1152 + (f1152 - f576) / 3.0;  // Richardson, order 2
  std::printf("[grid] limb, foot blood heat on 576 / 1152 uniform leg cells %.6f / %.6f W, Richardson %.6f W\n", f576,
              f1152, reference);
  CHECK(std::abs(f1152 / reference - 1.0) < 1e-4);
  for (double q : {10.0, 30.0, 100.0})
    for (int n : {20, 40, 80, 160}) {
      const double blood = solveLimb(fmt::format("axial_cells = {}\naxial_grading = {}", n, q)).blood;
      const double measured = std::abs(blood / reference - 1.0);
      const double estimated = axialGridError(est[1], 0.12, n, q) / est[1].childBloodShare;
      std::printf("[grid] limb, leg %d axial cells graded Q = %g: foot blood heat %.3f %% from Richardson; estimated "
                  "%.2f %%\n", n, q, 100.0 * measured, 100.0 * estimated);
      CHECK(estimated >= measured);
      if (measured < 0.02) CHECK(estimated <= 6.0 * measured);
    }
}

TEST_CASE("A bare foot on a furred trunk in water: the automatic grid grades the corner and is within 1 % of 4x",
          "[grid][validation]") {
  // An invented 3 cm bare foot on a furred trunk (arterial blood held at 37 degC) in 10 degC water at 0.5 m/s
  // (values illustrative): the foot's skin
  // has a Biot length k/h of about 0.06 mm, and the trunk's warm skin under the fur meets the foot's cold surface at
  // the junction's rim. The heat conducted into the foot converges only on cells of a fraction of k/h at that corner
  // (README, Grid). Criterion of issue 9: within 1 % of the grid refined 4x (`thermorph refine`; Roache 1998); a
  // uniform grid of the same foot misses by more than 10 % and is named (tests/test_grid_weights.cpp).
  auto text = [](const std::string& footGrid, const std::string& skinCells) {
    return "title = \"bare foot on a furred trunk\"\n[run]\nduration = 600\n[circulation]\n"
           "fixed_arterial_temperature = 310.15\n[[segments]]\nname = \"trunk\"\n"
           "shape = \"cylinder\"\nlength = 0.16\nlayers = [{ tissue = \"muscle\", thickness = 0.03 }, "
           "{ tissue = \"skin\", thickness = 0.0015 }]\ncoat = { material = \"fur\", thickness = 0.012 }\n"
           "[[segments]]\nname = \"foot\"\nparent = \"trunk\"\nattach_position = 0.8\nshape = \"cylinder\"\n"
           "length = 0.03\n" + footGrid + "layers = [{ tissue = \"bone\", thickness = 0.002 }, "
           "{ tissue = \"skin\", thickness = 0.0015" + skinCells + " }]\n"
           "[environment]\nmedium = \"water\"\ntemperature = 283.15\nspeed = 0.5\n";
  };
  const std::vector<std::string> metric{"segments.foot.heat_flow.conduction"};
  const RefineRow automatic = refineSteady(text("", ""), "corner_auto", metric).rows[0];
  const RefineRow uniform = refineSteady(text("axial_cells = 72\n", ", cells = 2"), "corner_uniform", metric).rows[0];
  std::printf("[grid] bare foot on a furred trunk in water, conduction into the foot: automatic %.5f / %.5f / %.5f W "
              "(1x vs 4x %.2f %%, order %.2f); uniform 72 x 2 %.5f / %.5f / %.5f W (%.1f %% below the automatic 4x)\n",
              automatic.values[0], automatic.values[1], automatic.values[2], 100.0 * automatic.relative,
              automatic.order, uniform.values[0], uniform.values[1], uniform.values[2],
              100.0 * (1.0 - uniform.values[0] / automatic.values[2]));
  CHECK(automatic.relative <= 0.01);
  CHECK(1.0 - uniform.values[0] / automatic.values[2] > 0.1);
  // Both grids approach one value: the uniform grid's 4x lies between its 1x and the automatic 4x.
  CHECK(uniform.values[2] > uniform.values[0]);
  CHECK(uniform.values[2] < automatic.values[2] * 1.005);
}


namespace {

//! The perfused limb of test_support_body.hpp with the exchanger's NTU on its whole flow (blood 1050 kg/m3,
//! 3617 J/(kg K): the defaults).
std::string ownStreamLimb(double ntu, const std::string& axialCells) {
  return perfusedExchangerLimb(ntu * 1050.0 * 3617.0 * 0.002 * pi * 0.01 * 0.01 * 0.3, axialCells);
}

double ownStreamBloodHeat(double ntu, const std::string& axialCells) {
  const Case c = loadCaseFromString(ownStreamLimb(ntu, axialCells), "limb.toml");
  Body body(c);
  RunSummary s = runSteady(body, silentRun());
  REQUIRE(s.complete);
  return s.flows[segmentIndex(body, "limb") * body.network().channels.size() + channelIndex(body.network(), "blood")];
}

}  // namespace

TEST_CASE("The exchanger on a segment's own perfusion: the estimate bounds its error, the automatic grid meets 1 %",
          "[grid][exchanger]") {
  // The blood a limb's own tissue draws along its length leaves the artery at the local arterial temperature, so the
  // exchanger's discretisation costs it less than a stream that passes through to a child (0.5 (NTU/N)^2, the
  // counterflow of Incropera et al. 2007, Table 11.3; tests/test_whole_body.cpp): kOwnStreamErrorConstant
  // (NTU/N)^2. Reference: the same limb on 2560 uniform cells (grid convergence, common practice, no source; the
  // errors fall at order 1.8-2 from 20 to 160 cells, so 2560 cells are within about 1e-5 of the limit).
  // Criteria: the estimate is at least the measured error of the blood heat (the limb's whole loss) and at most
  // 10 times it at 20-80 cells; the automatic grid is within run.grid_tolerance (default 1 %) of the reference.
  for (double ntu : {1.0, 3.0, 10.0, 40.0}) {
    const Case automatic = loadCaseFromString(ownStreamLimb(ntu, ""), "limb.toml");
    const std::vector<SegmentGridEstimate> est = estimateGrid(automatic);
    REQUIRE(est.size() == 1);
    CHECK(std::abs(est[0].ntu / ntu - 1.0) < 1e-9);
    CHECK(est[0].ownStreamShare == Approx(1.0));
    const double reference = ownStreamBloodHeat(ntu, "axial_cells = 2560");
    for (int n : {20, 40, 80}) {
      const double error = std::abs(ownStreamBloodHeat(ntu, "axial_cells = " + std::to_string(n)) / reference - 1.0);
      const double estimated = axialGridError(est[0], 0.3, n);
      std::printf("[grid] own-stream limb NTU %4.1f, %3d cells: blood heat error %.3e, estimated %.3e (ratio %.2f)\n",
                  ntu, n, error, estimated, estimated / error);
      CHECK(estimated >= error);
      CHECK(estimated <= 10.0 * error);
    }
    const int cells = automatic.segments[0].axialCells;
    const double error = std::abs(ownStreamBloodHeat(ntu, "") / reference - 1.0);
    std::printf("[grid] own-stream limb NTU %4.1f: automatic %d cells, blood heat error %.3e\n", ntu, cells, error);
    CHECK(error <= 0.01);
  }
}

TEST_CASE("Refinement study: heat flows that vanish inside the body are zero to round-off, not a grid error", "[grid]") {
  // The whole body's blood and conduction flows are transfers between its own parts: they sum to zero (energy
  // conservation, common practice, no source), about 1e-14 W of round-off on every grid. The table showed their
  // relative 1x-vs-4x difference (108 % in a trial); it now shows '-' there and a number for a segment's flow.
  const std::string text = R"toml(
title = "trunk and limb, pooled blood"
[run]
initial = "steady"
duration = "1 s"
output_interval = "1 s"
[body]
basal_metabolic_rate = "kleiber"
[[segments]]
name = "trunk"
shape = "cylinder"
length = "20 cm"
axial_cells = 4
layers = [
  { tissue = "viscera", thickness = "3 cm", cells = 2 },
  { tissue = "muscle", thickness = "1 cm", cells = 2 },
  { tissue = "skin", thickness = "0.2 cm", cells = 1 },
]
surface = { ends = "insulated" }
[[segments]]
name = "limb"
parent = "trunk"
attach_position = 1.0
shape = "cylinder"
length = "12 cm"
axial_cells = 4
layers = [
  { tissue = "bone", thickness = "0.4 cm", cells = 1 },
  { tissue = "muscle", thickness = "0.8 cm", cells = 2 },
  { tissue = "skin", thickness = "0.2 cm", cells = 1 },
]
[environment]
temperature = "10 degC"
speed = "1 m/s"
)toml";
  RefineResult r = refineSteady(text, "pooled",
                                {"body.heat_flow.blood", "body.heat_flow.conduction", "segments.limb.heat_flow.conduction",
                                 "body.heat_flow.convection"});
  std::map<std::string, RefineRow> rows;
  for (const RefineRow& row : r.rows) {
    std::printf("[grid] refine %s: %.3e / %.3e / %.3e, 1x vs 4x %.3g\n", row.name.c_str(), row.values[0],
                row.values[1], row.values[2], row.relative);
    rows[row.name] = row;
  }
  REQUIRE(rows.size() == 4);
  const double scale = std::abs(rows["body.heat_flow.convection"].values[2]);
  REQUIRE(scale > 0.1);
  for (const char* name : {"body.heat_flow.blood", "body.heat_flow.conduction"}) {
    for (double v : rows[name].values) CHECK(std::abs(v) <= 1e-9 * scale);
    CHECK(std::isnan(rows[name].relative));
    CHECK(std::isnan(rows[name].order));
  }
  const RefineRow& limb = rows["segments.limb.heat_flow.conduction"];
  CHECK(std::abs(limb.values[2]) > 1e-3);  // the limb's own conduction from the trunk: a real flow ...
  CHECK(std::isfinite(limb.relative));     // ... with a grid difference
  CHECK(std::isfinite(rows["body.heat_flow.convection"].relative));
  CHECK(refineTable(r).find("zero to round-off") != std::string::npos);
}
