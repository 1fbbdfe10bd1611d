#include "models/case.hpp"
#include "models/grid.hpp"
#include "models/inert_keys.hpp"
#include "models/sha256.hpp"

#include <algorithm>
#include <cmath>
#include <numbers>
#include <filesystem>
#include <fstream>
#include <functional>
#include <limits>
#include <map>
#include <set>
#include <sstream>

#include <fmt/format.h>
#include <toml++/toml.h>

#include "models/case_reader.hpp"
#include "models/environment_case.hpp"
#include "models/case_schema.hpp"
#include "models/caution.hpp"
#include "models/tissues.hpp"
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

double footprintSection(const SegmentSpec& child, const SegmentSpec& parent) {
  constexpr double pi = std::numbers::pi;
  if (child.shape == Shape::Sphere) {
    const double a = child.contactRadius.value_or(std::min(child.tissueRadius(), parent.tissueRadius()));
    return pi * a * a;
  }
  const double outer = child.tissueRadius() + (child.coat ? child.coat->thickness : 0.0);
  return child.shape == Shape::Plate ? 2.0 * child.width * outer : pi * outer * outer;
}

double outerLateralArea(const SegmentSpec& s) {
  constexpr double pi = std::numbers::pi;
  const double coat = s.coat ? s.coat->thickness : 0.0;
  switch (s.shape) {
    case Shape::Sphere: return 4.0 * pi * std::pow(s.tissueRadius() + coat, 2);
    case Shape::Plate: return 2.0 * s.width * s.length;
    case Shape::Cylinder: return 2.0 * pi * (s.tissueRadius() + coat) * s.length;
    case Shape::Cone: {
      const double r0 = s.radiusProximal + coat, r1 = s.radiusDistal + coat;
      return pi * (r0 + r1) * std::hypot(s.length, r1 - r0);
    }
  }
  return 0.0;
}

std::vector<double> segmentCopies(const Case& c) {
  std::vector<double> copies(c.segments.size(), 0.0);
  std::function<double(std::size_t, std::size_t)> of = [&](std::size_t g, std::size_t depth) -> double {
    if (copies[g] > 0.0 || depth > c.segments.size()) return copies[g];
    const SegmentSpec& s = c.segments[g];
    double parent = 1.0;
    for (std::size_t p = 0; p < c.segments.size(); ++p)
      if (!s.parent.empty() && c.segments[p].name == s.parent) parent = of(p, depth + 1);
    return copies[g] = (s.parent.empty() ? 1.0 : s.count) * parent;
  };
  for (std::size_t g = 0; g < c.segments.size(); ++g) of(g, 0);
  return copies;
}

std::vector<double> exposedLateralAreas(const Case& c) {
  std::vector<double> area(c.segments.size());
  for (std::size_t g = 0; g < c.segments.size(); ++g) area[g] = outerLateralArea(c.segments[g]);
  for (const SegmentSpec& s : c.segments)
    for (std::size_t p = 0; p < c.segments.size(); ++p)
      if (!s.parent.empty() && c.segments[p].name == s.parent) {
        const double section = footprintSection(s, c.segments[p]);
        area[p] -= s.count * section;
        if (s.shape == Shape::Sphere) area[static_cast<std::size_t>(&s - c.segments.data())] -= section;
      }
  return area;
}

std::vector<double> SegmentSpec::axialEdges() const {
  if (shape == Shape::Sphere) return {0.0, 1.0};
  return axialCellEdges(length, axialCells, axialGrading);
}

std::vector<double> axialCellEdges(double length, int axialCells, double grading) {
  const int nz = std::max(axialCells, 1);
  std::vector<double> edges(static_cast<std::size_t>(nz) + 1);
  if (!(grading > 1.0)) {
    const double dz = length / nz;
    for (int i = 0; i <= nz; ++i) edges[static_cast<std::size_t>(i)] = i * dz;
    return edges;
  }
  // z(x) = L (Q^x - 1) / (Q - 1): expm1 keeps the small proximal cells accurate for Q near 1.
  const double lnQ = std::log(grading), denominator = std::expm1(lnQ);
  for (int i = 0; i < nz; ++i)
    edges[static_cast<std::size_t>(i)] = length * std::expm1(lnQ * i / nz) / denominator;
  edges.back() = length;
  return edges;
}

std::vector<double> LayerSpec::cellEdges(double t) const {
  const int n = std::max(cells, 1);
  std::vector<double> edges(static_cast<std::size_t>(n) + 1);
  if (!(grading > 1.0)) {
    for (int i = 0; i <= n; ++i) edges[static_cast<std::size_t>(i)] = t * i / n;
  } else {
    // Distance from the outer face d(y) = t (Q^y - 1) / (Q - 1), y = 1 - i / n: the thinnest cell outermost.
    const double lnQ = std::log(grading), denominator = std::expm1(lnQ);
    for (int i = 0; i < n; ++i) edges[static_cast<std::size_t>(i)] = t - t * std::expm1(lnQ * (n - i) / n) / denominator;
    edges[0] = 0.0;
  }
  edges.back() = t;
  return edges;
}

double LayerSpec::largestCell(double t) const {
  // cellEdges(t)[1] - cellEdges(t)[0] (= 0) without the edge vector, the same operations in the same order.
  const int n = std::max(cells, 1);
  if (n == 1) return t;
  if (!(grading > 1.0)) return t * 1 / n;
  const double lnQ = std::log(grading);
  return t - t * std::expm1(lnQ * (n - 1) / n) / std::expm1(lnQ);
}

double LayerSpec::outermostCell(double t) const {
  const std::vector<double> e = cellEdges(t);
  return e[e.size() - 1] - e[e.size() - 2];
}

std::vector<double> SegmentSpec::axialLengths() const {
  if (shape == Shape::Sphere) return {1.0};
  const int nz = std::max(axialCells, 1);
  if (!(axialGrading > 1.0)) return std::vector<double>(static_cast<std::size_t>(nz), length / nz);
  const std::vector<double> edges = axialEdges();
  std::vector<double> out(static_cast<std::size_t>(nz));
  for (std::size_t i = 0; i < out.size(); ++i) out[i] = edges[i + 1] - edges[i];
  return out;
}

