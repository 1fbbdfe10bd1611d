// Surface exchange through the EnvironmentModel of a loaded case: convection by correlations, radiation at steady
// state, free-to-forced transition, water against air, immersion, evaporation, substrate, and the Jacobian of
// all surface terms against finite differences.
#include <catch2/catch.hpp>

#include <algorithm>
#include <cmath>
#include <cstdio>
#include <memory>
#include <numbers>
#include <string>
#include <vector>

#include "models/body.hpp"
#include "models/case.hpp"
#include "models/surface_physics.hpp"
#include "solver/assembly.hpp"
#include "drivers/simulation.hpp"

using namespace thermorph;

namespace {

using std::numbers::pi;

double relErr(double value, double reference) { return std::abs(value / reference - 1.0); }

std::unique_ptr<Body> makeBody(const std::string& toml, const std::vector<std::string>& overrides = {}) {
  return std::make_unique<Body>(loadCaseFromString(toml, "environment-test.toml", overrides));
}

Index channelIndex(const Body& body, const std::string& name) {
  const auto& channels = body.network().channels;
  auto it = std::find(channels.begin(), channels.end(), name);
  REQUIRE(it != channels.end());
  return static_cast<Index>(it - channels.begin());
}

//! Heat into the body through one face at face temperature Ts [K], per channel [W], and the slopes [W/K].
struct FaceHeat {
  std::vector<double> heat, slope;
};
FaceHeat faceHeat(const Body& body, Index face, double Ts, double time = 0.0) {
  FaceHeat out;
  out.heat.assign(body.network().channels.size(), 0.0);
  out.slope.assign(body.network().channels.size(), 0.0);
  body.environment().faceHeat(face, Ts, time, out.heat, out.slope);
  return out;
}

//! A cylinder of 2 cm outer diameter, 20 cm long, ends insulated; face 0 is the lateral face of axial cell 0.
const std::string cylinder = R"toml(
[circulation]
fixed_arterial_temperature = "37 degC"
[[segments]]
name = "leg"
shape = "cylinder"
length = "20 cm"
axial_cells = 2
layers = [{ tissue = "muscle", thickness = "1 cm", cells = 3 }]
)toml";

double lateralArea(const Body& body, Index face) { return body.network().faces[face].area; }

// Hand calculations at a film temperature of 300 K (surface 305.15 K, fluid 295.15 K), D = 2 cm, 1 m/s.
// Air, Incropera et al. Table A.4, 300 K: nu 15.89e-6 m2/s, k 0.0263 W/(m K), Pr 0.707.
//   Re = 1 * 0.02 / 15.89e-6 = 1258.65
//   Churchill & Bernstein (1977): Nu_F = 0.3 + 0.62 Re^1/2 Pr^1/3 [1 + (0.4/Pr)^2/3]^-1/4 [1 + (Re/282000)^5/8]^4/5
//        = 17.967
//   Gr = g (dT/T_film) D^3 / nu^2 = 9.80665 * (10/300) * 8e-6 / 15.89e-6^2 = 10357; Ra = Gr Pr = 7322.5
//   Churchill & Chu (1975): Nu_N = {0.60 + 0.387 Ra^1/6 / [1 + (0.559/Pr)^9/16]^8/27}^2 = 4.0614
//   Churchill-Usagi, n = 3 (Incropera sec. 9.9): Nu = (17.967^3 + 4.0614^3)^1/3 = 18.036; h = Nu k / D = 23.717
constexpr double kHandAir = 23.717;
// Fresh water, Incropera et al. Table A.6, 300 K: rho 997 kg/m3, mu 855e-6 Pa s, k 0.613 W/(m K), Pr 5.83.
//   Re = 1 * 0.02 / (855e-6 / 997) = 23322; Churchill & Bernstein: Nu_F = 191.32; h = 191.32 * 0.613 / 0.02 = 5863.8.
//   Free convection (beta 2.76e-4 1/K, Ra ~ 1.7e6: Nu_N ~ 20) adds (20/191)^3 / 3 = 0.04 % by Churchill-Usagi.
constexpr double kHandWater = 5863.8;

}  // namespace

