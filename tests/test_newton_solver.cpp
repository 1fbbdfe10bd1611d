// The Newton-system solver (solver/newton_solver.hpp: KLU's 32-bit interface on the leading block, block forward
// substitution for the trailing components) against a general-purpose reference: Eigen's dense LU with partial
// pivoting (Eigen::PartialPivLU, Eigen 3.4) of the same matrix formed entry by entry, on random sparse diagonally
// dominant systems. Diagonal dominance makes the systems well conditioned (Golub & Van Loan 2013, Theorem 3.4.3:
// no growth in Gaussian elimination), so both solutions agree to a small multiple of the unit round-off.
#include <catch2/catch.hpp>

#include <Eigen/Dense>

#include <algorithm>
#include <bit>
#include <cmath>
#include <limits>
#include <map>
#include <random>
#include <set>
#include <vector>

#include <klu.h>
#include <sundials/sundials_context.h>
#include <sunlinsol/sunlinsol_band.h>
#include <sunmatrix/sunmatrix_band.h>
#include <nvector/nvector_serial.h>

#include "solver/newton_solver.hpp"

using namespace thermorph;

namespace {

struct RandomSystem {
  SparsePattern pattern;
  std::vector<double> jacobian;
};

//! n components, of which the last `trailing` only appear in their own diagonal column (like the cumulative
//! energies); each leading column has a diagonal, ~`perColumn` random rows in the leading block and ~2 in the
//! trailing rows. Leading diagonals dominate their columns and rows of J.
RandomSystem randomSystem(Index n, Index trailing, int perColumn, unsigned seed) {
  std::mt19937 rng(seed);
  const Index f = n - trailing;
  std::uniform_int_distribution<Index> leadingRow(0, f - 1), trailingRow(f, n - 1);
  std::uniform_real_distribution<double> value(-1.0, 1.0);
  std::vector<std::set<Index>> rows(n);
  for (Index c = 0; c < n; ++c) rows[c].insert(c);
  for (Index c = 0; c < f; ++c) {
    for (int k = 0; k < perColumn; ++k) {
      const Index r = leadingRow(rng);
      rows[c].insert(r);
      rows[r].insert(c);  // symmetric pattern (as a network's conductances), unsymmetric values
    }
    if (trailing > 0)
      for (int k = 0; k < 2; ++k) rows[c].insert(trailingRow(rng));
  }
  RandomSystem s;
  s.pattern.size = n;
  s.pattern.columnStart.push_back(0);
  for (Index c = 0; c < n; ++c) {
    for (Index r : rows[c]) s.pattern.rowIndex.push_back(static_cast<std::uint32_t>(r));
    s.pattern.columnStart.push_back(static_cast<std::uint32_t>(s.pattern.rowIndex.size()));
  }
  s.jacobian.resize(s.pattern.nonzeros());
  std::vector<double> rowSum(n, 0.0);
  for (Index c = 0; c < n; ++c)
    for (Index p = s.pattern.columnStart[c]; p < s.pattern.columnStart[c + 1]; ++p)
      if (s.pattern.rowIndex[p] != c) {
        s.jacobian[p] = value(rng);
        rowSum[s.pattern.rowIndex[p]] += std::abs(s.jacobian[p]);
      }
  for (Index c = 0; c < n; ++c)
    for (Index p = s.pattern.columnStart[c]; p < s.pattern.columnStart[c + 1]; ++p)
      if (s.pattern.rowIndex[p] == c) s.jacobian[p] = c < f ? -(rowSum[c] + 2.0 + value(rng)) : 0.0;
  return s;
}

//! alpha I + beta J as a dense matrix, entry by entry.
Eigen::MatrixXd dense(const RandomSystem& s, double alpha, double beta) {
  const auto n = static_cast<Eigen::Index>(s.pattern.size);
  Eigen::MatrixXd A = alpha * Eigen::MatrixXd::Identity(n, n);
  for (Index c = 0; c < s.pattern.size; ++c)
    for (Index p = s.pattern.columnStart[c]; p < s.pattern.columnStart[c + 1]; ++p)
      A(s.pattern.rowIndex[p], static_cast<Eigen::Index>(c)) += beta * s.jacobian[p];
  return A;
}

double relativeDifference(std::span<const double> x, const Eigen::VectorXd& reference) {
  double num = 0.0, den = 0.0;
  for (Index i = 0; i < x.size(); ++i) {
    num = std::max(num, std::abs(x[i] - reference(static_cast<Eigen::Index>(i))));
    den = std::max(den, std::abs(reference(static_cast<Eigen::Index>(i))));
  }
  return num / den;
}

//! Factorise I - gamma J, solve for a random right-hand side and compare with Eigen's dense LU: the relative
//! difference; `x` and `b` get the solution and the right-hand side.
double solveAgainstDense(NewtonSolver& solver, const RandomSystem& s, double gamma, std::mt19937& rng,
                         std::vector<double>& x, Eigen::VectorXd& b) {
  std::uniform_real_distribution<double> value(-1.0, 1.0);
  solver.setMatrix(s.jacobian, 1.0, -gamma);
  REQUIRE(solver.factor());
  CHECK(solver.factorNonzeros() > 0);
  b.resize(static_cast<Eigen::Index>(s.pattern.size));
  for (Eigen::Index i = 0; i < b.size(); ++i) b(i) = value(rng);
  x.assign(b.data(), b.data() + b.size());
  REQUIRE(solver.solve(x));
  return relativeDifference(x, dense(s, 1.0, -gamma).partialPivLu().solve(b));
}

}  // namespace

