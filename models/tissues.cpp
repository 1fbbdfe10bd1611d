#include "models/tissues.hpp"

namespace thermorph {
namespace {

// Perfusion given in mL/(min kg) converted with the tissue density: omega = F * 1e-6 / 60 * rho [1/s].
constexpr double perfusionFromMlPerMinKg(double mlPerMinKg, double density) {
  return mlPerMinKg * 1e-6 / 60.0 * density;
}

}  // namespace

const char* roleName(TissueRole role) {
  switch (role) {
    case TissueRole::Skin: return "skin";
    case TissueRole::Muscle: return "muscle";
    case TissueRole::Fat: return "fat";
    case TissueRole::Bone: return "bone";
    case TissueRole::Viscera: return "viscera";
    case TissueRole::Brain: return "brain";
    case TissueRole::Coat: return "coat";
    case TissueRole::Blood: return "blood";
    case TissueRole::Other: return "other";
  }
  return "other";
}

const std::vector<TissueRole>& allRoles() {
  static const std::vector<TissueRole> roles = {TissueRole::Skin,    TissueRole::Muscle, TissueRole::Fat,
                                                TissueRole::Bone,    TissueRole::Viscera, TissueRole::Brain,
                                                TissueRole::Coat,    TissueRole::Blood,  TissueRole::Other};
  return roles;
}

std::optional<TissueRole> roleFromName(std::string_view name) {
  for (TissueRole r : allRoles())
    if (name == roleName(r)) return r;
  return std::nullopt;
}

const std::map<std::string, TissueProperties>& builtinTissues() {
  // rho [kg/m3], c [J/(kg K)], k [W/(m K)] and resting perfusion: tissue-properties database of
  // McIntosh & Anderson (2010), Biophys. Rev. Lett. 5:129 (from memory, see cases/REFERENCE.md).
  // Basal volumetric heat: typical resting values used in mammalian bioheat models (from memory);
  // they are defaults to be replaced by species data.
  static const std::map<std::string, TissueProperties> tissues = {
      {"muscle", {0.49, 1090.0, 3421.0, 684.0, perfusionFromMlPerMinKg(37.0, 1090.0), 2.0, 0.0, TissueRole::Muscle,
                  "McIntosh & Anderson 2010 (from memory); metabolic heat from memory"}},
      {"fat", {0.21, 911.0, 2348.0, 58.0, perfusionFromMlPerMinKg(33.0, 911.0), 2.0, 0.0, TissueRole::Fat,
               "McIntosh & Anderson 2010 (from memory); metabolic heat from memory"}},
      {"skin", {0.37, 1109.0, 3391.0, 368.0, perfusionFromMlPerMinKg(106.0, 1109.0), 2.0, 0.0, TissueRole::Skin,
                "McIntosh & Anderson 2010 (from memory); metabolic heat from memory"}},
      {"bone", {0.32, 1908.0, 1313.0, 0.0, perfusionFromMlPerMinKg(10.0, 1908.0), 2.0, 0.0, TissueRole::Bone,
                "cortical bone, McIntosh & Anderson 2010 (from memory)"}},
      // Abdominal and thoracic organs lumped: high metabolism and perfusion (from memory).
      {"viscera", {0.53, 1050.0, 3700.0, 4000.0, perfusionFromMlPerMinKg(400.0, 1050.0), 2.0, 0.0, TissueRole::Viscera,
                   "lumped organs, typical bioheat-model values (from memory)"}},
      {"brain", {0.51, 1046.0, 3630.0, 10000.0, perfusionFromMlPerMinKg(500.0, 1046.0), 2.0, 0.0, TissueRole::Brain,
                 "McIntosh & Anderson 2010 (from memory); metabolic heat from memory"}},
      // Blubber: role fat (an insulating fat layer). Conductivity: adult dolphin 0.18 +- 0.02 W/(m K), Dunkin et al. 2005, J. Exp. Biol. 208:1469.
      {"blubber", {0.18, 930.0, 2400.0, 40.0, perfusionFromMlPerMinKg(10.0, 930.0), 2.0, 0.0, TissueRole::Fat,
                   "k: Dunkin et al. 2005; rho, c, metabolism, perfusion from memory"}},
      // Fur: k about 0.04 W/(m K), Hammel 1955, Am. J. Physiol. 182:369. Submerged fur loses most of its
      // insulation (Scholander et al. 1950, Biol. Bull. 99:225); wet value near that of water (from memory).
      {"fur", {0.04, 100.0, 2000.0, 0.0, 0.0, 1.0, 0.45, TissueRole::Coat,
               "k: Hammel 1955; wet k, rho, c from memory"}},
      {"feathers", {0.035, 50.0, 2000.0, 0.0, 0.0, 1.0, 0.40, TissueRole::Coat,
                    "k, wet k, rho, c from memory (comparable to fur, Hammel 1955)"}},
      // Blood: McIntosh & Anderson 2010 (from memory). Used for the blood pool and streams.
      {"blood", {0.52, 1050.0, 3617.0, 0.0, 0.0, 1.0, 0.0, TissueRole::Blood, "McIntosh & Anderson 2010 (from memory)"}},
  };
  return tissues;
}

}  // namespace thermorph
