#include "models/case.hpp"

#include <algorithm>
#include <cmath>
#include <filesystem>
#include <fstream>
#include <set>
#include <sstream>

#include <fmt/format.h>
#include <toml++/toml.h>

#include "models/case_schema.hpp"
#include "models/units.hpp"

namespace thermorph {

const char* shapeName(Shape shape) {
  switch (shape) {
    case Shape::Sphere: return "sphere";
    case Shape::Cylinder: return "cylinder";
    case Shape::Cone: return "cone";
    case Shape::Plate: return "plate";
  }
  return "?";
}

double SegmentSpec::tissueRadius() const {
  double r = 0.0;
  for (const LayerSpec& l : layers) r += l.thickness;
  return r;
}

namespace {

std::size_t editDistance(std::string_view a, std::string_view b) {
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

std::string lastComponent(std::string_view pattern) {
  auto pos = pattern.find_last_of('.');
  std::string_view tail = pos == std::string_view::npos ? pattern : pattern.substr(pos + 1);
  return std::string(tail);
}

std::string parentPattern(std::string_view pattern) {
  auto pos = pattern.find_last_of('.');
  return pos == std::string_view::npos ? std::string() : std::string(pattern.substr(0, pos));
}

//! Reads typed values from the TOML tree against the schema; every failure is a CaseError with location.
class CaseReader {
 public:
  explicit CaseReader(std::string file) : file_(std::move(file)) {}

  [[noreturn]] void fail(const toml::node* node, const std::string& path, const std::string& what) const {
    std::string where = file_;
    if (node && node->source().begin.line > 0)
      where += fmt::format(":{}:{}", node->source().begin.line, node->source().begin.column);
    else if (node)
      where += " (--set on the command line)";
    throw CaseError(fmt::format("{}: {}: {}", where, path, what));
  }

  //! Check every key below `table` against the schema (recursively).
  void checkKeys(const toml::table& table, const std::string& pattern, const std::string& display) const {
    for (auto&& [key, node] : table) {
      std::string k(key.str());
      std::string childPattern = pattern.empty() ? k : pattern + "." + k;
      std::string childDisplay = display.empty() ? k : display + "." + k;
      const Param* p = findParam(childPattern);
      if (!p) unknownKey(&node, pattern, childDisplay, k);
      checkNode(node, *p, childPattern, childDisplay);
    }
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
  double quantity(const toml::node& node, const Param& p, const std::string& path, double density = 0.0) const {
    double value = 0.0;
    std::string shown = formatValue(node);
    if (auto number = node.value<double>(); number && !node.is_string()) {
      value = *number;
    } else if (auto text = node.value<std::string>()) {
      try {
        value = toSI(*text, p, density);
      } catch (const UnitError& e) {
        fail(&node, path, fmt::format("{} = {}: {}; expected a {} in {} or a convertible unit, e.g. {}", lastComponent(path), shown,
                                      e.what(), quantityName(p.unit), p.unit, example(p)));
      }
    } else {
      fail(&node, path, fmt::format("{} is not a number or a quantity string (expected a {} in {}, e.g. {})", shown,
                                    quantityName(p.unit), p.unit, example(p)));
    }
    checkRange(&node, p, path, value, shown);
    return value;
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

  void checkRange(const toml::node* node, const Param& p, const std::string& path, double value,
                  const std::string& shown) const {
    bool belowMin = p.minExclusive ? !(value > p.min) : !(value >= p.min);
    if (!std::isfinite(value) || belowMin || value > p.max) {
      std::string unit = p.unit.empty() ? "" : " " + std::string(p.unit);
      std::string hint;
      if (p.unit == "K" && value < p.min && value > -100 && value < 100)
        hint = fmt::format(" (a bare number is in kelvin; did you mean \"{} degC\"?)", value);
      fail(node, path,
           fmt::format("{} = {}: out of range, allowed {} {:g}{} to {:g}{}{}", lastComponent(path), shown,
                       p.minExclusive ? ">" : ">=", p.min, unit, p.max, unit, hint));
    }
  }

  double number(const toml::node& node, const Param& p, const std::string& path) const {
    auto v = node.value<double>();
    if (!v || node.is_string()) fail(&node, path, fmt::format("{} must be a plain number", formatValue(node)));
    checkRange(&node, p, path, *v, formatValue(node));
    return *v;
  }

  long integer(const toml::node& node, const Param& p, const std::string& path) const {
    auto v = node.value<int64_t>();
    if (!v || !node.is_integer()) fail(&node, path, fmt::format("{} must be an integer", formatValue(node)));
    checkRange(&node, p, path, static_cast<double>(*v), formatValue(node));
    return static_cast<long>(*v);
  }

  std::string text(const toml::node& node, const std::string& path) const {
    auto v = node.value<std::string>();
    if (!v || !node.is_string()) fail(&node, path, fmt::format("{} must be a string", formatValue(node)));
    return *v;
  }

  std::string choice(const toml::node& node, const Param& p, const std::string& path) const {
    std::string v = text(node, path);
    std::string choices(p.choices);
    std::vector<std::string> options;
    std::stringstream ss(choices);
    for (std::string item; std::getline(ss, item, '|');) options.push_back(item);
    if (std::find(options.begin(), options.end(), v) == options.end())
      fail(&node, path, fmt::format("\"{}\" is not one of: {}", v, fmt::join(options, ", ")));
    return v;
  }

  const std::string& file() const { return file_; }

 private:
  static std::string example(const Param& p) {
    if (!p.defaultValue.empty()) return fmt::format("\"{}\"", p.defaultValue);
    return fmt::format("\"1 {}\"", p.unit);
  }

  void checkNode(const toml::node& node, const Param& p, const std::string& pattern, const std::string& display) const {
    switch (p.kind) {
      case ParamKind::Table:
        if (!node.is_table()) fail(&node, display, fmt::format("expected a table, got {}", formatValue(node)));
        checkKeys(*node.as_table(), pattern, display);
        break;
      case ParamKind::NamedTables:
        if (!node.is_table()) fail(&node, display, "expected a table of named tables, e.g. [tissues.muscle]");
        for (auto&& [name, child] : *node.as_table()) {
          std::string d = display + "." + std::string(name.str());
          if (!child.is_table()) fail(&child, d, "expected a table");
          checkKeys(*child.as_table(), pattern + ".*", d);
        }
        break;
      case ParamKind::TableArray: {
        const toml::array* array = node.as_array();
        if (!array) fail(&node, display, "expected an array of tables ([[" + display + "]] or [{...}, ...])");
        for (std::size_t i = 0; i < array->size(); ++i) {
          const toml::node& element = (*array)[i];
          std::string d = display + "." + elementLabel(element, i);
          if (!element.is_table()) fail(&element, d, "expected a table");
          checkKeys(*element.as_table(), pattern + "[]", d);
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
  const Param& param(std::string_view key) const {
    const Param* p = findParam(join(pattern_, key));
    if (!p) throw std::logic_error("schema has no " + join(pattern_, key));
    return *p;
  }
  std::string path(std::string_view key) const { return join(display_, key); }

  std::optional<double> optionalQuantity(std::string_view key, double density = 0.0) const {
    const Param& p = param(key);
    if (const toml::node* n = node(key)) return reader_.quantity(*n, p, path(key), density);
    if (p.defaultValue.empty()) return std::nullopt;
    return parseQuantity(p.defaultValue, p.unit);
  }
  double quantity(std::string_view key, double density = 0.0) const {
    if (auto v = optionalQuantity(key, density)) return *v;
    missing(key);
  }
  double number(std::string_view key) const {
    const Param& p = param(key);
    if (const toml::node* n = node(key)) return reader_.number(*n, p, path(key));
    return std::stod(std::string(p.defaultValue));
  }
  int integer(std::string_view key) const {
    const Param& p = param(key);
    if (const toml::node* n = node(key)) return static_cast<int>(reader_.integer(*n, p, path(key)));
    if (p.defaultValue.empty()) missing(key);
    return std::stoi(std::string(p.defaultValue));
  }
  std::string text(std::string_view key) const {
    const Param& p = param(key);
    if (const toml::node* n = node(key)) return reader_.text(*n, path(key));
    if (p.defaultValue.empty()) missing(key);
    return std::string(p.defaultValue);
  }
  std::optional<std::string> optionalText(std::string_view key) const {
    param(key);
    if (const toml::node* n = node(key)) return reader_.text(*n, path(key));
    return std::nullopt;
  }
  std::string choice(std::string_view key) const {
    const Param& p = param(key);
    if (const toml::node* n = node(key)) return reader_.choice(*n, p, path(key));
    if (p.defaultValue.empty()) missing(key);
    return std::string(p.defaultValue);
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
  static std::string join(std::string_view a, std::string_view b) {
    return a.empty() ? std::string(b) : fmt::format("{}.{}", a, b);
  }
  const CaseReader& reader_;
  const toml::table* table_;
  std::string pattern_;
  std::string display_;
};

// ---- --set KEY=VALUE ---------------------------------------------------------------------------

//! Index of the element named `component` (or numbered), or the array size when there is none.
std::size_t findArrayElement(const toml::array& array, const std::string& component) {
  for (std::size_t i = 0; i < array.size(); ++i)
    if (auto* t = array[i].as_table())
      if (auto name = (*t)["name"].value<std::string>(); name && *name == component) return i;
  if (!component.empty() && std::all_of(component.begin(), component.end(), ::isdigit)) {
    std::size_t index = std::stoul(component);
    if (index < array.size()) return index;
  }
  return array.size();
}

void applyOverride(toml::table& root, const std::string& file, const std::string& assignment) {
  auto eq = assignment.find('=');
  if (eq == std::string::npos || eq == 0)
    throw CaseError(fmt::format("--set {}: expected KEY=VALUE, e.g. --set environment.temperature=\"5 degC\"",
                                assignment));
  std::string key = assignment.substr(0, eq);
  std::string valueText = assignment.substr(eq + 1);

  toml::table parsedValue;
  try {
    parsedValue = toml::parse("value = " + valueText);
  } catch (const toml::parse_error&) {
    parsedValue.insert_or_assign("value", valueText);  // an unquoted unit string: "4 cm"
  }
  toml::node& value = *parsedValue.get("value");

  std::vector<std::string> components;
  std::stringstream ss(key);
  for (std::string part; std::getline(ss, part, '.');) components.push_back(part);

  toml::node* current = &root;
  std::string walked;
  for (std::size_t i = 0; i < components.size(); ++i) {
    const std::string& c = components[i];
    bool last = i + 1 == components.size();
    walked += (walked.empty() ? "" : ".") + c;
    if (auto* table = current->as_table()) {
      if (last) {
        table->insert_or_assign(c, value);
        return;
      }
      if (!table->contains(c)) {
        bool nextIsIndex = false;
        (void)nextIsIndex;
        table->insert(c, toml::table{});
      }
      current = table->get(c);
    } else if (auto* array = current->as_array()) {
      std::size_t index = findArrayElement(*array, c);
      if (index == array->size()) {
        std::vector<std::string> names;
        for (std::size_t k = 0; k < array->size(); ++k) names.push_back(CaseReader::elementLabel((*array)[k], k));
        throw CaseError(fmt::format("{}: --set {}: no element \"{}\" in {} (have: {})", file, key, c,
                                    walked.substr(0, walked.size() - c.size() - 1), fmt::join(names, ", ")));
      }
      if (last) {
        array->replace(array->cbegin() + static_cast<std::ptrdiff_t>(index), value);
        return;
      }
      current = &(*array)[index];
    } else {
      throw CaseError(fmt::format("{}: --set {}: {} is a value, not a table", file, key,
                                  walked.substr(0, walked.size() - c.size() - 1)));
    }
  }
}

// ---- building the Case ---------------------------------------------------------------------------

void readTissues(const CaseReader& reader, const TableView& root, Case& c) {
  c.tissues = builtinTissues();
  const toml::node* tissues = root.node("tissues");
  if (!tissues) return;
  for (auto&& [nameKey, node] : *tissues->as_table()) {
    std::string name(nameKey.str());
    TableView t(reader, node.as_table(), "tissues.*", "tissues." + name);
    std::string base = t.optionalText("base").value_or(name);
    auto it = c.tissues.find(base);
    if (it == c.tissues.end()) {
      bool complete = t.has("conductivity") && t.has("density") && t.has("specific_heat");
      if (!complete || t.has("base")) {
        std::vector<std::string> names;
        for (auto& [n, _] : builtinTissues()) names.push_back(n);
        t.fail(t.has("base") ? "base" : "conductivity",
               fmt::format("\"{}\" is not a built-in tissue ({}); a new tissue needs conductivity, density and "
                           "specific_heat, or base = \"<built-in>\"",
                           base, fmt::join(names, ", ")));
      }
    }
    TissueProperties props = it != c.tissues.end() ? it->second : TissueProperties{};
    if (it == c.tissues.end()) props.source = "case file";
    else props.source = "case file, based on " + base;
    if (auto v = t.optionalQuantity("conductivity")) props.conductivity = *v;
    if (auto v = t.optionalQuantity("density")) props.density = *v;
    if (auto v = t.optionalQuantity("specific_heat")) props.specificHeat = *v;
    if (auto v = t.optionalQuantity("metabolic_heat")) props.metabolicHeat = *v;
    if (auto v = t.optionalQuantity("perfusion", props.density)) props.perfusion = *v;
    if (t.has("q10")) props.q10 = t.number("q10");
    if (auto v = t.optionalQuantity("wet_conductivity")) props.wetConductivity = *v;
    c.tissues[name] = props;
  }
}

const TissueProperties& requireTissue(const Case& c, const TableView& t, std::string_view key, const std::string& name) {
  auto it = c.tissues.find(name);
  if (it == c.tissues.end()) {
    std::vector<std::string> names;
    for (auto& [n, _] : c.tissues) names.push_back(n);
    t.fail(key, fmt::format("unknown tissue \"{}\" (known: {}; define new ones under [tissues.NAME])", name,
                            fmt::join(names, ", ")));
  }
  return it->second;
}

SegmentSpec readSegment(const CaseReader& reader, const Case& c, const toml::table& table, std::size_t index) {
  std::string label = CaseReader::elementLabel(table, index);
  TableView t(reader, &table, "segments[]", "segments." + label);
  SegmentSpec s;
  s.name = t.text("name");
  std::string shape = t.choice("shape");
  s.shape = shape == "sphere" ? Shape::Sphere : shape == "cylinder" ? Shape::Cylinder : shape == "cone" ? Shape::Cone : Shape::Plate;

  // Layers, inside out.
  const toml::node* layersNode = t.node("layers");
  if (!layersNode || layersNode->as_array()->empty())
    t.fail("layers", "at least one tissue layer is required, e.g. layers = [{ tissue = \"muscle\", thickness = \"2 cm\", cells = 10 }]");
  const toml::array& layers = *layersNode->as_array();
  for (std::size_t i = 0; i < layers.size(); ++i) {
    TableView l(reader, layers[i].as_table(), "segments[].layers[]", t.path("layers") + "." + std::to_string(i));
    LayerSpec layer;
    layer.tissue = l.text("tissue");
    const TissueProperties& props = requireTissue(c, l, "tissue", layer.tissue);
    if (props.isCoat) l.fail("tissue", fmt::format("\"{}\" is a coat material; give it as coat = {{ material = \"{}\", ... }}", layer.tissue, layer.tissue));
    layer.cells = l.integer("cells");
    if (i > 0 || l.has("thickness")) layer.thickness = l.quantity("thickness");
    s.layers.push_back(layer);
  }

  // Overall size; the first layer may be implied by the radius or thickness.
  auto fillFirstLayer = [&](std::string_view key, double total, double factor) {
    double outer = 0.0;
    for (std::size_t i = 1; i < s.layers.size(); ++i) outer += s.layers[i].thickness;
    double first = total / factor - outer;
    if (s.layers[0].thickness == 0.0) {
      if (!(first > 0.0))
        t.fail(key, fmt::format("{} = {:g} m leaves no room for the first layer (outer layers take {:g} m)", key,
                                total, outer * factor));
      s.layers[0].thickness = first;
    } else if (std::abs(first - s.layers[0].thickness) > 1e-9 * total) {
      t.fail(key, fmt::format("{} = {:g} m disagrees with the layers, which sum to {:g} m; give one or the other",
                              key, total, (s.layers[0].thickness + outer) * factor));
    }
  };
  std::string sizeKey;
  switch (s.shape) {
    case Shape::Sphere:
    case Shape::Cylinder:
      sizeKey = "radius";
      break;
    case Shape::Cone:
      sizeKey = "radius_proximal";
      break;
    case Shape::Plate:
      sizeKey = "thickness";
      break;
  }
  double factor = s.shape == Shape::Plate ? 2.0 : 1.0;
  if (t.has(sizeKey)) fillFirstLayer(sizeKey, t.quantity(sizeKey), factor);
  else if (s.layers[0].thickness == 0.0)
    t.fail("layers", fmt::format("give the first layer's thickness or the segment's {}", sizeKey));
  s.radiusProximal = s.tissueRadius();
  s.radiusDistal = s.radiusProximal;

  auto rejectKey = [&](std::string_view key, const char* why) {
    if (t.has(key)) t.fail(key, fmt::format("\"{}\" does not apply to a {} ({})", key, shape, why));
  };
  if (s.shape == Shape::Sphere) {
    rejectKey("length", "a sphere has only a radius");
    rejectKey("axial_cells", "a sphere is resolved radially only");
    rejectKey("width", "width is for plates");
  } else {
    s.length = t.quantity("length");
    s.axialCells = t.integer("axial_cells");
  }
  if (s.shape == Shape::Cone) s.radiusDistal = t.quantity("radius_distal");
  else rejectKey("radius_distal", "only cones taper");
  if (s.shape != Shape::Cone) rejectKey("radius_proximal", "only cones taper; use radius");
  if (s.shape == Shape::Plate) s.width = t.quantity("width");
  else rejectKey("width", "width is for plates");
  if (s.shape != Shape::Plate) rejectKey("thickness", "thickness is for plates; layers give radii");
  if (s.shape == Shape::Plate) rejectKey("radius", "a plate has a thickness and a width");

  if (t.has("coat")) {
    TableView ct = t.child("coat");
    CoatSpec coat;
    coat.material = ct.text("material");
    const TissueProperties& props = requireTissue(c, ct, "material", coat.material);
    if (!props.isCoat && ct.has("material"))
      ct.fail("material", fmt::format("\"{}\" is a tissue, not a coat material (fur, feathers, or a [tissues.NAME] "
                                      "with base = \"fur\")", coat.material));
    coat.thickness = ct.quantity("thickness");
    coat.cells = ct.integer("cells");
    s.coat = coat;
  }

  TableView surface = t.child("surface");
  s.surface.ends = surface.choice("ends") == "insulated" ? EndCondition::Insulated : EndCondition::Exposed;
  if (s.shape == Shape::Sphere && surface.has("ends")) surface.fail("ends", "a sphere has no end faces");
  s.surface.convectionCoefficient = surface.optionalQuantity("convection");
  return s;
}

Case buildCase(toml::table& root, const std::string& file, const std::vector<std::string>& overrides) {
  for (const std::string& o : overrides) applyOverride(root, file, o);
  CaseReader reader(file);
  reader.checkKeys(root, "", "");
  TableView top(reader, &root, "", "");

  Case c;
  c.sourceFile = file;
  c.title = top.optionalText("title").value_or(std::filesystem::path(file).stem().string());

  TableView run = top.child("run");
  c.run.duration = run.quantity("duration");
  c.run.outputInterval = run.quantity("output_interval");
  c.run.initial = run.choice("initial") == "steady" ? InitialCondition::Steady : InitialCondition::Temperature;
  c.run.initialTemperature = run.quantity("initial_temperature");
  c.run.rtol = run.number("rtol");
  if (run.has("atol")) {
    // A tolerance is a temperature difference: refuse degC, whose conversion would add 273.15.
    if (auto text = run.node("atol")->value<std::string>(); text && text->find("deg") != std::string::npos)
      run.fail("atol", "give the absolute tolerance in K (a temperature difference), e.g. \"1e-5 K\"");
  }
  c.run.atol = run.quantity("atol");
  c.run.maxStep = run.quantity("max_step");
  if (c.run.outputInterval > c.run.duration)
    run.fail("output_interval", fmt::format("output_interval = {:g} s exceeds duration = {:g} s",
                                            c.run.outputInterval, c.run.duration));

  TableView circ = top.child("circulation");
  c.circulation.bloodDensity = circ.quantity("blood_density");
  c.circulation.bloodSpecificHeat = circ.quantity("blood_specific_heat");
  c.circulation.fixedArterialTemperature = circ.optionalQuantity("fixed_arterial_temperature");
  c.circulation.q10Reference = circ.quantity("q10_reference");

  readTissues(reader, top, c);

  const toml::node* segs = root.get("segments");
  if (!segs || segs->as_array()->empty())
    reader.fail(&root, "segments", "the case defines no [[segments]]; a body needs at least one");
  std::set<std::string> names;
  long cells = 0;
  const toml::array& segArray = *segs->as_array();
  for (std::size_t i = 0; i < segArray.size(); ++i) {
    SegmentSpec s = readSegment(reader, c, *segArray[i].as_table(), i);
    if (!names.insert(s.name).second)
      reader.fail(&segArray[i], "segments." + s.name, fmt::format("duplicate segment name \"{}\"", s.name));
    long radial = 0;
    for (auto& l : s.layers) radial += l.cells;
    if (s.coat) radial += s.coat->cells;
    cells += radial * s.axialCells;
    if (s.shape == Shape::Cone) {
      double outer = s.tissueRadius() - s.layers[0].thickness;
      (void)outer;
    }
    c.segments.push_back(std::move(s));
  }
  if (cells > maxCells)
    reader.fail(segs, "segments",
                fmt::format("the body has {} cells; the limit is {} (reduce axial_cells or layer cells)", cells,
                            maxCells));
  if (c.segments.size() > 1)
    reader.fail(&segArray[1], "segments." + c.segments[1].name,
                "this version simulates one segment per case (linked segments are not available yet)");

  TableView env = top.child("environment");
  c.environment.temperature = env.quantity("temperature");
  c.environment.convectionCoefficient = env.quantity("convection");
  return c;
}

}  // namespace

Case loadCaseFromString(const std::string& text, const std::string& sourceName,
                        const std::vector<std::string>& overrides) {
  toml::table root;
  try {
    root = toml::parse(text, sourceName);
  } catch (const toml::parse_error& e) {
    throw CaseError(fmt::format("{}:{}:{}: TOML syntax error: {}", sourceName, e.source().begin.line,
                                e.source().begin.column, e.description()));
  }
  return buildCase(root, sourceName, overrides);
}

Case loadCase(const std::string& path, const std::vector<std::string>& overrides) {
  std::ifstream in(path);
  if (!in) throw CaseError(fmt::format("{}: cannot open the case file (does it exist?)", path));
  std::stringstream buffer;
  buffer << in.rdbuf();
  return loadCaseFromString(buffer.str(), path, overrides);
}

std::string resolvedCaseToml(const Case& c) {
  toml::table root;
  root.insert("title", c.title);
  root.insert("run", toml::table{{"duration", c.run.duration},
                                 {"output_interval", c.run.outputInterval},
                                 {"initial", c.run.initial == InitialCondition::Steady ? "steady" : "temperature"},
                                 {"initial_temperature", c.run.initialTemperature},
                                 {"rtol", c.run.rtol},
                                 {"atol", c.run.atol},
                                 {"max_step", c.run.maxStep}});
  toml::table circ{{"blood_density", c.circulation.bloodDensity},
                   {"blood_specific_heat", c.circulation.bloodSpecificHeat},
                   {"q10_reference", c.circulation.q10Reference}};
  if (c.circulation.fixedArterialTemperature)
    circ.insert("fixed_arterial_temperature", *c.circulation.fixedArterialTemperature);
  root.insert("circulation", circ);

  // Only the tissues the body uses, each fully specified.
  std::set<std::string> used;
  for (const SegmentSpec& s : c.segments) {
    for (const LayerSpec& l : s.layers) used.insert(l.tissue);
    if (s.coat) used.insert(s.coat->material);
  }
  toml::table tissues;
  for (const std::string& name : used) {
    const TissueProperties& p = c.tissues.at(name);
    toml::table t{{"conductivity", p.conductivity}, {"density", p.density},     {"specific_heat", p.specificHeat},
                  {"metabolic_heat", p.metabolicHeat}, {"perfusion", p.perfusion}, {"q10", p.q10}};
    if (p.isCoat) t.insert("wet_conductivity", p.wetConductivity > 0 ? p.wetConductivity : p.conductivity);
    if (!builtinTissues().count(name)) t.insert("base", "fur");
    tissues.insert(name, t);
  }
  root.insert("tissues", tissues);

  toml::array segments;
  for (const SegmentSpec& s : c.segments) {
    toml::table t{{"name", s.name}, {"shape", shapeName(s.shape)}};
    if (s.shape != Shape::Sphere) {
      t.insert("length", s.length);
      t.insert("axial_cells", s.axialCells);
    }
    if (s.shape == Shape::Cone) {
      t.insert("radius_proximal", s.radiusProximal);
      t.insert("radius_distal", s.radiusDistal);
    }
    if (s.shape == Shape::Plate) t.insert("width", s.width);
    toml::array layers;
    for (const LayerSpec& l : s.layers)
      layers.push_back(toml::table{{"tissue", l.tissue}, {"thickness", l.thickness}, {"cells", l.cells}});
    t.insert("layers", layers);
    if (s.coat) t.insert("coat", toml::table{{"material", s.coat->material}, {"thickness", s.coat->thickness}, {"cells", s.coat->cells}});
    toml::table surface;
    if (s.shape != Shape::Sphere) surface.insert("ends", s.surface.ends == EndCondition::Insulated ? "insulated" : "exposed");
    if (s.surface.convectionCoefficient) surface.insert("convection", *s.surface.convectionCoefficient);
    if (!surface.empty()) t.insert("surface", surface);
    segments.push_back(t);
  }
  root.insert("segments", segments);
  root.insert("environment", toml::table{{"temperature", c.environment.temperature},
                                         {"convection", c.environment.convectionCoefficient}});
  std::ostringstream os;
  os << "# Fully resolved case: every value in SI units (m, kg, s, K, W), every default filled in.\n"
     << "# Written by thermorph " << THERMORPH_VERSION << " from " << c.sourceFile << ".\n"
     << root << "\n";
  return os.str();
}

std::string caseReferenceMarkdown() {
  std::ostringstream os;
  os << "# Case-file reference\n\n"
     << "Generated from the parameter schema in `models/case_schema.cpp` by `thermorph reference`; do not edit by hand.\n"
     << "Every dimensional value is a number in SI units or a string with a unit parsed by udunits2 (`\"12 cm\"`, "
        "`\"37 degC\"`, `\"30 mL/(100 g min)\"`). Temperatures accept degC and K; a bare number is kelvin.\n"
     << "Key paths are those of `--set KEY=VALUE`; segments are addressed by name "
        "(`segments.ear.layers.0.thickness`).\n\n"
     << "| key | kind | SI unit | default | allowed | description |\n|---|---|---|---|---|---|\n";
  for (const Param& p : caseSchema()) {
    std::string kind;
    std::string allowed;
    switch (p.kind) {
      case ParamKind::Table: kind = "table"; break;
      case ParamKind::TableArray: kind = "array of tables"; break;
      case ParamKind::NamedTables: kind = "named tables"; break;
      case ParamKind::Quantity: kind = "quantity"; break;
      case ParamKind::Perfusion: kind = "perfusion"; break;
      case ParamKind::Number: kind = "number"; break;
      case ParamKind::Integer: kind = "integer"; break;
      case ParamKind::Text: kind = "text"; break;
      case ParamKind::Choice: kind = "choice"; break;
    }
    if (p.kind == ParamKind::Quantity || p.kind == ParamKind::Perfusion || p.kind == ParamKind::Number ||
        p.kind == ParamKind::Integer)
      allowed = fmt::format("{} {:g} … {:g}", p.minExclusive ? ">" : "≥", p.min, p.max);
    if (p.kind == ParamKind::Choice) {
      std::string ch(p.choices);
      std::replace(ch.begin(), ch.end(), '|', ',');
      allowed = ch;
    }
    std::string path(p.path);
    std::string key;
    for (char ch : path) key += ch == '*' ? std::string("NAME") : std::string(1, ch);
    os << fmt::format("| `{}` | {} | {} | {} | {} | {} |\n", key, kind, p.unit.empty() ? "" : "`" + std::string(p.unit) + "`",
                      p.defaultValue.empty() ? "" : "`" + std::string(p.defaultValue) + "`", allowed, p.doc);
  }
  return os.str();
}

}  // namespace thermorph