TEST_CASE("Newton solver: KLU (32-bit) with trailing substitution matches a dense LU", "[newton_solver]") {
  const Index n = 400, trailing = 24;
  RandomSystem s = randomSystem(n, trailing, 3, 20261203u);
  NewtonSolver solver(s.pattern, n - trailing, -1);
  std::mt19937 rng(7);
  // Newton matrices I - gamma J for several gamma: the first is analysed and factorised, the later ones are
  // numeric refactorisations with the kept pivot order, then one after forget() (analysed again).
  for (double gamma : {0.1, 0.37, 2.5, 40.0, -1.0}) {
    if (gamma < 0.0) {
      gamma = 0.8;
      solver.forget();
    }
    std::vector<double> x;
    Eigen::VectorXd b;
    INFO("gamma " << gamma);
    CHECK(solveAgainstDense(solver, s, gamma, rng, x, b) < 1e-12);
    // The solution satisfies the system itself (residual check, independent of the reference).
    const Eigen::VectorXd residual = dense(s, 1.0, -gamma) * Eigen::Map<const Eigen::VectorXd>(x.data(), b.size()) - b;
    CHECK(residual.lpNorm<Eigen::Infinity>() < 1e-12 * b.lpNorm<Eigen::Infinity>() * (1.0 + gamma * 10.0));
  }
  // The counters of the refinement benchmark (tests/bench/refine_cost.sh): the first factorisation and the one after
  // forget() search pivots (unless the condition rule asked for more), the three in between refactorise; KLU's
  // operation count of a factorisation with fill is positive (common practice, no source).
  CHECK(solver.factorizations() >= 2);
  CHECK(solver.factorizations() + solver.refactorizations() == 5);
  CHECK(solver.factorFlops() > 0.0);
}

TEST_CASE("Newton solver: steady Jacobian without trailing components matches a dense LU", "[newton_solver]") {
  const Index n = 300;
  RandomSystem s = randomSystem(n, 0, 4, 11u);
  NewtonSolver solver(s.pattern, n, 2);  // KLU's row scaling by the largest entry (its default)
  solver.setMatrix(s.jacobian, 0.0, 1.0);
  REQUIRE(solver.factor());
  Eigen::VectorXd b = Eigen::VectorXd::LinSpaced(static_cast<Eigen::Index>(n), -3.0, 5.0);
  std::vector<double> x(b.data(), b.data() + b.size());
  REQUIRE(solver.solve(x));
  CHECK(relativeDifference(x, dense(s, 0.0, 1.0).partialPivLu().solve(b)) < 1e-12);
}

