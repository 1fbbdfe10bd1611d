#pragma once
//! Compiled-here versions of the serial N_Vector and sparse SUNMatrix operations that CVODE and KINSOL call in
//! their inner loops (linear sums, scalings, weighted RMS norms; the matrix copy, zero and I + cA of every linear
//! setup). SUNDIALS lets a program replace the operations of a vector or matrix (`ops` table, inherited by every
//! clone); the arithmetic here is element for element and in the order of SUNDIALS 6.4 (nvector_serial.c,
//! sunmatrix_sparse.c), so results are bit for bit the same. Why: Debian 12's SUNDIALS 6.4.1 libraries are built
//! without optimisation (-O0; DEVELOPERS.md, "Benchmarks"), and these loops were half of the integrator's time
//! at a few hundred nodes.
struct _generic_N_Vector;
struct _generic_SUNMatrix;

namespace thermorph {

//! Replace the operations of serial vector `v` (and so of every vector cloned from it).
void useFastVectorOperations(_generic_N_Vector* v);
//! Replace the copy, zero and scale-add-identity operations of CSC sparse matrix `A` (and of its clones); cases
//! that would change the matrix's storage (a missing diagonal entry, too little room) go to SUNDIALS' own.
void useFastSparseOperations(_generic_SUNMatrix* A);

}  // namespace thermorph
