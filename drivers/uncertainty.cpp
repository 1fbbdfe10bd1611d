//! `thermorph uncertainty`: sampled parameters through whole runs, quantiles of metrics and bands of series.
#include "models/caution.hpp"
#include "drivers/uncertainty.hpp"

#include <algorithm>
#include <atomic>
#include <chrono>
#include <cmath>
#include <filesystem>
#include <fstream>
#include <limits>
#include <optional>
#include <sstream>
#include <thread>

#include <Eigen/Dense>
#include <boost/math/distributions/normal.hpp>
#include <fmt/format.h>

#include "models/case_schema.hpp"
#include "models/inert_keys.hpp"
#include "models/units.hpp"
#include "drivers/h5_append.hpp"
#include "drivers/observed.hpp"
#include "drivers/option_text.hpp"
#include "drivers/sampling.hpp"
#include "drivers/simulation.hpp"
#include "drivers/sweep_metrics.hpp"

namespace thermorph {
namespace {

using option_text::trim;

constexpr double nan = std::numeric_limits<double>::quiet_NaN();
constexpr double probabilities[] = {0.05, 0.25, 0.5, 0.75, 0.95};

//! Quantile of the finite values (linear between order statistics; Hyndman & Fan 1996, type 7).
//! `infinite`: +inf values ("never", a threshold not crossed) are kept and sort last; a quantile that reaches
//! into them is +inf.
double quantileOf(std::vector<double> v, double q, bool infinite = false) {
  v.erase(std::remove_if(v.begin(), v.end(), [&](double x) { return infinite ? std::isnan(x) : !std::isfinite(x); }),
          v.end());
  if (v.empty()) return nan;
  std::sort(v.begin(), v.end());
  const double pos = q * static_cast<double>(v.size() - 1);
  const std::size_t lo = static_cast<std::size_t>(std::floor(pos));
  const std::size_t hi = std::min(lo + 1, v.size() - 1);
  if (std::isinf(v[hi])) return pos == static_cast<double>(lo) ? v[lo] : v[hi];
  return v[lo] + (v[hi] - v[lo]) * (pos - static_cast<double>(lo));
}

struct Sampled {
  std::string key, unit;
  bool logNormal = false;  //!< --from-fit: fitted on a log scale, drawn in ln x
};

struct RunOutput {
  bool ok = false;
  bool refused = false;  //!< the case loader refused a sampled value (CaseError)
  std::string error;
  std::vector<double> metrics;
  std::vector<std::vector<double>> series;  // [series][output]
  std::vector<double> times;
};

}  // namespace

int runUncertaintyCommand(const UncertaintyOptions& o) {
  const std::string caseText = thermorph::caseText(o.casePath, o.caseText);
  const Case base = loadCaseFromString(caseText, o.casePath, o.overrides);
  if (o.design != "lhs" && o.design != "sobol") throw CaseError(fmt::format("--design {}: expected lhs or sobol", o.design));
  if (o.samples < 2 || o.samples > 1'000'000) throw CaseError(fmt::format("--samples {}: expected 2 to 1000000", o.samples));
  if (o.params.empty() == o.fromFit.empty())
    throw CaseError("uncertainty: give either --param KEY=DIST (one or more) or --from-fit FIT.h5");

  // Parameters and the map from the unit cube.
  std::vector<Sampled> params;
  std::vector<Distribution> distributions;
  Eigen::VectorXd mean;
  Eigen::MatrixXd cholesky;
  if (!o.fromFit.empty()) {
    if (!std::filesystem::exists(o.fromFit)) throw CaseError(fmt::format("--from-fit {}: no such file", o.fromFit));
    std::vector<std::string> names = h5ReadStrings(o.fromFit, "/fit/parameters/name");
    std::vector<std::string> units = h5ReadStrings(o.fromFit, "/fit/parameters/units");
    std::vector<double> values = h5ReadDoubles(o.fromFit, "/fit/parameters/value");
    std::vector<double> cov = h5ReadDoubles(o.fromFit, "/fit/covariance");
    const std::size_t k = names.size();
    if (k == 0 || cov.size() != k * k)
      throw CaseError(fmt::format("--from-fit {}: no /fit group with a covariance (a converged fit's results)", o.fromFit));
    // Parameters fitted on a log scale (--free ...:log) are drawn log-normally: ln x ~ N(ln x_fit, SE(x)^2 / x^2) with
    // the covariance transformed alike (delta method, d ln x = dx / x), the distribution behind the fit's own
    // interval x exp(+-t SE / x); such a value stays positive. Before 2026-12-05 they were drawn normally in x: in a
    // new-user trial 12 of 40 draws of a substrate conductance (88 +- 176 W/(m2 K)) were negative and refused.
    const std::vector<double> logScale = h5ReadDoubles(o.fromFit, "/fit/parameters/log_scale");  // empty: older files
    mean = Eigen::VectorXd(static_cast<Eigen::Index>(k));
    Eigen::MatrixXd c(static_cast<Eigen::Index>(k), static_cast<Eigen::Index>(k));
    for (std::size_t a = 0; a < k; ++a) {
      const bool lg = logScale.size() == k && logScale[a] != 0.0;
      if (lg && !(values[a] > 0.0))
        throw CaseError(fmt::format("--from-fit {}: {} was fitted on a log scale but its value is {:g}", o.fromFit,
                                    names[a], values[a]));
      mean(static_cast<Eigen::Index>(a)) = lg ? std::log(values[a]) : values[a];
      params.push_back({names[a], units[a] == "1" ? "" : units[a], lg});
    }
    for (std::size_t a = 0; a < k; ++a)
      for (std::size_t b = 0; b < k; ++b)
        c(static_cast<Eigen::Index>(a), static_cast<Eigen::Index>(b)) =
            cov[a * k + b] / ((params[a].logNormal ? values[a] : 1.0) * (params[b].logNormal ? values[b] : 1.0));
    Eigen::LLT<Eigen::MatrixXd> llt(c);
    if (llt.info() != Eigen::Success)
      throw CaseError(fmt::format("--from-fit {}: the covariance is not positive definite", o.fromFit));
    cholesky = llt.matrixL();
  } else {
    for (const std::string& p : o.params) {
      auto eq = p.find('=');
      if (eq == std::string::npos || eq == 0)
        throw CaseError(fmt::format("--param {}: expected KEY[UNIT]=DIST, e.g. \"environment.temperature[degC]=normal:10:2\"", p));
      std::string key = trim(p.substr(0, eq)), unit;
      if (auto open = key.find('['); open != std::string::npos) {
        auto close = key.find(']', open);
        unit = trim(key.substr(open + 1, close == std::string::npos ? std::string::npos : close - open - 1));
        key = trim(key.substr(0, open));
      }
      distributions.push_back(parseDistribution(trim(p.substr(eq + 1)), "--param " + p));
      params.push_back({key, unit});
    }
  }
  const std::size_t k = params.size();
  // Each sampled value passes through the case loader: check the keys and units once, at the distribution's median.
  auto overrideOf = [&](std::size_t j, double v) {
    return params[j].unit.empty() ? fmt::format("{}={:.17g}", params[j].key, v)
                                  : fmt::format("{}={:.17g} {}", params[j].key, v, params[j].unit);
  };
  for (std::size_t j = 0; j < k; ++j) {
    std::vector<std::string> ov = o.overrides;
    const double median = !distributions.empty() ? distributions[j].quantile(0.5)
                          : params[j].logNormal      ? std::exp(mean(static_cast<Eigen::Index>(j)))
                                                     : mean(static_cast<Eigen::Index>(j));
    ov.push_back(overrideOf(j, median));
    std::optional<std::string> inert;
    try {
      inert = InertKeys(loadCaseFromString(caseText, o.casePath, ov)).reason(params[j].key);
    } catch (const CaseError& e) {
      throw CaseError(fmt::format("--param {}: the case loader refuses {}: {}", params[j].key, ov.back(), e.what()));
    }
    // A parameter with no effect in the case (models/inert_keys.hpp) would spread nothing: refused (exit 2).
    if (inert)
      throw CaseError(fmt::format("{}: --param {}: the key has no effect in this case, so the results cannot depend on "
                                  "it: {}", o.casePath, params[j].key, *inert));
  }
  std::vector<std::vector<double>> unit =
      o.design == "sobol" ? sobolPoints(k, o.samples) : latinHypercube(k, o.samples, o.seed);
  std::vector<std::vector<double>> values(o.samples, std::vector<double>(k));
  for (std::size_t r = 0; r < o.samples; ++r) {
    if (distributions.empty()) {
      Eigen::VectorXd z(static_cast<Eigen::Index>(k));
      for (std::size_t j = 0; j < k; ++j)
        z(static_cast<Eigen::Index>(j)) = boost::math::quantile(boost::math::normal_distribution<double>(),
                                                                std::clamp(unit[r][j], 1e-12, 1.0 - 1e-12));
      Eigen::VectorXd x = mean + cholesky * z;
      for (std::size_t j = 0; j < k; ++j)
        values[r][j] = params[j].logNormal ? std::exp(x(static_cast<Eigen::Index>(j))) : x(static_cast<Eigen::Index>(j));
    } else {
      for (std::size_t j = 0; j < k; ++j) values[r][j] = distributions[j].quantile(unit[r][j]);
    }
  }

  // Series to band.
  ObservedData bands;
  for (const std::string& name : o.series) {
    ObservedSeries s;
    s.file = "--series";
    s.column = static_cast<int>(bands.series.size() + 1);
    s.quantity = parseObservedQuantity(name, "--series " + name);
    s.times = {0.0};
    s.values = {0.0};
    s.sd = {1.0};
    bands.series.push_back(std::move(s));
  }
  {
    Body body(base);
    checkObserved(bands, body);
  }

  // The runs (index 0: the base case), on threads; a failing run is recorded and left out.
  const std::size_t runs = o.samples + 1;
  std::vector<RunOutput> outputs(runs);
  std::vector<std::string> metricNames, metricUnits;
  const MetricWindow window = o.window.empty() ? MetricWindow{} : parseMetricWindow(o.window);
  std::vector<Threshold> thresholds;
  {
    Body body(base);
    MetricChoice chosen = chooseMetrics(body, o.metrics, window, false);
    thresholds = std::move(chosen.thresholds);
    for (const MetricColumn& c : chosen.columns) {
      metricNames.push_back(c.name);
      metricUnits.push_back(c.units);
    }
  }
  auto runOne = [&](std::size_t i) {
    RunOutput& out = outputs[i];
    try {
      std::vector<std::string> ov = o.overrides;
      if (i > 0)
        for (std::size_t j = 0; j < k; ++j) ov.push_back(overrideOf(j, values[i - 1][j]));
      Body body(loadCaseFromString(caseText, o.casePath, ov));
      MetricCollector metrics(body, window, thresholds, false);
      ObservationSampler sampler(bands, body);
      RunOptions options;
      options.quiet = true;
      options.observer = [&](double t, std::span<const double> y, const RunSummary& s) {
        metrics.observe(t, y, s);
        sampler.observe(t, y, s);
      };
      RunSummary summary = runTransient(body, options);
      if (!summary.complete) {
        out.error = summary.failure;
        return;
      }
      // The chosen columns by name (a sampled geometry may give a run other columns than the base).
      const std::vector<double> all = metrics.values();
      const std::vector<MetricColumn> names = metricColumns(body, thresholds, false);
      out.metrics.assign(metricNames.size(), nan);
      for (std::size_t q = 0; q < metricNames.size(); ++q)
        for (std::size_t col = 0; col < names.size() && col < all.size(); ++col)
          if (names[col].name == metricNames[q]) {
            out.metrics[q] = all[col];
            break;
          }
      for (std::size_t s = 0; s < bands.series.size(); ++s) out.series.push_back(sampler.outputSeries(s));
      out.times = sampler.outputTimes();
      out.ok = true;
    } catch (const CaseError& e) {
      out.error = e.what();
      out.refused = true;
    } catch (const std::exception& e) {
      out.error = e.what();
    }
  };
  const auto start = std::chrono::steady_clock::now();
  {
    unsigned hw = std::max(1u, std::thread::hardware_concurrency());
    std::size_t workers = std::min<std::size_t>(runs, o.jobs > 0 ? static_cast<std::size_t>(o.jobs) : hw);
    std::atomic<std::size_t> next{0}, done{0};
    std::vector<std::thread> threads;
    for (std::size_t w = 0; w < workers; ++w)
      threads.emplace_back([&] {
        for (std::size_t i = next.fetch_add(1); i < runs; i = next.fetch_add(1)) {
          runOne(i);
          ++done;
        }
      });
    for (std::thread& t : threads) t.join();
  }
  const double wall = std::chrono::duration<double>(std::chrono::steady_clock::now() - start).count();
  std::size_t ok = 0;
  for (std::size_t i = 1; i < runs; ++i) ok += outputs[i].ok ? 1 : 0;
  if (!outputs[0].ok) throw CaseError(fmt::format("uncertainty: the base case fails: {}", outputs[0].error));
  if (ok == 0) {
    fmt::print(o.log, "error: every sampled run failed; the first: {}\n", outputs[1].error);
    return 3;
  }
  // Failed draws are left out, so the statistics describe a truncated distribution: said loudly, with the cause.
  std::vector<std::string> warnings;
  if (ok < o.samples) {
    std::size_t refused = 0;
    std::string first;
    for (std::size_t i = 1; i < runs; ++i)
      if (!outputs[i].ok) {
        if (first.empty()) first = outputs[i].error;
        refused += outputs[i].refused ? 1 : 0;
      }
    std::string hint;
    if (refused > 0 && !o.fromFit.empty())
      hint = "; values the case refuses come from parameters fitted on a linear scale whose normal distribution "
             "reaches outside their range: fit them with `:log` on the --free bounds (drawn log-normally then)";
    else if (refused > 0)
      hint = "; values the case refuses: choose distributions inside each key's range (cases/REFERENCE.md)";
    warnings.push_back(fmt::format(
        "{} of {} sampled runs failed ({} refused by the case loader) and are left out: the quantiles, means and SDs "
        "describe the {} that ran, not the distribution given{}; the first failure: {}",
        o.samples - ok, o.samples, refused, ok, hint, first));
  }
  for (const std::string& w : warnings) fmt::print(o.log, "warning: {}\n", w);

  const std::string output =
      o.output.empty() ? std::filesystem::path(o.casePath).stem().string() + "_uncertainty.h5" : o.output;
  const std::string tmp = output + ".tmp";
  const std::size_t m = metricNames.size();
  {
    H5Writer w(tmp, false);
    w.attribute("/", "kind", "thermorph uncertainty");
    w.attribute("/", "caution", caution);
    w.attribute("/", "command_line", o.commandLine);
    w.group("/uncertainty");
    const std::string design =
        (o.design == "sobol" ? std::string("Sobol' points (Boost.Random)") : fmt::format("Latin hypercube, seed {}", o.seed)) +
        (o.fromFit.empty() ? "" : ", multivariate normal from the fit's covariance (in ln x for parameters fitted on a log scale)");
    w.attribute("/uncertainty", "design", design);
    w.attribute("/uncertainty", "runs", static_cast<double>(o.samples));
    w.attribute("/uncertainty", "runs_ok", static_cast<double>(ok));
    w.attribute("/uncertainty", "warnings", fmt::format("{}", fmt::join(warnings, "\n")));
    w.attribute("/uncertainty", "wall_seconds", wall);
    w.attribute("/uncertainty", "quantiles", "5, 25, 50, 75, 95 % (Hyndman & Fan 1996, type 7), failed runs left out");
    std::vector<std::string> keys, units, errors;
    for (const Sampled& s : params) {
      keys.push_back(s.key);
      units.push_back(s.unit.empty() ? "1" : s.unit);
    }
    w.strings("/uncertainty/parameters", keys);
    w.scale("/uncertainty/parameters");
    w.indexScale("/uncertainty/sample", o.samples, "sample index");
    w.strings("/uncertainty/parameter_units", units);
    std::vector<double> flat, status;
    for (std::size_t r = 0; r < o.samples; ++r) {
      flat.insert(flat.end(), values[r].begin(), values[r].end());
      status.push_back(outputs[r + 1].ok ? 1.0 : 0.0);
      errors.push_back(outputs[r + 1].error);
    }
    w.doubles("/uncertainty/samples", flat, {o.samples, k}, "see parameter_units");
    w.doubles("/uncertainty/run_ok", status, {}, "1");
    w.strings("/uncertainty/run_error", errors);
    // Metrics.
    std::vector<double> all(o.samples * m, nan), quantiles, means, sds;
    for (std::size_t r = 0; r < o.samples; ++r)
      if (outputs[r + 1].ok) std::copy(outputs[r + 1].metrics.begin(), outputs[r + 1].metrics.end(), all.begin() + static_cast<std::ptrdiff_t>(r * m));
    fmt::print(o.report, "Uncertainty: {} of {} runs ok ({:.3g} s); parameters: {}\n", ok, o.samples, wall, fmt::join(keys, ", "));
    fmt::print(o.report, "{:<52} {:>10} {:>10} {:>10} {:>10} {:>10}  unit\n", "metric", "5 %", "25 %", "median", "75 %", "95 %");
    const bool selected = std::any_of(o.metrics.begin(), o.metrics.end(), [](const std::string& x) {
      return trim(x).rfind("time_to:", 0) != 0;
    });
    std::vector<double> reached;  // time_to columns: share of the runs that ok'd which crossed the threshold
    for (std::size_t q = 0; q < m; ++q) {
      std::vector<double> column;
      for (std::size_t r = 0; r < o.samples; ++r) column.push_back(all[r * m + q]);
      const bool threshold = metricNames[q].starts_with("time_to.");
      if (threshold) {
        // A run that never crosses the threshold is censored at "never" (+infinity), not left out: the quantiles
        // of the runs that did cross would understate the time (half the runs never below 35 degC and the
        // "median" would be the median of the other half). Means and SDs are undefined then.
        double crossed = 0.0, ran = 0.0;
        for (std::size_t r = 0; r < o.samples; ++r)
          if (outputs[r + 1].ok) {
            ran += 1.0;
            if (std::isnan(column[r])) column[r] = std::numeric_limits<double>::infinity();
            else crossed += 1.0;
          }
        reached.push_back(ran > 0.0 ? crossed / ran : nan);
        for (double pr : probabilities) quantiles.push_back(quantileOf(column, pr, true));
        means.push_back(nan);
        sds.push_back(nan);
        if (crossed == ran) {  // every run crossed: the ordinary statistics
          double sum = 0.0, sq = 0.0;
          for (double v : column)
            if (std::isfinite(v)) sum += v, sq += v * v;
          means.back() = sum / ran;
          sds.back() = ran > 1 ? std::sqrt(std::max(0.0, (sq - sum * sum / ran) / (ran - 1.0))) : nan;
        }
        auto text = [](double v) { return std::isinf(v) ? std::string("never") : fmt::format("{:.4g}", v); };
        fmt::print(o.report, "{:<52} {:>10} {:>10} {:>10} {:>10} {:>10}  {} ({:.0f} % of the runs cross it)\n",
                   metricNames[q], text(quantiles[q * 5]), text(quantiles[q * 5 + 1]), text(quantiles[q * 5 + 2]),
                   text(quantiles[q * 5 + 3]), text(quantiles[q * 5 + 4]), metricUnits[q], 100.0 * reached.back());
        continue;
      }
      reached.push_back(nan);
      for (double pr : probabilities) quantiles.push_back(quantileOf(column, pr));
      double sum = 0.0, sq = 0.0, count = 0.0;
      for (double v : column)
        if (std::isfinite(v)) {
          sum += v;
          sq += v * v;
          count += 1.0;
        }
      means.push_back(sum / count);
      sds.push_back(count > 1 ? std::sqrt(std::max(0.0, (sq - sum * sum / count) / (count - 1.0))) : nan);
      // Printed: the body's metrics, or every chosen one when --metric selects columns.
      const bool shown = selected || metricNames[q].starts_with("body.");
      if (shown)
        fmt::print(o.report, "{:<52} {:>10.4g} {:>10.4g} {:>10.4g} {:>10.4g} {:>10.4g}  {}\n", metricNames[q], quantiles[q * 5],
                   quantiles[q * 5 + 1], quantiles[q * 5 + 2], quantiles[q * 5 + 3], quantiles[q * 5 + 4], metricUnits[q]);
    }
    w.strings("/uncertainty/metric_names", metricNames);
    w.scale("/uncertainty/metric_names");
    w.strings("/uncertainty/metric_units", metricUnits);
    w.doubles("/uncertainty/metric_values", all, {o.samples, m}, "see metric_units");
    w.doubles("/uncertainty/metric_quantiles", quantiles, {m, 5}, "see metric_units");
    w.attribute("/uncertainty/metric_quantiles", "probabilities", "0.05, 0.25, 0.5, 0.75, 0.95");
    w.doubles("/uncertainty/metric_mean", means, {}, "see metric_units");
    w.doubles("/uncertainty/metric_sd", sds, {}, "see metric_units");
    w.doubles("/uncertainty/metric_reached", reached, {}, "1",
              "time_to metrics: share of the runs that crossed the threshold (the others count as never: +inf in "
              "the quantiles; mean and SD NaN unless every run crossed); NaN for other metrics");
    std::vector<double> baseMetrics = outputs[0].metrics;
    w.doubles("/uncertainty/metric_base", baseMetrics, {}, "see metric_units");
    // Bands.
    const std::vector<double>& times = outputs[0].times;
    w.doubles("/uncertainty/time", times, {}, "s", "time since the start of the run");
    w.scale("/uncertainty/time");
    for (std::size_t s = 0; s < bands.series.size(); ++s) {
      const std::string g = "/uncertainty/series/" + bands.series[s].quantity.name;
      const std::string u = bands.series[s].unit();
      std::vector<std::vector<double>> band(5, std::vector<double>(times.size(), nan));
      std::vector<double> meanSeries(times.size(), nan);
      for (std::size_t t = 0; t < times.size(); ++t) {
        std::vector<double> column;
        for (std::size_t r = 1; r < runs; ++r)
          if (outputs[r].ok && outputs[r].series[s].size() == times.size()) column.push_back(outputs[r].series[s][t]);
        for (std::size_t p = 0; p < 5; ++p) band[p][t] = quantileOf(column, probabilities[p]);
        double sum = 0.0;
        for (double v : column) sum += v;
        meanSeries[t] = column.empty() ? nan : sum / static_cast<double>(column.size());
      }
      const char* names[] = {"q05", "q25", "q50", "q75", "q95"};
      for (std::size_t p = 0; p < 5; ++p) w.doubles(g + "/" + names[p], band[p], {}, u);
      w.doubles(g + "/mean", meanSeries, {}, u);
      w.doubles(g + "/base", outputs[0].series[s], {}, u);
      w.attribute(g, "units", u);
      for (const char* name : {"q05", "q25", "q50", "q75", "q95", "mean", "base"})
        w.attach(g + "/" + name, {"/uncertainty/time"});
    }
    // netCDF-4 dimensions: parameters, samples, metrics, quantile probabilities and time are coordinates.
    const std::string P = "/uncertainty/parameters", S = "/uncertainty/sample", M = "/uncertainty/metric_names",
                      Q = "/uncertainty/probability";
    w.doubles(Q, std::vector<double>(std::begin(probabilities), std::end(probabilities)), {}, "1",
              "probability of the quantile");
    w.scale(Q);
    w.attach("/uncertainty/parameter_units", {P});
    w.attach("/uncertainty/samples", {S, P});
    w.attach("/uncertainty/run_ok", {S});
    w.attach("/uncertainty/run_error", {S});
    w.attach("/uncertainty/metric_units", {M});
    w.attach("/uncertainty/metric_values", {S, M});
    w.attach("/uncertainty/metric_quantiles", {M, Q});
    for (const char* name : {"/uncertainty/metric_mean", "/uncertainty/metric_sd", "/uncertainty/metric_base",
                             "/uncertainty/metric_reached"})
      w.attach(name, {M});
  }
  std::filesystem::rename(tmp, output);
  fmt::print(o.report, "Results: {}\nCaution: {}\n", output, caution);
  return 0;
}

}  // namespace thermorph
