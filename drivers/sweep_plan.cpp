//! Sweep plans: value specs, grids and zips, size series as overrides, metric selection, fingerprint.
#include <algorithm>
#include <cmath>
#include <filesystem>
#include <fstream>
#include <functional>
#include <limits>
#include <memory>
#include <optional>
#include <set>
#include <sstream>

#include <fmt/format.h>

#include "models/case_schema.hpp"
#include "models/inert_keys.hpp"
#include "models/units.hpp"
#include "drivers/option_text.hpp"
#include "drivers/sweep.hpp"

namespace thermorph {
namespace {

// Limits (README "Limits"): every value of every axis and every run's row are held in memory, about 100 and
// 300 bytes each, so a million of each stays well under a gigabyte.
constexpr std::size_t maxRuns = 1'000'000;
constexpr std::size_t maxValues = 1'000'000;  // per axis

using option_text::split;
using option_text::trim;

std::pair<std::string, std::string> keyValue(const std::string& text, const char* option, const char* example) {
  return option_text::keyValue(text, option, example, "SPEC");
}


//! FNV-1a, 64 bit (Fowler, Noll and Vo): a stable fingerprint of the plan across runs and ranks.
struct Fingerprint {
  std::uint64_t hash = 1469598103934665603ull;
  void add(std::string_view s) {
    for (unsigned char ch : s) {
      hash ^= ch;
      hash *= 1099511628211ull;
    }
    hash ^= 0xff;  // separator
    hash *= 1099511628211ull;
  }
};

//! The numbers of an axis in one unit, for the table and the figures; words stay words.
void fillNumbers(SweepAxis& axis) {
  std::vector<ValueWithUnit> parsed;
  for (const std::string& text : axis.texts) {
    try {
      parsed.push_back(splitValueUnit(text));
      if (!parsed.back().unit.empty() && !unitConvertible(parsed.back().unit, parsed.back().unit)) break;
    } catch (const UnitError&) {
      break;
    }
  }
  const double nan = std::numeric_limits<double>::quiet_NaN();
  if (parsed.size() != axis.texts.size()) {  // words: "water", "exposed"
    axis.units.clear();
    axis.numbers.assign(axis.texts.size(), nan);
    return;
  }
  const Param* p = axis.scale ? nullptr : schemaEntry(axis.key);
  const std::string si = p && !p->unit.empty() ? std::string(p->unit) : std::string();
  axis.units = parsed.front().unit.empty() ? (si.empty() ? "1" : si) : parsed.front().unit;
  for (const ValueWithUnit& v : parsed) {
    const std::string from = v.unit.empty() ? (si.empty() ? "1" : si) : v.unit;
    if (from == axis.units) {
      axis.numbers.push_back(v.value);
      continue;
    }
    try {
      axis.numbers.push_back(convertUnit(v.value, from, axis.units));
    } catch (const UnitError&) {
      axis.numbers.push_back(nan);  // the run itself reports the bad unit
    }
  }
}

//! Check a --vary key against the schema and the base case's segment names.
void checkKey(const std::string& key, const Case& base) {
  if (!schemaEntry(key))
    throw CaseError(fmt::format("--vary {}: no such case key (see cases/REFERENCE.md; segments are addressed by "
                                "name, e.g. segments.NAME.length)",
                                key));
  std::vector<std::string> parts = split(key, '.');
  if (parts.size() > 1 && parts[0] == "segments") {
    std::vector<std::string> names;
    for (const SegmentSpec& s : base.segments) names.push_back(s.name);
    bool index = std::all_of(parts[1].begin(), parts[1].end(), ::isdigit) && !parts[1].empty() &&
                 std::stoul(parts[1]) < names.size();
    if (!index && std::find(names.begin(), names.end(), parts[1]) == names.end())
      throw CaseError(fmt::format("--vary {}: no segment \"{}\" (segments: {})", key, parts[1], fmt::join(names, ", ")));
  }
}

//! Shortest text that reads back to the same double.
std::string siText(double v) { return fmt::format("{}", v); }

//! Values of one range START:END:COUNT or log:START:END:COUNT; `bad` makes the error.
std::vector<std::string> expandRange(const std::string& spec,
                                     const std::function<CaseError(const std::string&)>& bad) {
  std::vector<std::string> parts = split(spec, ':');
  const bool geometric = !parts.empty() && parts[0] == "log";
  if (geometric) parts.erase(parts.begin());
  if (parts.size() != 3) throw bad("a range has a start, an end and a count");
  long count = 0;
  try {
    std::size_t used = 0;
    count = std::stol(parts[2], &used);
    if (used != parts[2].size()) throw std::invalid_argument("count");
  } catch (const std::logic_error&) {
    throw bad(fmt::format("the count \"{}\" is not a whole number", parts[2]));
  }
  if (count < 1) throw bad("the count must be at least 1");
  if (static_cast<std::size_t>(count) > maxValues) throw bad(fmt::format("the count must be at most {}", maxValues));
  ValueWithUnit start, end;
  try {
    start = splitValueUnit(parts[0]);
    end = splitValueUnit(parts[1]);
  } catch (const UnitError& e) {
    throw bad(e.what());
  }
  for (const ValueWithUnit* v : {&start, &end})
    if (!v->unit.empty() && !unitConvertible(v->unit, v->unit))
      throw bad(fmt::format("\"{}\" is not a unit udunits2 understands", v->unit));
  double last = end.value;
  if (end.unit != start.unit) {
    if (end.unit.empty() || start.unit.empty()) throw bad("give both ends with units, or both without");
    try {
      last = convertUnit(end.value, end.unit, start.unit);
    } catch (const UnitError& e) {
      throw bad(e.what());
    }
  }
  if (geometric && !(start.value > 0.0 && last > 0.0)) throw bad("a log range needs positive ends");
  const std::string unit = start.unit.empty() ? "" : " " + start.unit;
  std::vector<std::string> values;
  for (long i = 0; i < count; ++i) {
    if (i == 0) {
      values.push_back(parts[0]);
      continue;
    }
    if (i == count - 1 && end.unit == start.unit) {
      values.push_back(parts[1]);
      continue;
    }
    const double fraction = static_cast<double>(i) / static_cast<double>(count - 1);
    const double v = geometric ? start.value * std::pow(last / start.value, fraction)
                               : start.value + (last - start.value) * fraction;
    values.push_back(fmt::format("{:.12g}{}", v, unit));
  }
  return values;
}

}  // namespace

//! The schema entry of a key path ("segments.NAME.layers.1.thickness" -> "segments[].layers[].thickness").
const Param* schemaEntry(const std::string& key) {
  std::vector<std::string> parts = split(key, '.');
  std::string pattern;
  const Param* p = nullptr;
  for (std::size_t i = 0; i < parts.size(); ++i) {
    pattern += (pattern.empty() ? "" : ".") + parts[i];
    p = findParam(pattern);
    if (!p) return nullptr;
    if (p->kind == ParamKind::TableArray) {
      pattern += "[]";
      ++i;  // the element: a name or an index
    } else if (p->kind == ParamKind::NamedTables) {
      pattern += ".*";
      ++i;
    }
  }
  return p;
}

std::vector<std::string> expandSpec(const std::string& spec, const std::string& what) {
  auto bad = [&](const std::string& why) {
    return CaseError(fmt::format("{}: \"{}\": {}; a SPEC is START:END:COUNT (\"2 cm:12 cm:11\"), "
                                 "log:START:END:COUNT (\"log:1 mL/min:100 mL/min:5\") or a list (\"20degC,40degC\")",
                                 what, spec, why));
  };
  // A list of values and ranges: "20degC,40degC", "-2 cm,3 cm:12 cm:7".
  std::vector<std::string> items = split(spec, ',');
  if (items.empty()) throw bad("no values");
  std::vector<std::string> values;
  for (const std::string& item : items) {
    if (item.empty()) throw bad("an empty value in the list");
    if (item.find(':') == std::string::npos) {
      values.push_back(item);
      continue;
    }
    for (std::string& v : expandRange(item, bad)) values.push_back(std::move(v));
    if (values.size() > maxValues) throw bad(fmt::format("more than {} values", maxValues));
  }
  return values;
}


std::vector<std::string> scaleOverrides(const Case& c, const std::string& target, double factor) {
  std::vector<std::string> out;
  const double f = factor;
  bool found = false;
  for (const SegmentSpec& s : c.segments) {
    if (target != "body" && s.name != target) continue;
    found = true;
    const std::string p = "segments." + s.name + ".";
    if (s.shape != Shape::Sphere) out.push_back(p + "length=" + siText(f * s.length));
    for (std::size_t i = 0; i < s.layers.size(); ++i)
      out.push_back(fmt::format("{}layers.{}.thickness={}", p, i, siText(f * s.layers[i].thickness)));
    // The overall size, consistent with the scaled layers (it may also be given in the case file).
    const double outer = f * s.tissueRadius();
    switch (s.shape) {
      case Shape::Sphere:
      case Shape::Cylinder: out.push_back(p + "radius=" + siText(outer)); break;
      case Shape::Cone:
        out.push_back(p + "radius_proximal=" + siText(outer));
        out.push_back(p + "radius_distal=" + siText(f * s.radiusDistal));
        break;
      case Shape::Plate:
        out.push_back(p + "thickness=" + siText(2.0 * outer));
        out.push_back(p + "width=" + siText(f * s.width));
        break;
    }
    if (s.coat) out.push_back(p + "coat.thickness=" + siText(f * s.coat->thickness));
  }
  if (target == "body") {
    // Mass and blood volume follow the volume when the case gives them; rates (cardiac output, basal power,
    // vessel conductances and shunt flows) are physiology, not geometry, and stay as given.
    if (c.body.mass) out.push_back("body.mass=" + siText(f * f * f * *c.body.mass));
    if (c.body.bloodVolume) out.push_back("body.blood_volume=" + siText(f * f * f * *c.body.bloodVolume));
  } else if (!found) {
    std::vector<std::string> names;
    for (const SegmentSpec& s : c.segments) names.push_back(s.name);
    throw CaseError(fmt::format("--scale {}: no segment \"{}\" (segments: {}; or \"body\" for the whole body)", target,
                                target, fmt::join(names, ", ")));
  }
  return out;
}

std::vector<std::size_t> SweepPlan::valueIndices(std::size_t run) const {
  std::vector<std::size_t> v(axes.size(), run);
  if (zip) return v;
  for (std::size_t a = axes.size(); a-- > 0;) {
    v[a] = run % shape[a];
    run /= shape[a];
  }
  return v;
}

std::vector<std::string> SweepPlan::keyOverrides(std::size_t run) const {
  std::vector<std::string> out = overrides;
  std::vector<std::size_t> v = valueIndices(run);
  for (std::size_t a = 0; a < axes.size(); ++a)
    if (!axes[a].scale) out.push_back(axes[a].key + "=" + axes[a].texts[v[a]]);
  return out;
}

//! The case as varied by the key overrides `keys` (before size factors), kept per thread: up to four, the oldest
//! replaced first. A load that throws keeps nothing (the next run loads again and throws the same message).
static const Case& variedCase(const SweepPlan& plan, const std::vector<std::string>& keys) {
  struct Entry {
    std::string text, path;
    std::vector<std::string> keys;
    std::shared_ptr<const Case> loaded;
  };
  thread_local std::vector<Entry> kept;
  thread_local std::size_t next = 0;
  for (const Entry& e : kept)
    if (e.keys == keys && e.path == plan.casePath && e.text == plan.caseText) return *e.loaded;
  auto loaded = std::make_shared<const Case>(loadCaseFromString(plan.caseText, plan.casePath, keys));
  constexpr std::size_t kKept = 4;
  Entry entry{plan.caseText, plan.casePath, keys, std::move(loaded)};
  if (kept.size() < kKept) {
    kept.push_back(std::move(entry));
    return *kept.back().loaded;
  }
  Entry& slot = kept[next];
  next = (next + 1) % kKept;
  slot = std::move(entry);
  return *slot.loaded;
}

std::vector<std::string> runOverrides(const SweepPlan& plan, std::size_t run, Case* runCase) {
  std::vector<std::string> out = plan.keyOverrides(run);
  bool anyScale = std::any_of(plan.axes.begin(), plan.axes.end(), [](const SweepAxis& a) { return a.scale; });
  if (!anyScale) {
    if (runCase) *runCase = loadCaseFromString(plan.caseText, plan.casePath, out);
    return out;
  }
  // Size series act on the case as varied: each segment's factor is the product of the factors that reach it. The
  // case as varied depends only on the case text and the key overrides, the same for every run of a size series
  // (and for the runs of one row of a size series crossed with other axes): it is loaded once per thread and kept
  // (the last few, by text, path and overrides), so a scaled run loads only its own case. Loads are deterministic
  // (tests/test_sweep.cpp: every run's case equals a fresh load), so this is the same case.
  const Case& varied = variedCase(plan, out);
  std::vector<std::size_t> v = plan.valueIndices(run);
  double bodyFactor = 1.0;
  std::vector<std::pair<std::string, double>> segmentFactors;
  for (std::size_t a = 0; a < plan.axes.size(); ++a) {
    if (!plan.axes[a].scale) continue;
    const double f = plan.axes[a].numbers[v[a]];
    if (plan.axes[a].target == "body") bodyFactor *= f;
    else segmentFactors.emplace_back(plan.axes[a].target, f);
  }
  const std::size_t unscaled = out.size();
  for (const SegmentSpec& s : varied.segments) {
    double f = bodyFactor;
    for (const auto& [name, factor] : segmentFactors)
      if (name == s.name) f *= factor;
    if (f != 1.0) for (std::string& o : scaleOverrides(varied, s.name, f)) out.push_back(std::move(o));
  }
  if (bodyFactor != 1.0) {
    Case massOnly = varied;
    massOnly.segments.clear();
    for (std::string& o : scaleOverrides(massOnly, "body", bodyFactor)) out.push_back(std::move(o));
  }
  if (runCase) {
    // A run whose factors are all 1 is the varied case itself: no second parse.
    if (out.size() == unscaled) *runCase = varied;
    else *runCase = loadCaseFromString(plan.caseText, plan.casePath, out);
  }
  return out;
}

static SweepPlan finishSweepPlan(SweepPlan plan, const SweepOptions& options, const Case& base);

//! A --vary key with no effect in the case (models/inert_keys.hpp) would give identical rows: refused (exit 2).
//! Whether a key acts may depend on the other axes (an immersion, a medium, a controller switched on), so it is
//! asked in a few runs: the first and the last, and each axis at up to 8 of its values (the others at their first);
//! a key is refused when it has no effect in every one of them that loads.
static void refuseInertAxes(const SweepPlan& plan) {
  const std::size_t n = plan.axes.size();
  if (plan.runs == 0 || std::all_of(plan.axes.begin(), plan.axes.end(), [](const SweepAxis& a) { return a.scale; }))
    return;  // size series only: no key to ask about
  // Probes as their overrides (size factors are not applied here: probes that differ only in them are one).
  auto overridesOf = [&](const std::vector<std::size_t>& v) {
    std::vector<std::string> overrides = plan.overrides;
    for (std::size_t a = 0; a < n; ++a)
      if (!plan.axes[a].scale) overrides.push_back(plan.axes[a].key + "=" + plan.axes[a].texts[v[a]]);
    return overrides;
  };
  std::set<std::vector<std::string>> probes{overridesOf(plan.valueIndices(0)), overridesOf(plan.valueIndices(plan.runs - 1))};
  for (std::size_t a = 0; a < n; ++a) {
    if (plan.axes[a].scale) continue;
    const std::size_t count = plan.axes[a].texts.size(), used = std::min<std::size_t>(count, 8);
    for (std::size_t k = 0; k < used; ++k) {
      const std::size_t j = used > 1 ? k * (count - 1) / (used - 1) : 0;
      std::vector<std::size_t> v = plan.valueIndices(0);
      if (plan.zip) std::fill(v.begin(), v.end(), j);
      else v[a] = j;
      probes.insert(overridesOf(v));
    }
  }
  std::vector<bool> acts(n, false);
  std::vector<std::optional<std::string>> why(n);
  bool loaded = false;
  for (const std::vector<std::string>& overrides : probes) {
    Case c;
    try {
      c = loadCaseFromString(plan.caseText, plan.casePath, overrides);
    } catch (const CaseError&) {
      continue;  // that run fails by itself
    }
    loaded = true;
    const InertKeys inert(c, plan.steady);
    for (std::size_t a = 0; a < n; ++a) {
      if (plan.axes[a].scale) continue;
      if (auto reason = inert.reason(plan.axes[a].key)) why[a] = reason;
      else acts[a] = true;
    }
  }
  if (!loaded) return;
  for (std::size_t a = 0; a < n; ++a)
    if (!plan.axes[a].scale && !acts[a] && why[a])
      throw CaseError(fmt::format("{}: --vary {}: the key has no effect in this case, so every run would give the same "
                                  "results: {}",
                                  plan.casePath, plan.axes[a].key, *why[a]));
}

SweepPlan makeSweepPlan(const SweepOptions& commandLine) {
  const SweepOptions& options = commandLine;  // until the case is read
  SweepPlan plan;
  plan.casePath = options.casePath;
  plan.caseText = caseText(options.casePath, options.caseText);
  plan.overrides = options.overrides;
  plan.zip = options.zip;
  plan.steady = options.steady;

  const Case base = loadCaseFromString(plan.caseText, plan.casePath, plan.overrides);
  // [sweep] in the case gives defaults; the command line wins.
  SweepOptions withCase = commandLine;
  if (withCase.metrics.empty()) withCase.metrics = base.sweep.metrics;
  if (withCase.window.empty()) withCase.window = base.sweep.window;
  plan.steady = commandLine.steady || base.sweep.steady;
  SweepPlan finished = finishSweepPlan(std::move(plan), withCase, base);
  // A varied [environment] value that the timeline overrides from t = 0 would give identical rows: refuse the
  // sweep (exit 2). Other values the loader refuses fail their run only.
  if (finished.runs > 0) {
    try {
      (void)loadCaseFromString(finished.caseText, finished.casePath, finished.keyOverrides(0));
    } catch (const TimelineOverrideError& e) {
      throw CaseError(fmt::format("--vary: {}", e.what()));
    } catch (const CaseError&) {
    }
  }
  refuseInertAxes(finished);
  return finished;
}

static SweepPlan finishSweepPlan(SweepPlan plan, const SweepOptions& options, const Case& base) {
  plan.title = base.title;
  plan.resolvedCase = resolvedCaseToml(base);
  plan.inputs = base.inputs;

  for (const std::string& v : options.vary) {
    auto [key, spec] = keyValue(v, "--vary", "\"segments.NAME.length=2 cm:12 cm:11\"");
    checkKey(key, base);
    for (const SweepAxis& a : plan.axes)
      if (a.key == key) throw CaseError(fmt::format("--vary {}: the key is varied twice", key));
    SweepAxis axis;
    axis.key = key;
    axis.spec = spec;
    axis.texts = expandSpec(spec, "--vary " + key);
    fillNumbers(axis);
    plan.axes.push_back(std::move(axis));
  }
  for (const std::string& s : options.scale) {
    auto [target, spec] = keyValue(s, "--scale", "\"body=0.5:2:7\"");
    SweepAxis axis;
    axis.key = "scale." + target;
    axis.scale = true;
    axis.target = target;
    axis.spec = spec;
    for (const SweepAxis& a : plan.axes)
      if (a.key == axis.key) throw CaseError(fmt::format("--scale {}: scaled twice", target));
    if (target != "body") (void)scaleOverrides(base, target, 1.0);  // names the segments when unknown
    axis.texts = expandSpec(spec, "--scale " + target);
    for (const std::string& t : axis.texts) {
      ValueWithUnit f;
      try {
        f = splitValueUnit(t);
      } catch (const UnitError& e) {
        throw CaseError(fmt::format("--scale {}: factor \"{}\": {}", target, t, e.what()));
      }
      if (!f.unit.empty() || !(f.value > 0.0))
        throw CaseError(fmt::format("--scale {}: factor \"{}\" must be a positive number without a unit", target, t));
      axis.numbers.push_back(f.value);
    }
    axis.units = "1";
    plan.axes.push_back(std::move(axis));
  }
  if (plan.axes.empty()) throw CaseError("sweep: give at least one --vary KEY=SPEC or --scale SEGMENT=SPEC");

  plan.runs = 1;
  if (plan.zip) {
    for (const SweepAxis& a : plan.axes)
      if (a.texts.size() != plan.axes.front().texts.size())
        throw CaseError(fmt::format("--zip: every axis needs the same number of values ({} has {}, {} has {})",
                                    plan.axes.front().key, plan.axes.front().texts.size(), a.key, a.texts.size()));
    plan.shape = {plan.axes.front().texts.size()};
    plan.runs = plan.shape.front();
  } else {
    for (const SweepAxis& a : plan.axes) {
      plan.shape.push_back(a.texts.size());
      if (plan.runs > maxRuns / a.texts.size())
        throw CaseError(fmt::format("sweep: more than {} runs; split the sweep", maxRuns));
      plan.runs *= a.texts.size();
    }
  }

  if (!options.window.empty()) plan.window = parseMetricWindow(options.window);

  // Metric columns from the base body; selectors keep a subset; thresholds are always kept.
  {
    Body body(base);
    MetricChoice chosen = chooseMetrics(body, options.metrics, plan.window, plan.steady);
    plan.thresholds = std::move(chosen.thresholds);
    plan.columns = std::move(chosen.columns);
  }

  Fingerprint fp;
  fp.add(THERMORPH_VERSION);
  fp.add(plan.caseText);
  for (const std::string& o : plan.overrides) fp.add(o);
  for (const SweepAxis& a : plan.axes) {
    fp.add(a.key);
    for (const std::string& t : a.texts) fp.add(t);
  }
  fp.add(plan.zip ? "zip" : "grid");
  fp.add(plan.steady ? "steady" : "transient");
  fp.add(fmt::format("{} {}", plan.window.start, plan.window.end));
  for (const MetricColumn& c : plan.columns) fp.add(c.name);
  plan.fingerprint = fp.hash;
  return plan;
}

}  // namespace thermorph
