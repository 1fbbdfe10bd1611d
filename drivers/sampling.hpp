#pragma once
//! Sampling designs and estimators for global sensitivity and uncertainty: Sobol' quasi-random points
//! (Boost.Random's sobol engine), Latin hypercubes, parameter distributions, Morris (1991) elementary effects
//! and Sobol' (1993) indices with the Saltelli et al. (2010) estimators and bootstrap confidence intervals.
#include <cstdint>
#include <functional>
#include <string>
#include <vector>

namespace thermorph {

//! `count` points of the Sobol' sequence in [0, 1)^dim (Boost.Random `sobol`, which starts at (1/2, ...)),
//! after discarding `skip` points.
std::vector<std::vector<double>> sobolPoints(std::size_t dim, std::size_t count, std::size_t skip = 0);

//! Latin hypercube of `count` points in [0, 1)^dim (McKay, Beckman & Conover 1979): one point in each of the
//! `count` equal strata of every coordinate, strata paired at random, uniform within a stratum.
std::vector<std::vector<double>> latinHypercube(std::size_t dim, std::size_t count, std::uint64_t seed);

//! A parameter distribution; `quantile` maps u in (0, 1) to a value (inverse CDF, Boost.Math).
struct Distribution {
  enum class Kind { Uniform, Normal, LogNormal, Triangular };
  Kind kind = Kind::Uniform;
  double a = 0.0, b = 1.0, c = 0.0;  //!< uniform: lo, hi; normal: mean, sd; lognormal: median, geometric sd;
                                     //!< triangular: lo, mode (c), hi (b)
  double quantile(double u) const;
};
//! "uniform:LO:HI", "normal:MEAN:SD", "lognormal:MEDIAN:GSD" (GSD > 1), "triangular:LO:MODE:HI"; numbers only
//! (the unit comes with the key). Throws CaseError naming `what`.
Distribution parseDistribution(const std::string& spec, const std::string& what);

//! Saltelli (2002, 2010) design: base matrices A and B (N x k) from a 2k-dimensional Sobol' sequence, then
//! AB_i (A with column i from B). Rows in run order: A, B, AB_1, ..., AB_k: N (k + 2) points in [0, 1)^k.
std::vector<std::vector<double>> saltelliDesign(std::size_t k, std::size_t n);

struct SobolIndices {
  std::vector<double> first, total;          //!< S_i, S_Ti
  std::vector<double> firstLow, firstHigh;   //!< bootstrap percentile interval (level: `confidence`)
  std::vector<double> totalLow, totalHigh;
  double variance = 0.0;                     //!< of f over A and B
  std::size_t used = 0;                      //!< base rows without a missing value
};
//! Indices from the outputs of saltelliDesign's rows (NaN rows are dropped with their whole base row):
//! S_i = mean((f_B - mean f) (f_ABi - f_A)) / V (Saltelli et al. 2010, Table 2 (b), with f_B centred: the same
//! expectation, a much smaller variance when the mean is large against the spread); S_Ti = mean((f_A - f_ABi)^2) / (2 V)
//! (Jansen 1999; Saltelli et al. 2010, Table 2 (f)); V the variance of f_A and f_B together. Bootstrap over base
//! rows (Efron & Tibshirani 1993, percentile intervals), `resamples` times with `seed`.
SobolIndices saltelliIndices(std::size_t k, std::size_t n, const std::vector<double>& f, std::size_t resamples = 1000,
                             double confidence = 0.95, std::uint64_t seed = 1);

//! Morris (1991) one-at-a-time trajectories in the unit cube: r trajectories of k + 1 points on a grid of
//! `levels` levels, step Delta = levels / (2 (levels - 1)). Rows in run order; `factor[t][s]` is the factor
//! changed at step s of trajectory t and `delta[t][s]` its signed change.
struct MorrisDesign {
  std::size_t k = 0, r = 0, levels = 4;
  std::vector<std::vector<double>> points;
  std::vector<std::vector<std::size_t>> factor;
  std::vector<std::vector<double>> delta;
};
MorrisDesign morrisDesign(std::size_t k, std::size_t r, std::size_t levels, std::uint64_t seed);

struct MorrisEffects {
  std::vector<double> mu, muStar, sigma;  //!< mean, mean absolute (Campolongo et al. 2007) and SD of the effects
  std::vector<std::size_t> count;         //!< effects used (trajectories with a missing value skip that step)
};
//! Elementary effects (f(x + delta e_i) - f(x)) / delta in unit-cube units; multiply by a factor's range for
//! physical units.
MorrisEffects morrisEffects(const MorrisDesign& design, const std::vector<double>& f);

}  // namespace thermorph
