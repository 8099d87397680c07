// Recursive-residual CUSUM (engine/cusum.h): boundary constants against their equations,
// critical values against theirs (Boost.Math), the path and the monitor's readings against hand
// computations, Reset, non-finite and degenerate input. The false-alarm guarantees are shown by
// simulation in tests/calibration/cusum_calibration_test.cc.
#include "rimwatch/engine/cusum.h"

#include <gtest/gtest.h>

#include <Eigen/Core>
#include <boost/math/distributions/normal.hpp>
#include <boost/math/tools/roots.hpp>
#include <cmath>
#include <limits>
#include <random>
#include <string>
#include <vector>

namespace rimwatch {
namespace {

constexpr double kEps = std::numeric_limits<double>::epsilon();
// Closed-form quantities computed along two routes: a few ulps times the magnitude.
constexpr double kFormulaTol = 64 * kEps;

double Phi(double x) { return boost::math::cdf(boost::math::normal_distribution<double>(), x); }
double phi(double x) { return boost::math::pdf(boost::math::normal_distribution<double>(), x); }

// ---------------------------------------------------------------------------------------------
// Offline test

TEST(BdeConstants, PublishedValues) {
  // Brown, Durbin & Evans 1975, Sec. 2.3 (also Harvey 1990, Sec. 2.6).
  double a = 0.0;
  ASSERT_TRUE(BdeBoundaryConstant(0.01, &a).ok());
  EXPECT_EQ(a, 1.143);
  ASSERT_TRUE(BdeBoundaryConstant(0.05, &a).ok());
  EXPECT_EQ(a, 0.948);
  ASSERT_TRUE(BdeBoundaryConstant(0.10, &a).ok());
  EXPECT_EQ(a, 0.850);
  EXPECT_EQ(BdeBoundaryConstant(0.025, &a).code(), StatusCode::kInvalidArgument);
}

TEST(BdeConstants, MatchTheirCrossingEquation) {
  // BDE 1975, Sec. 2.3 (from memory): alpha / 2 = 1 - Phi(3a) + exp(-4 a^2) Phi(a). Solve it with
  // Boost's bisection (independently of the engine) and check the published 3-decimal constants are
  // its roots rounded.
  for (double alpha : {0.01, 0.05, 0.10}) {
    auto g = [alpha](double a) {
      return 2.0 * (1.0 - Phi(3.0 * a) + std::exp(-4.0 * a * a) * Phi(a)) - alpha;
    };
    const auto root =
        boost::math::tools::bisect(g, 0.3, 2.0, boost::math::tools::eps_tolerance<double>(50));
    const double solved = 0.5 * (root.first + root.second);
    double a = 0.0;
    ASSERT_TRUE(BdeBoundaryConstant(alpha, &a).ok());
    EXPECT_NEAR(solved, a, 5e-4) << "alpha " << alpha;  // published to 3 decimals
    // The engine's crossing probability at the published constant, within the rounding.
    EXPECT_NEAR(BdeCrossingProbability(a), alpha, 2e-4) << "alpha " << alpha;
  }
  EXPECT_EQ(BdeCrossingProbability(0.0), 1.0);
  EXPECT_EQ(BdeCrossingProbability(0.05), 1.0);  // the approximation exceeds 1: clamped
}

TEST(BdeBoundaryLine, HandValues) {
  // a sqrt(N) + 2 a j / sqrt(N) with N = 16: a (4 + j / 2).
  EXPECT_NEAR(BdeBoundary(0.948, 0, 16), 0.948 * 4.0, kFormulaTol);
  EXPECT_NEAR(BdeBoundary(0.948, 1, 16), 0.948 * 4.5, kFormulaTol);
  EXPECT_NEAR(BdeBoundary(0.948, 16, 16), 0.948 * 12.0, kFormulaTol);  // 3 a sqrt(N)
}

TEST(RecursiveCusumPath, HandComputation) {
  // w = (2, -1, 3, 0, 1): mean 1, deviations (1, -2, 2, -1, 0), sum of squares 10, so
  // sigma = sqrt(10 / 4); cumulative sums 2, 1, 4, 4, 5.
  Eigen::VectorXd w(5);
  w << 2.0, -1.0, 3.0, 0.0, 1.0;
  RecursiveCusum c;
  ASSERT_TRUE(ComputeRecursiveCusum(w, &c).ok());
  const double sigma = std::sqrt(2.5);
  EXPECT_EQ(c.count, 5);
  EXPECT_NEAR(c.sigma, sigma, kFormulaTol);
  const double sums[] = {2.0, 1.0, 4.0, 4.0, 5.0};
  for (int j = 0; j < 5; ++j) EXPECT_NEAR(c.path[j], sums[j] / sigma, kFormulaTol * 4.0) << j;
  // |W_j| / (sqrt(5) (1 + 2 j / 5)) is largest at j = 3: (4 / sigma) / (sqrt(5) * 2.2).
  EXPECT_EQ(c.statistic_at, 3);
  EXPECT_NEAR(c.statistic, 4.0 / sigma / (std::sqrt(5.0) * 2.2), kFormulaTol);
  EXPECT_NEAR(c.p_value, BdeCrossingProbability(c.statistic), 0.0);
  // The 5% lines (0.948 sqrt 5 at j = 0) are never reached; lines with a = 0.3 are crossed at
  // j = 1: |W_1| = 2 / sigma = 1.265 > 0.3 sqrt(5) + 0.6 / sqrt(5) = 0.939.
  EXPECT_EQ(c.FirstCrossing(0.948), 0);
  EXPECT_EQ(c.FirstCrossing(0.3), 1);
}

TEST(RecursiveCusumPath, BadInput) {
  RecursiveCusum c;
  EXPECT_EQ(ComputeRecursiveCusum(Eigen::VectorXd::Ones(1), &c).code(), StatusCode::kNotEnoughRows);
  Eigen::VectorXd w(3);
  w << 1.0, std::numeric_limits<double>::quiet_NaN(), 2.0;
  const Status s = ComputeRecursiveCusum(w, &c);
  EXPECT_EQ(s.code(), StatusCode::kNonFinite);
  EXPECT_NE(s.message().find("2 of 3"), std::string::npos) << s.message();
  w << 1.0, std::numeric_limits<double>::infinity(), 2.0;
  EXPECT_EQ(ComputeRecursiveCusum(w, &c).code(), StatusCode::kNonFinite);
  EXPECT_EQ(ComputeRecursiveCusum(Eigen::VectorXd::Constant(4, 0.7), &c).code(),
            StatusCode::kUnavailable);
}

TEST(RecursiveResidualOf, UpdateResult) {
  UpdateResult u;
  Eigen::VectorXd w;
  EXPECT_FALSE(RecursiveResidual(u, &w));  // no prediction
  u.has_prediction = true;
  u.prediction_error = Eigen::Vector2d(3.0, -1.5);
  u.prediction_scale = 2.25;
  ASSERT_TRUE(RecursiveResidual(u, &w));
  EXPECT_NEAR(w[0], 2.0, kFormulaTol);  // 3 / 1.5
  EXPECT_NEAR(w[1], -1.0, kFormulaTol);
  u.status = Status::NonFinite("refused");
  EXPECT_FALSE(RecursiveResidual(u, &w));
}

// ---------------------------------------------------------------------------------------------
// Critical values of the live monitor

TEST(CswCritical, FivePercentFromMemory) {
  // c(0.05) = 2.7955: from memory (the value quoted with the design of this monitor; Chu,
  // Stinchcombe & White 1996, Sec. 3). Checked against its equation with Boost.Math below.
  const double c = CswCriticalValue(0.05);
  EXPECT_NEAR(c, 2.7955, 5e-5);
  EXPECT_NEAR(2.0 * (1.0 - Phi(c) + c * phi(c)), 0.05, 1e-13);
}

TEST(CswCritical, SolvesItsEquationEverywhere) {
  // 2 [1 - Phi(c) + c phi(c)] = alpha (Robbins & Siegmund 1970; CSW 1996, Sec. 3), evaluated here
  // with Boost's complement cdf; the function falls in c, so larger alpha gives smaller c.
  double previous = std::numeric_limits<double>::infinity();
  for (double alpha : {1e-6, 0.001, 0.01, 0.05 / 3.0, 0.05, 0.2 / 3.0, 0.2, 0.5, 0.9}) {
    const double c = CswCriticalValue(alpha);
    const double tail =
        boost::math::cdf(boost::math::complement(boost::math::normal_distribution<double>(), c));
    EXPECT_NEAR(2.0 * (tail + c * phi(c)), alpha, 1e-12 * std::max(1.0, alpha)) << alpha;
    EXPECT_LT(c, previous);
    previous = c;
  }
}

TEST(AfterTrainingCritical, SolvesExpLaw) {
  // exp(-c^2 / 2) = alpha (Robbins & Siegmund 1970, normal mixture with h = 1).
  for (double alpha : {0.001, 0.01, 0.05 / 3.0, 0.05, 0.2}) {
    const double c = AfterTrainingCriticalValue(alpha);
    EXPECT_NEAR(std::exp(-0.5 * c * c), alpha, kFormulaTol * alpha) << alpha;
  }
}

// ---------------------------------------------------------------------------------------------
// Live monitor

CusumMonitorOptions Options(std::int64_t m, CusumOrigin origin = CusumOrigin::kAfterTraining) {
  CusumMonitorOptions o;
  o.training = m;
  o.origin = origin;
  return o;
}

std::vector<Eigen::VectorXd> Draws(int n, int rows, unsigned seed, double shift = 0.0) {
  std::mt19937_64 gen(seed);
  std::normal_distribution<double> normal;  // values only matter as fixed inputs here
  std::vector<Eigen::VectorXd> out;
  for (int t = 0; t < rows; ++t) {
    Eigen::VectorXd w(n);
    for (int i = 0; i < n; ++i) w[i] = normal(gen) * (i + 1.0) + shift;
    out.push_back(w);
  }
  return out;
}

TEST(CusumMonitorOptionsTest, Validation) {
  std::string why;
  EXPECT_TRUE(Options(10).IsValid(&why));
  EXPECT_FALSE(Options(9).IsValid(&why));
  EXPECT_NE(why.find("training = 9"), std::string::npos) << why;
  CusumMonitorOptions o = Options(50);
  o.false_alarm = 0.0;
  EXPECT_FALSE(o.IsValid(&why));
  EXPECT_NE(why.find("false_alarm"), std::string::npos);
  o.false_alarm = 0.3;
  o.warn_false_alarm = 0.2;
  EXPECT_FALSE(o.IsValid(&why));
  EXPECT_NE(why.find("warn_false_alarm"), std::string::npos);
}

TEST(CusumMonitorTest, CriticalValuesAreBonferroni) {
  CusumMonitor after({"a", "b", "c"}, Options(20));
  EXPECT_NEAR(after.critical_value(), std::sqrt(-2.0 * std::log(0.05 / 3.0)), kFormulaTol);
  EXPECT_NEAR(after.warn_value(), std::sqrt(-2.0 * std::log(0.20 / 3.0)), kFormulaTol);
  CusumMonitor first({"a", "b", "c"}, Options(20, CusumOrigin::kFirstResidual));
  EXPECT_EQ(first.critical_value(), CswCriticalValue(0.05 / 3.0));
  EXPECT_EQ(first.warn_value(), CswCriticalValue(0.20 / 3.0));
  // b_n(c) = sqrt(n (c^2 + ln(n / m))): at n = m it is c sqrt(m); at n = 2m, sqrt(2m (c^2 + ln 2)).
  EXPECT_NEAR(after.Boundary(2.0, 20), 2.0 * std::sqrt(20.0), kFormulaTol * 10.0);
  EXPECT_NEAR(after.Boundary(2.0, 40), std::sqrt(40.0 * (4.0 + std::log(2.0))), kFormulaTol * 10.0);
}

TEST(CusumMonitorTest, TrainingThenHandComputedReading) {
  const int m = 12;
  const std::vector<Eigen::VectorXd> w = Draws(2, m + 3, 11);
  CusumMonitor mon({"x", "y"}, Options(m));
  MonitorReading r;
  for (int t = 0; t < m; ++t) {
    ASSERT_TRUE(mon.Observe(w[t], &r).ok());
    EXPECT_FALSE(r.armed) << t;  // n <= m: training
  }
  // sigma_i: two-pass sample s.d. of the m training residuals (divisor m - 1).
  Eigen::Vector2d mean = Eigen::Vector2d::Zero(), ss = Eigen::Vector2d::Zero();
  for (int t = 0; t < m; ++t) mean += w[t] / m;
  for (int t = 0; t < m; ++t) ss.array() += (w[t] - mean).array().square();
  const Eigen::Vector2d sigma = (ss / (m - 1.0)).cwiseSqrt();
  EXPECT_NEAR(mon.sigma()[0], sigma[0], 1e3 * kEps * sigma[0]);
  EXPECT_NEAR(mon.sigma()[1], sigma[1], 1e3 * kEps * sigma[1]);
  Eigen::Vector2d s = Eigen::Vector2d::Zero();
  for (int t = m; t < m + 3; ++t) {
    ASSERT_TRUE(mon.Observe(w[t], &r).ok());
    s.array() += w[t].array() / sigma.array();
    const double n = t + 1.0;
    const double c = std::sqrt(-2.0 * std::log(0.05 / 2.0));
    const double cw = std::sqrt(-2.0 * std::log(0.20 / 2.0));
    const double crit = std::sqrt(n * (c * c + std::log(n / m)));
    const double warn = std::sqrt(n * (cw * cw + std::log(n / m)));
    EXPECT_TRUE(r.armed);
    EXPECT_NEAR(r.statistic, s.cwiseAbs().maxCoeff() / crit, 1e3 * kEps);
    EXPECT_EQ(r.critical, 1.0);
    EXPECT_NEAR(r.warn, warn / crit, 1e3 * kEps);
    EXPECT_EQ(r.clear, r.warn);
    EXPECT_NEAR(mon.sums()[0], s[0], 1e3 * kEps * (1.0 + std::abs(s[0])));
  }
}

TEST(CusumMonitorTest, FirstResidualOriginIncludesTraining) {
  const int m = 10;
  const std::vector<Eigen::VectorXd> w = Draws(1, m + 1, 5);
  CusumMonitor mon({"x"}, Options(m, CusumOrigin::kFirstResidual));
  MonitorReading r;
  double total = 0.0;
  for (const auto& v : w) {
    ASSERT_TRUE(mon.Observe(v, &r).ok());
    total += v[0];
  }
  EXPECT_NEAR(mon.sums()[0], total / mon.sigma()[0], 1e3 * kEps * (1.0 + std::abs(total)));
  const double c = CswCriticalValue(0.05);
  const double n = m + 1.0;
  EXPECT_NEAR(r.statistic,
              std::abs(total / mon.sigma()[0]) / std::sqrt(n * (c * c + std::log(n / m))),
              1e3 * kEps);
}

TEST(CusumMonitorTest, ExplanationNamesEquationAndDirection) {
  const int m = 30;
  CusumMonitor mon({"alpha", "beta"}, Options(m));
  MonitorReading r;
  for (const auto& v : Draws(2, m, 3)) ASSERT_TRUE(mon.Observe(v, &r).ok());
  // beta's forecasts far too high: outcomes 4 sigma below forecast for 40 rows.
  for (int t = 0; t < 40; ++t) {
    Eigen::Vector2d v(0.0, -4.0 * mon.sigma()[1]);
    ASSERT_TRUE(mon.Observe(v, &r).ok());
  }
  EXPECT_GT(r.statistic, r.critical);
  EXPECT_NE(r.explanation.find("'beta'"), std::string::npos) << r.explanation;
  EXPECT_NE(r.explanation.find("too high"), std::string::npos) << r.explanation;
  mon.Reset();
  for (const auto& v : Draws(2, m, 3)) ASSERT_TRUE(mon.Observe(v, &r).ok());
  for (int t = 0; t < 40; ++t) {
    Eigen::Vector2d v(4.0 * mon.sigma()[0], 0.0);
    ASSERT_TRUE(mon.Observe(v, &r).ok());
  }
  EXPECT_NE(r.explanation.find("'alpha'"), std::string::npos) << r.explanation;
  EXPECT_NE(r.explanation.find("too low"), std::string::npos) << r.explanation;
}

TEST(CusumMonitorTest, ResetEqualsFreshMonitor) {
  const int m = 15;
  const std::vector<Eigen::VectorXd> first = Draws(3, 60, 1, 0.5);
  const std::vector<Eigen::VectorXd> second = Draws(3, 60, 2);
  CusumMonitor used({"a", "b", "c"}, Options(m));
  CusumMonitor fresh({"a", "b", "c"}, Options(m));
  MonitorReading r1, r2;
  for (const auto& v : first) ASSERT_TRUE(used.Observe(v, &r1).ok());
  used.Reset();
  EXPECT_EQ(used.residuals(), 0);
  EXPECT_FALSE(used.armed());
  for (const auto& v : second) {
    ASSERT_TRUE(used.Observe(v, &r1).ok());
    ASSERT_TRUE(fresh.Observe(v, &r2).ok());
    EXPECT_EQ(r1.armed, r2.armed);
    EXPECT_EQ(r1.statistic, r2.statistic);  // bit for bit
    EXPECT_EQ(r1.warn, r2.warn);
    EXPECT_EQ(r1.explanation, r2.explanation);
  }
}

TEST(CusumMonitorTest, NonFiniteAndWrongSizeLeaveStateUnchanged) {
  const int m = 10;
  const std::vector<Eigen::VectorXd> w = Draws(2, 30, 9);
  CusumMonitor clean({"a", "b"}, Options(m));
  CusumMonitor dirty({"a", "b"}, Options(m));
  MonitorReading r1, r2;
  for (std::size_t t = 0; t < w.size(); ++t) {
    if (t == 4 || t == 20) {  // once in training, once while monitoring
      Eigen::Vector2d bad(std::numeric_limits<double>::quiet_NaN(), 1.0);
      EXPECT_EQ(dirty.Observe(bad, &r2).code(), StatusCode::kNonFinite);
      EXPECT_FALSE(r2.armed);
      bad << 1.0, -std::numeric_limits<double>::infinity();
      EXPECT_EQ(dirty.Observe(bad, &r2).code(), StatusCode::kNonFinite);
      EXPECT_EQ(dirty.Observe(Eigen::VectorXd::Zero(3), &r2).code(), StatusCode::kInvalidArgument);
    }
    ASSERT_TRUE(clean.Observe(w[t], &r1).ok());
    ASSERT_TRUE(dirty.Observe(w[t], &r2).ok());
    EXPECT_EQ(r1.statistic, r2.statistic);
  }
  EXPECT_EQ(clean.residuals(), dirty.residuals());
}

TEST(CusumMonitorTest, UpdateWithoutPredictionIsSkipped) {
  CusumMonitor mon({"a"}, Options(10));
  MonitorReading r;
  UpdateResult u;  // no prediction (warming up)
  ASSERT_TRUE(mon.Observe(u, &r).ok());
  EXPECT_FALSE(r.armed);
  EXPECT_EQ(mon.residuals(), 0);
  u.has_prediction = true;
  u.prediction_error = Eigen::VectorXd::Constant(1, 2.0);
  u.prediction_scale = 4.0;
  ASSERT_TRUE(mon.Observe(u, &r).ok());
  EXPECT_EQ(mon.residuals(), 1);
  EXPECT_NEAR(mon.sums()[0], 0.0, 0.0);  // training: after-training sums stay 0
}

TEST(CusumMonitorTest, ZeroSpreadTrainingIsUnavailableUntilReset) {
  const int m = 10;
  CusumMonitor mon({"flat", "moving"}, Options(m));
  MonitorReading r;
  const std::vector<Eigen::VectorXd> w = Draws(2, m + 5, 4);
  for (int t = 0; t < m + 5; ++t) {
    Eigen::Vector2d v(0.25, w[t][1]);  // 'flat' has identical residuals
    const Status s = mon.Observe(v, &r);
    if (t + 1 < m) {
      EXPECT_TRUE(s.ok());
    } else {
      EXPECT_EQ(s.code(), StatusCode::kUnavailable) << t;
      EXPECT_NE(s.message().find("'flat'"), std::string::npos);
      EXPECT_FALSE(r.armed);
    }
  }
  mon.Reset();
  for (int t = 0; t < m + 1; ++t) ASSERT_TRUE(mon.Observe(w[t], &r).ok());
  EXPECT_TRUE(r.armed);
}

}  // namespace
}  // namespace rimwatch
