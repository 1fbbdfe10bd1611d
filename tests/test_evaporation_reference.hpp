#pragma once
//! An evaporation reference computed with its own property values (not the code's tables), shared by the wetting and
//! sweating tests: evaporation from a wet surface by the Chilton-Colburn analogy, h_m = h / (rho c_p Le^(2/3))
//! (Incropera et al. 2007 eq. 6.92 with n = 1/3), air properties at the film temperature from Incropera et al. 2007
//! Table A.4 (300 and 350 K rows, linear between), D_AB of water vapour in air 0.26e-4 m2/s at 298 K (Table A.8) times
//! (T/298)^(3/2) (the table's note), L from Table A.6 (h_fg 2438 kJ/kg at 300 K, 2390 at 320 K, linear), rho_v,s =
//! e_s M_w / (R T) with e_s from Alduchov & Eskridge (1996) (the code uses Buck 1981); the table rows and the AERK
//! constants are from memory (docs/references.md).
#include <cmath>

namespace thermorph::testing {

//! Linear between two rows of a table.
inline double between(double x, double x0, double y0, double x1, double y1) { return y0 + (y1 - y0) * (x - x0) / (x1 - x0); }
//! Saturation vapour pressure over water [Pa], Alduchov & Eskridge (1996) eq. 21 (AERK), T in K.
inline double saturationPressure(double T) {
  const double t = T - 273.15;
  return 610.94 * std::exp(17.625 * t / (t + 243.04));
}
//! Water vapour density at saturation [kg/m3], ideal gas: M_w = 18.015 g/mol, R = 8.314 J/(mol K) (CODATA, rounded).
inline double saturationDensity(double T) { return saturationPressure(T) * 0.018015 / (8.314 * T); }
//! Evaporation [W] (positive out of the body) from `area` [m2] at surface temperature T [K] with wetted fraction w,
//! convection coefficient h [W/(m2 K)], in air at Ta [K] and relative humidity RH.
inline double referenceEvaporation(double T, double w, double Ta, double RH, double h, double area) {
  const double film = 0.5 * (T + Ta);
  // Table A.4, air at 300 K and 350 K: rho 1.1614 / 0.9950 kg/m3, c_p 1007 / 1009 J/(kg K), alpha 22.5e-6 / 29.9e-6 m2/s.
  const double rho = between(film, 300.0, 1.1614, 350.0, 0.9950);
  const double cp = between(film, 300.0, 1007.0, 350.0, 1009.0);
  const double alpha = between(film, 300.0, 22.5e-6, 350.0, 29.9e-6);
  const double diffusivity = 0.26e-4 * std::pow(film / 298.0, 1.5);  // Table A.8, H2O in air at 298 K
  const double lewis = alpha / diffusivity;
  const double hm = h / (rho * cp * std::pow(lewis, 2.0 / 3.0));  // eq. 6.92, n = 1/3
  const double latent = between(T, 300.0, 2438e3, 320.0, 2390e3);  // Table A.6 h_fg
  return w * hm * area * (saturationDensity(T) - RH * saturationDensity(Ta)) * latent;
}

}  // namespace thermorph::testing