namespace {

// ---- nesting guard (before parsing) ------------------------------------------------------------

//! Deepest nesting a case may have: open brackets and braces plus the parts of one dotted key. The TOML
//! parser recurses once per level (a key 40 000 parts deep overflowed the stack), so the text is scanned
//! first; real cases nest 5 deep or less.
constexpr std::size_t maxNesting = 64;

//! Throws CaseError when `text` nests deeper than maxNesting (strings and comments skipped).
void checkNesting(std::string_view text, const std::string& source) {
  std::size_t depth = 0, dots = 0, line = 1, column = 0;
  auto bare = [](char ch) { return std::isalnum(static_cast<unsigned char>(ch)) || ch == '_' || ch == '-'; };
  for (std::size_t i = 0; i < text.size(); ++i) {
    const char ch = text[i];
    ++column;
    if (ch == '\n') {
      ++line;
      column = 0;
      dots = 0;
      continue;
    }
    if (ch == '#') {  // comment: to the end of the line
      while (i + 1 < text.size() && text[i + 1] != '\n') ++i;
      continue;
    }
    if (ch == '"' || ch == '\'') {  // a string or quoted key: skip it (it may be a key part)
      const bool multi = text.substr(i, 3) == std::string(3, ch);
      const std::string close = multi ? std::string(3, ch) : std::string(1, ch);
      std::size_t j = i + close.size();
      bool closed = false;
      for (; j < text.size(); ++j) {
        if (text.compare(j, close.size(), close) == 0) {
          closed = true;
          break;
        }
        if (ch == '"' && text[j] == '\\' && j + 1 < text.size() && text[j + 1] != '\n') ++j;  // an escape
        if (text[j] == '\n') {
          if (!multi) break;  // unterminated: the parser reports it
          ++line;
          column = 0;
        }
      }
      i = closed ? j + close.size() - 1 : j - 1;
      continue;
    }
    if (ch == '.') {
      ++dots;
    } else if (ch == '[' || ch == '{') {
      ++depth;
      dots = 0;
    } else if (ch == ']' || ch == '}') {
      depth = depth > 0 ? depth - 1 : 0;
      dots = 0;
    } else if (!bare(ch) && ch != ' ' && ch != '\t') {
      dots = 0;
    }
    if (depth + dots > maxNesting)
      throw CaseError(fmt::format("{}:{}:{}: nesting too deep: more than {} levels of brackets, braces and dotted key "
                                  "parts (a case nests 5 levels or less)",
                                  source, line, column, maxNesting));
  }
}

// ---- --set KEY=VALUE ---------------------------------------------------------------------------

//! Index of the element named `component` (or numbered), or the array size when there is none.
std::size_t findArrayElement(const toml::array& array, const std::string& component) {
  for (std::size_t i = 0; i < array.size(); ++i)
    if (auto* t = array[i].as_table()) {
      if (auto name = (*t)["name"].value<std::string>(); name && *name == component) return i;
      if (auto label = (*t)["label"].value<std::string>(); label && *label == component) return i;  // events
    }
  if (!component.empty() && std::all_of(component.begin(), component.end(), ::isdigit)) {
    std::size_t index = std::stoul(component);
    if (index < array.size()) return index;
  }
  return array.size();
}

//! What one `--set` changed in a parsed tree, so that the tree can be put back as parsed (source positions
//! included: toml++ does not copy them with a node, but moves keep them). The container is found again from the
//! root by its path at restore time (a later override may have replaced one of its ancestors).
struct OverrideChange {
  struct Step {
    std::string key;          // in a table
    std::size_t index = 0;    // in an array, when `inArray`
    bool inArray = false;
  };
  std::vector<Step> container;
  Step at;                           // the changed key or element in the container
  bool inserted = false;             // a new key (erased again), else the key's or element's earlier node
  std::unique_ptr<toml::node> old;  // the earlier node, moved out
};

//! The node moved into a new heap node of its own type (source and value flags kept).
std::unique_ptr<toml::node> moveOut(toml::node& n) {
  return n.visit([](auto& concrete) -> std::unique_ptr<toml::node> {
    return std::make_unique<std::remove_cvref_t<decltype(concrete)>>(std::move(concrete));
  });
}

//! Undo the changes, last first: the tree is then the parsed one again.
void restoreOverrides(toml::table& root, std::vector<OverrideChange>& changes) {
  for (auto change = changes.rbegin(); change != changes.rend(); ++change) {
    toml::node* container = &root;
    for (const OverrideChange::Step& step : change->container)
      container = step.inArray ? &(*container->as_array())[step.index] : container->as_table()->get(step.key);
    if (change->at.inArray) {
      toml::array& array = *container->as_array();
      array.replace(array.cbegin() + static_cast<std::ptrdiff_t>(change->at.index), std::move(*change->old));
    } else if (change->inserted) {
      container->as_table()->erase(change->at.key);
    } else {
      container->as_table()->insert_or_assign(change->at.key, std::move(*change->old));
    }
  }
  changes.clear();
}

void applyOverride(toml::table& root, const std::string& file, const std::string& assignment,
                   std::vector<OverrideChange>* changes = nullptr) {
  auto eq = assignment.find('=');
  if (eq == std::string::npos || eq == 0)
    throw CaseError(fmt::format("--set {}: expected KEY=VALUE, e.g. --set environment.temperature=\"5 degC\"",
                                assignment));
  std::string key = assignment.substr(0, eq);
  std::string valueText = assignment.substr(eq + 1);
  checkNesting(key, "--set " + key);
  checkNesting(valueText, "--set " + key);

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
  std::vector<OverrideChange::Step> path;
  auto record = [&](OverrideChange::Step at, toml::node* old) {
    if (!changes) return;
    changes->push_back({path, std::move(at), old == nullptr, old ? moveOut(*old) : nullptr});
  };
  for (std::size_t i = 0; i < components.size(); ++i) {
    const std::string& c = components[i];
    bool last = i + 1 == components.size();
    walked += (walked.empty() ? "" : ".") + c;
    if (auto* table = current->as_table()) {
      if (last) {
        record({c}, table->get(c));
        table->insert_or_assign(c, value);
        return;
      }
      if (!table->contains(c)) {
        record({c}, nullptr);
        table->insert(c, toml::table{});
      }
      current = table->get(c);
      path.push_back({c});
    } else if (auto* array = current->as_array()) {
      std::size_t index = findArrayElement(*array, c);
      if (index == array->size()) {
        std::vector<std::string> names;
        for (std::size_t k = 0; k < array->size(); ++k) names.push_back(CaseReader::elementLabel((*array)[k], k));
        throw CaseError(fmt::format("{}: --set {}: no element \"{}\" in {} (have: {})", file, key, c,
                                    walked.substr(0, walked.size() - c.size() - 1), fmt::join(names, ", ")));
      }
      if (last) {
        // An element of an array of tables is a table: refuse a value here, naming the key as written.
        if ((*array)[index].is_table() && !value.is_table())
          throw CaseError(fmt::format("{}: --set {}: {} is a table (an element of {}), not a value; set a key inside "
                                      "it, e.g. {}.KEY=VALUE",
                                      file, key, walked, walked.substr(0, walked.size() - c.size() - 1), walked));
        record({"", index, true}, &(*array)[index]);
        array->replace(array->cbegin() + static_cast<std::ptrdiff_t>(index), value);
        return;
      }
      current = &(*array)[index];
      path.push_back({"", index, true});
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
    // The role is inherited from the base unless given; it is never inferred from the name.
    if (t.has("role")) props.role = *roleFromName(t.choice("role"));
    if (props.isCoat()) {
      // A coat conducts only: inherited metabolism and perfusion are dropped, stated ones refused.
      for (const char* key : {"metabolic_heat", "perfusion"})
        if (t.has(key) && *t.optionalQuantity(key, props.density) != 0.0)
          t.fail(key, fmt::format("\"{}\" has role \"coat\" (conduction only); a coat has no {}", name, key));
      props.metabolicHeat = 0.0;
      props.perfusion = 0.0;
    }
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
  // Names are HDF5 group names (/segments/NAME) and key-path components (segments.NAME.length).
  if (s.name.empty()) t.fail("name", "name = \"\": a segment name must not be empty");
  if (s.name.find_first_of("/.") != std::string::npos ||
      std::any_of(s.name.begin(), s.name.end(), [](unsigned char ch) { return ch < 0x20 || ch == 0x7f; }))
    t.fail("name", fmt::format("name = \"{}\": a segment name may not contain '/', '.' or control characters (it "
                               "names an HDF5 group and a part of key paths such as segments.NAME.length)",
                               s.name));
  s.parent = t.optionalText("parent").value_or("");
  s.count = t.integer("count");
  s.attachPosition = t.number("attach_position");
  s.attachTissue = t.text("attach_tissue");
  TableView vessels = t.child("vessels");
  s.vessels.countercurrentConductance = vessels.quantity("countercurrent_conductance");
  s.vessels.shuntFlowMax = vessels.quantity("shunt_flow_max");
  s.vessels.bloodFraction = vessels.number("blood_fraction");
  s.vessels.superficialConductance = vessels.quantity("superficial_conductance");
  TableView vaso = t.child("vasomotor");
  s.vasomotor.skinPerfusion = vaso.number("skin_perfusion");
  s.vasomotor.shunt = vaso.number("shunt");
  s.vasomotor.superficialReturn = vaso.number("superficial_return");
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
    if (props.isCoat()) l.fail("tissue", fmt::format("\"{}\" is a coat material; give it as coat = {{ material = \"{}\", ... }}", layer.tissue, layer.tissue));
    layer.cells = l.integer("cells");
    layer.cellsAuto = !l.has("cells");
    layer.grading = l.number("grading");
    layer.gradingAuto = !l.has("grading");
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
  if (t.has("contact_radius")) {
    if (s.shape != Shape::Sphere) t.fail("contact_radius", "contact_radius is for a sphere attached to a parent");
    s.contactRadius = t.quantity("contact_radius");
    if (*s.contactRadius > s.tissueRadius())
      t.fail("contact_radius", fmt::format("contact_radius = {:g} m is larger than the sphere's tissue radius {:g} m",
                                           *s.contactRadius, s.tissueRadius()));
  }
  if (s.shape == Shape::Sphere) {
    rejectKey("length", "a sphere has only a radius");
    rejectKey("axial_cells", "a sphere is resolved radially only");
    rejectKey("axial_grading", "a sphere is resolved radially only");
    rejectKey("width", "width is for plates");
  } else {
    s.length = t.quantity("length");
    s.axialCells = t.integer("axial_cells");
    s.axialAuto = !t.has("axial_cells");
    s.axialGrading = t.number("axial_grading");
    s.gradingAuto = !t.has("axial_grading");
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
    if (!props.isCoat() && ct.has("material"))
      ct.fail("material", fmt::format("\"{}\" is a tissue, not a coat material (fur, feathers, or a [tissues.NAME] "
                                      "with role = \"coat\")", coat.material));
    coat.thickness = ct.quantity("thickness");
    coat.cells = ct.integer("cells");
    coat.cellsAuto = !ct.has("cells");
    s.coat = coat;
  }

  s.surface = readSurface(t, s.shape);
  // A cone's default exposure, shadow over lateral area for a beam normal to the axis: the shadow is the
  // trapezoid (R0 + R1) L, the lateral area pi (R0 + R1) sqrt(L^2 + (R1 - R0)^2), so the ratio is cos(a) / pi
  // with a the half-angle (the coat keeps its thickness, so its surface has the same slope; geometry, common
  // practice, no source).
  if (s.shape == Shape::Cone && !t.child("surface").has("solar_exposure"))
    s.surface.solarExposure = s.length / (std::numbers::pi * std::hypot(s.length, s.radiusDistal - s.radiusProximal));
  return s;
}

//! [control.vasomotor], [control.shivering], [control.panting], [control.sweating].
void readControl(const TableView& top, Case& c) {
  TableView control = top.child("control");
  auto common = [&](const char* name, ControllerSpec& spec) {
    if (!control.has(name)) return std::optional<TableView>();
    TableView t = control.child(name);
    spec.present = true;
    spec.signal = t.choice("signal") == "mean_skin" ? ControlSignal::MeanSkin : ControlSignal::Core;
    spec.setPoint = t.quantity("set_point");
    spec.gain = t.quantity("gain");
    spec.timeConstant = t.quantity("time_constant");
    spec.enabled = t.choice("enabled") == "on";
    return std::optional<TableView>(t);
  };
  if (auto t = common("vasomotor", c.control.vasomotor)) {
    c.control.vasomotor.lower = t->number("min");
    c.control.vasomotor.upper = t->number("max");
    c.control.vasomotor.shuntGain = t->quantity("shunt_gain");
    if (c.control.vasomotor.lower > c.control.vasomotor.upper)
      t->fail("min", fmt::format("min = {:g} exceeds max = {:g}", c.control.vasomotor.lower, c.control.vasomotor.upper));
  }
  if (auto t = common("shivering", c.control.shivering)) c.control.shivering.maxPower = t->optionalQuantity("max_power").value_or(0.0);
  if (auto t = common("panting", c.control.panting)) {
    c.control.panting.lower = 1.0;
    c.control.panting.upper = t->number("max");
  }
  if (auto t = common("sweating", c.control.sweating)) {
    c.control.sweating.lower = 0.0;
    c.control.sweating.upper = t->number("max");
    // Segment names are checked once the segments are read (checkSweating).
    if (t->has("segments")) {
      std::stringstream ss(t->text("segments"));
      for (std::string item; std::getline(ss, item, ',');) {
        item.erase(0, item.find_first_not_of(" \t"));
        item.erase(item.find_last_not_of(" \t") + 1);
        if (!item.empty()) c.control.sweatingSegments.push_back(item);
      }
      if (c.control.sweatingSegments.empty())
        t->fail("segments", "names no segment (expected e.g. \"trunk, neck\"; leave the key out for every segment "
                            "without a coat)");
    }
  }
  // [control.local.NAME]: local vasomotor controllers (segment names are checked once the segments are read).
  if (const toml::node* local = control.node("local"))
    for (auto&& [key, child] : *local->as_table()) {
      LocalControllerSpec spec;
      spec.name = std::string(key.str());
      TableView t = control.namedChild("local", spec.name);
      if (spec.name == "vasomotor" || spec.name == "shivering" || spec.name == "panting" || spec.name == "sweating")
        control.child("local").fail(spec.name, fmt::format("a local controller may not be named \"{}\" (the name of a "
                                                    "body-wide controller, used by [[events]] control)", spec.name));
      if (!t.has("segments")) t.missing("segments");
      std::stringstream ss(t.text("segments"));
      for (std::string item; std::getline(ss, item, ',');) {
        item.erase(0, item.find_first_not_of(" \t"));
        item.erase(item.find_last_not_of(" \t") + 1);
        if (!item.empty()) spec.segments.push_back(item);
      }
      if (spec.segments.empty()) t.fail("segments", "names no segment (expected e.g. \"leg, foot\")");
      std::string signal = t.choice("signal");
      spec.signal = signal == "core" ? ControlSignal::Core
                    : signal == "mean_skin" ? ControlSignal::MeanSkin : ControlSignal::LocalSkin;
      spec.setPoint = t.quantity("set_point");
      spec.gain = t.quantity("gain");
      spec.lower = t.number("min");
      spec.upper = t.number("max");
      if (spec.lower > spec.upper) t.fail("min", fmt::format("min = {:g} exceeds max = {:g}", spec.lower, spec.upper));
      spec.shuntGain = t.quantity("shunt_gain");
      spec.timeConstant = t.quantity("time_constant");
      spec.enabled = t.choice("enabled") == "on";
      if (t.has("civd")) {
        TableView v = t.child("civd");
        CivdSpec civd;
        civd.threshold = v.quantity("threshold");
        if (auto text = v.has("width") ? v.node("width")->value<std::string>() : std::nullopt;
            text && text->find("deg") != std::string::npos)
          v.fail("width", "give the width in K (a temperature difference), e.g. \"2 K\"");
        civd.width = v.quantity("width");
        civd.opening = v.number("opening");
        civd.timeConstant = v.quantity("time_constant");
        civd.stages = v.integer("stages");
        spec.civd = civd;
      }
      c.control.local.push_back(std::move(spec));
    }
}

//! Local controllers: every named segment exists, has a skin layer to act on and (with CIVD) shunts to open, and
//! is named by one local controller only.
void checkLocalControllers(const TableView& top, const Case& c) {
  std::map<std::string, std::string> owner;  // segment -> local controller
  for (const LocalControllerSpec& spec : c.control.local) {
    TableView t = top.child("control").namedChild("local", spec.name);
    for (const std::string& name : spec.segments) {
      auto it = std::find_if(c.segments.begin(), c.segments.end(), [&](const SegmentSpec& s) { return s.name == name; });
      if (it == c.segments.end()) {
        std::vector<std::string> names;
        for (const SegmentSpec& s : c.segments) names.push_back(s.name);
        t.fail("segments", fmt::format("no segment named \"{}\" (segments: {})", name, fmt::join(names, ", ")));
      }
      bool skin = std::any_of(it->layers.begin(), it->layers.end(), [&](const LayerSpec& l) {
        return c.tissues.at(l.tissue).role == TissueRole::Skin;
      });
      if (!skin)
        t.fail("segments", fmt::format("segment \"{}\" has no layer with role skin: a vasomotor controller has no "
                                       "skin perfusion to act on there", name));
      if (auto [previous, fresh] = owner.emplace(name, spec.name); !fresh)
        t.fail("segments", fmt::format("segment \"{}\" is already controlled by [control.local.{}]; a segment may "
                                       "follow one local controller only", name, previous->second));
      if (spec.civd && !(it->vessels.shuntFlowMax > 0.0))
        t.fail("civd", fmt::format("segment \"{}\" has no shunts to open (set its vessels.shunt_flow_max > 0)", name));
    }
  }
}

//! [control.sweating]: every named segment exists and its outer surface is skin (no coat: a coat's wetted fraction is
//! a wet coat, not sweating); without `segments`, some segment has no coat.
void checkSweating(const TableView& top, const Case& c) {
  if (!c.control.sweating.present) return;
  TableView t = top.child("control").child("sweating");
  std::vector<std::string> names;
  for (const SegmentSpec& s : c.segments) names.push_back(s.name);
  for (const std::string& name : c.control.sweatingSegments) {
    auto it = std::find_if(c.segments.begin(), c.segments.end(), [&](const SegmentSpec& s) { return s.name == name; });
    if (it == c.segments.end())
      t.fail("segments", fmt::format("no segment named \"{}\" (segments: {})", name, fmt::join(names, ", ")));
    if (it->coat)
      t.fail("segments", fmt::format("segment \"{}\" has a coat: its outer surface is the coat's, not skin, so it "
                                     "cannot sweat (a wet coat is its surface.wetted_fraction)", name));
  }
  if (c.control.sweatingSegments.empty() &&
      std::all_of(c.segments.begin(), c.segments.end(), [](const SegmentSpec& s) { return s.coat.has_value(); }))
    t.fail("segments", "every segment has a coat: no segment has skin as its outer surface to sweat from");
}

toml::table controlToml(const ControlSpec& control) {
  toml::table out;
  auto common = [&](const ControllerSpec& spec) {
    toml::table t{{"signal", spec.signal == ControlSignal::Core ? "core" : "mean_skin"},
                  {"set_point", spec.setPoint},
                  {"gain", spec.gain},
                  {"time_constant", spec.timeConstant},
                  {"enabled", spec.enabled ? "on" : "off"}};
    return t;
  };
  if (control.vasomotor.present) {
    toml::table t = common(control.vasomotor);
    t.insert("min", control.vasomotor.lower);
    t.insert("max", control.vasomotor.upper);
    t.insert("shunt_gain", control.vasomotor.shuntGain);
    out.insert("vasomotor", t);
  }
  if (control.shivering.present) {
    toml::table t = common(control.shivering);
    if (control.shivering.maxPower > 0.0) t.insert("max_power", control.shivering.maxPower);
    out.insert("shivering", t);
  }
  if (control.panting.present) {
    toml::table t = common(control.panting);
    t.insert("max", control.panting.upper);
    out.insert("panting", t);
  }
  if (control.sweating.present) {
    toml::table t = common(control.sweating);
    t.insert("max", control.sweating.upper);
    if (!control.sweatingSegments.empty())
      t.insert("segments", fmt::format("{}", fmt::join(control.sweatingSegments, ", ")));
    out.insert("sweating", t);
  }
  toml::table local;
  for (const LocalControllerSpec& spec : control.local) {
    toml::table t{{"segments", fmt::format("{}", fmt::join(spec.segments, ", "))},
                  {"signal", spec.signal == ControlSignal::Core       ? "core"
                             : spec.signal == ControlSignal::MeanSkin ? "mean_skin"
                                                                      : "local_skin"},
                  {"set_point", spec.setPoint},
                  {"gain", spec.gain},
                  {"min", spec.lower},
                  {"max", spec.upper},
                  {"shunt_gain", spec.shuntGain},
                  {"time_constant", spec.timeConstant},
                  {"enabled", spec.enabled ? "on" : "off"}};
    if (spec.civd)
      t.insert("civd", toml::table{{"threshold", spec.civd->threshold},
                                   {"width", spec.civd->width},
                                   {"opening", spec.civd->opening},
                                   {"time_constant", spec.civd->timeConstant},
                                   {"stages", spec.civd->stages}});
    local.insert(spec.name, t);
  }
  if (!local.empty()) out.insert("local", local);
  return out;
}

//! Deepest segment tree (root at depth 0): the circulation's flow expressions grow with the number of
//! segments above each one, so memory grows with depth squared (a chain 1 000 deep took 0.3 GB).
constexpr std::size_t maxTreeDepth = 64;

//! One root, known parents, no cycles, depth within maxTreeDepth; an attach_tissue the parent has; shunts only
//! where there is skin.
void validateTree(const CaseReader& reader, const toml::array& segArray, const Case& c) {
  std::map<std::string, std::size_t> index;
  for (std::size_t i = 0; i < c.segments.size(); ++i) index[c.segments[i].name] = i;
  std::vector<std::string> roots;
  std::vector<std::size_t> parentOf(c.segments.size(), c.segments.size());
  for (std::size_t i = 0; i < c.segments.size(); ++i) {
    const SegmentSpec& s = c.segments[i];
    TableView t(reader, segArray[i].as_table(), "segments[]", "segments." + s.name);
    if (s.parent.empty()) {
      roots.push_back(s.name);
      if (s.count != 1) t.fail("count", "the root segment cannot be repeated (count must be 1)");
      if (t.has("contact_radius")) t.fail("contact_radius", "contact_radius is for a sphere attached to a parent; "
                                                            "the root has none");
      continue;
    }
    auto it = index.find(s.parent);
    if (it == index.end()) {
      std::vector<std::string> names;
      for (auto& [n, _] : index) names.push_back(n);
      t.fail("parent", fmt::format("unknown parent \"{}\" (segments: {})", s.parent, fmt::join(names, ", ")));
    }
    parentOf[i] = it->second;
    // The default attach_tissue (muscle) falls back to the parent's innermost layer; a named one must exist.
    if (t.has("attach_tissue")) {
      const SegmentSpec& p = c.segments[it->second];
      std::vector<std::string> layers;
      for (const LayerSpec& l : p.layers) layers.push_back(l.tissue);
      if (std::find(layers.begin(), layers.end(), s.attachTissue) == layers.end())
        t.fail("attach_tissue", fmt::format("attach_tissue = \"{}\": the parent {} has no such layer (its layers: {})",
                                            s.attachTissue, p.name, fmt::join(layers, ", ")));
    }
  }
  // Depth of every segment, each walked once (linear): 0 for a root; a segment met again on its own walk is
  // a cycle.
  constexpr std::size_t unknown = static_cast<std::size_t>(-1), onPath = static_cast<std::size_t>(-2);
  std::vector<std::size_t> depth(c.segments.size(), unknown);
  for (std::size_t i = 0; i < c.segments.size(); ++i) {
    std::vector<std::size_t> path;
    std::size_t j = i;
    while (depth[j] == unknown && parentOf[j] < c.segments.size()) {
      depth[j] = onPath;
      path.push_back(j);
      j = parentOf[j];
    }
    if (depth[j] == onPath) {  // a cycle through j
      std::vector<std::string> chain;
      auto from = std::find(path.begin(), path.end(), j);
      for (auto k = from; k != path.end(); ++k) chain.push_back(c.segments[*k].name);
      chain.push_back(c.segments[j].name);
      TableView t(reader, segArray[j].as_table(), "segments[]", "segments." + c.segments[j].name);
      t.fail("parent", fmt::format("the segment tree has a cycle: {}", fmt::join(chain, " -> ")));
    }
    if (depth[j] == unknown) depth[j] = 0;  // a root
    for (auto k = path.rbegin(); k != path.rend(); ++k) {
      depth[*k] = depth[parentOf[*k]] + 1;
      if (depth[*k] > maxTreeDepth) {
        TableView t(reader, segArray[*k].as_table(), "segments[]", "segments." + c.segments[*k].name);
        t.fail("parent", fmt::format("the segment tree is more than {} segments deep below its root (the limit; "
                                     "memory grows with the square of the depth)",
                                     maxTreeDepth));
      }
    }
  }
  if (roots.size() != 1)
    reader.fail(&segArray, "segments",
                roots.empty() ? std::string("no root segment: exactly one segment must have no parent")
                              : fmt::format("{} root segments ({}): exactly one segment may have no parent; give the "
                                            "others a parent",
                                            roots.size(), fmt::join(roots, ", ")));
  for (std::size_t i = 0; i < c.segments.size(); ++i) {
    const SegmentSpec& s = c.segments[i];
    TableView t(reader, segArray[i].as_table(), "segments[]", "segments." + s.name);
    if (s.vessels.shuntFlowMax > 0.0 && c.tissues.at(s.layers.back().tissue).role != TissueRole::Skin)
      t.child("vessels").fail("shunt_flow_max",
                              fmt::format("shunts need skin: the outermost layer of {} is \"{}\", not a skin tissue "
                                          "(its role is \"{}\"; a tissue is skin when its base is skin or it "
                                          "sets role = \"skin\")",
                                          s.name, s.layers.back().tissue,
                                          roleName(c.tissues.at(s.layers.back().tissue).role)));
  }
}

//! Tucking (segments[].surface.tucked_into / tucked_fraction, events[].surface.NAME.tucked_fraction): the host is
//! another segment of the body, no chain of hosts comes back to the guest (a host tucked into its guest), and in
//! every interval of the timeline a segment's contact and tucked shares sum to at most 1 (a coated segment: below
//! 1, part of its coat stays exposed: its rings carry the rest), and a host's contact and tucked shares plus its
//! guests' tucked area (as a share of its lateral area, exposedLateralAreas; guests placed "in_coat" take none, and
//! need a coated host) likewise.
void checkTucking(const CaseReader& reader, const toml::array& segArray, const Case& c) {
  std::map<std::string, std::size_t> index;
  for (std::size_t i = 0; i < c.segments.size(); ++i) index[c.segments[i].name] = i;
  auto surfaceView = [&](std::size_t i) {
    return TableView(reader, segArray[i].as_table(), "segments[]", "segments." + c.segments[i].name).child("surface");
  };
  std::vector<std::size_t> host(c.segments.size(), c.segments.size());
  for (std::size_t i = 0; i < c.segments.size(); ++i) {
    const SegmentSpec& s = c.segments[i];
    if (s.surface.tuckedInto.empty()) continue;
    const TableView surface = surfaceView(i);
    const auto it = index.find(s.surface.tuckedInto);
    if (it == index.end()) {
      std::vector<std::string> names;
      for (const auto& [n, _] : index)
        if (n != s.name) names.push_back(n);
      surface.fail("tucked_into", fmt::format("no segment named \"{}\" to tuck {} into (segments: {})",
                                              s.surface.tuckedInto, s.name, fmt::join(names, ", ")));
    }
    if (it->second == i)
      surface.fail("tucked_into", fmt::format("{} cannot be tucked into itself: name another segment that covers it",
                                              s.name));
    host[i] = it->second;
    if (s.surface.tuckedInCoat && !c.segments[it->second].coat)
      surface.fail("tucked_placement", fmt::format("\"in_coat\" puts {} inside {}'s coat, but {} has no coat: use "
                                                   "\"on_coat\" (the default)", s.name, s.surface.tuckedInto,
                                                   s.surface.tuckedInto));
  }
  // A chain of hosts that comes back to its start: each would lie inside the other.
  for (std::size_t i = 0; i < c.segments.size(); ++i) {
    std::vector<std::string> chain{c.segments[i].name};
    for (std::size_t j = host[i], steps = 0; j < c.segments.size() && steps <= c.segments.size(); j = host[j], ++steps) {
      chain.push_back(c.segments[j].name);
      if (j == i)
        surfaceView(i).fail("tucked_into", fmt::format("the hosts come back to {}: {} (a segment cannot be tucked into "
                                                       "a segment that is tucked into it)",
                                                       c.segments[i].name, fmt::join(chain, " -> ")));
    }
  }
  // Contact plus tucking per interval: the static values, then each time's events (steps; "all" first within an
  // event, as the environment applies them).
  std::vector<double> contact(c.segments.size()), tucked(c.segments.size());
  const std::vector<double> area = exposedLateralAreas(c), copies = segmentCopies(c);
  for (std::size_t i = 0; i < c.segments.size(); ++i) {
    contact[i] = c.segments[i].surface.contactFraction;
    tucked[i] = c.segments[i].surface.tuckedFraction;
  }
  std::vector<std::size_t> order(c.events.size());
  for (std::size_t k = 0; k < order.size(); ++k) order[k] = k;
  std::stable_sort(order.begin(), order.end(), [&](std::size_t a, std::size_t b) { return c.events[a].at < c.events[b].at; });
  auto check = [&](const EventSpec* e) {
    for (std::size_t i = 0; i < c.segments.size(); ++i) {
      const SegmentSpec& s = c.segments[i];
      const double sum = contact[i] + tucked[i];
      const bool coated = s.coat.has_value();
      if (sum < 1.0 || (!coated && sum == 1.0)) continue;
      const std::string what = fmt::format(
          "contact_fraction {:g} and tucked_fraction {:g} of {} sum to {:g}{}: at most 1{}", contact[i], tucked[i],
          s.name, sum, e ? fmt::format(" from t = {:g} s", e->at) : std::string(), 
          coated ? " and, on a coated segment, below 1 (part of the coat stays exposed)" : "");
      if (!e) surfaceView(i).fail(s.surface.tuckedFraction > 0.0 ? "tucked_fraction" : "contact_fraction", what);
      throw CaseError(fmt::format("{}: {}.surface.{}: {}", e->where, e->source, s.name, what));
    }
    // The guests' tucked area on each host (Body takes it off the host's exposed lateral area): per copy of the host
    // f_t A_g n_g / n_h, A the lateral areas less the children's footprints, with the host's own contact and tucking
    // at most 1 of its lateral area (a coated host: below 1, its coat's rings carry the rest).
    for (std::size_t h = 0; h < c.segments.size(); ++h) {
      double covered = 0.0, largest = 0.0;
      std::size_t named = c.segments.size();
      std::vector<std::string> guests;
      for (std::size_t g = 0; g < c.segments.size(); ++g) {
        if (host[g] != h || !(tucked[g] > 0.0) || c.segments[g].surface.tuckedInCoat) continue;
        const double a = tucked[g] * area[g] * copies[g] / copies[h];
        covered += a;
        guests.push_back(fmt::format("{} ({}{:g} x {:.4g} cm2)", c.segments[g].name,
                                     copies[g] == copies[h] ? std::string()
                                                            : fmt::format("{:g} per {} x ", copies[g] / copies[h], c.segments[h].name),
                                     tucked[g], 1e4 * area[g]));
        if (a > largest) {
          largest = a;
          named = g;
        }
      }
      if (named == c.segments.size()) continue;
      const SegmentSpec& hs = c.segments[h];
      const double share = area[h] > 0.0 ? covered / area[h] : std::numeric_limits<double>::infinity();
      const double sum = contact[h] + tucked[h] + share;
      const bool coated = hs.coat.has_value();
      if (sum < 1.0 || (!coated && sum <= 1.0 + 1e-12)) continue;
      const std::string what = fmt::format(
          "the tucked area of {} is {:.4g} cm2 per copy of {}, {:.4g} of its lateral area ({:.4g} cm2, children's "
          "footprints off); with {}'s contact_fraction {:g} and tucked_fraction {:g} that covers {:.4g} of it{}: at "
          "most 1{}",
          fmt::join(guests, " and "), 1e4 * covered, hs.name, share, 1e4 * area[h], hs.name, contact[h], tucked[h], sum,
          e ? fmt::format(" from t = {:g} s", e->at) : std::string(),
          coated ? " and, on a coated host, below 1 (part of its coat stays exposed)" : "");
      if (!e) surfaceView(named).fail("tucked_fraction", what);
      throw CaseError(fmt::format("{}: {}.surface.{}: {}", e->where, e->source, c.segments[named].name, what));
    }
  };
  check(nullptr);
  for (std::size_t k = 0; k < order.size();) {
    std::size_t end = k;
    const EventSpec* last = nullptr;
    for (; end < order.size() && c.events[order[end]].at == c.events[order[k]].at; ++end) {
      const EventSpec& e = c.events[order[end]];
      for (const ContactTarget& t : e.contact)
        for (std::size_t i = 0; i < c.segments.size(); ++i)
          if (targetsSegment(t.segment, c.segments[i].name)) contact[i] = t.contactFraction;
      for (const TuckTarget& t : e.tuck) tucked[index.at(t.segment)] = t.tuckedFraction;
      if (!e.contact.empty() || !e.tuck.empty()) last = &e;
    }
    if (last) check(last);
    k = end;
  }
}

//! A child's footprint on its parent that the junction cannot represent (a warning each, at the child's table).
//! The model joins a child along its parent's side over the child's footprint (models/body.cpp footprintShares):
//! a length l along the parent's axis (a plate's width, a cylinder's or cone's outer diameter, a sphere's contact
//! patch) across which the child's heat enters, and a cross-section cut out of the parent's side there.
//!  - Along the axis: l > 2 D and l > L / 4, with D the parent's outer diameter (coat included; a plate parent:
//!    its width) at attach_position and L its length. Heat that enters a cylinder through a patch spreads through
//!    its cross-section within about a diameter, so a footprint longer than two of the parent's diameters places the
//!    child's heat along the parent's axial profile, not at a joint; over a quarter of the parent's length that
//!    profile changes across it. A wide foot at the end of a thin leg (3 cm on a 0.6-0.7 cm leg of 6 cm): its heat
//!    enters along half the leg. The examples stay below both (l / D at most 1.4, a head on a neck).
//!  - Across the axis: the child's cross-section (the area cut from the parent's side) exceeds the parent's side
//!    under the footprint, perimeter x l: a plate thicker than the parent's circumference, a disc of radius above
//!    2 D. The footprint cannot lie on the parent however it wraps round it (the model keeps 10 % of the side
//!    exposed and goes on).
//! Sphere parents have one axial cell (no axial footprint) and are not checked.
void checkFootprints(const CaseReader& reader, const toml::array& segArray, Case& c) {
  constexpr double pi = std::numbers::pi;
  for (std::size_t i = 0; i < c.segments.size(); ++i) {
    const SegmentSpec& s = c.segments[i];
    if (s.parent.empty()) continue;
    const auto parent = std::find_if(c.segments.begin(), c.segments.end(),
                                     [&](const SegmentSpec& p) { return p.name == s.parent; });
    if (parent == c.segments.end() || parent->shape == Shape::Sphere) continue;
    const SegmentSpec& p = *parent;
    const double coat = s.coat ? s.coat->thickness : 0.0, parentCoat = p.coat ? p.coat->thickness : 0.0;
    // The child's footprint: its length along the parent's axis and its cross-section (as models/body.cpp).
    const double outer = s.tissueRadius() + coat;
    const double section = footprintSection(s, p);
    const double length = s.shape == Shape::Sphere ? 2.0 * s.contactRadius.value_or(std::min(s.tissueRadius(), p.tissueRadius()))
                          : s.shape == Shape::Plate ? s.width
                                                    : 2.0 * outer;
    // The parent at the attachment: its outer diameter (a plate: its width) and perimeter.
    double diameter = 0.0, perimeter = 0.0;
    if (p.shape == Shape::Plate) {
      diameter = p.width;
      perimeter = 2.0 * (p.width + 2.0 * (p.tissueRadius() + parentCoat));
    } else {
      const double r = p.shape == Shape::Cone
                           ? p.radiusProximal + (p.radiusDistal - p.radiusProximal) * s.attachPosition
                           : p.tissueRadius();
      diameter = 2.0 * (r + parentCoat);
      perimeter = pi * diameter;
    }
    const std::string where = reader.location(segArray[i].as_table());
    const char* measure = s.shape == Shape::Plate    ? "its width"
                          : s.shape == Shape::Sphere ? "its contact patch's diameter"
                                                     : "its outer diameter";
    if (length > 2.0 * diameter && length > 0.25 * p.length)
      c.warnings.push_back(fmt::format(
          "{}: segment {}: its footprint on {} runs {:.3g} cm along {}'s axis ({}), {:.2g} times {}'s diameter there "
          "({:.3g} cm) and {:.0f} % of its length: the model joins a child along its parent's side over that length, "
          "so {}'s heat enters along that part of {} instead of at a joint of {}'s size (a wide child at the end of "
          "a thin parent, such as a broad foot on a thin leg, joins through the parent's end). Check how the results "
          "change with a narrower footprint (a footprint over 2 diameters and a quarter of the length warns)",
          where, s.name, p.name, 100.0 * length, p.name, measure, length / diameter, p.name, 100.0 * diameter,
          100.0 * std::min(1.0, length / p.length), s.name, p.name, p.name));
    if (section > perimeter * length)
      c.warnings.push_back(fmt::format(
          "{}: segment {}: its cross-section ({:.3g} cm2) is larger than {}'s side under its footprint ({:.3g} cm2: "
          "{}'s perimeter {:.3g} cm times the footprint's {:.3g} cm along its axis): the child is wider than {}'s "
          "circumference allows, so its junction cannot lie on {} (the model keeps 10 % of the side exposed); check "
          "the sizes of both",
          where, s.name, 1e4 * section, p.name, 1e4 * perimeter * length, p.name, 100.0 * perimeter, 100.0 * length,
          p.name, p.name));
  }
}

//! Provenance: SHA-256 of the case text and of every file the case (overrides applied) reads.
void recordInputs(Case& c, const toml::table& root, const std::string& text) {
  // Sweeps, fits and sensitivity runs load the same text once per run: its digest is kept per thread.
  thread_local std::string hashedText, hash;
  if (hash.empty() || text != hashedText) {
    hash = sha256Hex(text);
    hashedText = text;
  }
  c.inputs.push_back({"case", c.sourceFile, hash});
  if (auto weather = root.at_path("environment.weather").value<std::string>()) {
    // Resolved as readWeather does (relative to the case file's folder); it has just been read successfully.
    std::filesystem::path file(*weather);
    if (file.is_relative()) file = std::filesystem::path(c.sourceFile).parent_path() / file;
    std::ifstream in(file, std::ios::binary);
    std::stringstream bytes;
    bytes << in.rdbuf();
    c.inputs.push_back({"environment.weather", file.string(), sha256Hex(bytes.str())});
  }
}

//! Precedence of a `--set` (or sweep `--vary`) value of an [environment] key over the timeline: it holds until
//! the first event or weather-file row that changes the same key (a warning says until when); when that change is
//! at t = 0 the value would never take effect, which is refused (exit 2) rather than silently ignored.
void checkOverriddenByTimeline(const TableView& top, Case& c, const std::vector<std::string>& overrides) {
  const bool weather = top.child("environment").has("weather");
  for (const std::string& o : overrides) {
    const std::string key = o.substr(0, o.find('='));
    // A segment's static contact, wetted or tucked fraction (segments.NAME.surface.KEY) holds until an event
    // changes it; a wetting event that ramps from t = 0 starts from it (as [environment] values below).
    for (const SegmentSpec& s : c.segments) {
      const std::string prefix = "segments." + s.name + ".surface.";
      if (key.rfind(prefix, 0) != 0) continue;
      const std::string what = key.substr(prefix.size());
      if (what != "contact_fraction" && what != "wetted_fraction" && what != "tucked_fraction") continue;
      auto names = [&](const auto& targets) {
        return std::any_of(targets.begin(), targets.end(), [&](const auto& t) { return targetsSegment(t.segment, s.name); });
      };
      for (const EventSpec& e : c.events) {
        const bool changes = what == "contact_fraction" ? names(e.contact)
                             : what == "wetted_fraction" ? names(e.wet)
                                                         : names(e.tuck);
        if (!changes) continue;
        const bool rampStart = what == "wetted_fraction" && e.ramp > 0.0;
        if (e.at <= 0.0 && !rampStart)
          throw TimelineOverrideError(fmt::format(
              "{}: {}: the value given on the command line ({}) would never take effect: an [[events]] entry sets the "
              "{} of {} from t = 0 s. Change the value in the timeline instead (its "
              "events.N.surface.{}.{}), or remove it there",
              c.sourceFile, key, o.substr(o.find('=') + 1), what, s.name, s.name, what));
        if (e.at <= 0.0)  // rampStart: a wetting ramp from t = 0 runs from this value
          c.warnings.push_back(fmt::format("{} = {} (command line) is the start of the ramp of {} from t = 0 s to t = "
                                           "{:g} s (the timeline takes over from there)",
                                           key, o.substr(o.find('=') + 1),
                                           e.source.empty() ? std::string("an [[events]] entry") : e.source, e.ramp));
        else
          c.warnings.push_back(fmt::format("{} = {} (command line) holds until t = {:g} s, when an [[events]] entry "
                                           "changes it (the timeline takes over from its first change)",
                                           key, o.substr(o.find('=') + 1), e.at));
        c.timelineWarnings.push_back(c.warnings.back());  // the value holds at t = 0: not for a steady solve
        break;
      }
    }
    if (key.rfind("environment.", 0) != 0) continue;
    const std::string name = key.substr(std::string("environment.").size());
    for (std::size_t v = 0; v < kEnvironmentVariables; ++v) {
      const auto variable = static_cast<EnvironmentVariable>(v);
      if (environmentKey(variable) != name) continue;
      for (const EventSpec& e : c.events) {
        bool changes = false;
        for (const EnvironmentValue& value : e.environment) changes = changes || value.variable == variable;
        if (!changes) continue;
        const std::string by = weather ? "an [[events]] entry or a row of the weather file (environment.weather)"
                                       : "an [[events]] entry";
        // A ramp that starts at t = 0 runs from the value in force before it, [environment]'s: the override is the
        // ramp's start (the trial roost's air ramped from 30 to 41 degC over 3 h; a sweep of its starting air
        // temperature was refused).
        if (e.at <= 0.0 && e.ramp > 0.0 && !e.weatherRow) {
          c.warnings.push_back(fmt::format(
              "{} = {} (an override: --set, a sweep or fit parameter, or set= in Python) is the start of the ramp "
              "of {} from t = 0 s to t = {:g} s (the timeline takes over from there)",
              key, o.substr(o.find('=') + 1), e.source.empty() ? std::string("an [[events]] entry") : e.source,
              e.ramp));
          c.timelineWarnings.push_back(c.warnings.back());  // the value holds at t = 0: not for a steady solve
          break;
        }
        if (e.at <= 0.0)
          throw TimelineOverrideError(fmt::format(
              "{}: {}: the value given as an override ({}: --set, a sweep or fit parameter, or set= in Python) would never take effect: {} sets {} from t = 0 s. "
              "Change the value in the timeline instead (its events.N.environment.{} or the weather file's column), "
              "or remove it there",
              c.sourceFile, key, o.substr(o.find('=') + 1), by, name, name));
        c.warnings.push_back(fmt::format(
            "{} = {} (an override: --set, a sweep or fit parameter, or set= in Python) holds until t = {:g} s, when {} changes it (the timeline takes over from "
            "its first change)",
            key, o.substr(o.find('=') + 1), e.at, by));
        c.timelineWarnings.push_back(c.warnings.back());  // the value holds at t = 0: not for a steady solve
        break;
      }
    }
  }
}

//! The second line of a resolved case since keys with no effect are left out of it (resolvedCaseToml). A resolved
//! case without it (written by an earlier version) gives every key, so which ones its case gave is not known: it
//! does not warn of keys with no effect.
constexpr std::string_view kResolvedHeader = "# Fully resolved case:";
constexpr std::string_view kLeftOutLine =
    "# Keys with no effect in this case are left out unless the case gave them (thermorph warns of those).";

Case buildCase(toml::table& root, const std::string& file, const std::vector<std::string>& overrides,
               bool warnInert, std::vector<OverrideChange>* changes = nullptr) {
  for (const std::string& o : overrides) applyOverride(root, file, o, changes);
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
  c.run.gridRefinement = static_cast<int>(run.integer("grid_refinement"));
  c.run.gridTolerance = run.number("grid_tolerance");
  c.run.axialGrading = run.choice("axial_grading") == "graded" ? AxialGradingRule::Graded : AxialGradingRule::Uniform;
  if (c.run.outputInterval > c.run.duration)
    run.fail("output_interval", fmt::format("output_interval = {:g} s exceeds duration = {:g} s",
                                            c.run.outputInterval, c.run.duration));
  // Work and output bounds, checked before any computing (a run that cannot finish is bad input).
  if (c.run.duration / c.run.outputInterval > static_cast<double>(maxOutputs))
    run.fail("output_interval", fmt::format("output_interval = {:g} s over duration = {:g} s makes {:.3g} outputs; the "
                                            "limit is {} (each output stores every cell)",
                                            c.run.outputInterval, c.run.duration,
                                            std::ceil(c.run.duration / c.run.outputInterval), maxOutputs));
  if (c.run.maxStep > 0.0) {
    const double steps = c.run.duration / c.run.maxStep;
    const double perOutput = std::min(c.run.outputInterval, c.run.duration) / c.run.maxStep;
    if (steps > static_cast<double>(maxForcedSteps) || perOutput > static_cast<double>(maxStepsPerOutput))
      run.fail("max_step", fmt::format("max_step = {:g} s forces at least {:.3g} steps over duration = {:g} s ({:.3g} per "
                                       "output interval); the limits are {} steps per run and {} per output interval "
                                       "(the integrator's step limit)",
                                       c.run.maxStep, std::ceil(steps), c.run.duration, std::ceil(perOutput),
                                       maxForcedSteps, maxStepsPerOutput));
  }

  TableView circ = top.child("circulation");
  c.circulation.bloodDensity = circ.quantity("blood_density");
  c.circulation.bloodSpecificHeat = circ.quantity("blood_specific_heat");
  c.circulation.fixedArterialTemperature = circ.optionalQuantity("fixed_arterial_temperature");
  if (auto list = circ.optionalText("bradycardia_tissues")) {
    std::stringstream ss(*list);
    for (std::string item; std::getline(ss, item, ',');) {
      item.erase(0, item.find_first_not_of(" \t"));
      item.erase(item.find_last_not_of(" \t") + 1);
      if (!item.empty()) c.circulation.bradycardiaTissues.push_back(item);
    }
  }

  TableView bodyTable = top.child("body");
  c.body.mass = bodyTable.optionalQuantity("mass");
  c.body.bloodVolume = bodyTable.optionalQuantity("blood_volume");
  c.body.cardiacOutput = bodyTable.optionalQuantity("cardiac_output");
  std::string basal = bodyTable.text("basal_metabolic_rate");
  if (basal == "tissues") c.body.basal = BasalRate::Tissues;
  else if (basal == "kleiber") c.body.basal = BasalRate::Kleiber;
  else {
    c.body.basal = BasalRate::Power;
    try {
      if (splitValueUnit(basal).unit.empty()) throw UnitError("a power needs a unit");
      c.body.basalPower = parseQuantity(basal, "W");
    } catch (const UnitError& e) {
      bodyTable.fail("basal_metabolic_rate", fmt::format("\"{}\": expected \"tissues\", \"kleiber\" or a power such as "
                                                         "\"45 W\" ({})", basal, e.what()));
    }
    if (!(c.body.basalPower > 0.0)) bodyTable.fail("basal_metabolic_rate", "a basal power must be > 0 W");
  }
  c.body.activity = bodyTable.number("activity");
  c.body.q10Reference = bodyTable.quantity("q10_reference");
  c.body.coreSegment = bodyTable.optionalText("core_segment").value_or("");
  c.body.respiratorySegment = bodyTable.optionalText("respiratory_segment").value_or("");
  c.body.exhaledTemperature = bodyTable.quantity("exhaled_temperature");
  readControl(top, c);
  TableView sweep = top.child("sweep");
  if (auto metrics = sweep.optionalText("metrics")) {
    std::stringstream ss(*metrics);
    for (std::string item; std::getline(ss, item, ',');) {
      item.erase(0, item.find_first_not_of(" \t"));
      item.erase(item.find_last_not_of(" \t") + 1);
      if (!item.empty()) c.sweep.metrics.push_back(item);
    }
  }
  c.sweep.window = sweep.optionalText("window").value_or("");
  c.sweep.steady = sweep.choice("mode") == "steady";

  readTissues(reader, top, c);
  for (const std::string& t : c.circulation.bradycardiaTissues)
    if (!c.tissues.count(t)) circ.fail("bradycardia_tissues", fmt::format("unknown tissue \"{}\"", t));

  const toml::node* segs = root.get("segments");
  if (!segs || segs->as_array()->empty())
    reader.fail(&root, "segments", "the case defines no [[segments]]; a body needs at least one");
  std::set<std::string> names;
  long cells = 0;
  const toml::array& segArray = *segs->as_array();
  if (segArray.size() > maxSegments)
    reader.fail(segs, "segments", fmt::format("the case has {} segments; the limit is {}", segArray.size(), maxSegments));
  for (std::size_t i = 0; i < segArray.size(); ++i) {
    SegmentSpec s = readSegment(reader, c, *segArray[i].as_table(), i);
    if (!names.insert(s.name).second)
      reader.fail(&segArray[i], "segments." + s.name, fmt::format("duplicate segment name \"{}\"", s.name));
    long radial = 0;
    for (auto& l : s.layers) radial += l.cells;
    if (s.coat) radial += s.coat->cells;
    cells += radial * s.axialCells;
    c.segments.push_back(std::move(s));
  }
  if (cells > maxCells)
    reader.fail(segs, "segments",
                fmt::format("the body has {} cells; the limit is {} (reduce axial_cells or layer cells)", cells,
                            maxCells));
  validateTree(reader, segArray, c);
  checkFootprints(reader, segArray, c);
  for (const char* key : {"core_segment", "respiratory_segment"}) {
    std::string name = key == std::string("core_segment") ? c.body.coreSegment : c.body.respiratorySegment;
    if (!name.empty() && !names.count(name))
      bodyTable.fail(key, fmt::format("no segment named \"{}\" (segments: {})", name, fmt::join(names, ", ")));
  }

  c.environment = readEnvironment(top);
  c.events = readEvents(reader, top, root, c.run.duration, c.segments);
  checkTucking(reader, segArray, c);
  for (std::size_t i = 0; i < c.events.size(); ++i) {
    for (const VasomotorTarget& v : c.events[i].vasomotor)
      if (v.segment != kAllSegments && !names.count(v.segment))
        throw CaseError(fmt::format("{}: events (at {:g} s): vasomotor.{}: no segment of that name (segments: {}, "
                                    "or all)", file, c.events[i].at, v.segment, fmt::join(names, ", ")));
    for (const ControlTarget& t : c.events[i].control) {
      if (t.controller != "vasomotor" && t.controller != "shivering" && t.controller != "panting" &&
          t.controller != "sweating") {
        if (std::none_of(c.control.local.begin(), c.control.local.end(),
                         [&](const LocalControllerSpec& l) { return l.name == t.controller; })) {
          std::vector<std::string> known{"vasomotor", "shivering", "panting"};
          if (c.control.sweating.present) known.push_back("sweating");
          for (const LocalControllerSpec& l : c.control.local) known.push_back(l.name);
          throw CaseError(fmt::format("{}{}: {}: unknown controller \"{}\" (the case has: {})", file,
                                      t.where.empty() ? "" : ":" + t.where, t.path, t.controller,
                                      fmt::join(known, ", ")));
        }
        continue;
      }
      const ControllerSpec& spec = t.controller == "vasomotor"   ? c.control.vasomotor
                                   : t.controller == "shivering" ? c.control.shivering
                                   : t.controller == "panting"   ? c.control.panting
                                                                 : c.control.sweating;
      if (!spec.present)
        throw CaseError(fmt::format("{}: events (at {:g} s): control.{}: the case has no [control.{}]", file,
                                    c.events[i].at, t.controller, t.controller));
    }
  }
  checkLocalControllers(top, c);
  checkSweating(top, c);
  checkOverriddenByTimeline(top, c, overrides);
  // Keys the case gives that have no effect in it (models/inert_keys.hpp): a warning each, naming where.
  // Given-ness of the values in the tables where a key can be without effect (the rest is not asked: a sweep loads
  // the case once per run).
  for (const char* table : {"environment", "control", "body", "circulation", "tissues", "sweep"})
    if (const toml::node* n = root.get(table)) CaseReader::collectGiven(*n, table, c.given);
  if (const toml::array* events = root.get("events") ? root.get("events")->as_array() : nullptr)
    for (std::size_t i = 0; i < events->size(); ++i)
      if (const toml::table* e = (*events)[i].as_table())
        for (const char* table : {"vasomotor", "metabolism", "respiration"})
          if (const toml::node* n = e->get(table))
            CaseReader::collectGiven(*n, "events." + CaseReader::elementLabel((*events)[i], i) + "." + table, c.given);
  for (std::size_t i = 0; i < segArray.size(); ++i) {
    const toml::table& seg = *segArray[i].as_table();
    const std::string path = "segments." + c.segments[i].name;
    for (const char* table : {"surface", "vasomotor", "vessels"})
      if (const toml::node* n = seg.get(table)) CaseReader::collectGiven(*n, path + "." + table, c.given);
    // The gradings (no effect on a single cell).
    if (const toml::node* n = seg.get("axial_grading")) CaseReader::collectGiven(*n, path + ".axial_grading", c.given);
    if (const toml::array* layers = seg.get("layers") ? seg.get("layers")->as_array() : nullptr)
      for (std::size_t j = 0; j < layers->size(); ++j)
        if (const toml::node* n = (*layers)[j].as_table() ? (*layers)[j].as_table()->get("grading") : nullptr)
          CaseReader::collectGiven(*n, fmt::format("{}.layers.{}.grading", path, j), c.given);
  }
  if (warnInert)
    for (std::string& w : InertKeys(c).warnings()) c.warnings.push_back(std::move(w));
  if (c.control.panting.present && c.body.respiratorySegment.empty())
    throw CaseError(fmt::format("{}: control.panting: panting needs respiration: set [body] respiratory_segment", file));
  // Cell counts the case leaves out, from each segment's decay lengths; warnings for coarser given grids.
  resolveGrid(c);
  cells = 0;
  for (const SegmentSpec& s : c.segments) {
    long radial = s.coat ? s.coat->cells : 0;
    for (const LayerSpec& l : s.layers) radial += l.cells;
    cells += radial * s.axialCells;
  }
  if (cells > maxCells)
    reader.fail(segs, "segments",
                fmt::format("the body has {} cells with the automatic grid; the limit is {} (give axial_cells or "
                            "layer cells)", cells, maxCells));
  return c;
}

//! The tree of a case text; CaseError with the position of a syntax error.
toml::table parseCaseText(const std::string& text, const std::string& sourceName) {
  checkNesting(text, sourceName);
  try {
    return toml::parse(text, sourceName);
  } catch (const toml::parse_error& e) {
    throw CaseError(fmt::format("{}:{}:{}: TOML syntax error: {}", sourceName, e.source().begin.line,
                                e.source().begin.column, e.description()));
  }
}

//! The resolved case leaves out keys that have no effect in it and that the case did not give (defaults and
//! values following another): re-running it then warns of the same keys as the case itself (models/inert_keys.hpp).
//! A key it gives with no effect stays, and warns again.
void leaveOutInertDefaults(toml::table& root, const Case& c) {
  const InertKeys inert(c);
  // Values outside the timeline: walk each leaf key path of the resolved tree.
  std::vector<std::pair<toml::table*, std::string>> erase;  // table, key
  auto walk = [&](auto&& self, toml::table& table, const std::string& path) -> void {
    for (auto&& [key, node] : table) {
      const std::string p = path.empty() ? std::string(key.str()) : path + "." + std::string(key.str());
      if (p == "events") continue;
      if (toml::table* t = node.as_table()) {
        self(self, *t, p);
      } else if (toml::array* a = node.as_array(); a && !a->empty() && a->front().is_table()) {
        for (std::size_t i = 0; i < a->size(); ++i)
          if (toml::table* element = (*a)[i].as_table()) self(self, *element, p + "." + CaseReader::elementLabel((*a)[i], i));
      } else if (!c.given.count(p) && inert.reason(p)) {
        erase.emplace_back(&table, std::string(key.str()));
      }
    }
  };
  walk(walk, root, "");
  for (auto& [table, key] : erase) table->erase(key);
  // Values of the timeline that follow another (not given) and have no effect.
  if (toml::array* events = root["events"].as_array())
    for (std::size_t i = 0; i < c.events.size() && i < events->size(); ++i) {
      toml::table* environment = (*events)[i].as_table() ? (*(*events)[i].as_table())["environment"].as_table() : nullptr;
      if (!environment) continue;
      for (const EnvironmentValue& v : c.events[i].environment)
        if (!v.given && inert.variable(v.variable)) environment->erase(environmentKey(v.variable));
      if (environment->empty()) (*events)[i].as_table()->erase("environment");
    }
}

}  // namespace

Case loadCaseFromString(const std::string& text, const std::string& sourceName,
                        const std::vector<std::string>& overrides) {
  // Sweeps, fits and sensitivity runs load the same text once per run with other overrides: the text is parsed
  // once per thread and each load applies its overrides to that tree and puts it back afterwards (the parse was
  // about 4 % of a quadruped sweep run). The tree is the one a fresh parse gives, source positions included, so
  // every value and message is the same (DEVELOPERS.md "Per-run CPU in sweeps, twelfth round").
  struct Parsed {
    std::string text, source;
    toml::table root;
    bool valid = false, inUse = false;
  };
  thread_local Parsed parsed;
  // A resolved case of an earlier version (every key written, none left out): no warnings of keys with no effect.
  const bool legacyResolved = text.rfind(kResolvedHeader, 0) == 0 && text.find(kLeftOutLine) == std::string::npos;
  if (parsed.inUse) {  // a load inside a load (none today): parse on its own
    toml::table root = parseCaseText(text, sourceName);
    Case c = buildCase(root, sourceName, overrides, !legacyResolved);
    recordInputs(c, root, text);
    return c;
  }
  if (!parsed.valid || parsed.text != text || parsed.source != sourceName) {
    parsed.valid = false;
    parsed.root = parseCaseText(text, sourceName);
    parsed.text = text;
    parsed.source = sourceName;
    parsed.valid = true;
  }
  struct Restore {
    Parsed& p;
    std::vector<OverrideChange> changes;
    ~Restore() {
      try {
        restoreOverrides(p.root, changes);
      } catch (...) {
        p.valid = false;  // parsed again by the next load
      }
      p.inUse = false;
    }
  } restore{parsed, {}};
  parsed.inUse = true;
  Case c = buildCase(parsed.root, sourceName, overrides, !legacyResolved, &restore.changes);
  recordInputs(c, parsed.root, text);
  return c;
}

std::string caseText(const std::string& path, const std::string& text) {
  if (!text.empty()) return text;
  std::ifstream in(path, std::ios::binary);
  if (!in) throw CaseError(fmt::format("{}: cannot open the case file (does it exist?)", path));
  std::stringstream buffer;
  buffer << in.rdbuf();
  return buffer.str();
}

Case loadCase(const std::string& path, const std::vector<std::string>& overrides) {
  return loadCaseFromString(caseText(path), path, overrides);
}

bool followsBodyWideVasomotor(const Case& c, std::size_t g) {
  const SegmentSpec& s = c.segments[g];
  for (const LocalControllerSpec& l : c.control.local)
    if (std::find(l.segments.begin(), l.segments.end(), s.name) != l.segments.end()) return false;
  if (s.vessels.shuntFlowMax > 0.0) return true;
  return std::any_of(s.layers.begin(), s.layers.end(),
                     [&](const LayerSpec& l) { return c.tissues.at(l.tissue).role == TissueRole::Skin; });
}

bool bodyWideVasomotorActs(const Case& c) {
  for (std::size_t g = 0; g < c.segments.size(); ++g)
    if (followsBodyWideVasomotor(c, g)) return true;
  return false;
}

bool bodyWideShuntsAct(const Case& c) {
  for (std::size_t g = 0; g < c.segments.size(); ++g)
    if (c.segments[g].vessels.shuntFlowMax > 0.0 && followsBodyWideVasomotor(c, g)) return true;
  return false;
}

std::pair<const EventSpec*, const VasomotorTarget*> vasomotorSetAtStart(const Case& c, const std::string& segment,
                                                                        std::optional<double> VasomotorTarget::*key) {
  for (const EventSpec& e : c.events)
    if (e.at == 0.0 && e.ramp == 0.0)
      for (const VasomotorTarget& v : e.vasomotor)
        if ((v.*key).has_value() && targetsSegment(v.segment, segment)) return {&e, &v};
  return {nullptr, nullptr};
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
                                 {"max_step", c.run.maxStep},
                                 {"grid_tolerance", c.run.gridTolerance}});
  toml::table circ{{"blood_density", c.circulation.bloodDensity},
                   {"blood_specific_heat", c.circulation.bloodSpecificHeat}};
  if (c.circulation.fixedArterialTemperature)
    circ.insert("fixed_arterial_temperature", *c.circulation.fixedArterialTemperature);
  if (!c.circulation.bradycardiaTissues.empty())
    circ.insert("bradycardia_tissues", fmt::format("{}", fmt::join(c.circulation.bradycardiaTissues, ", ")));
  root.insert("circulation", circ);
  toml::table body{{"activity", c.body.activity}, {"q10_reference", c.body.q10Reference}};
  body.insert("basal_metabolic_rate", c.body.basal == BasalRate::Tissues   ? std::string("tissues")
                                      : c.body.basal == BasalRate::Kleiber ? std::string("kleiber")
                                                                           : fmt::format("{:.17g} W", c.body.basalPower));
  if (c.body.mass) body.insert("mass", *c.body.mass);
  if (c.body.bloodVolume) body.insert("blood_volume", *c.body.bloodVolume);
  if (c.body.cardiacOutput) body.insert("cardiac_output", *c.body.cardiacOutput);
  if (!c.body.coreSegment.empty()) body.insert("core_segment", c.body.coreSegment);
  if (!c.body.respiratorySegment.empty()) body.insert("respiratory_segment", c.body.respiratorySegment);
  body.insert("exhaled_temperature", c.body.exhaledTemperature);
  root.insert("body", body);
  if (toml::table control = controlToml(c.control); !control.empty()) root.insert("control", control);
  {
    toml::table sweep{{"mode", c.sweep.steady ? "steady" : "transient"}};
    if (!c.sweep.metrics.empty()) sweep.insert("metrics", fmt::format("{}", fmt::join(c.sweep.metrics, ", ")));
    if (!c.sweep.window.empty()) sweep.insert("window", c.sweep.window);
    root.insert("sweep", sweep);
  }

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
    if (p.isCoat()) t.insert("wet_conductivity", p.wetConductivity > 0 ? p.wetConductivity : p.conductivity);
    // Every value is stated, and so is the role: the tissue reloads without a base.
    t.insert("role", roleName(p.role));
    tissues.insert(name, t);
  }
  root.insert("tissues", tissues);

  toml::array segments;
  for (const SegmentSpec& s : c.segments) {
    toml::table t{{"name", s.name}, {"shape", shapeName(s.shape)}};
    if (!s.parent.empty()) {
      t.insert("parent", s.parent);
      t.insert("count", s.count);
      t.insert("attach_position", s.attachPosition);
      t.insert("attach_tissue", s.attachTissue);
      if (s.contactRadius) t.insert("contact_radius", *s.contactRadius);
    }
    t.insert("vessels", toml::table{{"countercurrent_conductance", s.vessels.countercurrentConductance},
                                    {"shunt_flow_max", s.vessels.shuntFlowMax},
                                    {"superficial_conductance", s.vessels.superficialConductance},
                                    {"blood_fraction", s.vessels.bloodFraction}});
    t.insert("vasomotor", toml::table{{"skin_perfusion", s.vasomotor.skinPerfusion},
                                      {"shunt", s.vasomotor.shunt},
                                      {"superficial_return", s.vasomotor.superficialReturn}});
    if (s.shape != Shape::Sphere) {
      t.insert("length", s.length);
      t.insert("axial_cells", s.axialCells);
      t.insert("axial_grading", s.axialGrading);
    }
    if (s.shape == Shape::Cone) {
      t.insert("radius_proximal", s.radiusProximal);
      t.insert("radius_distal", s.radiusDistal);
    }
    if (s.shape == Shape::Plate) t.insert("width", s.width);
    toml::array layers;
    for (std::size_t j = 0; j < s.layers.size(); ++j) {
      const LayerSpec& l = s.layers[j];
      toml::table layer{{"tissue", l.tissue}, {"thickness", l.thickness}, {"cells", l.cells}};
      // Uniform layers as before, unless the case gives grading = 1 (which then warns again on a single cell).
      if (l.grading > 1.0 || c.given.count(fmt::format("segments.{}.layers.{}.grading", s.name, j)))
        layer.insert("grading", l.grading);
      layers.push_back(layer);
    }
    t.insert("layers", layers);
    if (s.coat) t.insert("coat", toml::table{{"material", s.coat->material}, {"thickness", s.coat->thickness}, {"cells", s.coat->cells}});
    toml::table surface = surfaceToml(s.surface, s.shape);
    if (!surface.empty()) t.insert("surface", surface);
    segments.push_back(t);
  }
  root.insert("segments", segments);
  root.insert("environment", environmentToml(c.environment));
  if (toml::array events = eventsToml(c.events); !events.empty()) root.insert("events", events);
  leaveOutInertDefaults(root, c);
  std::ostringstream os;
  os << kResolvedHeader << " every value in SI units (m, kg, s, K, W), every default filled in.\n"
     << kLeftOutLine << "\n"
     << "# Written by thermorph " << THERMORPH_VERSION << " from " << c.sourceFile << ".\n"
     << root << "\n";
  return os.str();
}

