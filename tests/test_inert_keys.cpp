// Case keys with no effect in the case as written (models/inert_keys.hpp): the loader warns of each one the case
// gives, naming file, line, column and key path; a key with no effect leaves every node temperature bit for bit
// unchanged when its value changes, and a key that acts changes them (identity; no outside source needed: "no
// effect" means exactly that). The resolved case leaves out keys with no effect that the case did not give, so that
// re-running it warns of the same keys as the case, and of none when the case gave none.
#include <catch2/catch.hpp>

#include <algorithm>
#include <filesystem>
#include <string>
#include <vector>

#include "test_support.hpp"
#include "models/inert_keys.hpp"

using namespace thermorph;
using thermorph::testing::silentRun;

namespace {

//! A small swimmer: a trunk and a head in 10 degC water (values illustrative), 10 minutes. `environment` and
//! `trunk` add keys to [environment] and to the trunk's table; `rest` adds tables at the end.
std::string swimmer(const std::string& environment, const std::string& trunk = "", const std::string& rest = "") {
  return R"toml(title = "Swimmer (illustrative)"
[run]
duration = "10 min"
output_interval = "5 min"
[environment]
medium = "water"
temperature = "10 degC"
speed = "0.5 m/s"
)toml" + environment + R"toml(
[[segments]]
name = "trunk"
shape = "cylinder"
length = "30 cm"
axial_cells = 3
layers = [{ tissue = "muscle", thickness = "5 cm", cells = 4 }, { tissue = "skin", thickness = "0.3 cm", cells = 1 }]
)toml" + trunk + R"toml(
[[segments]]
name = "head"
parent = "trunk"
shape = "sphere"
radius = "5 cm"
layers = [{ tissue = "muscle", cells = 4 }]
)toml" + rest;
}

//! Warnings of the loaded case that say a key has no effect.
std::vector<std::string> inertWarnings(const Case& c) {
  std::vector<std::string> out;
  for (const std::string& w : c.warnings)
    if (w.find("has no effect") != std::string::npos) out.push_back(w);
  return out;
}

bool mentions(const std::vector<std::string>& warnings, const std::string& text) {
  return std::any_of(warnings.begin(), warnings.end(), [&](const std::string& w) { return w.find(text) != std::string::npos; });
}

//! Node temperatures at the end of a run of the case text with overrides [K].
std::vector<double> finalTemperatures(const std::string& text, const std::vector<std::string>& overrides = {}) {
  const Body body(loadCaseFromString(text, "inert.toml", overrides));
  RunOptions options = silentRun();
  std::vector<double> last;
  options.observer = [&](double, std::span<const double> t, const RunSummary&) { last.assign(t.begin(), t.end()); };
  REQUIRE(runTransient(body, options).complete);
  return last;
}

}  // namespace

TEST_CASE("Air-side keys in a case always in water warn and have no effect", "[case][inert]") {
  const std::string text = swimmer(R"toml(air_temperature = "-5 degC"
air_speed = "3 m/s"
relative_humidity = "80 %"
radiant_temperature = "0 degC"
sky_temperature = "-20 degC"
solar_irradiance = "600 W/m2")toml",
                                   "surface = { emissivity = 0.9, wetted_fraction = 0.2 }");
  const Case c = loadCaseFromString(text, "inert.toml");
  const std::vector<std::string> w = inertWarnings(c);
  for (const char* key : {"environment.air_temperature", "environment.air_speed", "environment.relative_humidity",
                          "environment.radiant_temperature", "environment.sky_temperature",
                          "environment.solar_irradiance", "segments.trunk.surface.emissivity",
                          "segments.trunk.surface.wetted_fraction"}) {
    INFO(key);
    CHECK(mentions(w, std::string(key) + " has no effect: "));
  }
  // File, line and column of the key as written, and the reason.
  CHECK(mentions(w, "inert.toml:9:19: environment.air_temperature has no effect: every segment is in water for the whole run"));
  CHECK(w.size() == 8);
  // No effect: other values give the same temperatures bit for bit.
  const std::vector<double> a = finalTemperatures(text);
  const std::vector<double> b = finalTemperatures(
      text, {"environment.air_temperature=\"30 degC\"", "environment.solar_irradiance=\"0 W/m2\"",
             "environment.relative_humidity=0.1", "segments.trunk.surface.emissivity=0.2"});
  CHECK(a == b);

  SECTION("with a segment in air they act, and do not warn") {
    const std::vector<std::string> never{"segments.head.surface.immersion=\"never\""};
    const Case acting = loadCaseFromString(text, "inert.toml", never);
    const std::vector<std::string> w2 = inertWarnings(acting);
    CHECK_FALSE(mentions(w2, "environment.air_temperature"));
    CHECK_FALSE(mentions(w2, "environment.solar_irradiance"));
    std::vector<std::string> warm = never;
    warm.push_back("environment.air_temperature=\"30 degC\"");
    CHECK(finalTemperatures(text, never) != finalTemperatures(text, warm));
    // The trunk stays in water: its own surface keys still warn.
    CHECK(mentions(w2, "segments.trunk.surface.emissivity has no effect"));
  }
}

TEST_CASE("Water-side keys in a case never in water warn and have no effect", "[case][inert]") {
  std::string text = swimmer(R"toml(water_temperature = "4 degC"
water_speed = "1 m/s"
immersion_water = "sea_water")toml");
  text.replace(text.find("medium = \"water\""), 16, "medium = \"air\"");
  const Case c = loadCaseFromString(text, "inert.toml");
  const std::vector<std::string> w = inertWarnings(c);
  for (const char* key : {"environment.water_temperature", "environment.water_speed", "environment.immersion_water"}) {
    INFO(key);
    CHECK(mentions(w, std::string(key) + " has no effect: no segment is in water while the medium is air"));
  }
  CHECK(finalTemperatures(text) == finalTemperatures(text, {"environment.water_temperature=\"30 degC\""}));
  SECTION("a segment always in water makes them act") {
    const std::vector<std::string> always{"segments.head.surface.immersion=\"always\""};
    CHECK(inertWarnings(loadCaseFromString(text, "inert.toml", always)).empty());
    std::vector<std::string> warm = always;
    warm.push_back("environment.water_temperature=\"30 degC\"");
    CHECK(finalTemperatures(text, always) != finalTemperatures(text, warm));
  }
}

