// A coated segment's coat covers its exposed end faces unless surface.end_coat = "off". On the ends the coat is
// a flat layer: the tissue disc loses heat through R = c / (k_c A) (plane wall, Incropera et al. eq. 3.6) in
// series with the film 1 / (h A). Check: with the tissue held isothermal at the blood temperature (very high
// conductivity and perfusion), covering the ends lowers the dry heat loss by exactly what the series resistance
// says, 2 A (T_b - T_a) [h - 1 / (c / k_c + 1 / h)].
#include <catch2/catch.hpp>

#include <cmath>
#include <cstdio>
#include <numbers>
#include <string>

#include "test_support_body.hpp"

using namespace thermorph;

namespace {

const std::string caseText = R"toml(
[circulation]
fixed_arterial_temperature = "37 degC"
[tissues.core]
conductivity = 1000
density = 1000
specific_heat = 3600
metabolic_heat = 0
perfusion = "1 1/s"
q10 = 1
[[segments]]
name = "trunk"
shape = "cylinder"
length = "10 cm"
axial_cells = 1
layers = [{ tissue = "core", thickness = "2 cm", cells = 2 }]
coat = { material = "fur", thickness = "1 cm", cells = 4 }
[environment]
temperature = "0 degC"
convection = "10 W/(m2 K)"
)toml";

//! Steady dry heat loss (convection; a fixed coefficient has no radiation) [W].
double dryLoss(const std::vector<std::string>& overrides) {
  Body body(loadCaseFromString(caseText, "end-coat.toml", overrides));
  const std::vector<double> t = testing::steadyTemperatures(body);
  NetworkSystem system(body.network(), NetworkSystem::Mode::Steady);
  const Network& n = body.network();
  std::vector<double> flows(n.groups.size() * n.channels.size()), storage(n.groups.size()), faces(n.faces.size());
  system.groupFlows(0.0, t, flows, storage, faces);
  return -testing::bodyChannelTotal(body.network(), flows, testing::channelIndex(body.network(), "convection"));
}

}  // namespace

TEST_CASE("The coat covers the end faces as a flat layer in series, unless end_coat is off", "[environment][coat]") {
  const double covered = dryLoss({});
  const double bare = dryLoss({"segments.trunk.surface.end_coat=\"off\""});
  const double A = std::numbers::pi * 0.02 * 0.02, h = 10.0, c = 0.01, k = 0.04, dT = 37.0;  // fur k: Hammel 1955
  const double expected = 2.0 * A * dT * (h - 1.0 / (c / k + 1.0 / h));
  std::printf("[coat] dry loss, ends bare %.6g W, covered %.6g W: difference %.6g W, series resistance %.6g W "
              "(rel. error %.1e)\n",
              bare, covered, bare - covered, expected, std::abs((bare - covered) / expected - 1.0));
  CHECK(std::abs((bare - covered) / expected - 1.0) < 2e-3);
}
