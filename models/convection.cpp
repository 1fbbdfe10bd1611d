#include "models/convection.hpp"

#include <algorithm>
#include <cmath>
#include <stdexcept>

namespace thermorph {

double freeConvectionLength(const ConvectionInput& in) {
  if (in.geometry == Geometry::Plate && !in.verticalPlate) {
    const double width = in.width > 0.0 ? in.width : in.length;
    return in.length * width / (2.0 * (in.length + width));  // area / perimeter
  }
  return in.length;
}

// ---- correlations ---------------------------------------------------------------------
// Each correlation is written once as a template on the number type: double for the public functions below,
// Dual (models/dual.hpp) inside the evaluator for h and dh/dT_s in one pass.

namespace {

// Powers with constant exponents, cheaper than std::pow and equal to it to a few units in the last place (the
// evaluator calls them about ten times per face and right-hand side): x^p as exp(p ln x) (glibc's exp and log
// take about a third of pow's time each), x^(1/4) as two square roots, x^3 by multiplication. Non-positive
// arguments keep std::pow (and the Dual's pow with its zero slope at 0).
double logOf(double x) { return std::log(x); }
Dual logOf(Dual x) { return {std::log(x.v), x.d / x.v}; }
template <class T>
T powConst(T x, double p) {
  using std::exp, std::pow;
  if (!(valueOf(x) > 0.0)) return pow(x, p);
  return exp(p * logOf(x));
}
template <class T>
T quarticRoot(T x) {
  using std::sqrt;
  return sqrt(sqrt(x));
}

// Products and quotients of powers as one exp of the sum of the logarithms, ln Pr shared between the powers of Pr:
// two to three fewer exp and log per evaluation, equal to the separate powers to a few units in the last place.
template <class T>
T cylinderCrossFlow(T reynolds, T prandtl) {
  using std::exp, std::sqrt;
  if (!(valueOf(reynolds) > 0.0) || !(valueOf(prandtl) > 0.0)) {
    const T laminar =
        0.62 * sqrt(reynolds) * powConst(prandtl, 1.0 / 3.0) / quarticRoot(1.0 + powConst(0.4 / prandtl, 2.0 / 3.0));
    return 0.3 + laminar * powConst(1.0 + powConst(reynolds / 282000.0, 5.0 / 8.0), 4.0 / 5.0);
  }
  const T lnPr = logOf(prandtl);
  const T x = exp((2.0 / 3.0) * (std::log(0.4) - lnPr));  // (0.4/Pr)^(2/3)
  const T z = powConst(reynolds / 282000.0, 5.0 / 8.0);
  // 0.62 Re^(1/2) Pr^(1/3) (1 + x)^(-1/4) (1 + z)^(4/5)
  return 0.3 + 0.62 * sqrt(reynolds) / quarticRoot(1.0 + x) * exp(lnPr / 3.0 + 0.8 * logOf(1.0 + z));
}

template <class T>
T sphereForced(T reynolds, T prandtl, T viscosityRatio) {
  using std::pow, std::sqrt;
  return 2.0 + (0.4 * sqrt(reynolds) + 0.06 * powConst(reynolds, 2.0 / 3.0)) * powConst(prandtl, 0.4) *
                   quarticRoot(viscosityRatio);
}

template <class T>
T flatPlateForced(T reynolds, T prandtl) {
  using std::cbrt, std::pow, std::sqrt;
  const T laminar = 0.664 * sqrt(reynolds);
  const T mixed = 0.037 * pow(reynolds, 0.8) - 871.0;
  return maxOf(laminar, mixed) * cbrt(prandtl);
}

template <class T>
T mitchell(T reynolds, double a, double b) {
  using std::pow;
  return a * powConst(reynolds, b);
}

//! Churchill and Chu's (c + 0.387 Ra^(1/6) / (1 + (k/Pr)^(9/16))^(8/27))^2, the quotient as one exp.
template <class T>
T churchillChu(T rayleigh, T prandtl, double c, double k) {
  using std::exp;
  const T denominatorBase = 1.0 + powConst(k / prandtl, 9.0 / 16.0);
  const T root = valueOf(rayleigh) > 0.0
                     ? c + 0.387 * exp(logOf(rayleigh) / 6.0 - (8.0 / 27.0) * logOf(denominatorBase))
                     : c + 0.387 * powConst(rayleigh, 1.0 / 6.0) / powConst(denominatorBase, 8.0 / 27.0);
  return root * root;
}

template <class T>
T horizontalCylinderFree(T rayleigh, T prandtl) {
  return churchillChu(rayleigh, prandtl, 0.60, 0.559);
}

template <class T>
T sphereFree(T rayleigh, T prandtl) {
  using std::pow;
  return 2.0 + 0.589 * quarticRoot(rayleigh) / powConst(1.0 + powConst(0.469 / prandtl, 9.0 / 16.0), 4.0 / 9.0);
}

template <class T>
T verticalPlateFree(T rayleigh, T prandtl) {
  return churchillChu(rayleigh, prandtl, 0.825, 0.492);
}

template <class T>
T horizontalPlateFreeUpper(T rayleigh) {
  using std::cbrt, std::pow;
  return maxOf<T>(0.54 * quarticRoot(rayleigh), 0.15 * cbrt(rayleigh));
}

template <class T>
T horizontalPlateFreeLower(T rayleigh) {
  using std::pow;
  return 0.52 * powConst(rayleigh, 0.2);
}

template <class T>
T mixed(T nusseltForced, T nusseltFree, double exponent) {
  using std::pow;
  if (exponent == 3.0) {  // the exponent of every caller (Churchill 1977): cubes by multiplication
    const T sum = nusseltForced * nusseltForced * nusseltForced + nusseltFree * nusseltFree * nusseltFree;
    return powConst(sum, 1.0 / 3.0);
  }
  return pow(pow(nusseltForced, exponent) + pow(nusseltFree, exponent), 1.0 / exponent);
}

}  // namespace

double nusseltCylinderCrossFlow(double reynolds, double prandtl) { return cylinderCrossFlow(reynolds, prandtl); }

double nusseltSphereForced(double reynolds, double prandtl, double viscosityRatio) {
  return sphereForced(reynolds, prandtl, viscosityRatio);
}

double nusseltFlatPlateForced(double reynolds, double prandtl) { return flatPlateForced(reynolds, prandtl); }

double nusseltMitchell(double reynolds, double a, double b) { return mitchell(reynolds, a, b); }

double nusseltHorizontalCylinderFree(double rayleigh, double prandtl) {
  return horizontalCylinderFree(rayleigh, prandtl);
}

double nusseltSphereFree(double rayleigh, double prandtl) { return sphereFree(rayleigh, prandtl); }

double nusseltVerticalPlateFree(double rayleigh, double prandtl) { return verticalPlateFree(rayleigh, prandtl); }

double nusseltHorizontalPlateFreeUpper(double rayleigh) { return horizontalPlateFreeUpper(rayleigh); }

double nusseltHorizontalPlateFreeLower(double rayleigh) { return horizontalPlateFreeLower(rayleigh); }

double mixedNusselt(double nusseltForced, double nusseltFree, double exponent) {
  return mixed(nusseltForced, nusseltFree, exponent);
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

//! h and dimensionless groups at the surface temperature, and dh/dT_s exactly: the surface temperature is a Dual
//! with derivative 1 and every property and correlation is differentiated with it (forward mode).
ConvectionResult evaluate(const ConvectionInput& in) {
  using D = Dual;
  ConvectionResult r;
  auto check = [&](const ValidityRange& range, double value) {
    if (checkValidity(range, value)) r.outsideValidity = true;
  };
  const D ts{in.surfaceTemperature, 1.0};
  const double tinf = in.fluidTemperature;
  const D filmTemperature = 0.5 * (ts + tinf);
  const FluidPropertiesDual film = fluidPropertiesDual(in.medium, filmTemperature, in.salinity);
  const D nuFilm = film.kinematicViscosity();
  if (film.outsideValidity) r.outsideValidity = true;

  // Free convection: relative density difference b, floored smoothly.
  D b = 0.0;
  if (in.medium == Medium::Air) {
    b = (ts - tinf) / filmTemperature;  // beta = 1/T_film (ideal gas)
  } else {
    b = (mediumDensity(in.medium, tinf, in.salinity) - mediumDensityDual(in.medium, ts, in.salinity)) / film.density;
  }
  b = sqrt(b * b + kBuoyancyFloorSquared);

  const double freeLength = freeConvectionLength(in);
  const double freeLengthCubed = in.freeLengthCubed > 0.0 ? in.freeLengthCubed : std::pow(freeLength, 3);
  const D grashof = kStandardGravity * b * freeLengthCubed / (nuFilm * nuFilm);
  const D rayleigh = grashof * film.prandtl;
  r.grashof = grashof.v;
  r.rayleigh = rayleigh.v;

  D nuFree = 0.0;
  switch (in.geometry) {
    case Geometry::Sphere:
      check(kChurchillSphereRa, r.rayleigh);
      check(kChurchillSpherePr, film.prandtl.v);
      nuFree = sphereFree(rayleigh, film.prandtl);
      break;
    case Geometry::Cylinder:
      check(kChurchillChuCylinderRa, r.rayleigh);
      nuFree = horizontalCylinderFree(rayleigh, film.prandtl);
      break;
    case Geometry::Plate:
      if (in.verticalPlate) {
        nuFree = verticalPlateFree(rayleigh, film.prandtl);
      } else {
        check(kHorizontalPlateUpperRa, r.rayleigh);
        check(kHorizontalPlateLowerRa, r.rayleigh);
        nuFree = 0.5 * (horizontalPlateFreeUpper(rayleigh) + horizontalPlateFreeLower(rayleigh));
      }
      break;
  }
  const D hFree = nuFree * film.conductivity / freeLength;

  D h = 0.0;
  const double speed = std::abs(in.speed);
  if (speed == 0.0) {
    h = hFree;
  } else if (in.choice == CorrelationChoice::Mitchell) {
    const MitchellShape shape = mitchellConstants(in.geometry);
    if (!shape.exact) check(kMitchellShape, static_cast<double>(in.geometry));
    const D reynolds = speed * in.volumeLength / nuFilm;
    r.reynolds = reynolds.v;
    const D hForced = mitchell(reynolds, shape.constants.a, shape.constants.b) * film.conductivity / in.volumeLength;
    h = mixed(hForced, hFree, 3.0);
  } else {
    switch (in.geometry) {
      case Geometry::Cylinder: {
        const D reynolds = speed * in.length / nuFilm;
        r.reynolds = reynolds.v;
        check(kChurchillBernsteinRePr, r.reynolds * film.prandtl.v);
        const D hForced = cylinderCrossFlow(reynolds, film.prandtl) * film.conductivity / in.length;
        h = mixed(hForced, hFree, 3.0);
        break;
      }
      case Geometry::Plate: {
        const D reynolds = speed * in.length / nuFilm;
        r.reynolds = reynolds.v;
        check(kFlatPlateRe, r.reynolds);
        check(kFlatPlatePr, film.prandtl.v);
        const D hForced = flatPlateForced(reynolds, film.prandtl) * film.conductivity / in.length;
        h = mixed(hForced, hFree, 3.0);
        break;
      }
      case Geometry::Sphere: {
        // Whitaker: free-stream properties, mu_s at the surface.
        const FluidProperties stream = fluidProperties(in.medium, tinf, in.salinity);
        const FluidPropertiesDual surface = fluidPropertiesDual(in.medium, ts, in.salinity);
        if (stream.outsideValidity || surface.outsideValidity) r.outsideValidity = true;
        r.reynolds = speed * in.length / stream.kinematicViscosity();
        const D viscosityRatio = stream.viscosity / surface.viscosity;
        check(kWhitakerRe, r.reynolds);
        check(kWhitakerPr, stream.prandtl);
        if (in.medium != Medium::Air) check(kWhitakerViscosityRatio, viscosityRatio.v);
        const D nuForced = sphereForced<D>(r.reynolds, stream.prandtl, viscosityRatio);
        const double hConductionForced = 2.0 * stream.conductivity / in.length;
        const D hConductionFree = 2.0 * film.conductivity / in.length;
        const D hForced = nuForced * stream.conductivity / in.length;
        h = hConductionFree + mixed(hForced - hConductionForced, hFree - hConductionFree, 3.0);
        break;
      }
    }
  }
  r.h = h.v;
  r.dh_dTs = h.d;
  const double nusseltLength =
      (in.choice == CorrelationChoice::Mitchell && speed > 0.0) ? in.volumeLength : in.length;
  r.nusselt = r.h * nusseltLength / film.conductivity.v;
  return r;
}

}  // namespace

ConvectionResult convectionCoefficient(const ConvectionInput& input) {
  if (!(input.length > 0.0)) throw std::invalid_argument("convectionCoefficient: length must be positive");
  if (input.choice == CorrelationChoice::Mitchell && !(input.volumeLength > 0.0))
    throw std::invalid_argument("convectionCoefficient: volumeLength must be positive for Mitchell (1976)");
  if (!(input.surfaceTemperature > 0.0) || !(input.fluidTemperature > 0.0))
    throw std::invalid_argument("convectionCoefficient: temperatures must be positive kelvin");

  return evaluate(input);
}

}  // namespace thermorph
