// Companion matrix of a VAR(p), its eigenvalues, the spectral radius and its gradient.
//
// F (np x np) has first block row [A_1 ... A_p] and the identity I_{n(p-1)} below it, left
// aligned. The VAR is stationary iff every eigenvalue of F lies strictly inside the unit circle,
// i.e. the spectral radius rho = max |lambda_i| < 1 (Luetkepohl 2005, Sec. 2.1.1).
//
// Delta method: for a simple eigenvalue lambda with right eigenvector v and left eigenvector u
// (u^H F = lambda u^H), d lambda / d F_ab = conj(u_a) v_b / (u^H v) (Magnus & Neudecker 1999,
// Ch. 8), and d|lambda| = Re(conj(lambda) d lambda) / |lambda|. Only the first n rows of F depend
// on theta, so the gradient has n k entries (zero on deterministic terms) and SE(rho) = sqrt(g' V
// g). A complex pair shares one modulus and gives the same gradient.
#pragma once

#include <Eigen/Core>
#include <complex>
#include <vector>

#include "rimwatch/engine/status.h"
#include "rimwatch/engine/var_spec.h"

namespace rimwatch {

// REQUIRES: phi is n x k for spec, spec.lags >= 1.
Eigen::MatrixXd CompanionMatrix(const VarSpec& spec, const Eigen::Ref<const Eigen::MatrixXd>& phi);

struct CompanionSpectrum {
  // Eigenvalues sorted by modulus, largest first; equal moduli: larger imaginary part first.
  std::vector<std::complex<double>> eigenvalues;
  double spectral_radius = 0.0;
  // d rho / d theta (n k entries) when gradient_status is OK; otherwise it says why not
  // (a repeated top eigenvalue, a modulus tie between distinct eigenvalues, rho = 0).
  Status gradient_status = Status::Unavailable("gradient not requested");
  Eigen::VectorXd gradient;
};

// Fails with kNumerical when the eigen solver does not converge.
//
// shifts (optional, in and out; for a caller that computes the spectrum of a slowly changing
// matrix, such as a monitor on every row): the eigenvalues of its previous call in the
// solver's order, used as QR shifts (RealEigenvalues, eigenvalues.h), and replaced by this
// call's when the small solver ran (calls with the gradient leave it unchanged). Start it empty.
// The results depend on its content in the last bits only; a caller that must reproduce a run
// keeps one per sequence of calls (per model), never shared across sequences.
Status ComputeCompanionSpectrum(const VarSpec& spec, const Eigen::Ref<const Eigen::MatrixXd>& phi,
                                bool with_gradient, CompanionSpectrum* out,
                                Eigen::VectorXcd* shifts = nullptr);

}  // namespace rimwatch