TEST_CASE("Newton solver: a trailing component others depend on is refused", "[newton_solver]") {
  RandomSystem s = randomSystem(50, 5, 2, 3u);
  // Column 45 (trailing) gets an entry in row 0: component 0 would depend on it.
  s.pattern.rowIndex.insert(s.pattern.rowIndex.begin() + s.pattern.columnStart[45], 0u);
  for (Index c = 46; c <= 50; ++c) ++s.pattern.columnStart[c];
  CHECK_THROWS_AS(NewtonSolver(s.pattern, 45, -1), std::invalid_argument);
  CHECK_NOTHROW(NewtonSolver(s.pattern, 46, -1));
}

TEST_CASE("Newton solver: a singular matrix is reported, not solved", "[newton_solver]") {
  RandomSystem s = randomSystem(20, 0, 2, 5u);
  std::fill(s.jacobian.begin(), s.jacobian.end(), 0.0);  // A = 0 I + 1 J = 0
  NewtonSolver solver(s.pattern, 20, -1);
  solver.setMatrix(s.jacobian, 0.0, 1.0);
  CHECK_FALSE(solver.factor());
}

namespace {

//! A tridiagonal leading block (a 1-D radial grid's conduction) of n - trailing components, the last `border` of
//! them coupled to every earlier one (blood nodes: the first border component feeds every row, the others read
//! every column), and `trailing` energy-like components whose rows read two leading components; diagonals dominate.
RandomSystem bandedSystem(Index n, Index border, Index trailing, unsigned seed) {
  std::mt19937 rng(seed);
  const Index f = n - trailing, m = f - border;
  std::uniform_int_distribution<Index> trailingRow(f, n - 1);
  std::uniform_real_distribution<double> value(-1.0, 1.0);
  RandomSystem s;
  s.pattern.size = n;
  s.pattern.columnStart.push_back(0);
  for (Index c = 0; c < n; ++c) {
    std::set<Index> rows{c};
    if (c < m) {
      if (c > 0) rows.insert(c - 1);
      if (c + 1 < m) rows.insert(c + 1);
      for (Index j = 1; j < border; ++j) rows.insert(m + j);
      if (trailing > 0) rows.insert(trailingRow(rng));
    } else if (c == m && border > 0) {
      for (Index r = 0; r < m; ++r) rows.insert(r);
    }
    for (Index r : rows) {
      s.pattern.rowIndex.push_back(static_cast<std::uint32_t>(r));
      const double scale = r >= m && r < f && c < m ? 1.0 / static_cast<double>(m) : 1.0;  // rows of many entries
      s.jacobian.push_back(r == c ? (c < f ? -(3.0 + value(rng)) : 0.0) : scale * value(rng));
    }
    s.pattern.columnStart.push_back(static_cast<std::uint32_t>(s.pattern.rowIndex.size()));
  }
  return s;
}

}  // namespace

TEST_CASE("Newton solver: a tridiagonal leading block takes the band LU and matches a dense LU", "[newton_solver]") {
  for (Index border : {0, 2}) {
    const Index n = 500, trailing = 3;
    RandomSystem s = bandedSystem(n, border, trailing, 20261204u);
    NewtonSolver solver(s.pattern, n - trailing, -1);
    INFO("border " << border);
    REQUIRE(solver.banded());
    CHECK(solver.lowerBandwidth() == 1);
    CHECK(solver.upperBandwidth() == 1);
    CHECK(solver.bandBorder() == border);
    std::mt19937 rng(9);
    for (double gamma : {0.1, 2.5, 40.0}) {
      std::vector<double> x;
      Eigen::VectorXd b;
      INFO("gamma " << gamma);
      CHECK(solveAgainstDense(solver, s, gamma, rng, x, b) < 1e-12);
    }
  }
  // The random systems above (about 7 entries per column, scattered) stay on KLU.
  RandomSystem scattered = randomSystem(400, 24, 3, 20261203u);
  CHECK_FALSE(NewtonSolver(scattered.pattern, 376, -1).banded());
}

