//! Fits of case parameters to observed series with Ceres Solver (Agarwal, Mierle et al., ceres-solver.org):
//! Levenberg-Marquardt trust region with bounds, gradients by central finite differences of whole runs on
//! threads. Covariance from the Jacobian at the optimum scaled by the residual variance, Cov = s^2 (J^T J)^-1,
//! s^2 = SSR / (n - p) (Bates & Watts 1988, ch. 2; Seber & Wild 1989, sec. 2.1), by singular value decomposition
//! (Eigen).
#include "models/caution.hpp"
#include "drivers/sweep.hpp"
#include "drivers/fit.hpp"

#include <algorithm>
#include <atomic>
#include <chrono>
#include <cmath>
#include <filesystem>
#include <fstream>
#include <iterator>
#include <limits>
#include <map>
#include <sstream>
#include <thread>

#include <Eigen/Dense>
#include <boost/math/distributions/students_t.hpp>
#include <ceres/ceres.h>
#include <fmt/format.h>
#include <toml++/toml.h>

#include "models/case_schema.hpp"
#include "models/units.hpp"
#include "drivers/forward_sensitivity.hpp"
#include "drivers/h5_append.hpp"
#include "drivers/refine.hpp"
#include "drivers/sampling.hpp"
#include "drivers/simulation.hpp"

namespace thermorph {
namespace {

using Clock = std::chrono::steady_clock;
constexpr double nan = std::numeric_limits<double>::quiet_NaN();


//! Parallel map over [0, n) on `jobs` threads.
void parallelFor(std::size_t n, int jobs, const std::function<void(std::size_t)>& body) {
  unsigned hw = std::max(1u, std::thread::hardware_concurrency());
  std::size_t workers = std::min<std::size_t>(n, jobs > 0 ? static_cast<std::size_t>(jobs) : hw);
  if (workers <= 1) {
    for (std::size_t i = 0; i < n; ++i) body(i);
    return;
  }
  std::atomic<std::size_t> next{0};
  std::vector<std::thread> threads;
  for (std::size_t w = 0; w < workers; ++w)
    threads.emplace_back([&] {
      for (std::size_t i = next.fetch_add(1); i < n; i = next.fetch_add(1)) body(i);
    });
  for (std::thread& t : threads) t.join();
}

//! The case text with every segment's cell counts (axial, per layer, coat) written out as the grid resolved at
//! `overrides` (the base case's, then the start values) gives them; `pinned` says whether it did (the caller then
//! appends run.grid_refinement = `refinement` to the fit's overrides). A grid refined N x (run.grid_refinement, e.g.
//! a refit on a finer grid) is written as its unrefined counts with `refinement` N (coarsenedCase; the same cells, as
//! refinement multiplies the counts and keeps the gradings), so that the fit's runs and forward sensitivities
//! find a steady start by Newton from the unrefined grid's (RunOptions::coarseSteadyStart; written as the refined
//! counts with refinement 1 before, every run relaxed on the fine grid); counts that do not divide by N are
//! written refined, with `refinement` 1. The automatic grid depends on the parameters (the coat's conductivity sets the
//! coat's and the tissue layers' counts through the decay length): left automatic, a fit's model jumps where a
//! count changes (the example fit crept for 50 iterations on such jumps), and its Jacobian cannot come from
//! forward sensitivities (a different network structure at p +- h). Returns the node count of the pinned grid.
Index pinGrid(std::string& caseText, const std::string& casePath, const std::vector<std::string>& overrides,
              bool& pinned, int& refinement) {
  pinned = false;
  refinement = 1;
  const Case c = loadCaseFromString(caseText, casePath, overrides);
  const Index nodes = Body(c).network().nodes.size();
  const int n = c.run.appliedRefinement;
  const std::optional<Case> unrefined = n > 1 ? coarsenedCase(c, n) : std::nullopt;
  toml::table text, resolved;
  try {
    text = toml::parse(caseText, casePath);
    resolved = toml::parse(resolvedCaseToml(unrefined ? *unrefined : c));
  } catch (const toml::parse_error&) {
    return nodes;  // the loader accepted it: leave the text as it is
  }
  toml::array* mine = text["segments"].as_array();
  const toml::array* theirs = resolved["segments"].as_array();
  if (!mine || !theirs) return nodes;
  auto copyCells = [](toml::table& to, const toml::table& from) {
    if (auto cells = from["cells"].value<std::int64_t>()) to.insert_or_assign("cells", *cells);
    if (auto grading = from["grading"].value<double>(); grading && *grading > 1.0)
      to.insert_or_assign("grading", *grading);  // a graded skin (layers[].grading)
  };
  for (toml::node& node : *mine) {
    toml::table* segment = node.as_table();
    if (!segment) continue;
    const std::optional<std::string> name = (*segment)["name"].value<std::string>();
    const toml::table* source = nullptr;
    for (const toml::node& other : *theirs)
      if (const toml::table* t = other.as_table(); t && name && (*t)["name"].value<std::string>() == name) source = t;
    if (!source) continue;
    if (auto axial = (*source)["axial_cells"].value<std::int64_t>()) segment->insert_or_assign("axial_cells", *axial);
    if (auto grading = (*source)["axial_grading"].value<double>(); grading && *grading > 1.0)
      segment->insert_or_assign("axial_grading", *grading);  // graded cells (uniform: given axial_cells keep it)
    if (toml::table* coat = (*segment)["coat"].as_table(); coat && (*source)["coat"].as_table())
      copyCells(*coat, *(*source)["coat"].as_table());
    toml::array* layers = (*segment)["layers"].as_array();
    const toml::array* fromLayers = (*source)["layers"].as_array();
    if (layers && fromLayers && layers->size() == fromLayers->size())
      for (std::size_t i = 0; i < layers->size(); ++i)
        if (toml::table* l = (*layers)[i].as_table(); l && (*fromLayers)[i].as_table()) copyCells(*l, *(*fromLayers)[i].as_table());
  }
  std::ostringstream out;
  out << text;
  std::vector<std::string> pinnedOverrides = overrides;
  pinnedOverrides.push_back(fmt::format("run.grid_refinement={}", unrefined ? n : 1));
  // Keep the pinned text only if it builds the same grid.
  try {
    if (Body(loadCaseFromString(out.str(), casePath, pinnedOverrides)).network().nodes.size() != nodes) return nodes;
  } catch (const std::exception&) {
    return nodes;
  }
  caseText = out.str();
  pinned = true;
  refinement = unrefined ? n : 1;
  return nodes;
}

//! Scaled variable u of each parameter: ln(x) on a log scale, else x / scale.
struct Transform {
  std::vector<double> scale;
  std::vector<bool> log;
  explicit Transform(const std::vector<FitParameter>& ps) {
    for (const FitParameter& p : ps) {
      log.push_back(p.log);
      double s = std::abs(p.start);
      if (!(s > 0.0)) s = std::max(std::abs(p.upper - p.lower), 1e-300);
      scale.push_back(s);
    }
  }
  double toU(std::size_t j, double x) const { return log[j] ? std::log(x) : x / scale[j]; }
  double toX(std::size_t j, double u) const { return log[j] ? std::exp(u) : u * scale[j]; }
  double dxdu(std::size_t j, double u) const { return log[j] ? std::exp(u) : scale[j]; }
};

//! Observations and weights flattened in ObservedData order.
struct Targets {
  std::vector<double> observed, sd;
  std::vector<std::size_t> seriesOf;
  explicit Targets(const ObservedData& d) {
    for (std::size_t s = 0; s < d.series.size(); ++s)
      for (std::size_t i = 0; i < d.series[s].values.size(); ++i) {
        observed.push_back(d.series[s].values[i]);
        sd.push_back(d.series[s].sd[i]);
        seriesOf.push_back(s);
      }
  }
};

std::size_t priorCount(const FitProblem& pb) {
  std::size_t k = 0;
  for (const FitParameter& p : pb.parameters) k += p.priorMean ? 1 : 0;
  return k;
}

//! Weighted residuals: data rows (model - observed) / sd, then prior rows (x - mean) / sd.
std::vector<double> residualsOf(const FitProblem& pb, const Targets& t, const std::vector<double>& predictions,
                                std::span<const double> x) {
  std::vector<double> r(t.observed.size());
  for (std::size_t i = 0; i < r.size(); ++i) r[i] = (predictions[i] - t.observed[i]) / t.sd[i];
  for (std::size_t j = 0; j < pb.parameters.size(); ++j)
    if (pb.parameters[j].priorMean) r.push_back((x[j] - *pb.parameters[j].priorMean) / *pb.parameters[j].priorSd);
  return r;
}

//! Residuals and d(residual)/du by central differences (one-sided at a bound), every run in parallel.
struct Linearisation {
  bool ok = false;
  std::string error;
  std::vector<double> residuals, predictions;
  std::vector<double> jacobian;  // [rows x p], d r / d u
};

//! The observation sampler as a probe of the forward-sensitivity driver.
class SamplerProbe : public OutputProbe {
 public:
  SamplerProbe(const ObservedData& data, const Body& body) : sampler_(data, body) {}
  void observe(double t, std::span<const double> y, const RunSummary& s) override { sampler_.observe(t, y, s); }
  std::vector<double> values() const override { return sampler_.predictions(); }
  std::vector<double> observerTimes(const Body& body) const override {
    return ObservationSampler::timesBetweenOutputs(sampler_.data(), body.spec().run);
  }

