// Constancy statistics: the asymptotic law against its exact moments and known quantiles, the
// Nyblom-Hansen statistic against a direct dense computation and its invariances, the equality
// test on a hand-computed case, and the monitor's schedule and levels.
#include "rimwatch/engine/constancy.h"

#include <gtest/gtest.h>

#include <Eigen/Dense>
#include <boost/math/distributions/chi_squared.hpp>
#include <boost/math/distributions/fisher_f.hpp>
#include <cmath>
#include <limits>
#include <random>
#include <string>
#include <tuple>
#include <vector>

#include "rimwatch/engine/covariance.h"
#include "rimwatch/engine/var_estimator.h"
#include "sim_var.h"

namespace rimwatch {
namespace {

constexpr double kEps = std::numeric_limits<double>::epsilon();

VarSpec Spec(int n, int p, WindowKind kind = WindowKind::kExpanding, std::size_t rows = 200) {
  VarSpec spec;
  for (int i = 0; i < n; ++i) spec.variables.push_back("v" + std::to_string(i));
  spec.lags = p;
  spec.deterministic = Deterministic::kConstant;
  spec.window.kind = kind;
  spec.window.rows = rows;
  spec.window.robust_row_cap = 5000;
  return spec;
}

// ---------------------------------------------------------------------------------------------
// The law of sum_{j <= p} int B_j^2

TEST(NyblomLaw, MomentsAreExact) {
  // int B^2 = sum_j Z_j^2 / (j pi)^2 (Karhunen-Loeve; Anderson & Darling 1952): mean
  // sum 1/(j pi)^2 = 1/6 and variance 2 sum 1/(j pi)^4 = 1/45 per bridge. E L = int_0^inf S,
  // E L^2 = int_0^inf 2 x S(x) dx, by Simpson's rule on [0, 0.4] (where S falls steeply from 1)
  // and [0.4, 10 + p] (beyond, S is below the Chernoff bound 1e-10).
  for (int p : {1, 3, 8}) {
    double m1 = 0.0, m2 = 0.0;
    for (const auto& [lo, hi, panels] :
         {std::tuple{0.0, 0.4, 400}, std::tuple{0.4, 10.0 + p, 600}}) {
      const double h = (hi - lo) / panels;
      for (int i = 0; i <= panels; ++i) {
        const double weight = (i == 0 || i == panels) ? 1.0 : (i % 2 == 1 ? 4.0 : 2.0);
        const double x = lo + i * h;
        const double s = NyblomSurvival(x, p);
        m1 += weight * s * h / 3.0;
        m2 += weight * 2.0 * x * s * h / 3.0;
      }
    }
    EXPECT_NEAR(m1, p / 6.0, 1e-6) << p;
    EXPECT_NEAR(m2 - m1 * m1, p / 45.0, 1e-5) << p;
  }
}

TEST(NyblomLaw, CramerVonMisesQuantiles) {
  // p = 1 is the asymptotic Cramer-von Mises law: upper 10%, 5%, 1% points 0.34730, 0.46136,
  // 0.74346 (Anderson & Darling 1952, Ann. Math. Statist. 23, Table 1; from memory).
  EXPECT_NEAR(NyblomCriticalValue(0.10, 1), 0.34730, 5e-5);
  EXPECT_NEAR(NyblomCriticalValue(0.05, 1), 0.46136, 5e-5);
  EXPECT_NEAR(NyblomCriticalValue(0.01, 1), 0.74346, 5e-5);
  EXPECT_NEAR(NyblomSurvival(NyblomCriticalValue(0.05, 7), 7), 0.05, 1e-9);
}

TEST(NyblomLaw, LimitsAndMonotonicity) {
  EXPECT_EQ(NyblomSurvival(0.0, 3), 1.0);
  EXPECT_EQ(NyblomSurvival(-1.0, 3), 1.0);
  EXPECT_LT(NyblomSurvival(40.0, 3), 1e-10);
  double last = 1.0;
  for (double x = 0.05; x < 3.0; x += 0.05) {
    const double s = NyblomSurvival(x, 2);
    EXPECT_LE(s, last + 1e-12) << x;
    last = s;
  }
  // More bridges, larger sums.
  EXPECT_LT(NyblomSurvival(1.0, 2), NyblomSurvival(1.0, 3));
}

// ---------------------------------------------------------------------------------------------
// The statistic

// Dense transcription: S_t explicit, V^{-1} by Eigen's LU.
double DenseNyblom(const Eigen::MatrixXd& x, const Eigen::MatrixXd& e) {
  const Eigen::Index k = x.rows(), n = e.rows(), t_rows = x.cols();
  Eigen::MatrixXd g(n * k, t_rows);
  for (Eigen::Index t = 0; t < t_rows; ++t) {
    for (Eigen::Index i = 0; i < n; ++i) g.block(i * k, t, k, 1) = e(i, t) * x.col(t);
  }
  const Eigen::MatrixXd v_inv =
      (g * g.transpose() / static_cast<double>(t_rows)).fullPivLu().inverse();
  Eigen::VectorXd s = Eigen::VectorXd::Zero(n * k);
  double total = 0.0;
  for (Eigen::Index t = 0; t < t_rows; ++t) {
    s += g.col(t);
    total += s.dot(v_inv * s);
  }
  return total / (static_cast<double>(t_rows) * t_rows);
}

struct Window {
  Eigen::MatrixXd x, e;
};

Window FitWindow(const VarEstimator& est) {
  Eigen::MatrixXd phi;
  EXPECT_TRUE(est.Coefficients(&phi).ok());
  const Eigen::MatrixXd z = est.buffer().Ordered();
  Window w;
  w.x = z.topRows(est.k());
  w.e = z.bottomRows(est.n()) - phi * w.x;
  return w;
}

TEST(NyblomHansen, MatchesADenseComputation) {
  const Eigen::MatrixXd y = testing::SimulateVar(3, 2, 252, 17);
  for (WindowKind kind : {WindowKind::kExpanding, WindowKind::kSliding}) {
    VarEstimator est(Spec(3, 2, kind, 150));
    for (Eigen::Index t = 0; t < y.rows(); ++t) est.Update(y.row(t).transpose());
    NyblomResult r;
    ASSERT_TRUE(NyblomHansenTest(est, &r).ok());
    const Window w = FitWindow(est);
    EXPECT_EQ(r.rows, w.x.cols());
    EXPECT_EQ(r.parameters, 21);
    // Two orderings of the same sums of a few hundred terms, cond(V) about 1e2: 1e-10.
    EXPECT_NEAR(r.joint, DenseNyblom(w.x, w.e), 1e-10 * r.joint);
    for (int i = 0; i < 3; ++i) {
      EXPECT_NEAR(r.equation[i], DenseNyblom(w.x, w.e.row(i)), 1e-10 * r.equation[i]) << i;
      EXPECT_NEAR(r.equation_p_value[i], NyblomSurvival(r.equation[i], 7), 1e-15);
    }
    EXPECT_NEAR(r.joint_p_value, NyblomSurvival(r.joint, 21), 1e-15);
  }
}

TEST(NyblomHansen, InvariantToRescalingRegressorsAndResiduals) {
  // L is invariant to g -> D g for any invertible D (V scales to D V D'), so rescaling a
  // regressor or an equation's residuals leaves it unchanged.
  const Eigen::MatrixXd y = testing::SimulateVar(2, 1, 201, 4);
  VarEstimator est(Spec(2, 1));
  for (Eigen::Index t = 0; t < y.rows(); ++t) est.Update(y.row(t).transpose());
  const Window w = FitWindow(est);
  NyblomResult a, b;
  ASSERT_TRUE(NyblomHansenStatistic(w.x, w.e, &a).ok());
  Eigen::MatrixXd x2 = w.x, e2 = w.e;
  x2.row(1) *= 1e3;
  e2.row(0) *= 1e-2;
  ASSERT_TRUE(NyblomHansenStatistic(x2, e2, &b).ok());
  EXPECT_NEAR(a.joint, b.joint, 1e3 * kEps * a.joint);
  EXPECT_NEAR(a.equation[1], b.equation[1], 1e3 * kEps * a.equation[1]);
}

TEST(NyblomHansen, ABreakMakesItLarge) {
  std::mt19937_64 gen(8);
  std::normal_distribution<double> normal;
  Eigen::MatrixXd y = Eigen::MatrixXd::Zero(301, 2);
  for (int t = 1; t < 301; ++t) {
    const double a12 = t < 150 ? 0.0 : 0.7;
    y(t, 0) = 0.3 * y(t - 1, 0) + a12 * y(t - 1, 1) + normal(gen);
    y(t, 1) = 0.5 * y(t - 1, 1) + normal(gen);
  }
  VarEstimator est(Spec(2, 1));
  for (Eigen::Index t = 0; t < y.rows(); ++t) est.Update(y.row(t).transpose());
  NyblomResult r;
  ASSERT_TRUE(NyblomHansenTest(est, &r).ok());
  EXPECT_LT(r.joint_p_value, 0.01);
  EXPECT_LT(r.equation_p_value[0], 0.001);  // the broken equation
  EXPECT_GT(r.equation_p_value[1], r.equation_p_value[0]);
}

TEST(NyblomHansen, Errors) {
  NyblomResult r;
  EXPECT_EQ(
      NyblomHansenStatistic(Eigen::MatrixXd::Ones(2, 5), Eigen::MatrixXd::Ones(1, 4), &r).code(),
      StatusCode::kInvalidArgument);
  EXPECT_EQ(
      NyblomHansenStatistic(Eigen::MatrixXd::Ones(2, 2), Eigen::MatrixXd::Ones(1, 2), &r).code(),
      StatusCode::kNotEnoughRows);
  Eigen::MatrixXd x = Eigen::MatrixXd::Random(2, 20);
  x.row(1) = x.row(0);  // collinear regressors: V singular
  EXPECT_EQ(NyblomHansenStatistic(x, Eigen::MatrixXd::Random(1, 20), &r).code(),
            StatusCode::kRankDeficient);
  Eigen::MatrixXd e = Eigen::MatrixXd::Random(1, 20);
  e(0, 3) = std::nan("");
  EXPECT_EQ(NyblomHansenStatistic(Eigen::MatrixXd::Random(2, 20), e, &r).code(),
            StatusCode::kNonFinite);
  VarSpec forgetting = Spec(2, 1, WindowKind::kForgetting);
  VarEstimator est(forgetting);
  const Eigen::MatrixXd y = testing::SimulateVar(2, 1, 60, 2);
  for (Eigen::Index t = 0; t < y.rows(); ++t) est.Update(y.row(t).transpose());
  EXPECT_EQ(NyblomHansenTest(est, &r).code(), StatusCode::kUnavailable);
}

// ---------------------------------------------------------------------------------------------
// Equality test

TEST(EqualityWaldTest, HandComputedCase) {
  // d = (1, 2), V_ref + V_rec = diag(2, 4): W = 1/2 + 4/4 = 1.5; chi2(2) survival exp(-W/2).
  const Eigen::Vector2d ref(0.0, 1.0), rec(1.0, 3.0);
  const Eigen::Matrix2d v = Eigen::Vector2d(1.0, 2.0).asDiagonal();
  EqualityResult r;
  ASSERT_TRUE(EqualityWaldTest(ref, v, rec, v, 10.0, &r).ok());
  EXPECT_NEAR(r.statistic, 1.5, 8 * kEps);
  EXPECT_EQ(r.df, 2);
  EXPECT_NEAR(r.p_value, std::exp(-0.75), 1e-14);
  // Small-sample form: F = W (nu - p + 1) / (nu p) = 1.5 * 9 / 20 on (2, 9) (Hotelling 1931).
  ASSERT_TRUE(r.has_f);
  EXPECT_NEAR(r.f_statistic, 0.675, 8 * kEps);
  EXPECT_EQ(r.f_df2, 9.0);
  const boost::math::fisher_f f(2, 9);
  EXPECT_NEAR(r.f_p_value, boost::math::cdf(boost::math::complement(f, 0.675)), 1e-14);
  EXPECT_NEAR(EqualityCriticalValue(0.05, 2, 10.0),
              boost::math::quantile(boost::math::complement(f, 0.05)) * 20.0 / 9.0, 1e-12);
  // Singular sum and shape errors.
  EXPECT_EQ(
      EqualityWaldTest(ref, Eigen::Matrix2d::Zero(), rec, Eigen::Matrix2d::Zero(), 10.0, &r).code(),
      StatusCode::kRankDeficient);
  EXPECT_EQ(EqualityWaldTest(ref, v, Eigen::Vector3d::Zero(), v, 10.0, &r).code(),
            StatusCode::kInvalidArgument);
}

// ---------------------------------------------------------------------------------------------
// Monitor

ConstancyMonitorOptions MonitorOptions(ConstancyMonitorOptions::Test test) {
  ConstancyMonitorOptions o;
  o.test = test;
  o.training_rows = 100;
  o.horizon_rows = 400;
  o.block_rows = 100;
  o.covariance.kind = CovarianceKind::kHC3;
  return o;
}

TEST(ConstancyMonitor, ValidatesAndSetsBonferroniLevels) {
  ConstancyMonitor m;
  const VarSpec sliding = Spec(2, 1, WindowKind::kSliding, 100);
  ASSERT_TRUE(ConstancyMonitor::Create(
                  sliding, MonitorOptions(ConstancyMonitorOptions::Test::kNyblomHansen), &m)
                  .ok());
  EXPECT_EQ(m.options().Evaluations(), 4);
  EXPECT_EQ(m.critical_value(), NyblomCriticalValue(0.05 / 4, 6));
  EXPECT_EQ(m.warn_value(), NyblomCriticalValue(0.20 / 4, 6));
  ASSERT_TRUE(ConstancyMonitor::Create(
                  sliding, MonitorOptions(ConstancyMonitorOptions::Test::kReferenceEquality), &m)
                  .ok());
  EXPECT_EQ(m.critical_value(), EqualityCriticalValue(0.05 / 4, 6, 100 - 3));
  // Equality needs a sliding window no longer than the block.
  std::string why;
  auto o = MonitorOptions(ConstancyMonitorOptions::Test::kReferenceEquality);
  EXPECT_FALSE(o.IsValid(Spec(2, 1, WindowKind::kExpanding), &why));
  EXPECT_FALSE(o.IsValid(Spec(2, 1, WindowKind::kSliding, 150), &why));
  EXPECT_NE(why.find("block_rows"), std::string::npos) << why;
  o.block_rows = 0;
  EXPECT_FALSE(o.IsValid(sliding, nullptr));
  o = MonitorOptions(ConstancyMonitorOptions::Test::kNyblomHansen);
  EXPECT_FALSE(o.IsValid(Spec(2, 1, WindowKind::kForgetting), nullptr));
}

TEST(ConstancyMonitor, EvaluatesOnScheduleAndHoldsTheStatistic) {
  const VarSpec sliding = Spec(2, 1, WindowKind::kSliding, 100);
  const Eigen::MatrixXd y = testing::SimulateVar(2, 1, 601, 9);
  for (auto test : {ConstancyMonitorOptions::Test::kNyblomHansen,
                    ConstancyMonitorOptions::Test::kReferenceEquality}) {
    ConstancyMonitor m;
    ASSERT_TRUE(ConstancyMonitor::Create(sliding, MonitorOptions(test), &m).ok());
    VarEstimator tracking(sliding), reference(Spec(2, 1));
    std::vector<std::int64_t> evaluated_at;
    double held = -1.0;
    for (Eigen::Index t = 0; t < y.rows(); ++t) {
      tracking.Update(y.row(t).transpose());
      if (!reference.Update(y.row(t).transpose()).estimated) continue;
      ConstancyReading r;
      ASSERT_TRUE(m.Observe(tracking, reference, &r).ok());
      const std::int64_t n = reference.rows_in_window();
      if (r.evaluated) {
        ASSERT_TRUE(r.status.ok()) << r.status.ToString();
        evaluated_at.push_back(n);
        held = r.alarm.statistic;
        if (test == ConstancyMonitorOptions::Test::kNyblomHansen) {
          // The statistic of the tracking window itself.
          NyblomResult direct;
          ASSERT_TRUE(NyblomHansenTest(tracking, &direct).ok());
          EXPECT_EQ(r.alarm.statistic, direct.joint);
        }
      } else if (held >= 0.0) {
        EXPECT_EQ(r.alarm.statistic, held) << n;  // held between evaluations
      }
      EXPECT_EQ(r.alarm.armed, n >= 200) << n;
      EXPECT_EQ(r.within_horizon, r.evaluation >= 1 && r.evaluation <= 4) << n;
    }
    const std::vector<std::int64_t> expected = {200, 300, 400, 500, 600};
    EXPECT_EQ(evaluated_at, expected) << ConstancyTestName(test);
  }
}

TEST(ConstancyMonitor, EqualityComparesDisjointSamples) {
  // At n = 300 the reference sample is rows 1..200 (the reference estimator as it stood then)
  // and the recent sample rows 201..300 (the sliding window).
  const VarSpec sliding = Spec(2, 1, WindowKind::kSliding, 100);
  const Eigen::MatrixXd y = testing::SimulateVar(2, 1, 301, 12);
  ConstancyMonitor m;
  ASSERT_TRUE(ConstancyMonitor::Create(
                  sliding, MonitorOptions(ConstancyMonitorOptions::Test::kReferenceEquality), &m)
                  .ok());
  VarEstimator tracking(sliding), reference(Spec(2, 1)), first200(Spec(2, 1));
  ConstancyReading r;
  for (Eigen::Index t = 0; t < y.rows(); ++t) {
    tracking.Update(y.row(t).transpose());
    if (t <= 200) first200.Update(y.row(t).transpose());
    if (!reference.Update(y.row(t).transpose()).estimated) continue;
    ASSERT_TRUE(m.Observe(tracking, reference, &r).ok());
  }
  ASSERT_EQ(r.evaluation, 2);
  ASSERT_TRUE(r.evaluated);
  ASSERT_EQ(first200.rows_in_window(), 200);
  CovarianceContext a, b;
  CovarianceOptions hc3;
  hc3.kind = CovarianceKind::kHC3;
  ASSERT_TRUE(CovarianceContext::Create(first200, hc3, &a).ok());
  ASSERT_TRUE(CovarianceContext::Create(tracking, hc3, &b).ok());
  EqualityResult direct;
  ASSERT_TRUE(EqualityWaldTest(a, b, &direct).ok());
  EXPECT_NEAR(r.equality.statistic, direct.statistic, 1e-12 * direct.statistic);
  EXPECT_EQ(r.equality.dof, 100 - 3);
}

}  // namespace
}  // namespace rimwatch
