#include "rimwatch/engine/augmented_factor.h"

#include <Eigen/Dense>
#include <algorithm>
#include <cmath>

namespace rimwatch {
namespace {

// sqrt(a^2 + b^2). The plain formula where squaring the larger magnitude can neither overflow nor
// underflow (it lies in [1e-150, 1e150]; the smaller one may underflow harmlessly): a relative
// error of about one rounding, as for any Givens rotation (Golub & Van Loan, Matrix Computations,
// 4th ed. 2013, Sec. 5.1.8). Elsewhere std::hypot, which scales. glibc's hypot is several times
// dearer than this, and Fold calls it k + n times a row for every estimator of a model.
inline double Hypot(double a, double b) {
  const double m = std::max(std::abs(a), std::abs(b));
  if (m >= 1e-150 && m <= 1e150) return std::sqrt(a * a + b * b);
  return std::hypot(a, b);
}

// Forward substitution on the leading size x size block of the upper triangular r:
// solves R' u = b (column i of R is row i of R', contiguous) and returns |u|^2. Plain loops:
// Eigen's triangular solvers cost more in set-up than the arithmetic at these sizes.
double ForwardSubstitution(const Eigen::MatrixXd& r, int size,
                           const Eigen::Ref<const Eigen::VectorXd>& b, Eigen::VectorXd* u) {
  double norm2 = 0.0;
  for (int i = 0; i < size; ++i) {
    double w = b[i];
    for (int l = 0; l < i; ++l) w -= r(l, i) * (*u)[l];
    (*u)[i] = w / r(i, i);
    norm2 += (*u)[i] * (*u)[i];
  }
  return norm2;
}

}  // namespace

AugmentedFactor::AugmentedFactor(int k, int n)
    : k_(k),
      n_(n),
      r_(Eigen::MatrixXd::Zero(k + n, k + n)),
      work_(k + n),
      cos_(k + n),
      sin_(k + n) {}

void AugmentedFactor::Reset() { r_.setZero(); }

void AugmentedFactor::Scale(double factor) {
  if (factor == 1.0) return;
  r_ *= std::sqrt(factor);
}

void AugmentedFactor::Fold(const Eigen::Ref<const Eigen::VectorXd>& z) {
  const int m = k_ + n_;
  work_ = z;
  for (int i = 0; i < m; ++i) {
    const double zi = work_[i];
    if (zi == 0.0) continue;
    const double rii = r_(i, i);
    const double h = Hypot(rii, zi);
    const double inv = 1.0 / h;  // one division for both (h > 0: zi != 0)
    const double c = rii * inv;
    const double s = zi * inv;
    r_(i, i) = h;
    for (int j = i + 1; j < m; ++j) {
      const double rij = r_(i, j);
      const double zj = work_[j];
      r_(i, j) = c * rij + s * zj;
      work_[j] = c * zj - s * rij;
    }
  }
}

bool AugmentedFactor::Downdate(const Eigen::Ref<const Eigen::VectorXd>& z, double min_slack) {
  const int m = k_ + n_;
  for (int i = 0; i < m; ++i) {
    if (r_(i, i) == 0.0) return false;
  }
  // Solve R' a = z.
  Eigen::VectorXd& a = work_;
  const double norm2 = ForwardSubstitution(r_, m, z, &a);
  if (!std::isfinite(norm2) || 1.0 - norm2 <= min_slack) return false;
  double alpha = std::sqrt(1.0 - norm2);
  Eigen::VectorXd& c = cos_;
  Eigen::VectorXd& s = sin_;
  for (int i = m - 1; i >= 0; --i) {
    const double scale = alpha + std::abs(a[i]);
    const double aa = alpha / scale;
    const double bb = a[i] / scale;
    const double norm = std::sqrt(aa * aa + bb * bb);
    c[i] = aa / norm;
    s[i] = bb / norm;
    alpha = scale * norm;
  }
  for (int j = 0; j < m; ++j) {
    double xx = 0.0;
    for (int i = j; i >= 0; --i) {
      const double t = c[i] * xx + s[i] * r_(i, j);
      r_(i, j) = c[i] * r_(i, j) - s[i] * xx;
      xx = t;
    }
  }
  return true;
}

bool AugmentedFactor::ColumnDeficient(int j, double tol) const {
  const double col = r_.col(j).head(j + 1).norm();
  return col == 0.0 || std::abs(r_(j, j)) <= tol * col;
}

std::vector<int> AugmentedFactor::DeficientColumns(double tol) const {
  std::vector<int> out;
  for (int j = 0; j < k_; ++j) {
    if (ColumnDeficient(j, tol)) out.push_back(j);
  }
  return out;
}

bool AugmentedFactor::FullColumnRank(double tol) const {
  for (int j = 0; j < k_; ++j) {
    if (ColumnDeficient(j, tol)) return false;
  }
  return true;
}

Eigen::MatrixXd AugmentedFactor::Coefficients() const {
  Eigen::MatrixXd phi;
  Coefficients(&phi);
  return phi;
}

// Back substitution R11 b = R12(:, j) for each equation j, written straight into row j of phi:
//   b_i = (R12(i, j) - sum_{l > i} R11(i, l) b_l) / R11(i, i),  i = k-1, ..., 0.
// Plain loops: Eigen's solve with a matrix right-hand side goes through its blocked (GEMM)
// kernels, whose set-up cost more than the arithmetic at these sizes (k + n is a few dozen at
// most). A zero pivot gives inf/NaN as any substitution does; callers check FullColumnRank first.
void AugmentedFactor::Coefficients(Eigen::MatrixXd* phi) const {
  phi->resize(n_, k_);
  for (int j = 0; j < n_; ++j) {
    for (int i = k_ - 1; i >= 0; --i) {
      double v = r_(i, k_ + j);
      for (int l = i + 1; l < k_; ++l) v -= r_(i, l) * (*phi)(j, l);
      (*phi)(j, i) = v / r_(i, i);
    }
  }
}

Eigen::MatrixXd AugmentedFactor::ResidualCrossProduct() const {
  const auto r22 = r_.bottomRightCorner(n_, n_);
  return r22.transpose() * r22;
}

void AugmentedFactor::Predict(const Eigen::Ref<const Eigen::VectorXd>& x,
                              const Eigen::Ref<const Eigen::VectorXd>& y, Eigen::VectorXd* v,
                              double* f) const {
  // R11' u = x, then v = y - R12' u (plain loops for the same reason as Coefficients).
  thread_local Eigen::VectorXd u;
  u.resize(k_);
  *f = 1.0 + ForwardSubstitution(r_, k_, x, &u);
  v->resize(n_);
  for (int j = 0; j < n_; ++j) {
    double w = y[j];
    for (int l = 0; l < k_; ++l) w -= r_(l, k_ + j) * u[l];
    (*v)[j] = w;
  }
}

}  // namespace rimwatch
