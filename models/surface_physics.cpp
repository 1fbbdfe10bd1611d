#include "models/surface_physics.hpp"

#include <cmath>

namespace thermorph {

SurfaceFlux longwaveRadiation(double emissivity, double surfaceTemperature, double radiantTemperature) {
  const double ts2 = surfaceTemperature * surfaceTemperature;
  const double tr2 = radiantTemperature * radiantTemperature;
  return {emissivity * kStefanBoltzmann * (tr2 * tr2 - ts2 * ts2),
          -4.0 * emissivity * kStefanBoltzmann * ts2 * surfaceTemperature};
}

double radiativeCoefficient(double emissivity, double surfaceTemperature, double radiantTemperature) {
  return emissivity * kStefanBoltzmann * (surfaceTemperature + radiantTemperature) *
         (surfaceTemperature * surfaceTemperature + radiantTemperature * radiantTemperature);
}

EvaporationFlux cutaneousEvaporation(const EvaporationInput& in) {
  EvaporationFlux out;
  const double ts = in.surfaceTemperature, ta = in.airTemperature;
  // h_m = h_c / (rho c_p Le^{2/3}); perH = h_m / h_c [m3 K/J]
  const double perH = 1.0 / (in.airDensity * in.airSpecificHeat * std::pow(in.lewisNumber, 2.0 / 3.0));
  out.massTransferCoefficient = in.convectionCoefficient * perH;

  // Ideal-gas vapour density rho_v = e M_w / (R T) [kg/m3].
  constexpr double mr = kMolarMassWater / kMolarGasConstant;
  const double esSurface = saturationVapourPressure(ts);
  const double rhoSurface = esSurface * mr / ts;
  const double rhoAir = in.relativeHumidity * saturationVapourPressure(ta) * mr / ta;
  const double dRhoSurface = mr * (saturationVapourPressureSlope(ts) * ts - esSurface) / (ts * ts);

  const double latent = latentHeatVaporisation(ts);
  const double wh = in.wettedFraction * out.massTransferCoefficient;
  out.evaporationRate = wh * (rhoSurface - rhoAir);
  out.flux = -out.evaporationRate * latent;
  out.dFlux_dTs = -wh * (dRhoSurface * latent + (rhoSurface - rhoAir) * latentHeatVaporisationSlope(ts));
  out.dFlux_dh = -in.wettedFraction * perH * (rhoSurface - rhoAir) * latent;
  return out;
}

double lewisNumberVapourInAir(double temperatureK, double pressure) {
  const FluidProperties air = fluidProperties(Medium::Air, temperatureK);
  const double density = pressure / (kGasConstantDryAir * temperatureK);
  const double alpha = air.conductivity / (density * air.specificHeat);
  return alpha / vapourDiffusivityInAir(temperatureK, pressure);
}

EvaporationFlux cutaneousEvaporation(double convectionCoefficient, double surfaceTemperature, double airTemperature,
                                     double relativeHumidity, double wettedFraction, double pressure) {
  const double film = 0.5 * (surfaceTemperature + airTemperature);
  const FluidProperties air = fluidProperties(Medium::Air, film);
  EvaporationInput in;
  in.convectionCoefficient = convectionCoefficient;
  in.surfaceTemperature = surfaceTemperature;
  in.airTemperature = airTemperature;
  in.relativeHumidity = relativeHumidity;
  in.wettedFraction = wettedFraction;
  in.airDensity = pressure / (kGasConstantDryAir * film);
  in.airSpecificHeat = air.specificHeat;
  in.lewisNumber = lewisNumberVapourInAir(film, pressure);
  return cutaneousEvaporation(in);
}

double lewisRatio(double temperatureK, double pressure) {
  const FluidProperties air = fluidProperties(Medium::Air, temperatureK);
  const double density = pressure / (kGasConstantDryAir * temperatureK);
  return latentHeatVaporisation(temperatureK) * kMolarMassWater /
         (kMolarGasConstant * temperatureK * density * air.specificHeat *
          std::pow(lewisNumberVapourInAir(temperatureK, pressure), 2.0 / 3.0));
}

RespiratoryHeatLoss respiratoryHeatLoss(double metabolicRate, double ventilationPerWatt, double exhaledTemperature,
                                        double inspiredTemperature, double relativeHumidity,
                                        double pantingMultiplier, double pressure) {
  RespiratoryHeatLoss out;
  out.ventilation = metabolicRate * ventilationPerWatt * pantingMultiplier;

  const double eIn = relativeHumidity * saturationVapourPressure(inspiredTemperature);
  const double eEx = saturationVapourPressure(exhaledTemperature);
  const double omegaIn = humidityRatio(eIn, pressure);
  const double omegaEx = humidityRatio(eEx, pressure);
  // d omega / d e = (M_w/M_d) p / (p - e)^2
  const double dOmegaEx = (kMolarMassWater / kMolarMassDryAir) * pressure / ((pressure - eEx) * (pressure - eEx)) *
                          saturationVapourPressureSlope(exhaledTemperature);
  const double dryAirFlow = out.ventilation * (pressure - eIn) / (kGasConstantDryAir * inspiredTemperature);  // kg/s
  const double cp = fluidProperties(Medium::Air, inspiredTemperature).specificHeat;
  const double latentHeat = latentHeatVaporisation(exhaledTemperature);

  out.latent = dryAirFlow * (omegaEx - omegaIn) * latentHeat;
  out.sensible = dryAirFlow * cp * (exhaledTemperature - inspiredTemperature);
  out.total = out.latent + out.sensible;
  out.dTotal_dExhaled =
      dryAirFlow * (dOmegaEx * latentHeat + (omegaEx - omegaIn) * latentHeatVaporisationSlope(exhaledTemperature) + cp);
  return out;
}

}  // namespace thermorph