 private:
  ObservationSampler sampler_;
};

class Model {
 public:
  Model(const FitProblem& pb, const Transform& tr, const Targets& t, std::vector<double> lowerU, std::vector<double> upperU)
      : pb_(pb), tr_(tr), t_(t), lowerU_(std::move(lowerU)), upperU_(std::move(upperU)),
        methods_(pb.parameters.size()), reasons_(pb.parameters.size()) {}

  std::vector<double> xOf(std::span<const double> u) const {
    std::vector<double> x(u.size());
    for (std::size_t j = 0; j < u.size(); ++j) x[j] = tr_.toX(j, u[j]);
    return x;
  }

  //! The parameters at x, as the sensitivity driver takes them.
  std::vector<SensitivityParameter> sensitivityParameters(std::span<const double> x) const {
    std::vector<SensitivityParameter> out;
    for (std::size_t j = 0; j < x.size(); ++j) out.push_back({pb_.parameters[j].key, pb_.parameters[j].unit, x[j]});
    return out;
  }

  Linearisation at(std::span<const double> u, bool withJacobian) const {
    const std::size_t p = u.size();
    Linearisation out;
    std::vector<std::vector<double>> points;
    const bool cached = !lastU_.empty() && std::equal(u.begin(), u.end(), lastU_.begin());
    if (!cached) points.push_back(xOf(u));
    // Which columns come from CVODES forward sensitivities (one run with sensitivities), which from central
    // differences (two runs each); all of these runs go to the threads together.
    std::vector<bool> forward(p, false);
    if (withJacobian && pb_.gradient != "fd" && !classified_.empty()) {
      for (std::size_t j = 0; j < p; ++j) forward[j] = classified_[j];
    } else if (withJacobian && pb_.gradient != "fd") {
      // Once per fit: with the grid pinned, whether a parameter enters the network as a coefficient does not
      // change between evaluations (the sensitivity runs check it again and fail the evaluation if it did).
      try {
        std::vector<ParameterGradient> g = classifyParameters(pb_.caseText, pb_.casePath, pb_.overrides,
                                                              sensitivityParameters(xOf(u)));
        for (std::size_t j = 0; j < p; ++j) {
          forward[j] = g[j].method == GradientMethod::Forward;
          methods_[j] = gradientMethodName(g[j].method);
          reasons_[j] = g[j].reason;
        }
        classified_ = forward;
      } catch (const std::exception&) {
        // The base case fails to build here: the runs below report it.
      }
    }
    std::vector<double> plus(p), minus(p);
    std::vector<std::size_t> fdColumns;
    if (withJacobian)
      for (std::size_t j = 0; j < p; ++j) {
        if (forward[j]) continue;
        methods_[j] = gradientMethodName(GradientMethod::FiniteDifference);
        fdColumns.push_back(j);
        const double h = pb_.step * std::max(1.0, std::abs(u[j]));
        double up = u[j] + h, down = u[j] - h;
        if (up > upperU_[j]) up = u[j];
        if (down < lowerU_[j]) down = u[j];
        if (up == down) up = u[j] + h;  // a degenerate interval: step outward anyway
        plus[j] = up;
        minus[j] = down;
        std::vector<double> a(u.begin(), u.end()), b(u.begin(), u.end());
        a[j] = up;
        b[j] = down;
        points.push_back(xOf(a));
        points.push_back(xOf(b));
      }
    std::vector<Evaluation> evals(points.size());
    const std::vector<double> x = xOf(u);
    // The forward parameters in groups, one run with sensitivities per group and thread (round robin over the
    // threads the fit may use); these runs are the longest, so they go first.
    std::size_t groups = 0;
    std::vector<std::size_t> groupOf(p, 0);
    {
      const unsigned hw = std::max(1u, std::thread::hardware_concurrency());
      const std::size_t threads = pb_.jobs > 0 ? static_cast<std::size_t>(pb_.jobs) : hw;
      std::size_t count = 0;
      for (std::size_t j = 0; j < p; ++j) count += forward[j] ? 1 : 0;
      groups = std::min(count, std::max<std::size_t>(1, threads));
      std::size_t next = 0;
      for (std::size_t j = 0; j < p; ++j)
        if (forward[j]) groupOf[j] = next++ % std::max<std::size_t>(1, groups);
    }
    std::vector<ForwardSensitivityResult> sens(groups);
    parallelFor(points.size() + groups, pb_.jobs, [&](std::size_t i) {
      if (i >= groups) {
        evals[i - groups] = evaluateModel(pb_, points[i - groups]);
        return;
      }
      std::vector<bool> select(p, false);
      for (std::size_t j = 0; j < p; ++j) select[j] = forward[j] && groupOf[j] == i;
      sens[i] = forwardSensitivities(
          pb_.caseText, pb_.casePath, pb_.overrides, sensitivityParameters(x),
          [&](const Body& body) { return std::unique_ptr<OutputProbe>(new SamplerProbe(pb_.data, body)); }, false,
          select, pb_.coarseSteadyStart);
    });
    runs_ += static_cast<long>(evals.size() + groups);
    std::size_t k = 0;
    if (!cached) {
      if (!evals[0].ok) {
        out.error = evals[0].error;
        return out;
      }
      lastU_.assign(u.begin(), u.end());
      lastPredictions_ = evals[0].predictions;
      k = 1;
    }
    out.predictions = lastPredictions_;
    out.residuals = residualsOf(pb_, t_, out.predictions, x);
    if (withJacobian) {
      const std::size_t rows = out.residuals.size();
      out.jacobian.assign(rows * p, 0.0);
      for (const ForwardSensitivityResult& g : sens)
        if (!g.ok) {
          out.error = g.error;
          return out;
        }
      for (std::size_t c = 0; c < fdColumns.size(); ++c) {
        const std::size_t j = fdColumns[c];
        const Evaluation& a = evals[k + 2 * c];
        const Evaluation& b = evals[k + 2 * c + 1];
        if (!a.ok || !b.ok) {
          out.error = a.ok ? b.error : a.error;
          return out;
        }
        std::vector<double> ua(u.begin(), u.end()), ub(u.begin(), u.end());
        ua[j] = plus[j];
        ub[j] = minus[j];
        std::vector<double> ra = residualsOf(pb_, t_, a.predictions, xOf(ua));
        std::vector<double> rb = residualsOf(pb_, t_, b.predictions, xOf(ub));
        for (std::size_t i = 0; i < rows; ++i) out.jacobian[i * p + j] = (ra[i] - rb[i]) / (plus[j] - minus[j]);
      }
      // Forward columns: d r_i / d u_j = (d prediction_i / d x_j) / sd_i * dx_j/du_j; a prior row: dx/du / sd.
      for (std::size_t j = 0; j < p; ++j) {
        if (!forward[j]) continue;
        const std::vector<double>& d = sens[groupOf[j]].derivatives[j];
        if (d.size() != t_.observed.size()) {
          out.error = "forward sensitivities gave no derivative for " + pb_.parameters[j].key;
          return out;
        }
        const double dxdu = tr_.dxdu(j, u[j]);
        for (std::size_t i = 0; i < d.size(); ++i) out.jacobian[i * p + j] = d[i] / t_.sd[i] * dxdu;
        std::size_t row = t_.observed.size();
        for (std::size_t q = 0; q < p; ++q) {
          if (!pb_.parameters[q].priorMean) continue;
          if (q == j) out.jacobian[row * p + j] = dxdu / *pb_.parameters[q].priorSd;
          ++row;
        }
      }
    }
    out.ok = true;
    if (withJacobian) {
      lastJacobianU_.assign(u.begin(), u.end());
      lastJacobian_ = out.jacobian;
      lastResiduals_ = out.residuals;
    }
    return out;
  }