TEST_CASE("Newton solver: the band LU gives SUNLinSol_Band's solution bit for bit", "[newton_solver]") {
  // The band path's LU is SUNDIALS' band LU compiled here (solver/newton_solver.cpp): the same operations, so the
  // same numbers as SUNDIALS' own band solver (SUNBandMatrix + SUNLinSol_Band) on the same matrix. Twice: a
  // diagonally dominant matrix (no row swaps: the band storage without the room for the pivots' fill) and one whose
  // every third diagonal entry is weak (rows swapped: the factorisation starts again in the full storage).
  for (bool weak : {false, true}) {
  INFO("weak diagonal " << weak);
  const Index n = 300;
  RandomSystem s = bandedSystem(n, 0, 0, 77u);
  if (weak)
    for (Index c = 0; c < n; c += 3)
      for (Index p = s.pattern.columnStart[c]; p < s.pattern.columnStart[c + 1]; ++p)
        if (s.pattern.rowIndex[p] == c) s.jacobian[p] *= 0.05;
  NewtonSolver solver(s.pattern, n, -1);
  REQUIRE(solver.banded());
  SUNContext ctx = nullptr;
  REQUIRE(SUNContext_Create(nullptr, &ctx) == 0);
  const auto N = static_cast<sunindextype>(n);
  SUNMatrix A = SUNBandMatrix(N, 1, 1, ctx);
  N_Vector x = N_VNew_Serial(N, ctx), b = N_VNew_Serial(N, ctx);
  SUNLinearSolver band = SUNLinSol_Band(x, A, ctx);
  REQUIRE(band);
  const double gamma = 3.0;
  SUNMatZero(A);
  for (Index c = 0; c < n; ++c)
    for (Index p = s.pattern.columnStart[c]; p < s.pattern.columnStart[c + 1]; ++p) {
      const Index r = s.pattern.rowIndex[p];
      const double v = -gamma * s.jacobian[p];
      SM_ELEMENT_B(A, static_cast<sunindextype>(r), static_cast<sunindextype>(c)) = r == c ? v + 1.0 : v;
    }
  REQUIRE(SUNLinSolSetup(band, A) == 0);
  for (Index i = 0; i < n; ++i) NV_Ith_S(b, static_cast<sunindextype>(i)) = std::sin(0.1 * static_cast<double>(i));
  REQUIRE(SUNLinSolSolve(band, A, x, b, 0.0) == 0);
  solver.setMatrix(s.jacobian, 1.0, -gamma);
  REQUIRE(solver.factor());
  std::vector<double> ours(n);
  for (Index i = 0; i < n; ++i) ours[i] = std::sin(0.1 * static_cast<double>(i));
  REQUIRE(solver.solve(ours));
  Index unequal = 0;
  for (Index i = 0; i < n; ++i) unequal += ours[i] != NV_Ith_S(x, static_cast<sunindextype>(i));
  CHECK(unequal == 0);
  // The factors' storage: three values per column without row swaps, four (the pivots' fill) with them.
  CHECK(solver.factorNonzeros() == static_cast<long>((weak ? 4 : 3) * n));
  // Pivots of SUNDIALS' factorisation: rows were swapped exactly in the weak case.
  Index swapped = 0;
  const sunindextype* pivots = static_cast<SUNLinearSolverContent_Band>(band->content)->pivots;
  for (Index k = 0; k < n; ++k) swapped += pivots[k] != static_cast<sunindextype>(k);
  CHECK((swapped > 0) == weak);
  SUNLinSolFree(band);
  N_VDestroy(x);
  N_VDestroy(b);
  SUNMatDestroy(A);
  SUNContext_Free(&ctx);
  }
}

TEST_CASE("Newton solver: a singular band block is reported, not solved", "[newton_solver]") {
  RandomSystem s = bandedSystem(30, 0, 0, 4u);
  std::fill(s.jacobian.begin(), s.jacobian.end(), 0.0);
  NewtonSolver solver(s.pattern, 30, -1);
  REQUIRE(solver.banded());
  solver.setMatrix(s.jacobian, 0.0, 1.0);
  CHECK_FALSE(solver.factor());
}

