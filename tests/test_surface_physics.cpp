// Validation of radiation, cutaneous evaporation and respiratory heat loss (models/surface_physics.hpp).
#include <catch2/catch.hpp>

#include <cmath>

#include "models/surface_physics.hpp"

using namespace thermorph;

namespace {
double relErr(double value, double reference) { return std::abs(value / reference - 1.0); }
}  // namespace

TEST_CASE("long-wave radiation by hand", "[surface]") {
  // Skin (eps 0.98, Steketee 1973, docs/references.md) at 35 degC facing surroundings at 20 degC.
  // Stefan-Boltzmann law: 293.15^4 = 7.385155e9, 308.15^4 = 9.016722e9, difference -1.631568e9 K^4;
  // q = 0.98*5.670374419e-8*(-1.631568e9) = -90.666 W/m2 (a loss);
  // dq/dTs = -4*0.98*5.670374419e-8*308.15^3 = -4*0.98*5.670374419e-8*2.926126e7 = -6.5041 W/(m2 K).
  const SurfaceFlux q = longwaveRadiation(0.98, 308.15, 293.15);
  CHECK(relErr(q.flux, -90.666) < 1e-4);
  CHECK(relErr(q.dFlux_dTs, -6.5041) < 1e-4);
  // Linearised form q = h_r (T_r - T_s) holds exactly (docs/references.md; Incropera ch. 1).
  CHECK(relErr(radiativeCoefficient(0.98, 308.15, 293.15) * (293.15 - 308.15), q.flux) < 1e-12);
  // Derivative against a central difference (consistency).
  const double fd =
      (longwaveRadiation(0.98, 308.16, 293.15).flux - longwaveRadiation(0.98, 308.14, 293.15).flux) / 0.02;
  CHECK(relErr(q.dFlux_dTs, fd) < 1e-6);
  CHECK(longwaveRadiation(0.98, 300.0, 300.0).flux == 0.0);
}

TEST_CASE("evaporation from a fully wetted surface into dry air, by hand", "[surface]") {
  // Heat and mass transfer analogy (Chilton-Colburn, Incropera ch. 6), surface at 35 degC, dry air,
  // h_c = 10 W/(m2 K), air rho 1.1614 kg/m3 and c_p 1007 J/(kg K) (Table A.4, 300 K), Le = 0.87:
  //   Le^2/3 = 0.87^0.666667 = 0.911338; rho c_p Le^2/3 = 1169.530*0.911338 = 1065.84;
  //   h_m = 10/1065.84 = 9.38230e-3 m/s;
  //   e_s(35 degC) = 5625.91 Pa (Buck 1981); rho_v,s = 5625.91*0.01801528/(8.314462618*308.15)
  //                = 101.352/2562.131 = 0.0395583 kg/m3; rho_v,inf = 0 (dry air);
  //   evaporation = 9.38230e-3*0.0395583 = 3.71148e-4 kg/(m2 s);
  //   L_v(35 degC) = 2.501e6 - 2361*35 = 2.418365e6 J/kg; q = -3.71148e-4*2.418365e6 = -897.57 W/m2.
  EvaporationInput in;
  in.convectionCoefficient = 10.0;
  in.surfaceTemperature = 308.15;
  in.airTemperature = 298.15;
  in.relativeHumidity = 0.0;
  in.wettedFraction = 1.0;
  in.airDensity = 1.1614;
  in.airSpecificHeat = 1007.0;
  in.lewisNumber = 0.87;
  const EvaporationFlux e = cutaneousEvaporation(in);
  CHECK(relErr(e.massTransferCoefficient, 9.38230e-3) < 1e-5);
  CHECK(relErr(e.evaporationRate, 3.71148e-4) < 1e-4);
  CHECK(relErr(e.flux, -897.57) < 1e-4);
  // Half-wetted: half the loss (w enters linearly).
  in.wettedFraction = 0.5;
  CHECK(relErr(cutaneousEvaporation(in).flux, -897.57 / 2) < 1e-4);
  in.wettedFraction = 1.0;

  // Slopes against central differences (consistency).
  EvaporationInput up = in, down = in;
  up.surfaceTemperature += 0.01;
  down.surfaceTemperature -= 0.01;
  CHECK(relErr(e.dFlux_dTs, (cutaneousEvaporation(up).flux - cutaneousEvaporation(down).flux) / 0.02) < 1e-5);
  CHECK(relErr(e.dFlux_dh, e.flux / 10.0) < 1e-12);

  // Saturated air at the surface temperature: no net transfer (exact).
  in.airTemperature = 308.15;
  in.relativeHumidity = 1.0;
  CHECK(std::abs(cutaneousEvaporation(in).flux) < 1e-12);
  // Surface below the dew point of the air: condensation, heat into the body.
  in.surfaceTemperature = 300.0;
  CHECK(cutaneousEvaporation(in).flux > 0.0);
}

