#include "solver/newton_solver.hpp"

#include <klu.h>
#include <sundials/sundials_dense.h>
#include <sundials/sundials_linearsolver.h>
#include <sundials/sundials_matrix.h>
#include <nvector/nvector_serial.h>

#include <algorithm>
#include <cfloat>
#include <cstdint>
#include <cmath>
#include <limits>
#include <optional>
#include <stdexcept>

#include <fmt/format.h>

#include "solver/scratch.hpp"

namespace thermorph {

namespace {

struct SymbolicFree {
  void operator()(klu_symbolic* s) const {
    klu_common common;
    klu_defaults(&common);
    klu_free_symbolic(&s, &common);
  }
};
using SharedSymbolic = std::shared_ptr<klu_symbolic>;

//! The last few symbolic analyses of this thread, with the patterns they were made for. klu_analyze depends only
//! on the pattern (and the ordering options, the same for every solver here), and klu_factor, klu_refactor and
//! klu_solve read the analysis without modifying it ("inputs, not modified", klu.h), so a solver with the same block
//! pattern as an earlier one of the same thread (the runs of a sweep: the transient's and the steady start's
//! systems) can share it: the same pivot order, the same factors, bit for bit. Kept only for blocks of up to
//! kSharedAnalysisLimit components, whose pattern copies cost nothing next to a run (the memory at 10^5 nodes is not
//! touched); the oldest of kSharedAnalyses goes first.
constexpr Index kSharedAnalysisLimit = 5000;
//! Systems up to this size keep A_ef by rows (NewtonSolver::rowStart_).
constexpr Index kRowSubstitutionLimit = 5000;
//! Systems up to this size solve with KLU's factors by rows (NewtonSolver::Klu::byRows).
constexpr Index kRowSolveLimit = 5000;
constexpr std::size_t kSharedAnalyses = 4;
struct SharedAnalysis {
  std::vector<int> start, row;
  SharedSymbolic symbolic;
};
thread_local std::vector<SharedAnalysis> sharedAnalyses;

SharedSymbolic findAnalysis(const std::vector<int>& start, const std::vector<int>& row) {
  for (const SharedAnalysis& a : sharedAnalyses)
    if (a.start == start && a.row == row) return a.symbolic;
  return nullptr;
}

void keepAnalysis(const std::vector<int>& start, const std::vector<int>& row, SharedSymbolic symbolic) {
  if (sharedAnalyses.size() == kSharedAnalyses) sharedAnalyses.erase(sharedAnalyses.begin());
  sharedAnalyses.push_back(SharedAnalysis{start, row, std::move(symbolic)});
}

}  // namespace

struct NewtonSolver::Klu {
  klu_common common{};
  SharedSymbolic symbolic;
  klu_numeric* numeric = nullptr;
  //! KLU's factors L and U by rows, for solve() (systems of up to kRowSolveLimit components in one block, without
  //! row scaling; else klu_solve): row i of L holds its entries left of the diagonal in ascending column order,
  //! row i of U its entries right of the diagonal in descending column order (columns lColumn, uColumn; values
  //! lValue, uValue), copied after each pivoting factorisation and written by refactor().
  bool byRows = false;
  std::vector<int> lStart, lColumn, uStart, uColumn;
  std::vector<double> lValue, uValue;
  mutable std::vector<double> work;  //!< the permuted solution, KLU's X [n]
  //! For refactor(), worked out with each pivot order: per column k of the permuted matrix A(P, Q), A's entries
  //! (positions in Ax, scatterEntry) and their permuted rows (scatterRow) from scatterStart[k]; the rows and values
  //! of L's and U's columns in LUbx[0] (KLU's GET_POINTER once per column, not once per use); and for each entry
  //! of L's (U's) columns in column order, from lColumnStart[k] (uColumnStart[k]), its position in lValue (uValue).
  std::vector<int> scatterStart, scatterEntry, scatterRow;
  std::vector<const int*> lRows, uRows;
  std::vector<double*> lValues, uValues;
  std::vector<int> lColumnStart, uColumnStart, lTarget, uTarget;
  std::vector<double> columnWork;  //!< klu_refactor's X: zero between columns
  //! After klu_factor: the tables above (byRows false if the factors do not qualify) and the values by rows.
  void rowsFromFactors(const int* Ap, const int* Ai);
  bool refactor(const double* Ax);
  ~Klu() {
    if (numeric) klu_free_numeric(&numeric, &common);
  }
};

void NewtonSolver::Klu::rowsFromFactors(const int* Ap, const int* Ai) {
  const klu_numeric& N = *numeric;
  {  // the tables
    auto clear = [&] {
      byRows = false;
      lStart = lColumn = uStart = uColumn = {};
      lValue = uValue = work = {};
      scatterStart = scatterEntry = scatterRow = lColumnStart = uColumnStart = lTarget = uTarget = {};
      lRows = uRows = {};
      lValues = uValues = {};
      columnWork = {};
    };
    // One block of more than one component (KLU keeps a 1 x 1 block as a singleton: no L, U or LUbx).
    byRows = N.n > 1 && N.n <= static_cast<int>(kRowSolveLimit) && N.nblocks == 1 && N.nzoff == 0 &&
             N.Rs == nullptr && N.LUbx != nullptr && N.LUbx[0] != nullptr;
    if (!byRows) return clear();
    // Column k of L (U) in LUbx[0]: Llen[k] (Ulen[k]) row indices from Lip[k] (Uip[k]), then their values from
    // the next multiple of sizeof(double) (KLU's GET_POINTER, klu_internal.h); indices in the permuted order.
    const auto* lu = static_cast<const double*>(N.LUbx[0]);
    const int n = N.n;
    auto indexUnits = [](int len) {
      return (static_cast<std::size_t>(len) * sizeof(int) + sizeof(double) - 1) / sizeof(double);
    };
    auto transpose = [&](const int* ip, const int* len, bool lower, std::vector<int>& start, std::vector<int>& column,
                         std::vector<const int*>& columnRows, std::vector<double*>& columnValues,
                         std::vector<int>& columnStart, std::vector<int>& target) {
      start.assign(n + 1, 0);
      for (int k = 0; k < n; ++k) {
        const int* rows = reinterpret_cast<const int*>(lu + ip[k]);
        for (int p = 0; p < len[k]; ++p) {
          if (lower ? rows[p] <= k : rows[p] >= k) {  // not triangular as expected: use klu_solve
            byRows = false;
            return;
          }
          ++start[rows[p] + 1];
        }
      }
      for (int i = 0; i < n; ++i) start[i + 1] += start[i];
      column.resize(start[n]);
      target.resize(start[n]);
      columnRows.resize(n);
      columnValues.resize(n);
      columnStart.assign(n + 1, 0);
      for (int k = 0; k < n; ++k) columnStart[k + 1] = columnStart[k] + len[k];
      std::vector<int> next(start.begin(), start.end() - 1);
      // L: columns ascending, so each row's entries come in ascending column order; U: columns descending.
      for (int j = 0; j < n; ++j) {
        const int k = lower ? j : n - 1 - j;
        const int* rows = reinterpret_cast<const int*>(lu + ip[k]);
        const std::size_t values = static_cast<std::size_t>(ip[k]) + indexUnits(len[k]);
        columnRows[k] = rows;
        columnValues[k] = static_cast<double*>(N.LUbx[0]) + values;
        for (int p = 0; p < len[k]; ++p) {
          const int q = next[rows[p]]++;
          column[q] = k;
          target[columnStart[k] + p] = q;
        }
      }
    };
    transpose(N.Lip, N.Llen, true, lStart, lColumn, lRows, lValues, lColumnStart, lTarget);
    if (byRows) transpose(N.Uip, N.Ulen, false, uStart, uColumn, uRows, uValues, uColumnStart, uTarget);
    if (!byRows) return clear();
    // A's column Q[k] scattered into the permuted rows Pinv[i] (klu_refactor's loop; one block: no offset).
    const int* const Q = symbolic->Q;
    scatterStart.assign(n + 1, 0);
    scatterEntry.clear();
    scatterRow.clear();
    for (int k = 0; k < n; ++k) {
      for (int p = Ap[Q[k]]; p < Ap[Q[k] + 1]; ++p) {
        scatterEntry.push_back(p);
        scatterRow.push_back(N.Pinv[Ai[p]]);
      }
      scatterStart[k + 1] = static_cast<int>(scatterEntry.size());
    }
    columnWork.assign(n, 0.0);
    lValue.resize(lColumn.size());
    uValue.resize(uColumn.size());
    work.resize(n);
  }
  for (int k = 0; k < N.n; ++k) {
    for (int p = 0; p < N.Llen[k]; ++p) lValue[lTarget[lColumnStart[k] + p]] = lValues[k][p];
    for (int p = 0; p < N.Ulen[k]; ++p) uValue[uTarget[uColumnStart[k] + p]] = uValues[k][p];
  }
}

bool NewtonSolver::Klu::refactor(const double* Ax) {
  // klu_refactor's operations in its order for one block without scaling (SuiteSparse KLU, klu_refactor.c): per
  // column k, X = A(P, Q[k]); for each entry j of U(:, k) in KLU's order, U(j, k) = X[j] and X -= L(:, j) U(j, k);
  // U(k, k) = X[k]; L(:, k) = X / U(k, k); X back to zero. The values go to KLU's LUbx[0] and Udiag (klu_rcond,
  // klu_condest and later refactorisations read them) and to the rows of solve().
  const klu_numeric& N = *numeric;
  const int n = N.n;
  double* const X = columnWork.data();
  auto* const diagonal = static_cast<double*>(N.Udiag);
  const int* const Llen = N.Llen;
  const int* const Ulen = N.Ulen;
  for (int k = 0; k < n; ++k) {
    for (int e = scatterStart[k]; e < scatterStart[k + 1]; ++e) X[scatterRow[e]] = Ax[scatterEntry[e]];
    const int* const Ui = uRows[k];
    double* const Ux = uValues[k];
    const int* const uTo = uTarget.data() + uColumnStart[k];
    for (int up = 0; up < Ulen[k]; ++up) {
      const int j = Ui[up];
      const double ujk = X[j];
      X[j] = 0.0;
      Ux[up] = ujk;
      uValue[uTo[up]] = ujk;
      const int* const Li = lRows[j];
      const double* const Lx = lValues[j];
      const int len = Llen[j];
      for (int p = 0; p < len; ++p) X[Li[p]] -= Lx[p] * ujk;
    }
    const double ukk = X[k];
    X[k] = 0.0;
    if (ukk == 0.0) {
      // Numerically singular: klu_refactor stops here (halt_if_singular) and returns FALSE; X back to zero.
      std::fill(columnWork.begin(), columnWork.end(), 0.0);
      common.status = KLU_SINGULAR;
      return false;
    }
    diagonal[k] = ukk;
    const int* const Li = lRows[k];
    double* const Lx = lValues[k];
    const int* const lTo = lTarget.data() + lColumnStart[k];
    for (int p = 0; p < Llen[k]; ++p) {
      const int i = Li[p];
      const double v = X[i] / ukk;
      Lx[p] = v;
      lValue[lTo[p]] = v;
      X[i] = 0.0;
    }
  }
  common.status = KLU_OK;
  return true;
}

namespace {

// SUNDIALS' band LU with partial pivoting (SUNDlsMat_bandGBTRF and SUNDlsMat_bandGBTRS of sundials_band.c,
// SUNDIALS 6.4, BSD-3-Clause, Lawrence Livermore National Security and Southern Methodist University), the same
// operations in the same order, compiled here: Debian's static SUNDIALS archives, which the `thermorph`
// executable links, are built without optimisation (objdump shows -O0 code: every variable kept on the stack),
// and SUNDIALS' own routine took 156 instructions per row and solve of a tridiagonal block, this one ~15.
// tests/test_newton_solver.cpp checks that both give bit-for-bit equal factors and solutions.
// Column j starts at a + j ldim (ldim = smu + ml + 1; no array of column pointers: 8 bytes per node less) and
// (i, j) is at a[j ldim + i - j + smu]; the pivot row l of column k is stored as its offset l - k (0 .. ml, one
// byte: the band path is taken only for ml <= kMaxPivotOffset). Returns 0, or k + 1 for a zero pivot in column k.
// Storage without the room for the pivots' fill (smu = mu; NewtonSolver::Band starts so): a column whose pivot
// search picks another row stops the factorisation (kNeedsPivotRoom) before anything is swapped, and the caller
// factorises again in the full storage. Without a row swap the rows above mu stay zero all the way (the full
// storage's loop over the columns k + mu + 1 .. k + smu meets a(k, j) = 0 there and does nothing), so both storages
// give the same factors, bit for bit.
using BandIndex = std::ptrdiff_t;
using PivotOffset = std::uint8_t;
constexpr BandIndex kMaxPivotOffset = 255;
constexpr BandIndex kNeedsPivotRoom = -1;
BandIndex bandFactor(double* a, BandIndex ldim, BandIndex n, BandIndex mu, BandIndex ml, BandIndex smu,
                     PivotOffset* p) {
  const bool pivotRoom = smu >= std::min(n - 1, mu + ml);
  if (ml == 1 && mu == 1 && smu == 1 && !pivotRoom) {
    // A tridiagonal block in the storage without room for the pivots' fill (a 1-D radial grid's I - gamma J): the
    // loops below with their bounds resolved (rows k and k + 1 of column k, column k + 1 only), the same operations
    // in the same order; a row swap stops it as it stops them. 62 -> ~15 instructions per column.
    for (BandIndex k = 0; k < n - 1; ++k, ++p) {
      double* const colK = a + k * ldim;  // (k - 1, k), (k, k), (k + 1, k)
      if (std::abs(colK[2]) > std::abs(colK[1])) return kNeedsPivotRoom;
      *p = 0;
      if (colK[1] == 0.0) return k + 1;
      const double mult = -1.0 / colK[1];
      colK[2] *= mult;
      double* const colJ = colK + ldim;
      const double akj = colJ[0];
      if (akj != 0.0) colJ[1] += akj * colK[2];
    }
    *p = 0;
    if (a[(n - 1) * ldim + smu] == 0.0) return n;
    return 0;
  }
  // Zero the first smu - mu rows (the room for the pivots' fill).
  for (BandIndex c = 0; c < n; ++c)
    for (BandIndex r = 0; r < smu - mu; ++r) a[c * ldim + r] = 0.0;
  for (BandIndex k = 0; k < n - 1; ++k, ++p) {
    double* const colK = a + k * ldim;
    double* const diagK = colK + smu;
    double* const subDiagK = diagK + 1;
    const BandIndex lastRowK = std::min(n - 1, k + ml);
    // l = pivot row
    BandIndex l = k;
    double max = std::abs(*diagK);
    for (BandIndex i = k + 1; i <= lastRowK; ++i)
      if (std::abs(subDiagK[i - k - 1]) > max) {
        l = i;
        max = std::abs(subDiagK[i - k - 1]);
      }
    if (l != k && !pivotRoom) return kNeedsPivotRoom;
    BandIndex storageL = l - k + smu;
    *p = static_cast<PivotOffset>(l - k);
    if (colK[storageL] == 0.0) return k + 1;
    const bool swap = l != k;
    if (swap) {
      const double temp = colK[storageL];
      colK[storageL] = *diagK;
      *diagK = temp;
    }
    // Multipliers -a(i,k)/a(k,k) stored in a(i,k).
    const double mult = -1.0 / (*diagK);
    for (BandIndex i = k + 1; i <= lastRowK; ++i) subDiagK[i - k - 1] *= mult;
    // row_i -= [a(i,k)/a(k,k)] row_k, one column j = k+1 .. min(k + smu, n - 1) at a time.
    const BandIndex lastColK = std::min(k + smu, n - 1);
    for (BandIndex j = k + 1; j <= lastColK; ++j) {
      double* const colJ = a + j * ldim;
      storageL = l - j + smu;
      const BandIndex storageK = k - j + smu;
      const double akj = colJ[storageL];
      if (swap) {
        colJ[storageL] = colJ[storageK];
        colJ[storageK] = akj;
      }
      if (akj != 0.0) {
        double* const jptr = colJ + (k + 1 - j + smu);
        for (BandIndex i = 0; i < lastRowK - k; ++i) jptr[i] += akj * subDiagK[i];
      }
    }
  }
  *p = 0;
  if (a[(n - 1) * ldim + smu] == 0.0) return n;
  return 0;
}

//! b := A^-1 b from bandFactor's LU (SUNDlsMat_bandGBTRS).
void bandSolve(const double* a, BandIndex ldim, BandIndex n, BandIndex smu, BandIndex ml, const PivotOffset* p,
               double* b) {
  if (ml == 1 && smu == 1) {
    // Tridiagonal (bandFactor's fast path): the loops below with their bounds resolved, the same operations in
    // the same order (66 -> ~12 instructions per row), and the entry that each row's update passes to the next
    // carried in a register: both sweeps are chains of dependent operations (the second through a division per
    // row), and through memory each row also waited for the store of the row before.
    if (n == 0) return;
    double carried = b[0];  // b[k] as the loop below has left it so far
    for (BandIndex k = 0; k < n - 1; ++k) {
      double next = b[k + 1];
      if (p[k] != 0) std::swap(carried, next);  // l = k + 1: mult = b[l], b[l] = b[k], b[k] = mult
      b[k] = carried;                           // mult
      next += carried * a[k * ldim + 2];        // b[k + 1] += mult * a(k + 1, k)
      carried = next;
    }
    b[n - 1] = carried;
    for (BandIndex k = n - 1; k > 0; --k) {
      const double* const diagK = a + k * ldim + 1;
      carried /= (*diagK);  // b[k] /= a(k, k)
      b[k] = carried;
      const double mult = -carried;
      carried = b[k - 1] + mult * diagK[-1];  // b[k - 1] += mult * a(k - 1, k)
    }
    b[0] = carried / a[1];
    return;
  }
  // L y = P b
  for (BandIndex k = 0; k < n - 1; ++k) {
    const BandIndex l = k + p[k];
    const double mult = b[l];
    if (l != k) {
      b[l] = b[k];
      b[k] = mult;
    }
    const double* const diagK = a + k * ldim + smu;
    const BandIndex lastRowK = std::min(n - 1, k + ml);
    for (BandIndex i = k + 1; i <= lastRowK; ++i) b[i] += mult * diagK[i - k];
  }
  // U x = y
  for (BandIndex k = n - 1; k >= 0; --k) {
    const double* const diagK = a + k * ldim + smu;
    const BandIndex firstRowK = std::max<BandIndex>(0, k - smu);
    b[k] /= (*diagK);
    const double mult = -b[k];
    for (BandIndex i = firstRowK; i < k; ++i) b[i] += mult * diagK[i - k];
  }
}

}  // namespace

//! The leading block A_ff split at m into a banded part B = A[0, m) and a border of k = f - m components (blood
//! nodes and controllers, coupled to many others):
//!   [ B  E ] [x_1]   [b_1]
//!   [ F  D ] [x_2] = [b_2],
//! B factorised by SUNDIALS' band LU with partial pivoting (the routines of SUNLinSol_Band, bandFactor and
//! bandSolve above), the border by its Schur complement S = D - F B^-1 E (dense LU, SUNDlsMat_denseGETRF/GETRS):
//! x_2 = S^-1 (b_2 - F B^-1 b_1), x_1 = B^-1 b_1 - (B^-1 E) x_2 (block elimination; Golub & Van Loan 2013,
//! sec. 3.2.10 and 4.3.6 for band LU). E, F and D are read from J where they are needed; B^-1 E is kept for the
//! border columns that B's rows depend on (one value per node and column) in blocks of up to
//! kRowSubstitutionLimit components. A larger block keeps none (8 bytes per node and coupled column): its solve
//! takes x_1 = B^-1 (b_1 - E x_2) with a second band solve, from the right-hand side b_1 the caller still holds.
struct NewtonSolver::Band {
  Index size = 0;                               //!< m
  //! ml, mu of B, and the stored upper bandwidth smu: mu until a factorisation needs a row swap, then
  //! min(m - 1, mu + ml) (room for the pivots' fill; bandFactor). A diagonally dominant block (the 1-D radial grid's
  //! I - gamma J) never swaps: one row of the band storage less, 8 bytes per node of a tridiagonal block.
  Index lower = 0, upper = 0, storedUpper = 0;
  Index fullUpper() const { return std::min(size - 1, lower + upper); }
  std::vector<double> data;                     //!< column j: rows j - smu .. j + ml, (smu + ml + 1) per column
  std::vector<PivotOffset> pivots;  //!< pivot row of column k minus k
  std::vector<Index> coupled;                   //!< border components (0-based from m) with entries in rows < m
  std::vector<double> solved;                   //!< B^-1 E for the coupled columns [coupled x m], column by column
  bool keepSolved = true;                       //!< B^-1 E kept (else: a second band solve per solve)
  //! F = A[m, f) x [0, m) by rows where B^-1 E is kept: border row r's entries [fStart[r], fStart[r + 1]) in
  //! ascending column fColumn, at position fEntry of J, fValue = beta J there (set by setMatrix). The products
  //! F x_1 and F (B^-1 E) then sum each border row in a register instead of searching every column of B for the
  //! border's rows (2.5 of the 7.3 M instructions of the 500-cell radial run's solves).
  std::vector<std::uint32_t> fStart, fColumn, fEntry;
  std::vector<double> fValue;
  std::vector<double> schur;                    //!< S, then its LU [k x k], column-major
  std::vector<double*> schurColumns;
  std::vector<sunindextype> schurPivots;
  bool factored = false;
  Index columnLength() const { return storedUpper + lower + 1; }
  Index border(Index f) const { return f - size; }
  //! Storage of this split with the room for the pivots' fill (what a block that swaps rows needs; the choice
  //! between the band and KLU does not depend on whether it will).
  double bytes(Index f) const {
    const Index fullLength = fullUpper() + lower + 1;
    return static_cast<double>(size) * static_cast<double>(fullLength * sizeof(double) + sizeof(PivotOffset) +
                                                         (keepSolved ? coupled.size() * sizeof(double) : 0)) +
           static_cast<double>(border(f) * border(f) * sizeof(double));
  }
};

namespace {

//! The narrowest band split of the leading block [0, f): for each border size k = 0 .. kMaxBorder, the bandwidths
//! of A[0, f - k) in the natural order and the border columns with entries above the border.
constexpr Index kMaxBorder = 16;

}  // namespace

AugmentedMatrix::AugmentedMatrix(const SparsePattern& pattern, Index factored, std::span<const RankOneTerm> rankOne)
    : pattern_(pattern), factored_(factored) {
  for (const RankOneTerm& t : rankOne)
    if (!t.u.empty() && !t.v.empty()) ++terms_;
  if (factored > pattern.size || factored + terms_ > static_cast<Index>(std::numeric_limits<int>::max()) ||
      pattern.nonzeros() > static_cast<Index>(std::numeric_limits<int>::max()))
    throw std::invalid_argument("the Newton matrix is too large for KLU's 32-bit interface");
  // The V^T rows of each leading column (term order, so ascending rows).
  std::vector<std::vector<std::pair<int, double>>> extra(terms_ > 0 ? factored : 0);
  Index t = 0;
  for (const RankOneTerm& term : rankOne) {
    if (term.u.empty() || term.v.empty()) continue;
    for (auto [col, v] : term.v) {
      if (col >= factored) throw std::invalid_argument("a rank-one term lies outside the factorised block");
      extra[col].emplace_back(static_cast<int>(factored + t), v);
    }
    ++t;
  }
  start.assign(factored + terms_ + 1, 0);
  blockCount_.assign(factored, 0);
  for (Index c = 0; c < factored; ++c) {
    Index k = pattern.columnStart[c];
    for (; k < pattern.columnStart[c + 1] && pattern.rowIndex[k] < factored; ++k) row.push_back(static_cast<int>(pattern.rowIndex[k]));
    blockCount_[c] = static_cast<int>(k - pattern.columnStart[c]);
    if (terms_ > 0)
      for (auto [r, v] : extra[c]) {
        if (!row.empty() && row.back() == r) throw std::invalid_argument("a rank-one term repeats a column");
        row.push_back(r);
      }
    start[c + 1] = static_cast<int>(row.size());
  }
  value.assign(row.size(), 0.0);
  if (terms_ == 0) return;
  for (Index c = 0; c < factored; ++c) {
    int q = start[c] + blockCount_[c];
    for (auto [r, v] : extra[c]) value[static_cast<std::size_t>(q++)] = v;
  }
  t = 0;
  for (const RankOneTerm& term : rankOne) {
    if (term.u.empty() || term.v.empty()) continue;
    std::vector<std::pair<Index, double>> u(term.u.begin(), term.u.end());
    std::sort(u.begin(), u.end());
    std::vector<double> values;
    for (std::size_t k = 0; k < u.size(); ++k) {
      if (u[k].first >= factored || (k > 0 && u[k].first == u[k - 1].first))
        throw std::invalid_argument("a rank-one term lies outside the factorised block or repeats a row");
      row.push_back(static_cast<int>(u[k].first));
      values.push_back(u[k].second);
    }
    row.push_back(static_cast<int>(factored + t));
    start[factored + t + 1] = static_cast<int>(row.size());
    termU_.push_back(std::move(values));
    ++t;
  }
  value.resize(row.size(), -1.0);
}

void AugmentedMatrix::setValues(std::span<const double> jacobian, double alpha, double beta) {
  // The arithmetic of SUNDIALS' SUNMatScaleAddI on a copy of J: beta J, plus alpha on the diagonal.
  for (Index c = 0; c < factored_; ++c) {
    const Index first = pattern_.columnStart[c];
    double* column = value.data() + start[c];
    const int* rows = row.data() + start[c];
    for (int k = 0; k < blockCount_[c]; ++k) {
      const double v = beta * jacobian[first + static_cast<Index>(k)];
      column[k] = rows[k] == static_cast<int>(c) ? v + alpha : v;
    }
  }
  for (Index t = 0; t < terms_; ++t) {
    const std::vector<double>& u = termU_[t];
    double* column = value.data() + start[factored_ + t];
    for (std::size_t k = 0; k < u.size(); ++k) column[k] = beta * u[k];
  }
}

NewtonSolver::NewtonSolver(const SparsePattern& pattern, Index factored, int scale, std::span<const RankOneTerm> rankOne)
    : pattern_(pattern), factored_(factored), klu_(std::make_unique<Klu>()) {
  for (const RankOneTerm& t : rankOne)
    if (!t.u.empty() && !t.v.empty()) ++terms_;
  if (factored > pattern.size || pattern.nonzeros() > static_cast<Index>(std::numeric_limits<int>::max()))
    throw std::invalid_argument("the Newton matrix is too large for KLU's 32-bit interface");
  // The trailing columns hold only their diagonal (nothing depends on those components).
  for (Index c = factored; c < pattern.size; ++c)
    if (pattern.columnStart[c + 1] - pattern.columnStart[c] != 1 || pattern.rowIndex[pattern.columnStart[c]] != c)
      throw std::invalid_argument(fmt::format("state component {} is left out of the factorisation but others "
                                              "depend on it", c));
  // A_ef by rows for a small system: the substitution x_e = D^-1 (b_e - A_ef x_f) then sums each row in a register
  // (the same terms in the same order: each row's updates came in ascending column order) instead of storing into
  // x for every entry.
  if (factored < pattern.size && pattern.size <= kRowSubstitutionLimit) {
    const Index trailing = pattern.size - factored;
    rowStart_.assign(trailing + 1, 0);
    for (Index c = 0; c < factored; ++c)
      for (Index p = pattern.columnStart[c]; p < pattern.columnStart[c + 1]; ++p)
        if (pattern.rowIndex[p] >= factored) ++rowStart_[pattern.rowIndex[p] - factored + 1];
    for (Index r = 0; r < trailing; ++r) rowStart_[r + 1] += rowStart_[r];
    rowColumn_.resize(rowStart_[trailing]);
    rowEntry_.resize(rowStart_[trailing]);
    rowValue_.resize(rowStart_[trailing]);
    std::vector<std::uint32_t> next(rowStart_.begin(), rowStart_.end() - 1);
    for (Index c = 0; c < factored; ++c)
      for (Index p = pattern.columnStart[c]; p < pattern.columnStart[c + 1]; ++p)
        if (pattern.rowIndex[p] >= factored) {
          const std::uint32_t q = next[pattern.rowIndex[p] - factored]++;
          rowColumn_[q] = static_cast<std::uint32_t>(c);
          rowEntry_[q] = static_cast<std::uint32_t>(p);
        }
  }
  // Band or KLU: the band split of A_ff with the least storage (border sizes 0 .. kMaxBorder), if that storage is
  // no more than the lower bound of the KLU path: 24 bytes per entry of the block (its values and 32-bit rows, and
  // L + U with at least as many entries, each a value and an index), besides KLU's arrays of length n.
  // One pass over the block: an entry (r, c) lies in B for every border size k < f - max(r, c), so the bandwidths
  // of each split are suffix maxima over t = min(kMaxBorder, f - 1 - max(r, c)).
  Index entries = 0;
  const Index borders = factored > 1 ? std::min(kMaxBorder, factored - 2) + 1 : 0;
  std::vector<Index> lowerAt(borders, 0), upperAt(borders, 0);
  for (Index c = 0; c < factored; ++c)
    for (Index k = pattern.columnStart[c]; k < pattern.columnStart[c + 1] && pattern.rowIndex[k] < factored; ++k) {
      ++entries;
      const Index r = pattern.rowIndex[k];
      if (borders == 0) continue;
      const Index t = std::min(borders - 1, factored - 1 - std::max(r, c));
      if (r > c) lowerAt[t] = std::max(lowerAt[t], r - c);
      if (c > r) upperAt[t] = std::max(upperAt[t], c - r);
    }
  for (Index t = borders; t-- > 1;) {
    lowerAt[t - 1] = std::max(lowerAt[t - 1], lowerAt[t]);
    upperAt[t - 1] = std::max(upperAt[t - 1], upperAt[t]);
  }
  std::unique_ptr<Band> best;
  for (Index border = 0; border < borders; ++border) {
    auto b = std::make_unique<Band>();
    b->size = factored - border;
    b->lower = lowerAt[border];
    b->upper = upperAt[border];
    b->storedUpper = b->upper;
    b->keepSolved = factored <= kRowSubstitutionLimit;
    // Border columns with entries in B's rows (rows are sorted: the first entry decides).
    for (Index j = 0; j < border; ++j) {
      const Index c = b->size + j;
      if (pattern.columnStart[c] < pattern.columnStart[c + 1] && pattern.rowIndex[pattern.columnStart[c]] < b->size)
        b->coupled.push_back(j);
    }
    if (!best || b->bytes(factored) < best->bytes(factored)) best = std::move(b);
  }
  if (terms_ == 0 && best && best->bytes(factored) <= 24.0 * static_cast<double>(entries) &&
      static_cast<BandIndex>(best->lower) <= kMaxPivotOffset) {
    band_ = std::move(best);
    Band& b = *band_;
    b.data.resize(b.size * b.columnLength());
    b.pivots.resize(b.size);
    if (b.keepSolved) b.solved.resize(b.coupled.size() * b.size);
    const Index k = b.border(factored);
    if (b.keepSolved && k > 0) {
      b.fStart.assign(k + 1, 0);
      for (Index c = 0; c < b.size; ++c)
        for (Index p = pattern.columnStart[c]; p < pattern.columnStart[c + 1]; ++p)
          if (const Index r = pattern.rowIndex[p]; r >= b.size && r < factored) ++b.fStart[r - b.size + 1];
      for (Index r = 0; r < k; ++r) b.fStart[r + 1] += b.fStart[r];
      b.fColumn.resize(b.fStart[k]);
      b.fEntry.resize(b.fStart[k]);
      b.fValue.resize(b.fStart[k]);
      std::vector<std::uint32_t> next(b.fStart.begin(), b.fStart.end() - 1);
      for (Index c = 0; c < b.size; ++c)
        for (Index p = pattern.columnStart[c]; p < pattern.columnStart[c + 1]; ++p)
          if (const Index r = pattern.rowIndex[p]; r >= b.size && r < factored) {
            const std::uint32_t q = next[r - b.size]++;
            b.fColumn[q] = static_cast<std::uint32_t>(c);
            b.fEntry[q] = static_cast<std::uint32_t>(p);
          }
    }
    b.schur.resize(k * k);
    b.schurColumns.resize(k);
    for (Index j = 0; j < k; ++j) b.schurColumns[j] = b.schur.data() + j * k;
    b.schurPivots.resize(k);
    klu_.reset();
    return;
  }
  // A_ff: in each leading column the rows below `factored` come first (rows are sorted).
  blockStart_.assign(factored + 1, 0);
  for (Index c = 0; c < factored; ++c) {
    Index k = pattern.columnStart[c];
    while (k < pattern.columnStart[c + 1] && pattern.rowIndex[k] < factored) ++k;
    blockStart_[c + 1] = blockStart_[c] + static_cast<int>(k - pattern.columnStart[c]);
  }
  matrix_ = std::make_unique<AugmentedMatrix>(pattern, factored, rankOne);
  if (terms_ > 0) augWork_.resize(factored + terms_);
  klu_defaults(&klu_->common);
  klu_->common.ordering = 0;  // AMD
  klu_->common.scale = scale;
}

NewtonSolver::~NewtonSolver() = default;

void NewtonSolver::setMatrix(std::span<const double> jacobian, double alpha, double beta) {
  jacobian_ = jacobian;
  alpha_ = alpha;
  beta_ = beta;
  for (std::size_t q = 0; q < rowEntry_.size(); ++q) rowValue_[q] = beta * jacobian[rowEntry_[q]];
  if (band_) {
    Band& b = *band_;
    for (std::size_t q = 0; q < b.fEntry.size(); ++q) b.fValue[q] = beta * jacobian[b.fEntry[q]];
    fillBand();
    b.factored = false;
    return;
  }
  matrix_->setValues(jacobian, alpha, beta);
}

void NewtonSolver::fillBand() {
  // B's entries (beta J, plus alpha on the diagonal) in band storage: (i, j) at data[j ldim + smu + i - j]; the
  // rest of the band is zero (GBTRF clears the fill rows above mu itself). E, F and D are read from J.
  Band& b = *band_;
  std::fill(b.data.begin(), b.data.end(), 0.0);
  for (Index c = 0; c < b.size; ++c) {
    double* column = b.data.data() + c * b.columnLength() + b.storedUpper;
    for (Index k = pattern_.columnStart[c]; k < pattern_.columnStart[c + 1] && pattern_.rowIndex[k] < b.size; ++k) {
      const Index r = pattern_.rowIndex[k];
      const double v = beta_ * jacobian_[k];
      column[static_cast<std::ptrdiff_t>(r) - static_cast<std::ptrdiff_t>(c)] = r == c ? v + alpha_ : v;
    }
  }
}

bool NewtonSolver::factor() {
  if (factored_ == 0) return true;
  if (band_) {
    // SUNLinSolSetup_Band's factorisation of B: LU with partial pivoting; a positive return is a zero pivot.
    Band& b = *band_;
    const auto m = static_cast<BandIndex>(b.size);
    auto ldim = static_cast<BandIndex>(b.columnLength());
    b.factored = false;
    ++factorizations_;
    BandIndex status = bandFactor(b.data.data(), ldim, m, static_cast<BandIndex>(b.upper),
                                  static_cast<BandIndex>(b.lower), static_cast<BandIndex>(b.storedUpper), b.pivots.data());
    if (status == kNeedsPivotRoom) {
      // A row swap: from now on the storage with the pivots' fill, B again from J (kept since setMatrix).
      b.storedUpper = b.fullUpper();
      std::vector<double>().swap(b.data);
      b.data.resize(b.size * b.columnLength());
      fillBand();
      ldim = static_cast<BandIndex>(b.columnLength());
      status = bandFactor(b.data.data(), ldim, m, static_cast<BandIndex>(b.upper), static_cast<BandIndex>(b.lower),
                          static_cast<BandIndex>(b.storedUpper), b.pivots.data());
    }
    if (status != 0) return false;
    const Index k = b.border(factored_);
    if (k > 0) {
      // S = D - F (B^-1 E): D first, then each coupled border column's B^-1 E_t (kept, or in a vector of the
      // block's size while it is used) and its products, each entry of S still reduced in ascending c.
      // Without B^-1 E kept: one column at a time in a block of the thread's spares (solver/scratch.hpp; a new
      // vector per factorisation above 16 384 nodes was mapped and faulted in afresh each time).
      std::optional<ScratchLease> column;
      if (!b.keepSolved) column.emplace(b.size * sizeof(double));
      auto solvedColumn = [&](Index t) { return b.keepSolved ? b.solved.data() + t * b.size : column->as<double>(); };
      std::fill(b.schur.begin(), b.schur.end(), 0.0);
      for (Index j = 0; j < k; ++j) {
        const Index c = b.size + j;
        for (Index p = pattern_.columnStart[c]; p < pattern_.columnStart[c + 1]; ++p) {
          const Index r = pattern_.rowIndex[p];
          if (r < b.size) continue;
          if (r >= factored_) break;
          const double v = beta_ * jacobian_[p];
          b.schur[j * k + (r - b.size)] = r == c ? v + alpha_ : v;
        }
      }
      for (Index t = 0; t < b.coupled.size(); ++t) {
        double* w = solvedColumn(t);
        std::fill(w, w + b.size, 0.0);
        const Index e = b.size + b.coupled[t];
        for (Index p = pattern_.columnStart[e]; p < pattern_.columnStart[e + 1] && pattern_.rowIndex[p] < b.size; ++p)
          w[pattern_.rowIndex[p]] = beta_ * jacobian_[p];
        bandSolve(b.data.data(), ldim, m, static_cast<BandIndex>(b.storedUpper), static_cast<BandIndex>(b.lower),
                  b.pivots.data(), w);
        if (!b.fStart.empty()) {
          // F by rows: each entry of S reduced in ascending c as below, in a register.
          for (Index r = 0; r < k; ++r) {
            double sum = b.schur[b.coupled[t] * k + r];
            for (std::uint32_t q = b.fStart[r]; q < b.fStart[r + 1]; ++q) sum -= b.fValue[q] * w[b.fColumn[q]];
            b.schur[b.coupled[t] * k + r] = sum;
          }
          continue;
        }
        for (Index c = 0; c < b.size; ++c)
          for (Index p = pattern_.columnStart[c]; p < pattern_.columnStart[c + 1]; ++p) {
            const Index r = pattern_.rowIndex[p];
            if (r < b.size) continue;
            if (r >= factored_) break;
            b.schur[b.coupled[t] * k + (r - b.size)] -= beta_ * jacobian_[p] * w[c];
          }
      }
      if (SUNDlsMat_denseGETRF(b.schurColumns.data(), static_cast<sunindextype>(k), static_cast<sunindextype>(k),
                               b.schurPivots.data()) != 0)
        return false;
    }
    b.factored = true;
    return true;
  }
  Klu& k = *klu_;
  std::vector<int>& starts = matrix_->start;
  std::vector<int>& rows = matrix_->row;
  int* Ap = starts.data();
  int* Ai = rows.data();
  double* Ax = matrix_->value.data();
  // A factorisation with a pivot search (KLU's klu_factor), and the tables of the by-rows refactorisation and solve
  // for its pivot order.
  auto factorWithPivoting = [&] {
    k.byRows = false;
    if (k.numeric) klu_free_numeric(&k.numeric, &k.common);
    k.numeric = klu_factor(Ap, Ai, Ax, k.symbolic.get(), &k.common);
    if (!k.numeric) return false;
    ++factorizations_;
    k.rowsFromFactors(Ap, Ai);
    return true;
  };
  if (fresh_ || !k.symbolic || !k.numeric) {
    k.symbolic.reset();
    const bool shareable = kluSize() <= kSharedAnalysisLimit;
    if (shareable) k.symbolic = findAnalysis(starts, rows);
    if (!k.symbolic) {
      k.symbolic = SharedSymbolic(klu_analyze(static_cast<int>(kluSize()), Ap, Ai, &k.common), SymbolicFree{});
      if (!k.symbolic) return false;
      if (shareable) keepAnalysis(starts, rows, k.symbolic);
    }
    if (!factorWithPivoting()) return false;
    if (klu_flops(k.symbolic.get(), k.numeric, &k.common)) factorFlops_ = k.common.flops;
    fresh_ = false;
    return true;
  }
  if (k.byRows ? !k.refactor(Ax) : !klu_refactor(Ap, Ai, Ax, k.symbolic.get(), k.numeric, &k.common)) return false;
  ++refactorizations_;
  // SUNDIALS' KLU module (SUNLinSolSetup_KLU): a cheap reciprocal condition estimate below eps^(2/3), confirmed
  // by klu_condest, makes it factorise afresh with new pivots.
  if (!klu_rcond(k.symbolic.get(), k.numeric, &k.common)) return false;
  const double threshold = std::pow(DBL_EPSILON, 2.0 / 3.0);
  if (k.common.rcond < threshold) {
    if (!klu_condest(Ap, Ax, k.symbolic.get(), k.numeric, &k.common)) return false;
    if (k.common.condest > 1.0 / threshold && !factorWithPivoting()) return false;
  }
  return true;
}

bool NewtonSolver::solve(std::span<double> x, const double* rhs) const {
  if (band_) {
    Band& b = *band_;  // GBTRS and GETRS take non-const pointers; they only read the factors
    if (factored_ > 0) {
      if (!b.factored) return false;
      double* const xs = x.data();
      const auto m = static_cast<BandIndex>(b.size), ldim = static_cast<BandIndex>(b.columnLength());
      const Index k = b.border(factored_);
      // b_1 for the second band solve (no B^-1 E kept): the caller's copy, else one here.
      std::vector<double> copy;
      if (k > 0 && !b.keepSolved && !b.coupled.empty() && (rhs == nullptr || rhs == xs)) {
        copy.assign(xs, xs + b.size);
        rhs = copy.data();
      }
      // x_1 := B^-1 b_1
      bandSolve(b.data.data(), ldim, m, static_cast<BandIndex>(b.storedUpper), static_cast<BandIndex>(b.lower),
                b.pivots.data(), xs);
      if (k > 0) {
        // x_2 := S^-1 (b_2 - F x_1), then x_1 -= (B^-1 E) x_2 (or x_1 := B^-1 (b_1 - E x_2)). Local copies of the pointers (stores into x could
        // otherwise alias them).
        const double* const J = jacobian_.data();
        const std::uint32_t* const rows = pattern_.rowIndex.data();
        const auto* const start = pattern_.columnStart.data();
        const Index size = b.size, f = factored_;
        const double beta = beta_;
        if (!b.fStart.empty()) {
          // F by rows: each border row's terms in ascending c as below (x_c = 0 left out as there), in a register.
          for (Index r = 0; r < k; ++r) {
            double sum = xs[size + r];
            for (std::uint32_t q = b.fStart[r]; q < b.fStart[r + 1]; ++q)
              if (const double xc = xs[b.fColumn[q]]; xc != 0.0) sum -= b.fValue[q] * xc;
            xs[size + r] = sum;
          }
        } else {
          for (Index c = 0; c < size; ++c) {
            const double xc = xs[c];
            if (xc == 0.0) continue;
            Index q = start[c];
            const Index end = start[c + 1];
            while (q < end && rows[q] < size) ++q;
            for (; q < end && rows[q] < f; ++q) xs[rows[q]] -= beta * J[q] * xc;
          }
        }
        SUNDlsMat_denseGETRS(b.schurColumns.data(), static_cast<sunindextype>(k), b.schurPivots.data(), xs + size);
        // x_1 := B^-1 (b_1 - E x_2), unless every coupled x_2 is zero (a fixed arterial temperature: the first
        // solve's x_1 is the answer, as the kept B^-1 E path leaves it).
        bool coupledZero = true;
        for (const Index j : b.coupled) coupledZero = coupledZero && xs[size + j] == 0.0;
        if (!b.keepSolved && !coupledZero) {
          std::copy(rhs, rhs + size, xs);
          for (const Index j : b.coupled) {
            const double x2 = xs[size + j];
            if (x2 == 0.0) continue;
            const Index e = size + j;
            for (Index q = start[e]; q < start[e + 1] && rows[q] < size; ++q) xs[rows[q]] -= beta * J[q] * x2;
          }
          bandSolve(b.data.data(), ldim, m, static_cast<BandIndex>(b.storedUpper), static_cast<BandIndex>(b.lower),
                    b.pivots.data(), xs);
        }
        for (Index t = 0; b.keepSolved && t < b.coupled.size(); ++t) {
          const double x2 = xs[size + b.coupled[t]];
          if (x2 == 0.0) continue;
          const double* const w = b.solved.data() + t * size;
          for (Index i = 0; i < size; ++i) xs[i] -= w[i] * x2;
        }
      }
    }
  } else if (factored_ > 0 && klu_->byRows) {
    // klu_solve's operations in its order, on the factors by rows (one block, no scaling): X = P b (b with zeros
    // for the rank-one terms' rows), X := L^-1 X, X := U^-1 X, x = Q X. KLU updates X[i] column by column,
    // X[i] -= L(i, k) X[k] for k ascending (klu_lsolve) and X[i] -= U(i, k) X[k] for k descending after
    // X[k] /= U(k, k) (klu_usolve); row i here subtracts the same products in the same order in a register.
    const Klu& k = *klu_;
    const klu_numeric& N = *k.numeric;
    const int n = N.n;
    const int* const P = N.Pnum;
    const int* const Q = k.symbolic->Q;
    const auto* const diagonal = static_cast<const double*>(N.Udiag);
    double* const X = k.work.data();
    double* const xs = x.data();
    const int f = static_cast<int>(factored_);
    const int* const lStart = k.lStart.data();
    const int* const lColumn = k.lColumn.data();
    const double* const lValue = k.lValue.data();
    for (int i = 0; i < n; ++i) {
      const int row = P[i];
      double s = row < f ? xs[row] : 0.0;
#pragma GCC unroll 4
      for (int q = lStart[i]; q < lStart[i + 1]; ++q) s -= lValue[q] * X[lColumn[q]];
      X[i] = s;
    }
    const int* const uStart = k.uStart.data();
    const int* const uColumn = k.uColumn.data();
    const double* const uValue = k.uValue.data();
    for (int i = n - 1; i >= 0; --i) {
      double s = X[i];
#pragma GCC unroll 4
      for (int q = uStart[i]; q < uStart[i + 1]; ++q) s -= uValue[q] * X[uColumn[q]];
      X[i] = s / diagonal[i];
    }
    for (int i = 0; i < n; ++i)
      if (Q[i] < f) xs[Q[i]] = X[i];
  } else if (factored_ > 0) {
    Klu& k = *klu_;
    if (terms_ > 0) {
      // [x; z] of the augmented system with right-hand side [b; 0].
      std::copy(x.begin(), x.begin() + static_cast<std::ptrdiff_t>(factored_), augWork_.begin());
      std::fill(augWork_.begin() + static_cast<std::ptrdiff_t>(factored_), augWork_.end(), 0.0);
      if (!klu_solve(k.symbolic.get(), k.numeric, static_cast<int>(kluSize()), 1, augWork_.data(), &k.common))
        return false;
      std::copy(augWork_.begin(), augWork_.begin() + static_cast<std::ptrdiff_t>(factored_), x.begin());
    } else if (!klu_solve(k.symbolic.get(), k.numeric, static_cast<int>(factored_), 1, x.data(), &k.common)) {
      return false;
    }
  }
  if (factored_ == pattern_.size) return true;
  // x_e = D^-1 (b_e - A_ef x_f), A_ef = beta J_ef. The same operations in the same order as before, on local
  // copies of the pointers and factors (a store into x could otherwise alias them, so each was loaded again for
  // every entry).
  double* const xs = x.data();
  const double* const J = jacobian_.data();
  const std::uint32_t* const rows = pattern_.rowIndex.data();
  const auto* const start = pattern_.columnStart.data();
  const int* const block = blockStart_.data();
  const double alpha = alpha_, beta = beta_;
  if (!rowStart_.empty()) {
    // Row by row: x_r - sum over c of (beta J_rc) x_c in ascending c, the terms with x_c = 0 left out as before
    // (subtracting +0.0 leaves every value, -0.0 included, unchanged).
    // Each row is summed first without that test: a term with x_c = 0 then subtracts (beta J_rc) 0 = +-0.0, which
    // leaves a nonzero partial sum as it is, and makes a zero one a zero of perhaps the other sign; the next nonzero
    // term gives the same value from either zero (0 - p = -0 - p = -p) and a NaN or infinite beta J_rc yields NaN.
    // So a sum that ends nonzero and not NaN is bit for bit the one with the test. A zero one is too unless x_r
    // starts as -0.0: in round-to-nearest a difference is -0.0 only for -0.0 - (+0.0) (a - b = 0 for a == b is
    // +0.0; IEEE 754-2008, sec. 6.3), so from any other start neither sum ever holds -0.0 and both end +0.0. For a
    // NaN sum, or a zero one from -0.0 (the rows of the energies that do not change, with b_r = -0.0 and
    // beta J_rc = -0.0), both sums are the same when no x_c is zero (the test then leaves no term out): x_f is
    // searched once for a zero, and only if it has one such a row is summed again with the test. Four rows at a time over their common length, each in its own register, so that four
    // chains of subtractions run side by side (each row's terms still in its own order); the rest of each row after.
    const std::uint32_t* const column = rowColumn_.data();
    const double* const value = rowValue_.data();
    const std::uint32_t* const first = rowStart_.data();
    auto product = [&](std::uint32_t q) { return value[q] * xs[column[q]]; };
    int zeroInLeading = -1;  // x_f holds a zero: -1 not searched yet
    auto leadingHasZero = [&] {
      if (zeroInLeading < 0) zeroInLeading = std::find(xs, xs + factored_, 0.0) != xs + factored_;
      return zeroInLeading == 1;
    };
    auto finish = [&](Index t, double sum) {
      const Index r = factored_ + t;
      if ((sum != sum || (sum == 0.0 && std::signbit(xs[r]))) && first[t] < first[t + 1] && leadingHasZero()) {
        sum = xs[r];
        for (std::uint32_t q = first[t]; q < first[t + 1]; ++q)
          if (const double xc = xs[column[q]]; xc != 0.0) sum -= value[q] * xc;
      }
      xs[r] = sum / (alpha + beta * J[start[r]]);
    };
    const Index trailing = pattern_.size - factored_;
    Index t = 0;
    for (; t + 4 <= trailing; t += 4) {
      double s0 = xs[factored_ + t], s1 = xs[factored_ + t + 1], s2 = xs[factored_ + t + 2], s3 = xs[factored_ + t + 3];
      const std::uint32_t b0 = first[t], b1 = first[t + 1], b2 = first[t + 2], b3 = first[t + 3];
      const std::uint32_t n0 = b1 - b0, n1 = b2 - b1, n2 = b3 - b2, n3 = first[t + 4] - b3;
      const std::uint32_t common = std::min(std::min(n0, n1), std::min(n2, n3));
      for (std::uint32_t k = 0; k < common; ++k) {
        s0 -= product(b0 + k);
        s1 -= product(b1 + k);
        s2 -= product(b2 + k);
        s3 -= product(b3 + k);
      }
#pragma GCC unroll 4
      for (std::uint32_t k = common; k < n0; ++k) s0 -= product(b0 + k);
#pragma GCC unroll 4
      for (std::uint32_t k = common; k < n1; ++k) s1 -= product(b1 + k);
#pragma GCC unroll 4
      for (std::uint32_t k = common; k < n2; ++k) s2 -= product(b2 + k);
#pragma GCC unroll 4
      for (std::uint32_t k = common; k < n3; ++k) s3 -= product(b3 + k);
      finish(t, s0);
      finish(t + 1, s1);
      finish(t + 2, s2);
      finish(t + 3, s3);
    }
    for (; t < trailing; ++t) {
      double sum = xs[factored_ + t];
#pragma GCC unroll 4
      for (std::uint32_t q = first[t]; q < first[t + 1]; ++q) sum -= product(q);
      finish(t, sum);
    }
    return true;
  }
  if (!band_) {
    for (Index c = 0; c < factored_; ++c) {
      const double xc = xs[c];
      if (xc == 0.0) continue;
      const Index end = start[c + 1];
      for (Index p = start[c] + static_cast<Index>(block[c + 1] - block[c]); p < end; ++p) xs[rows[p]] -= beta * J[p] * xc;
    }
  } else {
    for (Index c = 0; c < factored_; ++c) {
      const double xc = xs[c];
      if (xc == 0.0) continue;
      const Index end = start[c + 1];
      Index p = start[c];
      while (p < end && rows[p] < factored_) ++p;  // the block's rows come first in the column
      for (; p < end; ++p) xs[rows[p]] -= beta * J[p] * xc;
    }
  }
  for (Index r = factored_; r < pattern_.size; ++r) xs[r] /= alpha + beta * J[start[r]];
  return true;
}

long NewtonSolver::factorNonzeros() const {
  if (band_)
    return band_->factored ? static_cast<long>(band_->data.size() + band_->solved.size() + band_->schur.size()) : 0;
  return klu_->numeric ? static_cast<long>(klu_->numeric->lnz) + klu_->numeric->unz : 0;
}

bool NewtonSolver::solvesByRows() const { return klu_ && klu_->numeric && klu_->byRows; }

Index NewtonSolver::lowerBandwidth() const { return band_ ? band_->lower : 0; }
Index NewtonSolver::upperBandwidth() const { return band_ ? band_->upper : 0; }
Index NewtonSolver::bandBorder() const { return band_ ? band_->border(factored_) : 0; }

// ---- SUNDIALS wrappers ------------------------------------------------------------------------------

namespace {

NewtonSolver& solverOf(SUNLinearSolver S) { return *static_cast<NewtonSolver*>(S->content); }

}  // namespace

SUNLinearSolver NewtonSolver::sundialsSolver(SUNContext context) {
  SUNLinearSolver S = SUNLinSolNewEmpty(context);
  if (!S) return nullptr;
  S->content = this;
  S->ops->gettype = [](SUNLinearSolver) { return SUNLINEARSOLVER_DIRECT; };
  S->ops->getid = [](SUNLinearSolver) { return SUNLINEARSOLVER_CUSTOM; };
  // Called by CVodeReInit at every restart: the pattern never changes, so an existing analysis and factorisation
  // are kept (the next setup refactors numerically with their pivot order).
  S->ops->initialize = [](SUNLinearSolver) { return static_cast<int>(SUNLS_SUCCESS); };
  S->ops->setup = [](SUNLinearSolver ls, SUNMatrix) {
    return solverOf(ls).factor() ? static_cast<int>(SUNLS_SUCCESS) : static_cast<int>(SUNLS_PACKAGE_FAIL_REC);
  };
  S->ops->solve = [](SUNLinearSolver ls, SUNMatrix, N_Vector x, N_Vector b, realtype) {
    N_VScale(1.0, b, x);
    std::span<double> v(N_VGetArrayPointer(x), static_cast<std::size_t>(N_VGetLength(x)));
    return solverOf(ls).solve(v, N_VGetArrayPointer(b)) ? static_cast<int>(SUNLS_SUCCESS) : static_cast<int>(SUNLS_PACKAGE_FAIL_REC);
  };
  S->ops->free = [](SUNLinearSolver ls) {
    ls->content = nullptr;  // owned by the NewtonSolver
    SUNLinSolFreeEmpty(ls);
    return static_cast<int>(SUNLS_SUCCESS);
  };
  return S;
}

SUNMatrix NewtonSolver::shellMatrix(SUNContext context) {
  SUNMatrix A = SUNMatNewEmpty(context);
  if (!A) return nullptr;
  A->ops->getid = [](SUNMatrix) { return SUNMATRIX_CUSTOM; };
  A->ops->zero = [](SUNMatrix) { return 0; };
  A->ops->destroy = [](SUNMatrix m) { SUNMatFreeEmpty(m); };
  return A;
}

}  // namespace thermorph
