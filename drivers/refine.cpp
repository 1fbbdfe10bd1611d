#include "drivers/refine.hpp"

#include <fnmatch.h>

#include <algorithm>
#include <chrono>
#include <cmath>
#include <limits>
#include <map>
#include <memory>

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
    "body.mean_skin_temperature.final", "segments.*.heat_flow", "segments.*.mean_temperature.final",
    "controls.*.final"};

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

//! Index of the coarse cell holding fine cell j's centre, of `coarseCount` cells that `fineCount` cells split (the
//! same mapping of a uniform index: with fineCount = k coarseCount, cells j = k i ... k i + k - 1 make up cell i).
int containing(int j, int fineCount, int coarseCount) {
  const long numerator = (2L * j + 1) * coarseCount, denominator = 2L * fineCount;
  return static_cast<int>(std::min<long>(numerator / denominator, coarseCount - 1));
}

//! First ring of each layer (and one past the last ring), of a segment's rings [layers + 1].
std::vector<int> layerStarts(const SegmentMesh& m) {
  std::vector<int> start(m.layerNames.size() + 1, m.nr);
  for (int r = m.nr - 1; r >= 0; --r) start[static_cast<std::size_t>(m.layer[static_cast<std::size_t>(r)])] = r;
  for (std::size_t l = m.layerNames.size(); l-- > 0;) start[l] = std::min(start[l], start[l + 1]);
  return start;
}

//! Linear interpolation of a point x among the ascending centres c[lo, hi): the first of the two centres used and
//! the weight of the second; beyond the first or last centre, linear extrapolation from the two end centres. One
//! centre: its value (weight 0).
std::pair<int, double> linearWeight(const std::vector<double>& c, int lo, int hi, double x) {
  if (hi - lo < 2) return {lo, 0.0};
  int k = lo;
  while (k + 2 < hi && x > c[static_cast<std::size_t>(k + 1)]) ++k;
  const double a = c[static_cast<std::size_t>(k)], b = c[static_cast<std::size_t>(k + 1)];
  return {k, (x - a) / (b - a)};
}

}  // namespace

