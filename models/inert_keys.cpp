#include "models/inert_keys.hpp"

#include <algorithm>
#include <cctype>
#include <set>
#include <utility>

#include <fmt/format.h>

#include "models/environment.hpp"
#include "models/grid.hpp"

namespace thermorph {

namespace {

using V = EnvironmentVariable;

//! [run] keys of the integration over time: a steady state is solved by a relaxation at fixed tolerances and
//! KINSOL (drivers/simulation.cpp, steadyTemperatures), which read none of them. (run.duration and run.initial act:
//! the automatic grid's stepped-surroundings rule reads them, models/grid.cpp forcingInterval; so does
//! run.initial_temperature, the relaxation's start.)
constexpr const char* kSteadyRunKeys[] = {"run.output_interval", "run.rtol", "run.atol", "run.max_step"};
constexpr const char* kSteadyWhy = "the sweep solves each run's steady state (--steady or sweep.mode = \"steady\"), not "
                                   "an integration over time: the output interval and the integrator's tolerances and "
                                   "largest step apply to transient runs only";
constexpr std::size_t index(V v) { return static_cast<std::size_t>(v); }

//! Where a segment's faces can be: the fluids of the run (EnvironmentModel::fluid).
enum Fluid : std::size_t { MediumFluid, WaterInAir, AirInWater, kFluids };

}  // namespace

InertKeys::InertKeys(const Case& c, bool steady) : case_(c), steady_(steady) {
  environment();
  surfaces();
  controllers();
  vasomotor();
  metabolism();
  grids();
  others();
}

void InertKeys::environment() {
  const Case& c = case_;
  const EnvironmentSpec& spec = c.environment;
  // The media of the run: the one in effect from t = 0 (an event at 0 included), then each an event steps to. The
  // medium is constant between its steps, and so is which segments are in water (EnvironmentModel::inWater).
  // (No EnvironmentModel here: its construction resets the log of range warnings, and the resolved case is written
  // while a run's warnings are still being logged.)
  std::vector<SurroundingMedium> media{spec.medium};
  for (const EventSpec& e : c.events)
    if (e.medium) {
      if (e.at <= 0.0) media.front() = *e.medium;
      else media.push_back(*e.medium);
    }
  const std::size_t n = c.segments.size();
  std::array<bool, kEnvironmentVariables> used{};
  std::array<bool, kFluids> inFluid{}, correlationInFluid{};
  neverInAir_.assign(n, true);
  everInWater_.assign(n, false);
  for (std::size_t g = 0; g < n; ++g) emissivity_.push_back(EnvironmentModel::segmentEmissivity(c.segments[g], spec));
  std::size_t respiratory = n;
  for (std::size_t g = 0; g < n; ++g)
    if (c.segments[g].name == c.body.respiratorySegment) respiratory = g;
  // The segments sweating may wet (none where it cannot act: off throughout, gain 0).
  const std::vector<char> sweating = sweatingActs(c) ? sweatingSegments(c) : std::vector<char>(n, 0);
  for (const SurroundingMedium medium : media) {
    const bool mediumAir = medium == SurroundingMedium::Air;
    for (std::size_t g = 0; g < n; ++g) {
      const SegmentSpec& s = c.segments[g];
      const bool correlation = !s.surface.convection.value_or(spec.convection).fixed;
      const bool water = EnvironmentModel::inWater(s.surface.immersion, medium);
      const Fluid fluid = water == !mediumAir ? MediumFluid : water ? WaterInAir : AirInWater;
      inFluid[fluid] = true;
      correlationInFluid[fluid] = correlationInFluid[fluid] || correlation;
      if (water) {
        everInWater_[g] = true;
      } else {
        neverInAir_[g] = false;
        // Long-wave radiation, sun and evaporation: air only (EnvironmentModel::faceHeat).
        if (emissivity_[g] > 0.0) {
          used[index(V::SkyTemperature)] = used[index(V::SkyTemperature)] || s.surface.skyView > 0.0;
          used[index(V::RadiantTemperature)] = used[index(V::RadiantTemperature)] || s.surface.skyView < 1.0;
        }
        if (s.surface.solarAbsorptivity > 0.0 && s.surface.solarExposure > 0.0) used[index(V::SolarIrradiance)] = true;
        if (s.surface.wettedFraction > 0.0) used[index(V::RelativeHumidity)] = true;
        // ... or wetted by sweating ([control.sweating], when it can act: models/grid.hpp sweatingActs) ...
        if (sweating[g]) used[index(V::RelativeHumidity)] = true;
        // ... or wet from an [[events]] entry (surface = { SEGMENT = { wetted_fraction = W } }).
        for (const EventSpec& e : c.events)
          for (const WetTarget& w : e.wet)
            if (targetsSegment(w.segment, s.name) && w.wettedFraction > 0.0) used[index(V::RelativeHumidity)] = true;
      }
      if (s.surface.contactFraction > 0.0) used[index(V::SubstrateTemperature)] = true;
      // ... or contact from an [[events]] step (surface = { SEGMENT = { contact_fraction = F } }).
      for (const EventSpec& e : c.events)
        for (const ContactTarget& t : e.contact)
          if (targetsSegment(t.segment, s.name) && t.contactFraction > 0.0)
            used[index(V::SubstrateTemperature)] = true;
    }
    // Respiration breathes the air around the animal unless its segment is under water (PhysiologyModel).
    if (respiratory < n && !EnvironmentModel::inWater(c.segments[respiratory].surface.immersion, medium)) {
      used[index(V::RelativeHumidity)] = true;
      used[index(mediumAir ? V::Temperature : V::AirTemperature)] = true;
    }
  }
  used[index(V::Temperature)] = used[index(V::Temperature)] || inFluid[MediumFluid];
  used[index(V::Speed)] = correlationInFluid[MediumFluid];
  used[index(V::WaterTemperature)] = inFluid[WaterInAir];
  used[index(V::WaterSpeed)] = correlationInFluid[WaterInAir];
  used[index(V::AirTemperature)] = used[index(V::AirTemperature)] || inFluid[AirInWater];
  used[index(V::AirSpeed)] = correlationInFluid[AirInWater];
  // A value that another follows acts through it (models/environment_case.cpp followRules, in any medium; whether
  // the follower is given is not asked, so that a case and its resolved text, which gives every value, agree).
  const std::pair<V, V> follows[] = {{V::WaterTemperature, V::Temperature}, {V::AirTemperature, V::Temperature},
                                     {V::RadiantTemperature, V::Temperature}, {V::RadiantTemperature, V::AirTemperature},
                                     {V::SkyTemperature, V::RadiantTemperature}, {V::SubstrateTemperature, V::Temperature}};
  for (int pass = 0; pass < 3; ++pass)
    for (auto [follower, leader] : follows) used[index(leader)] = used[index(leader)] || used[index(follower)];

  const bool allInWater = std::all_of(neverInAir_.begin(), neverInAir_.end(), [](bool b) { return b; });
  const std::string inWater =
      spec.everAir() ? "every segment is in water for the whole run (every segment has surface.immersion = \"always\")"
                     : "every segment is in water for the whole run (the medium is water throughout, no [[events]] "
                       "entry changes it to air, and no segment has surface.immersion = \"never\")";
  const std::string noMedium = "no segment is ever in the medium of [environment] (each has surface.immersion "
                               "\"always\" while the medium is air, or \"never\" while it is water)";
  const std::string noWaterInAir = "no segment is in water while the medium is air (no segment has surface.immersion = "
                                   "\"always\")";
  const std::string noAirInWater = "no segment is in air while the medium is water (no segment has surface.immersion = "
                                   "\"never\")";
  // The [[events]] entries that make the medium water: each gives the new medium's own temperature and speed
  // (models/environment_case.cpp), so water_temperature and water_speed, which are for segments immersed while the
  // medium is air, have no effect while the animal is in water by them (a new-user trial read the warning as a bug).
  std::vector<std::string> toWater;
  for (std::size_t k = 0; k < c.events.size(); ++k)
    if (c.events[k].medium == SurroundingMedium::Water) toWater.push_back(fmt::format("events.{} at {:g} s", k, c.events[k].at));
  auto ownWater = [&](const char* value, const char* key) {
    if (toWater.empty()) return noWaterInAir;
    const std::size_t shown = std::min<std::size_t>(toWater.size(), 3);
    std::string list;
    for (std::size_t k = 0; k < shown; ++k) list += (k ? ", " : "") + toWater[k];
    if (toWater.size() > shown) list += fmt::format(" and {} more", toWater.size() - shown);
    return fmt::format("the [[events]] entries that put the animal in water give the water's own {} (their "
                       "environment.{}: {}), and {}, where it would apply",
                       value, key, list, noWaterInAir);
  };
  auto fixedIn = [](const char* where) {
    return fmt::format("every segment {} has a fixed convection coefficient (the speed enters only the correlations)",
                       where);
  };
  for (std::size_t v = 0; v < kEnvironmentVariables; ++v) {
    if (used[v]) continue;
    std::string why;
    switch (static_cast<V>(v)) {
      case V::Temperature: why = noMedium; break;
      case V::Speed: why = inFluid[MediumFluid] ? fixedIn("in the medium") : noMedium; break;
      case V::WaterTemperature: why = ownWater("temperature", "temperature"); break;
      case V::WaterSpeed:
        why = inFluid[WaterInAir] ? fixedIn("in water while the medium is air") : ownWater("speed", "speed");
        break;
      case V::AirTemperature: why = allInWater ? inWater : noAirInWater; break;
      case V::AirSpeed:
        why = allInWater ? inWater : inFluid[AirInWater] ? fixedIn("in air while the medium is water") : noAirInWater;
        break;
      case V::RelativeHumidity:
        why = allInWater ? inWater
                         : std::string("no segment in air is wet (surface.wetted_fraction = 0 on every one, and no "
                                       "[[events]] entry wets one) and there "
                                       "is no breathing of air (") +
                               (c.body.respiratorySegment.empty() ? "no [body] respiratory_segment)"
                                                                  : "the respiratory segment is in water throughout)");
        break;
      case V::RadiantTemperature:
      case V::SkyTemperature:
        why = allInWater ? inWater
                         : fmt::format("no segment in air exchanges long-wave radiation with it (each has sky_view = {} "
                                       "or emissivity 0, the default with a fixed convection coefficient)",
                                       static_cast<V>(v) == V::SkyTemperature ? 0 : 1);
        break;
      case V::SolarIrradiance:
        why = allInWater ? inWater : "every segment in air has solar_absorptivity = 0 or solar_exposure = 0";
        break;
      case V::SubstrateTemperature:
        why = "no segment touches the substrate (surface.contact_fraction = 0 on every segment, and no [[events]] entry "
              "sets a contact)";
        break;
    }
    variables_[v] = why;
    add("environment." + std::string(environmentKey(static_cast<V>(v))), why);
  }
  if (spec.everAir() && !inFluid[WaterInAir]) add("environment.immersion_water", ownWater("kind", "medium"));
  if (!used[index(V::SubstrateTemperature)])
    add("environment.substrate_conductance", *variables_[index(V::SubstrateTemperature)]);
  // An immersion that puts the segment where "body" would throughout: "never" (in air) while the medium is air for
  // the whole run, "always" (in water) while it is water (EnvironmentModel::inWater; the recorded environment series
  // and the static-contact note ask for the other fluid only when the medium ever is it).
  for (const SegmentSpec& s : c.segments) {
    if (s.surface.immersion == Immersion::Body) continue;
    const bool never = s.surface.immersion == Immersion::Never;
    if (std::all_of(media.begin(), media.end(), [&](SurroundingMedium m) {
          return EnvironmentModel::inWater(s.surface.immersion, m) == EnvironmentModel::inWater(Immersion::Body, m);
        }))
      add("segments." + s.name + ".surface.immersion",
          fmt::format("the medium is {} for the whole run (no [[events]] entry changes it), so segment {} is in {} "
                      "with immersion \"{}\" as with the default \"body\"",
                      never ? "air" : "water", s.name, never ? "air" : "water", never ? "never" : "always"));
  }
  if (n > 0 && std::all_of(c.segments.begin(), c.segments.end(), [](const SegmentSpec& s) { return s.surface.convection.has_value(); }))
    add("environment.convection", "every segment gives its own surface.convection");

}

void InertKeys::surfaces() {
  const Case& c = case_;
  // The sun: zero throughout when [environment], every [[events]] entry and every weather row give 0 W/m2.
  bool sun = c.environment.solarIrradiance > 0.0;
  for (const EventSpec& e : c.events)
    for (const EnvironmentValue& v : e.environment) sun = sun || (v.variable == V::SolarIrradiance && v.value > 0.0);
  for (std::size_t g = 0; g < c.segments.size(); ++g) {
    const SegmentSpec& s = c.segments[g];
    const std::string p = "segments." + s.name + ".surface.";
    if (neverInAir_[g]) {
      const std::string why = fmt::format("segment {} is in water for the whole run (long-wave radiation, sun and "
                                          "evaporation act in air only)", s.name);
      for (const char* key : {"emissivity", "sky_view", "solar_absorptivity", "solar_exposure", "wetted_fraction"})
        add(p + key, why);
    } else {
      if (!(emissivity_[g] > 0.0))
        add(p + "sky_view", fmt::format("segment {} exchanges no long-wave radiation (emissivity 0, the default with a "
                                        "fixed convection coefficient; give surface.emissivity)", s.name));
      if (!sun) {
        const std::string why = "the solar irradiance is 0 for the whole run (environment.solar_irradiance, every "
                                "[[events]] entry and weather row)";
        add(p + "solar_absorptivity", why);
        add(p + "solar_exposure", why);
      } else if (!(s.surface.solarExposure > 0.0)) {
        add(p + "solar_absorptivity", fmt::format("segment {} has solar_exposure = 0 (no sunlit area)", s.name));
      } else if (!(s.surface.solarAbsorptivity > 0.0)) {
        add(p + "solar_exposure", fmt::format("segment {} has solar_absorptivity = 0 (absorbs no sun)", s.name));
      }
    }
    if (!s.coat && s.shape != Shape::Sphere) add(p + "end_coat", fmt::format("segment {} has no coat", s.name));
    // Tucking into a host while the tucked fraction stays 0 (no event raises it): no coupling is built.
    if (!s.surface.tuckedInto.empty() && !(s.surface.tuckedFraction > 0.0) &&
        std::none_of(c.events.begin(), c.events.end(), [&](const EventSpec& e) {
          return std::any_of(e.tuck.begin(), e.tuck.end(),
                             [&](const TuckTarget& t) { return t.segment == s.name && t.tuckedFraction > 0.0; });
        })) {
      const std::string why = fmt::format("segment {} is never tucked (surface.tucked_fraction = 0 and no [[events]] "
                                          "entry sets a tucked_fraction above 0)", s.name);
      add(p + "tucked_into", why);
      add(p + "tucked_placement", why);
    }
    if (s.surface.tuckedInto.empty())
      add(p + "tucked_placement", fmt::format("segment {} is tucked into nothing (no surface.tucked_into)", s.name));
    if (s.surface.convection.value_or(c.environment.convection).fixed) {
      const std::string why = fmt::format("segment {} has a fixed convection coefficient (no correlation is used)", s.name);
      add(p + "correlation", why);
      if (s.shape == Shape::Plate) add(p + "orientation", why);
    }
  }
}

void InertKeys::controllers() {
  const Case& c = case_;
  auto offThroughout = [&](const std::string& name, bool enabled) {
    if (enabled) return false;
    for (const EventSpec& e : c.events)
      for (const ControlTarget& t : e.control)
        if (t.controller == name && t.enabled && *t.enabled) return false;
    return true;
  };
  auto off = [&](const std::string& name, const std::string& table, std::initializer_list<const char*> keys,
                 std::string why = "") {
    if (why.empty())
      why = fmt::format("[{}] is off for the whole run (enabled = \"off\" and no [[events]] entry switches it on)",
                        table);
    setPointInert_[name] = why;
    for (const char* key : keys) add(table + "." + key, why);
  };
  const ControlSpec& k = c.control;
  // The body-wide vasomotor controller acts on the skin and shunts of the segments no local controller names; with
  // none left it drives nothing and is not built (Body::buildControllers), so even `enabled` has no effect.
  if (k.vasomotor.present && !bodyWideVasomotorActs(c))
    off("vasomotor", "control.vasomotor",
        {"signal", "set_point", "gain", "min", "max", "shunt_gain", "time_constant", "enabled"},
        c.control.local.empty()
            ? "no segment has a layer of role skin or shunts (vessels.shunt_flow_max > 0) for it to act on"
            : "every segment with a layer of role skin or shunts (vessels.shunt_flow_max > 0) follows a "
              "[control.local.NAME] instead, so [control.vasomotor] acts on none");
  else if (k.vasomotor.present && offThroughout("vasomotor", k.vasomotor.enabled))
    off("vasomotor", "control.vasomotor", {"signal", "set_point", "gain", "min", "max", "shunt_gain", "time_constant"});
  else if (k.vasomotor.present)
    vasomotorGains("vasomotor", "control.vasomotor", k.vasomotor.gain, k.vasomotor.shuntGain, bodyWideShuntsAct(c),
                   k.vasomotor.enabled,
                   "no segment with arteriovenous shunts (vessels.shunt_flow_max > 0) follows [control.vasomotor] "
                   "(each segment has none, or follows a [control.local.NAME])");
  // A gain of 0 makes the output the same at every temperature, and equal to its value when off (shivering 0,
  // panting 1): the other keys then set nothing (the automatic grid leaves out outputs of gain 0 too). The signal
  // is not among them: its nodes stay in the Jacobian's pattern (as zeros), which moves the steps.
  if (k.shivering.present && offThroughout("shivering", k.shivering.enabled))
    off("shivering", "control.shivering", {"signal", "set_point", "gain", "max_power", "time_constant"});
  else if (k.shivering.present && !(k.shivering.gain != 0.0))
    off("shivering", "control.shivering", {"set_point", "max_power", "time_constant", "enabled"},
        "control.shivering.gain = 0: the shivering fraction gain x (set_point - T) is 0 at every temperature, on or "
        "off, so there is no shivering heat (give a gain > 0)");
  if (k.panting.present && offThroughout("panting", k.panting.enabled))
    off("panting", "control.panting", {"signal", "set_point", "gain", "max", "time_constant"});
  else if (k.panting.present && !(k.panting.gain != 0.0))
    off("panting", "control.panting", {"set_point", "max", "time_constant", "enabled"},
        "control.panting.gain = 0: the ventilation multiplier 1 + gain x (T - set_point) is 1 at every temperature, "
        "on or off, as without panting (give a gain > 0)");
  if (k.sweating.present && offThroughout("sweating", k.sweating.enabled))
    off("sweating", "control.sweating", {"segments", "signal", "set_point", "gain", "max", "time_constant"});
  else if (k.sweating.present && !(k.sweating.gain != 0.0))
    off("sweating", "control.sweating", {"segments", "set_point", "max", "time_constant", "enabled"},
        "control.sweating.gain = 0: sweating adds clamp(gain x (T - set_point), 0, max) = 0 to the wetted fraction "
        "at every temperature, on or off, as without sweating (give a gain > 0)");
  // A local controller's segments and CIVD act whether it is on or off (the body-wide controller leaves its
  // segments alone; CIVD is never switched).
  for (const LocalControllerSpec& l : k.local) {
    const std::string table = "control.local." + l.name;
    // CIVD of opening 0: no extra shunt flow at any temperature, and no states (Body::buildLocalControllers), so
    // none of its keys acts. (Its `opening` is among them: a sweep or fit that varies it acts at its other values.)
    if (l.civd && !civdActs(l))
      add(table + ".civd", fmt::format("{}.civd.opening = 0: cold-induced vasodilation adds no shunt flow at any "
                                       "temperature, so [{}.civd] does nothing (give opening > 0, or remove the "
                                       "table)", table, table));
    if (offThroughout(l.name, l.enabled)) {
      off(l.name, table, {"signal", "set_point", "gain", "min", "max", "shunt_gain", "time_constant"});
      continue;
    }
    const bool shunts = std::any_of(l.segments.begin(), l.segments.end(), [&](const std::string& name) {
      return std::any_of(c.segments.begin(), c.segments.end(),
                         [&](const SegmentSpec& s) { return s.name == name && s.vessels.shuntFlowMax > 0.0; });
    });
    vasomotorGains(l.name, table, l.gain, l.shuntGain, shunts, l.enabled,
                   fmt::format("no segment [{}] names has arteriovenous shunts (vessels.shunt_flow_max > 0)", table));
  }
}

bool InertKeys::everOff(const std::string& controller, bool enabled) const {
  if (!enabled) return true;
  for (const EventSpec& e : case_.events)
    for (const ControlTarget& t : e.control)
      if (t.controller == controller && t.enabled && !*t.enabled) return true;
  return false;
}

void InertKeys::vasomotorGains(const std::string& name, const std::string& table, double gain, double shuntGain,
                               bool shunts, bool enabled, const std::string& noShunts) {
  // Skin perfusion 1 + gain (T - set_point) within [min, max]; the shunt opening shunt_gain (T - set_point) within
  // [0, 1], a state built only where a segment with shunts follows the controller (Body::buildControllers,
  // buildLocalControllers).
  if (!shunts) add(table + ".shunt_gain", noShunts);
  if (gain != 0.0 || (shunts && shuntGain != 0.0)) return;
  const std::string why = fmt::format(
      "{}.gain = 0 and {}: no output of [{}] depends on the temperature (give a gain > 0)", table,
      shunts ? "shunt_gain = 0" : "it drives no shunts", table);
  add(table + ".set_point", why);
  setPointInert_[name] = why;
  // The states stay at their start unless the controller is switched off (it then moves them to its off values,
  // perfusion 1 and shunts open, over its time constant).
  if (!everOff(name, enabled)) add(table + ".time_constant", why + ", and it is on for the whole run");
}

void InertKeys::vasomotor() {
  const Case& c = case_;
  // Skin perfusion multiplies the perfusion of the segment's skin layers only (PhysiologyModel::value, Kind::Perfusion
  // with `skin`); a shunt opening is a fraction of vessels.shunt_flow_max (Body::addPerfusionModulators). A new-user
  // trial's segments.neck.vasomotor.shunt = 1 on a neck without shunts said nothing.
  const std::size_t n = c.segments.size();
  std::vector<std::string> noSkin(n), noShunts(n), noPerfusion(n);
  // The controller a segment's shunts follow, when its opening stays 0 for the whole run: shunt_gain = 0 and never
  // switched off (off, the opening is the segment's own value). The segment's opening multiplies that state.
  auto closedBy = [&](const SegmentSpec& s) -> std::optional<std::string> {
    for (const LocalControllerSpec& l : c.control.local)
      if (std::find(l.segments.begin(), l.segments.end(), s.name) != l.segments.end())
        return l.shuntGain == 0.0 && !everOff(l.name, l.enabled) ? std::optional("[control.local." + l.name + "]")
                                                                   : std::nullopt;
    const ControllerSpec& v = c.control.vasomotor;
    return v.present && v.shuntGain == 0.0 && !everOff("vasomotor", v.enabled) ? std::optional("[control.vasomotor]")
                                                                                : std::nullopt;
  };
  for (std::size_t g = 0; g < n; ++g) {
    const SegmentSpec& s = c.segments[g];
    if (std::none_of(s.layers.begin(), s.layers.end(), [&](const LayerSpec& l) {
          const TissueProperties& t = c.tissues.at(l.tissue);
          return t.role == TissueRole::Skin && t.perfusion > 0.0;
        })) {
      noSkin[g] = fmt::format("segment {} has no perfused skin (no layer whose tissue has role skin and perfusion > "
                              "0), so the multiplier scales no blood flow", s.name);
      add("segments." + s.name + ".vasomotor.skin_perfusion", noSkin[g]);
    }
    if (!(s.vessels.shuntFlowMax > 0.0)) {
      noShunts[g] = fmt::format("segment {} has no arteriovenous shunts (vessels.shunt_flow_max = 0), so their opening "
                                "moves no blood", s.name);
    } else if (auto controller = closedBy(s)) {
      noShunts[g] = fmt::format("the shunts of segment {} follow {} with shunt_gain = 0, on for the whole run, so "
                                "their opening stays 0 whatever this value (give shunt_gain > 0, or switch the "
                                "controller off: then the shunts open to this value)", s.name, *controller);
    }
    if (!noShunts[g].empty()) add("segments." + s.name + ".vasomotor.shunt", noShunts[g]);
    // The segment's value set over by an [[events]] step at t = 0 never acts (PhysiologyModel::setInterval; Body
    // builds the superficial-return terms from the events' values then, and the automatic grid takes the skin's
    // smallest perfusion from the events' values alone, grid.cpp).
    using Key = std::optional<double> VasomotorTarget::*;
    for (const auto& [key, name] : {std::pair<Key, const char*>{&VasomotorTarget::skinPerfusion, "skin_perfusion"},
                                    {&VasomotorTarget::shunt, "shunt"},
                                    {&VasomotorTarget::superficialReturn, "superficial_return"}}) {
      const auto [event, target] = vasomotorSetAtStart(c, s.name, key);
      if (!event) continue;
      const std::string eventKey = event->source + ".vasomotor." + target->segment + "." + name;
      const auto at = c.given.find(eventKey);
      add("segments." + s.name + ".vasomotor." + name,
          fmt::format("{} ({}) sets it from t = 0 s (a step at at = 0 s), so the segment's own value never acts "
                      "(give the value in that entry, or remove it there)",
                      eventKey, at != c.given.end() && at->second.line > 0
                                    ? fmt::format("{}:{}:{}", c.sourceFile, at->second.line, at->second.column)
                                    : event->where));
    }
    // Superficial return routes a share of the tissue's venous return (Body::planCellFlows): none without perfusion.
    // (Without a countercurrent exchanger it still acts: the superficial veins hold blood and exchange heat with the
    // skin.)
    if (std::none_of(s.layers.begin(), s.layers.end(),
                     [&](const LayerSpec& l) { return c.tissues.at(l.tissue).perfusion > 0.0; })) {
      noPerfusion[g] = fmt::format("segment {} has no perfused tissue (perfusion = 0 in the tissue of every layer), so "
                                   "there is no venous return to route (give a layer a perfused tissue)", s.name);
      add("segments." + s.name + ".vasomotor.superficial_return", noPerfusion[g]);
    }
  }
  // Superficial veins run where blood returns by them (Body::addBloodNodes): shunt flow or superficial return in the
  // segment or a segment beyond it (whose superficial return joins the parent's). Without them their conductance to
  // the skin connects nothing.
  std::vector<bool> superficialFlow(n, false);
  for (std::size_t g = 0; g < n; ++g) {
    const SegmentSpec& s = c.segments[g];
    bool flows = s.vessels.shuntFlowMax > 0.0 ||
                 (noPerfusion[g].empty() && s.vasomotor.superficialReturn > 0.0 &&
                  !vasomotorSetAtStart(c, s.name, &VasomotorTarget::superficialReturn).first);
    for (const EventSpec& e : c.events)
      for (const VasomotorTarget& v : e.vasomotor)
        if (targetsSegment(v.segment, s.name) && v.superficialReturn && *v.superficialReturn > 0.0)
          flows = flows || noPerfusion[g].empty();
    // Up the tree to the root (parents are named; a case's tree has no cycles).
    for (std::size_t h = g; flows && !superficialFlow[h];) {
      superficialFlow[h] = true;
      const std::string& parent = c.segments[h].parent;
      std::size_t p = 0;
      while (p < n && c.segments[p].name != parent) ++p;
      if (p == n) break;
      h = p;
    }
  }
  for (std::size_t g = 0; g < n; ++g)
    if (!superficialFlow[g])
      add("segments." + c.segments[g].name + ".vessels.superficial_conductance",
          fmt::format("segment {} has no superficial veins: no blood returns by them (no shunts, vessels.shunt_flow_max "
                      "= 0, and no superficial return, vasomotor.superficial_return = 0 in the case and every [[events]] "
                      "entry, on it or any segment beyond it)", c.segments[g].name));
  // The same targets in [[events]] (events.N.vasomotor.SEGMENT.KEY): "all" has no effect when none of the segments
  // can take it.
  auto target = [&](const std::string& segment, const std::vector<std::string>& why,
                    const char* noSegment) -> std::optional<std::string> {
    if (segment == kAllSegments) {
      if (std::any_of(why.begin(), why.end(), [](const std::string& w) { return w.empty(); })) return std::nullopt;
      return std::string(noSegment);
    }
    for (std::size_t g = 0; g < n; ++g)
      if (c.segments[g].name == segment && !why[g].empty()) return why[g];
    return std::nullopt;
  };
  for (const EventSpec& e : c.events)
    for (const VasomotorTarget& v : e.vasomotor) {
      const std::string path = e.source + ".vasomotor." + v.segment + ".";
      if (auto why = target(v.segment, noSkin, "no segment has perfused skin (a layer whose tissue has role skin and "
                                               "perfusion > 0), so the multiplier scales no blood flow"))
        add(path + "skin_perfusion", *why);
      if (auto why = target(v.segment, noShunts, "no segment has arteriovenous shunts whose opening can act "
                                                 "(vessels.shunt_flow_max = 0, or a controller with shunt_gain = 0 "
                                                 "keeps them closed), so their opening moves no blood"))
        add(path + "shunt", *why);
      if (auto why = target(v.segment, noPerfusion, "no segment has perfused tissue (perfusion = 0 in the tissue of "
                                                    "every layer), so there is no venous return to route"))
        add(path + "superficial_return", *why);
    }
}

void InertKeys::metabolism() {
  const Case& c = case_;
  // Activity and hypometabolism multiply the tissues' metabolic heat (Body::addMetabolicModulation) and, through the
  // basal rate, the respiratory loss (PhysiologyModel::respiratoryLoss): nothing when no tissue produces heat.
  for (const SegmentSpec& s : c.segments) {
    for (const LayerSpec& l : s.layers)
      if (c.tissues.at(l.tissue).metabolicHeat > 0.0) return;
    if (s.coat && c.tissues.at(s.coat->material).metabolicHeat > 0.0) return;
  }
  const std::string why = "no tissue of the body produces metabolic heat (metabolic_heat = 0 in the tissue of every "
                          "layer), so there is no metabolism to multiply";
  add("body.activity", why);
  for (const EventSpec& e : c.events) {
    if (e.activity) add(e.source + ".metabolism.activity", why);
    if (e.hypometabolism) add(e.source + ".metabolism.hypometabolism", why);
  }
}

void InertKeys::grids() {
  // One cell spans its layer (or its segment's length) whatever the grading: its edges are the layer's faces, the
  // segment's ends, under every Q (LayerSpec::cellEdges, axialCellEdges), and Body and the grid estimates see the
  // grading only through those edges (or, axially, through terms that are equal on one cell). The automatic grid
  // never chooses one cell (at least 2 radial, 4 axial: resolveGrid), so only given counts are single, counted here
  // with run.grid_refinement (before resolveGrid applies it; 1 after), which splits the cell along the grading.
  const Case& c = case_;
  const int refinement = c.run.gridRefinement;
  const std::string splits = "(run.grid_refinement > 1 or `thermorph refine` splits the cell along it; give more "
                             "cells, or leave cells out to have them chosen)";
  for (const SegmentSpec& s : c.segments) {
    for (std::size_t i = 0; i < s.layers.size(); ++i)
      if (!s.layers[i].cellsAuto && s.layers[i].cells * refinement == 1)
        add(fmt::format("segments.{}.layers.{}.grading", s.name, i),
            fmt::format("layer {} ({}) of segment {} has one radial cell (cells = 1), which spans the layer whatever "
                        "its grading {}", i, s.layers[i].tissue, s.name, splits));
    if (s.shape != Shape::Sphere && !s.axialAuto && s.axialCells * refinement == 1)
      add("segments." + s.name + ".axial_grading",
          fmt::format("segment {} has one axial cell (axial_cells = 1), which spans its length whatever the grading {}",
                      s.name, splits));
  }
}

void InertKeys::others() {
  const Case& c = case_;
  // Respiration (PhysiologyModel::respiratoryLoss): none without a respiratory segment or while it is in water.
  std::string noBreathing;
  if (c.body.respiratorySegment.empty()) {
    noBreathing = "there is no respiration (no [body] respiratory_segment)";
  } else {
    for (std::size_t g = 0; g < c.segments.size(); ++g)
      if (c.segments[g].name == c.body.respiratorySegment && neverInAir_[g])
        noBreathing = fmt::format("the respiratory segment {} is in water for the whole run (no breathing under "
                                  "water)", c.body.respiratorySegment);
  }
  if (!noBreathing.empty()) {
    add("body.exhaled_temperature", noBreathing);
    for (const EventSpec& e : c.events)
      if (e.panting) add(e.source + ".respiration.panting", noBreathing);
  }
  if (steady_)
    for (const char* key : kSteadyRunKeys) add(key, kSteadyWhy);
  // A steady sweep reports each run's steady state, whatever the window (drivers/sweep_plan.cpp: the case's mode
  // cannot be turned back to transient from the command line).
  if (c.sweep.steady)
    add("sweep.window", "sweep.mode = \"steady\": each run reports its steady state, so there is no window to "
                        "average over");
  bool bradycardia = false;
  for (const EventSpec& e : c.events) bradycardia = bradycardia || e.bradycardia.has_value();
  if (!bradycardia)
    add("circulation.bradycardia_tissues", "no [[events]] entry sets circulation.bradycardia");
  // [tissues.NAME] that no layer, coat, bradycardia list or other tissue's base names.
  std::set<std::string> usedTissues(c.circulation.bradycardiaTissues.begin(), c.circulation.bradycardiaTissues.end());
  for (const SegmentSpec& s : c.segments) {
    for (const LayerSpec& l : s.layers) usedTissues.insert(l.tissue);
    if (s.coat) usedTissues.insert(s.coat->material);
  }
  const std::string basedOn = "case file, based on ";
  for (const auto& [name, tissue] : c.tissues)
    if (tissue.source.rfind(basedOn, 0) == 0 && tissue.source.substr(basedOn.size()) != name)
      usedTissues.insert(tissue.source.substr(basedOn.size()));
  for (const auto& [name, tissue] : c.tissues)
    if (!usedTissues.count(name))
      add("tissues." + name, fmt::format("no segment uses the tissue {} (no layer or coat names it)", name));
  // Coats conduct with their wet conductivity while their segment is in water, and partly in air while its wetted
  // fraction is above 0, statically or by an event (Body::setCoat).
  std::set<std::string> wetCoats;
  for (std::size_t g = 0; g < c.segments.size(); ++g) {
    const SegmentSpec& s = c.segments[g];
    if (!s.coat) continue;
    bool wetInAir = s.surface.wettedFraction > 0.0;
    for (const EventSpec& e : c.events)
      for (const WetTarget& w : e.wet)
        if (targetsSegment(w.segment, s.name) && w.wettedFraction > 0.0) wetInAir = true;
    if (everInWater_[g] || (wetInAir && !neverInAir_[g])) wetCoats.insert(s.coat->material);
  }
  for (const auto& [name, tissue] : c.tissues)
    if (tissue.isCoat() && usedTissues.count(name) && !wetCoats.count(name))
      add("tissues." + name + ".wet_conductivity",
          fmt::format("no segment with a coat of {} is in water or wet (wetted_fraction above 0) in air at any time "
                      "(the wet conductivity applies in water, and in proportion to the wetted fraction in air)",
                      name));
}

std::map<std::string, std::string>::const_iterator InertKeys::find(const std::string& path) const {
  // The key itself, or a table above it (a tissue no segment uses).
  for (std::string p = path;;) {
    if (auto it = reasons_.find(p); it != reasons_.end()) return it;
    const auto dot = p.find_last_of('.');
    if (dot == std::string::npos) return reasons_.end();
    p.erase(dot);
  }
}

std::optional<std::string> InertKeys::reason(const std::string& given) const {
  // A segment by number (as --set accepts it) is named here by its name.
  std::string path = given;
  if (path.rfind("segments.", 0) == 0) {
    const std::size_t start = 9, end = path.find('.', start);
    const std::string part = path.substr(start, end == std::string::npos ? std::string::npos : end - start);
    if (!part.empty() && part.size() < 10 &&
        std::all_of(part.begin(), part.end(), [](unsigned char ch) { return std::isdigit(ch); }) &&
        std::stoul(part) < case_.segments.size())
      path = "segments." + case_.segments[std::stoul(part)].name + (end == std::string::npos ? "" : path.substr(end));
  }
  if (auto it = find(path); it != reasons_.end()) return it->second;
  // Values of the timeline: events.N.environment.KEY, environment.weather.KEY, events.N.control.NAME.set_point.
  const auto last = path.find_last_of('.');
  const std::string key = path.substr(last + 1), head = last == std::string::npos ? "" : path.substr(0, last);
  const bool eventValue = path.rfind("events.", 0) == 0 && head.size() > 12 &&
                          head.compare(head.size() - 12, 12, ".environment") == 0;
  if (eventValue || head == "environment.weather")
    for (std::size_t v = 0; v < kEnvironmentVariables; ++v)
      if (environmentKey(static_cast<V>(v)) == key && variables_[v]) return variables_[v];
  if (path.rfind("events.", 0) == 0 && key == "set_point") {
    const auto control = head.find(".control.");
    if (control != std::string::npos)
      if (auto it = setPointInert_.find(head.substr(control + 9)); it != setPointInert_.end()) return it->second;
  }
  return std::nullopt;
}

std::vector<std::string> InertKeys::warnings() const {
  const Case& c = case_;
  std::vector<std::string> out;
  // Each key with no effect that the case gives, or for a table with no effect as a whole (a tissue no segment
  // uses), the first value the case gives in it.
  auto where = [&](const Case::GivenAt& at) {
    return at.line > 0 ? fmt::format("{}:{}:{}", c.sourceFile, at.line, at.column)
                       : c.sourceFile + " (an override: --set, a sweep or fit parameter, or set= in Python)";
  };
  for (const auto& [key, why] : reasons_) {
    if (auto it = c.given.find(key); it != c.given.end()) {
      out.push_back(fmt::format("{}: {} has no effect: {}", where(it->second), key, why));
      continue;
    }
    const std::string below = key + ".";
    if (auto it = c.given.lower_bound(below); it != c.given.end() && it->first.compare(0, below.size(), below) == 0)
      out.push_back(fmt::format("{}: [{}] has no effect: {}", where(it->second), key, why));
  }
  // Values of the timeline: one warning per variable for [[events]] entries, one per weather column.
  for (std::size_t v = 0; v < kEnvironmentVariables; ++v) {
    if (!variables_[v]) continue;
    const std::string key(environmentKey(static_cast<V>(v)));
    const EventSpec* first = nullptr;
    std::size_t entries = 0;
    bool weather = false;
    std::string weatherWhere;
    for (const EventSpec& e : c.events)
      for (const EnvironmentValue& value : e.environment) {
        if (value.variable != static_cast<V>(v) || !value.given) continue;
        if (e.weatherRow) {
          weather = true;
          weatherWhere = e.where;
        } else if (entries++ == 0) {
          first = &e;
        }
      }
    if (first)
      out.push_back(fmt::format("{}: {}.environment.{}{} has no effect: {}", first->where, first->source, key,
                                entries > 1 ? fmt::format(" (and {} more [[events]] entries)", entries - 1) : "",
                                *variables_[v]));
    if (weather)
      out.push_back(fmt::format("{}: environment.weather: the column {} has no effect: {}", weatherWhere, key,
                                *variables_[v]));
  }
  for (const EventSpec& e : c.events)
    for (const ControlTarget& t : e.control)
      if (auto it = setPointInert_.find(t.controller); it != setPointInert_.end() && t.setPoint)
        out.push_back(fmt::format("{}{}: {}.set_point has no effect: {}", c.sourceFile,
                                  t.where.empty() ? "" : ":" + t.where, t.path, it->second));
  return out;
}

}  // namespace thermorph
