#pragma once
//! Properties of the surrounding media (air, fresh water, sea water), moist-air
//! relations and the per-thread validity-warning log used by media,
//! convection and surface-exchange correlations.
#include <limits>
#include <string>
#include <string_view>
#include <utility>
#include <vector>

#include "models/dual.hpp"

namespace thermorph {

// ---- physical constants -------------------------------------------------------

//! Molar gas constant [J/(mol K)] (CODATA 2018, exact).
inline constexpr double kMolarGasConstant = 8.314462618;
//! Molar mass of water [kg/mol] (common practice, no source).
inline constexpr double kMolarMassWater = 18.01528e-3;
//! Molar mass of dry air [kg/mol] (common practice, no source).
inline constexpr double kMolarMassDryAir = 28.9647e-3;
//! Specific gas constant of dry air [J/(kg K)].
inline constexpr double kGasConstantDryAir = kMolarGasConstant / kMolarMassDryAir;
//! Specific gas constant of water vapour [J/(kg K)].
inline constexpr double kGasConstantVapour = kMolarGasConstant / kMolarMassWater;
//! Standard atmosphere [Pa].
inline constexpr double kStandardPressure = 101325.0;
//! 0 degC in kelvin [K].
inline constexpr double kZeroCelsius = 273.15;

// ---- validity ranges and warnings ----------------------------------------------

//! Range of one input over which a published correlation or table was fitted.
struct ValidityRange {
  std::string_view correlation;  //!< author, year and what it is
  std::string_view parameter;    //!< e.g. "Re", "temperature"
  std::string_view unit;         //!< unit of the parameter ("" if dimensionless)
  double min = -std::numeric_limits<double>::infinity();
  double max = std::numeric_limits<double>::infinity();
  //! True when `value` lies inside [min, max] (NaN is outside).
  constexpr bool contains(double value) const { return value >= min && value <= max; }
};

//! Records a warning for a value outside `range` the first time this (correlation, parameter) pair is seen on this
//! thread since the last reset (a log per thread); returns true. The slow path of checkValidity.
bool recordOutsideValidity(const ValidityRange& range, double value);

//! True when `value` is outside `range`; then records a warning the first time this
//! (correlation, parameter) pair is seen on this thread since the last reset (a log per thread). The test inline,
//! the record out of line: every convection evaluation checks two ranges (DEVELOPERS.md "Per-run CPU in sweeps,
//! sixteenth round").
inline bool checkValidity(const ValidityRange& range, double value) {
  return !range.contains(value) && recordOutsideValidity(range, value);
}

//! Warnings recorded on this thread since the last call, each (correlation, parameter, value, range)
//! reported once between resets.
std::vector<std::string> takeValidityWarnings();

//! Forget which warnings were issued on this thread (EnvironmentModel does this for every new case).
void resetValidityWarnings();

//! While one lives, range checks on this thread answer (checkValidity still returns whether the value is outside)
//! but log nothing (`logging` false), or log again (`logging` true) inside such a scope. The steady start defers
//! them while it relaxes and iterates through states that are not the run's (a water film at -0.03 degC where no
//! output comes within 4 K of it; drivers/simulation.cpp, steadyTemperatures) and then checks the faces again at
//! the state reached (EnvironmentModel::confirmRanges).
class ValidityLogScope {
 public:
  explicit ValidityLogScope(bool logging);
  ~ValidityLogScope();
  ValidityLogScope(const ValidityLogScope&) = delete;
  ValidityLogScope& operator=(const ValidityLogScope&) = delete;

 private:
  bool previous_;
};

//! Whether range checks on this thread log now (true unless the innermost ValidityLogScope says false).
bool validityLogging();

//! Range checks, and the reset by a new EnvironmentModel, on a log of their own while it lives, discarded at its end:
//! the thread's log (what was issued and is pending, whether it logs) is as before afterwards. For bodies and states
//! that are not the run's: the unrefined grid whose steady state starts a refined run's (drivers/simulation.cpp).
class ValidityLogIsolation {
 public:
  ValidityLogIsolation();
  ~ValidityLogIsolation();
  ValidityLogIsolation(const ValidityLogIsolation&) = delete;
  ValidityLogIsolation& operator=(const ValidityLogIsolation&) = delete;

