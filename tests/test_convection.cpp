// Validation of convection correlations and the per-surface evaluator (models/convection.hpp).
#include <catch2/catch.hpp>

#include <algorithm>
#include <cmath>
#include <numbers>
#include <string>
#include <thread>
#include <vector>

#include "models/convection.hpp"

using namespace thermorph;

namespace {
double relErr(double value, double reference) { return std::abs(value / reference - 1.0); }

ConvectionInput airCylinder(double diameter, double speed, double ts, double tinf) {
  ConvectionInput in;
  in.medium = Medium::Air;
  in.geometry = Geometry::Cylinder;
  in.surfaceTemperature = ts;
  in.fluidTemperature = tinf;
  in.speed = speed;
  in.length = diameter;
  return in;
}
}  // namespace

TEST_CASE("Incropera Example 7.4: cylinder in cross flow of air", "[convection]") {
  // Incropera et al., 6th ed., Example 7.4: D 12.7 mm, V 10 m/s, T_inf 26.2 degC, T_s 128.4 degC;
  // film 350 K: nu 20.92e-6, k 0.030, Pr 0.700 -> Re 6071; Churchill-Bernstein Nu 40.6 [checked],
  // h = 40.6*0.030/0.0127 = 96 W/(m2 K) [computed]. Hand calculation:
  //   Re^1/2 = 77.9166, Pr^1/3 = 0.887904, (0.4/0.7)^2/3 = 0.688612, 1.688612^1/4 = 1.139941,
  //   (6071/282000)^5/8 = 0.0215284^0.625 = 0.0908096, 1.0908096^4/5 = 1.072011,
  //   Nu = 0.3 + 0.62*77.9166*0.887904/1.139941*1.072011 = 0.3 + 40.337 = 40.637.
  CHECK(relErr(nusseltCylinderCrossFlow(6071.0, 0.700), 40.6) < 0.01);
  CHECK(relErr(nusseltCylinderCrossFlow(6071.0, 0.700), 40.637) < 1e-4);

  // The evaluator with its own film properties (350.45 K) and free convection blended in
  // (Nu_free about 4.3, adds 0.04 %): h within 1 % of 96.
  const ConvectionResult r = convectionCoefficient(airCylinder(0.0127, 10.0, 128.4 + 273.15, 26.2 + 273.15));
  CHECK(relErr(r.h, 96.0) < 0.01);
  CHECK(relErr(r.reynolds, 6071.0) < 0.01);
  CHECK(relErr(r.nusselt, 40.6) < 0.01);
  CHECK_FALSE(r.outsideValidity);
}

TEST_CASE("forced-convection correlations by hand", "[convection]") {
  // Whitaker (1972) at Re 1000, Pr 0.71, mu/mu_s 1.1:
  //   0.4*1000^1/2 = 12.6491, 0.06*1000^2/3 = 6.0, sum 18.6491; 0.71^0.4 = 0.871974; 1.1^1/4 = 1.024114;
  //   Nu = 2 + 18.6491*0.871974*1.024114 = 2 + 16.6537 = 18.6537.
  CHECK(relErr(nusseltSphereForced(1000.0, 0.71, 1.1), 18.6537) < 1e-4);
  // Ranz-Marshall 2 + 0.6 Re^1/2 Pr^1/3 (docs/references.md, checked) at the same point:
  // 2 + 0.6*31.6228*0.892112 = 18.93; the two agree within 5 % here (common practice).
  CHECK(relErr(nusseltSphereForced(1000.0, 0.71, 1.0), 2.0 + 0.6 * std::sqrt(1000.0) * std::cbrt(0.71)) < 0.05);

  // Flat plate, laminar (Incropera eq. 7.30) at Re 1e5, Pr 0.7:
  //   0.664*316.228*0.887904 = 186.438.
  CHECK(relErr(nusseltFlatPlateForced(1e5, 0.7), 186.438) < 1e-4);
  // Mixed boundary layer (Incropera eq. 7.38) at Re 1e6, Pr 0.7:
  //   1e6^0.8 = 63095.73; 0.037*63095.73 = 2334.542; (2334.542 - 871)*0.887904 = 1299.485.
  CHECK(relErr(nusseltFlatPlateForced(1e6, 0.7), 1299.485) < 1e-4);
  // At the transition Re 5e5 the two published forms nearly meet: laminar 0.664*707.107 = 469.519,
  // mixed 0.037*(5e5)^0.8 - 871 = 0.037*36238.98 - 871 = 469.842 (0.07 % apart), so taking the larger
  // keeps Nu continuous: just below and above 5e5 it matches the hand values (Pr 1).
  CHECK(relErr(nusseltFlatPlateForced(5e5 * (1 - 1e-9), 1.0), 469.842) < 1e-3);
  CHECK(relErr(nusseltFlatPlateForced(5e5 * (1 + 1e-9), 1.0), 469.842) < 1e-4);

  // Mitchell (1976) sphere a 0.34, b 0.6 (from memory) at Re 1e4: 1e4^0.6 = 251.189; 0.34*251.189 = 85.404.
  const MitchellShape sphere = mitchellConstants(Geometry::Sphere);
  CHECK(sphere.exact);
  CHECK(relErr(nusseltMitchell(1e4, sphere.constants.a, sphere.constants.b), 85.404) < 1e-4);
  CHECK_FALSE(mitchellConstants(Geometry::Cylinder).exact);
}

