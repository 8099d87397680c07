// Eigenvalues of a small real square matrix, without eigenvectors: what the stability monitor
// needs on every row (the spectral radius of the companion matrix), at a fraction of the cost
// of a general eigen solver built for large matrices.
//
// Method: the matrix is scaled by its largest absolute entry, reduced to upper Hessenberg form
// by Householder reflections (Golub & Van Loan, Matrix Computations, 4th ed. 2013, Alg. 7.4.2),
// and the Hessenberg matrix is deflated by Francis double-shift QR steps with the deflation and
// exceptional-shift rules of EISPACK's HQR (Martin, Peters & Wilkinson 1970, "The QR algorithm
// for real Hessenberg matrices", Numer. Math. 14, 219-231; Handbook for Automatic Computation
// II, Contribution II/14). Backward stable: the computed eigenvalues are exact for a matrix
// within a small multiple of machine epsilon times ||A|| of A, so a simple eigenvalue is
// accurate to about eps ||A|| / (its condition); a defective (Jordan) one only to about
// sqrt(eps), as with any solver.
//
// Storage: one scratch buffer of m^2 doubles per thread, kept between calls (no allocation on
// the per-row path once it has grown). Thread safety: reentrant; calls on different threads use
// different buffers.
#pragma once

#include <Eigen/Core>

namespace rimwatch {

// The m eigenvalues of a (m x m), in no particular order; a complex pair appears as both
// conjugates. False (and *out unspecified) when a has a non-finite entry or an eigenvalue did not
// converge within 30 QR steps (never seen in tests; callers fall back to a general solver).
// REQUIRES: a is square; out != shifts.
//
// shifts (optional): approximate eigenvalues in the order an earlier call returned them, e.g.
// those of the previous row's companion matrix, which changes little from row to row. The first
// QR step of each deflation then uses the given pair for that position as its double shift
// instead of the eigenvalues of the trailing 2 x 2 block (EISPACK's choice); later steps and the
// exceptional shifts are unchanged. Good shifts save QR steps (about 10.5 -> 7-8 per 6 x 6
// companion matrix drifting by 1e-4-1e-3 a row); poor or unusable ones (not a real pair or a
// conjugate pair, non-finite, the wrong size: ignored) cost at most that first step. Either way
// the results are eigenvalues of a to the same backward accuracy; they may differ from a call
// without shifts in the last bits, so a caller that must reproduce a run passes the same shifts.
bool RealEigenvalues(const Eigen::Ref<const Eigen::MatrixXd>& a, Eigen::VectorXcd* out,
                     const Eigen::VectorXcd* shifts = nullptr);

}  // namespace rimwatch