TEST_CASE("Water-side keys when only [[events]] put the animal in water say that the events give the water's own values",
          "[case][inert]") {
  // As an invented forager (a new-user trial): in air, bouts in a stream by [[events]] that make the medium water
  // with its own temperature and speed; [environment] water_temperature and water_speed, which are for segments
  // immersed while the medium is air, act nowhere, and the warning says why instead of reading as a bug.
  std::string text = swimmer(R"toml(water_temperature = "6 degC"
water_speed = "0.5 m/s")toml",
                             "", R"toml(
[[events]]
at = "2 min"
label = "bout 1"
environment = { medium = "water", temperature = "6 degC", speed = "0.5 m/s" }
[[events]]
at = "4 min"
environment = { medium = "air", temperature = "2 degC", speed = "3 m/s" }
[[events]]
at = "6 min"
label = "bout 2"
environment = { medium = "water", temperature = "6 degC", speed = "0.5 m/s" }
[[events]]
at = "8 min"
environment = { medium = "air", temperature = "2 degC", speed = "3 m/s" }
)toml");
  text.replace(text.find("medium = \"water\""), 16, "medium = \"air\"");
  const std::vector<std::string> w = inertWarnings(loadCaseFromString(text, "inert.toml"));
  CHECK(mentions(w, "inert.toml:9:21: environment.water_temperature has no effect: the [[events]] entries that put the "
                    "animal in water give the water's own temperature (their environment.temperature: events.0 at "
                    "120 s, events.2 at 360 s), and no segment is in water while the medium is air (no segment has "
                    "surface.immersion = \"always\"), where it would apply"));
  CHECK(mentions(w, "environment.water_speed has no effect: the [[events]] entries that put the animal in water give "
                    "the water's own speed (their environment.speed: events.0 at 120 s, events.2 at 360 s)"));
  CHECK(w.size() == 2);
  // True as worded: another value changes no temperature, bit for bit; the events' own water temperature does.
  const std::vector<double> a = finalTemperatures(text);
  CHECK(a == finalTemperatures(text, {"environment.water_temperature=\"30 degC\"", "environment.water_speed=\"2 m/s\""}));
  std::string warmer = text;
  warmer.replace(warmer.find("temperature = \"6 degC\", speed"), 22, "temperature = \"9 degC\"");
  CHECK(a != finalTemperatures(warmer));
}

TEST_CASE("Parameters of a controller off for the whole run warn and have no effect", "[case][inert]") {
  const std::string text = swimmer("", "", R"toml(
[control.shivering]
enabled = "off"
set_point = "38 degC"
gain = "0.8 1/K"
)toml");
  const std::vector<std::string> w = inertWarnings(loadCaseFromString(text, "inert.toml"));
  CHECK(mentions(w, "control.shivering.gain has no effect: [control.shivering] is off for the whole run"));
  CHECK(mentions(w, "control.shivering.set_point has no effect"));
  CHECK_FALSE(mentions(w, "control.shivering.enabled"));
  CHECK(finalTemperatures(text) == finalTemperatures(text, {"control.shivering.gain=\"0.1 1/K\""}));
  SECTION("switched on, by the table or by an event, they act and do not warn") {
    const std::vector<std::string> on{"control.shivering.enabled=\"on\""};
    CHECK(inertWarnings(loadCaseFromString(text, "inert.toml", on)).empty());
    std::vector<std::string> low = on;
    low.push_back("control.shivering.gain=\"0.1 1/K\"");
    CHECK(finalTemperatures(text, on) != finalTemperatures(text, low));
    const std::string event = text + R"toml(
[[events]]
at = "5 min"
control = { shivering = { enabled = "on" } }
)toml";
    CHECK(inertWarnings(loadCaseFromString(event, "inert.toml")).empty());
  }
}

TEST_CASE("Coat, substrate, respiration and tissue keys that cannot act warn", "[case][inert]") {
  std::string text = swimmer("substrate_temperature = \"15 degC\"\nsubstrate_conductance = \"50 W/(m2 K)\"",
                             "surface = { end_coat = \"off\" }", R"toml(
[body]
exhaled_temperature = "33 degC"
[tissues.blubber2]
base = "fat"
conductivity = "0.2 W/(m K)"
)toml");
  const std::vector<std::string> w = inertWarnings(loadCaseFromString(text, "inert.toml"));
  CHECK(mentions(w, "segments.trunk.surface.end_coat has no effect: segment trunk has no coat"));
  CHECK(mentions(w, "environment.substrate_temperature has no effect: no segment touches the substrate"));
  CHECK(mentions(w, "environment.substrate_conductance has no effect"));
  CHECK(mentions(w, "body.exhaled_temperature has no effect: there is no respiration"));
  CHECK(mentions(w, "[tissues.blubber2] has no effect: no segment uses the tissue blubber2"));
  CHECK(w.size() == 5);
  CHECK(finalTemperatures(text) ==
        finalTemperatures(text, {"segments.trunk.surface.end_coat=\"on\"", "environment.substrate_temperature=\"30 degC\"",
                                 "body.exhaled_temperature=\"30 degC\""}));
  SECTION("a contact set by an event makes the substrate's values act") {
    const std::string contact = text + R"toml(
[[events]]
at = "5 min"
surface = { trunk = { contact_fraction = 0.3 } }
)toml";
    const std::vector<std::string> w2 = inertWarnings(loadCaseFromString(contact, "inert.toml"));
    CHECK_FALSE(mentions(w2, "substrate"));
    CHECK(finalTemperatures(contact) != finalTemperatures(contact, {"environment.substrate_temperature=\"30 degC\""}));
  }
}

TEST_CASE("A shunt opening on a segment without shunts warns - with shunt_flow_max it acts", "[case][inert]") {
  // An open fraction of no flow is no flow (README, "A whole body": shunts pass shunt_flow_max times the opening).
  const std::string text = swimmer("", "vasomotor = { shunt = 1 }", "");
  const std::vector<std::string> w = inertWarnings(loadCaseFromString(text, "inert.toml"));
  CHECK(mentions(w, "segments.trunk.vasomotor.shunt has no effect: segment trunk has no arteriovenous shunts"));
  CHECK(finalTemperatures(text) == finalTemperatures(text, {"segments.trunk.vasomotor.shunt=0"}));
  const std::vector<std::string> flow{"segments.trunk.vessels.shunt_flow_max=\"20 mL/min\""};
  CHECK_FALSE(mentions(inertWarnings(loadCaseFromString(text, "inert.toml", flow)), "vasomotor.shunt"));
  std::vector<std::string> closed = flow;
  closed.push_back("segments.trunk.vasomotor.shunt=0");
  CHECK(finalTemperatures(text, flow) != finalTemperatures(text, closed));
}

TEST_CASE("Environment values of [[events]] with no effect warn once per key - followers do not", "[case][inert]") {
  const std::string text = swimmer("", "", R"toml(
[[events]]
at = "2 min"
environment = { temperature = "5 degC", air_temperature = "-10 degC" }
[[events]]
at = "4 min"
environment = { air_temperature = "-12 degC" }
)toml");
  const std::vector<std::string> w = inertWarnings(loadCaseFromString(text, "inert.toml"));
  REQUIRE(w.size() == 1);
  CHECK(w[0].find("inert.toml:") == 0);
  CHECK(w[0].find("events.0.environment.air_temperature (and 1 more [[events]] entries) has no effect") != std::string::npos);
}

