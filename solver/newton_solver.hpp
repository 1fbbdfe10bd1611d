#pragma once
//! Direct solver of the Newton systems A x = b with A = alpha I + beta J (CVODE: I - gamma J; KINSOL: J), on
//! SuiteSparse KLU's 32-bit interface (klu_*, int indices) and the assembly's 32-bit pattern, behind SUNDIALS'
//! generic linear-solver interface.
//!
//! The state's trailing components that nothing depends on (the cumulative energies: their columns of J hold
//! only their diagonal) are left out of the factorisation: A is block lower triangular,
//!   [ A_ff   0 ] [x_f]   [b_f]
//!   [ A_ef   D ] [x_e] = [b_e],   D diagonal,
//! so x_f = A_ff^-1 b_f (KLU) and x_e = D^-1 (b_e - A_ef x_f): the same solution as an LU of the whole matrix
//! (block forward substitution; Golub & Van Loan 2013, sec. 3.1), with the factors, the matrix and KLU's work
//! space of the leading block only (about 3 of the 7 Jacobian entries per node of a body with budgets).
//!
//! A leading block that is narrow in its natural order but for a few components at its end (a 1-D radial grid:
//! tridiagonal, and its arterial and venous blood nodes coupled to every cell) is factorised instead by SUNDIALS'
//! band LU with partial pivoting (the routines of SUNLinSol_Band, compiled here) and the few by their
//! Schur complement, chosen when that storage is smaller than the lower bound of the KLU path (the block's values
//! and pattern, and L + U with at least as many entries; the band's storage counted with the room for the pivots'
//! fill): about 25 bytes per node for the radial grid above 5000 nodes (three values per column while no row swap
//! has needed the fourth, one byte per pivot, no B^-1 E kept) against about 200 for KLU (its values, pattern, L
//! and U, and Numeric's and Symbolic's arrays of length n).
//!
//! On the KLU path, a system of up to 5000 components whose factors form one block (no block triangular form's
//! off-diagonal blocks) and have no row scaling is refactorised with klu_refactor's operations in its order on
//! KLU's own factors (the column pointers and A's scatter worked out once per pivot order) and solved with L and U
//! copied by rows, each row subtracting klu_solve's products in klu_solve's order in a register: the same numbers
//! as klu_refactor and klu_solve, bit for bit, in about 0.9 and 0.65 of their instructions. klu_analyze,
//! klu_factor (the pivot search), klu_rcond and klu_condest stay KLU's.
#include <cstdint>
#include <memory>
#include <span>
#include <vector>

#include "solver/assembly.hpp"

struct _generic_SUNMatrix;
struct _generic_SUNLinearSolver;
struct _SUNContext;

namespace thermorph {

//! The matrix that NewtonSolver's KLU path factorises, A = alpha I + beta J on the leading block [0, factored),
//! with rank-one terms u v^T of J that the pattern leaves out (NetworkSystem::junctionTerms) as the augmented matrix
//!   [ A_ff     beta U ]
//!   [ V^T        -I   ]     (one auxiliary row and column per term: z_t = v_t . x),
//! in compressed columns with 32-bit indices (KLU's int interface; Eigen::SparseMatrix<double, ColMajor, int>):
//! leading column c holds A_ff's rows (J's rows below `factored`, ascending) then row factored + t with v_t[c] for
//! each term t that has c; term column factored + t holds u_t's rows (ascending) and its -1 on the diagonal. One
//! builder for the transient and steady Newton solves and the steady implicit-function sensitivities
//! (drivers/forward_sensitivity.cpp), so that all factorise the same matrix. Without terms: A_ff alone.
class AugmentedMatrix {
 public:
  //! `pattern`: J's CSC pattern (kept by reference); terms with an empty u or v are left out. std::invalid_argument
  //! if a term leaves the leading block, repeats a row or column, or the matrix is too large for 32 bits.
  AugmentedMatrix(const SparsePattern& pattern, Index factored, std::span<const RankOneTerm> rankOne = {});
  //! The values from J's (pattern order): beta J, plus alpha on the diagonal (the arithmetic of SUNDIALS'
  //! SUNMatScaleAddI), and beta u; the V^T rows and the -1 are constant.
  void setValues(std::span<const double> jacobian, double alpha, double beta);
  Index size() const { return factored_ + terms_; }
  Index factored() const { return factored_; }
  Index terms() const { return terms_; }
  Index nonzeros() const { return row.size(); }
  std::vector<int> start, row;  //!< column starts [size + 1], rows [nonzeros]
  std::vector<double> value;    //!< [nonzeros]

 private:
  const SparsePattern& pattern_;
  Index factored_ = 0, terms_ = 0;
  std::vector<int> blockCount_;              //!< A_ff's entries in each leading column
  std::vector<std::vector<double>> termU_;   //!< u of each term in the order of its column's rows
};

class NewtonSolver {
 public:
  //! `pattern`: the Jacobian's CSC pattern (kept by reference); `factored`: the leading block [0, factored) that
  //! is factorised (every later column must hold only its diagonal entry: std::invalid_argument otherwise);
  //! `scale`: KLU's row scaling option (-1: none and no check of the matrix, 0: none, 1: sum, 2: max).
  //! Ordering: AMD.
  //! `rankOne`: terms u v^T of J that the pattern leaves out (NetworkSystem::junctionTerms; rows and columns in the
  //! leading block): A = alpha I + beta (J_pattern + sum u v^T) is factorised as the sparse augmented matrix
  //!   [ A_s      beta U ] [x]   [b]
  //!   [ V^T        -I   ] [z] = [0]     (one auxiliary unknown z_r = v_r . x per term),
  //! whose first block row is A_s x + beta U V^T x = b: the same x as an LU of A (block elimination; Golub & Van
  //! Loan 2013, sec. 3.2.10), with 2 m entries per term instead of a dense m x m block (m^3/3 flops). KLU path only.
  NewtonSolver(const SparsePattern& pattern, Index factored, int scale, std::span<const RankOneTerm> rankOne = {});
  ~NewtonSolver();
  NewtonSolver(const NewtonSolver&) = delete;
  NewtonSolver& operator=(const NewtonSolver&) = delete;