std::vector<double> mapSteadyState(const Body& coarse, std::span<const double> state, const Body& fine) {
  const Network& cn = coarse.network();
  const Network& fn = fine.network();
  const std::size_t controls = cn.controllers.size();
  if (state.size() != cn.nodes.size() + controls || fn.controllers.size() != controls ||
      coarse.segments().size() != fine.segments().size() || coarse.poolNode().has_value() != fine.poolNode().has_value())
    return {};
  for (std::size_t k = 0; k < controls; ++k)
    if (cn.controllers[k].name != fn.controllers[k].name) return {};
  std::vector<double> out(fn.nodes.size() + controls, notANumber);
  for (std::size_t s = 0; s < fine.segments().size(); ++s) {
    const SegmentMesh& cm = coarse.segments()[s];
    const SegmentMesh& fm = fine.segments()[s];
    if (cm.name != fm.name || cm.layerNames != fm.layerNames || fm.nz < cm.nz || fm.nr < cm.nr) return {};
    const std::vector<int> cs = layerStarts(cm), fs = layerStarts(fm);
    // Tissue: bilinear in the cell centres' axial position and radius (SegmentMesh::axial, ::radius), the radius
    // among the coarse cells of the same layer only (the gradient jumps at an interface where the conductivity
    // does), extrapolated linearly past a layer's or the segment's end centres.
    std::vector<std::pair<int, double>> across(static_cast<std::size_t>(fm.nr));
    for (std::size_t l = 0; l + 1 < fs.size(); ++l) {
      if ((fs[l + 1] > fs[l]) != (cs[l + 1] > cs[l])) return {};
      for (int ir = fs[l]; ir < fs[l + 1]; ++ir)
        across[static_cast<std::size_t>(ir)] = linearWeight(cm.radius, cs[l], cs[l + 1], fm.radius[static_cast<std::size_t>(ir)]);
    }
    for (int iz = 0; iz < fm.nz; ++iz) {
      const auto [z0, wz] = linearWeight(cm.axial, 0, cm.nz, fm.axial[static_cast<std::size_t>(iz)]);
      const int z1 = wz != 0.0 ? z0 + 1 : z0;  // weight 0: one centre (or a fine centre on a coarse one)
      for (int ir = 0; ir < fm.nr; ++ir) {
        const auto [r0, wr] = across[static_cast<std::size_t>(ir)];
        const int r1 = wr != 0.0 ? r0 + 1 : r0;
        auto at = [&](int z, int r) { return state[cm.node(z, r)]; };
        out[fm.node(iz, ir)] = (1.0 - wz) * ((1.0 - wr) * at(z0, r0) + wr * at(z0, r1)) +
                               wz * ((1.0 - wr) * at(z1, r0) + wr * at(z1, r1));
      }
    }
    // Blood: the coarse node of the kind in the containing axial cell, else the nearest axial cell with one, else the
    // segment's innermost tissue cell there (blood that flows only on the finer grid: none in the examples).
    auto blood = [&](const std::vector<Index>& c, const std::vector<Index>& f) {
      for (int iz = 0; iz < static_cast<int>(f.size()); ++iz) {
        if (f[static_cast<std::size_t>(iz)] == noNode) continue;
        const int cz = containing(iz, fm.nz, cm.nz);
        double value = state[cm.node(cz, 0)];
        for (int d = 0; d < cm.nz && !c.empty(); ++d) {
          const int lo = cz - d, hi = cz + d;
          if (lo >= 0 && c[static_cast<std::size_t>(lo)] != noNode) {
            value = state[c[static_cast<std::size_t>(lo)]];
            break;
          }
          if (hi < static_cast<int>(c.size()) && c[static_cast<std::size_t>(hi)] != noNode) {
            value = state[c[static_cast<std::size_t>(hi)]];
            break;
          }
        }
        out[f[static_cast<std::size_t>(iz)]] = value;
      }
    };
    blood(cm.arterial, fm.arterial);
    blood(cm.venous, fm.venous);
    blood(cm.superficial, fm.superficial);
  }
  if (fine.poolNode()) out[*fine.poolNode()] = state[*coarse.poolNode()];
  for (std::size_t k = 0; k < controls; ++k) out[fn.nodes.size() + k] = state[cn.nodes.size() + k];
  for (double v : out)
    if (std::isnan(v)) return {};  // a node of the fine body no rule above reached
  return out;
}

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
  out.run.appliedRefinement *= factor;
  out.warnings.clear();
  return out;
}

std::optional<Case> coarsenedCase(const Case& c, int factor) {
  if (factor < 1 || c.run.appliedRefinement % factor != 0) return std::nullopt;
  Case out = c;
  auto divide = [factor](int& cells) {
    if (cells % factor != 0) return false;
    cells /= factor;
    return true;
  };
  for (SegmentSpec& s : out.segments) {
    if (s.shape != Shape::Sphere && !divide(s.axialCells)) return std::nullopt;
    for (LayerSpec& l : s.layers)
      if (!divide(l.cells)) return std::nullopt;
    if (s.coat && !divide(s.coat->cells)) return std::nullopt;
    s.axialAuto = false;
    s.gradingAuto = false;
    for (LayerSpec& l : s.layers) l.cellsAuto = false;
    if (s.coat) s.coat->cellsAuto = false;
  }
  out.run.appliedRefinement /= factor;
  out.warnings.clear();
  return out;
}

