#pragma once
//! Reading typed, unit-checked values from a TOML case against the schema. Internal to models/ case loading;
//! every failure is a CaseError naming file, line, column, key path, value and what is allowed.
#include <algorithm>
#include <cmath>
#include <map>
#include <optional>
#include <sstream>
#include <string>
#include <vector>

#include <fmt/format.h>
#include <toml++/toml.h>

#include "models/case.hpp"
#include "models/case_schema.hpp"
#include "models/units.hpp"

namespace thermorph {

inline std::size_t editDistance(std::string_view a, std::string_view b) {
  std::vector<std::size_t> row(b.size() + 1);
  for (std::size_t j = 0; j <= b.size(); ++j) row[j] = j;
  for (std::size_t i = 1; i <= a.size(); ++i) {
    std::size_t diag = row[0];
    row[0] = i;
    for (std::size_t j = 1; j <= b.size(); ++j) {
      std::size_t up = row[j];
      row[j] = std::min({row[j] + 1, row[j - 1] + 1, diag + (a[i - 1] == b[j - 1] ? 0 : 1)});
      diag = up;
    }
  }
  return row[b.size()];
}

inline std::string lastComponent(std::string_view pattern) {
  auto pos = pattern.find_last_of('.');
  std::string_view tail = pos == std::string_view::npos ? pattern : pattern.substr(pos + 1);
  return std::string(tail);
}

//! "a.b" ("b" when a is empty), appended into one reserved string (fmt::format or two concatenations per key and
//! value read were about 1 % of a sweep run's instructions).
inline std::string joinPath(std::string_view a, std::string_view b) {
  std::string out;
  out.reserve(a.size() + 1 + b.size());
  if (!a.empty()) out.append(a).push_back('.');
  return out.append(b);
}

inline std::string parentPattern(std::string_view pattern) {
  auto pos = pattern.find_last_of('.');
  return pos == std::string_view::npos ? std::string() : std::string(pattern.substr(0, pos));
}

//! A value's key path for messages ("segments.trunk.length"), joined only when a message needs it: a sweep run
//! reads every value of its case, and a joined string per value read was about 1 % of a quadruped run's
//! instructions (DEVELOPERS.md "Per-run CPU in sweeps, seventeenth round").
struct KeyPath {
  std::string_view parent, key;
  std::string str() const { return joinPath(parent, key); }
};

//! How a schema entry's default is read: as a quantity (parseQuantity), a plain number (std::stod) or an integer
//! (std::stoi).
enum class DefaultAs { quantity, number, integer };
//! The value of a schema entry's default, read once per entry, reading and thread (the same text through the same
//! function gives the same value; a default read for every absent key of every sweep run cost a parse each).
inline double schemaDefault(const Param& p, DefaultAs as) {
  struct Entry {
    bool known = false;
    double value = 0.0;
  };
  thread_local std::vector<Entry> cache(3 * caseSchema().size());
  Entry& e = cache[3 * static_cast<std::size_t>(&p - caseSchema().data()) + static_cast<std::size_t>(as)];
  if (!e.known) {
    if (as == DefaultAs::integer) e.value = std::stoi(std::string(p.defaultValue));
    else if (as == DefaultAs::number) e.value = std::stod(std::string(p.defaultValue));
    else e.value = parseQuantity(p.defaultValue, p.unit);
    e.known = true;
  }
  return e.value;
}

//! Reads typed values from the TOML tree against the schema; every failure is a CaseError with location.
class CaseReader {
 public:
  explicit CaseReader(std::string file) : file_(std::move(file)) {}

  [[noreturn]] void fail(const toml::node* node, const std::string& path, const std::string& what) const {
    throw CaseError(fmt::format("{}: {}: {}", location(node), path, what));
  }

