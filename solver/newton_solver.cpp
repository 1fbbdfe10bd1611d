#include "solver/newton_solver.hpp"

#include <klu.h>
#include <sundials/sundials_linearsolver.h>
#include <sundials/sundials_matrix.h>
#include <nvector/nvector_serial.h>

#include <cfloat>
#include <cstdint>
#include <cmath>
#include <limits>
#include <stdexcept>

#include <fmt/format.h>

namespace thermorph {

struct NewtonSolver::Klu {
  klu_common common{};
  klu_symbolic* symbolic = nullptr;
  klu_numeric* numeric = nullptr;
  ~Klu() {
    if (numeric) klu_free_numeric(&numeric, &common);
    if (symbolic) klu_free_symbolic(&symbolic, &common);
  }
};

NewtonSolver::NewtonSolver(const SparsePattern& pattern, Index factored, int scale)
    : pattern_(pattern), factored_(factored), klu_(std::make_unique<Klu>()) {
  if (factored > pattern.size || pattern.nonzeros() > static_cast<Index>(std::numeric_limits<int>::max()))
    throw std::invalid_argument("the Newton matrix is too large for KLU's 32-bit interface");
  // The trailing columns hold only their diagonal (nothing depends on those components).
  for (Index c = factored; c < pattern.size; ++c)
    if (pattern.columnStart[c + 1] - pattern.columnStart[c] != 1 || pattern.rowIndex[pattern.columnStart[c]] != c)
      throw std::invalid_argument(fmt::format("state component {} is left out of the factorisation but others "
                                              "depend on it", c));
  // A_ff: in each leading column the rows below `factored` come first (rows are sorted).
  blockStart_.assign(factored + 1, 0);
  for (Index c = 0; c < factored; ++c) {
    Index k = pattern.columnStart[c];
    while (k < pattern.columnStart[c + 1] && pattern.rowIndex[k] < factored) ++k;
    blockStart_[c + 1] = blockStart_[c] + static_cast<int>(k - pattern.columnStart[c]);
  }
  blockRow_.resize(static_cast<std::size_t>(blockStart_[factored]));
  for (Index c = 0; c < factored; ++c)
    for (int k = 0; k < blockStart_[c + 1] - blockStart_[c]; ++k)
      blockRow_[static_cast<std::size_t>(blockStart_[c] + k)] = static_cast<int>(pattern.rowIndex[pattern.columnStart[c] + k]);
  blockValues_.resize(blockRow_.size());
  klu_defaults(&klu_->common);
  klu_->common.ordering = 0;  // AMD
  klu_->common.scale = scale;
}

NewtonSolver::~NewtonSolver() = default;

void NewtonSolver::setMatrix(std::span<const double> jacobian, double alpha, double beta) {
  jacobian_ = jacobian;
  alpha_ = alpha;
  beta_ = beta;
  // The arithmetic of SUNDIALS' SUNMatScaleAddI on a copy of J: beta J, plus alpha on the diagonal.
  for (Index c = 0; c < factored_; ++c) {
    const Index first = pattern_.columnStart[c];
    for (int k = blockStart_[c]; k < blockStart_[c + 1]; ++k) {
      const double v = beta * jacobian[first + static_cast<Index>(k - blockStart_[c])];
      blockValues_[static_cast<std::size_t>(k)] = blockRow_[static_cast<std::size_t>(k)] == static_cast<int>(c) ? v + alpha : v;
    }
  }
}

bool NewtonSolver::factor() {
  Klu& k = *klu_;
  if (factored_ == 0) return true;
  int* Ap = blockStart_.data();
  int* Ai = blockRow_.data();
  double* Ax = blockValues_.data();
  if (fresh_ || !k.symbolic || !k.numeric) {
    if (k.symbolic) klu_free_symbolic(&k.symbolic, &k.common);
    k.symbolic = klu_analyze(static_cast<int>(factored_), Ap, Ai, &k.common);
    if (!k.symbolic) return false;
    if (k.numeric) klu_free_numeric(&k.numeric, &k.common);
    k.numeric = klu_factor(Ap, Ai, Ax, k.symbolic, &k.common);
    if (!k.numeric) return false;
    fresh_ = false;
    return true;
  }
  if (!klu_refactor(Ap, Ai, Ax, k.symbolic, k.numeric, &k.common)) return false;
  // SUNDIALS' KLU module (SUNLinSolSetup_KLU): a cheap reciprocal condition estimate below eps^(2/3), confirmed
  // by klu_condest, makes it factorise afresh with new pivots.
  if (!klu_rcond(k.symbolic, k.numeric, &k.common)) return false;
  const double threshold = std::pow(DBL_EPSILON, 2.0 / 3.0);
  if (k.common.rcond < threshold) {
    if (!klu_condest(Ap, Ax, k.symbolic, k.numeric, &k.common)) return false;
    if (k.common.condest > 1.0 / threshold) {
      klu_free_numeric(&k.numeric, &k.common);
      k.numeric = klu_factor(Ap, Ai, Ax, k.symbolic, &k.common);
      if (!k.numeric) return false;
    }
  }
  return true;
}

bool NewtonSolver::solve(std::span<double> x) const {
  Klu& k = *klu_;
  if (factored_ > 0 && !klu_solve(k.symbolic, k.numeric, static_cast<int>(factored_), 1, x.data(), &k.common))
    return false;
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
  for (Index c = 0; c < factored_; ++c) {
    const double xc = xs[c];
    if (xc == 0.0) continue;
    const Index end = start[c + 1];
    for (Index p = start[c] + static_cast<Index>(block[c + 1] - block[c]); p < end; ++p) xs[rows[p]] -= beta * J[p] * xc;
  }
  for (Index r = factored_; r < pattern_.size; ++r) xs[r] /= alpha + beta * J[start[r]];
  return true;
}

long NewtonSolver::factorNonzeros() const {
  return klu_->numeric ? static_cast<long>(klu_->numeric->lnz) + klu_->numeric->unz : 0;
}

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
    return solverOf(ls).solve(v) ? static_cast<int>(SUNLS_SUCCESS) : static_cast<int>(SUNLS_PACKAGE_FAIL_REC);
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
