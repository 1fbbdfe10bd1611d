//! `thermorph sensitivity`: a design in the unit cube (Saltelli, Morris or local central differences), its runs
//! through the sweep engine (zipped --vary lists), indices computed from the sweep table.
#include "models/caution.hpp"
#include "drivers/sensitivity.hpp"

#include <algorithm>
#include <cmath>
#include <cstdlib>
#include <filesystem>
#include <fstream>
#include <limits>
#include <sstream>

#include <fmt/format.h>

#include "models/case.hpp"
#include "drivers/fit.hpp"
#include "drivers/forward_sensitivity.hpp"
#include "drivers/sweep_metrics.hpp"
#include "drivers/h5_append.hpp"
#include "drivers/sampling.hpp"
#include "drivers/sweep.hpp"

namespace thermorph {
namespace {

constexpr double nan = std::numeric_limits<double>::quiet_NaN();

//! MPI rank from the launcher's environment (0 when not under MPI).
int launcherRank() {
  for (const char* name : {"OMPI_COMM_WORLD_RANK", "PMIX_RANK", "PMI_RANK", "MV2_COMM_WORLD_RANK"})
    if (const char* v = std::getenv(name)) return std::atoi(v);
  return 0;
}

//! Value of a parameter at unit-cube coordinate z (log-uniform on a log scale).
double valueAt(const FitParameter& p, double z) {
  if (p.log) return std::exp(std::log(p.lower) + (std::log(p.upper) - std::log(p.lower)) * z);
  return p.lower + (p.upper - p.lower) * z;
}

std::string valueText(const FitParameter& p, double v) {
  return p.unit.empty() ? fmt::format("{:.17g}", v) : fmt::format("{:.17g} {}", v, p.unit);
}

//! The sweep's metric collector as a probe of the forward-sensitivity driver.
class MetricProbe : public OutputProbe {
 public:
  MetricProbe(const Body& body, const SweepPlan& plan) : collector_(body, plan.window, plan.thresholds, plan.steady) {}
  void observe(double t, std::span<const double> y, const RunSummary& s) override { collector_.observe(t, y, s); }
  std::vector<double> values() const override { return collector_.values(); }