TEST_CASE("free-convection correlations by hand", "[convection]") {
  // Churchill & Chu horizontal cylinder at Ra 1e5, Pr 0.7:
  //   Ra^1/6 = 6.81292; (0.559/0.7)^9/16 = 0.881153; 1.881153^8/27 = 1.205899;
  //   0.387*6.81292/1.205899 = 2.186419; (0.60 + 2.186419)^2 = 7.76413.
  CHECK(relErr(nusseltHorizontalCylinderFree(1e5, 0.7), 7.76413) < 1e-4);

  // Churchill (1983) sphere at Ra 1.5e6, Pr 2 (docs/references.md: 19.52, checked):
  //   Ra^1/4 = 34.99636; (0.469/2)^9/16 = 0.442288; 1.442288^4/9 = 1.176765;
  //   0.589*34.99636/1.176765 = 17.51654; Nu = 2 + 17.51654 = 19.5165.
  CHECK(relErr(nusseltSphereFree(1.5e6, 2.0), 19.52) < 1e-3);

  // Churchill & Chu vertical plate at Ra 1e8, Pr 0.7:
  //   Ra^1/6 = 21.54435; (0.492/0.7)^9/16 = 0.820092; 1.820092^8/27 = 1.194166;
  //   0.387*21.54435/1.194166 = 6.981996; (0.825 + 6.981996)^2 = 60.9492.
  CHECK(relErr(nusseltVerticalPlateFree(1e8, 0.7), 60.9492) < 1e-4);

  // Horizontal plates (Incropera eqs. 9.30-9.32) at Ra 1e6: upper 0.54*31.6228 = 17.0763
  // (0.15*100 = 15.0 is smaller); lower 0.52*1e6^1/5 = 0.52*15.8489 = 8.24144.
  CHECK(relErr(nusseltHorizontalPlateFreeUpper(1e6), 17.0763) < 1e-4);
  CHECK(relErr(nusseltHorizontalPlateFreeLower(1e6), 8.24144) < 1e-4);
  // At Ra 1e8 the turbulent branch: 0.15*464.159 = 69.6238 (0.54*100 = 54 is smaller).
  CHECK(relErr(nusseltHorizontalPlateFreeUpper(1e8), 69.6238) < 1e-4);

  // Churchill-Usagi, n = 3: (40^3 + 10^3)^1/3 = 65000^1/3 = 40.2073.
  CHECK(relErr(mixedNusselt(40.0, 10.0), 40.2073) < 1e-4);
  // n = 4: (40^4 + 10^4)^1/4 = 2570000^1/4 = 40.0390.
  CHECK(relErr(mixedNusselt(40.0, 10.0, 4.0), 40.0390) < 1e-4);
}

TEST_CASE("Churchill-Bernstein agrees with Hilpert's constants", "[convection]") {
  // Hilpert constants, Nu = C Re^m Pr^1/3 (docs/references.md, checked), compared at the geometric
  // centre of each Re band in air (Pr 0.707). Loose tolerance: the two are fits to different data
  // sets and Incropera notes such correlations scatter by about 20 %; measured deviations are
  // -11.2, -6.0, +2.0, +3.5 % in the first four bands and -18 % in the last.
  struct Band {
    double lo, hi, c, m, tolerance;
  };
  for (const Band b : {Band{0.4, 4, 0.989, 0.330, 0.12}, Band{4, 40, 0.911, 0.385, 0.12},
                       Band{40, 4000, 0.683, 0.466, 0.12}, Band{4000, 40000, 0.193, 0.618, 0.12},
                       Band{40000, 400000, 0.027, 0.805, 0.20}}) {
    const double re = std::sqrt(b.lo * b.hi), pr = 0.707;
    const double hilpert = b.c * std::pow(re, b.m) * std::cbrt(pr);
    INFO("Re = " << re);
    CHECK(relErr(nusseltCylinderCrossFlow(re, pr), hilpert) < b.tolerance);
  }
}