  //! "FILE:LINE:COLUMN" of a node, or "FILE (an override: ...)" for a value that came from an override.
  std::string location(const toml::node* node) const {
    if (node && node->source().begin.line > 0)
      return fmt::format("{}:{}:{}", file_, node->source().begin.line, node->source().begin.column);
    if (node) return file_ + " (an override: --set, a sweep or fit parameter, or set= in Python)";
    return file_;
  }

  //! Every value (not table) below `table` with its location, keyed by its key path as --set writes it (segments
  //! and other named elements by name, array elements otherwise by index): which keys the case gives (Case::given).
  static void collectGiven(const toml::node& node, const std::string& path, std::map<std::string, Case::GivenAt>& out) {
    if (const toml::table* t = node.as_table()) {
      for (auto&& [key, child] : *t) collectGiven(child, path.empty() ? std::string(key.str()) : path + "." + std::string(key.str()), out);
    } else if (const toml::array* a = node.as_array(); a && !a->empty() && a->front().is_table()) {
      for (std::size_t i = 0; i < a->size(); ++i) collectGiven((*a)[i], path + "." + elementLabel((*a)[i], i), out);
    } else {
      out.emplace(path, Case::GivenAt{static_cast<unsigned>(node.source().begin.line),
                                      static_cast<unsigned>(node.source().begin.column)});
    }
  }

  //! Check every key below `table` against the schema (recursively).
  void checkKeys(const toml::table& table, const std::string& pattern, const std::string& display) const {
    std::string buffer = pattern;
    checkKeysIn(table, buffer, display);
  }

  std::string formatValue(const toml::node& node) const {
    std::ostringstream os;
    if (node.is_string()) os << '"' << *node.value<std::string>() << '"';
    else if (node.is_table()) os << "a table";
    else if (node.is_array()) os << "an array";
    else if (node.is_integer()) os << *node.value<int64_t>();
    else if (node.is_floating_point()) os << *node.value<double>();
    else if (node.is_boolean()) os << (*node.value<bool>() ? "true" : "false");
    else os << "a value";
    return os.str();
  }

  //! SI value of a quantity node (number in SI, or a string with a unit), range-checked.
  double quantity(const toml::node& node, const Param& p, const KeyPath& path, double density = 0.0) const {
    double value = 0.0;
    if (auto number = node.value<double>(); number && !node.is_string()) {
      value = *number;
    } else if (auto text = node.value<std::string>()) {
      try {
        // A quoted number without a unit is most likely a forgotten unit ("18" meant as cm): refuse it. A bare
        // (unquoted) number is SI by definition.
        if (!p.unit.empty() && p.unit != "1" && splitValueUnit(*text).unit.empty())
          throw UnitError(fmt::format("a quoted value needs a unit (\"{} {}\"), or write the number without quotes "
                                      "for SI",
                                      trimmed(*text), p.unit));
        value = toSI(*text, p, density);
      } catch (const UnitError& e) {
        fail(&node, path.str(), fmt::format("{} = {}: {}; expected {} in {} or a convertible unit, e.g. {}",
                                            lastComponent(path.str()), formatValue(node), e.what(),
                                            aQuantity(p.unit), p.unit, example(p)));
      }
    } else {
      fail(&node, path.str(), fmt::format("{} is not a number or a quantity string (expected {} in {}, e.g. {})",
                                          formatValue(node), aQuantity(p.unit), p.unit, example(p)));
    }
    checkRange(node, p, path, value);
    return snapToRange(p, value);
  }

  //! A value a rounding error outside an inclusive bound (-100 degC converts to 173.14999999999998 K): the
  //! bound itself. checkRange accepts such values.
  static double snapToRange(const Param& p, double value) {
    if (value < p.min && !p.minExclusive) return p.min;
    if (value > p.max) return p.max;
    return value;
  }
  static bool nearBound(double value, double bound) {
    return std::abs(value - bound) <= 1e-12 * std::max(1.0, std::abs(bound));
  }
  static std::string trimmed(std::string text) {
    text.erase(0, text.find_first_not_of(" \t"));
    text.erase(text.find_last_not_of(" \t") + 1);
    return text;
  }