TEST_CASE("EnvironmentModel convection of a face matches the correlation hand calculation", "[environment]") {
  auto body = makeBody(cylinder + "[environment]\ntemperature = 295.15\nspeed = \"1 m/s\"\n");
  const Index convection = channelIndex(*body, "convection");
  const FaceHeat q = faceHeat(*body, 0, 305.15);
  const double h = q.heat[convection] / (lateralArea(*body, 0) * (295.15 - 305.15));
  std::printf("[environment] cylinder in air, 1 m/s: h = %.4f W/(m2 K), hand %.3f (rel %.2e)\n", h, kHandAir,
              relErr(h, kHandAir));
  // Churchill & Bernstein 1977 + Churchill & Chu 1975 + Churchill-Usagi with Incropera Table A.4 (hand above):
  // 0.5 % covers nu = mu/rho (15.895e-6) against the tabulated 15.89e-6.
  CHECK(relErr(h, kHandAir) < 5e-3);
  // The mean coefficient reported per segment is the same h on every face at one temperature.
  std::vector<double> faceTemperatures(body->network().faces.size(), 305.15);
  CHECK(relErr(body->environment().meanConvectionCoefficient(0, 0.0, faceTemperatures), h) < 1e-12);
  // The default emissivity of bare skin with correlations: 0.98 (Steketee 1973).
  CHECK(body->environment().emissivity(0) == 0.98);

  // Mitchell (1976) for a sphere of radius 5 cm at 5 m/s: length V^1/3 = (4 pi / 3)^1/3 * 0.05 = 0.080600 m,
  // Re = 5 * 0.0806 / 15.89e-6 = 25362, Nu = 0.34 Re^0.6 = 149.27 (constants from memory),
  // h_F = 149.27 * 0.0263 / 0.0806 = 48.709; with free convection (Churchill 1983, Ra 9.15e5, Nu 16.05, h 4.22)
  // by Churchill-Usagi: (48.709^3 + 4.221^3)^1/3 = 48.720 W/(m2 K).
  auto sphere = makeBody(R"toml(
[circulation]
fixed_arterial_temperature = "37 degC"
[[segments]]
name = "ball"
shape = "sphere"
layers = [{ tissue = "muscle", thickness = "5 cm", cells = 3 }]
surface = { correlation = "mitchell" }
[environment]
temperature = 295.15
speed = "5 m/s"
)toml");
  const double hSphere =
      faceHeat(*sphere, 0, 305.15).heat[convection] / (lateralArea(*sphere, 0) * (295.15 - 305.15));
  std::printf("[environment] Mitchell sphere, 5 m/s: h = %.4f W/(m2 K), hand 48.720 (rel %.2e)\n", hSphere,
              relErr(hSphere, 48.720));
  CHECK(relErr(hSphere, 48.720) < 5e-3);
}

