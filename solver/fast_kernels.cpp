#include "solver/fast_kernels.hpp"

#include <nvector/nvector_serial.h>
#include <sundials/sundials_math.h>
#include <sunmatrix/sunmatrix_sparse.h>

#include <algorithm>
#include <cmath>
#include <cstring>

// Built with -ffp-contract=off (CMakeLists.txt): a fused multiply-add would round differently from SUNDIALS.

namespace thermorph {
namespace {

using Real = sunrealtype;
using Size = sunindextype;

// The element-wise loops compiled twice, for AVX2 (4 doubles per instruction) and for the baseline x86-64 (SSE2,
// 2 per instruction), the version chosen once at load time by the processor (GCC's function multi-versioning,
// an ifunc). Element-wise operations round the same at any vector width, and the sums (dot products, norms) keep
// their index order (no reassociation without -ffast-math), so both versions give the same bits.
#if defined(__GNUC__) && !defined(__clang__) && defined(__x86_64__) && defined(__linux__)
#define THERMORPH_VECTOR_CLONES __attribute__((target_clones("avx2", "default")))
#else
#define THERMORPH_VECTOR_CLONES
#endif

inline Size length(N_Vector v) { return NV_LENGTH_S(v); }
inline Real* data(N_Vector v) { return NV_DATA_S(v); }

// ---- vectors: the cases and formulas of N_VLinearSum_Serial and friends ----

THERMORPH_VECTOR_CLONES
void linearSum(Real a, N_Vector x, Real b, N_Vector y, N_Vector z) {
  const Size n = length(x);
  const Real* xd = data(x);
  const Real* yd = data(y);
  Real* zd = data(z);
  auto axpy = [n](Real c, const Real* u, Real* v) {  // v += c u
    if (c == 1.0)
      for (Size i = 0; i < n; ++i) v[i] += u[i];
    else if (c == -1.0)
      for (Size i = 0; i < n; ++i) v[i] -= u[i];
    else
      for (Size i = 0; i < n; ++i) v[i] += c * u[i];
  };
  if (b == 1.0 && z == y) return axpy(a, xd, zd);
  if (a == 1.0 && z == x) return axpy(b, yd, zd);
  if (a == 1.0 && b == 1.0) {
    for (Size i = 0; i < n; ++i) zd[i] = xd[i] + yd[i];
    return;
  }
  if ((a == 1.0 && b == -1.0) || (a == -1.0 && b == 1.0)) {
    const Real* p = a == 1.0 ? xd : yd;  // the one with +1
    const Real* m = a == 1.0 ? yd : xd;
    for (Size i = 0; i < n; ++i) zd[i] = p[i] - m[i];
    return;
  }
  if (a == 1.0 || b == 1.0) {  // c * u + v with v the one with coefficient 1
    const Real c = a == 1.0 ? b : a;
    const Real* u = a == 1.0 ? yd : xd;
    const Real* v = a == 1.0 ? xd : yd;
    for (Size i = 0; i < n; ++i) zd[i] = (c * u[i]) + v[i];
    return;
  }
  if (a == -1.0 || b == -1.0) {  // c * u - v with v the one with coefficient -1
    const Real c = a == -1.0 ? b : a;
    const Real* u = a == -1.0 ? yd : xd;
    const Real* v = a == -1.0 ? xd : yd;
    for (Size i = 0; i < n; ++i) zd[i] = (c * u[i]) - v[i];
    return;
  }
  if (a == b) {
    for (Size i = 0; i < n; ++i) zd[i] = a * (xd[i] + yd[i]);
    return;
  }
  if (a == -b) {
    for (Size i = 0; i < n; ++i) zd[i] = a * (xd[i] - yd[i]);
    return;
  }
  for (Size i = 0; i < n; ++i) zd[i] = (a * xd[i]) + (b * yd[i]);
}

void constant(Real c, N_Vector z) { std::fill_n(data(z), length(z), c); }

THERMORPH_VECTOR_CLONES
void product(N_Vector x, N_Vector y, N_Vector z) {
  const Size n = length(x);
  const Real *xd = data(x), *yd = data(y);
  Real* zd = data(z);
  for (Size i = 0; i < n; ++i) zd[i] = xd[i] * yd[i];
}

THERMORPH_VECTOR_CLONES
void quotient(N_Vector x, N_Vector y, N_Vector z) {
  const Size n = length(x);
  const Real *xd = data(x), *yd = data(y);
  Real* zd = data(z);
  for (Size i = 0; i < n; ++i) zd[i] = xd[i] / yd[i];
}

THERMORPH_VECTOR_CLONES
void scale(Real c, N_Vector x, N_Vector z) {
  const Size n = length(x);
  const Real* xd = data(x);
  Real* zd = data(z);
  if (z == x) {
    for (Size i = 0; i < n; ++i) zd[i] *= c;
  } else if (c == 1.0) {
    std::memmove(zd, xd, static_cast<std::size_t>(n) * sizeof(Real));
  } else if (c == -1.0) {
    for (Size i = 0; i < n; ++i) zd[i] = -xd[i];
  } else {
    for (Size i = 0; i < n; ++i) zd[i] = c * xd[i];
  }
}

THERMORPH_VECTOR_CLONES
void absolute(N_Vector x, N_Vector z) {
  const Size n = length(x);
  const Real* xd = data(x);
  Real* zd = data(z);
  for (Size i = 0; i < n; ++i) zd[i] = std::abs(xd[i]);
}

THERMORPH_VECTOR_CLONES
void inverse(N_Vector x, N_Vector z) {
  const Size n = length(x);
  const Real* xd = data(x);
  Real* zd = data(z);
  for (Size i = 0; i < n; ++i) zd[i] = 1.0 / xd[i];
}

THERMORPH_VECTOR_CLONES
void addConstant(N_Vector x, Real b, N_Vector z) {
  const Size n = length(x);
  const Real* xd = data(x);
  Real* zd = data(z);
  for (Size i = 0; i < n; ++i) zd[i] = xd[i] + b;
}

Real dotProduct(N_Vector x, N_Vector y) {
  const Size n = length(x);
  const Real *xd = data(x), *yd = data(y);
  Real sum = 0.0;
  for (Size i = 0; i < n; ++i) sum += xd[i] * yd[i];
  return sum;
}

Real maxNorm(N_Vector x) {
  const Size n = length(x);
  const Real* xd = data(x);
  Real max = 0.0;
  for (Size i = 0; i < n; ++i)
    if (std::abs(xd[i]) > max) max = std::abs(xd[i]);
  return max;
}

Real weightedSquareSum(N_Vector x, N_Vector w) {
  const Size n = length(x);
  const Real *xd = data(x), *wd = data(w);
  Real sum = 0.0;  // in index order, as SUNDIALS (no reassociation: the norm is bit for bit the same)
  for (Size i = 0; i < n; ++i) {
    const Real p = xd[i] * wd[i];
    sum += p * p;
  }
  return sum;
}

Real weightedSquareSumMask(N_Vector x, N_Vector w, N_Vector id) {
  const Size n = length(x);
  const Real *xd = data(x), *wd = data(w), *idd = data(id);
  Real sum = 0.0;
  for (Size i = 0; i < n; ++i)
    if (idd[i] > 0.0) {
      const Real p = xd[i] * wd[i];
      sum += p * p;
    }
  return sum;
}

Real rootMean(Real sum, Size n) { return SUNRsqrt(sum / static_cast<Real>(n)); }
Real wrmsNorm(N_Vector x, N_Vector w) { return rootMean(weightedSquareSum(x, w), length(x)); }
Real wrmsNormMask(N_Vector x, N_Vector w, N_Vector id) {
  return rootMean(weightedSquareSumMask(x, w, id), length(x));
}

Real minimum(N_Vector x) {
  const Size n = length(x);
  const Real* xd = data(x);
  Real min = xd[0];
  for (Size i = 1; i < n; ++i)
    if (xd[i] < min) min = xd[i];
  return min;
}

THERMORPH_VECTOR_CLONES
void compare(Real c, N_Vector x, N_Vector z) {
  const Size n = length(x);
  const Real* xd = data(x);
  Real* zd = data(z);
  for (Size i = 0; i < n; ++i) zd[i] = std::abs(xd[i]) >= c ? 1.0 : 0.0;
}

sunbooleantype inverseTest(N_Vector x, N_Vector z) {
  const Size n = length(x);
  const Real* xd = data(x);
  Real* zd = data(z);
  sunbooleantype noZero = SUNTRUE;
  for (Size i = 0; i < n; ++i) {
    if (xd[i] == 0.0)
      noZero = SUNFALSE;
    else
      zd[i] = 1.0 / xd[i];
  }
  return noZero;
}

// ---- CSC matrices: SUNMatZero/Copy/ScaleAddI_Sparse without the cases that reallocate ----

bool compressedColumns(SUNMatrix A) {
  return SUNMatGetID(A) == SUNMATRIX_SPARSE && SM_SPARSETYPE_S(A) == CSC_MAT;
}

int zeroMatrix(SUNMatrix A) {
  // As SUNMatZero_Sparse: values, row indices and column pointers all zero.
  std::fill_n(SM_DATA_S(A), SM_NNZ_S(A), 0.0);
  std::fill_n(SM_INDEXVALS_S(A), SM_NNZ_S(A), Size{0});
  std::fill_n(SM_INDEXPTRS_S(A), SM_NP_S(A) + 1, Size{0});
  return SUNMAT_SUCCESS;
}

int copyMatrix(SUNMatrix A, SUNMatrix B) {
  if (!compressedColumns(A) || !compressedColumns(B) || SM_ROWS_S(A) != SM_ROWS_S(B) ||
      SM_COLUMNS_S(A) != SM_COLUMNS_S(B))
    return SUNMatCopy_Sparse(A, B);
  const Size nz = SM_INDEXPTRS_S(A)[SM_NP_S(A)];
  if (SM_NNZ_S(B) < nz) return SUNMatCopy_Sparse(A, B);  // B must grow: SUNDIALS reallocates
  // B = A, and B's unused tail zero (SUNMatCopy_Sparse zeroes B first).
  std::memcpy(SM_DATA_S(B), SM_DATA_S(A), static_cast<std::size_t>(nz) * sizeof(Real));
  std::memcpy(SM_INDEXVALS_S(B), SM_INDEXVALS_S(A), static_cast<std::size_t>(nz) * sizeof(Size));
  std::fill(SM_DATA_S(B) + nz, SM_DATA_S(B) + SM_NNZ_S(B), 0.0);
  std::fill(SM_INDEXVALS_S(B) + nz, SM_INDEXVALS_S(B) + SM_NNZ_S(B), Size{0});
  std::memcpy(SM_INDEXPTRS_S(B), SM_INDEXPTRS_S(A), static_cast<std::size_t>(SM_NP_S(A)) * sizeof(Size));
  SM_INDEXPTRS_S(B)[SM_NP_S(A)] = nz;
  return SUNMAT_SUCCESS;
}

int scaleAddIdentity(Real c, SUNMatrix A) {
  // A = c A + I when every diagonal entry is stored (always, for thermorph's Jacobians); else SUNDIALS' own,
  // which makes room for the missing ones.
  if (!compressedColumns(A)) return SUNMatScaleAddI_Sparse(c, A);
  const Size n = std::min(SM_ROWS_S(A), SM_COLUMNS_S(A));
  const Size* ptr = SM_INDEXPTRS_S(A);
  const Size* row = SM_INDEXVALS_S(A);
  if (SM_COLUMNS_S(A) != SM_ROWS_S(A)) return SUNMatScaleAddI_Sparse(c, A);
  for (Size j = 0; j < n; ++j) {
    bool found = false;
    for (Size p = ptr[j]; p < ptr[j + 1]; ++p)
      if (row[p] == j) {
        found = true;
        break;
      }
    if (!found) return SUNMatScaleAddI_Sparse(c, A);
  }
  Real* x = SM_DATA_S(A);
  for (Size j = 0; j < n; ++j)
    for (Size p = ptr[j]; p < ptr[j + 1]; ++p) x[p] = row[p] == j ? c * x[p] + 1.0 : c * x[p];
  return SUNMAT_SUCCESS;
}

}  // namespace

void useFastVectorOperations(N_Vector v) {
  if (N_VGetVectorID(v) != SUNDIALS_NVEC_SERIAL) return;
  N_Vector_Ops ops = v->ops;
  ops->nvlinearsum = linearSum;
  ops->nvconst = constant;
  ops->nvprod = product;
  ops->nvdiv = quotient;
  ops->nvscale = scale;
  ops->nvabs = absolute;
  ops->nvinv = inverse;
  ops->nvaddconst = addConstant;
  ops->nvdotprod = dotProduct;
  ops->nvmaxnorm = maxNorm;
  ops->nvwrmsnorm = wrmsNorm;
  ops->nvwrmsnormmask = wrmsNormMask;
  ops->nvmin = minimum;
  ops->nvcompare = compare;
  ops->nvinvtest = inverseTest;
  ops->nvdotprodlocal = dotProduct;
  ops->nvmaxnormlocal = maxNorm;
  ops->nvminlocal = minimum;
  ops->nvinvtestlocal = inverseTest;
  ops->nvwsqrsumlocal = weightedSquareSum;
  ops->nvwsqrsummasklocal = weightedSquareSumMask;
}

void useFastSparseOperations(SUNMatrix A) {
  if (!compressedColumns(A)) return;
  A->ops->zero = zeroMatrix;
  A->ops->copy = copyMatrix;
  A->ops->scaleaddi = scaleAddIdentity;
}

}  // namespace thermorph