TEST_CASE("free convection from a sphere in air through the evaluator", "[convection]") {
  // Ts 310 K, T_inf 290 K: film 300 K, a Table A.4 row (nu 15.89e-6, k 0.0263, Pr = mu cp/k = 0.706814).
  // Hand calculation: Gr = 9.80665*(20/300)*0.1^3/(15.89e-6)^2 = 2.58930e6; Ra = Gr*Pr = 1.83015e6;
  // Ra^1/4 = 36.78085; (0.469/0.706814)^9/16 = 0.793963; 1.793963^4/9 = 1.296600;
  // Nu = 2 + 0.589*36.78085/1.296600 = 18.7083; h = 18.7083*0.0263/0.1 = 4.9203 W/(m2 K).
  ConvectionInput in;
  in.medium = Medium::Air;
  in.geometry = Geometry::Sphere;
  in.surfaceTemperature = 310.0;
  in.fluidTemperature = 290.0;
  in.speed = 0.0;
  in.length = 0.1;
  const ConvectionResult r = convectionCoefficient(in);
  CHECK(relErr(r.grashof, 2.58930e6) < 1e-3);
  CHECK(relErr(r.rayleigh, 1.83015e6) < 1e-3);
  CHECK(relErr(r.h, 4.9203) < 2e-3);
  CHECK(r.reynolds == 0.0);
  // Heating the surface strengthens the plume: dh/dTs > 0. For Nu - 2 ~ (dT/T_film)^1/4 alone
  // d ln(h_plume)/dTs is about 1/(4*20 K) = 0.0125 1/K; check the sign and order.
  CHECK(r.dh_dTs > 0.0);
  CHECK(r.dh_dTs < 0.0125 * r.h);
}

TEST_CASE("mixed convection for a sphere keeps the conduction limit once", "[convection]") {
  ConvectionInput in;
  in.medium = Medium::Air;
  in.geometry = Geometry::Sphere;
  in.surfaceTemperature = 305.0;
  in.fluidTemperature = 295.0;
  in.length = 0.05;
  in.speed = 0.0;
  const double hFree = convectionCoefficient(in).h;
  in.speed = 1e-6;  // creeping flow: forced part above conduction vanishes
  CHECK(relErr(convectionCoefficient(in).h, hFree) < 1e-4);
  in.speed = 1.0;  // Re_D about 3300: the free part (Nu about 9) adds under 1 % to Whitaker alone (Nu about 31)
  const ConvectionResult r = convectionCoefficient(in);
  const FluidProperties stream = fluidProperties(Medium::Air, 295.0);
  const double viscosityRatio = stream.viscosity / fluidProperties(Medium::Air, 305.0).viscosity;
  const double re = 1.0 * 0.05 / stream.kinematicViscosity();
  const double whitaker = nusseltSphereForced(re, stream.prandtl, viscosityRatio) * stream.conductivity / 0.05;
  CHECK(r.h > whitaker);
  CHECK(relErr(r.h, whitaker) < 0.01);
  // Ranz-Marshall (docs/references.md, checked) lies within 10 % of it at this Re.
  const double ranzMarshall = (2.0 + 0.6 * std::sqrt(re) * std::cbrt(stream.prandtl)) * stream.conductivity / 0.05;
  CHECK(relErr(r.h, ranzMarshall) < 0.10);
  CHECK_FALSE(r.outsideValidity);
}

TEST_CASE("h rises monotonically with speed for a cylinder in air", "[convection]") {
  // Common practice, no source: more flow, more heat transfer; speed 0 is pure free convection.
  ConvectionInput in = airCylinder(0.05, 0.0, 308.15, 293.15);
  double previous = convectionCoefficient(in).h;
  const FluidProperties film = fluidProperties(Medium::Air, 0.5 * (308.15 + 293.15));
  const double gr = kStandardGravity * (15.0 / (0.5 * (308.15 + 293.15))) * std::pow(0.05, 3) /
                    std::pow(film.kinematicViscosity(), 2);
  CHECK(relErr(previous, nusseltHorizontalCylinderFree(gr * film.prandtl, film.prandtl) * film.conductivity / 0.05) <
        1e-6);
  bool monotone = true;
  for (int i = 1; i <= 1000; ++i) {
    in.speed = 0.01 * i;
    const double h = convectionCoefficient(in).h;
    if (!(h > previous)) monotone = false;
    previous = h;
  }
  CHECK(monotone);
  CHECK(previous > 20.0);  // 10 m/s on a 5 cm cylinder: order 30-40 W/(m2 K), common practice
}