  //! The Gauss-Newton step from u in standard errors, sqrt(d^T J^T J d) / s with s^2 = (|r|^2 - |J d|^2) / (rows -
  //! p) (at most 1): sqrt(p) times the relative offset of Bates & Watts (1981, Technometrics 23, 179-183; Bates & Watts 1988,
  //! sec. 2.2.3), the distance of the point from the least-squares optimum in the linear approximation, measured
  //! in the data's own uncertainty. Parameters at a bound whose step points out of the box are held (their
  //! columns dropped). NaN when no Jacobian at u is at hand.
  double gaussNewtonStepSe(std::span<const double> u, std::vector<bool>* atBound = nullptr) const {
    const std::size_t p = u.size();
    if (atBound) atBound->assign(p, false);
    if (lastJacobianU_.size() != p || !std::equal(u.begin(), u.end(), lastJacobianU_.begin())) return nan;
    const std::size_t rows = lastResiduals_.size();
    if (rows <= p) return nan;
    Eigen::Map<const Eigen::Matrix<double, Eigen::Dynamic, Eigen::Dynamic, Eigen::RowMajor>> J(
        lastJacobian_.data(), static_cast<Eigen::Index>(rows), static_cast<Eigen::Index>(p));
    Eigen::Map<const Eigen::VectorXd> r(lastResiduals_.data(), static_cast<Eigen::Index>(rows));
    std::vector<std::size_t> free;
    for (std::size_t j = 0; j < p; ++j) free.push_back(j);
    Eigen::VectorXd step;
    Eigen::MatrixXd Jf;
    for (std::size_t round = 0; round <= p && !free.empty(); ++round) {
      Jf.resize(static_cast<Eigen::Index>(rows), static_cast<Eigen::Index>(free.size()));
      for (std::size_t c = 0; c < free.size(); ++c) Jf.col(static_cast<Eigen::Index>(c)) = J.col(static_cast<Eigen::Index>(free[c]));
      step = Jf.colPivHouseholderQr().solve(-r);
      std::vector<std::size_t> keep;
      for (std::size_t c = 0; c < free.size(); ++c) {
        const std::size_t j = free[c];
        const double tol = 1e-9 * (1.0 + std::abs(u[j]));
        const bool outward = (u[j] <= lowerU_[j] + tol && step(static_cast<Eigen::Index>(c)) < 0.0) ||
                             (u[j] >= upperU_[j] - tol && step(static_cast<Eigen::Index>(c)) > 0.0);
        if (!outward) keep.push_back(j);
      }
      if (keep.size() == free.size()) break;
      free = std::move(keep);
    }
    if (atBound)
      for (std::size_t j = 0; j < p; ++j) (*atBound)[j] = std::find(free.begin(), free.end(), j) == free.end();
    if (free.empty()) return 0.0;
    const double explained = (Jf * step).squaredNorm();
    // The noise scale: the residual variance factor s^2 (the reported standard errors scale with s), but at most 1
    // (the stated SDs): a fit far from the data (s >> 1, a parameter held at a bound) still stops only within
    // 0.01 of the standard error the stated noise gives.
    const double s2 = std::min(1.0, std::max(r.squaredNorm() - explained, 0.0) / static_cast<double>(rows - p));
    return s2 > 0.0 ? std::sqrt(explained / s2) : nan;
  }

  const std::vector<std::string>& methods() const { return methods_; }
  const std::vector<std::string>& reasons() const { return reasons_; }

  long runs() const { return runs_; }

 private:
  const FitProblem& pb_;
  const Transform& tr_;
  const Targets& t_;
  std::vector<double> lowerU_, upperU_;
  mutable std::vector<double> lastU_, lastPredictions_;
  mutable std::vector<double> lastJacobianU_, lastJacobian_, lastResiduals_;
  mutable std::vector<bool> classified_;
  mutable long runs_ = 0;
  mutable std::vector<std::string> methods_, reasons_;
};

class FitCost : public ceres::CostFunction {
 public:
  FitCost(const Model& model, std::size_t rows, std::size_t p, std::string& lastError)
      : model_(model), p_(p), lastError_(lastError) {
    set_num_residuals(static_cast<int>(rows));
    mutable_parameter_block_sizes()->push_back(static_cast<int>(p));
  }
  bool Evaluate(double const* const* parameters, double* residuals, double** jacobians) const override {
    const bool withJacobian = jacobians && jacobians[0];
    Linearisation l = model_.at(std::span<const double>(parameters[0], p_), withJacobian);
    if (!l.ok) {
      lastError_ = l.error;
      return false;  // Ceres treats the point as infeasible and shrinks the trust region
    }
    std::copy(l.residuals.begin(), l.residuals.end(), residuals);
    if (withJacobian) std::copy(l.jacobian.begin(), l.jacobian.end(), jacobians[0]);
    return true;
  }

 private:
  const Model& model_;
  std::size_t p_;
  std::string& lastError_;
};

class History : public ceres::IterationCallback {
 public:
  History(std::vector<FitIteration>& out, const double* u, const Transform& tr, std::size_t p, int start, bool progress,
          const Model& model, double stepTolerance, double& finalStepSe, const std::vector<bool>& held)
      : out_(out), u_(u), tr_(tr), p_(p), start_(start), progress_(progress), begin_(Clock::now()), model_(model),
        stepTolerance_(stepTolerance), finalStepSe_(finalStepSe), held_(held) {}
  //! Set when the solve stopped because the parameters held at a bound should change: the new set.
  std::optional<std::vector<bool>> newHeld;
  ceres::CallbackReturnType operator()(const ceres::IterationSummary& s) override {
    // The point's distance from the optimum in standard errors (Model::gaussNewtonStepSe): after a successful step
    // (and at the start) Ceres has evaluated the Jacobian here.
    std::vector<bool> atBound;
    const double stepSe = model_.gaussNewtonStepSe(std::span<const double>(u_, p_), &atBound);
    // One line per iteration on stderr (unless --quiet): a fit of a large body runs for minutes.
    if (progress_)
      // After a rejected step there is no Jacobian at the trial point (stepSe is NaN): say so instead of "nan".
      fmt::print(stderr, "fit: start {} iteration {:>3}: cost {:.8g}{}, max gradient {:.3g}, Gauss-Newton step {}, {:.1f} s\n",
                 start_ + 1, s.iteration, s.cost, s.iteration > 0 && !s.step_is_successful ? " (step rejected)" : "",
                 s.gradient_max_norm, std::isnan(stepSe) ? std::string("not evaluated") : fmt::format("{:.2g} SE", stepSe),
                 std::chrono::duration<double>(Clock::now() - begin_).count());
    FitIteration it;
    it.iteration = s.iteration;
    it.cost = s.cost;
    it.gradientNorm = s.gradient_max_norm;
    it.stepNorm = s.step_norm;
    it.successful = s.step_is_successful;
    it.start = start_;
    it.stepSe = stepSe;
    for (std::size_t j = 0; j < p_; ++j) it.values.push_back(tr_.toX(j, u_[j]));
    out_.push_back(std::move(it));
    if (stepSe < stepTolerance_) {
      finalStepSe_ = stepSe;
      return ceres::SOLVER_TERMINATE_SUCCESSFULLY;
    }
    // A parameter at a bound whose Gauss-Newton step points out of the box (or a held one whose step points back
    // in): Ceres' trust region projects its steps onto the box, and with such a parameter the projected steps are
    // a fraction of the Gauss-Newton step (the example fit crept at 0.25 SE per iteration with the ear exchanger
    // at its upper bound). Stop and solve again with the parameters at a bound held there (an active set).
    if (std::isfinite(stepSe) && atBound != held_) {
      newHeld = atBound;
      return ceres::SOLVER_TERMINATE_SUCCESSFULLY;
    }
    return ceres::SOLVER_CONTINUE;
  }

