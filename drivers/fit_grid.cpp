//! The grid check of a fit: is the grid error of the fitted parameters small against their uncertainty?
//!
//! The fit minimises S(theta) = |r(theta)|^2 with r = (y_case(theta) - observed) / sd on the case's grid. On a grid
//! refined N x the model is y_fine(theta) = y_case(theta) + e(theta). Linearised about the case-grid optimum
//! theta_c (y_case(theta_c + delta) = y_case(theta_c) + J delta; Bates & Watts 1988, sec. 2.1-2.2) and with e taken at
//! theta_c, the fine-grid objective is |r_c + e/sd + J delta|^2, minimised by the Gauss-Newton step
//!   delta = -(J^T J)^-1 J^T (e / sd)                      (J^T r_c = 0 at an interior optimum)
//! from theta_c towards the fine-grid optimum. It costs one run on the fine grid: the fit's own Jacobian at its
//! optimum is reused. For a scheme of order 2 the case grid's error against a converged grid is e N^2 / (N^2 - 1)
//! (Richardson 1911; Roache 1998), so the bias of the fitted values (fitted minus converged) is estimated as
//! -delta N^2 / (N^2 - 1).
#include "drivers/fit.hpp"

#include <chrono>
#include <cmath>
#include <limits>

#include <Eigen/Dense>
#include <fmt/format.h>

#include "models/case.hpp"
#include "models/body.hpp"

