// Validation of fluid properties and moist-air relations (models/media.hpp).
#include <catch2/catch.hpp>

#include <cmath>
#include <string>

#include "models/media.hpp"

using namespace thermorph;

namespace {
double relErr(double value, double reference) { return std::abs(value / reference - 1.0); }
}  // namespace

TEST_CASE("air properties match Incropera Table A.4 rows", "[media]") {
  struct Row {
    double T, nu, k, pr;
  };
  // Incropera et al., Fundamentals of Heat and Mass Transfer, Table A.4 (docs/references.md: checked).
  for (const Row row : {Row{250, 11.44e-6, 0.0223, 0.720}, Row{300, 15.89e-6, 0.0263, 0.707},
                        Row{350, 20.92e-6, 0.0300, 0.700}}) {
    const FluidProperties air = fluidProperties(Medium::Air, row.T);
    INFO("T = " << row.T << " K");
    CHECK(relErr(air.kinematicViscosity(), row.nu) < 0.005);
    CHECK(relErr(air.conductivity, row.k) < 0.005);
    CHECK(relErr(air.prandtl, row.pr) < 0.005);  // Pr computed as mu cp/k
    CHECK(air.expansion == Approx(1.0 / row.T).epsilon(1e-12));  // ideal gas, common practice
    CHECK_FALSE(air.outsideValidity);
  }
  // 300 K: rho 1.1614, cp 1007, mu 184.6e-7 (Table A.4, checked).
  const FluidProperties air = fluidProperties(Medium::Air, 300.0);
  CHECK(relErr(air.density, 1.1614) < 0.005);
  CHECK(relErr(air.specificHeat, 1007.0) < 0.005);
  CHECK(relErr(air.viscosity, 184.6e-7) < 0.005);
  CHECK(relErr(air.diffusivity(), 22.5e-6) < 0.005);  // alpha 22.5e-6 m2/s, Table A.4 from memory
}

TEST_CASE("air viscosity between table rows follows Sutherland's law", "[media]") {
  // Sutherland's law with mu0 = 1.716e-5 Pa s, T0 = 273 K, S = 111 K (White, Viscous Fluid Flow,
  // Table 1-2, from memory); it lies within 0.6 % of the Table A.4 rows (0.6 % at 400 K), so a 1 %
  // tolerance tests the interpolation between rows 50 K apart.
  for (double T : {225.0, 275.0, 310.0, 325.0, 375.0}) {
    const double sutherland = 1.716e-5 * std::pow(T / 273.0, 1.5) * (273.0 + 111.0) / (T + 111.0);
    INFO("T = " << T << " K");
    CHECK(relErr(fluidProperties(Medium::Air, T).viscosity, sutherland) < 0.01);
  }
}

TEST_CASE("fresh water properties match Incropera Table A.6 rows", "[media]") {
  struct Row {
    double T, rho, cp, mu, k, pr;
  };
  // Incropera et al. Table A.6 (docs/references.md): 280 and 300 K checked; at 310 K cp, mu, k
  // checked and rho 993, Pr 4.62 from memory. rho comes from Kell (1975), not the table.
  for (const Row row : {Row{280, 1000, 4198, 1422e-6, 0.582, 10.26}, Row{300, 997, 4179, 855e-6, 0.613, 5.83},
                        Row{310, 993, 4178, 695e-6, 0.628, 4.62}}) {
    const FluidProperties w = fluidProperties(Medium::FreshWater, row.T);
    INFO("T = " << row.T << " K");
    CHECK(relErr(w.density, row.rho) < 0.005);
    CHECK(relErr(w.specificHeat, row.cp) < 0.005);
    CHECK(relErr(w.viscosity, row.mu) < 0.005);
    CHECK(relErr(w.conductivity, row.k) < 0.005);
    CHECK(relErr(w.prandtl, row.pr) < 0.005);
  }
}

TEST_CASE("fresh water expansion and density maximum", "[media]") {
  // Table A.6 beta_f x 1e6 [1/K] at 300, 310, 320 K: 276.1, 361.9, 436.7 (from memory); here from
  // differentiating Kell (1975), so this is an independent check.
  CHECK(relErr(fluidProperties(Medium::FreshWater, 300).expansion, 276.1e-6) < 0.01);
  CHECK(relErr(fluidProperties(Medium::FreshWater, 310).expansion, 361.9e-6) < 0.01);
  CHECK(relErr(fluidProperties(Medium::FreshWater, 320).expansion, 436.7e-6) < 0.01);
  // Density maximum 999.972 kg/m3 at 3.98 degC (common practice, no source).
  CHECK(mediumDensity(Medium::FreshWater, 277.13) == Approx(999.972).epsilon(2e-6));
  CHECK(std::abs(fluidProperties(Medium::FreshWater, 277.13).expansion) < 1e-6);
}

TEST_CASE("fresh water viscosity between table rows follows the Vogel equation", "[media]") {
  // Vogel form mu = 2.414e-5 * 10^(247.8/(T - 140)) Pa s (common engineering fit, from memory,
  // about 1 % over 0-100 degC); tests the interpolation between 5 K rows.
  for (double T : {277.5, 292.5, 302.5, 317.5, 342.5}) {
    const double vogel = 2.414e-5 * std::pow(10.0, 247.8 / (T - 140.0));
    INFO("T = " << T << " K");
    CHECK(relErr(fluidProperties(Medium::FreshWater, T).viscosity, vogel) < 0.02);
  }
}