TEST_CASE("water h exceeds air h by the ratio the correlation form predicts", "[convection]") {
  // Same cylinder, speed and film temperature 300 K. From Nu ~ Re^1/2 Pr^1/3:
  // h_w/h_a ~ (k_w/k_a) (nu_a/nu_w)^1/2 (Pr_w/Pr_a)^1/3 with Table A.4/A.6 rows at 300 K:
  // (0.613/0.0263) (15.89e-6/(855e-6/997))^1/2 (5.83/0.707)^1/3 = 23.308*4.3046*2.0204 = 202.7.
  // Churchill-Bernstein's Pr factor [1 + (0.4/Pr)^2/3]^-1/4 favours water by 1.14/1.04 = 1.10 and the
  // Re^5/8 term adds a few %, so the evaluator should land 5-25 % above the estimate.
  ConvectionInput in = airCylinder(0.02, 0.5, 300.05, 299.95);
  const double hAir = convectionCoefficient(in).h;
  in.medium = Medium::FreshWater;
  const double hWater = convectionCoefficient(in).h;
  const double ratio = hWater / hAir;
  INFO("h_water = " << hWater << ", h_air = " << hAir << ", ratio = " << ratio);
  CHECK(ratio > 202.7 * 1.05);
  CHECK(ratio < 202.7 * 1.25);
}

TEST_CASE("free convection in water vanishes near the density maximum", "[convection]") {
  // Kell (1975): density maximum at 3.98 degC, so 2.98 degC water around a 4.98 degC cylinder is nearly
  // neutral while 10 degC water around 12 degC is not (common practice, no source).
  ConvectionInput in;
  in.medium = Medium::FreshWater;
  in.geometry = Geometry::Cylinder;
  in.length = 0.1;
  in.surfaceTemperature = 278.13;  // 4.98 and 2.98 degC: +-1 K about the maximum
  in.fluidTemperature = 276.13;
  const ConvectionResult cold = convectionCoefficient(in);
  in.surfaceTemperature = 285.15;
  in.fluidTemperature = 283.15;
  const ConvectionResult warm = convectionCoefficient(in);
  CHECK(cold.grashof < 0.01 * warm.grashof);
  CHECK(warm.h > 4.0 * cold.h);
  CHECK(cold.h > 0.0);
}

TEST_CASE("dh/dTs is consistent and smooth through Ts = Tinf", "[convection]") {
  for (Geometry g : {Geometry::Sphere, Geometry::Cylinder, Geometry::Plate}) {
    for (double speed : {0.0, 0.3, 3.0}) {
      ConvectionInput in = airCylinder(0.04, speed, 303.0, 293.0);
      in.geometry = g;
      in.verticalPlate = false;
      const ConvectionResult r = convectionCoefficient(in);
      // consistency with a wider central difference of h (truncation error O(step^2))
      in.surfaceTemperature = 303.2;
      const double hp = convectionCoefficient(in).h;
      in.surfaceTemperature = 302.8;
      const double hm = convectionCoefficient(in).h;
      INFO("geometry " << static_cast<int>(g) << ", speed " << speed);
      CHECK(std::abs(r.dh_dTs - (hp - hm) / 0.4) < 1e-3 * r.h);
      // continuity at Ts = Tinf: h at +-1 mK within 1 % and finite slope
      in.surfaceTemperature = 293.001;
      const ConvectionResult above = convectionCoefficient(in);
      in.surfaceTemperature = 292.999;
      const ConvectionResult below = convectionCoefficient(in);
      CHECK(relErr(above.h, below.h) < 0.01);
      CHECK(std::isfinite(above.dh_dTs));
      CHECK(above.h > 0.0);
    }
  }
}

