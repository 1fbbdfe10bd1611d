#include "drivers/sampling.hpp"

#include <algorithm>
#include <cmath>
#include <limits>
#include <numeric>
#include <random>
#include <sstream>

#include <boost/math/distributions/lognormal.hpp>
#include <boost/math/distributions/normal.hpp>
#include <boost/math/distributions/triangular.hpp>
#include <boost/random/sobol.hpp>
#include <fmt/format.h>

#include "models/case.hpp"

namespace thermorph {

std::vector<std::vector<double>> sobolPoints(std::size_t dim, std::size_t count, std::size_t skip) {
  boost::random::sobol engine(dim);
  if (skip) engine.discard(skip * dim);
  std::vector<std::vector<double>> out(count, std::vector<double>(dim));
  // The engine returns 64-bit integers: u = value / 2^64.
  for (std::vector<double>& point : out)
    for (double& u : point) u = std::ldexp(static_cast<double>(engine()), -64);
  return out;
}

std::vector<std::vector<double>> latinHypercube(std::size_t dim, std::size_t count, std::uint64_t seed) {
  std::mt19937_64 rng(seed);
  std::uniform_real_distribution<double> uniform(0.0, 1.0);
  std::vector<std::vector<double>> out(count, std::vector<double>(dim));
  std::vector<std::size_t> strata(count);
  for (std::size_t d = 0; d < dim; ++d) {
    std::iota(strata.begin(), strata.end(), 0);
    std::shuffle(strata.begin(), strata.end(), rng);
    for (std::size_t i = 0; i < count; ++i)
      out[i][d] = (static_cast<double>(strata[i]) + uniform(rng)) / static_cast<double>(count);
  }
  return out;
}

double Distribution::quantile(double u) const {
  u = std::clamp(u, 1e-12, 1.0 - 1e-12);
  switch (kind) {
    case Kind::Uniform:
      return a + (b - a) * u;
    case Kind::Normal:
      return boost::math::quantile(boost::math::normal_distribution<double>(a, b), u);
    case Kind::LogNormal:
      return boost::math::quantile(boost::math::lognormal_distribution<double>(std::log(a), std::log(b)), u);
    case Kind::Triangular:
      return boost::math::quantile(boost::math::triangular_distribution<double>(a, c, b), u);
  }
  return std::numeric_limits<double>::quiet_NaN();
}

Distribution parseDistribution(const std::string& spec, const std::string& what) {
  std::vector<std::string> parts;
  std::stringstream ss(spec);
  for (std::string part; std::getline(ss, part, ':');) parts.push_back(part);
  auto bad = [&](const std::string& why) {
    return CaseError(fmt::format("{}: \"{}\": {}; a distribution is uniform:LO:HI, normal:MEAN:SD, "
                                 "lognormal:MEDIAN:GSD (geometric SD > 1) or triangular:LO:MODE:HI, numbers in the "
                                 "parameter's unit",
                                 what, spec, why));
  };
  if (parts.empty()) throw bad("empty");
  std::vector<double> v;
  for (std::size_t i = 1; i < parts.size(); ++i) {
    char* end = nullptr;
    double x = std::strtod(parts[i].c_str(), &end);
    if (parts[i].empty() || *end != '\0' || !std::isfinite(x)) throw bad(fmt::format("\"{}\" is not a number", parts[i]));
    v.push_back(x);
  }
  Distribution d;
  const std::string& kind = parts[0];
  if (kind == "uniform" && v.size() == 2) {
    d.kind = Distribution::Kind::Uniform;
    d.a = v[0];
    d.b = v[1];
    if (!(d.a < d.b)) throw bad("LO must be below HI");
  } else if (kind == "normal" && v.size() == 2) {
    d.kind = Distribution::Kind::Normal;
    d.a = v[0];
    d.b = v[1];
    if (!(d.b > 0.0)) throw bad("SD must be positive");
  } else if (kind == "lognormal" && v.size() == 2) {
    d.kind = Distribution::Kind::LogNormal;
    d.a = v[0];
    d.b = v[1];
    if (!(d.a > 0.0 && d.b > 1.0)) throw bad("the median must be positive and the geometric SD above 1");
  } else if (kind == "triangular" && v.size() == 3) {
    d.kind = Distribution::Kind::Triangular;
    d.a = v[0];
    d.c = v[1];
    d.b = v[2];
    if (!(d.a <= d.c && d.c <= d.b && d.a < d.b)) throw bad("need LO <= MODE <= HI and LO < HI");
  } else {
    throw bad("unknown kind or wrong number of values");
  }
  return d;
}

std::vector<std::vector<double>> saltelliDesign(std::size_t k, std::size_t n) {
  std::vector<std::vector<double>> base = sobolPoints(2 * k, n);
  std::vector<std::vector<double>> out;
  out.reserve(n * (k + 2));
  for (std::size_t i = 0; i < n; ++i) out.emplace_back(base[i].begin(), base[i].begin() + static_cast<std::ptrdiff_t>(k));
  for (std::size_t i = 0; i < n; ++i) out.emplace_back(base[i].begin() + static_cast<std::ptrdiff_t>(k), base[i].end());
  for (std::size_t j = 0; j < k; ++j)
    for (std::size_t i = 0; i < n; ++i) {
      std::vector<double> row(base[i].begin(), base[i].begin() + static_cast<std::ptrdiff_t>(k));
      row[j] = base[i][k + j];
      out.push_back(std::move(row));
    }
  return out;
}

namespace {

//! S1 and ST from the rows `use` (indices of base rows).
void estimate(std::size_t k, std::size_t n, const std::vector<double>& f, const std::vector<std::size_t>& use,
              std::vector<double>& first, std::vector<double>& total, double& variance) {
  const double m = static_cast<double>(use.size());
  double mean = 0.0;
  for (std::size_t i : use) mean += f[i] + f[n + i];
  mean /= 2.0 * m;
  double var = 0.0;
  for (std::size_t i : use) var += (f[i] - mean) * (f[i] - mean) + (f[n + i] - mean) * (f[n + i] - mean);
  variance = var / (2.0 * m - 1.0);
  first.assign(k, 0.0);
  total.assign(k, 0.0);
  for (std::size_t j = 0; j < k; ++j) {
    const std::size_t ab = (2 + j) * n;
    double s1 = 0.0, st = 0.0;
    for (std::size_t i : use) {
      const double fa = f[i], fb = f[n + i], fab = f[ab + i];
      s1 += (fb - mean) * (fab - fa);  // centred: same expectation, far smaller variance (bootstrap included)
      st += (fa - fab) * (fa - fab);
    }
    first[j] = s1 / m / variance;
    total[j] = st / (2.0 * m) / variance;
  }
}

double percentile(std::vector<double> v, double q) {
  if (v.empty()) return std::numeric_limits<double>::quiet_NaN();
  std::sort(v.begin(), v.end());
  const double pos = q * static_cast<double>(v.size() - 1);
  const std::size_t lo = static_cast<std::size_t>(std::floor(pos));
  const std::size_t hi = std::min(lo + 1, v.size() - 1);
  return v[lo] + (v[hi] - v[lo]) * (pos - static_cast<double>(lo));
}

}  // namespace

SobolIndices saltelliIndices(std::size_t k, std::size_t n, const std::vector<double>& f, std::size_t resamples,
                             double confidence, std::uint64_t seed) {
  if (f.size() != n * (k + 2)) throw std::invalid_argument("saltelliIndices: f must have N (k + 2) values");
  std::vector<std::size_t> use;
  for (std::size_t i = 0; i < n; ++i) {
    bool ok = std::isfinite(f[i]) && std::isfinite(f[n + i]);
    for (std::size_t j = 0; j < k && ok; ++j) ok = std::isfinite(f[(2 + j) * n + i]);
    if (ok) use.push_back(i);
  }
  SobolIndices out;
  out.used = use.size();
  const double nan = std::numeric_limits<double>::quiet_NaN();
  if (use.size() < 2) {
    out.first = out.total = out.firstLow = out.firstHigh = out.totalLow = out.totalHigh = std::vector<double>(k, nan);
    return out;
  }
  estimate(k, n, f, use, out.first, out.total, out.variance);
  std::mt19937_64 rng(seed);
  std::uniform_int_distribution<std::size_t> pick(0, use.size() - 1);
  std::vector<std::vector<double>> s1(k), st(k);
  std::vector<std::size_t> sample(use.size());
  std::vector<double> a, b;
  double v = 0.0;
  for (std::size_t r = 0; r < resamples; ++r) {
    for (std::size_t& i : sample) i = use[pick(rng)];
    estimate(k, n, f, sample, a, b, v);
    for (std::size_t j = 0; j < k; ++j) {
      s1[j].push_back(a[j]);
      st[j].push_back(b[j]);
    }
  }
  const double tail = (1.0 - confidence) / 2.0;
  for (std::size_t j = 0; j < k; ++j) {
    out.firstLow.push_back(percentile(s1[j], tail));
    out.firstHigh.push_back(percentile(s1[j], 1.0 - tail));
    out.totalLow.push_back(percentile(st[j], tail));
    out.totalHigh.push_back(percentile(st[j], 1.0 - tail));
  }
  return out;
}

MorrisDesign morrisDesign(std::size_t k, std::size_t r, std::size_t levels, std::uint64_t seed) {
  if (levels < 2 || levels % 2) throw CaseError(fmt::format("Morris: the number of levels ({}) must be even and >= 2", levels));
  MorrisDesign d;
  d.k = k;
  d.r = r;
  d.levels = levels;
  const double step = static_cast<double>(levels) / (2.0 * static_cast<double>(levels - 1));
  std::mt19937_64 rng(seed);
  std::uniform_int_distribution<std::size_t> level(0, levels - 1);
  for (std::size_t t = 0; t < r; ++t) {
    std::vector<double> x(k);
    for (double& xi : x) xi = static_cast<double>(level(rng)) / static_cast<double>(levels - 1);
    std::vector<std::size_t> order(k);
    std::iota(order.begin(), order.end(), 0);
    std::shuffle(order.begin(), order.end(), rng);
    d.points.push_back(x);
    std::vector<double> deltas;
    for (std::size_t i : order) {
      // Up when the grid allows it, else down (both stay on the grid in [0, 1]).
      const double change = x[i] + step <= 1.0 + 1e-12 ? step : -step;
      x[i] += change;
      deltas.push_back(change);
      d.points.push_back(x);
    }
    d.factor.push_back(order);
    d.delta.push_back(deltas);
  }
  return d;
}

MorrisEffects morrisEffects(const MorrisDesign& d, const std::vector<double>& f) {
  if (f.size() != d.r * (d.k + 1)) throw std::invalid_argument("morrisEffects: f must have r (k + 1) values");
  std::vector<std::vector<double>> effects(d.k);
  for (std::size_t t = 0; t < d.r; ++t)
    for (std::size_t s = 0; s < d.k; ++s) {
      const double f0 = f[t * (d.k + 1) + s], f1 = f[t * (d.k + 1) + s + 1];
      if (std::isfinite(f0) && std::isfinite(f1)) effects[d.factor[t][s]].push_back((f1 - f0) / d.delta[t][s]);
    }
  MorrisEffects out;
  const double nan = std::numeric_limits<double>::quiet_NaN();
  for (const std::vector<double>& e : effects) {
    const double m = static_cast<double>(e.size());
    double mu = 0.0, abs = 0.0;
    for (double v : e) {
      mu += v;
      abs += std::abs(v);
    }
    mu /= m;
    abs /= m;
    double var = 0.0;
    for (double v : e) var += (v - mu) * (v - mu);
    out.mu.push_back(e.empty() ? nan : mu);
    out.muStar.push_back(e.empty() ? nan : abs);
    out.sigma.push_back(e.size() > 1 ? std::sqrt(var / (m - 1.0)) : nan);
    out.count.push_back(e.size());
  }
  return out;
}

}  // namespace thermorph