 private:
  std::vector<FitIteration>& out_;
  const double* u_;
  const Transform& tr_;
  std::size_t p_;
  int start_;
  bool progress_;
  Clock::time_point begin_;
  const Model& model_;
  double stepTolerance_;
  double& finalStepSe_;
  const std::vector<bool>& held_;
};

}  // namespace


Evaluation evaluateModel(const FitProblem& pb, std::span<const double> x) {
  Evaluation e;
  try {
    std::vector<std::string> overrides = pb.overrides;
    for (std::size_t j = 0; j < pb.parameters.size(); ++j) overrides.push_back(parameterOverride(pb.parameters[j], x[j]));
    Body body(loadCaseFromString(pb.caseText, pb.casePath, overrides));
    ObservationSampler sampler(pb.data, body);
    RunOptions options;
    options.quiet = true;
    options.observer = [&](double t, std::span<const double> y, const RunSummary& s) { sampler.observe(t, y, s); };
    options.observerTimes = ObservationSampler::timesBetweenOutputs(pb.data, body.spec().run);
    options.coarseSteadyStart = pb.coarseSteadyStart;
    RunSummary summary = runTransient(body, options);
    if (!summary.complete) {
      e.error = summary.failure;
      return e;
    }
    e.predictions = sampler.predictions();
    for (double v : e.predictions)
      if (!std::isfinite(v)) {
        e.error = "the model gives a non-finite value";
        return e;
      }
    e.ok = true;
  } catch (const std::exception& ex) {
    e.error = ex.what();
  }
  return e;
}

std::vector<Evaluation> evaluateMany(const FitProblem& pb, const std::vector<std::vector<double>>& xs, int jobs) {
  std::vector<Evaluation> out(xs.size());
  parallelFor(xs.size(), jobs, [&](std::size_t i) { out[i] = evaluateModel(pb, xs[i]); });
  return out;
}

FitResult runFit(const FitProblem& given) {
  const auto wallStart = Clock::now();
  const std::size_t p = given.parameters.size();
  if (p == 0) throw CaseError("fit: no free parameter");
  // The grid of every run: the one resolved at the start values, written out (pinGrid).
  FitProblem pb = given;
  bool pinned = false;
  int refinement = 1;
  Index gridNodes = 0;
  {
    std::vector<std::string> atStart = pb.overrides;
    for (const FitParameter& fp : pb.parameters) atStart.push_back(parameterOverride(fp, fp.start));
    try {
      if (pb.pinGrid) gridNodes = pinGrid(pb.caseText, pb.casePath, atStart, pinned, refinement);
    } catch (const std::exception&) {
      // The case fails at the start values: the first evaluation reports it.
    }
    if (pinned) pb.overrides.push_back(fmt::format("run.grid_refinement={}", refinement));
  }
  const Targets targets(pb.data);
  const std::size_t n = targets.observed.size();
  if (n <= p)
    throw CaseError(fmt::format("fit: {} observations for {} free parameters; a fit needs more observations than "
                                "parameters",
                                n, p));
  const std::size_t rows = n + priorCount(pb);
  const Transform tr(pb.parameters);
  std::vector<double> lowerU(p), upperU(p);
  for (std::size_t j = 0; j < p; ++j) {
    lowerU[j] = tr.toU(j, pb.parameters[j].lower);
    upperU[j] = tr.toU(j, pb.parameters[j].upper);
  }
  const Model model(pb, tr, targets, lowerU, upperU);

  FitResult result;
  result.n = n;
  result.caseText = pb.caseText;
  result.overrides = pb.overrides;
  result.gridPinned = pinned;
  result.gridNodes = static_cast<long>(gridNodes);
  if (pinned && !pb.quiet)
    fmt::print(stderr, "fit: cell counts fixed at the grid of the start values ({} nodes) for every run of the fit\n",
               gridNodes);
  // Starts: the given one, then Sobol points in the bounds (log-uniform on a log scale).
  result.startPoints.push_back({});
  for (const FitParameter& fp : pb.parameters) result.startPoints.back().push_back(fp.start);
  if (pb.starts > 1) {
    std::vector<std::vector<double>> unit = sobolPoints(p, static_cast<std::size_t>(pb.starts - 1), 1);
    for (const std::vector<double>& z : unit) {
      std::vector<double> x(p);
      for (std::size_t j = 0; j < p; ++j)
        x[j] = tr.toX(j, lowerU[j] + (upperU[j] - lowerU[j]) * (0.05 + 0.9 * z[j]));
      result.startPoints.push_back(x);
    }
  }

  std::vector<double> bestU;
  double bestCost = std::numeric_limits<double>::infinity();
  ceres::Solver::Summary bestSummary;
  bool anySolved = false;
  std::string lastError;
  for (std::size_t s = 0; s < result.startPoints.size(); ++s) {
    std::vector<double> u(p);
    for (std::size_t j = 0; j < p; ++j) u[j] = tr.toU(j, result.startPoints[s][j]);
    // Rounds of the active set: parameters held at a bound (History::newHeld), at most a few changes.
    std::vector<bool> held(p, false);
    std::vector<std::vector<bool>> heldSeen{held};
    ceres::Solver::Summary summary;
    double finalStepSe = nan;
    int iterationsLeft = pb.maxIterations;
    double initialCost = nan;
    for (int round = 0;; ++round) {
    ceres::Problem::Options problemOptions;
    problemOptions.cost_function_ownership = ceres::TAKE_OWNERSHIP;
    problemOptions.manifold_ownership = ceres::TAKE_OWNERSHIP;
    ceres::Problem problem(problemOptions);
    problem.AddResidualBlock(new FitCost(model, rows, p, lastError), nullptr, u.data());
    std::vector<int> constant;
    for (std::size_t j = 0; j < p; ++j)
      if (held[j]) constant.push_back(static_cast<int>(j));
    if (!constant.empty()) problem.SetManifold(u.data(), new ceres::SubsetManifold(static_cast<int>(p), constant));
    for (std::size_t j = 0; j < p; ++j) {
      problem.SetParameterLowerBound(u.data(), static_cast<int>(j), lowerU[j]);
      problem.SetParameterUpperBound(u.data(), static_cast<int>(j), upperU[j]);
    }
    ceres::Solver::Options options;
    options.minimizer_type = ceres::TRUST_REGION;
    options.trust_region_strategy_type = ceres::LEVENBERG_MARQUARDT;
    options.linear_solver_type = ceres::DENSE_QR;
    options.max_num_iterations = std::max(iterationsLeft, 1);
    // The fit stops when the Gauss-Newton step is below pb.stepTolerance standard errors (History, Bates & Watts
    // 1981). Ceres' own tests are back-stops that a fit whose runs are accurate enough does not reach first: a
    // relative cost decrease below 1e-9 (with the cost about n/2 at a fit that matches the noise, well below any
    // change that moves a parameter by 0.01 SE) and a relative step below 1e-8 in the scaled variables.
    options.function_tolerance = 1e-9;
    options.gradient_tolerance = 1e-10;
    options.parameter_tolerance = 1e-8;
    options.num_threads = 1;  // the runs of one evaluation are parallel already
    options.logging_type = ceres::SILENT;
    options.update_state_every_iteration = true;
    History history(result.history, u.data(), tr, p, static_cast<int>(s), !pb.quiet, model, pb.stepTolerance, finalStepSe,
                    held);
    options.callbacks.push_back(&history);
    ceres::Solve(options, &problem, &summary);
    if (round == 0) initialCost = summary.initial_cost;
    iterationsLeft -= static_cast<int>(summary.iterations.size()) - 1;
    const bool allHeld = history.newHeld && std::all_of(history.newHeld->begin(), history.newHeld->end(), [](bool b) { return b; });
    if (!history.newHeld || allHeld || iterationsLeft <= 0 ||
        std::find(heldSeen.begin(), heldSeen.end(), *history.newHeld) != heldSeen.end()) {
      if (history.newHeld) {
        // Cycling between sets, no iterations left or every parameter at a bound: not a convergence.
        if (allHeld) {
          finalStepSe = 0.0;
        } else {
          summary.termination_type = ceres::NO_CONVERGENCE;
          summary.message = "the set of parameters at a bound did not settle";
        }
      }
      break;
    }
    held = *history.newHeld;
    heldSeen.push_back(held);
    if (!pb.quiet) {
      std::vector<std::string> names;
      for (std::size_t j = 0; j < p; ++j)
        if (held[j]) names.push_back(pb.parameters[j].key);
      fmt::print(stderr, "fit: held at a bound: {}\n", names.empty() ? std::string("none") : fmt::format("{}", fmt::join(names, ", ")));
    }
    }
    summary.initial_cost = initialCost;
    if (!pb.quiet)
      fmt::print(stderr, "fit: start {} of {}: {} after {} iterations, cost {:.6g}\n", s + 1, result.startPoints.size(),
                 ceres::TerminationTypeToString(summary.termination_type), summary.iterations.size(),
                 summary.final_cost);
    const bool solved =
        summary.termination_type == ceres::CONVERGENCE || summary.termination_type == ceres::USER_SUCCESS;
    if (summary.termination_type == ceres::USER_SUCCESS)
      summary.message = fmt::format("Converged: the Gauss-Newton step is {:.2g} standard errors (below {:g}; relative "
                                    "offset criterion, Bates & Watts 1981)",
                                    finalStepSe, pb.stepTolerance);
    result.startCosts.push_back(summary.IsSolutionUsable() ? summary.final_cost : nan);
    if (summary.initial_cost < 0.0 || !summary.IsSolutionUsable()) {
      if (s == 0 && result.startPoints.size() == 1)
        throw SolverError(fmt::format("fit: the model fails at the start values: {}", lastError.empty() ? summary.message : lastError));
      continue;
    }
    // Prefer converged starts; among them the lowest cost.
    const bool better = (solved && !result.converged) || (solved == result.converged && summary.final_cost < bestCost);
    if (!anySolved || better) {
      bestCost = summary.final_cost;
      bestU = u;
      bestSummary = summary;
      result.converged = solved;
      anySolved = true;
    }
  }
  result.runs = model.runs();
  if (!anySolved) {
    result.converged = false;
    result.message = "no start gave a usable solution: " + lastError;
    result.values = result.startPoints.front();
    result.wallSeconds = std::chrono::duration<double>(Clock::now() - wallStart).count();
    return result;
  }
  result.message = bestSummary.message;
  for (std::size_t j = 0; j < p; ++j) result.values.push_back(tr.toX(j, bestU[j]));

  // Linearisation at the optimum, in the parameters' own units.
  Linearisation l = model.at(bestU, true);
  result.runs = model.runs();
  if (!l.ok) {
    result.converged = false;
    result.message = "the model fails near the optimum: " + l.error;
    result.wallSeconds = std::chrono::duration<double>(Clock::now() - wallStart).count();
    return result;
  }
  result.predictions = l.predictions;
  result.gradientMethods = model.methods();
  result.gradientReasons = model.reasons();
  result.jacobian.assign(rows * p, 0.0);
  for (std::size_t i = 0; i < rows; ++i)
    for (std::size_t j = 0; j < p; ++j) result.jacobian[i * p + j] = l.jacobian[i * p + j] / tr.dxdu(j, bestU[j]);
  for (std::size_t i = 0; i < n; ++i) {
    result.residuals.push_back(l.predictions[i] - targets.observed[i]);
    result.weightedResiduals.push_back(l.residuals[i]);
    result.ssr += l.residuals[i] * l.residuals[i];
  }
  const double dof = static_cast<double>(n - p);
  result.sigma2 = result.ssr / dof;
  const double nd = static_cast<double>(n), k = static_cast<double>(p + 1);
  // Least-squares forms with the error variance estimated (K = p + 1; Burnham & Anderson 2002, sec. 2.2.1).
  result.aic = nd * std::log(result.ssr / nd) + 2.0 * k;
  result.bic = nd * std::log(result.ssr / nd) + k * std::log(nd);
  result.tQuantile = boost::math::quantile(boost::math::complement(boost::math::students_t(dof), 0.025));

  // Covariance by SVD of J; identifiability from the column-scaled J's condition.
  Eigen::MatrixXd J(rows, p);
  for (std::size_t i = 0; i < rows; ++i)
    for (std::size_t j = 0; j < p; ++j) J(static_cast<Eigen::Index>(i), static_cast<Eigen::Index>(j)) = result.jacobian[i * p + j];
  Eigen::VectorXd norms = J.colwise().norm();
  Eigen::MatrixXd scaled = J;
  for (Eigen::Index j = 0; j < scaled.cols(); ++j)
    if (norms(j) > 0.0) scaled.col(j) /= norms(j);
  Eigen::JacobiSVD<Eigen::MatrixXd> svd(scaled, Eigen::ComputeThinV);
  const Eigen::VectorXd sv = svd.singularValues();
  for (Eigen::Index i = 0; i < sv.size(); ++i) result.singularValues.push_back(sv(i));
  const double ratio = sv(0) > 0.0 ? sv(sv.size() - 1) / sv(0) : 0.0;
  const bool singular = !(ratio > 1e-12);
  result.covariance.assign(p * p, nan);
  result.correlation.assign(p * p, nan);
  for (std::size_t j = 0; j < p; ++j)
    if (norms(static_cast<Eigen::Index>(j)) == 0.0)
      result.warnings.push_back(fmt::format("{} has no effect on the residuals (a zero Jacobian column): the data do not "
                                            "determine it",
                                            pb.parameters[j].key));
  if (!singular) {
    // (J^T J)^-1 = D^-1 V S^-2 V^T D^-1 with D the column norms.
    const Eigen::MatrixXd& V = svd.matrixV();
    Eigen::MatrixXd inner = V * sv.cwiseInverse().cwiseAbs2().asDiagonal() * V.transpose();
    for (std::size_t a = 0; a < p; ++a)
      for (std::size_t b = 0; b < p; ++b)
        result.covariance[a * p + b] = result.sigma2 * inner(static_cast<Eigen::Index>(a), static_cast<Eigen::Index>(b)) /
                                       (norms(static_cast<Eigen::Index>(a)) * norms(static_cast<Eigen::Index>(b)));
    for (std::size_t a = 0; a < p; ++a)
      for (std::size_t b = 0; b < p; ++b)
        result.correlation[a * p + b] =
            result.covariance[a * p + b] / std::sqrt(result.covariance[a * p + a] * result.covariance[b * p + b]);
  }
  if (singular || ratio < 1e-8)
    result.warnings.push_back(fmt::format("the Jacobian is {} (condition number of the column-scaled Jacobian {:.3g}): "
                                          "some combination of parameters is not identifiable from these data{}",
                                          singular ? "singular" : "nearly singular", singular ? INFINITY : 1.0 / ratio,
                                          singular ? "; no covariance" : "; standard errors are unreliable"));
  for (std::size_t a = 0; a < p; ++a)
    for (std::size_t b = a + 1; b < p; ++b) {
      double r = result.correlation[a * p + b];
      if (std::abs(r) > 0.95)
        result.warnings.push_back(fmt::format("{} and {} are strongly correlated (r = {:.4f}): the data constrain a "
                                              "combination of them, not each separately",
                                              pb.parameters[a].key, pb.parameters[b].key, r));
    }
  for (std::size_t j = 0; j < p; ++j) {
    double se = std::sqrt(result.covariance[j * p + j]);
    result.standardErrors.push_back(se);
    const FitParameter& fp = pb.parameters[j];
    if (fp.log) {
      // On a log scale the interval is symmetric in ln(value): SE(ln x) = SE(x) / x (delta method).
      result.lower95.push_back(result.values[j] * std::exp(-result.tQuantile * se / result.values[j]));
      result.upper95.push_back(result.values[j] * std::exp(result.tQuantile * se / result.values[j]));
    } else {
      result.lower95.push_back(result.values[j] - result.tQuantile * se);
      result.upper95.push_back(result.values[j] + result.tQuantile * se);
    }
    const double span = fp.upper - fp.lower;
    if (result.values[j] <= fp.lower + 1e-6 * span || result.values[j] >= fp.upper - 1e-6 * span)
      result.warnings.push_back(fmt::format("{} ended at a bound ({:g} {}): the interval assumes an interior optimum",
                                            fp.key, result.values[j], fp.unit));
    // An interval wider than the range the user allowed: the data say less than the bounds, and the linearised
    // interval (exact only for a model linear in the parameter) is no description of the uncertainty this far
    // from the value (Bates & Watts 1988, ch. 6: profile-based regions then differ from the linear ones).
    else if (std::isfinite(se) && (result.lower95.back() < fp.lower || result.upper95.back() > fp.upper))
      result.warnings.push_back(fmt::format(
          "{}: the 95 % interval {:.4g} .. {:.4g} {} reaches beyond the bounds given with --free ({:g} .. {:g}; standard "
          "error {:.3g}, {:.0f} % of the value): the data determine it less than the bounds do, and the linearised "
          "interval does not describe its uncertainty{}",
          fp.key, result.lower95.back(), result.upper95.back(), fp.unit, fp.lower, fp.upper, se,
          100.0 * se / std::abs(result.values[j]),
          !fp.log && result.lower95.back() <= 0.0 && fp.lower >= 0.0
              ? "; it reaches below 0: `:log` on the --free bound gives an interval in ln(value) that stays positive"
              : ""));
  }
  // RMSE per series.
  for (std::size_t s = 0; s < pb.data.series.size(); ++s) {
    double sum = 0.0;
    std::size_t count = 0;
    for (std::size_t i = 0; i < n; ++i)
      if (targets.seriesOf[i] == s) {
        sum += result.residuals[i] * result.residuals[i];
        ++count;
      }
    result.rmse.push_back(std::sqrt(sum / static_cast<double>(count)));
  }
  if (!result.converged && result.message.empty()) result.message = bestSummary.message;
  result.wallSeconds = std::chrono::duration<double>(Clock::now() - wallStart).count();
  return result;
}

// ---- the command ------------------------------------------------------------------------------------

std::vector<std::string> fitSeriesNames(const ObservedData& data) {
  std::map<std::string, int> seen;
  std::vector<std::string> names;
  for (const ObservedSeries& os : data.series) {
    std::string name = os.quantity.name;
    if (int k = seen[name]++; k > 0) name += fmt::format("#{}", k + 1);
    names.push_back(name);
  }
  return names;
}

namespace {

void writeFitGroup(H5Writer& w, const FitProblem& pb, const FitResult& r, const FitOptions& o,
                   const std::vector<std::vector<double>>& modelSeries, const std::vector<double>& modelTimes,
                   const FitGridCheck& grid = {}) {
  const std::size_t p = pb.parameters.size();
  w.group("/fit");
  w.attribute("/fit", "converged", r.converged ? 1.0 : 0.0);
  w.attribute("/fit", "message", r.message);
  w.attribute("/fit", "observations", static_cast<double>(r.n));
  w.attribute("/fit", "parameters", static_cast<double>(p));
  w.attribute("/fit", "weighted_ssr", r.ssr);
  w.attribute("/fit", "residual_variance", r.sigma2);
  w.attribute("/fit", "aic", r.aic);
  w.attribute("/fit", "bic", r.bic);
  w.attribute("/fit", "t_quantile", r.tQuantile);
  w.attribute("/fit", "runs", static_cast<double>(r.runs));
  w.attribute("/fit", "wall_seconds", r.wallSeconds);
  w.attribute("/fit", "grid_nodes", static_cast<double>(r.gridNodes));
  w.attribute("/fit", "grid_pinned", r.gridPinned ? 1.0 : 0.0);
  w.attribute("/fit", "step_tolerance_se", pb.stepTolerance);
  w.attribute("/fit", "command_line", o.commandLine);
  std::vector<std::string> sources;  // the files (or in-memory tables) the series came from, in order
  for (const ObservedSeries& os : pb.data.series)
    if (std::find(sources.begin(), sources.end(), os.file) == sources.end()) sources.push_back(os.file);
  w.attribute("/fit", "data_files", fmt::format("{}", fmt::join(sources, "; ")));
  w.attribute("/fit", "warnings", fmt::format("{}", fmt::join(r.warnings, "\n")));
  w.attribute("/fit", "method",
              "Ceres Solver, Levenberg-Marquardt with bounds; Jacobian columns by CVODES forward sensitivities where a "
              "parameter enters the network as a coefficient, else central finite differences of whole runs (see "
              "/fit/parameters/gradient_method); covariance "
              "s^2 (J^T J)^-1 with s^2 = weighted SSR / (n - p); 95 % intervals value +- t(0.975, n - p) SE (log-scale "
              "parameters: value x/ exp(t SE / value))");
  w.attribute("/fit", "caution", caution);
  std::vector<std::string> names, units;
  std::vector<double> start, lower, upper, log;
  for (const FitParameter& fp : pb.parameters) {
    names.push_back(fp.key);
    units.push_back(fp.unit.empty() ? "1" : fp.unit);
    start.push_back(fp.start);
    lower.push_back(fp.lower);
    upper.push_back(fp.upper);
    log.push_back(fp.log ? 1.0 : 0.0);
  }
  w.strings("/fit/parameters/name", names);
  w.strings("/fit/parameters/units", units);
  const std::string perParameter = "see /fit/parameters/units";
  w.doubles("/fit/parameters/value", r.values, {}, perParameter);
  if (!r.standardErrors.empty()) {
    w.doubles("/fit/parameters/standard_error", r.standardErrors, {}, perParameter);
    w.doubles("/fit/parameters/lower_95", r.lower95, {}, perParameter);
    w.doubles("/fit/parameters/upper_95", r.upper95, {}, perParameter);
    w.doubles("/fit/covariance", r.covariance, {p, p}, "product of the two parameters' units");
    w.doubles("/fit/correlation", r.correlation, {p, p}, "1");
    w.doubles("/fit/jacobian", r.jacobian, {r.jacobian.size() / p, p}, "1 per parameter unit (weighted residuals)");
    w.doubles("/fit/singular_values", r.singularValues, {}, "1 (column-scaled Jacobian)");
  }
  w.doubles("/fit/parameters/start", start, {}, perParameter);
  w.doubles("/fit/parameters/lower_bound", lower, {}, perParameter);
  w.doubles("/fit/parameters/upper_bound", upper, {}, perParameter);
  w.doubles("/fit/parameters/log_scale", log, {}, "1");
  if (r.gradientMethods.size() == p) {
    w.strings("/fit/parameters/gradient_method", r.gradientMethods);
    w.strings("/fit/parameters/gradient_reason", r.gradientReasons);
  }
  // Iteration history.
  std::vector<double> iteration, cost, gradient, stepNorm, ok, startIndex, values, stepSe;
  for (const FitIteration& it : r.history) {
    iteration.push_back(it.iteration);
    cost.push_back(it.cost);
    gradient.push_back(it.gradientNorm);
    stepNorm.push_back(it.stepNorm);
    ok.push_back(it.successful ? 1.0 : 0.0);
    startIndex.push_back(it.start);
    stepSe.push_back(it.stepSe);
    values.insert(values.end(), it.values.begin(), it.values.end());
  }
  w.doubles("/fit/history/iteration", iteration, {}, "1");
  w.doubles("/fit/history/cost", cost, {}, "1 (half the weighted sum of squares)");
  w.doubles("/fit/history/gradient_max_norm", gradient, {}, "1 (scaled variables)");
  w.doubles("/fit/history/step_norm", stepNorm, {}, "1 (scaled variables)");
  w.doubles("/fit/history/successful", ok, {}, "1");
  w.doubles("/fit/history/start", startIndex, {}, "1");
  w.doubles("/fit/history/gauss_newton_step_se", stepSe, {}, "1 (standard errors; NaN: no Jacobian at the point)");
  w.doubles("/fit/history/values", values, {r.history.size(), p}, perParameter);
  std::vector<double> startValues;
  for (const auto& s : r.startPoints) startValues.insert(startValues.end(), s.begin(), s.end());
  w.doubles("/fit/starts/values", startValues, {r.startPoints.size(), p}, perParameter);
  w.doubles("/fit/starts/cost", r.startCosts, {}, "1");
  // Series.
  std::size_t offset = 0;
  const std::vector<std::string> seriesNames = fitSeriesNames(pb.data);
  for (std::size_t s = 0; s < pb.data.series.size(); ++s) {
    const ObservedSeries& os = pb.data.series[s];
    const std::string g = "/fit/series/" + seriesNames[s];
    const std::size_t m = os.values.size();
    auto slice = [&](const std::vector<double>& v) {
      return v.size() >= offset + m ? std::vector<double>(v.begin() + static_cast<std::ptrdiff_t>(offset),
                                                          v.begin() + static_cast<std::ptrdiff_t>(offset + m))
                                    : std::vector<double>();
    };
    w.doubles(g + "/time", os.times, {}, "s", "observation time since the start of the run");
    w.doubles(g + "/observed", os.values, {}, os.unit());
    w.doubles(g + "/sd", os.sd, {}, os.unit());
    if (!r.predictions.empty()) {
      w.doubles(g + "/predicted", slice(r.predictions), {}, os.unit());
      w.doubles(g + "/residual", slice(r.residuals), {}, os.unit());
      w.attribute(g, "rmse", r.rmse[s]);
    }
    if (s < modelSeries.size()) {
      w.doubles(g + "/model_time", modelTimes, {}, "s");
      w.doubles(g + "/model", modelSeries[s], {}, os.unit());
    }
    w.attribute(g, "file", os.file);
    w.attribute(g, "column", static_cast<double>(os.column));
    w.attribute(g, "file_unit", os.fileUnit);
    w.attribute(g, "units", os.unit());
    offset += m;
  }
  w.strings("/fit/series_names", seriesNames);
  w.scale("/fit/series_names");

  // The grid check (gridCheck): the first-order shift of the optimum on the grid refined N x.
  if (grid.refinement > 0) {
    const std::string G = "/fit/grid_check";
    w.group(G);
    w.attribute(G, "refinement", static_cast<double>(grid.refinement));
    w.attribute(G, "nodes", static_cast<double>(grid.nodes));
    w.attribute(G, "case_nodes", static_cast<double>(r.gridNodes));
    w.attribute(G, "wall_seconds", grid.seconds);
    w.attribute(G, "ok", grid.ok ? 1.0 : 0.0);
    w.attribute(G, "error", grid.error);
    w.attribute(G, "se_fraction", gridCheckSeFraction);
    w.attribute(G, "relative", gridCheckRelative);
    w.attribute(G, "warnings", fmt::format("{}", fmt::join(grid.warnings, "\n")));
    w.attribute(G, "method",
                "one run at the fitted values on the grid refined N x (run.grid_refinement); shift = -(J^T J)^-1 J^T "
                "(y_fine - y_case) / sd with the fit's weighted Jacobian J at its optimum (Gauss-Newton step towards "
                "the fine grid's optimum, linear approximation of Bates & Watts 1988, ch. 2); bias = -shift N^2 / "
                "(N^2 - 1), the fitted value minus that of a converged grid against a converged grid for a scheme of order 2 (Richardson 1911); "
                "warning when |bias| exceeds se_fraction standard errors or relative x |value|");
    w.attribute(G, "caution", caution);
    if (grid.ok) {
      w.doubles(G + "/shift", grid.shift, {}, perParameter, "optimum on the N x grid minus the fitted value");
      w.doubles(G + "/shift_se", grid.shiftSe, {}, "1", "shift in standard errors");
      w.doubles(G + "/bias", grid.bias, {}, perParameter, "estimated bias of the fitted value against a converged grid");
      w.doubles(G + "/bias_se", grid.biasSe, {}, "1", "bias in standard errors");
      w.doubles(G + "/bias_relative", grid.biasRelative, {}, "1", "|bias / value|");
      std::vector<double> held;
      for (bool b : grid.held) held.push_back(b ? 1.0 : 0.0);
      w.doubles(G + "/held", held, {}, "1", "1: at a bound with the shift pointing out (held, shift 0)");
      w.doubles(G + "/series_rms", grid.seriesRms, {}, "1", "RMS of (fine - case prediction) / sd per series");
      std::size_t off = 0;
      for (std::size_t s = 0; s < pb.data.series.size(); ++s) {
        const std::size_t m = pb.data.series[s].values.size();
        if (grid.finePredictions.size() >= off + m)
          w.doubles("/fit/series/" + seriesNames[s] + "/predicted_refined",
                    std::vector<double>(grid.finePredictions.begin() + static_cast<std::ptrdiff_t>(off),
                                        grid.finePredictions.begin() + static_cast<std::ptrdiff_t>(off + m)),
                    {}, pb.data.series[s].unit(), "prediction at the fitted values on the grid refined N x");
        off += m;
      }
    }
  }

  // netCDF-4 dimensions (HDF5 dimension scales): every dataset's axes are named coordinates.
  const std::string P = "/fit/parameter", P2 = "/fit/parameter_b";
  w.indexScale(P, p, "parameter index (names in parameters/name)");
  w.indexScale(P2, p, "parameter index, second axis of square matrices");
  for (const char* name : {"name", "units", "value", "standard_error", "lower_95", "upper_95", "start", "lower_bound",
                           "upper_bound", "log_scale", "gradient_method", "gradient_reason"})
    if (w.exists(std::string("/fit/parameters/") + name)) w.attach(std::string("/fit/parameters/") + name, {P});
  for (const char* name : {"/fit/covariance", "/fit/correlation"})
    if (w.exists(name)) w.attach(name, {P, P2});
  for (const char* name : {"shift", "shift_se", "bias", "bias_se", "bias_relative", "held"})
    if (w.exists(std::string("/fit/grid_check/") + name)) w.attach(std::string("/fit/grid_check/") + name, {P});
  if (w.exists("/fit/grid_check/series_rms")) w.attach("/fit/grid_check/series_rms", {"/fit/series_names"});
  if (w.exists("/fit/jacobian")) {
    w.indexScale("/fit/row", r.jacobian.size() / p, "residual row: observations series after series, then priors");
    w.attach("/fit/jacobian", {"/fit/row", P});
  }
  if (w.exists("/fit/singular_values")) {
    w.indexScale("/fit/component", r.singularValues.size(), "singular value index, largest first");
    w.attach("/fit/singular_values", {"/fit/component"});
  }
  w.indexScale("/fit/history/record", r.history.size(), "iteration record (all starts in order)");
  for (const char* name : {"iteration", "cost", "gradient_max_norm", "step_norm", "successful", "start", "gauss_newton_step_se"})
    w.attach(std::string("/fit/history/") + name, {"/fit/history/record"});
  w.attach("/fit/history/values", {"/fit/history/record", P});
  w.indexScale("/fit/starts/start", r.startPoints.size(), "start index of the multi-start");
  w.attach("/fit/starts/values", {"/fit/starts/start", P});
  w.attach("/fit/starts/cost", {"/fit/starts/start"});
  for (const std::string& name : seriesNames) {
    const std::string g = "/fit/series/" + name;
    w.scale(g + "/time");
    for (const char* v : {"observed", "sd", "predicted", "residual", "predicted_refined"})
      if (w.exists(g + "/" + v)) w.attach(g + "/" + v, {g + "/time"});
    if (w.exists(g + "/model_time")) {
      w.scale(g + "/model_time");
      w.attach(g + "/model", {g + "/model_time"});
    }
  }
}

std::string stemOf(const std::string& output) {
  std::filesystem::path path(output);
  return (path.parent_path() / path.stem()).string();
}

void printGridCheck(std::string& out, const FitProblem& pb, const FitResult& r, const FitGridCheck& g) {
  if (g.refinement == 0) return;
  const std::size_t p = pb.parameters.size();
  fmt::format_to(std::back_inserter(out), "Grid check: one run at the fitted values on the grid refined {}x ({} nodes against the fit's {}; {:.3g} s)\n",
             g.refinement, g.nodes, r.gridNodes, g.seconds);
  if (!g.ok) {
    fmt::format_to(std::back_inserter(out), "  no estimate: {}\n", g.error);
    return;
  }
  fmt::format_to(std::back_inserter(out), "  change of the predictions, RMS in noise SDs (largest, in the series' unit):");
  for (std::size_t s = 0; s < pb.data.series.size(); ++s)
    fmt::format_to(std::back_inserter(out), "{} {} {:.3g} ({:.3g} {})", s ? "," : "", pb.data.series[s].quantity.name, g.seriesRms[s], g.seriesMax[s],
               pb.data.series[s].unit());
  fmt::format_to(std::back_inserter(out), "\n{:<44} {:>12} {:>9} {:>12} {:>9} {:>9}  {}\n", "parameter", "shift to Nx", "in SE", "bias (est.)",
             "in SE", "% value", "unit");
  for (std::size_t j = 0; j < p; ++j)
    fmt::format_to(std::back_inserter(out), "{:<44} {:>12.4g} {:>9.3f} {:>12.4g} {:>9.3f} {:>9.3f}  {}{}\n", pb.parameters[j].key, g.shift[j], g.shiftSe[j],
               g.bias[j], g.biasSe[j], 100.0 * g.biasRelative[j], pb.parameters[j].unit.empty() ? "1" : pb.parameters[j].unit,
               g.held[j] ? " (held at its bound)" : "");
  fmt::format_to(std::back_inserter(out), "  shift: Gauss-Newton step from the fitted values towards the optimum on the refined grid, with the fit's "
             "Jacobian (first order);\n  bias: fitted value minus that of a converged grid, -shift x N^2/(N^2 - 1) "
             "for the scheme's order 2. {}\n",
             g.warnings.empty() ? fmt::format("Every bias is within {} SE and {} % of its value.", gridCheckSeFraction,
                                              100.0 * gridCheckRelative)
                                : fmt::format("{} parameter(s) above {} SE or {} % of the value (warnings below).",
                                              g.warnings.size(), gridCheckSeFraction, 100.0 * gridCheckRelative));
}

void printReport(std::string& out, const FitProblem& pb, const FitResult& r) {
  const std::size_t p = pb.parameters.size();
  long iterations = 0;
  for (const FitIteration& it : r.history) iterations += it.iteration > 0 ? 1 : 0;
  fmt::format_to(std::back_inserter(out), "Fit: {} observations in {} series, {} parameters; {} ({} iterations, {} model runs, {:.3g} s)\n", r.n,
             pb.data.series.size(), p, r.converged ? "converged" : "NOT converged", iterations, r.runs, r.wallSeconds);
  fmt::format_to(std::back_inserter(out), "  {}\n", r.message);
  if (r.standardErrors.empty()) return;
  fmt::format_to(std::back_inserter(out), "{:<44} {:>14} {:>12} {:>30}  {}\n", "parameter", "value", "std. error", "95 % interval", "unit");
  for (std::size_t j = 0; j < p; ++j)
    fmt::format_to(std::back_inserter(out), "{:<44} {:>14.8g} {:>12.4g} {:>14.8g} .. {:<14.8g}  {}\n", pb.parameters[j].key, r.values[j],
               r.standardErrors[j], r.lower95[j], r.upper95[j], pb.parameters[j].unit.empty() ? "1" : pb.parameters[j].unit);
  if (p > 1) {
    fmt::format_to(std::back_inserter(out), "Correlation matrix:\n");
    for (std::size_t a = 0; a < p; ++a) {
      std::string line = fmt::format("  {:<3}", a + 1);
      for (std::size_t b = 0; b < p; ++b) line += fmt::format(" {:>7.3f}", r.correlation[a * p + b]);
      fmt::format_to(std::back_inserter(out), "{}\n", line);
    }
  }
  if (r.gradientMethods.size() == p) {
    fmt::format_to(std::back_inserter(out), "Jacobian columns:\n");
    for (std::size_t j = 0; j < p; ++j)
      fmt::format_to(std::back_inserter(out), "  {:<44} {}{}\n", pb.parameters[j].key, r.gradientMethods[j],
                 r.gradientReasons[j].empty() ? "" : " (" + r.gradientReasons[j] + ")");
  }
  fmt::format_to(std::back_inserter(out), "{:<44} {:>12} {:>8}\n", "series", "RMSE", "n");
  for (std::size_t s = 0; s < pb.data.series.size(); ++s)
    fmt::format_to(std::back_inserter(out), "{:<44} {:>12.4g} {:>8}  {}\n", pb.data.series[s].quantity.name, r.rmse[s],
               pb.data.series[s].values.size(), pb.data.series[s].unit());
  fmt::format_to(std::back_inserter(out), "Weighted SSR {:.6g}, residual variance factor s^2 = {:.4g} (n - p = {}); AIC {:.4f}, BIC {:.4f}\n", r.ssr,
             r.sigma2, r.n - p, r.aic, r.bic);
}

}  // namespace

std::string fitReport(const FitProblem& pb, const FitResult& r, const FitGridCheck& grid) {
  std::string out;
  printReport(out, pb, r);
  printGridCheck(out, pb, r, grid);
  return out;
}

FitProblem makeFitProblem(const FitOptions& o, std::vector<std::string>& warnings) {
  FitProblem pb;
  pb.casePath = o.casePath;
  pb.caseText = caseText(o.casePath, o.caseText);
  pb.overrides = o.overrides;
  pb.coarseSteadyStart = !o.coldStart;
  if (o.rtol > 0.0) {
    pb.overrides.push_back(fmt::format("run.rtol={:g}", o.rtol));
    pb.overrides.push_back(fmt::format("run.atol={:g} K", o.rtol));
  }
  const Case base = loadCaseFromString(pb.caseText, pb.casePath, pb.overrides);
  if (o.data.empty() && o.observed.series.empty()) throw CaseError("fit: no observed data; give --data FILE.csv");
  ObservedOptions readOptions;
  readOptions.startTime = o.dataStart;
  for (const std::string& file : o.data) {
    ObservedData d = readObservedCsv(file, readOptions);
    for (ObservedSeries& s : d.series) pb.data.series.push_back(std::move(s));
  }
  for (const ObservedSeries& s : o.observed.series) pb.data.series.push_back(s);
  {
    Body body(base);
    checkObserved(pb.data, body);
  }
  pb.parameters = parseFitParameters(o.free, o.starts, o.priors, pb.caseText, pb.casePath, pb.overrides);
  pb.jobs = o.jobs;
  pb.step = o.step;
  pb.maxIterations = o.maxIterations;
  pb.starts = std::max(1, o.multiStart);
  pb.quiet = o.quiet;
  pb.gradient = o.gradient;
  pb.stepTolerance = o.stepTolerance;
  if (!(pb.stepTolerance > 0.0 && pb.stepTolerance <= 1.0))
    throw CaseError(fmt::format("--converged-se {}: must be above 0 and at most 1 (standard errors)", pb.stepTolerance));
  if (pb.gradient != "auto" && pb.gradient != "fd")
    throw CaseError(fmt::format("--gradient {}: expected auto (CVODES sensitivities where possible) or fd", pb.gradient));
  if (!(pb.step > 0.0 && pb.step < 0.1)) throw CaseError(fmt::format("--step {}: must be between 0 and 0.1", pb.step));
  if (o.multiStart < 1 || o.multiStart > 1000)
    throw CaseError(fmt::format("--multi-start {}: expected 1 to 1000 starts", o.multiStart));
  if (o.maxIterations < 1 || o.maxIterations > 10000)
    throw CaseError(fmt::format("--max-iterations {}: expected 1 to 10000", o.maxIterations));
  bool mixed = false;
  for (const ObservedSeries& s : pb.data.series)
    mixed = mixed || (!s.sdGiven && s.quantity.temperature != pb.data.series.front().quantity.temperature);
  if (mixed)
    warnings.push_back("series in different units (degC and W) without standard deviations (NAME.sd columns) are "
                       "weighted 1 per unit; give sd columns to weight them properly");
  if (!o.output.empty())
    if (auto dir = std::filesystem::path(o.output).parent_path(); !dir.empty() && !std::filesystem::is_directory(dir))
      throw CaseError(fmt::format("-o {}: the folder {} does not exist", o.output, dir.string()));
  if (o.gridCheck == 1 || o.gridCheck < 0 || o.gridCheck > 16)
    throw CaseError(fmt::format("--grid-check {}: expected 0 (no check) or a refinement from 2 to 16", o.gridCheck));
  return pb;
}

FitOutcome fitAndCheck(const FitProblem& pb, int refinement) {
  FitOutcome out;
  FitResult& r = out.result;
  r = runFit(pb);
  if (r.converged && refinement >= 2) {
    if (!pb.quiet) fmt::print(stderr, "fit: grid check: one run at the fitted values on the grid refined {}x\n", refinement);
    out.grid = gridCheck(pb, r, refinement);
    for (const std::string& w : out.grid.warnings) r.warnings.push_back(w);
    if (!out.grid.ok) r.warnings.push_back("grid check: no estimate: " + out.grid.error);
  }
  return out;
}

std::string writeIncompleteFit(const FitProblem& pb, const FitResult& r, const FitOptions& o, const std::string& output) {
  const std::string partial = stemOf(output) + ".incomplete.h5";
  {
    H5Writer w(partial + ".tmp", false);
    w.attribute("/", "complete", 0.0);
    w.attribute("/", "caution", caution);
    writeFitGroup(w, pb, r, o, {}, {});
  }
  std::filesystem::rename(partial + ".tmp", partial);
  return partial;
}

Case fittedCase(const FitProblem& pb, const FitResult& r) {
  // On the grid the fit's runs used (r.caseText, r.overrides: cell counts pinned at the start values).
  std::vector<std::string> fitted = r.overrides;
  for (std::size_t j = 0; j < r.values.size(); ++j) fitted.push_back(parameterOverride(pb.parameters[j], r.values[j]));
  return loadCaseFromString(r.caseText, pb.casePath, fitted);
}

FittedRun runFitted(const FitProblem& pb, const FitOutcome& outcome, const FitOptions& o, const Body& body,
                    const std::string& output, const OutputObserver& observer) {
  const FitResult& r = outcome.result;
  FittedRun out;
  ObservationSampler sampler(pb.data, body);
  const std::string running = output.empty() ? std::string() : output + ".fitting.h5";
  RunOptions options;
  options.output = running;
  options.commandLine = o.commandLine;
  options.quiet = true;
  options.observer = [&](double t, std::span<const double> y, const RunSummary& s) {
    sampler.observe(t, y, s);
    if (observer) observer(t, y, s);
  };
  options.observerTimes = ObservationSampler::timesBetweenOutputs(pb.data, body.spec().run);
  options.coarseSteadyStart = pb.coarseSteadyStart;
  out.summary = runTransient(body, options);
  if (!out.summary.complete) {
    std::error_code ec;
    if (!out.summary.outputPath.empty()) std::filesystem::remove(out.summary.outputPath, ec);
    return out;
  }
  out.modelTimes = sampler.outputTimes();
  for (std::size_t s = 0; s < pb.data.series.size(); ++s) out.modelSeries.push_back(sampler.outputSeries(s));
  if (output.empty()) return out;
  {
    H5Writer w(running, true);
    writeFitGroup(w, pb, r, o, out.modelSeries, out.modelTimes, outcome.grid);
  }
  std::filesystem::rename(running, output);
  out.results = output;

  const std::string fittedCasePath = stemOf(output) + "_fitted.toml";
  {
    std::ofstream file(fittedCasePath + ".tmp");
    file << "# Fitted case written by `" << o.commandLine << "`\n";
    file << "# " << caution << "\n# The fitted values (also in " << output << ", /fit):\n";
    for (std::size_t j = 0; j < r.values.size(); ++j)
      file << fmt::format("#   {} = {:.10g} {} (SE {:.4g}, 95 % interval {:.6g} .. {:.6g})\n", pb.parameters[j].key,
                          r.values[j], pb.parameters[j].unit, r.standardErrors[j], r.lower95[j], r.upper95[j]);
    file << "# Below: the fully resolved case with these values (SI units); `thermorph run` on this file reproduces\n"
            "# the fitted run.\n\n";
    file << resolvedCaseToml(body.spec());
  }
  std::filesystem::rename(fittedCasePath + ".tmp", fittedCasePath);
  out.fittedCase = fittedCasePath;
  return out;
}

int runFitCommand(const FitOptions& given) {
  FitOptions o = given;
  if (o.output.empty()) o.output = std::filesystem::path(o.casePath).stem().string() + "_fit.h5";
  std::vector<std::string> inputWarnings;
  const FitProblem pb = makeFitProblem(o, inputWarnings);
  for (const std::string& w : inputWarnings) fmt::print(stderr, "warning: {}\n", w);
  const std::string& output = o.output;

  const FitOutcome outcome = fitAndCheck(pb, o.gridCheck);
  const FitResult& r = outcome.result;
  fmt::print("{}", fitReport(pb, r, outcome.grid));
  for (const std::string& w : r.warnings) fmt::print(stderr, "warning: {}\n", w);

  if (!r.converged) {
    const std::string partial = writeIncompleteFit(pb, r, o, output);
    fmt::print(stderr, "error: the fit did not converge: {}\nIteration history kept in {} (marked incomplete).\n",
               r.message, partial);
    return 3;
  }

  // The fitted run with its full results, then /fit, then the case file that reproduces it.
  const Case c = fittedCase(pb, r);
  Body body(c);
  const FittedRun fitted = runFitted(pb, outcome, o, body, output, nullptr);
  if (!fitted.summary.complete) {
    fmt::print(stderr, "error: the fitted run failed: {}\n", fitted.summary.failure);
    return 3;
  }
  fmt::print("Results: {} (fitted run and /fit); fitted case: {}\n", fitted.results, fitted.fittedCase);
  fmt::print("Caution: {}\n", caution);
  return 0;
}

}  // namespace thermorph
