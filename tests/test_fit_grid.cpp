// The grid check of a fit (drivers/fit_grid.cpp, `thermorph fit --grid-check N`): the first-order shift of the
// fitted values on a refined grid, from one refined run and the fit's own Jacobian. Checked against (1) the
// closed-form weighted straight-line fit, where the Gauss-Newton step is exact, and (2) actual refits of a pin
// fin fitted on a coarse grid, where the shift is large and a refit on the fine grid is cheap.
#include <catch2/catch.hpp>

#include <cmath>
#include <random>

#include <fmt/format.h>

#include "drivers/fit.hpp"
#include "drivers/observed.hpp"
#include "test_support.hpp"

using namespace thermorph;
using namespace thermorph::testing;

TEST_CASE("Grid check, linear limit: the least-squares shift equals the closed-form refit of a weighted straight line",
          "[fit][gridcheck]") {
  // Model y = a + b t (linear in a, b), weights 1/sd^2; the "fine grid" adds a change e(t) = 0.3 + 0.02 t^2 that
  // does not depend on a, b. The optimum then moves by exactly the weighted straight-line fit of -e: slope
  // -Sw(t - tw)(e - ew) / Sw(t - tw)^2, intercept -ew - slope tw (weighted means tw, ew; Draper & Smith 1998,
  // sec. 1.2 and 9.2, from memory). The first-order step is exact here.
  const int m = 25;
  std::vector<double> t(m), sd(m), e(m);
  for (int i = 0; i < m; ++i) {
    t[i] = 0.5 * i;
    sd[i] = 0.05 * (1.0 + 0.1 * (i % 4));
    e[i] = 0.3 + 0.02 * t[i] * t[i];
  }
  double sw = 0, st = 0, se = 0;
  for (int i = 0; i < m; ++i) {
    const double w = 1.0 / (sd[i] * sd[i]);
    sw += w;
    st += w * t[i];
    se += w * e[i];
  }
  const double tw = st / sw, ew = se / sw;
  double sxy = 0, sxx = 0;
  for (int i = 0; i < m; ++i) {
    const double w = 1.0 / (sd[i] * sd[i]);
    sxy += w * (t[i] - tw) * (e[i] - ew);
    sxx += w * (t[i] - tw) * (t[i] - tw);
  }
  const double slope = -sxy / sxx, intercept = -ew - slope * tw;
  // The weighted Jacobian d((a + b t - y) / sd)/d(a, b) and the weighted change e / sd.
  std::vector<double> J, change;
  for (int i = 0; i < m; ++i) {
    J.push_back(1.0 / sd[i]);
    J.push_back(t[i] / sd[i]);
    change.push_back(e[i] / sd[i]);
  }
  std::vector<double> shift = leastSquaresShift(J, 2, change);
  REQUIRE(shift.size() == 2);
  fmt::print("Grid check, linear limit: shift a {:.12g} (closed form {:.12g}), b {:.12g} ({:.12g})\n", shift[0], intercept,
             shift[1], slope);
  CHECK(shift[0] == Approx(intercept).epsilon(1e-10));
  CHECK(shift[1] == Approx(slope).epsilon(1e-10));
  // A held parameter (at a bound): b fixed, a moves by the weighted mean of -e (the one-parameter fit).
  std::vector<double> heldShift = leastSquaresShift(J, 2, change, {false, true});
  REQUIRE(heldShift.size() == 2);
  CHECK(heldShift[0] == Approx(-ew).epsilon(1e-10));
  CHECK(heldShift[1] == 0.0);
  // A prior row on a (an extra residual (a - mean) / sd_prior that the grid does not move) pulls the shift of a
  // towards 0: with a prior of SD s_p, the normal equations gain 1/s_p^2 on a's diagonal.
  std::vector<double> Jp = J, cp = change;
  const double sp = 0.01;
  Jp.push_back(1.0 / sp);
  Jp.push_back(0.0);
  cp.push_back(0.0);
  std::vector<double> priorShift = leastSquaresShift(Jp, 2, cp);
  REQUIRE(priorShift.size() == 2);
  // Closed form: [[sw + 1/sp^2, st], [st, stt]] (a, b) = -(se, ste).
  double stt = 0, ste = 0;
  for (int i = 0; i < m; ++i) {
    const double w = 1.0 / (sd[i] * sd[i]);
    stt += w * t[i] * t[i];
    ste += w * t[i] * e[i];
  }
  const double a11 = sw + 1.0 / (sp * sp), det = a11 * stt - st * st;
  CHECK(priorShift[0] == Approx((-se * stt + st * ste) / det).epsilon(1e-9));
  CHECK(priorShift[1] == Approx((-a11 * ste + st * se) / det).epsilon(1e-9));
  // Collinear columns: no shift.
  std::vector<double> collinear;
  for (int i = 0; i < m; ++i) {
    collinear.push_back(t[i] / sd[i]);
    collinear.push_back(2.0 * t[i] / sd[i]);
  }
  CHECK(leastSquaresShift(collinear, 2, change).empty());
}

