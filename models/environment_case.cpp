#include "models/environment_case.hpp"

#include <algorithm>
#include <array>
#include <cctype>
#include <charconv>
#include <filesystem>
#include <fstream>
#include <map>
#include <sstream>
#include <numbers>

// GCC 12 reports a false -Wrestrict in std::string concatenation inlined from CaseReader::checkRange
// (GCC bug 105329); the header is not ours to change.
#if defined(__GNUC__) && !defined(__clang__)
#pragma GCC diagnostic push
#pragma GCC diagnostic ignored "-Wrestrict"
#endif
#include "models/case_reader.hpp"
#if defined(__GNUC__) && !defined(__clang__)
#pragma GCC diagnostic pop
#endif

namespace thermorph {

namespace {

using V = EnvironmentVariable;

//! Every variable in enum order, with its case key.
struct VariableInfo {
  V variable;
  std::string_view key;
  double EnvironmentSpec::*field;
};
constexpr std::array<VariableInfo, kEnvironmentVariables> variables{{
    {V::Temperature, "temperature", &EnvironmentSpec::temperature},
    {V::Speed, "speed", &EnvironmentSpec::speed},
    {V::WaterTemperature, "water_temperature", &EnvironmentSpec::waterTemperature},
    {V::WaterSpeed, "water_speed", &EnvironmentSpec::waterSpeed},
    {V::AirTemperature, "air_temperature", &EnvironmentSpec::airTemperature},
    {V::AirSpeed, "air_speed", &EnvironmentSpec::airSpeed},
    {V::RelativeHumidity, "relative_humidity", &EnvironmentSpec::relativeHumidity},
    {V::RadiantTemperature, "radiant_temperature", &EnvironmentSpec::radiantTemperature},
    {V::SkyTemperature, "sky_temperature", &EnvironmentSpec::skyTemperature},
    {V::SolarIrradiance, "solar_irradiance", &EnvironmentSpec::solarIrradiance},
    {V::SubstrateTemperature, "substrate_temperature", &EnvironmentSpec::substrateTemperature},
}};

const VariableInfo& info(V v) { return variables[static_cast<std::size_t>(v)]; }

//! Variables that follow another until given explicitly (in [environment] or an earlier event), in
//! dependency order: the follower takes the leader's value whenever the leader changes.
struct FollowRule {
  V follower;
  V leader;
};
//! Rules while the medium is `medium`. The air temperature is `temperature` in air and `air_temperature` in
//! water. When the medium alternates between air and water (`alternating`), water_temperature follows
//! `temperature` only while the medium is water and air_temperature only while it is air, so each keeps the
//! value of the last interval in its fluid; otherwise both follow `temperature` throughout.
std::vector<FollowRule> followRules(SurroundingMedium medium, bool alternating) {
  const bool inAir = medium == SurroundingMedium::Air;
  std::vector<FollowRule> rules;
  if (!alternating || !inAir) rules.push_back({V::WaterTemperature, V::Temperature});
  if (!alternating || inAir) rules.push_back({V::AirTemperature, V::Temperature});
  rules.push_back({V::RadiantTemperature, inAir ? V::Temperature : V::AirTemperature});
  rules.push_back({V::SkyTemperature, V::RadiantTemperature});
  rules.push_back({V::SubstrateTemperature, V::Temperature});
  return rules;
}

//! True when `v` belongs to a fluid the surroundings never are over the run (water_* when the medium is air
//! throughout, air_* when it is water throughout): not a case key then.
bool notApplicable(V v, const EnvironmentSpec& media) {
  if (v == V::AirTemperature || v == V::AirSpeed) return !media.everWater();
  if (v == V::WaterTemperature || v == V::WaterSpeed) return !media.everAir();
  return false;
}

[[noreturn]] void failNotApplicable(const TableView& view, V v, const EnvironmentSpec& media) {
  const bool inAir = media.medium == SurroundingMedium::Air;
  view.fail(info(v).key,
            fmt::format("\"{}\" applies only when the medium is {} during some part of the run; here the medium is "
                        "{} throughout, so use \"{}\"",
                        info(v).key, inAir ? "water or sea_water" : "air", inAir ? "air" : "water",
                        info(v).key.substr(info(v).key.find('_') + 1)));
}

SurroundingMedium mediumOf(const std::string& name) {
  return name == "air" ? SurroundingMedium::Air : name == "water" ? SurroundingMedium::Water
                                                                  : SurroundingMedium::SeaWater;
}
const char* mediumName(SurroundingMedium m) {
  return m == SurroundingMedium::Air ? "air" : m == SurroundingMedium::Water ? "water" : "sea_water";
}

//! The media the [[events]] switch to, read leniently (an invalid value is reported with its key path by
//! readEvents): sets eventsAir and eventsWater of `e`.
void scanEventMedia(const TableView& root, EnvironmentSpec& e) {
  const toml::node* node = root.node("events");
  if (!node || !node->is_array()) return;
  for (const toml::node& element : *node->as_array()) {
    const toml::table* t = element.as_table();
    auto name = t ? (*t)["environment"]["medium"].value<std::string>() : std::nullopt;
    if (!name) continue;
    if (*name == "air") e.eventsAir = true;
    if (*name == "water" || *name == "sea_water") e.eventsWater = true;
  }
}

//! A convection key: "correlation" or a coefficient (schema kind Quantity).
std::optional<ConvectionSetting> readConvection(const TableView& view) {
  const toml::node* node = view.node("convection");
  if (!node) return std::nullopt;
  if (auto text = node->value<std::string>()) {
    if (*text == "correlation") return ConvectionSetting{};
    if (std::none_of(text->begin(), text->end(), [](unsigned char c) { return std::isdigit(c); }))
      view.fail("convection", fmt::format("convection = \"{}\": expected \"correlation\" or a fixed coefficient "
                                          "such as \"10 W/(m2 K)\"",
                                          *text));
  }
  return ConvectionSetting{true, view.quantity("convection")};
}

}  // namespace

std::string_view environmentKey(EnvironmentVariable variable) { return info(variable).key; }

double EnvironmentSpec::value(EnvironmentVariable v) const { return this->*info(v).field; }
double& EnvironmentSpec::value(EnvironmentVariable v) { return this->*info(v).field; }

EnvironmentSpec readEnvironment(const TableView& root) {
  TableView env = root.child("environment");
  EnvironmentSpec e;
  e.medium = mediumOf(env.choice("medium"));
  scanEventMedia(root, e);
  e.immersionWater = mediumOf(env.choice("immersion_water"));
  if (!e.everAir() && env.has("immersion_water"))
    env.fail("immersion_water", "immersion_water applies only when the medium is air during some part of the run "
                                "(in water, segments with immersion = \"always\" are in the medium)");
  if (auto c = readConvection(env)) e.convection = *c;

  for (const VariableInfo& v : variables) {
    if (notApplicable(v.variable, e)) {
      if (env.has(v.key)) failNotApplicable(env, v.variable, e);
      continue;
    }
    if (auto value = env.optionalQuantity(v.key)) e.value(v.variable) = *value;
  }
  // At t = 0 every follower not given takes its leader's value (air_temperature and water_temperature:
  // `temperature`, whatever the medium).
  for (const FollowRule& rule : followRules(e.medium, false))
    if (!env.has(info(rule.follower).key)) e.value(rule.follower) = e.value(rule.leader);
  if (e.medium != SurroundingMedium::Air && !env.has("immersion_water")) e.immersionWater = e.medium;

  e.substrateConductance = env.optionalQuantity("substrate_conductance");
  if (!e.substrateConductance) {
    // Contact needs the substrate's conductance: find a segment that asks for it.
    if (const toml::node* segments = root.node("segments"); segments && segments->is_array()) {
      const toml::array& array = *segments->as_array();
      for (std::size_t i = 0; i < array.size(); ++i) {
        const toml::table* s = array[i].as_table();
        auto fraction = s ? (*s)["surface"]["contact_fraction"].value<double>() : std::nullopt;
        if (fraction && *fraction > 0.0)
          env.missing("substrate_conductance");
      }
    }
    // ... or an event that sets a contact (events[].surface.SEGMENT.contact_fraction), read leniently here.
    if (const toml::node* events = root.node("events"); events && events->is_array())
      for (const toml::node& event : *events->as_array()) {
        const toml::table* surface = event.as_table() ? (*event.as_table())["surface"].as_table() : nullptr;
        if (surface)
          for (auto&& [name, target] : *surface) {
            auto fraction = target.as_table() ? (*target.as_table())["contact_fraction"].value<double>() : std::nullopt;
            if (fraction && *fraction > 0.0) env.missing("substrate_conductance");
          }
      }
  }
  return e;
}

SurfaceSpec readSurface(const TableView& segment, Shape shape) {
  TableView surface = segment.child("surface");
  SurfaceSpec s;
  s.ends = surface.choice("ends") == "insulated" ? EndCondition::Insulated : EndCondition::Exposed;
  if (shape == Shape::Sphere && surface.has("ends")) surface.fail("ends", "a sphere has no end faces");
  s.endCoat = surface.choice("end_coat") == "on";
  if (shape == Shape::Sphere && surface.has("end_coat")) surface.fail("end_coat", "a sphere has no end faces");
  s.convection = readConvection(surface);
  s.correlation =
      surface.choice("correlation") == "mitchell" ? ConvectionCorrelation::Mitchell : ConvectionCorrelation::Standard;
  s.orientation = surface.choice("orientation") == "horizontal" ? PlateOrientation::Horizontal
                                                                 : PlateOrientation::Vertical;
  if (shape != Shape::Plate && surface.has("orientation"))
    surface.fail("orientation", fmt::format("orientation applies to plates; a {} is taken as horizontal in free "
                                            "convection and in cross flow when forced",
                                            shapeName(shape)));
  if (surface.has("emissivity")) s.emissivity = surface.number("emissivity");
  s.solarAbsorptivity = surface.number("solar_absorptivity");
  // Shadow over lateral area for a beam normal to the axis or face: sphere pi r^2 / 4 pi r^2; cylinder
  // 2 r L / 2 pi r L; plate one face of two (geometry, common practice, no source). A cone's value depends on
  // its taper and is set where its radii are read (models/case.cpp).
  switch (shape) {
    case Shape::Sphere: s.solarExposure = 0.25; break;
    case Shape::Cylinder:
    case Shape::Cone: s.solarExposure = 1.0 / std::numbers::pi; break;
    case Shape::Plate: s.solarExposure = 0.5; break;
  }
  if (surface.has("solar_exposure")) s.solarExposure = surface.number("solar_exposure");
  s.skyView = surface.number("sky_view");
  s.contactFraction = surface.number("contact_fraction");
  if (s.contactFraction >= 1.0 && segment.has("coat"))
    surface.fail("contact_fraction", "a coated segment needs part of its coat exposed: below 1 (the coat over the "
                                     "contact patch conducts to the substrate, the rest meets the medium)");
  if (surface.has("contact_coat_thickness")) {
    if (!segment.has("coat"))
      surface.fail("contact_coat_thickness", "is the coat under the contact patch: the segment has no coat");
    s.contactCoatThickness = surface.quantity("contact_coat_thickness");
    const double coat = segment.child("coat").quantity("thickness");
    if (*s.contactCoatThickness > coat)
      surface.fail("contact_coat_thickness", fmt::format("{:g} m is thicker than the coat ({:g} m): a compressed coat is "
                                                         "at most as thick as the coat", *s.contactCoatThickness, coat));
  }
  // Tucking (surface.tucked_into, tucked_fraction): the host's name is checked against the segments, and the
  // fractions against the timeline's contact, once every segment and event is read (checkTucking, models/case.cpp).
  s.tuckedInto = surface.optionalText("tucked_into").value_or("");
  s.tuckedFraction = surface.number("tucked_fraction");
  s.tuckedInCoat = surface.choice("tucked_placement") == "in_coat";
  if (s.tuckedFraction > 0.0 && s.tuckedInto.empty())
    surface.fail("tucked_fraction", fmt::format("{:g} of the surface is tucked, but into what? Name the covering "
                                                "segment: surface.tucked_into = \"NAME\"", s.tuckedFraction));
  s.wettedFraction = surface.number("wetted_fraction");
  const std::string immersion = surface.choice("immersion");
  s.immersion = immersion == "always" ? Immersion::Always : immersion == "never" ? Immersion::Never : Immersion::Body;
  return s;
}

namespace {

//! Where an event came from, for messages.
struct EventSource {
  const toml::node* node = nullptr;  //!< the `at` key, or environment.weather
  std::string path;                  //!< key path of that node
  std::string label;                 //!< "events.2", "weather.csv line 7"
};

std::string trim(std::string_view text) {
  std::size_t begin = 0, end = text.size();
  while (begin < end && std::isspace(static_cast<unsigned char>(text[begin]))) ++begin;
  while (end > begin && std::isspace(static_cast<unsigned char>(text[end - 1]))) --end;
  return std::string(text.substr(begin, end - begin));
}

std::vector<std::string> splitCsv(const std::string& line) {
  std::vector<std::string> cells;
  std::stringstream ss(line);
  for (std::string cell; std::getline(ss, cell, ',');) cells.push_back(trim(cell));
  if (!line.empty() && line.back() == ',') cells.push_back("");
  return cells;
}

[[noreturn]] void failWeather(const CaseReader& reader, const toml::node* node, const std::string& key,
                              const std::filesystem::path& file, int line, const std::string& what) {
  reader.fail(node, key, fmt::format("{}:{}: {}", file.string(), line, what));
}

//! Rows of environment.weather as events: a step to the first row at its time, then a linear ramp to each next
//! row; rows after the run are dropped. Header: `time [h], temperature [degC], speed [m/s], ...` (units optional,
//! SI without).
void readWeather(const CaseReader& reader, const TableView& environment, const EnvironmentSpec& media, double duration,
                 std::vector<EventSpec>& events, std::vector<EventSource>& sources) {
  const std::string name = environment.text("weather");
  const toml::node* node = environment.node("weather");
  const std::string key = environment.path("weather");
  std::filesystem::path file(name);
  if (file.is_relative()) file = std::filesystem::path(reader.file()).parent_path() / file;
  std::ifstream in(file);
  if (!in) reader.fail(node, key, fmt::format("cannot open the weather file {}", file.string()));
  auto failAt = [&](int line, const std::string& what) { failWeather(reader, node, key, file, line, what); };

  struct Column {
    std::optional<V> variable;  //!< nullopt: time
    std::string unit, siUnit;
  };
  std::vector<Column> columns;
  std::vector<double> previous;
  double previousTime = -1.0;
  int lineNumber = 0;
  for (std::string line; std::getline(in, line);) {
    ++lineNumber;
    if (!line.empty() && line.back() == '\r') line.pop_back();
    if (trim(line).empty() || trim(line).front() == '#') continue;
    std::vector<std::string> cells = splitCsv(line);
    if (columns.empty()) {
      for (std::size_t i = 0; i < cells.size(); ++i) {
        std::string header = cells[i], unit;
        if (auto open = header.find('['); open != std::string::npos) {
          auto close = header.find(']', open);
          if (close == std::string::npos) failAt(lineNumber, fmt::format("column \"{}\": unit without \"]\"", header));
          unit = trim(header.substr(open + 1, close - open - 1));
          header = trim(header.substr(0, open));
        }
        Column column{std::nullopt, unit, "s"};
        if (i == 0) {
          if (header != "time") failAt(lineNumber, fmt::format("the first column must be \"time\", not \"{}\"", header));
        } else {
          auto it = std::find_if(variables.begin(), variables.end(), [&](const VariableInfo& v) { return v.key == header; });
          if (it == variables.end() || notApplicable(it->variable, media)) {
            std::vector<std::string> keys;
            for (const VariableInfo& v : variables)
              if (!notApplicable(v.variable, media)) keys.emplace_back(v.key);
            failAt(lineNumber, fmt::format("unknown column \"{}\" (columns: time, {})", header, fmt::join(keys, ", ")));
          }
          column.variable = it->variable;
          column.siUnit = std::string(findParam("events[].environment." + std::string(it->key))->unit);
        }
        if (!unit.empty() && !unitConvertible(unit, column.siUnit))
          failAt(lineNumber, fmt::format("column \"{}\": unit \"{}\" is not {} (SI: {})", header, unit,
                                         aQuantity(column.siUnit), column.siUnit));
        columns.push_back(column);
      }
      continue;
    }
    if (cells.size() != columns.size())
      failAt(lineNumber, fmt::format("{} values, expected {} (one per column)", cells.size(), columns.size()));
    std::vector<double> row;
    for (std::size_t i = 0; i < cells.size(); ++i) {
      double value = 0.0;
      auto [ptr, ec] = std::from_chars(cells[i].data(), cells[i].data() + cells[i].size(), value);
      if (ec != std::errc() || ptr != cells[i].data() + cells[i].size())
        failAt(lineNumber, fmt::format("\"{}\" is not a number", cells[i]));
      const Column& c = columns[i];
      if (!c.unit.empty()) value = convertUnit(value, c.unit, c.siUnit);
      if (c.variable) {
        const Param& p = *findParam("events[].environment." + std::string(info(*c.variable).key));
        if (!(value >= p.min && value <= p.max))
          failAt(lineNumber, fmt::format("{} = {:g} {} is out of range ({:g} to {:g} {})", info(*c.variable).key, value,
                                         c.siUnit, p.min, p.max, c.siUnit));
      }
      row.push_back(value);
    }
    const double time = row[0];
    if (!(time >= 0.0)) failAt(lineNumber, fmt::format("time {:g} s is negative", time));
    if (!previous.empty() && !(time > previousTime))
      failAt(lineNumber, fmt::format("time {:g} s does not increase (previous row {:g} s)", time, previousTime));
    if (previous.empty() ? time < duration : previousTime < duration) {
      EventSpec e;
      e.at = previous.empty() ? time : previousTime;
      e.ramp = previous.empty() ? 0.0 : time - previousTime;
      for (std::size_t i = 1; i < row.size(); ++i) e.environment.push_back({*columns[i].variable, row[i]});
      events.push_back(std::move(e));
      sources.push_back({node, key, fmt::format("{} line {}", file.filename().string(), lineNumber)});
    }
    previous = row;
    previousTime = time;
  }
  if (previous.empty()) reader.fail(node, key, fmt::format("{}: no data rows", file.string()));
}

}  // namespace

//! Vasomotor, metabolic, circulatory, respiratory and controller targets of one [[events]] entry.
void readPhysiologyEvent(const TableView& view, EventSpec& e) {
  e.label = view.optionalText("label").value_or("");
  e.span = view.optionalQuantity("span").value_or(e.ramp);
  if (const toml::node* node = view.node("vasomotor")) {
    for (auto&& [name, child] : *node->as_table()) {
      TableView t = view.namedChild("vasomotor", name.str());
      VasomotorTarget target;
      target.segment = std::string(name.str());
      if (t.has("skin_perfusion")) target.skinPerfusion = t.number("skin_perfusion");
      if (t.has("shunt")) target.shunt = t.number("shunt");
      if (t.has("superficial_return")) target.superficialReturn = t.number("superficial_return");
      e.vasomotor.push_back(target);
    }
  }
  TableView metabolism = view.child("metabolism");
  if (metabolism.has("activity")) e.activity = metabolism.number("activity");
  if (metabolism.has("hypometabolism")) e.hypometabolism = metabolism.number("hypometabolism");
  TableView circulation = view.child("circulation");
  if (circulation.has("bradycardia")) e.bradycardia = circulation.number("bradycardia");
  TableView respiration = view.child("respiration");
  if (respiration.has("panting")) e.panting = respiration.number("panting");
  if (const toml::node* node = view.node("control")) {
    for (auto&& [name, child] : *node->as_table()) {
      TableView t = view.namedChild("control", name.str());
      std::string controller(name.str());
      // vasomotor, shivering, panting, sweating or a [control.local.NAME]: checked by the case loader against the controllers.
      ControlTarget target;
      target.controller = controller;
      if (child.source().begin.line > 0)
        target.where = fmt::format("{}:{}", child.source().begin.line, child.source().begin.column);
      target.path = view.path("control") + "." + controller;
      if (t.has("enabled")) target.enabled = t.choice("enabled") == "on";
      if (t.has("set_point")) target.setPoint = t.quantity("set_point");
      e.control.push_back(target);
    }
  }
}

namespace {

//! The wetted fraction of one segment (or "all") in an [[events]] surface table, `{ wetted_fraction = W }`: a step, or
//! a linear ramp over the event's `ramp` (it enters only the surface's evaporation, which EnvironmentModel evaluates
//! at each time, so it may change within an interval as the environment's values do). True when the table gives it.
bool readWetEvent(const TableView& t, const std::string& name, EventSpec& e) {
  if (!t.has("wetted_fraction")) return false;
  e.wet.push_back({name, t.number("wetted_fraction")});
  return true;
}

//! Substrate contact steps of one [[events]] entry: `surface = { SEGMENT = { contact_fraction = F } }`, SEGMENT a
//! segment's name or "all"; F in the static key's range (a coated segment below 1); never in an event with a ramp.
//! The same tables' `wetted_fraction` (readWetEvent) and `tucked_fraction`.
void readContactEvent(const TableView& view, const std::vector<SegmentSpec>& segments, EventSpec& e) {
  const toml::node* node = view.node("surface");
  if (!node) return;
  for (auto&& [key, child] : *node->as_table()) {
    const std::string name(key.str());
    TableView t = view.namedChild("surface", name);
    const auto segment = std::find_if(segments.begin(), segments.end(), [&](const SegmentSpec& s) { return s.name == name; });
    if (name != kAllSegments && segment == segments.end()) {
      std::vector<std::string> names;
      for (const SegmentSpec& s : segments) names.push_back(s.name);
      view.child("surface").fail(name, fmt::format("no segment named \"{}\" (segments: {}, or all)", name,
                                                   fmt::join(names, ", ")));
    }
    if (readWetEvent(t, name, e) && !t.has("tucked_fraction") && !t.has("contact_fraction")) continue;
    if (t.has("tucked_fraction")) {
      // Tucking of a named segment into its own surface.tucked_into (checked in checkTucking, models/case.cpp).
      if (name == kAllSegments)
        t.fail("tucked_fraction", "tucking is set per segment, into its own surface.tucked_into; name the segment "
                                  "instead of all");
      const double tucked = t.number("tucked_fraction");
      if (e.ramp > 0.0)
        t.fail("tucked_fraction", fmt::format("tucking changes by a step, not over ramp = {:g} s; give the change an "
                                              "event of its own without a ramp",
                                              e.ramp));
      if (segment->surface.tuckedInto.empty())
        t.fail("tucked_fraction", fmt::format("segment {} is tucked into nothing: give it surface.tucked_into = "
                                              "\"NAME\" (the covering segment)",
                                              name));
      e.tuck.push_back({name, tucked});
      if (!t.has("contact_fraction")) continue;
    }
    if (!t.has("contact_fraction")) t.missing("contact_fraction");
    const double fraction = t.number("contact_fraction");
    if (e.ramp > 0.0)
      t.fail("contact_fraction", fmt::format("contact changes by a step, not over ramp = {:g} s; give the change of "
                                             "contact an event of its own without a ramp",
                                             e.ramp));
    if (fraction >= 1.0)
      for (const SegmentSpec& s : segments)
        if (s.coat && targetsSegment(name, s.name))
          t.fail("contact_fraction", fmt::format("segment {} has a coat, which needs part of it exposed: below 1 (the "
                                                 "coat over the contact patch conducts to the substrate, the rest "
                                                 "meets the medium)",
                                                 s.name));
    e.contact.push_back({name, fraction});
  }
  // "all" first: a named segment's value wins within the event (as vasomotor targets).
  std::stable_partition(e.contact.begin(), e.contact.end(), [](const ContactTarget& c) { return c.segment == kAllSegments; });
  std::stable_partition(e.wet.begin(), e.wet.end(), [](const WetTarget& w) { return w.segment == kAllSegments; });
}

//! The values an event changes, as key paths (before followers are added).
std::vector<std::string> changedKeys(const EventSpec& e) {
  std::vector<std::string> keys;
  if (e.medium) keys.emplace_back("environment.medium");
  for (const EnvironmentValue& v : e.environment) keys.push_back("environment." + std::string(info(v.variable).key));
  for (const VasomotorTarget& v : e.vasomotor) {
    if (v.skinPerfusion) keys.push_back("vasomotor." + v.segment + ".skin_perfusion");
    if (v.shunt) keys.push_back("vasomotor." + v.segment + ".shunt");
    if (v.superficialReturn) keys.push_back("vasomotor." + v.segment + ".superficial_return");
  }
  for (const ContactTarget& c : e.contact) keys.push_back("surface." + c.segment + ".contact_fraction");
  for (const TuckTarget& c : e.tuck) keys.push_back("surface." + c.segment + ".tucked_fraction");
  for (const WetTarget& w : e.wet) keys.push_back("surface." + w.segment + ".wetted_fraction");
  if (e.activity) keys.emplace_back("metabolism.activity");
  if (e.hypometabolism) keys.emplace_back("metabolism.hypometabolism");
  if (e.bradycardia) keys.emplace_back("circulation.bradycardia");
  if (e.panting) keys.emplace_back("respiration.panting");
  for (const ControlTarget& c : e.control) {
    if (c.enabled) keys.push_back("control." + c.controller + ".enabled");
    if (c.setPoint) keys.push_back("control." + c.controller + ".set_point");
  }
  return keys;
}

//! Two [[events]] stepping the same value at the same time: which one wins is not defined, so the case is refused
//! naming both. `tableEvents`: how many of `read` come from [[events]] (weather rows follow; a row's step and the
//! ramp to the next row start together by construction, and events inside a weather ramp are refused later).
void refuseSimultaneousChanges(const CaseReader& reader, const std::vector<EventSpec>& read,
                               const std::vector<EventSource>& sources, const std::vector<std::size_t>& order,
                               std::size_t tableEvents) {
  std::map<std::string, std::size_t> atThisTime;  // key -> event, for the events at one time
  double time = -1.0;
  for (const std::size_t index : order) {
    // Steps only: a ramp starting with a step at its start is well defined (the resolved form of weather rows),
    // and a change during a ramp is refused below.
    if (index >= tableEvents || read[index].ramp > 0.0) continue;
    if (read[index].at != time) atThisTime.clear();
    time = read[index].at;
    for (const std::string& key : changedKeys(read[index])) {
      auto [it, inserted] = atThisTime.emplace(key, index);
      // Contact (or wetting) of "all" and of a named segment in two events at one time: the same value twice (within
      // one event the named segment wins, as for vasomotor targets).
      auto field = [](const std::string& k) { return std::string_view(k).substr(k.rfind('.') + 1); };
      if (inserted && key.rfind("surface.", 0) == 0)
        for (auto other = atThisTime.lower_bound("surface."); other != atThisTime.end() &&
                                                             other->first.rfind("surface.", 0) == 0; ++other)
          if (other->second != index && field(key) == field(other->first) &&
              (key.rfind("surface.all.", 0) == 0 || other->first.rfind("surface.all.", 0) == 0)) {
            it = other;
            inserted = false;
          }
      if (inserted) continue;
      const EventSource& s = sources[index];
      reader.fail(s.node, s.path,
                  fmt::format("{} and {} both change {} at {:g} s; give one change per value and time (which one "
                              "would win is not defined)",
                              sources[it->second].label, s.label, key, read[index].at));
    }
  }
}

}  // namespace

std::vector<EventSpec> readEvents(const CaseReader& reader, const TableView& root, const toml::table& rootTable,
                                  double duration, const std::vector<SegmentSpec>& segments) {
  TableView base = root.child("environment");
  EnvironmentSpec media;
  media.medium = mediumOf(base.choice("medium"));
  scanEventMedia(root, media);
  std::vector<EventSpec> read;
  std::vector<EventSource> sources;
  if (const toml::node* node = rootTable.get("events"); node && node->is_array()) {
    const toml::array& array = *node->as_array();
    for (std::size_t i = 0; i < array.size(); ++i) {
      TableView view(reader, array[i].as_table(), "events[]", "events." + CaseReader::elementLabel(array[i], i));
      EventSpec e;
      e.at = view.quantity("at");
      e.ramp = view.quantity("ramp");
      if (e.at >= duration)
        view.fail("at", fmt::format("at = {:g} s is not before the end of the run (run.duration = {:g} s)", e.at,
                                    duration));
      TableView env = view.child("environment");
      if (env.has("medium")) {
        e.medium = mediumOf(env.choice("medium"));
        if (e.ramp > 0.0)
          env.fail("medium", fmt::format("the medium changes by a step, not over ramp = {:g} s; give the change of "
                                         "medium an event of its own without a ramp",
                                         e.ramp));
        for (std::string_view key : {"temperature", "speed"})
          if (!env.has(key))
            env.fail("medium", fmt::format("an event that sets the medium also gives the new medium's {} (it is not "
                                           "carried over from the previous medium), e.g. environment = {{ medium = "
                                           "\"{}\", temperature = \"4 degC\", speed = \"1 m/s\" }}",
                                           key, mediumName(*e.medium)));
      }
      for (const VariableInfo& v : variables) {
        if (!env.has(v.key)) continue;
        if (notApplicable(v.variable, media)) failNotApplicable(env, v.variable, media);
        e.environment.push_back({v.variable, env.quantity(v.key)});
      }
      readPhysiologyEvent(view, e);
      readContactEvent(view, segments, e);
      read.push_back(std::move(e));
      sources.push_back({view.node("at"), view.path("at"), view.display()});
    }
  }
  const std::size_t tableEvents = read.size();
  if (base.has("weather")) readWeather(reader, base, media, duration, read, sources);

  std::vector<std::size_t> order(read.size());
  for (std::size_t i = 0; i < order.size(); ++i) order[i] = i;
  std::stable_sort(order.begin(), order.end(), [&](std::size_t a, std::size_t b) { return read[a].at < read[b].at; });
  refuseSimultaneousChanges(reader, read, sources, order, tableEvents);

  // Followers not given in [environment] keep following their leader through the timeline until given, by the
  // rules of the medium in effect after each event.
  std::array<bool, kEnvironmentVariables> explicitly{};
  for (const VariableInfo& v : variables) explicitly[static_cast<std::size_t>(v.variable)] = base.has(v.key);
  SurroundingMedium medium = media.medium;
  for (std::size_t index : order) {
    EventSpec& e = read[index];
    if (e.medium) medium = *e.medium;
    auto target = [&](V v) -> const double* {
      for (const EnvironmentValue& value : e.environment)
        if (value.variable == v) return &value.value;
      return nullptr;
    };
    for (const EnvironmentValue& value : e.environment) explicitly[static_cast<std::size_t>(value.variable)] = true;
    for (const FollowRule& rule : followRules(medium, media.mediumChanges())) {
      if (explicitly[static_cast<std::size_t>(rule.follower)] || notApplicable(rule.follower, media)) continue;
      if (const double* leader = target(rule.leader)) e.environment.push_back({rule.follower, *leader, false});
    }
  }

  // One change of a variable at a time: no event may change a variable during another's ramp of it.
  std::array<std::optional<std::size_t>, kEnvironmentVariables> last;
  for (std::size_t index : order) {
    const EventSpec& e = read[index];
    for (const EnvironmentValue& value : e.environment) {
      auto& previous = last[static_cast<std::size_t>(value.variable)];
      if (previous && e.at < read[*previous].at + read[*previous].ramp) {
        const EventSource& s = sources[index];
        reader.fail(s.node, s.path,
                    fmt::format("{} changes {} at {:g} s, inside the ramp of {} ({:g} s to {:g} s); changes of one "
                                "value may not overlap (a value that follows another, such as radiant_temperature "
                                "following the air temperature, stops following once given in [environment])",
                                s.label, info(value.variable).key, e.at, sources[*previous].label,
                                read[*previous].at, read[*previous].at + read[*previous].ramp));
      }
      previous = index;
    }
  }
  // The same for a segment's wetted fraction (events[].surface.NAME.wetted_fraction, "all" included).
  for (const SegmentSpec& segment : segments) {
    std::optional<std::size_t> previous;
    for (std::size_t index : order) {
      const EventSpec& e = read[index];
      if (std::none_of(e.wet.begin(), e.wet.end(), [&](const WetTarget& w) { return targetsSegment(w.segment, segment.name); }))
        continue;
      if (previous && e.at < read[*previous].at + read[*previous].ramp) {
        const EventSource& s = sources[index];
        reader.fail(s.node, s.path,
                    fmt::format("{} changes the wetted_fraction of {} at {:g} s, inside the ramp of {} ({:g} s to {:g} "
                                "s); changes of one value may not overlap",
                                s.label, segment.name, e.at, sources[*previous].label, read[*previous].at,
                                read[*previous].at + read[*previous].ramp));
      }
      previous = index;
    }
  }
  std::vector<EventSpec> events;
  for (std::size_t index : order) {
    read[index].where = reader.location(sources[index].node);
    read[index].source = sources[index].label;
    read[index].weatherRow = index >= tableEvents;
    events.push_back(std::move(read[index]));
  }
  return events;
}

toml::table environmentToml(const EnvironmentSpec& e) {
  toml::table t;
  t.insert("medium", mediumName(e.medium));
  if (e.convection.fixed) t.insert("convection", e.convection.coefficient);
  else t.insert("convection", "correlation");
  for (const VariableInfo& v : variables)
    if (!notApplicable(v.variable, e)) t.insert(v.key, e.value(v.variable));
  if (e.everAir()) t.insert("immersion_water", mediumName(e.immersionWater));
  if (e.substrateConductance) t.insert("substrate_conductance", *e.substrateConductance);
  return t;
}

toml::table surfaceToml(const SurfaceSpec& s, Shape shape) {
  toml::table surface;
  if (shape != Shape::Sphere) surface.insert("ends", s.ends == EndCondition::Insulated ? "insulated" : "exposed");
  if (shape != Shape::Sphere) surface.insert("end_coat", s.endCoat ? "on" : "off");
  if (s.convection) {
    if (s.convection->fixed) surface.insert("convection", s.convection->coefficient);
    else surface.insert("convection", "correlation");
  }
  surface.insert("correlation", s.correlation == ConvectionCorrelation::Mitchell ? "mitchell" : "standard");
  if (shape == Shape::Plate)
    surface.insert("orientation", s.orientation == PlateOrientation::Horizontal ? "horizontal" : "vertical");
  if (s.emissivity) surface.insert("emissivity", *s.emissivity);
  surface.insert("solar_absorptivity", s.solarAbsorptivity);
  surface.insert("solar_exposure", s.solarExposure);
  surface.insert("sky_view", s.skyView);
  surface.insert("contact_fraction", s.contactFraction);
  if (s.contactCoatThickness) surface.insert("contact_coat_thickness", *s.contactCoatThickness);
  if (!s.tuckedInto.empty()) {
    surface.insert("tucked_into", s.tuckedInto);
    surface.insert("tucked_fraction", s.tuckedFraction);
    surface.insert("tucked_placement", s.tuckedInCoat ? "in_coat" : "on_coat");
  }
  surface.insert("wetted_fraction", s.wettedFraction);
  surface.insert("immersion", s.immersion == Immersion::Always  ? "always"
                              : s.immersion == Immersion::Never ? "never"
                                                                : "body");
  return surface;
}

toml::array eventsToml(const std::vector<EventSpec>& events) {
  toml::array out;
  for (const EventSpec& e : events) {
    toml::table environment;
    if (e.medium) environment.insert("medium", mediumName(*e.medium));
    for (const EnvironmentValue& v : e.environment) environment.insert(info(v.variable).key, v.value);
    toml::table event{{"at", e.at}, {"ramp", e.ramp}};
    if (!e.label.empty()) event.insert("label", e.label);
    if (e.span != e.ramp) event.insert("span", e.span);
    if (!environment.empty()) event.insert("environment", environment);
    toml::table vasomotor;
    for (const VasomotorTarget& v : e.vasomotor) {
      toml::table t;
      if (v.skinPerfusion) t.insert("skin_perfusion", *v.skinPerfusion);
      if (v.shunt) t.insert("shunt", *v.shunt);
      if (v.superficialReturn) t.insert("superficial_return", *v.superficialReturn);
      vasomotor.insert(v.segment, t);
    }
    if (!vasomotor.empty()) event.insert("vasomotor", vasomotor);
    toml::table surface;
    for (const ContactTarget& c : e.contact) surface.insert(c.segment, toml::table{{"contact_fraction", c.contactFraction}});
    for (const TuckTarget& c : e.tuck) {
      if (toml::table* t = surface[c.segment].as_table()) t->insert("tucked_fraction", c.tuckedFraction);
      else surface.insert(c.segment, toml::table{{"tucked_fraction", c.tuckedFraction}});
    }
    for (const WetTarget& w : e.wet) {
      if (toml::table* t = surface[w.segment].as_table()) t->insert("wetted_fraction", w.wettedFraction);
      else surface.insert(w.segment, toml::table{{"wetted_fraction", w.wettedFraction}});
    }
    if (!surface.empty()) event.insert("surface", surface);
    toml::table metabolism;
    if (e.activity) metabolism.insert("activity", *e.activity);
    if (e.hypometabolism) metabolism.insert("hypometabolism", *e.hypometabolism);
    if (!metabolism.empty()) event.insert("metabolism", metabolism);
    if (e.bradycardia) event.insert("circulation", toml::table{{"bradycardia", *e.bradycardia}});
    if (e.panting) event.insert("respiration", toml::table{{"panting", *e.panting}});
    toml::table control;
    for (const ControlTarget& c : e.control) {
      toml::table t;
      if (c.enabled) t.insert("enabled", *c.enabled ? "on" : "off");
      if (c.setPoint) t.insert("set_point", *c.setPoint);
      control.insert(c.controller, t);
    }
    if (!control.empty()) event.insert("control", control);
    out.push_back(event);
  }
  return out;
}

}  // namespace thermorph
