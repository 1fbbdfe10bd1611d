#pragma once
//! Case data of the surroundings: the medium, per-segment surface properties and the event timeline.
#include <cstddef>
#include <optional>
#include <string>
#include <string_view>
#include <vector>

namespace thermorph {

enum class EndCondition { Exposed, Insulated };

//! Which fluid a segment sits in: the [environment] medium, always water, or never water (always air).
enum class Immersion { Body, Always, Never };
enum class SurroundingMedium { Air, Water, SeaWater };
enum class ConvectionCorrelation { Standard, Mitchell };
enum class PlateOrientation { Vertical, Horizontal };

//! A convection coefficient from published correlations, or a fixed value.
struct ConvectionSetting {
  bool fixed = false;
  double coefficient = 0.0;  //!< when fixed [W/(m2 K)]
};

//! Surface properties of one segment ([segments.surface]); every default resolved except `emissivity`,
//! whose default depends on the convection setting (see EnvironmentModel).
struct SurfaceSpec {
  EndCondition ends = EndCondition::Exposed;     //!< cylinder and cone end faces
  bool endCoat = true;                          //!< a coated segment's coat covers its exposed end faces
  std::optional<ConvectionSetting> convection;  //!< per-segment override of [environment] convection
  std::optional<double> emissivity;             //!< long-wave emissivity [1]; nullopt: default rule
  double solarAbsorptivity = 0.7;               //!< [1]
  double solarExposure = 0.0;                   //!< sunlit projected area / surface area [1]
  double skyView = 0.5;                         //!< share of the exposed surface's view filled by sky [1]
  double contactFraction = 0.0;                 //!< share of the surface touching the substrate [1]
  std::optional<double> contactCoatThickness;   //!< a coated segment's coat under the contact patch [m] (compressed)
  //! Tucking: the segment (empty: none) whose surface covers `tuckedFraction` of this segment's lateral surface (a
  //! foot tucked into the plumage of the trunk, a head under a wing); that share exchanges with the host only.
  std::string tuckedInto;
  double tuckedFraction = 0.0;                  //!< share of the lateral surface pressed against the host [1]
  //! surface.tucked_placement: "on_coat" (false, the default): the guest lies on the host's outer surface, which
  //! loses the patch; "in_coat" (true): inside the host's coat, whose outer surface stays whole.
  bool tuckedInCoat = false;
  double wettedFraction = 0.0;                  //!< share of the exposed surface that is wet [1]
  Immersion immersion = Immersion::Body;
  ConvectionCorrelation correlation = ConvectionCorrelation::Standard;
  PlateOrientation orientation = PlateOrientation::Vertical;  //!< plates only
};

//! Time-dependent environment values, each a key of [environment] and of `environment = {...}` in [[events]].
enum class EnvironmentVariable {
  Temperature,           //!< of the medium [K]
  Speed,                 //!< of the medium relative to the animal [m/s]
  WaterTemperature,      //!< water around immersed segments when the medium is air [K]
  WaterSpeed,            //!< [m/s]
  AirTemperature,        //!< air around never-immersed segments when the medium is water [K]
  AirSpeed,              //!< [m/s]
  RelativeHumidity,      //!< of the air [1]
  RadiantTemperature,    //!< mean radiant temperature of the surroundings [K]
  SkyTemperature,        //!< effective long-wave sky temperature [K]
  SolarIrradiance,       //!< beam irradiance on a surface normal to the beam [W/m2]
  SubstrateTemperature,  //!< ground or perch [K]
};
inline constexpr std::size_t kEnvironmentVariables = 11;

//! Case key of a variable ("water_temperature").
std::string_view environmentKey(EnvironmentVariable variable);

//! The medium around the animal ([environment]), every default resolved.
struct EnvironmentSpec {
  SurroundingMedium medium = SurroundingMedium::Air;  //!< at t = 0; [[events]] may step it
  //! Some [[events]] entry switches the medium to air, or to water or sea water (a diver's timeline).
  bool eventsAir = false, eventsWater = false;
  //! Kind of the water around segments with immersion "always" when the medium is air.
  SurroundingMedium immersionWater = SurroundingMedium::Water;
  ConvectionSetting convection;                //!< correlations unless fixed
  std::optional<double> substrateConductance;  //!< contact conductance of the substrate [W/(m2 K)]
  // Values at t = 0 (the timeline starts from them).
  double temperature = 293.15;           //!< medium temperature [K]
  double speed = 0.0;                    //!< medium speed relative to the animal [m/s]
  double waterTemperature = 293.15;      //!< water for immersed segments in air [K]
  double waterSpeed = 0.0;               //!< [m/s]
  double airTemperature = 293.15;        //!< air for never-immersed segments in water [K]
  double airSpeed = 0.0;                 //!< [m/s]
  double relativeHumidity = 0.5;         //!< [1]
  double radiantTemperature = 293.15;    //!< [K]
  double skyTemperature = 293.15;        //!< [K]
  double solarIrradiance = 0.0;          //!< [W/m2]
  double substrateTemperature = 293.15;  //!< [K]