  double toSI(const std::string& text, const Param& p, double density) const {
    if (p.kind == ParamKind::Perfusion) {
      ValueWithUnit vu = splitValueUnit(text);
      if (!vu.unit.empty() && !unitConvertible(vu.unit, "1/s") && unitConvertible(vu.unit, "m3/(kg s)")) {
        // Volume of blood per tissue mass per time, times tissue density: omega [1/s].
        return convertUnit(vu.value, vu.unit, "m3/(kg s)") * density;
      }
    }
    return parseQuantity(text, p.unit);
  }

  //! The value as written (formatValue) is formatted only for the message: an ostringstream per value was about
  //! 1 % of a sweep run's instructions.
  void checkRange(const toml::node& node, const Param& p, const KeyPath& path, double value) const {
    bool belowMin = p.minExclusive ? !(value > p.min) : !(value >= p.min || nearBound(value, p.min));
    bool aboveMax = value > p.max && !nearBound(value, p.max);
    // Subnormal numbers (below 2.2e-308) lose their precision in any product: no physical input is that small.
    bool subnormal = std::fpclassify(value) == FP_SUBNORMAL;
    if (!std::isfinite(value) || belowMin || aboveMax || subnormal) {
      std::string unit = p.unit.empty() ? "" : " " + std::string(p.unit);
      std::string hint;
      if (p.unit == "K" && value < p.min && value > -100 && value < 100)
        hint = fmt::format(" (a bare number is in kelvin; did you mean \"{} degC\"?)", value);
      fail(&node, path.str(),
           fmt::format("{} = {}: out of range, allowed {} {:g}{} to {:g}{}{}", lastComponent(path.str()), formatValue(node),
                       p.minExclusive ? ">" : ">=", p.min, unit, p.max, unit, hint));
    }
  }

  double number(const toml::node& node, const Param& p, const KeyPath& path) const {
    auto v = node.value<double>();
    if (!v || node.is_string()) fail(&node, path.str(), fmt::format("{} must be a plain number", formatValue(node)));
    checkRange(node, p, path, *v);
    return snapToRange(p, *v);
  }

  long integer(const toml::node& node, const Param& p, const KeyPath& path) const {
    auto v = node.value<int64_t>();
    if (!v || !node.is_integer()) fail(&node, path.str(), fmt::format("{} must be an integer", formatValue(node)));
    checkRange(node, p, path, static_cast<double>(*v));
    return static_cast<long>(*v);
  }

  std::string text(const toml::node& node, const KeyPath& path) const {
    auto v = node.value<std::string>();
    if (!v || !node.is_string()) fail(&node, path.str(), fmt::format("{} must be a string", formatValue(node)));
    return *v;
  }

  //! One of p.choices ("a|b|c"); the list is split only for the message (a stringstream per choice read before).
  std::string choice(const toml::node& node, const Param& p, const KeyPath& path) const {
    std::string v = text(node, path);
    for (std::string_view rest = p.choices;;) {
      const std::size_t bar = rest.find('|');
      if (rest.substr(0, bar) == v) return v;
      if (bar == std::string_view::npos) break;
      rest.remove_prefix(bar + 1);
    }
    std::string choices(p.choices);
    std::vector<std::string> options;
    std::stringstream ss(choices);
    for (std::string item; std::getline(ss, item, '|');) options.push_back(item);
    fail(&node, path.str(), fmt::format("\"{}\" is not one of: {}", v, fmt::join(options, ", ")));
  }

  const std::string& file() const { return file_; }

 private:
  static std::string example(const Param& p) {
    if (!p.defaultValue.empty()) return fmt::format("\"{}\"", p.defaultValue);
    return fmt::format("\"1 {}\"", p.unit);
  }