TEST_CASE("Lewis ratio implied by the analogy", "[surface]") {
  // LR ~ 16.5 K/kPa in air at sea level (docs/references.md, from memory) = 0.0165 K/Pa.
  CHECK(relErr(lewisRatio(300.0), 16.5e-3) < 0.03);
  // Le of water vapour in air near 300 K, 1 atm: alpha = 0.0263/(1.1766*1007) = 22.20e-6 m2/s (Table A.4
  // k and cp, ideal-gas density at 101325 Pa) over D_AB = 0.26e-4*(300/298)^1.5 = 26.26e-6 m2/s
  // (Table A.8, from memory) = 0.845; 0.85 to 2 % covers the rounding of D_AB.
  CHECK(relErr(lewisNumberVapourInAir(300.0), 0.85) < 0.02);
  // The convenience form (film properties) agrees with the shortcut q = -LR h_c (e_s(Ts) - RH e_a)
  // = -0.0165*10*5625.91 = -928.3 W/m2 within 5 % (the shortcut linearises the vapour density).
  const EvaporationFlux e = cutaneousEvaporation(10.0, 308.15, 298.15, 0.0, 1.0);
  CHECK(relErr(e.flux, -928.3) < 0.05);
}

TEST_CASE("respiratory heat loss", "[surface]") {
  // Default ventilation per watt, written out: 1 W / 20.1 kJ per L O2 = 4.97512e-5 L O2/s;
  // 0.209*0.25 = 0.05225 L O2 per L air; 4.97512e-5/0.05225 = 9.52177e-4 L/s = 9.52177e-7 m3/(s W).
  CHECK(relErr(kVentilationPerWatt, 9.52177e-7) < 1e-5);
  // A 100 W resting human breathes about 6 L/min (common practice, no source): 5.71 L/min here.
  CHECK(relErr(100.0 * kVentilationPerWatt * 60e3, 6.0) < 0.10);

  // Hand calculation, 100 W, exhaled saturated at 35 degC, inspired 20 degC at 50 % RH, 101325 Pa:
  //   e_in = 0.5*611.21*exp(17.502*20/260.97) = 1168.64 Pa; e_ex = 5625.91 Pa;
  //   omega_in = 0.621977*1168.64/(101325 - 1168.64) = 0.0072573;
  //   omega_ex = 0.621977*5625.91/(101325 - 5625.91) = 0.0365643;
  //   rho_da = (101325 - 1168.64)/(287.05*293.15) = 1.19021 kg/m3; V = 9.52177e-5 m3/s;
  //   latent = 9.52177e-5*1.19021*(0.0365643 - 0.0072573)*2.418365e6 = 8.0322 W;
  //   sensible = 9.52177e-5*1.19021*1007*15 = 1.7118 W (c_p 1006.6 from Table A.4 at 293 K); total 9.744 W.
  const RespiratoryHeatLoss r = respiratoryHeatLoss(100.0, kVentilationPerWatt, 308.15, 293.15, 0.5);
  CHECK(relErr(r.latent, 8.0322) < 1e-3);
  CHECK(relErr(r.sensible, 1.7118) < 2e-3);
  CHECK(relErr(r.total, 9.744) < 2e-3);
  // Fanger (1970) respiratory loss as in ISO 7730 (from memory): 1.7e-5 M (5867 - p_a) + 0.0014 M (34 - t_a)
  // = 1.7e-5*100*(5867 - 1168.64) + 0.0014*100*(34 - 20) = 7.987 + 1.960 = 9.947 W; an independent
  // empirical fit, so 5 %.
  CHECK(relErr(r.total, 9.947) < 0.05);

  // Panting triples ventilation and so the loss (exact).
  CHECK(relErr(respiratoryHeatLoss(100.0, kVentilationPerWatt, 308.15, 293.15, 0.5, 3.0).total, 3.0 * r.total) < 1e-12);
  // Slope with exhaled temperature against a central difference (consistency).
  const double fd = (respiratoryHeatLoss(100.0, kVentilationPerWatt, 308.16, 293.15, 0.5).total -
                     respiratoryHeatLoss(100.0, kVentilationPerWatt, 308.14, 293.15, 0.5).total) /
                    0.02;
  CHECK(relErr(r.dTotal_dExhaled, fd) < 1e-5);
}