TEST_CASE("sea water correlations at zero salinity reproduce fresh water", "[media]") {
  // Sharqawy et al. (2010) at S = 0 versus Incropera Table A.6 (an independent source) at 300 K:
  // this checks the remembered coefficients of eqs. 8, 9, 13, 23.
  const FluidProperties s = fluidProperties(Medium::SeaWater, 300.0, 0.0);
  CHECK(relErr(s.density, 997.0) < 0.002);
  CHECK(relErr(s.specificHeat, 4179.0) < 0.003);
  CHECK(relErr(s.viscosity, 855e-6) < 0.005);
  CHECK(relErr(s.conductivity, 0.613) < 0.005);
}

TEST_CASE("sea water at 35 g/kg and 20 degC", "[media]") {
  const FluidProperties s = fluidProperties(Medium::SeaWater, 293.15, 0.035);
  CHECK(relErr(s.density, 1024.8) < 0.001);     // EOS-80 / TEOS-10 value 1024.8 kg/m3, from memory
  CHECK(relErr(s.specificHeat, 3993.0) < 0.005);  // 3993 J/(kg K), from memory (Millero et al. 1973)
  CHECK(relErr(s.viscosity, 1.08e-3) < 0.01);    // 1.08e-3 Pa s, from memory
  CHECK(relErr(s.conductivity, 0.600) < 0.01);   // about 0.60 W/(m K), from memory
  CHECK(s.expansion > fluidProperties(Medium::SeaWater, 293.15, 0.0).expansion);  // salt raises beta, from memory
  CHECK_FALSE(s.outsideValidity);
}

TEST_CASE("out-of-range temperatures are clamped and flagged", "[media]") {
  resetValidityWarnings();
  const FluidProperties hot = fluidProperties(Medium::Air, 450.0);
  const FluidProperties edge = fluidProperties(Medium::Air, 400.0);
  CHECK(hot.outsideValidity);
  CHECK(hot.viscosity == edge.viscosity);
  CHECK(hot.expansion == edge.expansion);
  fluidProperties(Medium::Air, 500.0);  // same correlation and parameter: no second warning
  const auto warnings = takeValidityWarnings();
  REQUIRE(warnings.size() == 1);
  // The wording is part of the interface.
  CHECK(warnings[0] ==
        "air properties, Incropera et al. Table A.4: temperature = 450 K outside the validity range [200, 400] K");
  CHECK(takeValidityWarnings().empty());
  CHECK(fluidProperties(Medium::SeaWater, 290.0, 0.2).outsideValidity);
  CHECK(fluidProperties(Medium::FreshWater, 270.0).outsideValidity);
  resetValidityWarnings();
}

TEST_CASE("Buck saturation vapour pressure and its slope", "[media]") {
  // Buck (1981): 35 degC -> 5626 Pa (docs/references.md: checked, computed):
  // 17.502*35/(240.97+35) = 2.219697; exp = 9.204582; *611.21 = 5625.9 Pa.
  CHECK(relErr(saturationVapourPressure(308.15), 5625.9) < 1e-4);
  // Incropera Table A.6 saturation pressures 0.03531 bar at 300 K, 0.06221 bar at 310 K (from memory).
  CHECK(relErr(saturationVapourPressure(300.0), 3531.0) < 0.003);
  CHECK(relErr(saturationVapourPressure(310.0), 6221.0) < 0.003);
  // Slope against the Clausius-Clapeyron relation de/dT = L e/(R_v T^2) (ideal vapour, liquid volume
  // neglected; common practice): at 35 degC 2.418e6*5626/(461.52*308.15^2) = 310.4 Pa/K.
  const double T = 308.15;
  const double clausius = latentHeatVaporisation(T) * saturationVapourPressure(T) / (kGasConstantVapour * T * T);
  CHECK(relErr(saturationVapourPressureSlope(T), clausius) < 0.01);
  // Analytic slope against a central difference of the function itself (consistency).
  const double fd = (saturationVapourPressure(T + 1e-3) - saturationVapourPressure(T - 1e-3)) / 2e-3;
  CHECK(relErr(saturationVapourPressureSlope(T), fd) < 1e-6);
}

TEST_CASE("latent heat of vaporisation", "[media]") {
  // About 2.418e6 J/kg at 35 degC (docs/references.md, from memory).
  CHECK(relErr(latentHeatVaporisation(308.15), 2.418e6) < 0.01);
  // Incropera Table A.6 h_fg [kJ/kg]: 300 K 2438, 350 K 2317, 373.15 K 2257 (from memory).
  CHECK(relErr(latentHeatVaporisation(300.0), 2438e3) < 0.005);
  CHECK(relErr(latentHeatVaporisation(350.0), 2317e3) < 0.005);
  CHECK(relErr(latentHeatVaporisation(373.15), 2257e3) < 0.005);
}

TEST_CASE("humid air density", "[media]") {
  // Table A.4 densities are those of the ideal gas at 1.000e5 Pa: 1e5/(287.05*300) = 1.1612 vs 1.1614.
  CHECK(relErr(humidAirDensity(300.0, 0.0, 1.0e5), 1.1614) < 0.001);
  // Saturated air at 30 degC, 101325 Pa, by hand: e = 611.21 exp(17.502*30/270.97) = 4243.5 Pa;
  // (101325 - 4243.5)/(287.05*303.15) + 4243.5/(461.52*303.15) = 1.11560 + 0.03033 = 1.14593 kg/m3
  // (ideal mixture, common practice). Moist air is lighter than dry: 101325/(287.05*303.15) = 1.16438.
  CHECK(relErr(humidAirDensity(303.15, 1.0), 1.14593) < 1e-3);
  CHECK(humidAirDensity(303.15, 1.0) < humidAirDensity(303.15, 0.0));
  // Humidity ratio of saturated air at 30 degC: 0.62198*4243.5/(101325 - 4243.5) = 0.02719 kg/kg
  // (psychrometric tables give 0.0273, from memory).
  CHECK(relErr(humidityRatio(saturationVapourPressure(303.15)), 0.0273) < 0.01);
}