TEST_CASE("A resolved case re-run warns of the keys the case gave, and of none it did not", "[case][inert][resolved]") {
  SECTION("no key given: the resolved case, which writes every value that acts, warns of nothing") {
    const std::string text = swimmer("");
    const Case c = loadCaseFromString(text, "inert.toml");
    REQUIRE(inertWarnings(c).empty());
    const std::string resolved = resolvedCaseToml(c);
    CHECK(resolved.find("air_temperature") == std::string::npos);  // no effect, not given: left out
    CHECK(resolved.find("sky_view") == std::string::npos);
    const Case again = loadCaseFromString(resolved, "resolved.toml");
    CHECK(inertWarnings(again).empty());
    CHECK(finalTemperatures(text) == finalTemperatures(resolved));
  }
  SECTION("keys given: the same warnings again") {
    const std::string text = swimmer("air_temperature = \"-5 degC\"", "", R"toml(
[control.shivering]
enabled = "off"
gain = "0.8 1/K"
)toml");
    const Case c = loadCaseFromString(text, "inert.toml");
    const Case again = loadCaseFromString(resolvedCaseToml(c), "resolved.toml");
    auto keys = [](const std::vector<std::string>& warnings) {
      std::vector<std::string> out;
      for (const std::string& w : warnings) out.push_back(w.substr(w.find(": ") + 2));  // without FILE:LINE:COLUMN
      std::sort(out.begin(), out.end());
      return out;
    };
    CHECK(keys(inertWarnings(c)).size() == 2);
    CHECK(keys(inertWarnings(again)) == keys(inertWarnings(c)));
  }
  SECTION("a resolved case of an earlier version (every key written, no second header line) warns of nothing") {
    std::string current = resolvedCaseToml(loadCaseFromString(swimmer(""), "inert.toml"));
    current.replace(current.find("[environment]\n"), 14, "[environment]\nair_temperature = 270.0\n");
    std::string legacy = current;
    const std::size_t line = legacy.find("# Keys with no effect");
    REQUIRE(line != std::string::npos);
    legacy.erase(line, legacy.find('\n', line) - line + 1);
    CHECK(inertWarnings(loadCaseFromString(legacy, "old.toml")).empty());
    CHECK(inertWarnings(loadCaseFromString(current, "new.toml")).size() == 1);
  }
}

TEST_CASE("InertKeys::reason answers for sweep and fit parameters", "[case][inert]") {
  const Case c = loadCaseFromString(swimmer(""), "inert.toml");
  const InertKeys inert(c);
  CHECK(inert.reason("environment.air_temperature"));
  CHECK(inert.reason("segments.0.surface.emissivity"));  // a segment by number
  CHECK(inert.reason("events.3.environment.relative_humidity"));
  CHECK_FALSE(inert.reason("environment.temperature"));
  CHECK_FALSE(inert.reason("environment.speed"));
  CHECK_FALSE(inert.reason("segments.trunk.length"));
}

TEST_CASE("No shipped case warns of a key with no effect after its resolved text is reloaded that it did not warn of",
          "[case][inert][resolved]") {
  for (const auto& entry : std::filesystem::directory_iterator(THERMORPH_SOURCE_DIR "/cases")) {
    if (entry.path().extension() != ".toml") continue;
    INFO(entry.path().filename().string());
    const Case c = loadCase(entry.path().string());
    const Case again = loadCaseFromString(resolvedCaseToml(c), (entry.path().parent_path() / "resolved.toml").string());
    CHECK(inertWarnings(again).size() <= inertWarnings(c).size());
  }
}

namespace {

//! "FILE:LINE:COLUMN" of the first `value` after `key` in the case text: the position the loader names, counted
//! here from the text itself (lines and columns from 1).
std::string positionOf(const std::string& text, const std::string& key, const std::string& value) {
  const std::size_t at = text.find(value, text.find(key));
  REQUIRE(at != std::string::npos);
  const std::size_t lineStart = text.rfind('\n', at) + 1;  // npos + 1 = 0 on the first line
  const auto line = std::count(text.begin(), text.begin() + static_cast<std::ptrdiff_t>(at), '\n') + 1;
  return "inert.toml:" + std::to_string(line) + ":" + std::to_string(at - lineStart + 1);
}

}  // namespace

TEST_CASE("Vasomotor targets of [[events]] on a segment without skin or shunts warn - where they can act they act",
          "[case][inert]") {
  // The swimmer's head has no skin layer (muscle only) and no segment has shunts (vessels.shunt_flow_max = 0).
  const std::string text = swimmer("", "", R"toml(
[[events]]
at = "2 min"
vasomotor = { head = { skin_perfusion = 0.2 }, trunk = { shunt = 1, skin_perfusion = 0.3 } }
[[events]]
at = "4 min"
vasomotor = { all = { shunt = 0.5 } }
)toml");
  const Case c = loadCaseFromString(text, "inert.toml");
  const std::vector<std::string> w = inertWarnings(c);
  CHECK(mentions(w, positionOf(text, "head = {", "0.2") +
                        ": events.0.vasomotor.head.skin_perfusion has no effect: segment head has no perfused skin"));
  CHECK(mentions(w, positionOf(text, "trunk = {", "1,") +
                        ": events.0.vasomotor.trunk.shunt has no effect: segment trunk has no arteriovenous shunts"));
  CHECK(mentions(w, positionOf(text, "all = {", "0.5") +
                        ": events.1.vasomotor.all.shunt has no effect: no segment has arteriovenous shunts"));
  CHECK_FALSE(mentions(w, "trunk.skin_perfusion"));  // the trunk has skin
  CHECK(w.size() == 3);
  const InertKeys inert(c);
  CHECK(inert.reason("events.0.vasomotor.head.skin_perfusion"));
  CHECK(inert.reason("events.1.vasomotor.all.shunt"));
  CHECK_FALSE(inert.reason("events.0.vasomotor.trunk.skin_perfusion"));
  // No effect: other values give the same temperatures bit for bit ...
  const std::vector<double> base = finalTemperatures(text);
  CHECK(base == finalTemperatures(text, {"events.0.vasomotor.head.skin_perfusion=3", "events.0.vasomotor.trunk.shunt=0",
                                         "events.1.vasomotor.all.shunt=1"}));
  // ... while the trunk's skin target acts.
  CHECK(base != finalTemperatures(text, {"events.0.vasomotor.trunk.skin_perfusion=3"}));
  SECTION("with shunts on the trunk the openings act and do not warn") {
    const std::vector<std::string> flow{"segments.trunk.vessels.shunt_flow_max=\"20 mL/min\""};
    const std::vector<std::string> w2 = inertWarnings(loadCaseFromString(text, "inert.toml", flow));
    CHECK_FALSE(mentions(w2, ".shunt has no effect"));
    CHECK(mentions(w2, "events.0.vasomotor.head.skin_perfusion has no effect"));
    std::vector<std::string> closed = flow, allClosed = flow;
    closed.push_back("events.0.vasomotor.trunk.shunt=0");
    allClosed.push_back("events.1.vasomotor.all.shunt=0");
    const std::vector<double> open = finalTemperatures(text, flow);
    CHECK(open != finalTemperatures(text, closed));
    CHECK(open != finalTemperatures(text, allClosed));
  }
}

