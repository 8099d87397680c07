#include "rimwatch/engine/companion.h"

#include <Eigen/Dense>
#include <Eigen/Eigenvalues>
#include <algorithm>
#include <cmath>
#include <numeric>

#include "rimwatch/engine/eigenvalues.h"

namespace rimwatch {
namespace {

// Relative distance under which two eigenvalues count as one repeated eigenvalue. A defective
// (Jordan) pair perturbed by rounding splits by about sqrt(machine epsilon) ~ 1.5e-8.
constexpr double kRepeatTolerance = 1e-6;

// Largest modulus first (ma = |a|, mb = |b|, computed once per eigenvalue).
bool ModulusOrder(double ma, const std::complex<double>& a, double mb,
                  const std::complex<double>& b) {
  if (ma != mb) return ma > mb;
  if (a.imag() != b.imag()) return a.imag() > b.imag();
  return a.real() > b.real();
}

// The companion matrix into *f (its storage reused when it has the shape already).
void FillCompanionMatrix(const VarSpec& spec, const Eigen::Ref<const Eigen::MatrixXd>& phi,
                         Eigen::MatrixXd* f) {
  const int n = spec.n();
  const int np = n * spec.lags;
  f->setZero(np, np);
  f->topRows(n) = phi.rightCols(np);
  if (spec.lags > 1) f->bottomLeftCorner(np - n, np - n).setIdentity();
}

}  // namespace

Eigen::MatrixXd CompanionMatrix(const VarSpec& spec, const Eigen::Ref<const Eigen::MatrixXd>& phi) {
  Eigen::MatrixXd f;
  FillCompanionMatrix(spec, phi, &f);
  return f;
}

Status ComputeCompanionSpectrum(const VarSpec& spec, const Eigen::Ref<const Eigen::MatrixXd>& phi,
                                bool with_gradient, CompanionSpectrum* out,
                                Eigen::VectorXcd* shifts) {
  const int n = spec.n();
  const int k = spec.k();
  const int d = spec.num_deterministic();
  // Per-thread scratch: a monitor's row (no gradient) allocates nothing here once warm.
  thread_local Eigen::MatrixXd f;
  thread_local Eigen::VectorXcd fast;
  thread_local std::vector<double> modulus;
  thread_local std::vector<int> order;
  FillCompanionMatrix(spec, phi, &f);
  // Eigenvalues only (every row of a monitor): the small Hessenberg QR of eigenvalues.h. With
  // the gradient: Eigen's solver, for the eigenvectors as well (and as the fallback).
  // RealEigenvalues ignores shifts of the wrong size (an empty vector on the first call).
  const bool quick = !with_gradient && RealEigenvalues(f, &fast, shifts);
  if (quick && shifts != nullptr) *shifts = fast;
  Eigen::EigenSolver<Eigen::MatrixXd> es;
  if (!quick) {
    es.compute(f, with_gradient);
    if (es.info() != Eigen::Success) {
      return Status::Numerical("companion eigen solver did not converge");
    }
  }
  const Eigen::VectorXcd& lambda = quick ? fast : es.eigenvalues();
  const int np = static_cast<int>(lambda.size());
  modulus.resize(static_cast<std::size_t>(np));
  for (int i = 0; i < np; ++i) modulus[i] = std::abs(lambda[i]);
  order.resize(static_cast<std::size_t>(np));
  std::iota(order.begin(), order.end(), 0);
  std::sort(order.begin(), order.end(), [&](int a, int b) {
    return ModulusOrder(modulus[a], lambda[a], modulus[b], lambda[b]);
  });
  out->eigenvalues.resize(np);
  for (int i = 0; i < np; ++i) out->eigenvalues[i] = lambda[order[i]];
  const int top = order[0];
  const std::complex<double> lt = lambda[top];
  out->spectral_radius = modulus[top];
  out->gradient.resize(0);
  if (!with_gradient) {
    out->gradient_status = Status::Unavailable("gradient not requested");
    return Status::Ok();
  }
  const double rho = out->spectral_radius;
  if (rho == 0.0) {
    out->gradient_status = Status::Unavailable("spectral radius is 0; its gradient is undefined");
    return Status::Ok();
  }
  const double scale = std::max(1.0, rho);
  for (int j = 0; j < np; ++j) {
    if (j == top) continue;
    const std::complex<double> lj = lambda[j];
    const bool partner =
        lt.imag() != 0.0 && std::abs(lj - std::conj(lt)) <= kRepeatTolerance * scale;
    if (partner) continue;
    if (std::abs(lj - lt) <= kRepeatTolerance * scale) {
      out->gradient_status = Status::Unavailable(
          "the top eigenvalue is repeated (defective or multiple); the spectral radius is not "
          "differentiable there and its delta-method SE is unavailable");
      return Status::Ok();
    }
    if (std::abs(std::abs(lj) - rho) <= kRepeatTolerance * scale) {
      out->gradient_status = Status::Unavailable(
          "the spectral radius is attained by distinct eigenvalues of equal modulus; it is not "
          "differentiable there and its delta-method SE is unavailable");
      return Status::Ok();
    }
  }
  const Eigen::MatrixXcd& v = es.eigenvectors();
  Eigen::PartialPivLU<Eigen::MatrixXcd> lu(v);
  const Eigen::MatrixXcd w = lu.inverse();  // rows of V^{-1} are left eigenvectors, u^H v = 1
  if (!w.allFinite()) {
    out->gradient_status = Status::Unavailable("eigenvector matrix is singular (defective F)");
    return Status::Ok();
  }
  out->gradient = Eigen::VectorXd::Zero(n * k);
  const std::complex<double> cl = std::conj(lt);
  for (int a = 0; a < n; ++a) {
    const std::complex<double> ua = w(top, a);
    for (int b = 0; b < np; ++b) {
      const std::complex<double> dl = ua * v(b, top);
      out->gradient[a * k + d + b] = (cl * dl).real() / rho;
    }
  }
  out->gradient_status = Status::Ok();
  return Status::Ok();
}

}  // namespace rimwatch