 private:
  MetricCollector collector_;
};

}  // namespace

int runSensitivityCommand(const SensitivityOptions& o) {
  const std::string method = o.method;
  if (method != "local" && method != "morris" && method != "sobol")
    throw CaseError(fmt::format("--method {}: expected local, morris or sobol", method));
  const std::string caseText = thermorph::caseText(o.casePath, o.caseText);
  if (o.params.empty()) throw CaseError("sensitivity: no parameter; give --param KEY=LOWER:UPPER (local: --param KEY)");
  if (method != "local")
    for (const std::string& p : o.params)
      if (p.find('=') == std::string::npos)
        throw CaseError(fmt::format("--param {}: {} needs bounds, KEY=LOWER:UPPER[:log]", p, method));
  // Steady runs (--steady, or the case's sweep.mode = "steady", which the sweep engine follows): the [run] keys of
  // the integration over time are refused as parameters here, naming --param (the sweep engine would name --vary).
  const bool steady = o.steady || loadCaseFromString(caseText, o.casePath, o.overrides).sweep.steady;
  std::vector<FitParameter> params =
      parseFitParameters(o.params, {}, {}, caseText, o.casePath, o.overrides, method == "local", "--param", steady);
  const std::size_t k = params.size();
  if (method != "local")
    for (const FitParameter& p : params)
      if (!std::isfinite(p.lower) || !std::isfinite(p.upper))
        throw CaseError(fmt::format("--param {}: {} needs bounds, KEY=LOWER:UPPER", p.key, method));
  if (!(o.step > 0.0 && o.step < 0.5)) throw CaseError(fmt::format("--step {}: must be between 0 and 0.5", o.step));

  // The design: values[run][parameter].
  std::vector<std::vector<double>> unit, values;
  std::size_t n = o.samples;
  MorrisDesign morris;
  if (method == "sobol") {
    if (n == 0) n = 512;
    unit = saltelliDesign(k, n);
  } else if (method == "morris") {
    if (n == 0) n = 10;
    morris = morrisDesign(k, n, o.levels, o.seed);
    unit = morris.points;
  }
  // Local: which parameters get exact derivatives (coefficient parameters: CVODES forward sensitivities of a
  // transient run, the implicit function theorem at a steady state), which central differences of whole runs on
  // the sweep engine.
  std::vector<ParameterGradient> gradients(k);
  std::vector<std::size_t> rowOf(k, 0);  // local, finite differences: the design row of p (1 + step)
  if (method == "local") {
    std::vector<SensitivityParameter> sp;
    for (const FitParameter& p : params) sp.push_back({p.key, p.unit, p.start});
    if (o.gradient == "fd") {
      for (ParameterGradient& g : gradients) g.reason = "--gradient fd";
    } else {
      gradients = classifyParameters(caseText, o.casePath, o.overrides, sp);
      if (o.steady)
        for (ParameterGradient& g : gradients)
          if (g.method == GradientMethod::Forward) g.method = GradientMethod::Steady;
    }
    // Base, then for each finite-difference parameter p (1 + step) and p (1 - step).
    std::vector<double> base;
    for (std::size_t j = 0; j < k; ++j) {
      const FitParameter& p = params[j];
      if (p.start == 0.0 && !isExact(gradients[j].method))
        throw CaseError(fmt::format("--param {}: the base value is 0; a relative step needs a non-zero value", p.key));
      base.push_back(p.start);
    }
    values.push_back(base);
    for (std::size_t j = 0; j < k; ++j) {
      if (isExact(gradients[j].method)) continue;
      rowOf[j] = values.size();
      for (double sign : {1.0, -1.0}) {
        std::vector<double> v = base;
        v[j] = base[j] * (1.0 + sign * o.step);
        values.push_back(v);
      }
    }
  } else {
    for (const std::vector<double>& z : unit) {
      std::vector<double> v(k);
      for (std::size_t j = 0; j < k; ++j) v[j] = valueAt(params[j], z[j]);
      values.push_back(v);
    }
  }

  // The runs: one zipped sweep.
  const std::string output =
      o.output.empty() ? std::filesystem::path(o.casePath).stem().string() + "_" + method + ".h5" : o.output;
  const std::filesystem::path outPath(output);
  const std::string runsTable = ((outPath.parent_path() / outPath.stem()).string()) + "_runs.h5";
  SweepOptions sweep;
  sweep.casePath = o.casePath;
  sweep.caseText = caseText;
  sweep.overrides = o.overrides;
  sweep.zip = true;
  sweep.metrics = o.metrics;
  sweep.window = o.window;
  sweep.steady = o.steady;
  sweep.jobs = o.jobs;
  sweep.output = runsTable;
  sweep.resume = o.resume;
  sweep.quiet = o.quiet;
  sweep.commandLine = o.commandLine;
  sweep.report = o.report;
  sweep.log = o.log;
  for (std::size_t j = 0; j < k; ++j) {
    std::string list;
    for (std::size_t r = 0; r < values.size(); ++r) {
      if (r) list += ',';
      list += valueText(params[j], values[r][j]);
    }
    sweep.vary.push_back(params[j].key + "=" + list);
  }
  if (!o.quiet)
    fmt::print(o.log, "sensitivity ({}): {} parameters, {} runs on the sweep engine -> {}\n", method, k, values.size(),
               runsTable);
  const int code = runSweepCommand(sweep);
  if (code != 0 || launcherRank() != 0) return code;

  // Local: one run with CVODES forward sensitivities (a steady state: the implicit function theorem) for the
  // coefficient parameters, its metrics by name.
  ForwardSensitivityResult forward;
  std::vector<std::string> forwardNames;
  bool anyForward = false;
  for (const ParameterGradient& g : gradients) anyForward = anyForward || isExact(g.method);
  if (method == "local" && anyForward) {
    const SweepPlan plan = makeSweepPlan(sweep);
    std::vector<SensitivityParameter> sp;
    for (const FitParameter& p : params) sp.push_back({p.key, p.unit, p.start});
    const ProbeFactory probe = [&](const Body& body) { return std::unique_ptr<OutputProbe>(new MetricProbe(body, plan)); };
    forward = o.steady ? steadySensitivities(caseText, o.casePath, o.overrides, sp, probe)
                       : forwardSensitivities(caseText, o.casePath, o.overrides, sp, probe);
    if (!forward.ok) {
      fmt::print(o.log, "error: the {} failed: {}\n",
                 o.steady ? "steady state with sensitivities" : "run with forward sensitivities", forward.error);
      return 3;
    }
    const Body body(loadCaseFromString(caseText, o.casePath, o.overrides));
    for (const MetricColumn& column : metricColumns(body, plan.thresholds, o.steady)) forwardNames.push_back(column.name);
  }

  // Indices from the table.
  const std::vector<std::string> status = h5ReadStrings(runsTable, "/runs/status");
  if (status.size() != values.size())
    throw std::runtime_error(fmt::format("{}: {} rows, expected {}", runsTable, status.size(), values.size()));
  std::vector<std::string> metrics;
  for (const std::string& name : h5List(runsTable, "/metrics"))  // the run coordinate (a dimension scale) is no metric
    if (h5ReadStringAttribute(runsTable, "/metrics/" + name, "CLASS") != "DIMENSION_SCALE") metrics.push_back(name);
  std::vector<std::string> units;
  std::size_t failed = 0;
  for (const std::string& s : status) failed += s == "ok" ? 0 : 1;
  const std::size_t m = metrics.size();
  const std::string tmp = output + ".tmp";
  {
    H5Writer w(tmp, false);
    w.attribute("/", "kind", "thermorph sensitivity");
    w.attribute("/", "caution", caution);
    w.attribute("/", "command_line", o.commandLine);
    w.group("/sensitivity");
    w.attribute("/sensitivity", "method", method);
    w.attribute("/sensitivity", "runs", static_cast<double>(values.size()));
    w.attribute("/sensitivity", "runs_failed", static_cast<double>(failed));
    w.attribute("/sensitivity", "runs_table", runsTable);
    std::vector<std::string> keys, punits;
    std::vector<double> lower, upper, base;
    for (const FitParameter& p : params) {
      keys.push_back(p.key);
      punits.push_back(p.unit.empty() ? "1" : p.unit);
      lower.push_back(p.lower);
      upper.push_back(p.upper);
      base.push_back(p.start);
    }
    w.strings("/sensitivity/parameters", keys);
    w.scale("/sensitivity/parameters");
    w.strings("/sensitivity/parameter_units", punits);
    w.doubles("/sensitivity/parameter_base", base, {}, "see parameter_units");
    if (method != "local") {
      w.doubles("/sensitivity/parameter_lower", lower, {}, "see parameter_units");
      w.doubles("/sensitivity/parameter_upper", upper, {}, "see parameter_units");
    }
    std::vector<double> flat;
    for (const auto& v : values) flat.insert(flat.end(), v.begin(), v.end());
    w.doubles("/sensitivity/design/values", flat, {values.size(), k}, "see parameter_units");
    if (!unit.empty()) {
      flat.clear();
      for (const auto& v : unit) flat.insert(flat.end(), v.begin(), v.end());
      w.doubles("/sensitivity/design/unit", flat, {unit.size(), k}, "1");
    }
    w.strings("/sensitivity/metrics", metrics);
    w.scale("/sensitivity/metrics");
    std::vector<double> a, b, c, d, e, f, variance, used;
    std::vector<std::string> sensitivityWarnings;
    fmt::print(o.report, "Sensitivity ({}), {} runs ({} failed); parameters: {}\n", method, values.size(), failed,
               fmt::join(keys, ", "));
    if (method == "local")
      for (std::size_t j = 0; j < k; ++j)
        fmt::print(o.report, "  {:<44} derivative by {}{}\n", keys[j], gradientMethodName(gradients[j].method),
                   gradients[j].reason.empty() ? "" : " (" + gradients[j].reason + ")");
    for (std::size_t q = 0; q < m; ++q) {
      std::vector<double> y = h5ReadDoubles(runsTable, "/metrics/" + metrics[q]);
      units.push_back(h5ReadStringAttribute(runsTable, "/metrics/" + metrics[q], "units"));
      for (std::size_t r = 0; r < y.size(); ++r)
        if (status[r] != "ok") y[r] = nan;
      // A threshold some runs never cross (NaN in a run that ran): the estimators leave out what they touch, so the
      // indices describe only the part of the parameter space where it is crossed. Said, not hidden.
      const bool shown = q < 12 || metrics[q].starts_with("time_to.");
      if (method != "local" && metrics[q].starts_with("time_to.")) {
        std::size_t never = 0, ran = 0;
        for (std::size_t r = 0; r < y.size(); ++r)
          if (status[r] == "ok") ++ran, never += std::isnan(y[r]) ? 1 : 0;
        if (never > 0) {
          const std::string text = fmt::format(
              "{}: {} of {} runs never cross the threshold; the {} leave out every {} touching one of them, so they "
              "describe only the part of the parameter space where it is crossed (a conditional analysis): lengthen "
              "run.duration or choose a threshold every run reaches",
              metrics[q], never, ran, method == "sobol" ? "Sobol' indices" : "Morris effects",
              method == "sobol" ? "base row" : "elementary effect");
          fmt::print(o.log, "warning: {}\n", text);
          if (shown) fmt::print(o.report, "  warning: {}\n", text);
          sensitivityWarnings.push_back(text);
        }
      }
      if (method == "sobol") {
        SobolIndices s = saltelliIndices(k, n, y, o.bootstrap, 0.95, o.seed);
        a.insert(a.end(), s.first.begin(), s.first.end());
        b.insert(b.end(), s.total.begin(), s.total.end());
        c.insert(c.end(), s.firstLow.begin(), s.firstLow.end());
        d.insert(d.end(), s.firstHigh.begin(), s.firstHigh.end());
        e.insert(e.end(), s.totalLow.begin(), s.totalLow.end());
        f.insert(f.end(), s.totalHigh.begin(), s.totalHigh.end());
        variance.push_back(s.variance);
        used.push_back(static_cast<double>(s.used));
        if (shown) {
          fmt::print(o.report, "  {} (variance {:.4g} {}^2, {} base rows)\n", metrics[q], s.variance, units[q], s.used);
          if (!(s.variance > 0.0)) fmt::print(o.report, "    constant over the design: no indices (NaN in the file)\n");
          else for (std::size_t j = 0; j < k; ++j)
            fmt::print(o.report, "    {:<44} S1 {:7.4f} [{:7.4f}, {:7.4f}]   ST {:7.4f} [{:7.4f}, {:7.4f}]\n", keys[j], s.first[j],
                       s.firstLow[j], s.firstHigh[j], s.total[j], s.totalLow[j], s.totalHigh[j]);
        }
      } else if (method == "morris") {
        MorrisEffects me = morrisEffects(morris, y);
        for (std::size_t j = 0; j < k; ++j) {
          // Effects per unit-cube step scale to the metric's change over the parameter's whole range.
          a.push_back(me.mu[j]);
          b.push_back(me.muStar[j]);
          c.push_back(me.sigma[j]);
          d.push_back(static_cast<double>(me.count[j]));
        }
        if (shown) {
          fmt::print(o.report, "  {} [{} per range]\n", metrics[q], units[q]);
          for (std::size_t j = 0; j < k; ++j)
            fmt::print(o.report, "    {:<44} mu* {:10.4g}  mu {:10.4g}  sigma {:10.4g}  ({} effects)\n", keys[j], me.muStar[j], me.mu[j],
                       me.sigma[j], me.count[j]);
        }
      } else {
        const bool temperature = units[q] == "degC";
        const double y0 = y[0];
        const auto named = std::find(forwardNames.begin(), forwardNames.end(), metrics[q]);
        for (std::size_t j = 0; j < k; ++j) {
          double derivative = nan;
          if (isExact(gradients[j].method)) {
            if (named != forwardNames.end())
              derivative = forward.derivatives[j][static_cast<std::size_t>(named - forwardNames.begin())];
          } else {
            const std::size_t r = rowOf[j];
            const double up = values[r][j], down = values[r + 1][j];
            derivative = (y[r] - y[r + 1]) / (up - down);
          }
          const double p0 = params[j].start;
          a.push_back(derivative);
          b.push_back(derivative * p0 / (temperature ? y0 + 273.15 : y0));
          c.push_back(derivative * p0);
        }
        e.push_back(y0);
        if (shown) {
          fmt::print(o.report, "  {} = {:.6g} {}\n", metrics[q], y0, units[q]);
          for (std::size_t j = 0; j < k; ++j) {
            // A compound parameter unit in parentheses: "degC/(W/(m K))", not "degC/W/(m K)" (read as degC per W,
            // per m K: found in a new-user trial).
            const std::string& pu = punits[j];
            const bool compound = pu.find_first_of("/ *.") != std::string::npos;
            const std::string per = pu.empty() || pu == "1" ? units[q] : units[q] + "/" + (compound ? "(" + pu + ")" : pu);
            fmt::print(o.report, "    {:<44} dy/dp {:11.5g} {}   dln y/dln p {:9.4g}   p dy/dp {:9.4g} {}\n", keys[j], a[q * k + j],
                       per, b[q * k + j], c[q * k + j], units[q]);
          }
        }
      }
    }
    if (m > 12) fmt::print(o.report, "  ... {} metrics in all (see {})\n", m, output);
    w.strings("/sensitivity/units", units);
    if (!sensitivityWarnings.empty()) w.attribute("/sensitivity", "warnings", fmt::format("{}", fmt::join(sensitivityWarnings, "; ")));
    const std::vector<std::uint64_t> shape = {m, k};
    if (method == "sobol") {
      w.doubles("/sensitivity/first", a, shape, "1");
      w.doubles("/sensitivity/total", b, shape, "1");
      w.doubles("/sensitivity/first_low", c, shape, "1");
      w.doubles("/sensitivity/first_high", d, shape, "1");
      w.doubles("/sensitivity/total_low", e, shape, "1");
      w.doubles("/sensitivity/total_high", f, shape, "1");
      w.doubles("/sensitivity/variance", variance, {}, "square of each metric's unit");
      w.doubles("/sensitivity/base_rows_used", used, {}, "1");
      w.attribute("/sensitivity", "base_samples", static_cast<double>(n));
      w.attribute("/sensitivity", "bootstrap", static_cast<double>(o.bootstrap));
      w.attribute("/sensitivity", "estimators",
                  "Saltelli et al. (2010) Table 2 (b) with fB centred: S1 = mean((fB - mean f) (fABi - fA)) / V, ST "
                  "(Jansen 1999; Table 2 (f)) = mean((fA - "
                  "fABi)^2) / (2 V); A, B from a 2k-dimensional Sobol' sequence (Boost.Random); 95 % bootstrap "
                  "percentile intervals over base rows");
    } else if (method == "morris") {
      w.doubles("/sensitivity/mu", a, shape, "metric unit per parameter range");
      w.doubles("/sensitivity/mu_star", b, shape, "metric unit per parameter range");
      w.doubles("/sensitivity/sigma", c, shape, "metric unit per parameter range");
      w.doubles("/sensitivity/effects", d, shape, "1");
      w.attribute("/sensitivity", "trajectories", static_cast<double>(n));
      w.attribute("/sensitivity", "levels", static_cast<double>(o.levels));
      w.attribute("/sensitivity", "estimators",
                  "Morris (1991) elementary effects on a grid of `levels` levels, step levels / (2 (levels - 1)) of "
                  "the range; mu* = mean |EE| (Campolongo et al. 2007)");
    } else {
      w.doubles("/sensitivity/derivative", a, shape, "metric unit per parameter unit");
      w.doubles("/sensitivity/normalised", b, shape, "1 (temperatures in kelvin)");
      w.doubles("/sensitivity/semi_normalised", c, shape, "metric unit");
      w.doubles("/sensitivity/base", e, {}, "see units");
      w.attribute("/sensitivity", "step", o.step);
      w.attribute("/sensitivity", "estimators",
                  "CVODES forward sensitivities for parameters that enter the network as coefficients (one run; a "
                  "steady state: ds/dp = -J^-1 dF/dp, the implicit function theorem), "
                  "central differences of whole runs at p (1 +- step) for the rest (see gradient_method); normalised: "
                  "d ln y / d ln p with temperatures in kelvin; semi-normalised: p dy/dp");
      std::vector<std::string> methods, reasons;
      for (const ParameterGradient& g : gradients) {
        methods.push_back(gradientMethodName(g.method));
        reasons.push_back(g.reason);
      }
      w.strings("/sensitivity/gradient_method", methods);
      w.strings("/sensitivity/gradient_reason", reasons);
    }
  }
  {
    // netCDF-4 dimensions: parameters, metrics and the design's rows are coordinates of every dataset.
    H5Writer w(tmp, true);
    const std::string P = "/sensitivity/parameters", M = "/sensitivity/metrics";
    w.indexScale("/sensitivity/design/run", values.size(), "design row (run index in the runs table)");
    for (const char* name : {"parameter_units", "parameter_base", "parameter_lower", "parameter_upper", "gradient_method",
                             "gradient_reason"})
      if (w.exists(std::string("/sensitivity/") + name)) w.attach(std::string("/sensitivity/") + name, {P});
    for (const char* name : {"units", "variance", "base_rows_used", "base"})
      if (w.exists(std::string("/sensitivity/") + name)) w.attach(std::string("/sensitivity/") + name, {M});
    for (const char* name : {"first", "total", "first_low", "first_high", "total_low", "total_high", "mu", "mu_star",
                             "sigma", "effects", "derivative", "normalised", "semi_normalised"})
      if (w.exists(std::string("/sensitivity/") + name)) w.attach(std::string("/sensitivity/") + name, {M, P});
    for (const char* name : {"/sensitivity/design/values", "/sensitivity/design/unit"})
      if (w.exists(name)) w.attach(name, {"/sensitivity/design/run", P});
  }
  std::filesystem::rename(tmp, output);
  fmt::print(o.report, "Results: {} (indices), {} (runs)\nCaution: {}\n", output, runsTable, caution);
  return 0;
}

}  // namespace thermorph