TEST_CASE("Metabolic multipliers on a body whose tissues produce no heat warn - with metabolic heat they act",
          "[case][inert]") {
  // The swimmer's tissues as the built-in ones without metabolic heat (values illustrative).
  std::string text = swimmer("", "", R"toml(
[body]
activity = 2
[tissues.lean]
base = "muscle"
metabolic_heat = "0 W/m3"
[tissues.derm]
base = "skin"
metabolic_heat = "0 W/m3"
[[events]]
at = "2 min"
metabolism = { activity = 3, hypometabolism = 0.5 }
)toml");
  for (const auto& [from, to] : {std::pair<std::string, std::string>{"tissue = \"muscle\"", "tissue = \"lean\""},
                                 {"tissue = \"skin\"", "tissue = \"derm\""}})
    for (std::size_t at; (at = text.find(from)) != std::string::npos;) text.replace(at, from.size(), to);
  const std::vector<std::string> w = inertWarnings(loadCaseFromString(text, "inert.toml"));
  CHECK(mentions(w, positionOf(text, "[body]", "2") +
                        ": body.activity has no effect: no tissue of the body produces metabolic heat"));
  CHECK(mentions(w, positionOf(text, "metabolism = {", "3") + ": events.0.metabolism.activity has no effect"));
  CHECK(mentions(w, positionOf(text, "metabolism = {", "0.5") + ": events.0.metabolism.hypometabolism has no effect"));
  CHECK(w.size() == 3);
  CHECK(finalTemperatures(text) == finalTemperatures(text, {"body.activity=1", "events.0.metabolism.activity=10",
                                                            "events.0.metabolism.hypometabolism=1"}));
  SECTION("muscle that produces heat makes them act") {
    const std::vector<std::string> heat{"tissues.lean.metabolic_heat=\"700 W/m3\""};
    CHECK(inertWarnings(loadCaseFromString(text, "inert.toml", heat)).empty());
    const std::vector<double> warm = finalTemperatures(text, heat);
    for (const char* change : {"body.activity=1", "events.0.metabolism.activity=10", "events.0.metabolism.hypometabolism=1"}) {
      INFO(change);
      std::vector<std::string> changed = heat;
      changed.push_back(change);
      CHECK(warm != finalTemperatures(text, changed));
    }
  }
}

TEST_CASE("The body-wide vasomotor controller with every skin under local control warns and drives nothing",
          "[case][inert][control]") {
  // Only the trunk has skin (the head is muscle only); [control.local.trunk] takes it (values illustrative).
  const std::string vasomotor = R"toml(
[control.vasomotor]
set_point = "37.5 degC"
gain = "2 1/K"
)toml";
  const std::string local = R"toml(
[control.local.trunk]
segments = "trunk"
set_point = "30 degC"
)toml";
  const std::string text = swimmer("", "", vasomotor + local);
  const std::vector<std::string> w = inertWarnings(loadCaseFromString(text, "inert.toml"));
  CHECK(mentions(w, positionOf(text, "[control.vasomotor]", "\"2 1/K\"") +
                        ": control.vasomotor.gain has no effect: every segment with a layer of role skin or shunts"));
  CHECK(mentions(w, "control.vasomotor.set_point has no effect"));
  CHECK(w.size() == 2);
  const Body body(loadCaseFromString(text, "inert.toml"));
  for (const Controller& k : body.network().controllers) CHECK(k.name.rfind("vasomotor", 0) != 0);  // none built
  const std::vector<double> base = finalTemperatures(text);
  CHECK(base == finalTemperatures(text, {"control.vasomotor.gain=\"0.1 1/K\"", "control.vasomotor.enabled=\"off\"",
                                         "control.vasomotor.set_point=\"36 degC\""}));
  CHECK(base != finalTemperatures(text, {"control.local.trunk.set_point=\"20 degC\""}));  // the local one acts
  SECTION("without the local controller the body-wide one acts on the trunk and does not warn") {
    const std::string alone = swimmer("", "", vasomotor);
    CHECK(inertWarnings(loadCaseFromString(alone, "inert.toml")).empty());
    CHECK(finalTemperatures(alone) != finalTemperatures(alone, {"control.vasomotor.gain=\"0.1 1/K\""}));
  }
}

TEST_CASE("A panting multiplier of [[events]] without breathing warns - with a respiratory segment in air it acts",
          "[case][inert]") {
  // The swimmer has no respiratory segment; with one (the head, held in air) the ventilation multiplier acts.
  const std::string text = swimmer("relative_humidity = \"50 %\"\nair_temperature = \"5 degC\"", "", R"toml(
[[events]]
at = "2 min"
respiration = { panting = 3 }
)toml");
  const std::vector<std::string> w = inertWarnings(loadCaseFromString(text, "inert.toml"));
  CHECK(mentions(w, positionOf(text, "respiration = {", "3") +
                        ": events.0.respiration.panting has no effect: there is no respiration"));
  CHECK(finalTemperatures(text) == finalTemperatures(text, {"events.0.respiration.panting=1"}));
  SECTION("breathing from a head in air") {
    const std::vector<std::string> breathing{"body.respiratory_segment=\"head\"",
                                             "segments.head.surface.immersion=\"never\""};
    CHECK_FALSE(mentions(inertWarnings(loadCaseFromString(text, "inert.toml", breathing)), "panting"));
    std::vector<std::string> calm = breathing;
    calm.push_back("events.0.respiration.panting=1");
    CHECK(finalTemperatures(text, breathing) != finalTemperatures(text, calm));
    // The head held under water: no breathing again.
    const std::vector<std::string> diving{"body.respiratory_segment=\"head\""};
    CHECK(mentions(inertWarnings(loadCaseFromString(text, "inert.toml", diving)),
                   "events.0.respiration.panting has no effect: the respiratory segment head is in water"));
  }
}