TEST_CASE("Mitchell sphere against Whitaker with the V^1/3 length", "[convection]") {
  // For a sphere V^1/3 = (pi/6)^1/3 D = 0.806 D. Mitchell (1976) with a 0.34, b 0.6 (from memory) and
  // Whitaker (1972) then differ by -11 % at Re_D 100, +9 % at 300 and +28 % at 1000 (measured); the
  // 35 % tolerance only catches a wrong length or exponent, since the constants are unconfirmed.
  for (double reD : {100.0, 300.0, 1000.0}) {
    const double c = std::cbrt(std::numbers::pi / 6.0);
    const double hMitchellOverKD = nusseltMitchell(reD * c, 0.34, 0.6) / c;  // h D/k
    INFO("Re_D = " << reD);
    CHECK(relErr(hMitchellOverKD, nusseltSphereForced(reD, 0.71, 1.0)) < 0.35);
  }
  // The evaluator uses V^1/3 for both Re and Nu.
  ConvectionInput in;
  in.medium = Medium::Air;
  in.geometry = Geometry::Sphere;
  in.choice = CorrelationChoice::Mitchell;
  in.surfaceTemperature = 300.05;
  in.fluidTemperature = 299.95;
  in.speed = 2.0;
  in.length = 0.1;
  in.volumeLength = 0.0806;
  const ConvectionResult r = convectionCoefficient(in);
  // Re = 2*0.0806/15.89e-6 = 10145; Nu = 0.34*10145^0.6 = 86.14 (+ free part, below 0.1 %).
  CHECK(relErr(r.reynolds, 10145.0) < 2e-3);
  CHECK(relErr(r.nusselt, 86.14) < 3e-3);
}

TEST_CASE("validity warnings: once per correlation, thread-safe, worded", "[convection]") {
  resetValidityWarnings();
  ConvectionInput in;
  in.medium = Medium::Air;
  in.geometry = Geometry::Sphere;
  in.surfaceTemperature = 300.05;
  in.fluidTemperature = 299.95;
  in.speed = 100.0;
  in.length = 0.2;  // Re = 100*0.2/15.89e-6 = 1.26e6 > 7.6e4 (Whitaker's range)
  std::vector<std::thread> threads;
  for (int t = 0; t < 4; ++t)
    threads.emplace_back([in] {
      for (int i = 0; i < 50; ++i) (void)convectionCoefficient(in);
    });
  for (auto& t : threads) t.join();
  CHECK(convectionCoefficient(in).outsideValidity);
  const auto warnings = takeValidityWarnings();
  REQUIRE(warnings.size() == 1);
  CHECK(warnings[0].find("Whitaker (1972) sphere in forced flow: Re = 1.2") == 0);
  CHECK(warnings[0].find("outside the validity range [3.5, 76000]") != std::string::npos);
  CHECK(takeValidityWarnings().empty());

  in.geometry = Geometry::Cylinder;
  in.choice = CorrelationChoice::Mitchell;
  in.volumeLength = 0.1;
  in.speed = 1.0;
  CHECK(convectionCoefficient(in).outsideValidity);  // sphere constants used for a cylinder
  CHECK(takeValidityWarnings().size() == 1);
  resetValidityWarnings();
}

TEST_CASE("convectionCoefficient rejects bad input", "[convection]") {
  ConvectionInput in = airCylinder(0.0, 1.0, 300.0, 290.0);
  CHECK_THROWS_AS(convectionCoefficient(in), std::invalid_argument);
  in = airCylinder(0.01, 1.0, -1.0, 290.0);
  CHECK_THROWS_AS(convectionCoefficient(in), std::invalid_argument);
}