  //! The surroundings are air (water) during some part of the run: the air_* (water_*) keys may apply.
  bool everAir() const { return medium == SurroundingMedium::Air || eventsAir; }
  bool everWater() const { return medium != SurroundingMedium::Air || eventsWater; }
  //! The medium alternates between air and water over the run.
  bool mediumChanges() const { return everAir() && everWater(); }

  //! Value of one variable at t = 0 [SI].
  double value(EnvironmentVariable v) const;
  double& value(EnvironmentVariable v);
};

//! One environment value set by an event.
struct EnvironmentValue {
  EnvironmentVariable variable = EnvironmentVariable::Temperature;
  double value = 0.0;  //!< [SI]
  //! Given by the case (an [[events]] entry or a weather-file column), not a value following another (models/
  //! inert_keys.hpp warns only of given values).
  bool given = true;
};

//! The target of an [[events]] vasomotor or surface entry that names every segment.
inline constexpr std::string_view kAllSegments = "all";
//! Whether the target of an [[events]] vasomotor or surface entry (VasomotorTarget::segment,
//! ContactTarget::segment) applies to the segment named `segment`: it names it, or it is "all".
inline bool targetsSegment(std::string_view target, std::string_view segment) {
  return target == kAllSegments || target == segment;
}

//! Vasomotor targets of one event for one segment ("all": every segment).
struct VasomotorTarget {
  std::string segment;
  std::optional<double> skinPerfusion, shunt, superficialReturn;
};

//! Substrate contact of one segment set by one event ("all": every segment): a step, never ramped.
struct ContactTarget {
  std::string segment;
  double contactFraction = 0.0;  //!< share of the surface touching the substrate from the event on [1]
};

//! Tucking of one segment set by one event (a named segment with surface.tucked_into; never "all"): a step.
struct TuckTarget {
  std::string segment;
  double tuckedFraction = 0.0;  //!< share of the lateral surface pressed against the host from the event on [1]
};

//! Wetted fraction of one segment set by one event ("all": every segment): a step, or a linear ramp over the event's
//! `ramp` from the value at its start (drying, a coat that dries after the water).
struct WetTarget {
  std::string segment;
  double wettedFraction = 0.0;  //!< share of the exposed surface that is wet, from the event on (its ramp's end) [1]
};

//! Controller change of one event.
struct ControlTarget {
  std::string controller;  //!< vasomotor, shivering, panting, sweating or the NAME of a [control.local.NAME]
  std::string where;       //!< "line:column" of its table in the case file (messages), empty for --set
  std::string path;        //!< key path of its table, e.g. "events.2.control.feet" (messages)
  std::optional<bool> enabled;
  std::optional<double> setPoint;  //!< [K]
};

//! One entry of the timeline ([[events]]): from `at`, values move linearly to their targets over `ramp`.
struct EventSpec {
  double at = 0.0;    //!< start [s]
  double ramp = 0.0;  //!< duration of a linear ramp [s]; 0: a step
  //! Targets, including values that follow another (radiant temperature following the air temperature when
  //! never given explicitly), resolved at load time.
  std::vector<EnvironmentValue> environment;
  //! A step of the medium (never ramped); the event then also gives the new medium's temperature and speed.
  std::optional<SurroundingMedium> medium;
  std::vector<VasomotorTarget> vasomotor;
  //! `surface = { SEGMENT = { contact_fraction = F } }`: steps of substrate contact (a named segment's value wins
  //! over "all" within one event).
  std::vector<ContactTarget> contact;
  //! `surface = { SEGMENT = { tucked_fraction = F } }`: steps of tucking (segments with surface.tucked_into).
  std::vector<TuckTarget> tuck;
  //! `surface = { SEGMENT = { wetted_fraction = W } }`: the wet share of the exposed surface, stepped or ramped (a
  //! named segment's value wins over "all" within one event).
  std::vector<WetTarget> wet;
  std::optional<double> activity, hypometabolism, bradycardia, panting;
  std::vector<ControlTarget> control;
  std::string label;   //!< for figures
  double span = 0.0;   //!< shaded duration in figures [s] (0: the ramp)
  //! Where it came from, for warnings: "FILE:LINE:COLUMN" of its `at` (an [[events]] entry) or of
  //! environment.weather (a weather row), and the entry's key path ("events.2") or the row ("weather.csv line 7").
  std::string where, source;
  bool weatherRow = false;
};

}  // namespace thermorph