namespace thermorph {

std::vector<double> leastSquaresShift(const std::vector<double>& jacobian, std::size_t p, const std::vector<double>& change,
                                      const std::vector<bool>& held) {
  const std::size_t rows = change.size();
  if (p == 0 || rows < p || jacobian.size() != rows * p) return {};
  std::vector<std::size_t> free;
  for (std::size_t j = 0; j < p; ++j)
    if (held.size() != p || !held[j]) free.push_back(j);
  std::vector<double> out(p, 0.0);
  if (free.empty()) return out;
  Eigen::MatrixXd J(static_cast<Eigen::Index>(rows), static_cast<Eigen::Index>(free.size()));
  Eigen::VectorXd e(static_cast<Eigen::Index>(rows));
  for (std::size_t i = 0; i < rows; ++i) {
    e(static_cast<Eigen::Index>(i)) = change[i];
    for (std::size_t c = 0; c < free.size(); ++c)
      J(static_cast<Eigen::Index>(i), static_cast<Eigen::Index>(c)) = jacobian[i * p + free[c]];
  }
  // Columns scaled to unit norm (parameters in very different units), then a rank-revealing QR.
  Eigen::VectorXd norms = J.colwise().norm();
  for (Eigen::Index c = 0; c < J.cols(); ++c) {
    if (!(norms(c) > 0.0)) return {};
    J.col(c) /= norms(c);
  }
  Eigen::ColPivHouseholderQR<Eigen::MatrixXd> qr(J);
  qr.setThreshold(1e-12);
  if (qr.rank() < J.cols()) return {};
  const Eigen::VectorXd step = qr.solve(-e);
  for (std::size_t c = 0; c < free.size(); ++c) out[free[c]] = step(static_cast<Eigen::Index>(c)) / norms(static_cast<Eigen::Index>(c));
  return out;
}

FitGridCheck gridCheck(const FitProblem& given, const FitResult& r, int refinement) {
  using Clock = std::chrono::steady_clock;
  const auto begin = Clock::now();
  FitGridCheck g;
  g.refinement = refinement;
  const std::size_t p = given.parameters.size();
  const std::size_t n = r.n;
  // The grid of the fit's runs (cell counts pinned at the start values, r.overrides ending in
  // run.grid_refinement = 1, or M for a fit on a grid refined M x: its unrefined counts) refined N x: N times the
  // refinement the fit ran with, pinned or not.
  FitProblem fine = given;
  fine.caseText = r.caseText;
  fine.overrides = r.overrides;
  int base = 1;
  try {
    base = loadCaseFromString(r.caseText, given.casePath, r.overrides).run.gridRefinement;
  } catch (const std::exception&) {
  }
  fine.overrides.push_back(fmt::format("run.grid_refinement={}", base * refinement));
  try {
    std::vector<std::string> at = fine.overrides;
    for (std::size_t j = 0; j < p; ++j) at.push_back(parameterOverride(given.parameters[j], r.values[j]));
    g.nodes = static_cast<long>(Body(loadCaseFromString(fine.caseText, given.casePath, at)).network().nodes.size());
  } catch (const std::exception& ex) {
    g.error = fmt::format("the model on the grid refined {}x cannot be built: {}", refinement, ex.what());
    return g;
  }
  const Evaluation e = evaluateModel(fine, r.values);
  g.seconds = std::chrono::duration<double>(Clock::now() - begin).count();
  if (!e.ok) {
    g.error = fmt::format("the run on the grid refined {}x failed: {}", refinement, e.error);
    return g;
  }
  g.finePredictions = e.predictions;
  if (r.predictions.size() != n || e.predictions.size() != n || r.jacobian.empty()) {
    g.error = "the fit has no predictions or Jacobian at its optimum";
    return g;
  }
  // The change of the predictions in noise units, one entry per residual row (prior rows: the grid does not move
  // a prior).
  const std::size_t rows = r.jacobian.size() / p;
  std::vector<double> change(rows, 0.0);
  std::size_t i = 0;
  for (std::size_t s = 0; s < given.data.series.size(); ++s) {
    const ObservedSeries& os = given.data.series[s];
    double sum = 0.0, largest = 0.0;
    for (std::size_t k = 0; k < os.values.size(); ++k, ++i) {
      const double d = e.predictions[i] - r.predictions[i];
      change[i] = d / os.sd[k];
      sum += change[i] * change[i];
      largest = std::max(largest, std::abs(d));
    }
    g.seriesRms.push_back(os.values.empty() ? 0.0 : std::sqrt(sum / static_cast<double>(os.values.size())));
    g.seriesMax.push_back(largest);
  }
  // A parameter at a bound stays there when its shift points out of the box (the fit's active set): drop it and
  // solve again, as the fit's convergence test does.
  g.held.assign(p, false);
  std::vector<double> shift;
  for (std::size_t round = 0; round <= p; ++round) {
    shift = leastSquaresShift(r.jacobian, p, change, g.held);
    if (shift.empty()) break;
    bool changed = false;
    for (std::size_t j = 0; j < p; ++j) {
      const FitParameter& fp = given.parameters[j];
      const double tol = 1e-6 * (fp.upper - fp.lower);
      const bool outward = (r.values[j] <= fp.lower + tol && shift[j] < 0.0) || (r.values[j] >= fp.upper - tol && shift[j] > 0.0);
      if (outward && !g.held[j]) {
        g.held[j] = true;
        changed = true;
      }
    }
    if (!changed) break;
  }
  if (shift.empty()) {
    g.error = "the fit's Jacobian is rank deficient: no least-squares shift";
    return g;
  }
  const double factor = double(refinement) * refinement / (double(refinement) * refinement - 1.0);
  for (std::size_t j = 0; j < p; ++j) {
    const double se = j < r.standardErrors.size() ? r.standardErrors[j] : std::numeric_limits<double>::quiet_NaN();
    g.shift.push_back(shift[j]);
    g.shiftSe.push_back(shift[j] / se);
    // Bias = fitted value minus the value a converged grid would give: -shift N^2 / (N^2 - 1).
    g.bias.push_back(-shift[j] * factor);
    g.biasSe.push_back(-shift[j] * factor / se);
    g.biasRelative.push_back(r.values[j] != 0.0 ? std::abs(shift[j] * factor / r.values[j]) : 0.0);
    const FitParameter& fp = given.parameters[j];
    const std::string unit = fp.unit.empty() ? "" : " " + fp.unit;
    if (std::abs(g.biasSe[j]) > gridCheckSeFraction || g.biasRelative[j] > gridCheckRelative)
      g.warnings.push_back(fmt::format(
          "grid: {} = {:.6g}{} carries an estimated grid bias of {:+.3g}{} ({:+.2f} SE, {:.2g} % of the value; the "
          "optimum on the grid refined {}x lies {:+.3g}{} away), above {} SE or {} % of the value: refine the grid "
          "(run.grid_refinement, cell counts) and fit again",
          fp.key, r.values[j], unit, g.bias[j], unit, g.biasSe[j], 100.0 * g.biasRelative[j], refinement, g.shift[j], unit,
          gridCheckSeFraction, 100.0 * gridCheckRelative));
  }
  g.ok = true;
  g.seconds = std::chrono::duration<double>(Clock::now() - begin).count();
  return g;
}

}  // namespace thermorph