TEST_CASE("Superficial return without perfused tissue warns - with it, it acts even without an exchanger",
          "[case][inert]") {
  // A fin of unperfused keratin-like tissue on the swimmer's trunk (values illustrative): no venous return to route,
  // and no superficial veins anywhere (no shunts, no superficial return that flows) for their conductance to join.
  const std::string fin = R"toml(
[[segments]]
name = "fin"
parent = "trunk"
shape = "cylinder"
length = "10 cm"
axial_cells = 2
layers = [{ tissue = "keratin", thickness = "1 cm", cells = 2 }]
vasomotor = { superficial_return = 0.5 }
vessels = { superficial_conductance = "0.002 W/K" }
[tissues.keratin]
base = "bone"
perfusion = "0 1/s"
[[events]]
at = "3 min"
vasomotor = { fin = { superficial_return = 0.8 } }
)toml";
  const std::string text = swimmer("", "", fin);
  const std::vector<std::string> w = inertWarnings(loadCaseFromString(text, "inert.toml"));
  CHECK(mentions(w, positionOf(text, "vasomotor = { superficial_return", "0.5") +
                        ": segments.fin.vasomotor.superficial_return has no effect: segment fin has no perfused tissue"));
  CHECK(mentions(w, positionOf(text, "fin = { superficial_return", "0.8") +
                        ": events.0.vasomotor.fin.superficial_return has no effect: segment fin has no perfused tissue"));
  CHECK(mentions(w, ": segments.fin.vessels.superficial_conductance has no effect: segment fin has no superficial veins"));
  CHECK(w.size() == 3);
  const std::vector<double> base = finalTemperatures(text);
  CHECK(base == finalTemperatures(text, {"segments.fin.vasomotor.superficial_return=0",
                                         "events.0.vasomotor.fin.superficial_return=0.1",
                                         "segments.fin.vessels.superficial_conductance=\"0.05 W/K\""}));
  SECTION("perfused, without a countercurrent exchanger, the return and the veins' conductance act") {
    // No vessels.countercurrent_conductance anywhere (default 0): the superficial veins still hold blood and
    // exchange heat with the skin, so routing the return through them changes the temperatures.
    const std::vector<std::string> perfused{"tissues.keratin.perfusion=\"10 mL/(100 g min)\""};
    const std::vector<std::string> w2 = inertWarnings(loadCaseFromString(text, "inert.toml", perfused));
    CHECK_FALSE(mentions(w2, "superficial_return"));
    CHECK_FALSE(mentions(w2, "superficial_conductance"));
    std::vector<std::string> deep = perfused, conductance = perfused;
    deep.push_back("segments.fin.vasomotor.superficial_return=0");
    conductance.push_back("segments.fin.vessels.superficial_conductance=\"0.05 W/K\"");
    const std::vector<double> routed = finalTemperatures(text, perfused);
    CHECK(routed != finalTemperatures(text, deep));
    CHECK(routed != finalTemperatures(text, conductance));
    // The trunk carries the fin's superficial return: its veins' conductance acts (not given: it does not warn).
    CHECK_FALSE(InertKeys(loadCaseFromString(text, "inert.toml", perfused)).reason("segments.trunk.vessels.superficial_conductance"));
    CHECK(InertKeys(loadCaseFromString(text, "inert.toml")).reason("segments.trunk.vessels.superficial_conductance"));
  }
}

TEST_CASE("A shunt gain with no shunts to open warns and builds no state - with shunts it acts", "[case][inert][control]") {
  // The swimmer has no shunts (vessels.shunt_flow_max = 0); the core is held near a set point of 36 degC so that an
  // opening shunt_gain x (T - set_point) lies inside [0, 1] (values illustrative).
  const std::string vasomotor = R"toml(
[control.vasomotor]
set_point = "36 degC"
shunt_gain = "0.5 1/K"
)toml";
  const std::string text = swimmer("", "", vasomotor);
  const std::vector<std::string> w = inertWarnings(loadCaseFromString(text, "inert.toml"));
  CHECK(mentions(w, positionOf(text, "shunt_gain", "\"0.5 1/K\"") +
                        ": control.vasomotor.shunt_gain has no effect: no segment with arteriovenous shunts"));
  CHECK(w.size() == 1);
  const Body body(loadCaseFromString(text, "inert.toml"));
  for (const Controller& k : body.network().controllers) CHECK(k.name != "vasomotor_shunts");
  const std::vector<double> base = finalTemperatures(text);
  CHECK(base == finalTemperatures(text, {"control.vasomotor.shunt_gain=\"0.2 1/K\""}));
  CHECK(base != finalTemperatures(text, {"control.vasomotor.gain=\"0.2 1/K\""}));  // the skin perfusion acts
  SECTION("a local controller of segments without shunts") {
    const std::string local = swimmer("", "", "[control.local.trunk]\nsegments = \"trunk\"\nshunt_gain = \"-1 1/K\"\n");
    CHECK(mentions(inertWarnings(loadCaseFromString(local, "inert.toml")),
                   ": control.local.trunk.shunt_gain has no effect: no segment [control.local.trunk] names has "
                   "arteriovenous shunts"));
    CHECK(finalTemperatures(local) == finalTemperatures(local, {"control.local.trunk.shunt_gain=\"2 1/K\""}));
  }
  SECTION("with shunts on the trunk the gain acts and does not warn") {
    const std::vector<std::string> flow{"segments.trunk.vessels.shunt_flow_max=\"20 mL/min\""};
    CHECK_FALSE(mentions(inertWarnings(loadCaseFromString(text, "inert.toml", flow)), "shunt_gain"));
    std::vector<std::string> low = flow;
    low.push_back("control.vasomotor.shunt_gain=\"0.2 1/K\"");
    CHECK(finalTemperatures(text, flow) != finalTemperatures(text, low));
  }
}

