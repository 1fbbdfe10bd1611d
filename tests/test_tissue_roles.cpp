// Tissue roles: what a tissue does (skin, brain, muscle, coat, ...) is a property it inherits from its base or
// states with `role`, never a match on its name. The roles' meaning is the model's definition (cases/REFERENCE.md,
// tissues.*.role); the checks below follow it: the skin-perfusion factor acts on skin, bradycardia spares brain,
// shivering heats muscle, shunts need skin (common practice in thermoregulation models, no source).
#include <catch2/catch.hpp>

#include <algorithm>
#include <map>
#include <string>

#include "models/body.hpp"
#include "network/network.hpp"
#include "solver/assembly.hpp"
#include "test_common.hpp"

using namespace thermorph;

namespace {

// A trunk whose layers are named against their roles: "cortex" (base brain), "skin_graft" (base muscle) and
// "dermis" (base skin). An event at 5 min sets the skin-perfusion factor to 0.25 and bradycardia to 0.5.
const std::string rolesCase = R"toml(
[run]
duration = "10 min"
output_interval = "5 min"
[control.shivering]
set_point = "37 degC"
gain = "1 1/K"
[tissues.cortex]
base = "brain"
[tissues.skin_graft]
base = "muscle"
[tissues.dermis]
base = "skin"
[[segments]]
name = "trunk"
shape = "cylinder"
length = "30 cm"
axial_cells = 2
layers = [{ tissue = "cortex", thickness = "2 cm", cells = 1 }, { tissue = "skin_graft", thickness = "2 cm", cells = 2 },
          { tissue = "dermis", thickness = "0.3 cm", cells = 1 }]
[[events]]
at = "5 min"
vasomotor = { all = { skin_perfusion = 0.25 } }
circulation = { bradycardia = 0.5 }
)toml";

//! Modulator values before and after the event, by modulator name.
std::map<std::string, std::pair<double, double>> perfusionFactors(const Body& body) {
  const Network& n = body.network();
  NetworkSystem system(n, NetworkSystem::Mode::Transient);
  std::vector<double> state(system.size(), 310.15), before(n.modulators.size()), after(n.modulators.size());
  body.setInterval(0);
  system.modulatorValues(299.0, state, before);
  body.setInterval(1);
  system.modulatorValues(301.0, state, after);
  std::map<std::string, std::pair<double, double>> out;
  for (Index k = 0; k < n.modulators.size(); ++k) out[n.modulators[k].name] = {before[k], after[k]};
  return out;
}

}  // namespace

TEST_CASE("A tissue's role comes from its base or its role key, never from its name", "[case][roles]") {
  Case c = loadCaseFromString(rolesCase, "roles.toml");
  CHECK(c.tissues.at("dermis").role == TissueRole::Skin);
  CHECK(c.tissues.at("skin_graft").role == TissueRole::Muscle);
  CHECK(c.tissues.at("cortex").role == TissueRole::Brain);
  CHECK(c.tissues.at("fur").role == TissueRole::Coat);
  CHECK(c.tissues.at("blubber").role == TissueRole::Fat);

  Body body(c);
  auto f = perfusionFactors(body);
  // dermis is skin: the skin factor 0.25 and bradycardia 0.5 both act.
  REQUIRE(f.count("trunk dermis perfusion"));
  CHECK(f["trunk dermis perfusion"].second == Approx(0.125 * f["trunk dermis perfusion"].first).epsilon(1e-15));
  // skin_graft is muscle: bradycardia only.
  CHECK(f["trunk skin_graft perfusion"].second == Approx(0.5 * f["trunk skin_graft perfusion"].first).epsilon(1e-15));
  // cortex is brain: spared by bradycardia, not skin.
  CHECK(f["trunk cortex perfusion"].second == f["trunk cortex perfusion"].first);

  // Shivering heat goes to the cells of role muscle (skin_graft), by volume, nowhere else.
  const Network& n = body.network();
  const auto channel = std::find(n.channels.begin(), n.channels.end(), std::string("shivering"));
  REQUIRE(channel != n.channels.end());
  const auto shivering = static_cast<Index>(channel - n.channels.begin());
  int cells = 0;
  for (const HeatSource& s : n.sources)
    if (s.channel == shivering) {
      CHECK_THAT(n.label(s.node), Catch::Contains("(skin_graft)"));
      ++cells;
    }
  CHECK(cells == 2 * 2);  // 2 axial x 2 radial cells of skin_graft

  // The resolved case states each role, so it reloads with the same roles.
  Case again = loadCaseFromString(resolvedCaseToml(c), "resolved.toml");
  CHECK(again.tissues.at("dermis").role == TissueRole::Skin);
  CHECK(again.tissues.at("skin_graft").role == TissueRole::Muscle);
  CHECK(again.tissues.at("cortex").role == TissueRole::Brain);
}

TEST_CASE("The role key overrides the base - shunts need a skin role - bad roles are refused", "[case][roles]") {
  const std::string segment = R"toml(
[[segments]]
name = "leg"
shape = "cylinder"
length = "10 cm"
vessels = { shunt_flow_max = "1 mL/min" }
layers = [{ tissue = "muscle", thickness = "1 cm", cells = 2 }, { tissue = "outer", thickness = "0.2 cm", cells = 1 }]
)toml";
  // A tissue named like skin, based on skin, with role muscle: not skin, so no shunts.
  std::string e = common::caseErrorOf("[tissues.outer]\nbase = \"skin\"\nrole = \"muscle\"\n" + segment);
  CHECK_THAT(e, Catch::Contains("segments.leg.vessels.shunt_flow_max") && Catch::Contains("shunts need skin") &&
                    Catch::Contains("role is \"muscle\""));
  // Based on fat with role skin: skin, shunts accepted.
  CHECK(common::caseErrorOf("[tissues.outer]\nbase = \"fat\"\nrole = \"skin\"\n" + segment) == "no error");
  // A new tissue without base has role other.
  Case c = loadCaseFromString("[tissues.outer]\nconductivity = 0.3\ndensity = 1000\nspecific_heat = 3000\n" +
                                  std::string(R"toml(
[[segments]]
name = "leg"
shape = "cylinder"
length = "10 cm"
layers = [{ tissue = "outer", thickness = "1 cm", cells = 2 }]
)toml"),
                              "case.toml");
  CHECK(c.tissues.at("outer").role == TissueRole::Other);
  // Unknown role: the choices are listed.
  e = common::caseErrorOf("[tissues.outer]\nbase = \"skin\"\nrole = \"epidermis\"\n" + segment);
  CHECK_THAT(e, Catch::Contains("tissues.outer.role") && Catch::Contains("\"epidermis\" is not one of") &&
                    Catch::Contains("skin, muscle"));
  // A coat has no metabolism: stated metabolism is refused, inherited metabolism dropped.
  e = common::caseErrorOf("[tissues.outer]\nbase = \"muscle\"\nrole = \"coat\"\nmetabolic_heat = \"500 W/m3\"\n" +
                          segment);
  CHECK_THAT(e, Catch::Contains("tissues.outer.metabolic_heat") && Catch::Contains("role \"coat\""));
  Case coat = loadCaseFromString("[tissues.wool]\nbase = \"muscle\"\nrole = \"coat\"\n" + segment + "coat = { material = \"wool\", thickness = \"1 cm\" }\n[tissues.outer]\nbase = \"skin\"\n", "case.toml");
  CHECK(coat.tissues.at("wool").isCoat());
  CHECK(coat.tissues.at("wool").metabolicHeat == 0.0);
  CHECK(coat.tissues.at("wool").perfusion == 0.0);
}
