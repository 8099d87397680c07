// Test-only simulator of a stable Gaussian VAR(p) with a constant: y_t = c + sum_l A_l y_{t-l} +
// e_t.
#pragma once

#include <Eigen/Core>
#include <random>

namespace rimwatch::testing {

// Diagonal-dominant coefficients scaled so the process is stable (checked by the caller where it
// matters). Returns rows x n.
inline Eigen::MatrixXd SimulateVar(int n, int p, int rows, unsigned seed, double scale = 0.5) {
  std::mt19937_64 gen(seed);
  std::normal_distribution<double> normal(0.0, 1.0);
  std::vector<Eigen::MatrixXd> a(p);
  for (int l = 0; l < p; ++l) {
    a[l] = Eigen::MatrixXd::Zero(n, n);
    for (int i = 0; i < n; ++i) {
      for (int j = 0; j < n; ++j) a[l](i, j) = (i == j ? 0.5 : 0.1) * normal(gen);
    }
    a[l] *= scale / (l + 1.0) / std::max(1.0, a[l].cwiseAbs().rowwise().sum().maxCoeff());
  }
  Eigen::VectorXd c = Eigen::VectorXd::LinSpaced(n, 0.1, 0.5);
  Eigen::MatrixXd y = Eigen::MatrixXd::Zero(rows, n);
  for (int t = 0; t < rows; ++t) {
    Eigen::VectorXd v = c;
    for (int l = 1; l <= p && t - l >= 0; ++l) v += a[l - 1] * y.row(t - l).transpose();
    for (int i = 0; i < n; ++i) v[i] += normal(gen);
    y.row(t) = v.transpose();
  }
  return y;
}

}  // namespace rimwatch::testing
