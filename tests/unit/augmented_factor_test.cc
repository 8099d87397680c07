// AugmentedFactor keeps R'R = sum w_t z_t z_t'. Checked against the direct cross-product and
// against Eigen's Householder QR of the stacked rows (a general-purpose library).
#include "rimwatch/engine/augmented_factor.h"

#include <gtest/gtest.h>

#include <Eigen/Dense>
#include <limits>
#include <random>

namespace rimwatch {
namespace {

constexpr double kEps = std::numeric_limits<double>::epsilon();

Eigen::MatrixXd RandomRows(int rows, int cols, unsigned seed) {
  std::mt19937_64 gen(seed);
  std::normal_distribution<double> normal;
  Eigen::MatrixXd z(rows, cols);
  for (int i = 0; i < rows; ++i)
    for (int j = 0; j < cols; ++j) z(i, j) = normal(gen);
  return z;
}

double RelErr(const Eigen::MatrixXd& a, const Eigen::MatrixXd& b) {
  return (a - b).norm() / std::max(b.norm(), std::numeric_limits<double>::min());
}

TEST(AugmentedFactorTest, FoldReproducesCrossProduct) {
  const int k = 5, n = 2;
  const Eigen::MatrixXd z = RandomRows(60, k + n, 1);
  AugmentedFactor f(k, n);
  for (int i = 0; i < z.rows(); ++i) f.Fold(z.row(i).transpose());
  const Eigen::MatrixXd r = f.R();
  EXPECT_TRUE(r.isUpperTriangular(0.0));
  EXPECT_LT(RelErr(r.transpose() * r, z.transpose() * z), 100 * kEps);
}

TEST(AugmentedFactorTest, CoefficientsEqualHouseholderLeastSquares) {
  const int k = 4, n = 3;
  const Eigen::MatrixXd z = RandomRows(80, k + n, 2);
  AugmentedFactor f(k, n);
  for (int i = 0; i < z.rows(); ++i) f.Fold(z.row(i).transpose());
  const Eigen::MatrixXd x = z.leftCols(k), y = z.rightCols(n);
  const Eigen::MatrixXd phi_t = x.householderQr().solve(y);  // Eigen reference
  EXPECT_LT(RelErr(f.Coefficients(), phi_t.transpose()), 1e3 * kEps);
  const Eigen::MatrixXd e = y - x * phi_t;
  EXPECT_LT(RelErr(f.ResidualCrossProduct(), e.transpose() * e), 1e3 * kEps);
}

TEST(AugmentedFactorTest, ScaleWeightsOldRows) {
  const int k = 3, n = 1;
  const Eigen::MatrixXd z = RandomRows(30, k + n, 3);
  const double lambda = 0.9;
  AugmentedFactor f(k, n);
  Eigen::MatrixXd direct = Eigen::MatrixXd::Zero(k + n, k + n);
  for (int i = 0; i < z.rows(); ++i) {
    f.Scale(lambda);
    f.Fold(z.row(i).transpose());
    direct = lambda * direct + z.row(i).transpose() * z.row(i);
  }
  EXPECT_LT(RelErr(f.R().transpose() * f.R(), direct), 100 * kEps);
}

TEST(AugmentedFactorTest, DowndateUndoesFold) {
  const int k = 4, n = 2;
  const Eigen::MatrixXd z = RandomRows(40, k + n, 4);
  AugmentedFactor f(k, n);
  for (int i = 0; i < z.rows(); ++i) f.Fold(z.row(i).transpose());
  for (int i = 0; i < 10; ++i) ASSERT_TRUE(f.Downdate(z.row(i).transpose()));
  const Eigen::MatrixXd rest = z.bottomRows(30);
  EXPECT_LT(RelErr(f.R().transpose() * f.R(), rest.transpose() * rest), 1e4 * kEps);
}

TEST(AugmentedFactorTest, InfeasibleDowndateIsRefusedAndLeavesStateUnchanged) {
  const int k = 2, n = 1;
  const Eigen::MatrixXd z = RandomRows(5, k + n, 5);
  AugmentedFactor f(k, n);
  for (int i = 0; i < z.rows(); ++i) f.Fold(z.row(i).transpose());
  const Eigen::MatrixXd before = f.R();
  // Removing a row that was never there, and larger than everything folded in, would make the
  // cross-product indefinite.
  const Eigen::VectorXd big = 10.0 * z.row(0).transpose();
  EXPECT_FALSE(f.Downdate(big));
  EXPECT_EQ(f.R(), before);
}

TEST(AugmentedFactorTest, ReportsCollinearAndZeroColumns) {
  const int k = 3, n = 1;
  Eigen::MatrixXd z = RandomRows(20, k + n, 6);
  z.col(2) = 2.0 * z.col(0) - z.col(1);  // exact combination of earlier columns
  AugmentedFactor f(k, n);
  for (int i = 0; i < z.rows(); ++i) f.Fold(z.row(i).transpose());
  EXPECT_EQ(f.DeficientColumns(), std::vector<int>({2}));

  AugmentedFactor few(k, n);  // fewer rows than regressors
  few.Fold(z.row(0).transpose());
  EXPECT_EQ(few.DeficientColumns(), std::vector<int>({1, 2}));
  EXPECT_FALSE(f.FullColumnRank());
  EXPECT_FALSE(few.FullColumnRank());

  AugmentedFactor full(k, n);  // the same rows without the combination
  const Eigen::MatrixXd fresh = RandomRows(20, k + n, 6);
  for (int i = 0; i < fresh.rows(); ++i) full.Fold(fresh.row(i).transpose());
  EXPECT_TRUE(full.DeficientColumns().empty());
  EXPECT_TRUE(full.FullColumnRank());
}

TEST(AugmentedFactorTest, PredictMatchesDirectFormula) {
  const int k = 3, n = 2;
  const Eigen::MatrixXd z = RandomRows(25, k + n, 7);
  AugmentedFactor f(k, n);
  for (int i = 0; i < 24; ++i) f.Fold(z.row(i).transpose());
  const Eigen::VectorXd x = z.row(24).head(k).transpose(), y = z.row(24).tail(n).transpose();
  Eigen::VectorXd v;
  double scale = 0.0;
  f.Predict(x, y, &v, &scale);
  const Eigen::MatrixXd xs = z.topRows(24).leftCols(k);
  const double direct = 1.0 + x.dot((xs.transpose() * xs).ldlt().solve(x));
  EXPECT_NEAR(scale, direct, 1e3 * kEps * direct);
  const Eigen::VectorXd vd = y - f.Coefficients() * x;
  EXPECT_LT((v - vd).norm(), 1e3 * kEps * vd.norm());
}

}  // namespace
}  // namespace rimwatch
