#include "models/convection.hpp"

#include <algorithm>
#include <array>
#include <cmath>
#include <stdexcept>
#include <vector>

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

// ---- film-temperature tables ----------------------------------------------------------

}  // namespace

double filmTableStep(Medium medium) {
  switch (medium) {
    case Medium::Air: return 0.25;
    case Medium::SeaWater: return 0.25;
    case Medium::FreshWater: return 0.1;
  }
  return 1.0;
}

namespace {

//! Columns of a film-temperature table: the property groups of the correlations, functions of temperature only.
enum FilmColumn : std::size_t {
  kColConductivity,  //!< k [W/(m K)]
  kColInverseNu,     //!< 1/nu [s/m2]
  kColPrandtl,       //!< Pr [-]
  kColRaPerGbL3,     //!< Pr/nu^2 [s2/m4]: Ra = g b L^3 Pr/nu^2
  kColDensity,       //!< rho [kg/m3] (the buoyancy of water)
  kColChuCylinder,   //!< 0.387 (Pr/nu^2)^(1/6) / [1 + (0.559/Pr)^(9/16)]^(8/27), Churchill & Chu (1975) cylinder
  kColChuPlate,      //!< the same with 0.492, Churchill & Chu (1975) vertical plate
  kColBernstein,     //!< 0.62 nu^(-1/2) Pr^(1/3) [1 + (0.4/Pr)^(2/3)]^(-1/4), Churchill & Bernstein (1977)
  kColPlateLaminar,  //!< 0.664 nu^(-1/2) Pr^(1/3), Incropera eq. 7.30
  kColCbrtPrandtl,   //!< Pr^(1/3), Incropera eq. 7.38
  kFilmColumns
};

//! Where a temperature lies in a film table: the interval and the cubic Hermite weights of the values and slopes
//! (value weights w, slope weights times the interval; their temperature derivatives dw).
struct FilmPoint {
  std::size_t j = 0;
  double w[4] = {}, dw[4] = {};
  double scale = 0.0;  //!< d(film)/dT_s, times which the column's temperature slope gives its Dual derivative
};

//! Cubic Hermite tables of the columns in temperature over a medium's property range: a node on every piece of the
//! property fits (propertyPieces), each piece cut into equal intervals of at most filmTableStep(medium); at every node the
//! columns' values and exact slopes (the fits differentiated with dual numbers). Between two pieces' nodes the
//! columns are smooth, so the interpolation error is that of a cubic Hermite interpolant of a smooth function,
//! O(step^4) (measured: tests/test_convection.cpp "Tabulated convection").
class FilmTable {
 public:
  FilmTable(Medium medium, double salinity) {
    const std::vector<double> pieces = propertyPieces(medium);
    for (std::size_t p = 0; p + 1 < pieces.size(); ++p) {
      const double a = pieces[p], b = pieces[p + 1];
      const auto cuts = static_cast<std::size_t>(std::ceil((b - a) / filmTableStep(medium) - 1e-9));
      for (std::size_t i = 0; i < cuts; ++i) x_.push_back(a + (b - a) * static_cast<double>(i) / static_cast<double>(cuts));
    }
    x_.push_back(pieces.back());
    for (std::size_t i = 0; i + 1 < x_.size(); ++i) width_.push_back(x_[i + 1] - x_[i]);
    guessScale_ = static_cast<double>(x_.size() - 1) / (x_.back() - x_.front());
    for (const double x : x_) {
      const FluidPropertiesDual p = fluidPropertiesDual(medium, Dual{x, 1.0}, salinity);
      const Dual nu = p.kinematicViscosity();
      const Dual raPerGbL3 = p.prandtl / (nu * nu);
      auto chu = [&](double k) {
        return 0.387 * pow(raPerGbL3, 1.0 / 6.0) / pow(1.0 + pow(k / p.prandtl, 9.0 / 16.0), 8.0 / 27.0);
      };
      std::array<Dual, kFilmColumns> c{};
      c[kColConductivity] = p.conductivity;
      c[kColInverseNu] = 1.0 / nu;
      c[kColPrandtl] = p.prandtl;
      c[kColRaPerGbL3] = raPerGbL3;
      c[kColDensity] = p.density;
      c[kColChuCylinder] = chu(0.559);
      c[kColChuPlate] = chu(0.492);
      c[kColBernstein] =
          0.62 / sqrt(nu) * pow(p.prandtl, 1.0 / 3.0) * pow(1.0 + pow(0.4 / p.prandtl, 2.0 / 3.0), -0.25);
      c[kColPlateLaminar] = 0.664 / sqrt(nu) * cbrt(p.prandtl);
      c[kColCbrtPrandtl] = cbrt(p.prandtl);
      std::array<double, 2 * kFilmColumns> node{};
      for (std::size_t k = 0; k < kFilmColumns; ++k) {
        node[2 * k] = c[k].v;
        node[2 * k + 1] = c[k].d;
      }
      nodes_.push_back(node);
    }
  }
  double min() const { return x_.front(); }
  double max() const { return x_.back(); }