TEST_CASE("A body with convection off loses exactly eps sigma A (Ts^4 - Tr^4) at steady state", "[environment]") {
  // One sphere of heat-producing tissue, no perfusion, convection fixed at 0: at steady state all metabolic heat
  // leaves by radiation. Reference: Stefan-Boltzmann law with the solved surface temperature.
  const double R = 0.03, eps = 0.9, Tr = 283.15, Tsky = 253.15, skyView = 0.3;
  const std::string text = R"toml(
[tissues.flesh]
conductivity = 0.5
density = 1050
specific_heat = 3600
metabolic_heat = 3000
perfusion = 0
q10 = 1
[[segments]]
name = "ball"
shape = "sphere"
layers = [{ tissue = "flesh", thickness = 0.03, cells = 6 }]
surface = { emissivity = 0.9, sky_view = 0.3 }
[environment]
temperature = 293.15
convection = 0
radiant_temperature = 283.15
)toml";
  for (bool sky : {false, true}) {
    auto body = makeBody(text, sky ? std::vector<std::string>{"environment.sky_temperature=253.15"}
                                   : std::vector<std::string>{});
    RunOptions options;
    options.output = "";
    options.quiet = true;
    RunSummary s = runSteady(*body, options);
    const Network& n = body->network();
    NetworkSystem system(n, NetworkSystem::Mode::Transient);
    std::vector<double> flows(n.groups.size() * n.channels.size()), storage(n.groups.size()),
        faceT(n.faces.size());
    system.groupFlows(0.0, s.finalState, flows, storage, faceT);
    const double Ts = faceT[0], A = 4.0 * pi * R * R;
    const double Ts4 = std::pow(Ts, 4);
    const double expected =
        sky ? eps * kStefanBoltzmann * A * (skyView * (std::pow(Tsky, 4) - Ts4) + (1 - skyView) * (std::pow(Tr, 4) - Ts4))
            : eps * kStefanBoltzmann * A * (std::pow(Tr, 4) - Ts4);
    const double radiation = flows[channelIndex(*body, "radiation")];
    const double metabolism = flows[channelIndex(*body, "metabolism")];
    std::printf("[environment] radiation only%s: Ts = %.4f K, %.6f W vs eps sigma A (Tr^4 - Ts^4) %.6f W (rel %.1e), "
                "metabolism %.6f W\n",
                sky ? " with sky" : "", Ts, radiation, expected, relErr(radiation, expected), metabolism);
    CHECK(relErr(radiation, expected) < 1e-9);
    CHECK(relErr(-radiation, metabolism) < 1e-6);  // steady state: heat in = heat out
    CHECK(flows[channelIndex(*body, "convection")] == 0.0);
  }
}

TEST_CASE("Convective heat loss rises monotonically from free to forced convection", "[environment]") {
  // Churchill-Usagi blending (Incropera sec. 9.9): Nu^3 = Nu_F^3 + Nu_N^3 grows with Re, so the loss must rise
  // with speed, start at the free-convection value and approach the forced one (common practice, no source).
  double previous = 0.0;
  double first = 0.0;
  for (double speed : {0.0, 1e-3, 0.01, 0.03, 0.1, 0.3, 1.0, 3.0, 10.0, 30.0}) {
    auto body = makeBody(cylinder + "[environment]\ntemperature = \"20 degC\"\n",
                         {"environment.speed=" + std::to_string(speed)});
    REQUIRE(body->network().channels[channelIndex(*body, "convection")] == "convection");
    const double loss = -faceHeat(*body, 0, 308.15).heat[channelIndex(*body, "convection")];
    INFO("speed " << speed << " m/s: loss " << loss << " W");
    CHECK(loss > 0.0);
    if (speed == 0.0) first = loss;
    else CHECK(loss > previous);
    // A breath of air barely counts: at Re ~ 1 the forced Nu ~ 1 against the free 4 (Churchill-Usagi, n = 3).
    if (speed == 1e-3) CHECK(relErr(loss, first) < 1e-2);
    previous = loss;
  }
  std::printf("[environment] cylinder loss at 35 degC in 20 degC air: %.4f W still, %.4f W at 30 m/s\n", first,
              previous);
}

TEST_CASE("Water coefficients exceed air's by the factor of the property tables", "[environment]") {
  // Same cylinder and film temperature in water and in air at 1 m/s: hand calculations above (Incropera Tables
  // A.4 and A.6 with Churchill & Bernstein): 5863.8 / 23.717 = 247. The ratio is set mostly by k Pr^1/3 / nu^1/2.
  auto air = makeBody(cylinder + "[environment]\ntemperature = 295.15\nspeed = \"1 m/s\"\n");
  auto water = makeBody(cylinder + "[environment]\nmedium = \"water\"\ntemperature = 295.15\nspeed = \"1 m/s\"\n");
  const Index c = channelIndex(*air, "convection");
  const double hAir = faceHeat(*air, 0, 305.15).heat[c] / (lateralArea(*air, 0) * -10.0);
  const double hWater = faceHeat(*water, 0, 305.15).heat[c] / (lateralArea(*water, 0) * -10.0);
  std::printf("[environment] water %.1f W/(m2 K) (hand %.1f, rel %.1e); water/air %.1f (hand %.1f)\n", hWater,
              kHandWater, relErr(hWater, kHandWater), hWater / hAir, kHandWater / kHandAir);
  CHECK(relErr(hWater, kHandWater) < 5e-3);  // Churchill & Bernstein with Table A.6 (hand above)
  CHECK(relErr(hWater / hAir, kHandWater / kHandAir) < 1e-2);
  CHECK(water->environment().immersed(0));
  CHECK_FALSE(air->environment().immersed(0));
}

