#pragma once
//! Surface heat-exchange channels other than convection: long-wave radiation, cutaneous
//! evaporation (heat-mass transfer analogy) and respiratory heat loss. Pure functions; fluxes
//! are positive into the body unless the name says "loss".
#include "models/media.hpp"

namespace thermorph {

//! Stefan-Boltzmann constant [W/(m2 K4)] (CODATA 2018).
inline constexpr double kStefanBoltzmann = 5.670374419e-8;

//! A heat flux per area and its slope with surface temperature.
struct SurfaceFlux {
  double flux = 0.0;       //!< positive into the body [W/m2]
  double dFlux_dTs = 0.0;  //!< d flux / d T_surface [W/(m2 K)]
};

//! Net long-wave radiation into a grey surface from surroundings at the mean radiant temperature
//! [W/m2]: q = eps sigma (T_r^4 - T_s^4), dq/dT_s = -4 eps sigma T_s^3 (Stefan-Boltzmann law;
//! the view fraction, if any, is folded into eps by the caller). Temperatures in K.
SurfaceFlux longwaveRadiation(double emissivity, double surfaceTemperature, double radiantTemperature);

//! Linearised radiative coefficient [W/(m2 K)]: h_r = eps sigma (T_s + T_r)(T_s^2 + T_r^2), so that
//! q = h_r (T_r - T_s) exactly (Incropera et al. ch. 1).
double radiativeCoefficient(double emissivity, double surfaceTemperature, double radiantTemperature);

//! Inputs of cutaneous evaporation from a partly wetted surface.
struct EvaporationInput {
  double convectionCoefficient = 0.0;  //!< h_c [W/(m2 K)]
  double surfaceTemperature = 0.0;     //!< [K]
  double airTemperature = 0.0;         //!< [K]
  double relativeHumidity = 0.0;       //!< of the ambient air, 0..1 [-]
  double wettedFraction = 1.0;         //!< w, 0..1 [-]
  double airDensity = 0.0;             //!< rho of air at the film temperature [kg/m3]
  double airSpecificHeat = 0.0;        //!< c_p of air at the film temperature [J/(kg K)]
  double lewisNumber = 0.0;            //!< Le = alpha / D_AB of water vapour in air [-]
};

//! Evaporative heat flux and its slopes.
struct EvaporationFlux {
  double flux = 0.0;                     //!< positive into the body (evaporation is negative) [W/m2]
  double dFlux_dTs = 0.0;                //!< at fixed h_c [W/(m2 K)]
  double dFlux_dh = 0.0;                 //!< d flux / d h_c [K]
  double massTransferCoefficient = 0.0;  //!< h_m [m/s]
  double evaporationRate = 0.0;          //!< water mass lost per area (negative: condensation) [kg/(m2 s)]
};

//! Cutaneous evaporation by the heat-mass transfer analogy (Chilton-Colburn; Incropera et al.
//! ch. 6): h_m = h_c / (rho c_p Le^{2/3}), vapour densities of ideal-gas water vapour
//! rho_v = e M_w / (R T), saturated at the skin and at RH in the air:
//! q = -w h_m [rho_v,sat(T_s) - RH rho_v,sat(T_a)] L_v(T_s).
//! Condensation (q > 0) follows when the surface is below the dew point.
//! The older shortcut h_e = LR h_c, q = -w h_e [e_s(T_s) - RH e_s(T_a)] with the Lewis ratio
//! LR ~ 16.5 K/kPa (from memory) is the same law with rho_v linearised; see lewisRatio.
EvaporationFlux cutaneousEvaporation(const EvaporationInput& input);

//! As above with air properties at the film temperature (cp from Table A.4, density of dry air as an ideal gas at
//! `pressure`)
//! and Le = alpha / D_AB (vapourDiffusivityInAir).
EvaporationFlux cutaneousEvaporation(double convectionCoefficient, double surfaceTemperature, double airTemperature,
                                     double relativeHumidity, double wettedFraction,
                                     double pressure = kStandardPressure);

//! Lewis number of water vapour in air [-] at `temperatureK` and `pressure` [Pa]: alpha / D_AB.
double lewisNumberVapourInAir(double temperatureK, double pressure = kStandardPressure);

//! Lewis ratio h_e / h_c [K/Pa] implied by the analogy at `temperatureK`:
//! LR = L_v M_w / (R T rho c_p Le^{2/3}).
double lewisRatio(double temperatureK, double pressure = kStandardPressure);

//! Default respiratory ventilation per watt of metabolic heat [m3/(s W)] (inspired air):
//! 1 W = 1 J/s / 20.1 kJ per L O2 = 0.04975 mL O2/s (oxycaloric equivalent 20.1 kJ/L, common
//! practice, no source); air holds 20.9 % O2 of which about 25 % is extracted (common practice,
//! no source), so 0.209 * 0.25 = 0.05225 L O2 per L air and 0.04975 / 0.05225 = 0.952 mL air/s
//! per W (about 5.7 L/min for a 100 W resting human).
inline constexpr double kVentilationPerWatt = (1.0 / 20.1e3) * 1e-3 / (0.209 * 0.25);

//! Respiratory heat loss and its parts [W]; positive = heat leaving the body.
struct RespiratoryHeatLoss {
  double total = 0.0;            //!< latent + sensible [W]
  double latent = 0.0;           //!< evaporation into the exhaled air [W]
  double sensible = 0.0;         //!< warming of the exhaled air [W]
  double dTotal_dExhaled = 0.0;  //!< d total / d exhaled temperature [W/K]
  double ventilation = 0.0;      //!< inspired air flow [m3/s]
};

//! Respiratory heat loss [W]: V = metabolicRate * ventilationPerWatt * pantingMultiplier and
//! Q = V [rho_da (omega_ex - omega_in) L_v(T_ex) + rho_da c_p (T_ex - T_in)], exhaled air saturated
//! at T_ex, rho_da the dry-air density of the inspired air, omega humidity ratios
//! (common practice, no source). Temperatures in K, relativeHumidity 0..1.
RespiratoryHeatLoss respiratoryHeatLoss(double metabolicRate, double ventilationPerWatt, double exhaledTemperature,
                                        double inspiredTemperature, double relativeHumidity,
                                        double pantingMultiplier = 1.0, double pressure = kStandardPressure);

}  // namespace thermorph