std::string caseReferenceMarkdown() {
  std::ostringstream os;
  os << "# Case-file reference\n\n"
     << "Generated from the parameter schema in `models/case_schema.cpp` by `thermorph reference`; do not edit by hand.\n"
     << "Every dimensional value is a number in SI units or a string with a unit parsed by udunits2 (`\"12 cm\"`, "
        "`\"37 degC\"`, `\"30 mL/(100 g min)\"`). Temperatures accept degC and K; a bare number is kelvin. A quoted "
        "number without a unit (`\"18\"`) is refused. Limits (nesting, segments, tree depth, outputs): README, "
        "\"Limits and guarantees\".\n"
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
  // The built-in tissues (models/tissues.cpp) with their values and sources (full citations: docs/references.md).
  os << "\n## Built-in tissues and coats\n\n"
     << "Names usable as `tissue` in `layers` (and as `base` of a `[tissues.NAME]`), or as `material` of a coat; "
        "generated from `models/tissues.cpp`. Perfusion is the basal volumetric blood flow (m3 of blood per m3 of "
        "tissue per s; in mL/(100 g min) = omega / density x 6e6); metabolic heat is the basal rate at the Q10 "
        "reference temperature. Full citations: [docs/references.md](../docs/references.md). These are defaults "
        "for illustration: replace them with values for your species.\n\n"
     << "| name | role | k [W/(m K)] | wet k [W/(m K)] | density [kg/m3] | c [J/(kg K)] | metabolic heat [W/m3] | "
        "perfusion [1/s] | perfusion [mL/(100 g min)] | Q10 | source |\n"
     << "|---|---|---|---|---|---|---|---|---|---|---|\n";
  for (const auto& [name, t] : builtinTissues()) {
    const bool coat = t.isCoat();
    os << fmt::format("| `{}` | {} | {:g} | {} | {:g} | {:g} | {} | {} | {} | {} | {} |\n", name,
                      roleName(t.role), t.conductivity,
                      coat ? fmt::format("{:g}", t.wetConductivity > 0 ? t.wetConductivity : t.conductivity) : "",
                      t.density, t.specificHeat, coat ? "" : fmt::format("{:g}", t.metabolicHeat),
                      coat ? "" : fmt::format("{:.4g}", t.perfusion),
                      coat || t.density <= 0 ? "" : fmt::format("{:.4g}", t.perfusion / t.density * 6e6),
                      coat ? "" : fmt::format("{:g}", t.q10), t.source);
  }
  os << "\n**Caution.** " << caution << "\n";
  return os.str();
}

std::vector<char> sweatingSegments(const Case& c) {
  std::vector<char> out(c.segments.size(), 0);
  if (!c.control.sweating.present) return out;
  for (std::size_t g = 0; g < c.segments.size(); ++g) {
    const SegmentSpec& s = c.segments[g];
    out[g] = c.control.sweatingSegments.empty()
                 ? !s.coat.has_value()
                 : std::find(c.control.sweatingSegments.begin(), c.control.sweatingSegments.end(), s.name) !=
                       c.control.sweatingSegments.end();
  }
  return out;
}

}  // namespace thermorph