TEST_CASE("Immersion: a segment standing in water uses water properties, a segment above water air", "[environment]") {
  // Medium air at 0 degC, immersion "always": the segment is in the water at water_temperature, so its h is the
  // water hand calculation at a 300 K film; no radiation, sun or evaporation reach it (water is opaque to
  // long-wave radiation; Incropera ch. 12, common practice).
  auto legInWater = makeBody(cylinder + R"toml(
[environment]
temperature = "0 degC"
water_temperature = 295.15
water_speed = "1 m/s"
solar_irradiance = 800
relative_humidity = 0
)toml",
                             {"segments.leg.surface.immersion=always", "segments.leg.surface.wetted_fraction=1"});
  const Index c = channelIndex(*legInWater, "convection");
  const FaceHeat inWater = faceHeat(*legInWater, 0, 305.15);
  const double hWater = inWater.heat[c] / (lateralArea(*legInWater, 0) * -10.0);
  CHECK(legInWater->environment().immersed(0));
  CHECK(relErr(hWater, kHandWater) < 5e-3);
  CHECK(inWater.heat[channelIndex(*legInWater, "radiation")] == 0.0);
  CHECK(inWater.heat[channelIndex(*legInWater, "solar")] == 0.0);
  CHECK(inWater.heat[channelIndex(*legInWater, "evaporation")] == 0.0);

  // Medium water at 0 degC, immersion "never": the segment is in air at air_temperature (hand calculation in air).
  auto headInAir = makeBody(cylinder + R"toml(
[environment]
medium = "water"
temperature = "0 degC"
air_temperature = 295.15
air_speed = "1 m/s"
)toml",
                            {"segments.leg.surface.immersion=never", "segments.leg.surface.emissivity=0"});
  const double hAir = faceHeat(*headInAir, 0, 305.15).heat[c] / (lateralArea(*headInAir, 0) * -10.0);
  CHECK_FALSE(headInAir->environment().immersed(0));
  CHECK(relErr(hAir, kHandAir) < 5e-3);
  std::printf("[environment] immersed segment h %.1f (water hand %.1f); emerged segment h %.3f (air hand %.3f)\n",
              hWater, kHandWater, hAir, kHandAir);
}

TEST_CASE("Evaporation from a fully wetted surface at 35 degC into dry air matches the Lewis relation", "[environment]") {
  // Surface and air at 35 degC (no convection or radiation), dry air, fixed h_c = 10 W/(m2 K), w = 1.
  // Heat-mass transfer analogy (Chilton-Colburn; Incropera ch. 6), air at the film temperature 308.15 K:
  //   e_s(35 degC) = 611.21 exp(17.502*35/275.97) = 5625.91 Pa (Buck 1981);
  //   rho_v,s = 5625.91 * 0.01801528 / (8.314462618 * 308.15) = 0.0395583 kg/m3;
  //   rho_air = 101325 / (287.058 * 308.15) = 1.14548 kg/m3; c_p = 1007.33 J/(kg K), k = 0.026903 W/(m K)
  //   (Table A.4, linear between 300 and 350 K); alpha = k / (rho c_p) = 2.33154e-5 m2/s;
  //   D_AB = 0.26e-4 (308.15/298)^1.5 = 2.73396e-5 m2/s (Table A.8, from memory); Le = 0.852807, Le^2/3 = 0.899292;
  //   h_m = 10 / (1.14548 * 1007.33 * 0.899292) = 9.63696e-3 m/s;
  //   L_v = 2.501e6 - 2361 * 35 = 2.418365e6 J/kg (FAO-56);
  //   q = -h_m rho_v,s L_v = -9.63696e-3 * 0.0395583 * 2.418365e6 = -921.93 W/m2.
  // The Lewis relation shortcut h_e = LR h_c, LR = 16.5 K/kPa (from memory): q = -10 * 0.0165 * 5625.91 = -928.3.
  auto body = makeBody(cylinder + R"toml(
[environment]
temperature = "35 degC"
relative_humidity = 0
convection = "10 W/(m2 K)"
)toml",
                       {"segments.leg.surface.wetted_fraction=1"});
  const double A = lateralArea(*body, 0);
  const FaceHeat q = faceHeat(*body, 0, 308.15);
  const double flux = q.heat[channelIndex(*body, "evaporation")] / A;
  std::printf("[environment] evaporation at 35 degC, dry air, h_c 10: %.3f W/m2 (analogy hand -921.93, rel %.1e; "
              "Lewis ratio 16.5 K/kPa -928.3, rel %.1e)\n",
              flux, relErr(flux, -921.93), relErr(flux, -928.3));
  CHECK(relErr(flux, -921.93) < 2e-3);  // hand calculation above (cubic against linear table interpolation)
  CHECK(relErr(flux, -928.3) < 0.02);   // Lewis relation, LR from memory
  CHECK(q.heat[channelIndex(*body, "convection")] == 0.0);
  CHECK(q.heat[channelIndex(*body, "radiation")] == 0.0);  // fixed coefficient: emissivity defaults to 0

  // The same wetted surface in water does not evaporate.
  auto wet = makeBody(cylinder + "[environment]\nmedium = \"water\"\ntemperature = \"35 degC\"\n",
                      {"segments.leg.surface.wetted_fraction=1"});
  CHECK(faceHeat(*wet, 0, 308.15).heat[channelIndex(*wet, "evaporation")] == 0.0);
}