TEST_CASE("Newton solver: a band block of more than 5000 components solves without a kept B^-1 E", "[newton_solver]") {
  // Above 5000 components the band path keeps no B^-1 E (8 bytes per node) and takes x_1 = B^-1 (b_1 - E x_2) by a
  // second band solve. The solution must satisfy A x = b to round-off (residual of the matrix formed entry by
  // entry; common practice, no source), with the right-hand side handed in or copied by the solver itself.
  const Index n = 6003, trailing = 3;
  RandomSystem s = bandedSystem(n, 2, trailing, 20261205u);
  NewtonSolver solver(s.pattern, n - trailing, -1);
  REQUIRE(solver.banded());
  CHECK(solver.bandBorder() == 2);
  for (double gamma : {0.1, 2.5, 40.0}) {
    INFO("gamma " << gamma);
    solver.setMatrix(s.jacobian, 1.0, -gamma);
    REQUIRE(solver.factor());
    std::vector<double> b(n);
    for (Index i = 0; i < n; ++i) b[i] = std::sin(0.37 * static_cast<double>(i)) + 0.1;
    std::vector<double> x = b, y = b;
    REQUIRE(solver.solve(x, b.data()));
    REQUIRE(solver.solve(y));
    // r = b - (I - gamma J) x, column by column.
    std::vector<double> r = b;
    for (Index c = 0; c < n; ++c) {
      r[c] -= x[c];
      for (Index p = s.pattern.columnStart[c]; p < s.pattern.columnStart[c + 1]; ++p)
        r[s.pattern.rowIndex[p]] += gamma * s.jacobian[p] * x[c];
    }
    double worst = 0.0, size = 0.0;
    for (Index i = 0; i < n; ++i) {
      worst = std::max(worst, std::abs(r[i]));
      size = std::max(size, std::abs(b[i]));
    }
    CHECK(worst / size < 1e-12);
    CHECK(x == y);
  }
}

namespace {

//! A general network-like system: randomSystem's, plus `dense` components coupled both ways to every third leading
//! component (a blood pool's many exchanges) and rank-one terms u v^T over 2-6 leading components each (the
//! junction rings' pair parts, NetworkSystem::junctionTerms), which the pattern leaves out.
struct GeneralSystem {
  RandomSystem s;
  std::vector<RankOneTerm> terms;
};

GeneralSystem generalSystem(Index n, Index trailing, Index dense, unsigned seed) {
  GeneralSystem g;
  g.s = randomSystem(n, trailing, 2, seed);
  std::mt19937 rng(seed + 1);
  std::uniform_real_distribution<double> value(-1.0, 1.0);
  const Index f = n - trailing;
  // Entries (r, c) and (c, r) for each dense component r in [f - dense, f) and every third c below it.
  std::vector<std::set<Index>> rows(n);
  std::vector<std::vector<double>> values(n);
  for (Index c = 0; c < n; ++c)
    for (Index p = g.s.pattern.columnStart[c]; p < g.s.pattern.columnStart[c + 1]; ++p) rows[c].insert(g.s.pattern.rowIndex[p]);
  for (Index r = f - dense; r < f; ++r)
    for (Index c = 0; c < f - dense; c += 3) {
      rows[c].insert(r);
      rows[r].insert(c);
    }
  std::map<std::pair<Index, Index>, double> old;
  for (Index c = 0; c < n; ++c)
    for (Index p = g.s.pattern.columnStart[c]; p < g.s.pattern.columnStart[c + 1]; ++p)
      old[{g.s.pattern.rowIndex[p], c}] = g.s.jacobian[p];
  SparsePattern pattern;
  pattern.size = n;
  pattern.columnStart.push_back(0);
  std::vector<double> jacobian;
  for (Index c = 0; c < n; ++c) {
    for (Index r : rows[c]) {
      pattern.rowIndex.push_back(static_cast<std::uint32_t>(r));
      const auto it = old.find({r, c});
      // New couplings small beside the diagonals (which keep dominating their rows and columns).
      jacobian.push_back(it != old.end() ? it->second * (r == c && r < f ? static_cast<double>(dense + 1) : 1.0)
                                         : 0.3 * value(rng) / static_cast<double>(f));
    }
    pattern.columnStart.push_back(static_cast<std::uint32_t>(pattern.rowIndex.size()));
  }
  g.s.pattern = std::move(pattern);
  g.s.jacobian = std::move(jacobian);
  std::uniform_int_distribution<Index> leading(0, f - 1);
  std::uniform_int_distribution<int> size(2, 6);
  for (int t = 0; t < 12; ++t) {
    std::set<Index> members;
    const int m = size(rng);
    while (static_cast<int>(members.size()) < m) members.insert(leading(rng));
    RankOneTerm term;
    for (Index i : members) {
      term.u.emplace_back(i, 0.2 * value(rng));
      term.v.emplace_back(i, 0.2 * value(rng));
    }
    g.terms.push_back(std::move(term));
  }
  return g;
}

}  // namespace