  //! The weights at temperature t (min() <= t.v <= max()).
  FilmPoint locate(Dual t) const {
    const std::size_t last = x_.size() - 2;
    std::size_t j = std::min(static_cast<std::size_t>(std::max(0.0, (t.v - x_.front()) * guessScale_)), last);
    while (j > 0 && t.v < x_[j]) --j;
    while (j < last && t.v > x_[j + 1]) ++j;
    FilmPoint p;
    p.j = j;
    const double width = width_[j], s = (t.v - x_[j]) / width, s2 = s * s, r = 1.0 - s;
    p.w[0] = (1.0 + 2.0 * s) * r * r;
    p.w[1] = s * r * r * width;
    p.w[2] = s2 * (3.0 - 2.0 * s);
    p.w[3] = s2 * (s - 1.0) * width;
    p.dw[0] = 6.0 * s * (s - 1.0) / width;
    p.dw[1] = (3.0 * s - 1.0) * (s - 1.0);
    p.dw[2] = -p.dw[0];
    p.dw[3] = s * (3.0 * s - 2.0);
    p.scale = t.d;
    return p;
  }
  //! A column's value at the located temperature.
  double value(const FilmPoint& p, FilmColumn k) const {
    const auto& a = nodes_[p.j];
    const auto& b = nodes_[p.j + 1];
    return p.w[0] * a[2 * k] + p.w[1] * a[2 * k + 1] + p.w[2] * b[2 * k] + p.w[3] * b[2 * k + 1];
  }
  //! A column's value and its derivative with respect to the input of the located temperature's Dual.
  Dual column(const FilmPoint& p, FilmColumn k) const {
    const auto& a = nodes_[p.j];
    const auto& b = nodes_[p.j + 1];
    const double slope = p.dw[0] * a[2 * k] + p.dw[1] * a[2 * k + 1] + p.dw[2] * b[2 * k] + p.dw[3] * b[2 * k + 1];
    return {value(p, k), slope * p.scale};
  }

