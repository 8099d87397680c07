// Streaming equals batch: the recursive estimator against a from-scratch weighted least-squares
// fit (Eigen's Householder QR, a general-purpose library) of the same rows and weights.
#include "rimwatch/engine/var_estimator.h"

#include <gtest/gtest.h>

#include <Eigen/Dense>
#include <cmath>
#include <limits>

#include "sim_var.h"

namespace rimwatch {
namespace {

VarSpec MakeSpec(int n, int p, Deterministic d, WindowKind kind) {
  VarSpec spec;
  for (int i = 0; i < n; ++i) spec.variables.push_back("v" + std::to_string(i));
  spec.lags = p;
  spec.deterministic = d;
  spec.window.kind = kind;
  return spec;
}

// Regressors built here independently of the engine: row r of data (0-based) has
// x = [1, (r + 1), y_{r-1}', ..., y_{r-p}'].
Eigen::MatrixXd BatchRegressors(const Eigen::MatrixXd& y, int p, Deterministic d, int first,
                                int last) {
  const int n = static_cast<int>(y.cols());
  const int nd = d == Deterministic::kNone ? 0 : (d == Deterministic::kConstant ? 1 : 2);
  Eigen::MatrixXd x(last - first, nd + n * p);
  for (int r = first; r < last; ++r) {
    int j = 0;
    if (nd >= 1) x(r - first, j++) = 1.0;
    if (nd == 2) x(r - first, j++) = r + 1.0;
    for (int l = 1; l <= p; ++l, j += n) x.row(r - first).segment(j, n) = y.row(r - l);
  }
  return x;
}

struct BatchFit {
  Eigen::MatrixXd phi;  // n x k
  Eigen::MatrixXd sse;  // sum w e e'
};

// Weighted LS on data rows [first, last) with weight lambda^(last - 1 - r).
BatchFit Batch(const Eigen::MatrixXd& y, int p, Deterministic d, int first, int last,
               double lambda) {
  Eigen::MatrixXd x = BatchRegressors(y, p, d, first, last);
  Eigen::MatrixXd yy = y.middleRows(first, last - first);
  Eigen::VectorXd sw(last - first);
  for (int r = first; r < last; ++r) sw[r - first] = std::pow(lambda, 0.5 * (last - 1 - r));
  const Eigen::MatrixXd xw = sw.asDiagonal() * x, yw = sw.asDiagonal() * yy;
  const Eigen::MatrixXd phi_t = xw.householderQr().solve(yw);
  const Eigen::MatrixXd e = yw - xw * phi_t;
  return {phi_t.transpose(), e.transpose() * e};
}

double RelMax(const Eigen::MatrixXd& a, const Eigen::MatrixXd& b) {
  return (a - b).cwiseAbs().maxCoeff() / b.cwiseAbs().maxCoeff();
}

// Check 200 checkpoints spread over `updates` rows.
void CheckAgainstBatch(WindowKind kind, int updates, double tol) {
  const int n = 4, p = 3;
  const Eigen::MatrixXd y = testing::SimulateVar(n, p, updates + p, 11);
  VarSpec spec = MakeSpec(n, p, Deterministic::kConstant, kind);
  spec.window.rows = 500;
  spec.window.lambda = 0.99;
  VarEstimator est(spec);
  const int checkpoints = 200;
  int next = 0;
  double worst = 0.0;
  for (int r = 0; r < updates + p; ++r) {
    ASSERT_TRUE(est.Update(y.row(r).transpose()).status.ok());
    const int done = r + 1 - p;  // estimation rows so far
    if (done < 60 || done < (next + 1) * updates / checkpoints) continue;
    ++next;
    int first = p;
    double lambda = 1.0;
    if (kind == WindowKind::kSliding)
      first = std::max(p, r + 1 - static_cast<int>(spec.window.rows));
    if (kind == WindowKind::kForgetting) {
      lambda = spec.window.lambda;
      first = std::max(p, r + 1 - 8000);  // 0.99^8000 ~ 1e-35: the rest cannot matter
    }
    const BatchFit b = Batch(y, p, Deterministic::kConstant, first, r + 1, lambda);
    Eigen::MatrixXd phi;
    ASSERT_TRUE(est.Coefficients(&phi).ok());
    worst = std::max(worst, RelMax(phi, b.phi));
    worst = std::max(worst, RelMax(est.ResidualCrossProduct(), b.sse));
  }
  EXPECT_GE(next, checkpoints - 1);
  EXPECT_LT(worst, tol) << WindowKindName(kind);
  std::cout << WindowKindName(kind) << ": worst relative difference from batch QR over " << next
            << " checkpoints = " << worst << "\n";
}

TEST(VarEstimatorTest, ExpandingEqualsBatchOls) {
  CheckAgainstBatch(WindowKind::kExpanding, 100000, 1e-9);
}
TEST(VarEstimatorTest, SlidingEqualsBatchOnWindow) {
  CheckAgainstBatch(WindowKind::kSliding, 100000, 1e-9);
}
TEST(VarEstimatorTest, ForgettingEqualsWeightedBatch) {
  CheckAgainstBatch(WindowKind::kForgetting, 100000, 1e-9);
}

TEST(VarEstimatorTest, ForgettingStaysAccurateAfterAMillionUpdates) {
  const int n = 4, p = 3, updates = 1000000;
  const Eigen::MatrixXd y = testing::SimulateVar(n, p, updates + p, 12);
  VarSpec spec = MakeSpec(n, p, Deterministic::kConstant, WindowKind::kForgetting);
  spec.window.lambda = 0.995;
  VarEstimator est(spec);
  for (int r = 0; r < updates + p; ++r) ASSERT_TRUE(est.Update(y.row(r).transpose()).status.ok());
  const int last = updates + p;
  const BatchFit b = Batch(y, p, Deterministic::kConstant, last - 16000, last, 0.995);
  Eigen::MatrixXd phi;
  ASSERT_TRUE(est.Coefficients(&phi).ok());
  EXPECT_LT(RelMax(phi, b.phi), 1e-8);
  EXPECT_LT(RelMax(est.ResidualCrossProduct(), b.sse), 1e-8);
  EXPECT_NEAR(est.effective_rows(), (1.0 - std::pow(0.995, updates)) / (1.0 - 0.995), 1e-9);
}

TEST(VarEstimatorTest, TrendRegressorCountsObservations) {
  const Eigen::MatrixXd y = testing::SimulateVar(2, 2, 300, 13);
  VarSpec spec = MakeSpec(2, 2, Deterministic::kTrend, WindowKind::kExpanding);
  VarEstimator est(spec);
  for (int r = 0; r < y.rows(); ++r) est.Update(y.row(r).transpose());
  const BatchFit b = Batch(y, 2, Deterministic::kTrend, 2, 300, 1.0);
  Eigen::MatrixXd phi;
  ASSERT_TRUE(est.Coefficients(&phi).ok());
  EXPECT_LT(RelMax(phi, b.phi), 1e-10);
}

TEST(VarEstimatorTest, PredictionErrorUsesThePreviousEstimate) {
  const int n = 3, p = 2;
  const Eigen::MatrixXd y = testing::SimulateVar(n, p, 120, 14);
  VarEstimator est(MakeSpec(n, p, Deterministic::kConstant, WindowKind::kExpanding));
  for (int r = 0; r < 119; ++r) est.Update(y.row(r).transpose());
  const BatchFit before = Batch(y, p, Deterministic::kConstant, p, 119, 1.0);
  const Eigen::MatrixXd xall = BatchRegressors(y, p, Deterministic::kConstant, p, 120);
  const Eigen::VectorXd x = xall.bottomRows(1).transpose();
  const Eigen::MatrixXd xs = xall.topRows(xall.rows() - 1);
  const UpdateResult u = est.Update(y.row(119).transpose());
  ASSERT_TRUE(u.has_prediction);
  const Eigen::VectorXd v = y.row(119).transpose() - before.phi * x;
  EXPECT_LT((u.prediction_error - v).norm(), 1e-10 * v.norm());
  const double f = 1.0 + x.dot((xs.transpose() * xs).ldlt().solve(x));
  EXPECT_NEAR(u.prediction_scale, f, 1e-10 * f);
}

// Skipping the prediction changes nothing else: the factor (hence every estimate) is the same
// to the bit, for each window kind, including the sliding window's downdates and refolds.
TEST(VarEstimatorTest, UpdateWithoutPredictionKeepsTheSameState) {
  const int n = 3, p = 2;
  const Eigen::MatrixXd y = testing::SimulateVar(n, p, 700, 17);
  for (WindowKind kind : {WindowKind::kExpanding, WindowKind::kSliding, WindowKind::kForgetting}) {
    VarEstimator with(MakeSpec(n, p, Deterministic::kConstant, kind));
    VarEstimator without(MakeSpec(n, p, Deterministic::kConstant, kind));
    int predicted = 0;
    for (int r = 0; r < y.rows(); ++r) {
      const UpdateResult a = with.Update(y.row(r).transpose());
      const UpdateResult b = without.Update(y.row(r).transpose(), /*predict=*/false);
      ASSERT_EQ(a.estimated, b.estimated);
      EXPECT_FALSE(b.has_prediction);
      predicted += a.has_prediction ? 1 : 0;
      ASSERT_EQ(with.factor().R(), without.factor().R()) << "row " << r;
    }
    EXPECT_GT(predicted, 600);
    EXPECT_EQ(with.refolds(), without.refolds());
  }
}

TEST(VarEstimatorTest, NonFiniteRowIsRefusedAndStateUnchanged) {
  const Eigen::MatrixXd y = testing::SimulateVar(2, 1, 50, 15);
  VarEstimator est(MakeSpec(2, 1, Deterministic::kConstant, WindowKind::kSliding));
  for (int r = 0; r < 50; ++r) est.Update(y.row(r).transpose());
  const Eigen::MatrixXd r_before = est.factor().R();
  const auto obs = est.observations();
  for (double bad : {std::nan(""), HUGE_VAL, -HUGE_VAL}) {
    Eigen::Vector2d row(0.3, bad);
    const UpdateResult u = est.Update(row);
    EXPECT_EQ(u.status.code(), StatusCode::kNonFinite);
    EXPECT_NE(u.status.message().find("'v1'"), std::string::npos) << u.status.message();
    EXPECT_FALSE(u.estimated);
  }
  EXPECT_EQ(est.factor().R(), r_before);
  EXPECT_EQ(est.observations(), obs);
}

TEST(VarEstimatorTest, ConstantSeriesIsReportedRankDeficient) {
  Eigen::MatrixXd y = testing::SimulateVar(2, 1, 80, 16);
  y.col(1).head(40).setConstant(2.5);  // a stuck feed for the first 40 rows
  VarSpec spec = MakeSpec(2, 1, Deterministic::kConstant, WindowKind::kSliding);
  spec.window.rows = 20;
  VarEstimator est(spec);
  for (int r = 0; r < 30; ++r) est.Update(y.row(r).transpose());
  Eigen::MatrixXd phi;
  const Status st = est.Coefficients(&phi);
  EXPECT_EQ(st.code(), StatusCode::kRankDeficient);
  EXPECT_NE(st.message().find("L1.v1"), std::string::npos) << st.message();
  // Once the window has passed the stuck stretch the model is estimable again.
  for (int r = 30; r < 80; ++r) est.Update(y.row(r).transpose());
  ASSERT_TRUE(est.Coefficients(&phi).ok());
  EXPECT_TRUE(phi.allFinite());
  const BatchFit b = Batch(y, 1, Deterministic::kConstant, 60, 80, 1.0);
  EXPECT_LT(RelMax(phi, b.phi), 1e-9);
}

TEST(VarEstimatorTest, FewerRowsThanRegressorsIsReported) {
  const Eigen::MatrixXd y = testing::SimulateVar(3, 2, 6, 17);
  VarEstimator est(MakeSpec(3, 2, Deterministic::kConstant, WindowKind::kExpanding));
  Eigen::MatrixXd phi;
  EXPECT_EQ(est.Coefficients(&phi).code(), StatusCode::kNotEnoughRows);
  for (int r = 0; r < 6; ++r) est.Update(y.row(r).transpose());  // 4 rows for k = 7
  EXPECT_EQ(est.Coefficients(&phi).code(), StatusCode::kRankDeficient);
}

TEST(VarEstimatorTest, SlidingRefoldsWhenDowndateLosesDefiniteness) {
  // A series that is exactly a lag of another makes R22 singular: the downdate must be refused
  // and the factor refolded, with coefficients still equal to the batch fit.
  const int rows = 200;
  Eigen::MatrixXd y = testing::SimulateVar(2, 1, rows, 18);
  for (int r = 1; r < rows; ++r) y(r, 1) = 0.5 + 0.8 * y(r - 1, 0);  // exact fit, no noise
  VarSpec spec = MakeSpec(2, 1, Deterministic::kConstant, WindowKind::kSliding);
  spec.window.rows = 50;
  spec.window.refold_every = 1000000;  // only the feasibility check may refold
  VarEstimator est(spec);
  for (int r = 0; r < rows; ++r) est.Update(y.row(r).transpose());
  EXPECT_GT(est.refolds(), 0);
  Eigen::MatrixXd phi;
  ASSERT_TRUE(est.Coefficients(&phi).ok());
  const BatchFit b = Batch(y, 1, Deterministic::kConstant, rows - 50, rows, 1.0);
  EXPECT_LT(RelMax(phi, b.phi), 1e-8);
}

}  // namespace
}  // namespace rimwatch
