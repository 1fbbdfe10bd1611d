#pragma once
//! Built-in tissue and coat property library; every value cites its source.
#include <map>
#include <optional>
#include <string>
#include <string_view>
#include <vector>

namespace thermorph {

//! What a tissue does in the model, independent of its name. Only some roles change the physics:
//!   skin     the vasomotor skin-perfusion multiplier and controller act on its perfusion; shunts need an
//!            outermost skin layer;
//!   brain    spared by bradycardia when [circulation] bradycardia_tissues is not given;
//!   muscle   receives the shivering heat (by volume);
//!   coat     a coat material (fur, feathers): conduction only, no metabolism or perfusion, a wet conductivity;
//!   fat, bone, viscera, blood, other: descriptive, no special treatment.
enum class TissueRole { Skin, Muscle, Fat, Bone, Viscera, Brain, Coat, Blood, Other };

//! Role name as written in a case file ("skin", ...).
const char* roleName(TissueRole role);
//! Role from its case-file name; nothing when the name is not a role.
std::optional<TissueRole> roleFromName(std::string_view name);
//! Every role, in the order of the enum.
const std::vector<TissueRole>& allRoles();

//! Thermal and physiological properties of one tissue or coat material.
struct TissueProperties {
  double conductivity = 0.0;     //!< thermal conductivity [W/(m K)]
  double density = 0.0;          //!< density [kg/m3]
  double specificHeat = 0.0;     //!< specific heat capacity [J/(kg K)]
  double metabolicHeat = 0.0;    //!< basal volumetric heat production at the Q10 reference [W/m3]
  double perfusion = 0.0;        //!< basal volumetric blood perfusion [1/s] (m3 blood per m3 tissue per s)
  double q10 = 2.0;              //!< Q10 of metabolic heat [1]
  double wetConductivity = 0.0;  //!< conductivity when immersed, coats only [W/(m K)] (0: same as dry)
  TissueRole role = TissueRole::Other;  //!< what the tissue does (never inferred from its name)
  std::string source;            //!< where the values come from
  //! Fur or feathers: conduction only, no metabolism or perfusion.
  bool isCoat() const { return role == TissueRole::Coat; }
};

//! Built-in properties keyed by name: muscle, fat, skin, bone, viscera, brain, blubber, fur, feathers, blood.
const std::map<std::string, TissueProperties>& builtinTissues();

}  // namespace thermorph