 private:
  std::vector<double> x_, width_;
  std::vector<std::array<double, 2 * kFilmColumns>> nodes_;
  double guessScale_ = 0.0;
};

//! The table of a medium, built on first use (thread-safe static initialisation); nullptr for sea water of another
//! salinity than the default (ConvectionInput::salinity).
const FilmTable* filmTable(Medium medium, double salinity) {
  switch (medium) {
    case Medium::Air: {
      static const FilmTable air(Medium::Air, 0.0);
      return &air;
    }
    case Medium::FreshWater: {
      static const FilmTable fresh(Medium::FreshWater, 0.0);
      return &fresh;
    }
    case Medium::SeaWater: {
      if (salinity != ConvectionInput{}.salinity) return nullptr;
      static const FilmTable sea(Medium::SeaWater, ConvectionInput{}.salinity);
      return &sea;
    }
  }
  return nullptr;
}

//! convectionCoefficient's h and dh/dT_s for a cylinder or plate with the standard correlations, the property groups
//! from `table` at the film temperature (inside the table's range). The same formulas as `evaluate`, regrouped:
//! Churchill & Chu's Ra^(1/6) / [1 + (c/Pr)^(9/16)]^(8/27) = (g b L^3)^(1/6) times the column, Churchill &
//! Bernstein's 0.62 Re^(1/2) Pr^(1/3) [1 + (0.4/Pr)^(2/3)]^(-1/4) = (U D)^(1/2) times the column.
ConvectionResult evaluateTabulated(const ConvectionInput& in, const FilmTable& table) {
  using D = Dual;
  ConvectionResult r;
  auto check = [&](const ValidityRange& range, double value) {
    if (checkValidity(range, value)) r.outsideValidity = true;
  };
  const D ts{in.surfaceTemperature, 1.0};
  const double tinf = in.fluidTemperature;
  const FilmPoint at = table.locate(0.5 * (ts + tinf));
  const D conductivity = table.column(at, kColConductivity);
  const double prandtl = table.value(at, kColPrandtl);

  D b = 0.0;
  if (in.medium == Medium::Air) {
    b = (ts - tinf) / (0.5 * (ts + tinf));  // beta = 1/T_film (ideal gas)
  } else {
    b = (mediumDensity(in.medium, tinf, in.salinity) - mediumDensityDual(in.medium, ts, in.salinity)) /
        table.column(at, kColDensity);
  }
  b = sqrt(b * b + kBuoyancyFloorSquared);

  const double freeLength = freeConvectionLength(in);
  const double freeLengthCubed = in.freeLengthCubed > 0.0 ? in.freeLengthCubed : std::pow(freeLength, 3);
  const D buoyancy = kStandardGravity * b * freeLengthCubed;  // g b L^3 = Gr nu^2
  r.rayleigh = buoyancy.v * table.value(at, kColRaPerGbL3);
  r.grashof = r.rayleigh / prandtl;

  D nuFree = 0.0;
  if (in.geometry == Geometry::Cylinder || in.verticalPlate) {
    const bool cylinder = in.geometry == Geometry::Cylinder;
    if (cylinder) check(kChurchillChuCylinderRa, r.rayleigh);
    const D root = (cylinder ? 0.60 : 0.825) +
                   table.column(at, cylinder ? kColChuCylinder : kColChuPlate) * powConst(buoyancy, 1.0 / 6.0);
    nuFree = root * root;
  } else {
    check(kHorizontalPlateUpperRa, r.rayleigh);
    check(kHorizontalPlateLowerRa, r.rayleigh);
    const D rayleigh = buoyancy * table.column(at, kColRaPerGbL3);
    nuFree = 0.5 * (horizontalPlateFreeUpper(rayleigh) + horizontalPlateFreeLower(rayleigh));
  }
  const D hFree = nuFree * conductivity / freeLength;

  D h = hFree;
  const double speed = std::abs(in.speed);
  if (speed != 0.0) {
    const D reynolds = speed * in.length * table.column(at, kColInverseNu);
    r.reynolds = reynolds.v;
    const double rootUL = std::sqrt(speed * in.length);
    D nuForced = 0.0;
    if (in.geometry == Geometry::Cylinder) {
      check(kChurchillBernsteinRePr, r.reynolds * prandtl);
      nuForced = 0.3 + table.column(at, kColBernstein) * rootUL *
                           powConst(1.0 + powConst(reynolds / 282000.0, 5.0 / 8.0), 4.0 / 5.0);
    } else {
      check(kFlatPlateRe, r.reynolds);
      check(kFlatPlatePr, prandtl);
      nuForced = table.column(at, kColPlateLaminar) * rootUL;  // 0.664 Re^(1/2) Pr^(1/3)
      // The mixed laminar-turbulent form (0.037 Re^(4/5) - 871) Pr^(1/3) lies below the laminar one up to Re 5e5
      // (their difference has one minimum, at Re 3170, and is -871 at 0 and -344 at 3e5).
      if (r.reynolds > 3e5)
        nuForced = maxOf(nuForced, (0.037 * pow(reynolds, 0.8) - 871.0) * table.column(at, kColCbrtPrandtl));
    }
    h = mixed(nuForced * conductivity / in.length, hFree, 3.0);
  }
  r.h = h.v;
  r.dh_dTs = h.d;
  r.nusselt = r.h * in.length / conductivity.v;
  return r;
}

void checkInput(const ConvectionInput& input) {
  if (!(input.length > 0.0)) throw std::invalid_argument("convectionCoefficient: length must be positive");
  if (input.choice == CorrelationChoice::Mitchell && !(input.volumeLength > 0.0))
    throw std::invalid_argument("convectionCoefficient: volumeLength must be positive for Mitchell (1976)");
  if (!(input.surfaceTemperature > 0.0) || !(input.fluidTemperature > 0.0))
    throw std::invalid_argument("convectionCoefficient: temperatures must be positive kelvin");
}

}  // namespace

ConvectionResult convectionCoefficient(const ConvectionInput& input) {
  checkInput(input);
  return evaluate(input);
}

ConvectionResult convectionCoefficientTabulated(const ConvectionInput& input) {
  checkInput(input);
  if (input.choice == CorrelationChoice::Standard && input.geometry != Geometry::Sphere) {
    if (const FilmTable* table = filmTable(input.medium, input.salinity)) {
      const double film = 0.5 * (input.surfaceTemperature + input.fluidTemperature);
      if (film >= table->min() && film <= table->max()) return evaluateTabulated(input, *table);
    }
  }
  return evaluate(input);
}

}  // namespace thermorph