TEST_CASE("Keys a gain of 0 leaves without effect warn - with the gain they act", "[case][inert][control]") {
  // Zero by value: a controller whose gains are 0 gives the same output at every temperature, equal to its value
  // when off (shivering 0, panting and skin perfusion 1), so its set point and time constant set nothing; the
  // shunts of a vasomotor controller with shunt_gain 0 stay closed, so their openings move no blood. The signal is
  // not among these keys (its nodes stay in the Jacobian's pattern and move the steps).
  const std::string controls = R"toml(
[body]
respiratory_segment = "head"
[control.shivering]
gain = "0 1/K"
set_point = "37.5 degC"
time_constant = "3 min"
[control.panting]
gain = "0 1/K"
set_point = "36 degC"
max = 4
[control.vasomotor]
gain = "0 1/K"
shunt_gain = "0 1/K"
set_point = "36 degC"
time_constant = "3 min"
)toml";
  const std::string text = swimmer("air_temperature = \"30 degC\"", "vasomotor = { shunt = 0.6 }\n"
                                                                      "vessels = { shunt_flow_max = \"20 mL/min\" }",
                                   controls + "[[events]]\nat = \"5 min\"\ncontrol = { vasomotor = { set_point = \"35 degC\" } }\n");
  const std::vector<std::string> flags{"segments.head.surface.immersion=\"never\""};
  const Case c = loadCaseFromString(text, "inert.toml", flags);
  const std::vector<std::string> w = inertWarnings(c);
  for (const char* key : {"control.shivering.set_point", "control.shivering.time_constant", "control.panting.set_point",
                          "control.panting.max", "control.vasomotor.set_point", "control.vasomotor.time_constant",
                          "segments.trunk.vasomotor.shunt", "events.0.control.vasomotor.set_point"}) {
    INFO(key);
    CHECK(mentions(w, std::string(key) + " has no effect: "));
  }
  CHECK(mentions(w, positionOf(text, "[control.shivering]", "\"37.5 degC\"") +
                        ": control.shivering.set_point has no effect: control.shivering.gain = 0"));
  CHECK(mentions(w, ": segments.trunk.vasomotor.shunt has no effect: the shunts of segment trunk follow "
                    "[control.vasomotor] with shunt_gain = 0"));
  CHECK(w.size() == 8);
  for (const char* key : {"control.shivering.gain", "control.vasomotor.gain", "control.vasomotor.shunt_gain",
                          "control.vasomotor.min", "control.vasomotor.signal"})
    CHECK_FALSE(InertKeys(c).reason(key));
  std::vector<std::string> moved = flags;
  for (const char* o : {"control.shivering.set_point=\"30 degC\"", "control.shivering.time_constant=\"20 s\"",
                        "control.shivering.max_power=\"50 W\"", "control.panting.set_point=\"30 degC\"",
                        "control.panting.max=2", "control.panting.time_constant=\"5 s\"",
                        "control.vasomotor.set_point=\"30 degC\"", "control.vasomotor.time_constant=\"10 s\"",
                        "segments.trunk.vasomotor.shunt=1", "events.0.control.vasomotor.set_point=\"39 degC\""})
    moved.push_back(o);
  const std::vector<double> base = finalTemperatures(text, flags);
  CHECK(base == finalTemperatures(text, moved));
  SECTION("with gains the same keys act and do not warn") {
    std::vector<std::string> gains = flags;
    for (const char* o : {"control.shivering.gain=\"0.5 1/K\"", "control.panting.gain=\"3 1/K\"",
                          "control.vasomotor.shunt_gain=\"0.5 1/K\""})
      gains.push_back(o);
    const std::vector<std::string> w2 = inertWarnings(loadCaseFromString(text, "inert.toml", gains));
    CHECK(w2.empty());
    const std::vector<double> acting = finalTemperatures(text, gains);
    for (const char* o : {"control.shivering.set_point=\"36.5 degC\"", "control.panting.set_point=\"37 degC\"",
                          "control.vasomotor.set_point=\"30 degC\"", "segments.trunk.vasomotor.shunt=1"}) {
      INFO(o);
      std::vector<std::string> one = gains;
      one.push_back(o);
      CHECK(acting != finalTemperatures(text, one));
    }
  }
  SECTION("switched off by an event, the closed shunts open to the segment's value and the lag acts") {
    std::vector<std::string> off = flags;
    off.push_back("events.0.control.vasomotor.enabled=\"off\"");
    const std::vector<std::string> w2 = inertWarnings(loadCaseFromString(text, "inert.toml", off));
    CHECK_FALSE(mentions(w2, "segments.trunk.vasomotor.shunt"));
    CHECK_FALSE(mentions(w2, "control.vasomotor.time_constant"));
    CHECK(mentions(w2, "control.vasomotor.set_point has no effect"));  // still no output depends on it
    std::vector<std::string> shunt = off, lag = off;
    shunt.push_back("segments.trunk.vasomotor.shunt=1");
    lag.push_back("control.vasomotor.time_constant=\"10 s\"");
    const std::vector<double> switched = finalTemperatures(text, off);
    CHECK(switched != finalTemperatures(text, shunt));
    CHECK(switched != finalTemperatures(text, lag));
  }
}

TEST_CASE("Integration keys of [run] have no effect on a steady state: refused in steady sweeps, not warned",
          "[case][inert]") {
  // A steady state is solved at fixed tolerances (drivers/simulation.cpp): run.rtol, atol, max_step and
  // output_interval set nothing; run.duration does (the automatic grid's stepped-surroundings rule reads it). The
  // loader does not know the command, and a case serves `run` and `steady` alike: no warning.
  std::string text = swimmer("");
  text.replace(text.find("output_interval = \"5 min\""), 25, "output_interval = \"5 min\"\nrtol = 1e-7\nmax_step = \"30 s\"");
  const Case c = loadCaseFromString(text, "inert.toml");
  CHECK(inertWarnings(c).empty());
  CHECK_FALSE(InertKeys(c).reason("run.rtol"));
  for (const char* key : {"run.rtol", "run.atol", "run.max_step", "run.output_interval"}) {
    INFO(key);
    CHECK(InertKeys(c, true).reason(key) == "the sweep solves each run's steady state (--steady or sweep.mode = "
                                            "\"steady\"), not an integration over time: the output interval and the "
                                            "integrator's tolerances and largest step apply to transient runs only");
  }
  CHECK_FALSE(InertKeys(c, true).reason("run.duration"));
  CHECK_FALSE(InertKeys(c, true).reason("run.initial_temperature"));  // the relaxation's start
  auto steady = [&](const std::vector<std::string>& overrides) {
    const Body body(loadCaseFromString(text, "inert.toml", overrides));
    RunOptions options = silentRun();
    std::vector<double> last;
    options.observer = [&](double, std::span<const double> t, const RunSummary&) { last.assign(t.begin(), t.end()); };
    REQUIRE(runSteady(body, options).complete);
    REQUIRE(!last.empty());
    return last;
  };
  const std::vector<std::string> other{"run.rtol=1e-3", "run.atol=\"0.1 K\"", "run.max_step=\"1 s\"",
                                       "run.output_interval=\"1 min\""};
  CHECK(steady({}) == steady(other));
  CHECK(steady({}) != steady({"environment.temperature=\"12 degC\""}));  // the comparison can fail
  CHECK(finalTemperatures(text) != finalTemperatures(text, {"run.rtol=1e-3"}));  // a transient run uses them
}