TEST_CASE("The substrate channel follows h_sub f_c A (T_sub - T_s)", "[environment]") {
  // Definitions (common practice, no source): contact conduction h_sub f_c A (T_sub - T_s); convection only over
  // the exposed (1 - f_c) A. (Absorbed sun against the shadow of each shape: tests/test_solar.cpp.)
  auto body = makeBody(cylinder + R"toml(
[environment]
temperature = "20 degC"
convection = 5
solar_irradiance = 800
substrate_temperature = "10 degC"
substrate_conductance = 40
)toml",
                       {"segments.leg.surface.contact_fraction=0.25", "segments.leg.surface.solar_absorptivity=0.6"});
  const double A = lateralArea(*body, 0), Ts = 303.15;
  const FaceHeat q = faceHeat(*body, 0, Ts);
  CHECK(relErr(q.heat[channelIndex(*body, "substrate")], 40 * 0.25 * A * (283.15 - Ts)) < 1e-12);
  CHECK(relErr(q.heat[channelIndex(*body, "convection")], 5 * 0.75 * A * (293.15 - Ts)) < 1e-12);
  CHECK(q.slope[channelIndex(*body, "substrate")] == Approx(-40 * 0.25 * A).epsilon(1e-12));
}

TEST_CASE("Jacobian with every surface term matches central finite differences", "[environment][jacobian]") {
  // Correlation convection (mixed, in wind), radiation to sky and surroundings, sun, evaporation, substrate
  // contact, on a coated cylinder with exposed ends. Reference: central differences of the right-hand side
  // (common practice, no source). h'(T_s) comes from a 0.01 K central difference inside the correlation
  // evaluator, so the criterion is 1e-5 of the row's largest entry.
  auto body = makeBody(R"toml(
[circulation]
fixed_arterial_temperature = "37 degC"
[[segments]]
name = "leg"
shape = "cylinder"
length = "15 cm"
axial_cells = 3
layers = [{ tissue = "muscle", thickness = "1.2 cm", cells = 3 }, { tissue = "skin", thickness = "0.2 cm", cells = 1 }]
coat = { material = "fur", thickness = "0.5 cm", cells = 2 }
surface = { ends = "exposed", sky_view = 0.4, wetted_fraction = 0.3, contact_fraction = 0.2 }
[environment]
temperature = "5 degC"
speed = "0.7 m/s"
relative_humidity = 0.4
sky_temperature = "-15 degC"
solar_irradiance = 500
substrate_temperature = "2 degC"
substrate_conductance = 30
)toml");
  for (auto mode : {NetworkSystem::Mode::Transient, NetworkSystem::Mode::Steady}) {
    NetworkSystem system(body->network(), mode);
    const Index n = system.size(), nodes = system.nodeCount();
    std::vector<double> y(n);
    for (Index i = 0; i < n; ++i) y[i] = i < nodes ? 300.0 + 8.0 * std::sin(1.7 * static_cast<double>(i)) : 0.0;
    std::vector<double> values(system.pattern().nonzeros());
    system.jacobian(0.0, y, values);
    std::vector<double> dense(n * n, 0.0);
    const SparsePattern& p = system.pattern();
    for (Index col = 0; col < n; ++col)
      for (Index k = p.columnStart[col]; k < p.columnStart[col + 1]; ++k) dense[p.rowIndex[k] * n + col] = values[k];
    std::vector<double> plus(n), minus(n), fd(n * n);
    for (Index col = 0; col < nodes; ++col) {
      const double step = 1e-3;
      std::vector<double> yp = y, ym = y;
      yp[col] += step;
      ym[col] -= step;
      system.evaluate(0.0, yp, plus);
      system.evaluate(0.0, ym, minus);
      for (Index row = 0; row < n; ++row) fd[row * n + col] = (plus[row] - minus[row]) / (2.0 * step);
    }
    double worst = 0.0;
    for (Index row = 0; row < n; ++row) {
      double scale = 0.0;
      for (Index col = 0; col < nodes; ++col) scale = std::max(scale, std::abs(dense[row * n + col]));
      if (scale == 0.0) continue;
      for (Index col = 0; col < nodes; ++col)
        worst = std::max(worst, std::abs(dense[row * n + col] - fd[row * n + col]) / scale);
    }
    const char* name = mode == NetworkSystem::Mode::Transient ? "transient" : "steady";
    std::printf("[environment] Jacobian with all surface terms (%s, %zu states): max relative error %.2e\n", name,
                static_cast<std::size_t>(n), worst);
    INFO(name);
    CHECK(worst < 1e-5);
  }
  // Every channel is active at this state: the exposed channels on the first lateral face, the substrate on the
  // coat's contact column beside it (face 1; tests/test_contact_coat.cpp), not on the lateral face.
  const FaceHeat q = faceHeat(*body, 0, 290.0);
  for (const char* channel : {"convection", "radiation", "solar", "evaporation"})
    CHECK(q.heat[channelIndex(*body, channel)] != 0.0);
  CHECK(q.heat[channelIndex(*body, "substrate")] == 0.0);
  const FaceHeat column = faceHeat(*body, 1, 290.0);
  CHECK(column.heat[channelIndex(*body, "substrate")] != 0.0);
  CHECK(column.heat[channelIndex(*body, "convection")] == 0.0);
  CHECK(body->environment().emissivity(0) == 0.95);  // a coat with correlations (from memory)
}

