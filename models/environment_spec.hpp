#pragma once
//! Case data of the surroundings: the medium, per-segment surface properties and the event timeline.
#include <optional>
#include <vector>

namespace thermorph {

enum class EndCondition { Exposed, Insulated };

//! Surface properties of one segment ([segments.surface]).
struct SurfaceSpec {
  EndCondition ends = EndCondition::Exposed;    //!< cylinder and cone end faces
  std::optional<double> convectionCoefficient;  //!< per-segment fixed coefficient [W/(m2 K)]
};

//! The medium around the animal ([environment]).
struct EnvironmentSpec {
  double temperature = 293.15;          //!< medium temperature [K]
  double convectionCoefficient = 10.0;  //!< fixed convection coefficient [W/(m2 K)]
};

//! One entry of the timeline ([[events]]).
struct EventSpec {
  double at = 0.0;    //!< start [s]
  double ramp = 0.0;  //!< duration of a linear ramp [s]; 0: a step
};

}  // namespace thermorph