TEST_CASE("A CIVD of opening 0 warns, builds no states and changes nothing - with an opening it acts",
          "[case][inert][control]") {
  // The swimmer's trunk with shunts under a local controller whose CIVD would open below a skin of 36 degC (the skin
  // in 10 degC water is far below it; values illustrative). With opening = 0 the extra shunt flow is 0 at every
  // temperature: the [control.local.trunk.civd] table must leave every temperature as without it, bit for bit.
  const std::string without = swimmer("", "vessels = { shunt_flow_max = \"20 mL/min\" }",
                                      "[control.local.trunk]\nsegments = \"trunk\"\nshunt_gain = \"-0.5 1/K\"\n");
  const std::string text =
      without + "civd = { threshold = \"36 degC\", width = \"1 K\", opening = 0, time_constant = \"1 min\" }\n";
  const Case c = loadCaseFromString(text, "inert.toml");
  const std::vector<std::string> w = inertWarnings(c);
  // One warning for the table, at its first given key in key order (opening).
  CHECK(mentions(w, positionOf(text, "civd = {", "0,") +
                        ": [control.local.trunk.civd] has no effect: control.local.trunk.civd.opening = 0: "
                        "cold-induced vasodilation adds no shunt flow at any temperature"));
  CHECK(w.size() == 1);
  for (const char* key : {"control.local.trunk.civd.threshold", "control.local.trunk.civd.width",
                          "control.local.trunk.civd.time_constant", "control.local.trunk.civd.stages"})
    CHECK(InertKeys(c).reason(key));
  CHECK_FALSE(InertKeys(c).reason("control.local.trunk.shunt_gain"));
  const Body body(c);
  for (const Controller& k : body.network().controllers) CHECK(k.name.find("civd") == std::string::npos);
  const std::vector<double> base = finalTemperatures(text);
  CHECK(base == finalTemperatures(without));  // the table removed
  CHECK(base == finalTemperatures(text, {"control.local.trunk.civd.threshold=\"20 degC\"",
                                         "control.local.trunk.civd.width=\"3 K\"",
                                         "control.local.trunk.civd.time_constant=\"10 s\"",
                                         "control.local.trunk.civd.stages=3"}));
  SECTION("with an opening the CIVD acts and does not warn") {
    const std::vector<std::string> open{"control.local.trunk.civd.opening=0.5"};
    const Case acting = loadCaseFromString(text, "inert.toml", open);
    CHECK(inertWarnings(acting).empty());
    CHECK_FALSE(InertKeys(acting).reason("control.local.trunk.civd.threshold"));
    const std::vector<double> opened = finalTemperatures(text, open);
    CHECK(opened != base);
    std::vector<std::string> lower = open;
    lower.push_back("control.local.trunk.civd.threshold=\"20 degC\"");
    CHECK(opened != finalTemperatures(text, lower));
  }
}

TEST_CASE("A segment's skin perfusion, shunt and superficial return set by an [[events]] step at t = 0 warn - later, "
          "they act", "[case][inert]") {
  // The swimmer's trunk (perfused muscle and skin) with shunts; an event at t = 0 s sets the three values as a step,
  // so the segment's own values never act (PhysiologyModel::setInterval), not even in which terms Body builds: here
  // the event closes the superficial return the segment opens. Values illustrative.
  const std::string trunk = "vessels = { shunt_flow_max = \"20 mL/min\" }\n";
  const std::string event =
      "[[events]]\nat = \"0 s\"\nvasomotor = { trunk = { superficial_return = 0, shunt = 0.6, skin_perfusion = 2 } }\n";
  const std::string without = swimmer("", trunk, event);
  const std::string text =
      swimmer("", trunk + "vasomotor = { superficial_return = 0.5, shunt = 0.2, skin_perfusion = 0.3 }", event);
  const std::vector<std::string> w = inertWarnings(loadCaseFromString(text, "inert.toml"));
  const std::pair<const char*, const char*> values[] = {
      {"superficial_return", "0.5"}, {"shunt", "0.2"}, {"skin_perfusion", "0.3"}};
  const std::pair<const char*, const char*> eventValues[] = {
      {"superficial_return", "0,"}, {"shunt", "0.6"}, {"skin_perfusion", "2 }"}};
  for (std::size_t k = 0; k < 3; ++k) {
    const std::string key = values[k].first;
    INFO(key);
    CHECK(mentions(w, positionOf(text, "vasomotor = { superficial_return = 0.5", values[k].second) +
                          ": segments.trunk.vasomotor." + key + " has no effect: events.0.vasomotor.trunk." + key + " (" +
                          positionOf(text, "trunk = { superficial_return = 0,", eventValues[k].second) +
                          ") sets it from t = 0 s"));
  }
  CHECK(w.size() == 3);
  const std::vector<double> base = finalTemperatures(text);
  CHECK(base == finalTemperatures(without));  // the segment's values removed
  CHECK(base == finalTemperatures(text, {"segments.trunk.vasomotor.superficial_return=0.9",
                                         "segments.trunk.vasomotor.shunt=1",
                                         "segments.trunk.vasomotor.skin_perfusion=0.05"}));
  CHECK(InertKeys(loadCaseFromString(text, "inert.toml")).reason("segments.trunk.vasomotor.superficial_return"));
  CHECK(InertKeys(loadCaseFromString(text, "inert.toml")).reason("segments.trunk.vasomotor.skin_perfusion"));
  SECTION("\"all\" at t = 0 s: the same") {
    std::string all = text;
    all.replace(all.find("{ trunk = {"), 11, "{ all = {");
    const std::vector<std::string> w2 = inertWarnings(loadCaseFromString(all, "inert.toml"));
    CHECK(mentions(w2, ": segments.trunk.vasomotor.superficial_return has no effect: events.0.vasomotor.all.superficial_return"));
    CHECK(mentions(w2, ": segments.trunk.vasomotor.skin_perfusion has no effect: events.0.vasomotor.all.skin_perfusion"));
    CHECK(w2.size() == 3);
  }
  SECTION("an event later, or ramped from t = 0 s, lets the segment's values act, and does not warn") {
    for (const char* o : {"events.0.at=\"1 min\"", "events.0.ramp=\"2 min\""}) {
      INFO(o);
      CHECK(inertWarnings(loadCaseFromString(text, "inert.toml", {o})).empty());
      const std::vector<double> later = finalTemperatures(text, {o});
      CHECK(later != finalTemperatures(text, {o, "segments.trunk.vasomotor.superficial_return=0.9"}));
      CHECK(later != finalTemperatures(text, {o, "segments.trunk.vasomotor.shunt=1"}));
      CHECK(later != finalTemperatures(text, {o, "segments.trunk.vasomotor.skin_perfusion=0.05"}));
    }
  }
  SECTION("on the automatic grid and from a steady start: the skin perfusion still never acts") {
    // The automatic grid counts a child's smallest blood flow over the run (models/grid.cpp: the stream that an
    // exchanger of the parent brings to the child), its skin's at the segment's own value only when no step at
    // t = 0 sets it over. A flipper with skin on the swimmer's trunk with an exchanger; the trunk's cells left out.
    std::string automatic = swimmer("", "vessels = { countercurrent_conductance = \"2 W/K\" }\n", R"toml(
[[segments]]
name = "flipper"
parent = "trunk"
shape = "cylinder"
length = "12 cm"
layers = [{ tissue = "muscle", thickness = "1 cm" }, { tissue = "skin", thickness = "0.2 cm" }]
vasomotor = { skin_perfusion = 0.3 }
[[events]]
at = "0 s"
vasomotor = { flipper = { skin_perfusion = 2 } }
)toml");
    for (const std::string cut : {"axial_cells = 3\n", ", cells = 4", ", cells = 1"}) {
      REQUIRE(automatic.find(cut) != std::string::npos);
      automatic.erase(automatic.find(cut), cut.size());
    }
    CHECK(mentions(inertWarnings(loadCaseFromString(automatic, "inert.toml")),
                   ": segments.flipper.vasomotor.skin_perfusion has no effect: events.0.vasomotor.flipper.skin_perfusion"));
    // Two hours (the event later at 1 h: steps of the surroundings that far apart leave the trunk's axial cells to
    // the flipper's stream): 136 cells at the flipper's skin perfusion 0.3, 180 at 0.01 (child NTU 15 and 21).
    const std::string low = "segments.flipper.vasomotor.skin_perfusion=0.01";
    for (const std::vector<std::string>& o : {std::vector<std::string>{"run.duration=\"2 h\""},
                                              {"run.duration=\"2 h\"", "run.initial=\"steady\""}}) {
      INFO((o.size() == 1 ? "uniform start" : o.back()));
      std::vector<std::string> lowered = o;
      lowered.push_back(low);
      CHECK(finalTemperatures(automatic, o) == finalTemperatures(automatic, lowered));
      // Without the step (the event later), the low value acts: on the grid (the trunk's axial cells) and the run.
      std::vector<std::string> later = o, laterLowered = lowered;
      later.push_back("events.0.at=\"1 h\"");
      laterLowered.push_back("events.0.at=\"1 h\"");
      CHECK(loadCaseFromString(automatic, "inert.toml", later).segments[0].axialCells !=
            loadCaseFromString(automatic, "inert.toml", laterLowered).segments[0].axialCells);
      CHECK(finalTemperatures(automatic, later) != finalTemperatures(automatic, laterLowered));
    }
  }
}

