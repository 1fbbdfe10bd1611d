#pragma once
//! The wet lumped sphere shared by the wetting and sweating tests: the sphere of tests/test_lumped_sphere.hpp (R = 2 cm,
//! k = 1000 W/(m K)) with rho c = 1e5 J/(m3 K) and a heat source of 0.5 W (Q10 = 1), in air at 30 degC, RH 0.4, a
//! fixed h = 10 W/(m2 K) (no radiation: the default emissivity with a fixed coefficient is 0). Bi = (h + evaporation's
//! ~15 W/(m2 K)) R / k < 1e-3. Its evaporation reference: tests/test_evaporation_reference.hpp.
#include <numbers>
#include <string>
#include <vector>

#include "test_evaporation_reference.hpp"
#include "test_support.hpp"

namespace thermorph::testing::wet_sphere {

constexpr double R = 0.02, rhoC = 1000.0 * 100.0, h = 10.0, Ta = 303.15, RH = 0.4, Q = 0.5;
constexpr double V = 4.0 / 3.0 * std::numbers::pi * R * R * R, A = 4.0 * std::numbers::pi * R * R;

//! --set overrides of tests/test_lumped_sphere.hpp's case that make it this sphere, then `more`.
inline std::vector<std::string> overrides(std::vector<std::string> more) {
  std::vector<std::string> o = {"run.rtol=1e-9",
                                "run.atol=1e-9",
                                "tissues.lump.density=1000",
                                "tissues.lump.q10=1",
                                "tissues.lump.metabolic_heat=" + num(Q / V),
                                "environment.convection=10",
                                "environment.temperature=30 degC",
                                "environment.relative_humidity=0.4"};
  o.insert(o.end(), more.begin(), more.end());
  return o;
}

//! Evaporation from the sphere at surface temperature T with wetted fraction w [W] (positive out of the body).
inline double evaporation(double T, double w) { return referenceEvaporation(T, w, Ta, RH, h, A); }

}  // namespace thermorph::testing::wet_sphere
