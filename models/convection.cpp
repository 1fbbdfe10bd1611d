#include "models/convection.hpp"

#include <algorithm>
#include <cmath>
#include <stdexcept>

namespace thermorph {

// ---- correlations ---------------------------------------------------------------------

double nusseltCylinderCrossFlow(double reynolds, double prandtl) {
  const double laminar = 0.62 * std::sqrt(reynolds) * std::cbrt(prandtl) /
                         std::pow(1.0 + std::pow(0.4 / prandtl, 2.0 / 3.0), 0.25);
  return 0.3 + laminar * std::pow(1.0 + std::pow(reynolds / 282000.0, 5.0 / 8.0), 4.0 / 5.0);
}

double nusseltSphereForced(double reynolds, double prandtl, double viscosityRatio) {
  return 2.0 + (0.4 * std::sqrt(reynolds) + 0.06 * std::pow(reynolds, 2.0 / 3.0)) * std::pow(prandtl, 0.4) *
                   std::pow(viscosityRatio, 0.25);
}

double nusseltFlatPlateForced(double reynolds, double prandtl) {
  const double laminar = 0.664 * std::sqrt(reynolds);
  const double mixed = 0.037 * std::pow(reynolds, 0.8) - 871.0;
  return std::max(laminar, mixed) * std::cbrt(prandtl);
}

double nusseltMitchell(double reynolds, double a, double b) { return a * std::pow(reynolds, b); }

double nusseltHorizontalCylinderFree(double rayleigh, double prandtl) {
  const double root = 0.60 + 0.387 * std::pow(rayleigh, 1.0 / 6.0) /
                                 std::pow(1.0 + std::pow(0.559 / prandtl, 9.0 / 16.0), 8.0 / 27.0);
  return root * root;
}

double nusseltSphereFree(double rayleigh, double prandtl) {
  return 2.0 + 0.589 * std::pow(rayleigh, 0.25) / std::pow(1.0 + std::pow(0.469 / prandtl, 9.0 / 16.0), 4.0 / 9.0);
}

double nusseltVerticalPlateFree(double rayleigh, double prandtl) {
  const double root = 0.825 + 0.387 * std::pow(rayleigh, 1.0 / 6.0) /
                                  std::pow(1.0 + std::pow(0.492 / prandtl, 9.0 / 16.0), 8.0 / 27.0);
  return root * root;
}

double nusseltHorizontalPlateFreeUpper(double rayleigh) {
  return std::max(0.54 * std::pow(rayleigh, 0.25), 0.15 * std::cbrt(rayleigh));
}

double nusseltHorizontalPlateFreeLower(double rayleigh) { return 0.52 * std::pow(rayleigh, 0.2); }

double mixedNusselt(double nusseltForced, double nusseltFree, double exponent) {
  return std::pow(std::pow(nusseltForced, exponent) + std::pow(nusseltFree, exponent), 1.0 / exponent);
}

MitchellShape mitchellConstants(Geometry geometry) {
  constexpr MitchellConstants sphere{0.34, 0.6};  // Mitchell (1976) sphere, from memory
  return {sphere, geometry == Geometry::Sphere};
}

// ---- evaluator --------------------------------------------------------------------------

namespace {

//! Only Mitchell's sphere row is known here; other shapes reuse it (warned once).
inline constexpr ValidityRange kMitchellShape{"Mitchell (1976) shape constants, sphere row reused",
                                              "geometry (0 sphere, 1 cylinder, 2 plate)", "", 0.0, 0.0};

//! Square of the floor on the relative density difference of free convection [-].
constexpr double kBuoyancyFloorSquared = 1e-16;

//! h and dimensionless groups at one surface temperature (no derivative).
ConvectionResult evaluateAt(const ConvectionInput& in, double surfaceTemperature, bool checkRanges) {
  ConvectionResult r;
  auto check = [&](const ValidityRange& range, double value) {
    if (checkRanges && checkValidity(range, value)) r.outsideValidity = true;
  };
  const double ts = surfaceTemperature, tinf = in.fluidTemperature;
  const double filmTemperature = 0.5 * (ts + tinf);
  const FluidProperties film = fluidProperties(in.medium, filmTemperature, in.salinity);
  const double nuFilm = film.kinematicViscosity();
  if (checkRanges && film.outsideValidity) r.outsideValidity = true;

  // Free convection: relative density difference b, floored smoothly.
  double b = 0.0;
  if (in.medium == Medium::Air) {
    b = (ts - tinf) / filmTemperature;  // beta = 1/T_film (ideal gas)
  } else {
    b = (mediumDensity(in.medium, tinf, in.salinity) - mediumDensity(in.medium, ts, in.salinity)) / film.density;
  }
  b = std::sqrt(b * b + kBuoyancyFloorSquared);

  double freeLength = in.length;
  if (in.geometry == Geometry::Plate && !in.verticalPlate) {
    const double width = in.width > 0.0 ? in.width : in.length;
    freeLength = in.length * width / (2.0 * (in.length + width));  // area / perimeter
  }
  r.grashof = kStandardGravity * b * std::pow(freeLength, 3) / (nuFilm * nuFilm);
  r.rayleigh = r.grashof * film.prandtl;

  double nuFree = 0.0;
  switch (in.geometry) {
    case Geometry::Sphere:
      check(kChurchillSphereRa, r.rayleigh);
      check(kChurchillSpherePr, film.prandtl);
      nuFree = nusseltSphereFree(r.rayleigh, film.prandtl);
      break;
    case Geometry::Cylinder:
      check(kChurchillChuCylinderRa, r.rayleigh);
      nuFree = nusseltHorizontalCylinderFree(r.rayleigh, film.prandtl);
      break;
    case Geometry::Plate:
      if (in.verticalPlate) {
        nuFree = nusseltVerticalPlateFree(r.rayleigh, film.prandtl);
      } else {
        check(kHorizontalPlateUpperRa, r.rayleigh);
        check(kHorizontalPlateLowerRa, r.rayleigh);
        nuFree = 0.5 * (nusseltHorizontalPlateFreeUpper(r.rayleigh) + nusseltHorizontalPlateFreeLower(r.rayleigh));
      }
      break;
  }
  const double hFree = nuFree * film.conductivity / freeLength;

  const double speed = std::abs(in.speed);
  if (speed == 0.0) {
    r.h = hFree;
  } else if (in.choice == CorrelationChoice::Mitchell) {
    const MitchellShape shape = mitchellConstants(in.geometry);
    if (!shape.exact) check(kMitchellShape, static_cast<double>(in.geometry));
    r.reynolds = speed * in.volumeLength / nuFilm;
    const double hForced =
        nusseltMitchell(r.reynolds, shape.constants.a, shape.constants.b) * film.conductivity / in.volumeLength;
    r.h = mixedNusselt(hForced, hFree);
  } else {
    switch (in.geometry) {
      case Geometry::Cylinder: {
        r.reynolds = speed * in.length / nuFilm;
        check(kChurchillBernsteinRePr, r.reynolds * film.prandtl);
        const double hForced = nusseltCylinderCrossFlow(r.reynolds, film.prandtl) * film.conductivity / in.length;
        r.h = mixedNusselt(hForced, hFree);
        break;
      }
      case Geometry::Plate: {
        r.reynolds = speed * in.length / nuFilm;
        check(kFlatPlateRe, r.reynolds);
        check(kFlatPlatePr, film.prandtl);
        const double hForced = nusseltFlatPlateForced(r.reynolds, film.prandtl) * film.conductivity / in.length;
        r.h = mixedNusselt(hForced, hFree);
        break;
      }
      case Geometry::Sphere: {
        // Whitaker: free-stream properties, mu_s at the surface.
        const FluidProperties stream = fluidProperties(in.medium, tinf, in.salinity);
        const FluidProperties surface = fluidProperties(in.medium, ts, in.salinity);
        if (checkRanges && (stream.outsideValidity || surface.outsideValidity)) r.outsideValidity = true;
        r.reynolds = speed * in.length / stream.kinematicViscosity();
        const double viscosityRatio = stream.viscosity / surface.viscosity;
        check(kWhitakerRe, r.reynolds);
        check(kWhitakerPr, stream.prandtl);
        if (in.medium != Medium::Air) check(kWhitakerViscosityRatio, viscosityRatio);
        const double nuForced = nusseltSphereForced(r.reynolds, stream.prandtl, viscosityRatio);
        const double hConductionForced = 2.0 * stream.conductivity / in.length;
        const double hConductionFree = 2.0 * film.conductivity / in.length;
        const double hForced = nuForced * stream.conductivity / in.length;
        r.h = hConductionFree + mixedNusselt(hForced - hConductionForced, hFree - hConductionFree);
        break;
      }
    }
  }
  const double nusseltLength =
      (in.choice == CorrelationChoice::Mitchell && speed > 0.0) ? in.volumeLength : in.length;
  r.nusselt = r.h * nusseltLength / film.conductivity;
  return r;
}

}  // namespace

ConvectionResult convectionCoefficient(const ConvectionInput& input) {
  if (!(input.length > 0.0)) throw std::invalid_argument("convectionCoefficient: length must be positive");
  if (input.choice == CorrelationChoice::Mitchell && !(input.volumeLength > 0.0))
    throw std::invalid_argument("convectionCoefficient: volumeLength must be positive for Mitchell (1976)");
  if (!(input.surfaceTemperature > 0.0) || !(input.fluidTemperature > 0.0))
    throw std::invalid_argument("convectionCoefficient: temperatures must be positive kelvin");

  ConvectionResult r = evaluateAt(input, input.surfaceTemperature, true);
  constexpr double step = 0.01;  // K
  const double hPlus = evaluateAt(input, input.surfaceTemperature + step, false).h;
  const double hMinus = evaluateAt(input, input.surfaceTemperature - step, false).h;
  r.dh_dTs = (hPlus - hMinus) / (2.0 * step);
  return r;
}

}  // namespace thermorph