namespace {

//! A copper pin (D 1 mm, L 2 cm, insulated tip) in water on a reservoir clamped near 30 degC (as in
//! tests/test_grid.cpp): m = sqrt(4h/(kD)) = 224 1/m, mL = 4.5, so 6 axial cells (m dz = 0.75) miss the junction
//! heat flow by about (m dz)^2/8 = 7 % (README, Grid); h and k free.
std::string pinFin() {
  return R"toml(
title = "pin fin in water"
[run]
initial = "steady"
duration = "1 s"
output_interval = "0.1 s"
)toml" + copperPinOnClamp() + R"toml(length = "2 cm"
axial_cells = 6
layers = [{ tissue = "copper", thickness = "0.5 mm", cells = 1 }]
surface = { ends = "insulated", convection = "5000 W/(m2 K)" }
[environment]
medium = "water"
temperature = "10 degC"
)toml";
}

ObservedSeries series(const std::string& name, double sd) {
  ObservedSeries s;
  s.file = "synthetic";
  s.column = 2;
  s.quantity = parseObservedQuantity(name, "test");
  s.fileUnit = s.quantity.temperature ? "degC" : "W";
  for (int i = 1; i <= 10; ++i) {
    s.times.push_back(0.1 * i);
    s.values.push_back(0.0);
    s.sd.push_back(sd);
  }
  return s;
}

FitProblem pinProblem(const std::vector<std::string>& extra) {
  FitProblem pb;
  pb.casePath = "pin.toml";
  pb.caseText = pinFin();
  pb.overrides = {"run.rtol=1e-9", "run.atol=1e-9 K"};
  for (const std::string& s : extra) pb.overrides.push_back(s);
  pb.data.series.push_back(series("segments.pin.heat_flow.convection", 0.002));
  pb.data.series.push_back(series("segments.pin.mean_temperature", 0.01));
  pb.parameters = parseFitParameters({"segments.pin.surface.convection=1000 W/(m2 K):20000 W/(m2 K)",
                                      "tissues.copper.conductivity=100 W/(m K):1000 W/(m K)"},
                                     {}, {}, pb.caseText, pb.casePath, pb.overrides);
  pb.jobs = 2;
  return pb;
}

}  // namespace

TEST_CASE("Grid check of a pin fin fitted on 6 axial cells: the predicted shift against the actual refits on 12 and "
          "24 cells", "[fit][gridcheck][validation]") {
  // Data: the pin on 96 cells (16x) at h = 5000 W/(m2 K), k = 398 W/(m K) (within 0.03 % of the converged fin,
  // tests/test_grid.cpp) with Gaussian noise (fixed seed) of the stated SDs. The fit on 6 cells is biased far beyond
  // its standard errors; the grid check's shift (one run on 12 or 24 cells and the fit's Jacobian) is compared
  // with the shift of an actual refit on that grid (a full nonlinear fit, outside the linearisation), and its bias
  // estimate (order-2 extrapolation, Richardson 1911) with the difference from a refit on the data's 96 cells.
  FitProblem truthProblem = pinProblem({"run.grid_refinement=16"});
  const Evaluation truth = evaluateModel(truthProblem, std::vector<double>{5000.0, 398.0});
  REQUIRE(truth.ok);
  std::mt19937_64 rng(20261203);
  FitProblem coarse = pinProblem({});
  std::size_t i = 0;
  for (ObservedSeries& s : coarse.data.series)
    for (std::size_t k = 0; k < s.values.size(); ++k, ++i) {
      std::normal_distribution<double> gauss(0.0, s.sd[k]);
      s.values[k] = truth.predictions[i] + gauss(rng);
    }
  const FitResult r1 = runFit(coarse);
  REQUIRE(r1.converged);
  // The converged grid's fit of the same data (96 cells, the data's own grid): what the bias estimate predicts.
  FitProblem converged = coarse;
  converged.overrides.push_back("run.grid_refinement=16");
  const FitResult r16 = runFit(converged);
  REQUIRE(r16.converged);
  for (int n : {2, 4}) {
    const FitGridCheck g = gridCheck(coarse, r1, n);
    REQUIRE(g.ok);
    FitProblem fine = coarse;
    fine.overrides.push_back(fmt::format("run.grid_refinement={}", n));
    for (std::size_t j = 0; j < 2; ++j) fine.parameters[j].start = r1.values[j];
    const FitResult rn = runFit(fine);
    REQUIRE(rn.converged);
    for (std::size_t j = 0; j < 2; ++j) {
      const double actual = rn.values[j] - r1.values[j];
      const double toTruth = r16.values[j] - r1.values[j];
      fmt::print("Grid check {}x, {}: fitted {:.6g} (SE {:.3g}); shift predicted {:+.5g}, refit {:+.5g} (ratio {:.4f}, "
                 "{:.0f} SE); bias estimate {:+.5g}, fitted - fit on 96 cells {:+.5g} (ratio {:.4f}); {} nodes, {:.3g} s\n",
                 n, coarse.parameters[j].key, r1.values[j], r1.standardErrors[j], g.shift[j], actual, g.shift[j] / actual,
                 g.shiftSe[j], g.bias[j], -toTruth, -g.bias[j] / toTruth, g.nodes, g.seconds);
      CHECK(std::abs(g.shift[j] / actual - 1.0) < 0.1);
      CHECK(std::abs(-g.bias[j] / toTruth - 1.0) < 0.1);
    }
    // Biased by far more than 0.2 SE: the check warns for both parameters.
    CHECK(g.warnings.size() == 2);
  }
}