std::string storageStem(const std::string& name) {
  static const std::string storage = "heat_flow.storage";
  if (name.size() < storage.size() || name.compare(name.size() - storage.size(), storage.size(), storage) != 0)
    return "";
  return name.substr(0, name.size() - std::string("storage").size());  // "body.heat_flow.", "segments.X.heat_flow."
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
  // A steady refinement uses the t = 0 conditions: the warnings about the timeline after t = 0 do not apply.
  if (options.steady)
    std::erase_if(result.warnings, [&](const std::string& w) {
      return std::find(base.timelineWarnings.begin(), base.timelineWarnings.end(), w) != base.timelineWarnings.end();
    });
  result.referenceTemperature = base.environment.temperature - 273.15;
  std::vector<MetricColumn> columns;
  std::vector<std::vector<double>> values;  // [level][column]
  std::map<std::string, double> finest;     // every metric of the last (finest) level, selected or not
  const bool hasSteadyStart = options.steady || base.run.initial == InitialCondition::Steady;
  std::unique_ptr<Body> coarser;         // the previous level's body and steady state (warm start)
  std::vector<double> coarserSteady;
  for (int level = 0; level < options.levels; ++level) {
    const int factor = 1 << level;
    const auto start = std::chrono::steady_clock::now();
    const Case c = refinedCase(base, factor);
    auto owned = std::make_unique<Body>(c);
    const Body& body = *owned;
    MetricCollector collector(body, window, {}, options.steady);
    RunOptions run;
    run.quiet = true;
    run.observer = [&](double t, std::span<const double> temperatures, const RunSummary& summary) {
      collector.observe(t, temperatures, summary);
    };
    run.keepSteadyState = options.warmStart && hasSteadyStart && level + 1 < options.levels;
    run.coarseSteadyStart = options.warmStart;  // a level of a case given refined (run.grid_refinement) without a guess
    if (options.warmStart && coarser && !coarserSteady.empty())
      run.steadyGuess = mapSteadyState(*coarser, coarserSteady, body);
    RunSummary summary = options.steady ? runSteady(body, run) : runTransient(body, run);
    if (!summary.complete)
      throw SolverError(fmt::format("refinement level {}x: {}", factor, summary.failure));
    result.hasSteadyStart.push_back(hasSteadyStart ? 1 : 0);
    result.steadyWarm.push_back(summary.steadyWarm ? 1 : 0);
    result.steadyStatistics.push_back(summary.steadyStatistics);
    coarserSteady = std::move(summary.steadyState);
    if (run.keepSteadyState) coarser = std::move(owned);
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
    finest = byName;
    std::vector<double> row;
    for (const MetricColumn& col : columns) row.push_back(byName.count(col.name) ? byName[col.name] : notANumber);
    values.push_back(row);
    result.factors.push_back(factor);
    result.cells.push_back(tissueCells(c));
    result.seconds.push_back(std::chrono::duration<double>(std::chrono::steady_clock::now() - start).count());
  }

  // Ranges (max - min over the window: a core drop, a controller's swing) next to their series, in kelvin for a
  // temperature, else in the series' own unit.
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
          all.push_back({stem + ".range", columns[k].units == "degC" ? "K" : columns[k].units, "max - min over the window"});
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
    // Storage is the small difference of the flows in and out (a window mean near zero, e.g. -0.1 W while the
    // body exchanges 10 W): relative to itself a 0.04 W difference would read as a 30 % grid error. It is taken
    // relative to the largest |heat flow| of the same body or segment's channels on the finest grid instead.
    if (const std::string stem = storageStem(row.name); !stem.empty()) {
      denominator = 0.0;
      for (const auto& [name, value] : finest)
        if (name.rfind(stem, 0) == 0 && name != row.name && name.find('.', stem.size()) == std::string::npos &&
            std::isfinite(value))
          denominator = std::max(denominator, std::abs(value));
    }
    row.relative = denominator > 0.0 && !roundOff ? std::abs(row.coarseVsFinest) / denominator : notANumber;
    result.rows.push_back(row);
  }
  return result;
}

std::string refineTable(const RefineResult& r) {
  std::string out;
  out += "Grid refinement (every axial, layer and coat cell count multiplied)\n";
  for (std::size_t l = 0; l < r.factors.size(); ++l) {
    out += fmt::format("  {:g}x: {} tissue cells, {:.3g} s", r.factors[l], r.cells[l], r.seconds[l]);
    if (l < r.hasSteadyStart.size() && r.hasSteadyStart[l]) {
      const SolverStatistics& s = r.steadyStatistics[l];
      out += r.steadyWarm[l]
                 ? fmt::format("; steady solve from the {:g}x steady state on these cells: {} Newton iterations",
                               r.factors[l - 1], s.nonlinearIterations)
                 : fmt::format("; steady solve: {} relaxation steps, {} Newton iterations", s.steps,
                               s.nonlinearIterations);
    }
    out += "\n";
  }
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
      "1x vs fine: |1x - finest| relative to |finest| (heat flows, controller states), to |finest - {:.4g} degC| (the medium at t = 0; "
      "temperatures) or to the finest range (ranges);\n"
      "  storage rows (a small difference of the flows in and out) relative to the largest |heat flow| of the same "
      "body or segment's channels on the finest grid.\n",
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
