#pragma once
//! Built-in tissue and coat property library; every value cites its source.
#include <map>
#include <string>

namespace thermorph {

//! Thermal and physiological properties of one tissue or coat material.
struct TissueProperties {
  double conductivity = 0.0;     //!< thermal conductivity [W/(m K)]
  double density = 0.0;          //!< density [kg/m3]
  double specificHeat = 0.0;     //!< specific heat capacity [J/(kg K)]
  double metabolicHeat = 0.0;    //!< basal volumetric heat production at the Q10 reference [W/m3]
  double perfusion = 0.0;        //!< basal volumetric blood perfusion [1/s] (m3 blood per m3 tissue per s)
  double q10 = 2.0;              //!< Q10 of metabolic heat [1]
  double wetConductivity = 0.0;  //!< conductivity when immersed, coats only [W/(m K)] (0: same as dry)
  bool isCoat = false;           //!< fur or feathers: conduction only, no metabolism or perfusion
  std::string source;            //!< where the values come from
};

//! Built-in properties keyed by name: muscle, fat, skin, bone, viscera, brain, blubber, fur, feathers, blood.
const std::map<std::string, TissueProperties>& builtinTissues();

}  // namespace thermorph
