#include "drivers/refine.hpp"

#include <fnmatch.h>

#include <chrono>
#include <cmath>
#include <limits>
#include <map>

#include <fmt/format.h>

#include "drivers/simulation.hpp"
#include "drivers/sweep_metrics.hpp"
#include "models/body.hpp"
#include "models/units.hpp"

namespace thermorph {

namespace {

constexpr double notANumber = std::numeric_limits<double>::quiet_NaN();

//! Default selection: the whole-body budget, core, blood and mean skin temperatures, every segment's budget and
//! mean temperature.
const std::vector<std::string> kDefaultMetrics = {
    "body.heat_flow",           "body.core_temperature",       "body.blood_temperature.final",
    "body.mean_skin_temperature.final", "segments.*.heat_flow", "segments.*.mean_temperature.final"};

bool selected(const std::string& name, const std::vector<std::string>& selectors) {
  for (const std::string& sel : selectors) {
    const std::string below = sel + ".*";
    if (fnmatch(sel.c_str(), name.c_str(), 0) == 0 || fnmatch(below.c_str(), name.c_str(), 0) == 0) return true;
  }
  return false;
}

long tissueCells(const Case& c) {
  long cells = 0;
  for (const SegmentSpec& s : c.segments) {
    long radial = s.coat ? s.coat->cells : 0;
    for (const LayerSpec& l : s.layers) radial += l.cells;
    cells += radial * (s.shape == Shape::Sphere ? 1 : s.axialCells);
  }
  return cells;
}

}  // namespace

Case refinedCase(const Case& c, int factor) {
  Case out = c;
  for (SegmentSpec& s : out.segments) {
    if (s.shape != Shape::Sphere) s.axialCells *= factor;
    for (LayerSpec& l : s.layers) l.cells *= factor;
    if (s.coat) s.coat->cells *= factor;
    s.axialAuto = false;
    s.gradingAuto = false;  // axial_grading is kept: the same mapping on factor x the cells
    for (LayerSpec& l : s.layers) l.cellsAuto = false;
    if (s.coat) s.coat->cellsAuto = false;
  }
  out.warnings.clear();
  return out;
}

RefineResult runRefinement(const RefineOptions& options) {
  if (options.levels < 3 || options.levels > 5)
    throw CaseError(fmt::format("--levels {}: give 3 to 5 levels (1x, 2x, 4x, ...); an order needs three",
                                options.levels));
  std::vector<std::string> overrides = options.overrides;
  if (!options.duration.empty()) overrides.push_back("run.duration=\"" + options.duration + "\"");
  const Case base = loadCase(options.casePath, overrides);
  if (!options.duration.empty() && base.run.outputInterval > base.run.duration)
    throw CaseError(fmt::format("--duration {}: shorter than the case's output interval ({:g} s)", options.duration,
                                base.run.outputInterval));

  MetricWindow window;
  if (!options.window.empty()) window = parseMetricWindow(options.window);
  const std::vector<std::string>& selectors = options.metrics.empty() ? kDefaultMetrics : options.metrics;

  RefineResult result;
  result.warnings = base.warnings;
  result.referenceTemperature = base.environment.temperature - 273.15;
  std::vector<MetricColumn> columns;
  std::vector<std::vector<double>> values;  // [level][column]
  for (int level = 0; level < options.levels; ++level) {
    const int factor = 1 << level;
    const auto start = std::chrono::steady_clock::now();
    const Case c = refinedCase(base, factor);
    Body body(c);
    MetricCollector collector(body, window, {}, options.steady);
    RunOptions run;
    run.quiet = true;
    run.observer = [&](double t, std::span<const double> temperatures, const RunSummary& summary) {
      collector.observe(t, temperatures, summary);
    };
    RunSummary summary = options.steady ? runSteady(body, run) : runTransient(body, run);
    if (!summary.complete)
      throw SolverError(fmt::format("refinement level {}x: {}", factor, summary.failure));
    const std::vector<MetricColumn> names = metricColumns(body, {}, options.steady);
    const std::vector<double> v = collector.values();
    if (level == 0) {
      for (std::size_t k = 0; k < names.size(); ++k)
        if (selected(names[k].name, selectors)) columns.push_back(names[k]);
      if (columns.empty())
        throw CaseError(fmt::format("--metric: the selection matches no metric (names as in `thermorph sweep`, "
                                    "e.g. body.heat_flow, segments.*.heat_flow.convection)"));
    }
    std::map<std::string, double> byName;
    for (std::size_t k = 0; k < names.size(); ++k) byName[names[k].name] = v[k];
    std::vector<double> row;
    for (const MetricColumn& col : columns) row.push_back(byName.count(col.name) ? byName[col.name] : notANumber);
    values.push_back(row);
    result.factors.push_back(factor);
    result.cells.push_back(tissueCells(c));
    result.seconds.push_back(std::chrono::duration<double>(std::chrono::steady_clock::now() - start).count());
  }

  // Temperature ranges (max - min over the window: a core drop) next to their series.
  std::vector<MetricColumn> all;
  std::vector<std::vector<double>> allValues(values.size());
  for (std::size_t k = 0; k < columns.size(); ++k) {
    all.push_back(columns[k]);
    for (std::size_t l = 0; l < values.size(); ++l) allValues[l].push_back(values[l][k]);
    const std::string& name = columns[k].name;
    if (!options.steady && name.size() > 4 && name.compare(name.size() - 4, 4, ".max") == 0) {
      const std::string stem = name.substr(0, name.size() - 4);
      for (std::size_t j = 0; j < columns.size(); ++j)
        if (columns[j].name == stem + ".min") {
          all.push_back({stem + ".range", "K", "max - min over the window"});
          for (std::size_t l = 0; l < values.size(); ++l) allValues[l].push_back(values[l][k] - values[l][j]);
        }
    }
  }

  // Heat flows that vanish by construction (the whole body's blood and conduction: transfers inside the body) are
  // sums of round-off, about 1e-14 W: a relative difference of two of them is noise, not a grid error. A heat-flow
  // row below 1e-9 of the largest heat flow of the table on every grid is shown as zero to round-off ('-').
  double heatScale = 0.0;
  for (std::size_t k = 0; k < all.size(); ++k)
    if (all[k].units == "W")
      for (const auto& v : allValues)
        if (std::isfinite(v[k])) heatScale = std::max(heatScale, std::abs(v[k]));
  for (std::size_t k = 0; k < all.size(); ++k) {
    RefineRow row;
    row.name = all[k].name;
    row.units = all[k].units;
    for (auto& v : allValues) row.values.push_back(v[k]);
    const std::size_t n = row.values.size();
    const double f1 = row.values[n - 3], f2 = row.values[n - 2], f3 = row.values[n - 1];
    const double d12 = f1 - f2, d23 = f2 - f3;
    const double scale = std::max({std::abs(f1), std::abs(f2), std::abs(f3), 1e-300});
    if (std::abs(d23) <= 1e-12 * scale && std::abs(d12) <= 1e-12 * scale) {
      row.order = notANumber;  // converged to round-off (or constant)
      row.extrapolated = f3;
    } else if (d12 * d23 > 0.0) {
      row.order = std::log(d12 / d23) / std::log(2.0);
      row.extrapolated = f3 + (f3 - f2) / (std::pow(2.0, row.order) - 1.0);
    } else {
      row.order = notANumber;
      row.extrapolated = notANumber;
    }
    bool roundOff = row.units == "W" && heatScale > 0.0;
    for (double v : row.values) roundOff = roundOff && std::abs(v) <= 1e-9 * heatScale;
    if (roundOff) {
      row.order = notANumber;
      row.extrapolated = 0.0;
    }
    row.coarseVsFinest = row.values.front() - row.values.back();
    double denominator = std::abs(row.values.back());
    if (row.units == "degC") denominator = std::abs(row.values.back() - result.referenceTemperature);
    row.relative = denominator > 0.0 && !roundOff ? std::abs(row.coarseVsFinest) / denominator : notANumber;
    result.rows.push_back(row);
  }
  return result;
}

std::string refineTable(const RefineResult& r) {
  std::string out;
  out += "Grid refinement (every axial, layer and coat cell count multiplied)\n";
  for (std::size_t l = 0; l < r.factors.size(); ++l)
    out += fmt::format("  {:g}x: {} tissue cells, {:.3g} s\n", r.factors[l], r.cells[l], r.seconds[l]);
  std::string header = fmt::format("{:<44}{:>6}", "quantity", "unit");
  for (double f : r.factors) header += fmt::format("{:>13}", fmt::format("{:g}x", f));
  header += fmt::format("{:>8}{:>13}{:>11}\n", "order", "Richardson", "1x vs fine");
  out += header;
  for (const RefineRow& row : r.rows) {
    std::string line = fmt::format("{:<44}{:>6}", row.name, row.units);
    for (double v : row.values) line += fmt::format("{:>13.6g}", v);
    line += std::isnan(row.order) ? fmt::format("{:>8}", "-") : fmt::format("{:>8.2f}", row.order);
    line += std::isnan(row.extrapolated) ? fmt::format("{:>13}", "-") : fmt::format("{:>13.6g}", row.extrapolated);
    line += std::isnan(row.relative) ? fmt::format("{:>11}", "-") : fmt::format("{:>10.2f}%", 100.0 * row.relative);
    out += line + "\n";
  }
  out += fmt::format(
      "order: observed from the three finest grids (Roache 1998); '-': not monotone or converged to round-off.\n"
      "A heat flow below 1e-9 of the table's largest on every grid is zero to round-off (a transfer inside the body): '-'.\n"
      "1x vs fine: |1x - finest| relative to |finest| (heat flows), to |finest - {:.4g} degC| (the medium at t = 0; "
      "temperatures) or to the finest range (ranges).\n",
      r.referenceTemperature);
  out += "Model estimates for research, not veterinary or medical advice; follow local regulations, animal-welfare "
         "rules and licensed veterinary or medical practice.\n";
  return out;
}

std::string refineCsv(const RefineResult& r) {
  std::string out = "quantity,unit";
  for (double f : r.factors) out += fmt::format(",{:g}x", f);
  out += ",order,richardson,coarse_minus_finest,relative\n";
  for (const RefineRow& row : r.rows) {
    out += row.name + "," + row.units;
    for (double v : row.values) out += fmt::format(",{:.17g}", v);
    out += fmt::format(",{:.6g},{:.17g},{:.17g},{:.6g}\n", row.order, row.extrapolated, row.coarseVsFinest, row.relative);
  }
  return out;
}

}  // namespace thermorph