 private:
  std::vector<std::pair<std::string, std::string>> issued_;
  std::vector<std::string> pending_;
  bool logging_;
};

// ---- fluid properties ------------------------------------------------------------

enum class Medium { Air, FreshWater, SeaWater };

//! Thermophysical properties of a fluid at one temperature.
struct FluidProperties {
  double density = 0.0;       //!< [kg/m3]
  double viscosity = 0.0;     //!< dynamic viscosity [Pa s]
  double conductivity = 0.0;  //!< [W/(m K)]
  double specificHeat = 0.0;  //!< [J/(kg K)]
  double prandtl = 0.0;       //!< viscosity * specificHeat / conductivity [-]
  double expansion = 0.0;     //!< volumetric expansion coefficient -(1/rho) drho/dT [1/K]
  bool outsideValidity = false;  //!< temperature or salinity was clamped to the fitted range

  //! Kinematic viscosity [m2/s]
  double kinematicViscosity() const { return viscosity / density; }
  //! Thermal diffusivity [m2/s]
  double diffusivity() const { return conductivity / (density * specificHeat); }
};

//! Temperature range of the air table [K] (Incropera et al., Table A.4 rows used).
inline constexpr ValidityRange kAirTableRange{"air properties, Incropera et al. Table A.4", "temperature", "K",
                                              200.0, 400.0};
//! Temperature range of the saturated-water table [K] (Incropera et al., Table A.6 rows used).
inline constexpr ValidityRange kFreshWaterTableRange{"fresh water properties, Incropera et al. Table A.6",
                                                     "temperature", "K", 273.15, 373.15};
//! Temperature range for sea water [K]: Sharqawy et al. (2010) fits hold from 0 degC; we
//! extrapolate 2 K lower so that sea water at its freezing point (-1.9 degC at 35 g/kg) is usable.
inline constexpr ValidityRange kSeaWaterTemperatureRange{"sea water properties, Sharqawy et al. (2010)",
                                                         "temperature", "K", 271.15, 373.15};
//! Salinity range for sea water [kg/kg] (Sharqawy et al. 2010: viscosity fit to 150 g/kg).
inline constexpr ValidityRange kSeaWaterSalinityRange{"sea water properties, Sharqawy et al. (2010)", "salinity",
                                                      "kg/kg", 0.0, 0.150};

//! Properties of `medium` at `temperatureK` [K]; `salinity` [kg/kg] is used for sea water only.
//! Outside the fitted range the temperature (and salinity) is clamped, a warning recorded and
//! `outsideValidity` set.
//!  - Air (dry, 1 atm): cubic Hermite interpolation of Incropera et al., Fundamentals of Heat and
//!    Mass Transfer, Table A.4, 200-400 K; expansion 1/T (ideal gas).
//!  - Fresh water: Incropera et al. Table A.6 (saturated liquid) for cp, viscosity, conductivity;
//!    density and expansion from Kell (1975), J. Chem. Eng. Data 20:97 (the 0-150 degC density fit).
//!  - Sea water: Sharqawy, Lienhard & Zubair (2010), Desalination and Water Treatment 16:354,
//!    eqs. 8 (density), 9 (cp), 13 (conductivity), 22-23 (viscosity); coefficients from memory,
//!    checked at zero salinity against Table A.6 and at 35 g/kg against known sea-water values
//!    (tests/test_media.cpp). Expansion by differentiating eq. 8 (about 3 % low at 20 degC, S = 0).
FluidProperties fluidProperties(Medium medium, double temperatureK, double salinity = 35e-3);

//! The properties fluidProperties gives (expansion aside) with their derivatives with respect to the temperature
//! (exact: the Hermite interpolant's own slope, the fits differentiated; 0 where the temperature is clamped).
//! Values equal fluidProperties' bit for bit. Used by the convection evaluator for dh/dT_s.
struct FluidPropertiesDual {
  Dual density, viscosity, conductivity, specificHeat, prandtl;
  bool outsideValidity = false;
  Dual kinematicViscosity() const { return viscosity / density; }
};
FluidPropertiesDual fluidPropertiesDual(Medium medium, Dual temperatureK, double salinity = 35e-3);

//! The temperatures [K] where the properties of `medium` change from one smooth piece to the next, the ends of their
//! range included: the nodes of the Hermite tables (air: Table A.4, fresh water: Table A.6; the interpolants are C1
//! there), the ends of the fitted range for sea water (its fits are smooth). Between two of them every property of
//! fluidPropertiesDual is infinitely differentiable in temperature (the film-temperature tables of the convection
//! evaluator put a node on each, models/convection.cpp).
std::vector<double> propertyPieces(Medium medium);

//! mediumDensity with its temperature derivative (the fits' own slopes; 0 where clamped).
Dual mediumDensityDual(Medium medium, Dual temperatureK, double salinity = 35e-3);

//! Density of fresh water (Kell 1975) or sea water (Sharqawy et al. 2010 eq. 8) [kg/m3];
//! for air the ideal gas at 1 bar, matching Table A.4. Same clamping as fluidProperties.
double mediumDensity(Medium medium, double temperatureK, double salinity = 35e-3);

// ---- moist air ----------------------------------------------------------------------

//! Range of the Buck (1981) saturation vapour pressure fit over water [K] (-20 to +50 degC).
inline constexpr ValidityRange kBuckRange{"saturation vapour pressure, Buck (1981)", "temperature", "K", 253.15,
                                          323.15};
//! Range over which the linear latent-heat fit is used [K].
inline constexpr ValidityRange kLatentHeatRange{"latent heat of vaporisation, FAO-56 (Allen et al. 1998)",
                                                "temperature", "K", 253.15, 373.15};

//! Saturation vapour pressure over liquid water [Pa].
//! Buck (1981), J. Appl. Meteorol. 20:1527: e_s = 611.21 exp(17.502 t / (240.97 + t)), t in degC.
//! Clamped to kBuckRange outside -20..50 degC (slope is then zero).
double saturationVapourPressure(double temperatureK);

//! Derivative of saturationVapourPressure with temperature [Pa/K] (analytic).
double saturationVapourPressureSlope(double temperatureK);

//! Latent heat of vaporisation of water [J/kg].
//! Linear fit L = 2.501e6 - 2361 t (t in degC), Allen et al. (1998) FAO Irrigation and Drainage
//! Paper 56, Annex 3, eq. 3-1; within 0.4 % of steam tables 0-100 degC. Clamped to kLatentHeatRange.
double latentHeatVaporisation(double temperatureK);

//! Derivative of latentHeatVaporisation [J/(kg K)] (-2361 inside the range, 0 outside).
double latentHeatVaporisationSlope(double temperatureK);

//! Density of moist air [kg/m3] as an ideal mixture of dry air and vapour:
//! rho = (p - e)/(R_d T) + e/(R_v T), e = relativeHumidity * e_s(T) (common practice, no source).
//! relativeHumidity in 0..1, pressure [Pa].
double humidAirDensity(double temperatureK, double relativeHumidity, double pressure = kStandardPressure);

//! Humidity ratio [kg vapour / kg dry air]: 0.622 e / (p - e) with the exact ratio of molar masses.
double humidityRatio(double vapourPressure, double pressure = kStandardPressure);

//! Binary diffusion coefficient of water vapour in air [m2/s]: 0.26e-4 at 298 K, 1 atm
//! (Incropera et al. Table A.8, from memory), scaled as T^{3/2}/p (Incropera ch. 14).
double vapourDiffusivityInAir(double temperatureK, double pressure = kStandardPressure);

}  // namespace thermorph