TEST_CASE("Newton solver: KLU's factors by rows give klu_refactor's and klu_solve's solution bit for bit",
          "[newton_solver]") {
  // NewtonSolver refactorises with klu_refactor's operations in its order on KLU's own factors and solves with L
  // and U by rows (solver/newton_solver.cpp): the same products subtracted in the same order as KLU's own
  // klu_refactor and klu_solve (SuiteSparse KLU 1.3, Davis & Palamadai Natarajan 2010; klu_lsolve and klu_usolve),
  // so the same numbers. Reference: KLU itself (klu_analyze, klu_factor, then klu_refactor for each later gamma,
  // klu_solve) on the same augmented matrix, and Eigen's dense LU of alpha I + beta (J + sum u v^T) for the whole
  // solution.
  const Index n = 320, trailing = 20;
  const Index f = n - trailing;
  GeneralSystem g = generalSystem(n, trailing, 3, 20261205u);
  NewtonSolver solver(g.s.pattern, f, -1, g.terms);
  AugmentedMatrix reference(g.s.pattern, f, g.terms);
  klu_common common;
  klu_defaults(&common);
  common.ordering = 0;
  common.scale = -1;
  const int m = static_cast<int>(reference.size());
  klu_symbolic* symbolic = klu_analyze(m, reference.start.data(), reference.row.data(), &common);
  REQUIRE(symbolic != nullptr);
  klu_numeric* numeric = nullptr;
  std::mt19937 rng(11);
  std::uniform_real_distribution<double> value(-1.0, 1.0);
  for (double gamma : {0.1, 0.37, 2.5, 40.0}) {
    INFO("gamma " << gamma);
    solver.setMatrix(g.s.jacobian, 1.0, -gamma);
    REQUIRE(solver.factor());
    CHECK(solver.solvesByRows());
    reference.setValues(g.s.jacobian, 1.0, -gamma);
    if (!numeric) {
      numeric = klu_factor(reference.start.data(), reference.row.data(), reference.value.data(), symbolic, &common);
      REQUIRE(numeric != nullptr);
    } else {
      REQUIRE(klu_refactor(reference.start.data(), reference.row.data(), reference.value.data(), symbolic, numeric,
                           &common));
    }
    CHECK(numeric->nblocks == 1);
    for (int rhs = 0; rhs < 3; ++rhs) {
      Eigen::VectorXd b(static_cast<Eigen::Index>(n));
      for (Eigen::Index i = 0; i < b.size(); ++i) b(i) = value(rng);
      std::vector<double> x(b.data(), b.data() + b.size());
      REQUIRE(solver.solve(x));
      std::vector<double> y(static_cast<std::size_t>(m), 0.0);
      std::copy(b.data(), b.data() + f, y.begin());
      REQUIRE(klu_solve(symbolic, numeric, m, 1, y.data(), &common));
      Index equal = 0;
      for (Index i = 0; i < f; ++i) equal += std::bit_cast<std::uint64_t>(x[i]) == std::bit_cast<std::uint64_t>(y[i]);
      CHECK(equal == f);
      Eigen::MatrixXd A = dense(g.s, 1.0, -gamma);
      for (const RankOneTerm& t : g.terms)
        for (auto [r, u] : t.u)
          for (auto [c, v] : t.v) A(static_cast<Eigen::Index>(r), static_cast<Eigen::Index>(c)) += -gamma * u * v;
      CHECK(relativeDifference(x, A.partialPivLu().solve(b)) < 1e-12);
    }
  }
  klu_free_numeric(&numeric, &common);
  klu_free_symbolic(&symbolic, &common);
}