  //! checkKeys with the pattern in one string that grows and shrinks with the depth (`pattern` is as it was on
  //! return), and each key's display path joined only where a table below it or a message needs it: a string per
  //! key and two per value checked were about 1 % of a sweep run's instructions.
  void checkKeysIn(const toml::table& table, std::string& pattern, const std::string& display) const {
    const std::size_t length = pattern.size();
    for (auto&& [key, node] : table) {
      const std::string_view k = key.str();
      if (length > 0) pattern.push_back('.');
      pattern.append(k);
      const Param* p = findParam(pattern);
      if (!p) unknownKey(&node, pattern.substr(0, length), joinPath(display, k), std::string(k));
      const bool leaf = p->kind != ParamKind::Table && p->kind != ParamKind::NamedTables &&
                        p->kind != ParamKind::TableArray;
      if (!leaf || node.is_table() || node.is_array()) checkNode(node, *p, pattern, joinPath(display, k));
      pattern.resize(length);
    }
  }

  void checkNode(const toml::node& node, const Param& p, std::string& pattern, const std::string& display) const {
    switch (p.kind) {
      case ParamKind::Table:
        if (!node.is_table()) fail(&node, display, fmt::format("expected a table, got {}", formatValue(node)));
        checkKeysIn(*node.as_table(), pattern, display);
        break;
      case ParamKind::NamedTables:
        if (!node.is_table()) fail(&node, display, "expected a table of named tables, e.g. [tissues.muscle]");
        for (auto&& [name, child] : *node.as_table()) {
          std::string d = display + "." + std::string(name.str());
          if (!child.is_table()) fail(&child, d, "expected a table");
          const std::size_t length = pattern.size();
          pattern.append(".*");
          checkKeysIn(*child.as_table(), pattern, d);
          pattern.resize(length);
        }
        break;
      case ParamKind::TableArray: {
        const toml::array* array = node.as_array();
        if (!array) fail(&node, display, "expected an array of tables ([[" + display + "]] or [{...}, ...])");
        for (std::size_t i = 0; i < array->size(); ++i) {
          const toml::node& element = (*array)[i];
          std::string d = display + "." + elementLabel(element, i);
          if (!element.is_table()) fail(&element, d, "expected a table");
          const std::size_t length = pattern.size();
          pattern.append("[]");
          checkKeysIn(*element.as_table(), pattern, d);
          pattern.resize(length);
        }
        break;
      }
      default:
        if (node.is_table() || node.is_array())
          fail(&node, display, fmt::format("expected a value, got {}", formatValue(node)));
        break;
    }
  }

 public:
  static std::string elementLabel(const toml::node& element, std::size_t index) {
    if (const toml::table* t = element.as_table())
      if (auto name = (*t)["name"].value<std::string>()) return *name;
    return std::to_string(index);
  }

 private:
  [[noreturn]] void unknownKey(const toml::node* node, const std::string& parent, const std::string& display,
                               const std::string& key) const {
    std::vector<std::string> siblings;
    std::string normalizedParent = parent;
    for (const Param& p : caseSchema())
      if (parentPattern(p.path) == normalizedParent) siblings.push_back(lastComponent(p.path));
    std::sort(siblings.begin(), siblings.end(), [&](const std::string& a, const std::string& b) {
      return editDistance(key, a) < editDistance(key, b);
    });
    std::string suggestion;
    if (!siblings.empty() && editDistance(key, siblings.front()) <= std::max<std::size_t>(2, key.size() / 3))
      suggestion = fmt::format("; did you mean \"{}\"?", siblings.front());
    std::sort(siblings.begin(), siblings.end());
    fail(node, display,
         fmt::format("unknown key \"{}\"{} (valid keys here: {})", key, suggestion, fmt::join(siblings, ", ")));
  }

  std::string file_;
};

//! Typed access to one table of the case, with its schema pattern and display path.
class TableView {
 public:
  TableView(const CaseReader& reader, const toml::table* table, std::string pattern, std::string display)
      : reader_(reader), table_(table), pattern_(std::move(pattern)), display_(std::move(display)) {}

