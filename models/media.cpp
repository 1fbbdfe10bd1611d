#include "models/media.hpp"

#include <algorithm>
#include <array>
#include <atomic>
#include <cmath>
#include <cstddef>
#include <mutex>
#include <set>
#include <span>
#include <stdexcept>
#include <utility>

#include <fmt/format.h>

namespace thermorph {

// ---- validity warnings ------------------------------------------------------------

namespace {
// One log per thread: a run (load, build, integrate, collect) happens on one thread, and EnvironmentModel resets
// the log when it is built, so each run reports its own range violations once, also when a sweep runs several
// at a time on other threads (a process-wide log gave a warning to whichever run collected first, once per
// process).
struct WarningLog {
  std::vector<std::pair<std::string, std::string>> issued;  // (correlation, parameter) reported since the reset
  std::vector<std::string> pending;
  bool logging = true;  // ValidityLogScope
};
WarningLog& warningLog() {
  thread_local WarningLog log;
  return log;
}
}  // namespace

bool recordOutsideValidity(const ValidityRange& range, double value) {
  WarningLog& log = warningLog();
  if (!log.logging) return true;
  for (const auto& [correlation, parameter] : log.issued)
    if (correlation == range.correlation && parameter == range.parameter) return true;
  log.issued.emplace_back(range.correlation, range.parameter);
  const std::string unit = range.unit.empty() ? std::string() : fmt::format(" {}", range.unit);
  log.pending.push_back(fmt::format("{}: {} = {:.6g}{} outside the validity range [{:.6g}, {:.6g}]{}",
                                    range.correlation, range.parameter, value, unit, range.min, range.max, unit));
  return true;
}

std::vector<std::string> takeValidityWarnings() {
  std::vector<std::string> out;
  out.swap(warningLog().pending);
  return out;
}

ValidityLogScope::ValidityLogScope(bool logging) : previous_(warningLog().logging) { warningLog().logging = logging; }
ValidityLogScope::~ValidityLogScope() { warningLog().logging = previous_; }
bool validityLogging() { return warningLog().logging; }

ValidityLogIsolation::ValidityLogIsolation() {
  WarningLog& log = warningLog();
  issued_.swap(log.issued);
  pending_.swap(log.pending);
  logging_ = log.logging;
}
ValidityLogIsolation::~ValidityLogIsolation() {
  WarningLog& log = warningLog();
  log.issued.swap(issued_);
  log.pending.swap(pending_);
  log.logging = logging_;
}

void resetValidityWarnings() {
  WarningLog& log = warningLog();
  log.issued.clear();
  log.pending.clear();
}

// ---- table interpolation --------------------------------------------------------

namespace {

//! A table for C1 cubic Hermite interpolation: nodes x (strictly increasing, at least 3), values y and nodal
//! slopes, those of the parabola through each node and its neighbours (one-sided parabola at the ends),
//! computed once.
template <std::size_t N>
struct HermiteTable {
  std::array<double, N> x, y, slope;
  constexpr HermiteTable(const std::array<double, N>& xs, const std::array<double, N>& ys) : x(xs), y(ys), slope{} {
    static_assert(N >= 3);
    auto secant = [&](std::size_t j) { return (y[j + 1] - y[j]) / (x[j + 1] - x[j]); };
    for (std::size_t j = 0; j < N; ++j) {
      if (j == 0) {
        const double h0 = x[1] - x[0], h1 = x[2] - x[1];
        slope[j] = secant(0) + (secant(0) - secant(1)) * h0 / (h0 + h1);
      } else if (j == N - 1) {
        const double h0 = x[N - 2] - x[N - 3], h1 = x[N - 1] - x[N - 2];
        slope[j] = secant(N - 2) + (secant(N - 2) - secant(N - 3)) * h1 / (h0 + h1);
      } else {
        const double hl = x[j] - x[j - 1], hr = x[j + 1] - x[j];
        slope[j] = (secant(j - 1) * hr + secant(j) * hl) / (hl + hr);
      }
    }
  }
};

//! Where xq lies in the nodes x: interval [x_i, x_{i+1}], the local coordinate t in [0, 1], and the cubic Hermite
//! basis at t (value and slope weights, the slope-node ones times h), computed once for every table on the same
//! nodes: each weight is the same expression as when every interpolation computed it, so the values are the same.
template <std::size_t N>
struct HermitePoint {
  std::size_t i;
  double h, t;
  double v0, v1, v2, v3;  //!< value = v0 y_i + v1 s_i + v2 y_{i+1} + v3 s_{i+1}
  double d0, d1, d2, d3;  //!< slope = (d0 y_i + d1 s_i + d2 y_{i+1} + d3 s_{i+1}) / h
};
template <std::size_t N>
HermitePoint<N> hermiteLocate(const std::array<double, N>& x, double xq) {
  std::size_t i = static_cast<std::size_t>(std::upper_bound(x.begin(), x.end(), xq) - x.begin());
  i = std::clamp<std::size_t>(i, 1, N - 1) - 1;
  const double h = x[i + 1] - x[i];
  const double t = (xq - x[i]) / h, t2 = t * t, t3 = t2 * t;
  return {i,
          h,
          t,
          2 * t3 - 3 * t2 + 1,
          (t3 - 2 * t2 + t) * h,
          -2 * t3 + 3 * t2,
          (t3 - t2) * h,
          6 * t2 - 6 * t,
          (3 * t2 - 4 * t + 1) * h,
          -6 * t2 + 6 * t,
          (3 * t2 - 2 * t) * h};
}

//! Value of the Hermite interpolant of `table` at the located point [units of y]; with a Dual temperature the
//! derivative too (the interpolant's exact slope times the temperature's derivative).
template <std::size_t N>
double hermiteValue(const HermiteTable<N>& table, const HermitePoint<N>& p) {
  const std::size_t i = p.i;
  return p.v0 * table.y[i] + p.v1 * table.slope[i] + p.v2 * table.y[i + 1] + p.v3 * table.slope[i + 1];
}
template <std::size_t N>
double hermiteSlope(const HermiteTable<N>& table, const HermitePoint<N>& p) {
  const std::size_t i = p.i;
  return (p.d0 * table.y[i] + p.d1 * table.slope[i] + p.d2 * table.y[i + 1] + p.d3 * table.slope[i + 1]) / p.h;
}
template <std::size_t N>
double hermite(const HermiteTable<N>& table, const HermitePoint<N>& p, double) {
  return hermiteValue(table, p);
}
template <std::size_t N>
Dual hermite(const HermiteTable<N>& table, const HermitePoint<N>& p, Dual x) {
  return {hermiteValue(table, p), hermiteSlope(table, p) * x.d};
}

//! Clamp `value` into `range`, recording a warning and setting `clamped` when it was outside.
double clampToRange(const ValidityRange& range, double value, bool& clamped) {
  if (checkValidity(range, value)) {
    clamped = true;
    return std::isnan(value) ? range.min : std::clamp(value, range.min, range.max);
  }
  return value;
}
//! As above; a clamped value is constant (derivative 0).
Dual clampToRange(const ValidityRange& range, Dual value, bool& clamped) {
  if (checkValidity(range, value.v)) {
    clamped = true;
    return {std::isnan(value.v) ? range.min : std::clamp(value.v, range.min, range.max), 0.0};
  }
  return value;
}

// Incropera, DeWitt, Bergman & Lavine, Fundamentals of Heat and Mass Transfer, 6th ed.,
// Table A.4, dry air at atmospheric pressure. Rows 250, 300, 350 K (nu, k, Pr) and rho, cp, mu
// at 300 K as checked (docs/references.md); the rest from memory (consistent with
// nu = mu/rho and Pr = mu cp/k to 0.1 %, and with Sutherland's law to 0.6 %).
// The densities equal the ideal gas at 1.000e5 Pa.
constexpr std::array<double, 5> kAirT{200, 250, 300, 350, 400};                          // K
constexpr std::array<double, 5> kAirRho{1.7458, 1.3947, 1.1614, 0.9950, 0.8711};         // kg/m3
constexpr std::array<double, 5> kAirCp{1007, 1006, 1007, 1009, 1014};                    // J/(kg K)
constexpr std::array<double, 5> kAirMu{132.5e-7, 159.6e-7, 184.6e-7, 208.2e-7, 230.1e-7};  // Pa s
constexpr std::array<double, 5> kAirK{0.0181, 0.0223, 0.0263, 0.0300, 0.0338};           // W/(m K)

// Incropera et al. 6th ed., Table A.6, saturated liquid water. Rows 280 and 300 K (cp, mu, k)
// and 310 K (cp, mu, k) as checked (docs/references.md); other rows from memory.
constexpr std::array<double, 22> kWaterT{273.15, 275, 280, 285, 290, 295, 300, 305, 310, 315, 320,
                                         325,    330, 335, 340, 345, 350, 355, 360, 365, 370, 373.15};  // K
constexpr std::array<double, 22> kWaterCp{4217, 4211, 4198, 4189, 4184, 4181, 4179, 4178, 4178, 4179, 4180,
                                          4182, 4184, 4186, 4188, 4191, 4195, 4199, 4203, 4209, 4214, 4217};
constexpr std::array<double, 22> kWaterMu{1750e-6, 1652e-6, 1422e-6, 1225e-6, 1080e-6, 959e-6, 855e-6, 769e-6,
                                          695e-6,  631e-6,  577e-6,  528e-6,  489e-6,  453e-6, 420e-6, 389e-6,
                                          365e-6,  343e-6,  324e-6,  306e-6,  289e-6,  279e-6};
constexpr std::array<double, 22> kWaterK{0.569, 0.574, 0.582, 0.590, 0.598, 0.606, 0.613, 0.620,
                                         0.628, 0.634, 0.640, 0.645, 0.650, 0.656, 0.660, 0.664,
                                         0.668, 0.671, 0.674, 0.677, 0.679, 0.680};

//! Fresh-water density and its temperature derivative, Kell (1975), J. Chem. Eng. Data 20:97:
//! rho = (999.83952 + 16.945176 t - 7.9870401e-3 t^2 - 46.170461e-6 t^3 + 105.56302e-9 t^4
//!        - 280.54253e-12 t^5) / (1 + 16.879850e-3 t), t in degC, 0-150 degC.
struct DensityAndSlope {
  double rho;   // kg/m3
  double drho;  // kg/(m3 K)
};
DensityAndSlope kellDensity(double temperatureK) {
  const double t = temperatureK - kZeroCelsius;
  constexpr double c0 = 999.83952, c1 = 16.945176, c2 = -7.9870401e-3, c3 = -46.170461e-6, c4 = 105.56302e-9,
                   c5 = -280.54253e-12;
  const double num = c0 + t * (c1 + t * (c2 + t * (c3 + t * (c4 + t * c5))));
  const double dnum = c1 + t * (2 * c2 + t * (3 * c3 + t * (4 * c4 + t * 5 * c5)));
  const double den = 1.0 + 16.879850e-3 * t;
  const double dden = 16.879850e-3;
  return {num / den, (dnum * den - num * dden) / (den * den)};
}

//! Sea-water density, Sharqawy et al. (2010) eq. 8 (after Isdale & Morris 1972), t in degC,
//! S in kg/kg, 0-180 degC, 0-0.16 kg/kg, +-0.1 %:
//! rho_w = 999.9 + 2.034e-2 t - 6.162e-3 t^2 + 2.261e-5 t^3 - 4.657e-8 t^4,
//! rho = rho_w + S (802.0 - 2.001 t + 1.677e-2 t^2 - 3.060e-5 t^3 - 1.613e-5 S t^2).
DensityAndSlope sharqawyDensity(double temperatureK, double salinity) {
  const double t = temperatureK - kZeroCelsius, s = salinity;
  const double rhoW = 999.9 + t * (2.034e-2 + t * (-6.162e-3 + t * (2.261e-5 + t * -4.657e-8)));
  const double drhoW = 2.034e-2 + t * (2 * -6.162e-3 + t * (3 * 2.261e-5 + t * 4 * -4.657e-8));
  const double salt = s * (802.0 + t * (-2.001 + t * (1.677e-2 + t * -3.060e-5)) - 1.613e-5 * s * t * t);
  const double dsalt = s * (-2.001 + t * (2 * 1.677e-2 + t * 3 * -3.060e-5) - 2 * 1.613e-5 * s * t);
  return {rhoW + salt, drhoW + dsalt};
}

const HermiteTable<5> kAirRhoTable{kAirT, kAirRho}, kAirCpTable{kAirT, kAirCp}, kAirMuTable{kAirT, kAirMu},
    kAirKTable{kAirT, kAirK};
const HermiteTable<22> kWaterCpTable{kWaterT, kWaterCp}, kWaterMuTable{kWaterT, kWaterMu},
    kWaterKTable{kWaterT, kWaterK};

//! Fluid properties with values of type T (double, or Dual for values and temperature derivatives).
template <class T>
struct Properties {
  T density{}, viscosity{}, conductivity{}, specificHeat{}, expansion{};
  bool outsideValidity = false;
};

//! Density [kg/m3] of the fit `fit` at t (double or Dual); with a Dual the fit's own slope is the derivative.
template <class Fit>
double densityAt(Fit fit, double t) {
  return fit(t).rho;
}
template <class Fit>
Dual densityAt(Fit fit, Dual t) {
  const DensityAndSlope d = fit(t.v);
  return {d.rho, d.drho * t.d};
}

template <class T>
Properties<T> airProperties(T temperatureK) {
  Properties<T> p;
  const T t = clampToRange(kAirTableRange, temperatureK, p.outsideValidity);
  const auto at = hermiteLocate(kAirT, valueOf(t));
  p.density = hermite(kAirRhoTable, at, t);
  p.specificHeat = hermite(kAirCpTable, at, t);
  p.viscosity = hermite(kAirMuTable, at, t);
  p.conductivity = hermite(kAirKTable, at, t);
  p.expansion = 1.0 / t;  // ideal gas
  return p;
}

template <class T>
Properties<T> freshWaterProperties(T temperatureK) {
  Properties<T> p;
  const T t = clampToRange(kFreshWaterTableRange, temperatureK, p.outsideValidity);
  const DensityAndSlope d = kellDensity(valueOf(t));
  p.density = densityAt([](double x) { return kellDensity(x); }, t);
  p.expansion = -d.drho / d.rho;  // value only (the convection evaluator does not use it)
  const auto at = hermiteLocate(kWaterT, valueOf(t));
  p.specificHeat = hermite(kWaterCpTable, at, t);
  p.viscosity = hermite(kWaterMuTable, at, t);
  p.conductivity = hermite(kWaterKTable, at, t);
  return p;
}

template <class T>
Properties<T> seaWaterProperties(T temperatureK, double salinity) {
  using std::cbrt, std::pow;
  Properties<T> p;
  const T temp = clampToRange(kSeaWaterTemperatureRange, temperatureK, p.outsideValidity);
  const double s = clampToRange(kSeaWaterSalinityRange, salinity, p.outsideValidity);
  const T t = temp - kZeroCelsius;
  const DensityAndSlope d = sharqawyDensity(valueOf(temp), s);
  p.density = densityAt([s](double x) { return sharqawyDensity(x, s); }, temp);
  p.expansion = -d.drho / d.rho;  // value only

  // Sharqawy et al. (2010) eq. 9 (after Jamieson et al. 1969): cp [kJ/(kg K)] = A + B T + C T^2 + D T^3,
  // T in K, S in g/kg.
  const double sg = 1000.0 * s;
  const double a = 5.328 - 9.76e-2 * sg + 4.04e-4 * sg * sg;
  const double b = -6.913e-3 + 7.351e-4 * sg - 3.15e-6 * sg * sg;
  const double c = 9.6e-6 - 1.927e-6 * sg + 8.23e-9 * sg * sg;
  const double dd = 2.5e-9 + 1.666e-9 * sg - 7.125e-12 * sg * sg;
  p.specificHeat = 1000.0 * (a + temp * (b + temp * (c + temp * dd)));

  // Sharqawy et al. (2010) eq. 13 (after Jamieson & Tudhope 1970), k in mW/(m K):
  // log10 k = log10(240 + 0.0002 S) + 0.434 (2.3 - (343.5 + 0.037 S)/T) (1 - T/(647 + 0.03 S))^{1/3}.
  const T log10k = std::log10(240.0 + 0.0002 * sg) +
                   0.434 * (2.3 - (343.5 + 0.037 * sg) / temp) * cbrt(1.0 - temp / (647.0 + 0.03 * sg));
  p.conductivity = 1e-3 * pow(10.0, log10k);

  // Sharqawy et al. (2010) eqs. 22-23: mu_w = 4.2844e-5 + 1/(0.157 (t + 64.993)^2 - 91.296),
  // mu = mu_w (1 + A S + B S^2), A = 1.541 + 1.998e-2 t - 9.52e-5 t^2, B = 7.974 - 7.561e-2 t + 4.724e-4 t^2.
  const T muW = 4.2844e-5 + 1.0 / (0.157 * (t + 64.993) * (t + 64.993) - 91.296);
  const T ca = 1.541 + 1.998e-2 * t - 9.52e-5 * t * t;
  const T cb = 7.974 - 7.561e-2 * t + 4.724e-4 * t * t;
  p.viscosity = muW * (1.0 + ca * s + cb * s * s);
  return p;
}

template <class T>
Properties<T> properties(Medium medium, T temperatureK, double salinity) {
  switch (medium) {
    case Medium::Air: return airProperties(temperatureK);
    case Medium::FreshWater: return freshWaterProperties(temperatureK);
    case Medium::SeaWater: return seaWaterProperties(temperatureK, salinity);
  }
  return {};
}

}  // namespace

FluidProperties fluidProperties(Medium medium, double temperatureK, double salinity) {
  const Properties<double> q = properties(medium, temperatureK, salinity);
  FluidProperties p;
  p.density = q.density;
  p.viscosity = q.viscosity;
  p.conductivity = q.conductivity;
  p.specificHeat = q.specificHeat;
  p.expansion = q.expansion;
  p.outsideValidity = q.outsideValidity;
  p.prandtl = p.viscosity * p.specificHeat / p.conductivity;
  return p;
}

FluidPropertiesDual fluidPropertiesDual(Medium medium, Dual temperatureK, double salinity) {
  const Properties<Dual> q = properties(medium, temperatureK, salinity);
  FluidPropertiesDual p;
  p.density = q.density;
  p.viscosity = q.viscosity;
  p.conductivity = q.conductivity;
  p.specificHeat = q.specificHeat;
  p.outsideValidity = q.outsideValidity;
  p.prandtl = p.viscosity * p.specificHeat / p.conductivity;
  return p;
}

std::vector<double> propertyPieces(Medium medium) {
  switch (medium) {
    case Medium::Air: return {kAirT.begin(), kAirT.end()};
    case Medium::FreshWater: return {kWaterT.begin(), kWaterT.end()};
    case Medium::SeaWater: return {kSeaWaterTemperatureRange.min, kSeaWaterTemperatureRange.max};
  }
  return {};
}

Dual mediumDensityDual(Medium medium, Dual temperatureK, double salinity) {
  bool clamped = false;
  switch (medium) {
    case Medium::Air: return 1.0e5 / (kGasConstantDryAir * clampToRange(kAirTableRange, temperatureK, clamped));
    case Medium::FreshWater:
      return densityAt([](double x) { return kellDensity(x); }, clampToRange(kFreshWaterTableRange, temperatureK, clamped));
    case Medium::SeaWater: {
      const double s = clampToRange(kSeaWaterSalinityRange, salinity, clamped);
      return densityAt([s](double x) { return sharqawyDensity(x, s); },
                       clampToRange(kSeaWaterTemperatureRange, temperatureK, clamped));
    }
  }
  throw std::invalid_argument("mediumDensity: unknown medium");
}

double mediumDensity(Medium medium, double temperatureK, double salinity) {
  bool clamped = false;
  switch (medium) {
    case Medium::Air: return 1.0e5 / (kGasConstantDryAir * clampToRange(kAirTableRange, temperatureK, clamped));
    case Medium::FreshWater: return kellDensity(clampToRange(kFreshWaterTableRange, temperatureK, clamped)).rho;
    case Medium::SeaWater:
      return sharqawyDensity(clampToRange(kSeaWaterTemperatureRange, temperatureK, clamped),
                             clampToRange(kSeaWaterSalinityRange, salinity, clamped))
          .rho;
  }
  throw std::invalid_argument("mediumDensity: unknown medium");
}

// ---- moist air --------------------------------------------------------------------

double saturationVapourPressure(double temperatureK) {
  bool clamped = false;
  const double t = clampToRange(kBuckRange, temperatureK, clamped) - kZeroCelsius;
  return 611.21 * std::exp(17.502 * t / (240.97 + t));
}

double saturationVapourPressureSlope(double temperatureK) {
  if (!kBuckRange.contains(temperatureK)) {
    checkValidity(kBuckRange, temperatureK);
    return 0.0;
  }
  const double t = temperatureK - kZeroCelsius;
  // d/dt [17.502 t/(240.97 + t)] = 17.502 * 240.97 / (240.97 + t)^2
  return saturationVapourPressure(temperatureK) * 17.502 * 240.97 / ((240.97 + t) * (240.97 + t));
}

double latentHeatVaporisation(double temperatureK) {
  bool clamped = false;
  const double t = clampToRange(kLatentHeatRange, temperatureK, clamped) - kZeroCelsius;
  return 2.501e6 - 2361.0 * t;
}

double latentHeatVaporisationSlope(double temperatureK) {
  if (checkValidity(kLatentHeatRange, temperatureK)) return 0.0;
  return -2361.0;
}

double humidAirDensity(double temperatureK, double relativeHumidity, double pressure) {
  const double e = relativeHumidity * saturationVapourPressure(temperatureK);
  return (pressure - e) / (kGasConstantDryAir * temperatureK) + e / (kGasConstantVapour * temperatureK);
}

double humidityRatio(double vapourPressure, double pressure) {
  return (kMolarMassWater / kMolarMassDryAir) * vapourPressure / (pressure - vapourPressure);
}

double vapourDiffusivityInAir(double temperatureK, double pressure) {
  return 0.26e-4 * std::pow(temperatureK / 298.0, 1.5) * (kStandardPressure / pressure);
}

}  // namespace thermorph