TEST_CASE("Tabulated convection against the published correlations over the table range", "[convection]") {
  // convectionCoefficientTabulated (film-temperature tables, models/convection.cpp) against convectionCoefficient,
  // the published correlations with the property fits evaluated directly: Churchill & Chu (1975) for horizontal
  // cylinders and vertical plates, Churchill & Bernstein (1977) for cylinders in cross flow, Incropera eqs. 7.30 and
  // 7.38 for plates in parallel flow and 9.30-9.32 for horizontal plates, blended as Churchill (1977), n = 3.
  // Air, fresh water and sea water (35 g/kg), the film temperature over the whole table range in steps of 0.37 K
  // (cutting every table interval at several places), temperature differences from 0.01 to 30 K either way, speeds
  // from 0 to 10 m/s and lengths from 5 mm to 0.5 m. Bounds: the largest error measured (DEVELOPERS.md, seventeenth
  // round) times about 3: h within 2e-10 relative, dh/dT_s within 3e-9 of |dh/dT_s| + h / (1 K).
  struct MediumRange {
    Medium medium;
    double lo, hi;
  };
  double worstH = 0.0;
  std::size_t compared = 0;
  for (const MediumRange m : {MediumRange{Medium::Air, 200.0, 400.0}, MediumRange{Medium::FreshWater, 273.15, 373.15},
                              MediumRange{Medium::SeaWater, 271.15, 373.15}}) {
    for (int shape = 0; shape < 3; ++shape) {
      for (double speed : {0.0, 0.05, 1.5, 10.0}) {
        if (m.medium != Medium::Air && speed > 2.0) continue;
        for (double length : {0.005, 0.05, 0.5}) {
          for (double difference : {-30.0, -3.0, -0.3, 0.01, 0.5, 5.0, 30.0}) {
            for (double film = m.lo; film <= m.hi; film += 0.37) {
              ConvectionInput in = airCylinder(length, speed, film + 0.5 * difference, film - 0.5 * difference);
              in.medium = m.medium;
              in.geometry = shape == 0 ? Geometry::Cylinder : Geometry::Plate;
              in.verticalPlate = shape == 1;
              const ConvectionResult direct = convectionCoefficient(in);
              const ConvectionResult table = convectionCoefficientTabulated(in);
              INFO("medium " << static_cast<int>(m.medium) << ", shape " << shape << ", speed " << speed
                             << ", length " << length << ", Ts " << in.surfaceTemperature << ", Tinf "
                             << in.fluidTemperature);
              const double errorH = std::abs(table.h - direct.h) / direct.h;
              // the slope's error relative to |dh/dT_s| + h / (1 K), as the slope is 0 where h is flat
              const double errorSlope =
                  std::abs(table.dh_dTs - direct.dh_dTs) / (std::abs(direct.dh_dTs) + direct.h / 1.0);
              CHECK(errorH < 2e-10);
              CHECK(errorSlope < 3e-9);
              CHECK(table.outsideValidity == direct.outsideValidity);
              worstH = std::max(worstH, errorH);
              // the slope is the derivative of the h returned: a central difference of the tabulated h, step
              // delta = 1e-4 |T_s - T_inf| up to 1e-4 K (truncation error h''' delta^2 / 6: free convection's h grows
              // as |T_s - T_inf|^(1/3), so its third derivative as |T_s - T_inf|^(-3) relative; round-off
              // 1e-16 h / delta)
              const double delta = std::min(1e-4, 1e-4 * std::abs(difference));
              ConvectionInput up = in, down = in;
              up.surfaceTemperature += delta;
              down.surfaceTemperature -= delta;
              // (both temperatures inside the range: at its ends the properties are clamped, h has a kink there)
              const bool inside = std::min(up.surfaceTemperature, down.fluidTemperature) > m.lo + 1e-3 &&
                                  std::max(up.surfaceTemperature, down.fluidTemperature) < m.hi - 1e-3 &&
                                  std::min(down.surfaceTemperature, up.fluidTemperature) > m.lo + 1e-3 &&
                                  std::max(down.surfaceTemperature, up.fluidTemperature) < m.hi - 1e-3;
              // Not across the correlations' own kinks (the larger of two forms: horizontal plates at Ra 3.6^12,
              // plates in parallel flow at Re 5e5), nor in water below 0.3 K, where the density difference
              // rho(T_inf) - rho(T_s) of about 2e-5 rho over delta loses its last 7 digits to round-off.
              const bool kink = (shape == 2 && std::abs(table.rayleigh / std::pow(3.6, 12) - 1.0) < 0.01) ||
                                (shape > 0 && std::abs(table.reynolds / 5e5 - 1.0) < 0.01);
              const double smallest = m.medium == Medium::Air ? 1e-3 : 0.3;
              if (std::abs(difference) > smallest && inside && !kink) {
                const double central =
                    (convectionCoefficientTabulated(up).h - convectionCoefficientTabulated(down).h) / (2.0 * delta);
                const double errorDifference =
                    std::abs(table.dh_dTs - central) / (std::abs(table.dh_dTs) + table.h / 1.0);
                CHECK(errorDifference < 3e-7);  // 1.3e-7 measured, fresh water near its density maximum
              }
              ++compared;
            }
          }
        }
      }
    }
  }
  // measured (2026-12-05), largest: h 8.4e-13 in air, 4.7e-11 in fresh water, 9.7e-12 in sea water; dh/dT_s 4.9e-12,
  // 7.1e-10, 4.4e-11; the central difference 1.6e-9, 1.3e-7, 2.4e-8
  CHECK(compared > 200000);
  CHECK(worstH > 0.0);  // the tables are not the direct formulas
  (void)takeValidityWarnings();
}