TEST_CASE("Observations at a position follow the fin's exact profile: a layer and the surface of the pin fin at "
          "0.37 L and 0.71 L", "[fit][gridcheck]") {
  // Adiabatic-tip fin (Incropera et al. 2007, Table 3.4 case B): theta(x) = theta_b cosh(m (L - x)) / cosh(m L), so
  // theta(0.37 L) / theta(0.71 L) = cosh(0.63 m L) / cosh(0.29 m L), whatever the base temperature (m = sqrt(4 h /
  // (k D)) = 224.2 1/m, L = 2 cm; the 1-D fin holds to about 0.2 % at Bi = h r / k = 6e-3). The observation
  // interpolates linearly between the two cell centres that bracket the position. Measured: 0.81 %, 0.22 % and
  // 0.13 % off on 12, 48 and 192 cells (the last near the 1-D limit). The nearest cell's centre (the rule before
  // 2026-12-03) would put the exact profile's ratio 2.8 %, 5.9 % and 0.7 % off on these grids, erratically.
  FitProblem pb = pinProblem({});
  pb.data.series.clear();
  for (const char* name : {"segments.pin.temperature.copper@0.37", "segments.pin.temperature.copper@0.71",
                           "segments.pin.surface_temperature@0.37", "segments.pin.surface_temperature@0.71"})
    pb.data.series.push_back(series(name, 0.01));
  const double m = std::sqrt(4.0 * 5000.0 / (398.0 * 0.001)), L = 0.02, tInf = 10.0;
  const double exact = std::cosh(0.63 * m * L) / std::cosh(0.29 * m * L);
  std::vector<double> errors;
  for (int n : {2, 8, 32}) {
    FitProblem refined = pb;
    refined.overrides.push_back(fmt::format("run.grid_refinement={}", n));
    const Evaluation e = evaluateModel(refined, std::vector<double>{5000.0, 398.0});
    REQUIRE(e.ok);
    for (std::size_t s = 0; s < 4; s += 2) {
      const double ratio = (e.predictions[s * 10 + 9] - tInf) / (e.predictions[(s + 1) * 10 + 9] - tInf);
      fmt::print("Fin profile, {} on {} cells: theta(0.37 L)/theta(0.71 L) {:.6f}, exact {:.6f}, error {:.2e}\n",
                 s == 0 ? "layer" : "surface", 6 * n, ratio, exact, ratio / exact - 1.0);
      errors.push_back(std::abs(ratio / exact - 1.0));
    }
  }
  // 12 cells: within 1.2 %; 48: 0.3 %; 192: 0.2 %, the 1-D limit (both kinds).
  CHECK(errors[0] < 0.012);
  CHECK(errors[1] < 0.012);
  CHECK(errors[2] < 3e-3);
  CHECK(errors[3] < 3e-3);
  CHECK(errors[4] < 2e-3);
  CHECK(errors[5] < 2e-3);
}