TEST_CASE("Newton solver: the trailing rows' zero terms and signed zeros as the substitution column by column",
          "[newton_solver]") {
  // x_e = D^-1 (b_e - A_ef x_f) (block forward substitution, Golub & Van Loan 2013, sec. 3.1) with the terms of a
  // zero x_c left out: solver/newton_solver.cpp sums each trailing row without that test and sums it again with it
  // only where the two can differ (a NaN sum, or a zero one from b_r = -0.0, when x_f holds a zero). References:
  // (a) b_f = 0, so x_f = 0 and x_e = b_e / (alpha + beta J_ee) exactly, whatever A_ef holds (an infinite entry
  // against a zero x_c is left out, not made NaN); (b) the substitution column by column in ascending c with the
  // test, the order of KLU's own block solves (klu_solve.c), for rows of zero entries (beta J_rc = -0.0) from
  // b_r = -0.0 and b_r = +0.0, bit for bit, and Eigen's dense LU within 1e-12.
  const Index n = 240, trailing = 16;
  const Index f = n - trailing;
  RandomSystem s = randomSystem(n, trailing, 3, 20261206u);
  // Trailing rows f .. f + 5: zero entries; row f + 6: one infinite entry.
  bool infinite = false;
  for (Index c = 0; c < f; ++c)
    for (Index p = s.pattern.columnStart[c]; p < s.pattern.columnStart[c + 1]; ++p) {
      const Index r = s.pattern.rowIndex[p];
      if (r >= f && r < f + 6) s.jacobian[p] = 0.0;
      if (r == f + 6 && !infinite) {
        s.jacobian[p] = std::numeric_limits<double>::infinity();
        infinite = true;
      }
    }
  REQUIRE(infinite);
  NewtonSolver solver(s.pattern, f, -1);
  const double gamma = 0.5;
  solver.setMatrix(s.jacobian, 1.0, -gamma);
  REQUIRE(solver.factor());
  CHECK(solver.solvesByRows());
  auto bits = [](double v) { return std::bit_cast<std::uint64_t>(v); };
  std::mt19937 rng(13);
  std::uniform_real_distribution<double> value(-1.0, 1.0);
  // (a)
  std::vector<double> x(n, 0.0);
  for (Index r = f; r < n; ++r) x[r] = r % 3 == 0 ? -0.0 : r % 3 == 1 ? 0.0 : value(rng);
  const std::vector<double> b = x;
  REQUIRE(solver.solve(x));
  for (Index i = 0; i < f; ++i) CHECK(x[i] == 0.0);
  for (Index r = f; r < n; ++r) {
    INFO("row " << r);
    CHECK(bits(x[r]) == bits(b[r] / (1.0 + -gamma * s.jacobian[s.pattern.columnStart[r]])));
  }
  // (b), without the infinite entry.
  for (double& v : s.jacobian)
    if (std::isinf(v)) v = 0.5;
  solver.setMatrix(s.jacobian, 1.0, -gamma);
  REQUIRE(solver.factor());
  Eigen::VectorXd rhs(static_cast<Eigen::Index>(n));
  for (Index i = 0; i < n; ++i) rhs(static_cast<Eigen::Index>(i)) = i < f ? value(rng) : i % 2 == 0 ? -0.0 : 0.0;
  x.assign(rhs.data(), rhs.data() + n);
  REQUIRE(solver.solve(x));
  std::vector<double> y(x.begin(), x.begin() + f);
  y.resize(n);
  for (Index r = f; r < n; ++r) y[r] = rhs(static_cast<Eigen::Index>(r));
  for (Index c = 0; c < f; ++c)
    for (Index p = s.pattern.columnStart[c]; p < s.pattern.columnStart[c + 1]; ++p)
      if (const Index r = s.pattern.rowIndex[p]; r >= f && y[c] != 0.0) y[r] -= -gamma * s.jacobian[p] * y[c];
  Index equal = 0;
  for (Index r = f; r < n; ++r) {
    y[r] /= 1.0 + -gamma * s.jacobian[s.pattern.columnStart[r]];
    equal += bits(x[r]) == bits(y[r]);
  }
  CHECK(equal == trailing);
  CHECK(relativeDifference(x, dense(s, 1.0, -gamma).partialPivLu().solve(rhs)) < 1e-12);
}

