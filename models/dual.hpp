#pragma once
//! Forward-mode automatic differentiation with one direction: a value and its derivative with respect to one
//! input (dual numbers; Griewank & Walther 2008, Evaluating Derivatives, ch. 3). The property and correlation
//! evaluators use it to give h(T_s) and dh/dT_s exactly in one pass. Values are computed by the same operations
//! in the same order as the plain double code, so they are bit for bit the same.
#include <cmath>
#include <numbers>

namespace thermorph {

struct Dual {
  double v = 0.0;  //!< value
  double d = 0.0;  //!< derivative with respect to the chosen input
  constexpr Dual() = default;
  constexpr Dual(double value) : v(value) {}  // NOLINT: constants convert implicitly (derivative 0)
  constexpr Dual(double value, double derivative) : v(value), d(derivative) {}
};

inline constexpr Dual operator+(Dual a, Dual b) { return {a.v + b.v, a.d + b.d}; }
inline constexpr Dual operator-(Dual a, Dual b) { return {a.v - b.v, a.d - b.d}; }
inline constexpr Dual operator-(Dual a) { return {-a.v, -a.d}; }
inline constexpr Dual operator*(Dual a, Dual b) { return {a.v * b.v, a.d * b.v + a.v * b.d}; }
inline constexpr Dual operator/(Dual a, Dual b) { return {a.v / b.v, (a.d * b.v - a.v * b.d) / (b.v * b.v)}; }
inline constexpr Dual operator+(Dual a, double b) { return {a.v + b, a.d}; }
inline constexpr Dual operator+(double a, Dual b) { return {a + b.v, b.d}; }
inline constexpr Dual operator-(Dual a, double b) { return {a.v - b, a.d}; }
inline constexpr Dual operator-(double a, Dual b) { return {a - b.v, -b.d}; }
inline constexpr Dual operator*(Dual a, double b) { return {a.v * b, a.d * b}; }
inline constexpr Dual operator*(double a, Dual b) { return {a * b.v, a * b.d}; }
inline constexpr Dual operator/(Dual a, double b) { return {a.v / b, a.d / b}; }
inline constexpr Dual operator/(double a, Dual b) { return {a / b.v, -a * b.d / (b.v * b.v)}; }

inline Dual sqrt(Dual a) {
  const double s = std::sqrt(a.v);
  return {s, s > 0.0 ? 0.5 * a.d / s : 0.0};
}
inline Dual cbrt(Dual a) {
  const double c = std::cbrt(a.v);
  return {c, c != 0.0 ? a.d / (3.0 * c * c) : 0.0};
}
//! a^p for a constant exponent: d = p a^p / a da (a > 0 wherever the evaluators use it).
inline Dual pow(Dual a, double p) {
  const double value = std::pow(a.v, p);
  return {value, a.v != 0.0 ? p * value / a.v * a.d : 0.0};
}
//! b^a for a constant base b > 0.
inline Dual pow(double b, Dual a) {
  const double value = std::pow(b, a.v);
  return {value, value * std::log(b) * a.d};
}
inline Dual log10(Dual a) { return {std::log10(a.v), a.d / (a.v * std::numbers::ln10)}; }
inline Dual exp(Dual a) {
  const double e = std::exp(a.v);
  return {e, e * a.d};
}

//! Value of x (a double or a Dual).
inline constexpr double valueOf(double x) { return x; }
inline constexpr double valueOf(Dual x) { return x.v; }

//! The larger by value, as std::max (the first on a tie).
template <class T>
constexpr T maxOf(T a, T b) {
  return valueOf(a) < valueOf(b) ? b : a;
}

}  // namespace thermorph