  const toml::node* node(std::string_view key) const { return table_ ? table_->get(key) : nullptr; }
  bool has(std::string_view key) const { return node(key) != nullptr; }
  //! The schema entry of a key of this table (its pattern joined in a buffer kept per thread: no allocation).
  const Param& param(std::string_view key) const {
    thread_local std::string pattern;
    pattern.clear();
    if (!pattern_.empty()) pattern.append(pattern_).push_back('.');
    pattern.append(key);
    const Param* p = findParam(pattern);
    if (!p) throw std::logic_error("schema has no " + join(pattern_, key));
    return *p;
  }
  std::string path(std::string_view key) const { return join(display_, key); }

  std::optional<double> optionalQuantity(std::string_view key, double density = 0.0) const {
    const Param& p = param(key);
    if (const toml::node* n = node(key)) return reader_.quantity(*n, p, keyPath(key), density);
    if (p.defaultValue.empty()) return std::nullopt;
    return schemaDefault(p, DefaultAs::quantity);
  }
  double quantity(std::string_view key, double density = 0.0) const {
    if (auto v = optionalQuantity(key, density)) return *v;
    missing(key);
  }
  double number(std::string_view key) const {
    const Param& p = param(key);
    if (const toml::node* n = node(key)) return reader_.number(*n, p, keyPath(key));
    return schemaDefault(p, DefaultAs::number);
  }
  int integer(std::string_view key) const {
    const Param& p = param(key);
    if (const toml::node* n = node(key)) return static_cast<int>(reader_.integer(*n, p, keyPath(key)));
    if (p.defaultValue.empty()) missing(key);
    return static_cast<int>(schemaDefault(p, DefaultAs::integer));
  }
  std::string text(std::string_view key) const {
    const Param& p = param(key);
    if (const toml::node* n = node(key)) return reader_.text(*n, keyPath(key));
    if (p.defaultValue.empty()) missing(key);
    return std::string(p.defaultValue);
  }
  std::optional<std::string> optionalText(std::string_view key) const {
    param(key);
    if (const toml::node* n = node(key)) return reader_.text(*n, keyPath(key));
    return std::nullopt;
  }
  std::string choice(std::string_view key) const {
    const Param& p = param(key);
    if (const toml::node* n = node(key)) return reader_.choice(*n, p, keyPath(key));
    if (p.defaultValue.empty()) missing(key);
    return std::string(p.defaultValue);
  }
  //! A user-named table under a NamedTables key ("tissues.muscle" has the pattern "tissues.*").
  TableView namedChild(std::string_view group, std::string_view name) const {
    const toml::node* g = node(group);
    const toml::node* n = g && g->as_table() ? g->as_table()->get(name) : nullptr;
    return TableView(reader_, n ? n->as_table() : nullptr, join(pattern_, group) + ".*",
                     path(group) + "." + std::string(name));
  }
  TableView child(std::string_view key) const {
    const toml::node* n = node(key);
    return TableView(reader_, n ? n->as_table() : nullptr, join(pattern_, key), path(key));
  }
  [[noreturn]] void fail(std::string_view key, const std::string& what) const {
    const toml::node* n = node(key);
    reader_.fail(n ? n : anchor(), path(key), what);
  }
  [[noreturn]] void missing(std::string_view key) const {
    const Param& p = param(key);
    reader_.fail(anchor(), path(key),
                 fmt::format("required key \"{}\" is missing ({}{})", key, p.doc,
                             p.unit.empty() ? "" : fmt::format(" Unit: {}.", p.unit)));
  }
  const toml::node* anchor() const { return table_; }
  const std::string& display() const { return display_; }

 private:
  static std::string join(std::string_view a, std::string_view b) { return joinPath(a, b); }
  KeyPath keyPath(std::string_view key) const { return KeyPath{display_, key}; }
  const CaseReader& reader_;
  const toml::table* table_;
  std::string pattern_;
  std::string display_;
};


}  // namespace thermorph