TEST_CASE("A grading on a single cell warns and changes nothing - on more cells, or refined, it acts", "[case][inert]") {
  // The swimmer's skin has one radial cell; here graded, and the trunk on one axial cell graded too, with shunts, an
  // exchanger and the head attached (the terms Body spreads along graded cells: LayerSpec::cellEdges, axialCellEdges).
  // Values illustrative.
  std::string text = swimmer("", R"toml(vessels = { shunt_flow_max = "20 mL/min", countercurrent_conductance = "0.05 W/K" }
vasomotor = { shunt = 0.5 }
axial_grading = 4
)toml");
  text.replace(text.find("cells = 1 }"), 11, "cells = 1, grading = 5 }");
  text.replace(text.find("axial_cells = 3"), 15, "axial_cells = 1");
  const std::vector<std::string> w = inertWarnings(loadCaseFromString(text, "inert.toml"));
  CHECK(mentions(w, positionOf(text, "grading = 5", "5") + ": segments.trunk.layers.1.grading has no effect: layer 1 "
                    "(skin) of segment trunk has one radial cell (cells = 1), which spans the layer whatever its grading"));
  CHECK(mentions(w, positionOf(text, "axial_grading = 4", "4") + ": segments.trunk.axial_grading has no effect: segment "
                    "trunk has one axial cell (axial_cells = 1), which spans its length whatever the grading"));
  CHECK(w.size() == 2);
  const std::vector<double> base = finalTemperatures(text);
  CHECK(base == finalTemperatures(text, {"segments.trunk.layers.1.grading=1", "segments.trunk.axial_grading=1"}));
  CHECK(base == finalTemperatures(text, {"segments.trunk.layers.1.grading=500", "segments.trunk.axial_grading=300"}));
  const Case c = loadCaseFromString(text, "inert.toml");
  CHECK(InertKeys(c).reason("segments.trunk.layers.1.grading"));
  CHECK(InertKeys(c).reason("segments.0.axial_grading"));  // a segment by number, as --set takes it
  SECTION("the resolved case warns of the same two keys, also of a given grading = 1") {
    std::string uniform = text;
    uniform.replace(uniform.find("grading = 5"), 11, "grading = 1");
    for (const std::string& t : {text, uniform}) {
      const Case again = loadCaseFromString(resolvedCaseToml(loadCaseFromString(t, "inert.toml")), "resolved.toml");
      const std::vector<std::string> w2 = inertWarnings(again);
      CHECK(mentions(w2, ": segments.trunk.layers.1.grading has no effect"));
      CHECK(mentions(w2, ": segments.trunk.axial_grading has no effect"));
      CHECK(w2.size() == 2);
    }
  }
  SECTION("more cells, or the grid refined, and the gradings act without a warning") {
    for (const std::vector<std::string>& o :
         {std::vector<std::string>{"segments.trunk.layers.1.cells=3", "segments.trunk.axial_cells=3"},
          {"run.grid_refinement=2"}}) {
      INFO(o.front());
      CHECK(inertWarnings(loadCaseFromString(text, "inert.toml", o)).empty());
      const std::vector<double> graded = finalTemperatures(text, o);
      std::vector<std::string> radialSet = o, axialSet = o;
      radialSet.push_back("segments.trunk.layers.1.grading=1");
      axialSet.push_back("segments.trunk.axial_grading=1");
      CHECK(graded != finalTemperatures(text, radialSet));
      CHECK(graded != finalTemperatures(text, axialSet));
    }
  }
}

TEST_CASE("A coat's wet conductivity acts in air where its segment is wet, and only there", "[case][inert]") {
  // The swimmer in air with a furred trunk: the coat's wet_conductivity has no effect while the trunk is dry (it warns,
  // and other values give the same temperatures bit for bit); with surface.wetted_fraction above 0 (static, or set by
  // an event) the coat conducts partly wet in air (Body::setCoat), so it acts and does not warn.
  std::string text = swimmer("", "coat = { material = \"pelt\", thickness = \"1 cm\", cells = 2 }",
                             "[tissues.pelt]\nbase = \"fur\"\nwet_conductivity = 0.2\n");
  text.replace(text.find("medium = \"water\""), 16, "medium = \"air\"");
  const std::string key = "tissues.pelt.wet_conductivity has no effect";
  CHECK(mentions(inertWarnings(loadCaseFromString(text, "inert.toml")), key));
  CHECK(finalTemperatures(text) == finalTemperatures(text, {"tissues.pelt.wet_conductivity=0.4"}));
  const std::vector<std::string> wet{"segments.trunk.surface.wetted_fraction=0.3"};
  CHECK_FALSE(mentions(inertWarnings(loadCaseFromString(text, "inert.toml", wet)), key));
  std::vector<std::string> wetter = wet;
  wetter.push_back("tissues.pelt.wet_conductivity=0.4");
  CHECK(finalTemperatures(text, wet) != finalTemperatures(text, wetter));
  const std::string event = text + "[[events]]\nat = \"5 min\"\nsurface = { trunk = { wetted_fraction = 0.5 } }\n";
  CHECK_FALSE(mentions(inertWarnings(loadCaseFromString(event, "inert.toml")), key));
}