TEST_CASE("Correlations used outside their range are reported once per case", "[environment]") {
  // A small horizontal plate in still air: Ra on the length area/perimeter = 0.1*0.04/0.28 = 0.0143 m is about
  // 3e3 for 10 K, below the 1e4 where Incropera eqs. 9.30-9.32 begin.
  const std::string plate = R"toml(
[circulation]
fixed_arterial_temperature = "37 degC"
[[segments]]
name = "ear"
shape = "plate"
length = "10 cm"
width = "4 cm"
thickness = "0.4 cm"
axial_cells = 2
layers = [{ tissue = "skin", cells = 2 }]
surface = { orientation = "horizontal" }
[environment]
temperature = 295.15
)toml";
  for (int repeat = 0; repeat < 2; ++repeat) {  // a new case reports again
    auto body = makeBody(plate);
    CHECK(body->environment().warnings().empty());
    faceHeat(*body, 0, 305.15);
    faceHeat(*body, 1, 305.0);
    const std::vector<std::string> warnings = body->environment().warnings();
    INFO("warnings: " << warnings.size());
    REQUIRE(warnings.size() == 2);  // upper and lower face correlations, once each
    CHECK_THAT(warnings[0], Catch::Contains("horizontal plate") && Catch::Contains("Ra"));
  }
}