  //! A = alpha I + beta J from J's values in the pattern's order. J is read again by solve() for the trailing
  //! rows: keep it unchanged until the next setMatrix.
  void setMatrix(std::span<const double> jacobian, double alpha, double beta);
  //! Factorise A: the first time (or after forget()) KLU's symbolic analysis and a pivoting factorisation;
  //! later a numeric refactorisation with the kept pivot order, factorised afresh when the reciprocal condition
  //! estimates say it is poor (the rule of SUNDIALS' KLU module). False if KLU fails (singular matrix).
  bool factor();
  //! x := A^-1 x (in place) [size]. False if KLU fails.
  //! `rhs`: the right-hand side x held on entry, if the caller keeps it unchanged during the call (CVODE's linear
  //! solve does): a band block of more than 5000 components without a kept B^-1 E reads it for its second band
  //! solve instead of copying x first.
  bool solve(std::span<double> x, const double* rhs = nullptr) const;
  //! The next factor() analyses and factorises from scratch.
  void forget() { fresh_ = true; }
  //! Entries of L + U of the last factorisation (0 before the first); band: the band storage's entries.
  long factorNonzeros() const;
  //! Factorisations so far: with a pivot search (KLU's klu_factor, or every band LU) and numeric refactorisations
  //! with the kept pivots (klu_refactor); floating-point operations of KLU's last pivoting factorisation
  //! (klu_flops; 0 for the band path). Counters only: the benchmark of grid refinement reports them.
  long factorizations() const { return factorizations_; }
  long refactorizations() const { return refactorizations_; }
  double factorFlops() const { return factorFlops_; }
  //! The leading block is factorised by the band LU (else KLU); its lower and upper bandwidths (band only).
  bool banded() const { return band_ != nullptr; }
  Index lowerBandwidth() const;
  Index upperBandwidth() const;
  //! Components at the end of the leading block eliminated through their Schur complement (band only).
  Index bandBorder() const;
  Index size() const { return pattern_.size; }
  Index factoredSize() const { return factored_; }
  //! The last factorisation is solved with KLU's factors by rows (one block, no row scaling, up to 5000
  //! components): klu_solve's operations in its order (bit for bit), without its column sweeps. Else klu_solve.
  bool solvesByRows() const;

  //! A SUNDIALS direct linear solver (SUNLINEARSOLVER_CUSTOM) whose setup factorises the matrix last given to
  //! setMatrix and whose solve calls solve(); its SUNLinSolInitialize keeps an existing factorisation (the
  //! pattern never changes: a restart refactors numerically with the earlier pivot order). The caller owns it
  //! (SUNLinSolFree) and keeps this object alive while it is used.
  _generic_SUNLinearSolver* sundialsSolver(_SUNContext* context);
  //! An empty SUNMatrix (SUNMATRIX_CUSTOM, no data) for CVODE's and KINSOL's matrix-based interfaces: the matrix
  //! lives here; caller owns it (SUNMatDestroy). SUNMatZero on it does nothing.
  static _generic_SUNMatrix* shellMatrix(_SUNContext* context);

 private:
  const SparsePattern& pattern_;
  Index factored_ = 0;
  std::vector<int> blockStart_;  //!< A_ff's entries in each leading column, cumulated (the pattern's first ones)
  //! The matrix KLU factorises: A_ff, with rank-one terms augmented (AugmentedMatrix); and a work vector.
  std::unique_ptr<AugmentedMatrix> matrix_;
  Index terms_ = 0;
  mutable std::vector<double> augWork_;
  Index kluSize() const { return factored_ + terms_; }
  //! A_ef row by row (systems of up to 5000 components; larger ones go column by column and keep no copy): for
  //! trailing row r, entries [rowStart_[r - factored], rowStart_[r - factored + 1]) of rowColumn_ (the column c) and
  //! rowEntry_ (the position of J's entry); rowValue_ = beta J at that position, set by setMatrix.
  std::vector<std::uint32_t> rowStart_, rowColumn_, rowEntry_;
  std::vector<double> rowValue_;
  std::span<const double> jacobian_;
  double alpha_ = 1.0, beta_ = 0.0;
  struct Klu;  //!< KLU's common parameters, symbolic analysis and numeric factorisation
  std::unique_ptr<Klu> klu_;
  struct Band;  //!< band storage of A_ff, its column pointers and pivots (SUNDIALS' band LU)
  std::unique_ptr<Band> band_;
  void fillBand();  //!< A_ff's band part from jacobian_, alpha_, beta_ into the band storage
  bool fresh_ = true;
  long factorizations_ = 0, refactorizations_ = 0;
  double factorFlops_ = 0.0;
};

}  // namespace thermorph
