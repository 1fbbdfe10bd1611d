//! Free parameters of fits and local sensitivities (--free, --start, --prior): parsing, units and bounds from the
//! schema and the case. Kept apart from drivers/fit.cpp (Ceres) so that `sensitivity` and the `thermorph`
//! executable, which uses it, do not link Ceres and the shared libraries it needs (see CMakeLists.txt, thermorph-fit).
#include "drivers/fit.hpp"

#include <algorithm>
#include <map>
#include <optional>
#include <sstream>

#include <fmt/format.h>
#include <toml++/toml.h>

#include "models/case_schema.hpp"
#include "models/inert_keys.hpp"
#include "models/units.hpp"
#include "drivers/option_text.hpp"
#include "drivers/sweep.hpp"

namespace thermorph {
namespace {
using option_text::split;
using option_text::trim;

std::pair<std::string, std::string> keyValue(const std::string& text, const char* option, const char* example) {
  return option_text::keyValue(text, option, example, "...");
}


//! The value of `key` in the resolved case (SI), when it is there.
std::optional<double> resolvedValue(const Case& c, const std::string& key) {
  toml::table root;
  try {
    root = toml::parse(resolvedCaseToml(c));
  } catch (const toml::parse_error&) {
    return std::nullopt;
  }
  toml::node* node = &root;
  for (const std::string& part : split(key, '.')) {
    if (auto* t = node->as_table()) {
      node = t->get(part);
    } else if (auto* a = node->as_array()) {
      toml::node* found = nullptr;
      for (std::size_t i = 0; i < a->size() && !found; ++i)
        if (auto* e = (*a)[i].as_table())
          if (auto name = (*e)["name"].value<std::string>(); name && *name == part) found = &(*a)[i];
      if (!found && !part.empty() && std::all_of(part.begin(), part.end(), ::isdigit) && std::stoul(part) < a->size())
        found = &(*a)[std::stoul(part)];
      node = found;
    } else {
      return std::nullopt;
    }
    if (!node) return std::nullopt;
  }
  if (auto v = node->value<double>()) return *v;
  if (auto s = node->value<std::string>()) {
    try {
      ValueWithUnit vu = splitValueUnit(*s);
      return vu.value;  // the resolved case writes SI values
    } catch (const UnitError&) {
      return std::nullopt;
    }
  }
  return std::nullopt;
}

}  // namespace

std::string parameterOverride(const FitParameter& p, double value) {
  return p.unit.empty() ? fmt::format("{}={:.17g}", p.key, value) : fmt::format("{}={:.17g} {}", p.key, value, p.unit);
}

std::vector<FitParameter> parseFitParameters(const std::vector<std::string>& free, const std::vector<std::string>& starts,
                                             const std::vector<std::string>& priors, const std::string& caseText,
                                             const std::string& casePath, const std::vector<std::string>& overrides,
                                             bool boundsOptional, const std::string& option, bool steady) {
  const Case base = loadCaseFromString(caseText, casePath, overrides);
  if (free.empty()) throw CaseError("fit: no free parameter; give at least one --free KEY=LOWER:UPPER");
  std::map<std::string, std::string> startOf, priorOf;
  for (const std::string& s : starts) {
    auto [k, v] = keyValue(s, "--start", "segments.trunk.coat.thickness=\"1 cm\"");
    startOf[k] = v;
  }
  for (const std::string& s : priors) {
    auto [k, v] = keyValue(s, "--prior", "environment.convection=\"10 W/(m2 K):2 W/(m2 K)\"");
    priorOf[k] = v;
  }
  std::vector<FitParameter> out;
  for (const std::string& f : free) {
    // Without bounds (local sensitivities): KEY alone, unbounded, in the schema's unit.
    const bool unbounded = boundsOptional && f.find('=') == std::string::npos;
    auto [key, spec] = unbounded ? std::pair<std::string, std::string>(trim(f), "")
                                 : keyValue(f, option.c_str(), "\"segments.trunk.coat.thickness=0.5 cm:3 cm\"");
    const std::string what = fmt::format("{} {}", option, f);
    const Param* param = schemaEntry(key);
    if (!param)
      throw CaseError(fmt::format("{}: no such case key \"{}\" (see cases/REFERENCE.md; segments are addressed by name, "
                                  "e.g. segments.NAME.length)",
                                  what, key));
    if (param->kind != ParamKind::Quantity && param->kind != ParamKind::Perfusion && param->kind != ParamKind::Number)
      throw CaseError(fmt::format("{}: {} is not a continuous numeric key (only numbers and quantities can vary)",
                                  what, key));
    std::vector<std::string> parts = split(key, '.');
    if (parts.size() > 1 && parts[0] == "segments") {
      bool found = false;
      std::vector<std::string> names;
      for (const SegmentSpec& s : base.segments) {
        names.push_back(s.name);
        found = found || s.name == parts[1];
      }
      if (!found)
        throw CaseError(fmt::format("{}: no segment \"{}\" (segments: {})", what, parts[1], fmt::join(names, ", ")));
    }
    for (const FitParameter& p : out)
      if (p.key == key) throw CaseError(fmt::format("{}: {} is given twice", what, key));
    std::vector<std::string> bounds = split(spec, ':');
    FitParameter p;
    p.key = key;
    if (unbounded) bounds = {"", ""};
    if (bounds.size() == 3 && bounds[2] == "log") {
      p.log = true;
      bounds.pop_back();
    }
    if (bounds.size() != 2)
      throw CaseError(fmt::format("{}: expected KEY=LOWER:UPPER or KEY=LOWER:UPPER:log, e.g. \"{}=0.5 cm:3 cm\"", what, key));
    ValueWithUnit lo{-std::numeric_limits<double>::infinity(), ""}, hi{std::numeric_limits<double>::infinity(), ""};
    try {
      if (!unbounded) {
        lo = splitValueUnit(bounds[0]);
        hi = splitValueUnit(bounds[1]);
      }
    } catch (const UnitError& e) {
      throw CaseError(fmt::format("{}: {}", what, e.what()));
    }
    const std::string si(param->unit);
    p.unit = !lo.unit.empty() ? lo.unit : !hi.unit.empty() ? hi.unit : si;
    auto inUnit = [&](const ValueWithUnit& v, const std::string& name) {
      std::string from = v.unit.empty() ? si : v.unit;
      if (from == p.unit) return v.value;
      if (from.empty() || p.unit.empty())
        throw CaseError(fmt::format("{}: the {} has no unit; give both bounds with units", what, name));
      try {
        return convertUnit(v.value, from, p.unit);
      } catch (const UnitError& e) {
        throw CaseError(fmt::format("{}: the {} \"{} {}\": {}", what, name, v.value, v.unit, e.what()));
      }
    };
    if (!si.empty() && !p.unit.empty() && !unitConvertible(p.unit, si) && param->kind != ParamKind::Perfusion)
      throw CaseError(fmt::format("{}: unit \"{}\" is not {} (expected {})", what, p.unit, aQuantity(si), si));
    p.lower = inUnit(lo, "lower bound");
    p.upper = inUnit(hi, "upper bound");
    if (!(p.lower < p.upper))
      throw CaseError(fmt::format("{}: the lower bound {} must be below the upper bound {}", what, bounds[0], bounds[1]));
    if (p.log && !(p.lower > 0.0))
      throw CaseError(fmt::format("{}: a log-scale parameter needs a positive lower bound", what));
    // The start: --start, else the case's own value.
    if (auto it = startOf.find(key); it != startOf.end()) {
      try {
        p.start = inUnit(splitValueUnit(it->second), "start");
      } catch (const UnitError& e) {
        throw CaseError(fmt::format("--start {}={}: {}", key, it->second, e.what()));
      }
      startOf.erase(it);
    } else {
      std::optional<double> v = resolvedValue(base, key);
      if (!v)
        throw CaseError(fmt::format("{}: the case does not give {} explicitly; give the start with --start {}=VALUE", what,
                                    key, key));
      try {
        p.start = si == p.unit || si.empty() ? *v : convertUnit(*v, si, p.unit);
      } catch (const UnitError& e) {
        throw CaseError(fmt::format("{}: {}", what, e.what()));
      }
    }
    if (!(p.start >= p.lower && p.start <= p.upper))
      throw CaseError(fmt::format("{}: the start {:g} {} lies outside the bounds {:g} to {:g} {}", what, p.start, p.unit,
                                  p.lower, p.upper, p.unit));
    if (auto it = priorOf.find(key); it != priorOf.end()) {
      std::vector<std::string> ms = split(it->second, ':');
      if (ms.size() != 2)
        throw CaseError(fmt::format("--prior {}={}: expected MEAN:SD, e.g. \"10 W/(m2 K):2 W/(m2 K)\"", key, it->second));
      try {
        p.priorMean = inUnit(splitValueUnit(ms[0]), "prior mean");
        ValueWithUnit sd = splitValueUnit(ms[1]);
        double sdValue = sd.unit.empty() || sd.unit == p.unit
                             ? sd.value
                             : convertUnit(sd.value, sd.unit, p.unit) - convertUnit(0.0, sd.unit, p.unit);
        p.priorSd = sdValue;
      } catch (const UnitError& e) {
        throw CaseError(fmt::format("--prior {}={}: {}", key, it->second, e.what()));
      }
      if (!(*p.priorSd > 0.0)) throw CaseError(fmt::format("--prior {}={}: the SD must be positive", key, it->second));
      priorOf.erase(it);
    }
    // The case loader checks both bounds (units and ranges of the schema). A parameter with no effect in the case
    // (models/inert_keys.hpp) at every one of them is refused: the data cannot determine it, and its sensitivity
    // would be zero by construction.
    std::optional<std::string> inert;
    bool acts = false;
    for (double v : {p.lower, p.upper, p.start}) {
      if (!std::isfinite(v)) continue;
      std::vector<std::string> o = overrides;
      o.push_back(parameterOverride(p, v));
      try {
        const Case c = loadCaseFromString(caseText, casePath, o);
        if (auto why = InertKeys(c, steady).reason(key)) inert = why;
        else acts = true;
      } catch (const CaseError& e) {
        throw CaseError(fmt::format("{}: the case loader refuses {}: {}", what, parameterOverride(p, v), e.what()));
      }
    }
    if (!acts) {
      if (!inert) inert = InertKeys(base, steady).reason(key);
      if (inert)
        throw CaseError(fmt::format("{}: {}: the key has no effect in this case, so the results cannot depend on it: {}",
                                    casePath, what, *inert));
    }
    out.push_back(std::move(p));
  }
  if (!startOf.empty()) throw CaseError(fmt::format("--start {}: not a free parameter (give it with --free)", startOf.begin()->first));
  if (!priorOf.empty()) throw CaseError(fmt::format("--prior {}: not a free parameter (give it with --free)", priorOf.begin()->first));
  return out;
}

}  // namespace thermorph
