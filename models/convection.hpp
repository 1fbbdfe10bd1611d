#pragma once
//! Convective heat-transfer correlations (forced, free, mixed; cylinder, sphere, plate;
//! animal shapes) and the per-surface evaluator used by the thermal network.
//! Validity warnings: see checkValidity / takeValidityWarnings in models/media.hpp.
#include <limits>
#include <string>
#include <vector>

#include "models/media.hpp"

namespace thermorph {

//! Standard acceleration of gravity [m/s2] (CGPM 1901, exact).
inline constexpr double kStandardGravity = 9.80665;

// ---- forced convection -------------------------------------------------------------

//! Mean Nusselt number of a cylinder in cross flow [-], length = diameter.
//! Churchill & Bernstein (1977), J. Heat Transfer 99:300:
//! Nu = 0.3 + 0.62 Re^{1/2} Pr^{1/3} [1 + (0.4/Pr)^{2/3}]^{-1/4} [1 + (Re/282000)^{5/8}]^{4/5};
//! properties at the film temperature; valid Re Pr >= 0.2.
double nusseltCylinderCrossFlow(double reynolds, double prandtl);
inline constexpr ValidityRange kChurchillBernsteinRePr{"Churchill & Bernstein (1977) cylinder in cross flow",
                                                       "Re*Pr", "", 0.2, std::numeric_limits<double>::infinity()};

//! Mean Nusselt number of a sphere in forced flow [-], length = diameter.
//! Whitaker (1972), AIChE J. 18:361:
//! Nu = 2 + (0.4 Re^{1/2} + 0.06 Re^{2/3}) Pr^{0.4} (mu/mu_s)^{1/4};
//! properties at the free stream except mu_s at the surface.
double nusseltSphereForced(double reynolds, double prandtl, double viscosityRatio);
inline constexpr ValidityRange kWhitakerRe{"Whitaker (1972) sphere in forced flow", "Re", "", 3.5, 7.6e4};
//! Whitaker's lower Pr limit 0.71 is air's; 0.69 here so that air from Table A.4 (Pr 0.69-0.72 over
//! 200-400 K) is not flagged. The viscosity ratio is checked for liquids only: in a gas it lies near 1
//! (0.95 for 20 degC air on a 40 degC surface) and its 1/4 power changes Nu by under 2 %.
inline constexpr ValidityRange kWhitakerPr{"Whitaker (1972) sphere in forced flow", "Pr", "", 0.69, 380.0};
inline constexpr ValidityRange kWhitakerViscosityRatio{"Whitaker (1972) sphere in forced flow", "mu/mu_s", "", 1.0,
                                                       3.2};

//! Mean Nusselt number of a flat plate in parallel flow [-], length along the flow.
//! Laminar: 0.664 Re^{1/2} Pr^{1/3} (Incropera eq. 7.30); mixed laminar-turbulent with transition
//! at Re 5e5: (0.037 Re^{4/5} - 871) Pr^{1/3} (Incropera eq. 7.38). The larger of the two is taken,
//! so Nu is continuous: they cross within 0.1 % of Re 5e5. Properties at the film temperature.
double nusseltFlatPlateForced(double reynolds, double prandtl);
inline constexpr ValidityRange kFlatPlateRe{"flat plate in parallel flow (Incropera eqs. 7.30, 7.38)", "Re", "", 0.0,
                                            1e8};
inline constexpr ValidityRange kFlatPlatePr{"flat plate in parallel flow (Incropera eqs. 7.30, 7.38)", "Pr", "", 0.6,
                                            60.0};

//! Nusselt number of an animal-shaped body [-] with length V^{1/3} (V body volume).
//! Mitchell (1976), Biophys. J. 16:561: Nu = a Re^b, Re and Nu both based on V^{1/3}.
double nusseltMitchell(double reynolds, double a, double b);

// ---- free convection ------------------------------------------------------------------

//! Mean Nusselt number of a horizontal cylinder in free convection [-], length = diameter.
//! Churchill & Chu (1975), IJHMT 18:1049:
//! Nu = {0.60 + 0.387 Ra^{1/6} / [1 + (0.559/Pr)^{9/16}]^{8/27}}^2, Ra <= 1e12.
double nusseltHorizontalCylinderFree(double rayleigh, double prandtl);
inline constexpr ValidityRange kChurchillChuCylinderRa{"Churchill & Chu (1975) horizontal cylinder, free", "Ra", "",
                                                       0.0, 1e12};

//! Mean Nusselt number of a sphere in free convection [-], length = diameter.
//! Churchill (1983), Heat Exchanger Design Handbook sec. 2.5.7:
//! Nu = 2 + 0.589 Ra^{1/4} / [1 + (0.469/Pr)^{9/16}]^{4/9}, Ra <= 1e11, Pr >= 0.7.
double nusseltSphereFree(double rayleigh, double prandtl);
inline constexpr ValidityRange kChurchillSphereRa{"Churchill (1983) sphere, free", "Ra", "", 0.0, 1e11};
inline constexpr ValidityRange kChurchillSpherePr{"Churchill (1983) sphere, free", "Pr", "", 0.7,
                                                  std::numeric_limits<double>::infinity()};

//! Mean Nusselt number of a vertical plate in free convection [-], length = height.
//! Churchill & Chu (1975), IJHMT 18:1323, all Ra:
//! Nu = {0.825 + 0.387 Ra^{1/6} / [1 + (0.492/Pr)^{9/16}]^{8/27}}^2.
double nusseltVerticalPlateFree(double rayleigh, double prandtl);

//! Mean Nusselt number of the upper face of a hot (or lower face of a cold) horizontal plate [-],
//! length = area / perimeter. Incropera eqs. 9.30-9.31: 0.54 Ra^{1/4} (1e4-1e7, Pr >= 0.7),
//! 0.15 Ra^{1/3} (1e7-1e11); the larger is taken so Nu is continuous (the branches cross at
//! Ra = 3.6^12 = 4.7e6, where they differ from the tabulated switch at 1e7 by at most 6.5 %).
double nusseltHorizontalPlateFreeUpper(double rayleigh);
inline constexpr ValidityRange kHorizontalPlateUpperRa{"horizontal plate, hot face up (Incropera eqs. 9.30-9.31)",
                                                       "Ra", "", 1e4, 1e11};

//! Mean Nusselt number of the lower face of a hot (or upper face of a cold) horizontal plate [-],
//! length = area / perimeter. Incropera 6th ed. eq. 9.32: 0.52 Ra^{1/5}, 1e4-1e9, Pr >= 0.7.
double nusseltHorizontalPlateFreeLower(double rayleigh);
inline constexpr ValidityRange kHorizontalPlateLowerRa{"horizontal plate, hot face down (Incropera eq. 9.32)", "Ra",
                                                       "", 1e4, 1e9};

// ---- mixed convection -----------------------------------------------------------------

//! Mixed forced and free convection [-], Churchill-Usagi blending in the assisting/transverse
//! form (Incropera et al. sec. 9.9): Nu = (Nu_F^n + Nu_N^n)^{1/n}, n = 3 usually (3.5-4 fit cylinders
//! and spheres in transverse flow better, same section, from memory).
double mixedNusselt(double nusseltForced, double nusseltFree, double exponent = 3.0);

// ---- evaluator ------------------------------------------------------------------------

enum class Geometry { Sphere, Cylinder, Plate };
enum class CorrelationChoice { Standard, Mitchell };

//! Mitchell (1976) shape constants for Nu = a Re^b.
struct MitchellConstants {
  double a = 0.0;
  double b = 0.0;
};
//! Mitchell (1976) constants for a shape. Only the sphere row is provided: a = 0.34, b = 0.6
//! (from memory, not confirmed against the paper). Cylinders and plates use the sphere row too;
//! `exact` is false for them and the evaluator records a validity warning.
struct MitchellShape {
  MitchellConstants constants;
  bool exact = false;
};
MitchellShape mitchellConstants(Geometry geometry);

//! One surface in one fluid, the input of convectionCoefficient.
struct ConvectionInput {
  Medium medium = Medium::Air;
  Geometry geometry = Geometry::Cylinder;
  CorrelationChoice choice = CorrelationChoice::Standard;
  double surfaceTemperature = 0.0;  //!< [K]
  double fluidTemperature = 0.0;    //!< free-stream temperature [K]
  double speed = 0.0;               //!< free-stream speed [m/s]; 0 gives pure free convection
  double length = 0.0;  //!< diameter of sphere or cylinder, length along the flow (and height) of a plate [m]
  double volumeLength = 0.0;  //!< V^{1/3} of the body, for Mitchell (1976) [m]
  bool verticalPlate = true;  //!< plate orientation for free convection
  double width = 0.0;         //!< plate width across the flow [m]; 0 = square (free convection of horizontal plates)
  double salinity = 35e-3;    //!< sea water only [kg/kg]
  //! std::pow(freeConvectionLength(*this), 3) if the caller keeps it (per face: it depends only on the geometry);
  //! 0: computed at every evaluation.
  double freeLengthCubed = 0.0;
};

//! Length of free convection [m]: `length`, or area / perimeter of a horizontal plate.
double freeConvectionLength(const ConvectionInput& in);

//! Convective heat-transfer coefficient of one surface and its slope.
struct ConvectionResult {
  double h = 0.0;          //!< [W/(m2 K)]
  double dh_dTs = 0.0;     //!< dh/dT_surface [W/(m2 K2)]
  double reynolds = 0.0;   //!< of the forced correlation used (0 at rest) [-]
  double grashof = 0.0;    //!< [-]
  double rayleigh = 0.0;   //!< [-]
  double nusselt = 0.0;    //!< h L / k_film with L = length (V^{1/3} for Mitchell) [-]
  bool outsideValidity = false;  //!< a correlation or property table was used outside its range
};

//! Mean convective heat-transfer coefficient [W/(m2 K)] of one surface, mixed forced and free.
//!  - Forced: cylinder Churchill & Bernstein; sphere Whitaker; plate Incropera eqs. 7.30/7.38;
//!    or Mitchell (1976) with V^{1/3}. Film-temperature properties, except Whitaker (free stream,
//!    mu_s at the surface).
//!  - Free: sphere Churchill (1983); cylinder Churchill & Chu (treated as horizontal); vertical plate
//!    Churchill & Chu; horizontal plate the mean of its upper- and lower-face coefficients, length
//!    area/perimeter. Grashof number g |rho_inf - rho_s|/rho_f L^3/nu^2 (so water near its density
//!    maximum is right); for air beta = 1/T_film, i.e. g (|Ts - Tinf|/T_film) L^3/nu^2 (Incropera).
//!    The buoyancy term is floored smoothly, sqrt(b^2 + 1e-16), so h is smooth at Ts = Tinf.
//!  - Mixed: Churchill-Usagi, n = 3. For a sphere the conduction limit 2 k/D is taken out of both
//!    parts before blending and added back once (so speed 0 gives exactly the free-convection value).
//!  - dh_dTs: central difference with Ts +- 0.01 K (smooth across branch switches; truncation error
//!    below 1e-4 relative for |Ts - Tinf| > 1 K).
//! Warnings for values outside a correlation's range: takeValidityWarnings().
//! Throws std::invalid_argument for non-positive lengths or temperatures.
ConvectionResult convectionCoefficient(const ConvectionInput& input);

//! The same coefficient as convectionCoefficient, faster, from film-temperature tables (the thermal network's
//! evaluator, EnvironmentModel): for a cylinder or plate with the standard correlations in air, fresh water or sea
//! water of the default salinity, with the film temperature inside the property range, the property groups of each
//! correlation (k, 1/nu, Pr/nu^2, 0.387 (Pr/nu^2)^{1/6} [1 + (c/Pr)^{9/16}]^{-8/27} of Churchill & Chu,
//! 0.62 nu^{-1/2} Pr^{1/3} [1 + (0.4/Pr)^{2/3}]^{-1/4} of Churchill & Bernstein, ...) come from a cubic Hermite
//! table in temperature built once per medium from fluidPropertiesDual with exact nodal slopes (dual numbers), a node
//! on every piece of the property fits (propertyPieces) and at most filmTableStep apart; what depends on the
//! temperature difference, the length and the speed is computed as in convectionCoefficient. dh_dTs is the exact
//! derivative of the h returned (the interpolant's own slope). Measured against convectionCoefficient over the whole
//! table range (tests/test_convection.cpp "Tabulated convection"): h within 4.7e-11 relative, dh_dTs within 7.1e-10 of
//! |dh_dTs| + h / (1 K) (DEVELOPERS.md "Convection from film-temperature tables, seventeenth round"). Every other
//! case (spheres, Mitchell's correlation, other salinities, a film outside the range) is convectionCoefficient's.
//! Fills h, dh_dTs, reynolds, grashof, rayleigh and outsideValidity (nusselt: 0 on the tabulated path).
ConvectionResult convectionCoefficientTabulated(const ConvectionInput& input);

//! Largest node spacing of a medium's film-temperature table [K]: 0.25 K in air and sea water, 0.1 K in fresh water
//! (whose Table A.6 viscosity changes by 2.5 % per K near 0 degC: at 1 K its groups' interpolation error reached 5e-7
//! of h). Measured largest error of h: air 8.4e-13, sea water 9.7e-12, fresh water 4.7e-11. Coarser tables were
//! accurate enough for h (1 K in air: 1.7e-10) but not for every run: cases/cold_feet_demo.toml, whose shivering
//! starts at about 4000 s, moved by 3.9e-4 K with 1 K nodes in air and by 8.8e-6 K with 0.25 K nodes
//! (DEVELOPERS.md "Convection from film-temperature tables, seventeenth round").
double filmTableStep(Medium medium);

}  // namespace thermorph