TEST_CASE("Newton solver: a block triangular matrix, a singleton or row scaling takes klu_solve and matches a dense LU",
          "[newton_solver]") {
  // One-way couplings (component c feeds c + 1 only) give KLU's block triangular form one block per component:
  // the solve by rows is not taken (klu_solve's off-diagonal blocks), nor for a one-component block (KLU's
  // singleton) or with KLU's row scaling (steady systems).
  const Index n = 60;
  RandomSystem s;
  s.pattern.size = n;
  s.pattern.columnStart.push_back(0);
  std::mt19937 rng(5);
  std::uniform_real_distribution<double> value(-1.0, 1.0);
  for (Index c = 0; c < n; ++c) {
    s.pattern.rowIndex.push_back(static_cast<std::uint32_t>(c));
    s.jacobian.push_back(-(3.0 + value(rng)));
    if (c + 1 < n) {
      s.pattern.rowIndex.push_back(static_cast<std::uint32_t>(c + 1));
      s.jacobian.push_back(value(rng));
    }
    s.pattern.columnStart.push_back(static_cast<std::uint32_t>(s.pattern.rowIndex.size()));
  }
  // Component 0 is a pivot of the triangular chain: not banded (the band test's storage bound aside, a chain is a
  // band of width 1, so force KLU by a rank-one term over two far components).
  std::vector<RankOneTerm> terms(1);
  terms[0].u = {{5, 0.1}};
  terms[0].v = {{50, 0.1}};
  NewtonSolver chain(s.pattern, n, -1, terms);
  std::vector<double> x;
  Eigen::VectorXd b;
  chain.setMatrix(s.jacobian, 1.0, -0.5);
  REQUIRE(chain.factor());
  CHECK_FALSE(chain.solvesByRows());
  b = Eigen::VectorXd::LinSpaced(static_cast<Eigen::Index>(n), -1.0, 2.0);
  x.assign(b.data(), b.data() + b.size());
  REQUIRE(chain.solve(x));
  Eigen::MatrixXd A = dense(s, 1.0, -0.5);
  A(5, 50) += -0.5 * 0.1 * 0.1;
  CHECK(relativeDifference(x, A.partialPivLu().solve(b)) < 1e-12);

  // A one-component leading block: KLU's singleton (no L, U or LUbx), klu_solve's division.
  RandomSystem single = randomSystem(4, 3, 0, 23u);
  NewtonSolver one(single.pattern, 1, -1);
  one.setMatrix(single.jacobian, 1.0, -0.7);
  REQUIRE(one.factor());
  CHECK_FALSE(one.solvesByRows());
  b = Eigen::VectorXd::LinSpaced(4, 1.0, 2.0);
  x.assign(b.data(), b.data() + b.size());
  REQUIRE(one.solve(x));
  CHECK(relativeDifference(x, dense(single, 1.0, -0.7).partialPivLu().solve(b)) < 1e-12);

  RandomSystem steady = randomSystem(200, 0, 3, 17u);
  NewtonSolver scaled(steady.pattern, 200, 2);
  scaled.setMatrix(steady.jacobian, 0.0, 1.0);
  REQUIRE(scaled.factor());
  CHECK_FALSE(scaled.solvesByRows());
  b = Eigen::VectorXd::LinSpaced(200, -3.0, 5.0);
  x.assign(b.data(), b.data() + b.size());
  REQUIRE(scaled.solve(x));
  CHECK(relativeDifference(x, dense(steady, 0.0, 1.0).partialPivLu().solve(b)) < 1e-12);
}
