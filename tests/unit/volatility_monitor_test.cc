// VolatilityMonitor (engine/volatility_monitor.h): the Page CUSUM recursion against a hand
// computation, the simulated thresholds against an independent simulation, determinism, Reset,
// non-finite and degenerate input. The false-alarm rate on a real VAR and the detection delay
// are in tests/calibration/volatility_calibration_test.cc.
#include "rimwatch/engine/volatility_monitor.h"

#include <gtest/gtest.h>

#include <Eigen/Dense>
#include <algorithm>
#include <boost/math/distributions/binomial.hpp>
#include <cmath>
#include <cstdint>
#include <iostream>
#include <limits>
#include <random>
#include <string>
#include <vector>

namespace rimwatch {
namespace {

constexpr double kEps = std::numeric_limits<double>::epsilon();
constexpr double kPi = 3.14159265358979323846;

// Independent Gaussian source for the checks: std::mt19937_64 (fixed by the standard) with the
// Box-Muller transform written here (Box & Muller 1958, Ann. Math. Statist. 29), not the engine's
// ziggurat.
class BoxMuller {
 public:
  explicit BoxMuller(std::uint64_t seed) : gen_(seed) {}
  double Normal() {
    if (has_spare_) {
      has_spare_ = false;
      return spare_;
    }
    const double u1 = (static_cast<double>(gen_() >> 11) + 0.5) * 0x1.0p-53;
    const double u2 = (static_cast<double>(gen_() >> 11) + 0.5) * 0x1.0p-53;
    const double radius = std::sqrt(-2.0 * std::log(u1));
    spare_ = radius * std::sin(2.0 * kPi * u2);
    has_spare_ = true;
    return radius * std::cos(2.0 * kPi * u2);
  }
  Eigen::VectorXd Vector(int n) {
    Eigen::VectorXd z(n);
    for (int i = 0; i < n; ++i) z[i] = Normal();
    return z;
  }

 private:
  std::mt19937_64 gen_;
  bool has_spare_ = false;
  double spare_ = 0.0;
};

VolatilityMonitorOptions Options(std::int64_t m, std::int64_t horizon) {
  VolatilityMonitorOptions o;
  o.training = m;
  o.horizon = horizon;
  return o;
}

// Binomial acceptance band for a share with true probability p: the central `coverage` mass
// (common practice), as shares.
std::pair<double, double> Band(int trials, double p, double coverage) {
  const boost::math::binomial_distribution<double> b(trials, p);
  const double tail = 0.5 * (1.0 - coverage);
  return {boost::math::quantile(b, tail) / trials,
          boost::math::quantile(boost::math::complement(b, tail)) / trials};
}

// Share of independent paths (training m rows when m > 0, then `horizon` rows) whose Page CUSUM
// exceeds h. Written from the definition: Omega-hat by Eigen's two-pass covariance, s_t =
// w' Omega-hat^{-1} w by an LDLT solve, the per-row LLR, the recursion.
double IndependentFalseAlarmShare(int n, std::int64_t m, std::int64_t horizon, double delta,
                                  double h, int paths, std::uint64_t seed) {
  BoxMuller source(seed);
  int alarms = 0;
  for (int p = 0; p < paths; ++p) {
    Eigen::MatrixXd omega = Eigen::MatrixXd::Identity(n, n);
    if (m > 0) {
      Eigen::MatrixXd z(m, n);
      for (std::int64_t t = 0; t < m; ++t) z.row(t) = source.Vector(n).transpose();
      const Eigen::MatrixXd centred = z.rowwise() - z.colwise().mean();
      omega = centred.transpose() * centred / (m - 1.0);
    }
    const Eigen::LDLT<Eigen::MatrixXd> ldlt(omega);
    double cusum = 0.0;
    for (std::int64_t t = 0; t < horizon; ++t) {
      const Eigen::VectorXd w = source.Vector(n);
      const double s = w.dot(ldlt.solve(w));
      cusum = std::max(0.0, cusum - 0.5 * n * std::log(delta) + 0.5 * (1.0 - 1.0 / delta) * s);
      if (cusum > h) {
        ++alarms;
        break;
      }
    }
  }
  return static_cast<double>(alarms) / paths;
}

TEST(VolatilityMonitorOptionsTest, Validation) {
  std::string why;
  EXPECT_TRUE(Options(13, 100).IsValid(3, &why)) << why;
  EXPECT_FALSE(Options(12, 100).IsValid(3, &why));
  EXPECT_NE(why.find("training = 12"), std::string::npos) << why;
  VolatilityMonitorOptions o = Options(50, 100);
  o.delta = 1.0;
  EXPECT_FALSE(o.IsValid(2, &why));
  EXPECT_NE(why.find("delta"), std::string::npos);
  o.delta = 0.5;  // a fall in variance is a valid design
  EXPECT_TRUE(o.IsValid(2, &why)) << why;
  o.calibration_paths = 300;  // 0.05 * 300 = 15 < 20 exceedances
  EXPECT_FALSE(o.IsValid(2, &why));
  EXPECT_NE(why.find("calibration_paths"), std::string::npos);
  o = Options(50, 0);
  EXPECT_FALSE(o.IsValid(2, &why));
}

TEST(VolatilityMonitorTest, PageRecursionByHand) {
  // n = 2, m = 12 fixed training vectors; then rows whose statistic is computed here from the
  // definitions (two-pass covariance, explicit inverse), not by the monitor's Cholesky route.
  const int n = 2;
  const int m = 12;
  VolatilityMonitorOptions o = Options(m, 50);
  o.calibration_paths = 400;
  VolatilityMonitor mon({"p", "q"}, o);
  BoxMuller source(77);
  std::vector<Eigen::VectorXd> train;
  MonitorReading r;
  for (int t = 0; t < m; ++t) {
    train.push_back(source.Vector(n));
    ASSERT_TRUE(mon.Observe(train.back(), &r).ok());
    EXPECT_FALSE(r.armed);
  }
  Eigen::VectorXd mean = Eigen::VectorXd::Zero(n);
  for (const auto& w : train) mean += w / m;
  Eigen::MatrixXd omega = Eigen::MatrixXd::Zero(n, n);
  for (const auto& w : train) omega += (w - mean) * (w - mean).transpose() / (m - 1.0);
  EXPECT_LE((mon.omega() - omega).cwiseAbs().maxCoeff(), 1e3 * kEps);
  const Eigen::MatrixXd inverse = omega.inverse();
  const double delta = 2.0;
  double cusum = 0.0;
  for (int t = 0; t < 20; ++t) {
    const Eigen::VectorXd w = 1.6 * source.Vector(n);  // variance up by 2.56
    const double s = w.dot(inverse * w);
    const double llr = -0.5 * n * std::log(delta) + 0.5 * (1.0 - 1.0 / delta) * s;
    cusum = std::max(0.0, cusum + llr);
    ASSERT_TRUE(mon.Observe(w, &r).ok());
    EXPECT_TRUE(r.armed);
    EXPECT_NEAR(mon.cusum(), cusum, 1e4 * kEps * (1.0 + cusum)) << t;
    EXPECT_NEAR(r.statistic, cusum / mon.thresholds().critical, 1e4 * kEps * (1.0 + cusum));
    EXPECT_EQ(r.critical, 1.0);
    EXPECT_EQ(r.warn, mon.thresholds().warn / mon.thresholds().critical);
  }
  EXPECT_LT(r.warn, 1.0);
}

TEST(VolatilityMonitorTest, ThresholdsAreDeterministicAndSurviveReset) {
  VolatilityMonitorOptions o = Options(40, 300);
  o.calibration_paths = 1000;
  VolatilityMonitor a({"x", "y", "z"}, o);
  VolatilityMonitor b({"x", "y", "z"}, o);
  EXPECT_EQ(a.thresholds().critical, b.thresholds().critical);  // bit for bit
  EXPECT_EQ(a.thresholds().warn, b.thresholds().warn);
  EXPECT_GT(a.thresholds().critical, a.thresholds().warn);
  const double before = a.thresholds().critical;
  a.Reset();
  EXPECT_EQ(a.thresholds().critical, before);
}

// The simulated thresholds against an independent simulation (Box-Muller normals, LDLT solves,
// no eigenvalue shortcut): the share of paths crossing h_crit (h_warn) must lie in the 99.9%
// binomial band around false_alarm (warn_false_alarm), widened by the calibration's own Monte
// Carlo s.d. sqrt(alpha (1 - alpha) / P) at three s.d.
void CheckThresholds(int n, std::int64_t m, std::int64_t horizon, int paths, int check_paths) {
  VolatilityMonitorOptions o = Options(m == 0 ? n + 10 : m, horizon);
  o.calibration_paths = paths;
  VolatilityMonitorOptions sim = o;
  sim.training = m;
  const PageThresholds h = SimulatePageThresholds(n, sim);
  for (const auto& [alpha, threshold] :
       {std::pair{o.false_alarm, h.critical}, std::pair{o.warn_false_alarm, h.warn}}) {
    const double share =
        IndependentFalseAlarmShare(n, m, horizon, o.delta, threshold, check_paths, 2024 + m);
    auto [lo, hi] = Band(check_paths, alpha, 0.999);
    const double calibration_sd = std::sqrt(alpha * (1.0 - alpha) / paths);
    lo -= 3.0 * calibration_sd;
    hi += 3.0 * calibration_sd;
    std::cout << "[volatility] n = " << n << ", m = " << m << ", H = " << horizon
              << ": h = " << threshold << ", independent false-alarm share " << share
              << " (nominal " << alpha << ", band " << lo << ".." << hi << ")\n";
    EXPECT_GE(share, lo) << "alpha " << alpha;
    EXPECT_LE(share, hi) << "alpha " << alpha;
  }
}

TEST(VolatilityThresholds, KnownOmegaMatchIndependentSimulation) {
  CheckThresholds(/*n=*/3, /*m=*/0, /*horizon=*/400, /*paths=*/4000, /*check_paths=*/4000);
}

TEST(VolatilityThresholds, EstimatedOmegaMatchIndependentSimulation) {
  CheckThresholds(/*n=*/2, /*m=*/30, /*horizon=*/400, /*paths=*/4000, /*check_paths=*/4000);
}

TEST(VolatilityThresholds, EstimatingOmegaRaisesTheThreshold) {
  // With Omega estimated from few rows, s_t is more dispersed: the threshold must be higher than
  // with Omega known (the in-control law is wider), and fall towards it as m grows.
  VolatilityMonitorOptions o = Options(0, 400);
  o.calibration_paths = 2000;
  const double known = SimulatePageThresholds(3, o).critical;
  o.training = 40;
  const double small = SimulatePageThresholds(3, o).critical;
  o.training = 400;
  const double large = SimulatePageThresholds(3, o).critical;
  EXPECT_GT(small, large);
  EXPECT_GT(large, known);
}

TEST(VolatilityThresholds, KnownOmegaThresholdIsTooLowWhenOmegaIsEstimated) {
  // Why the calibration simulates the training sample: with Omega estimated from m = 193 rows
  // (n = 3), the threshold simulated for a known Omega lets through far more than alpha.
  VolatilityMonitorOptions o = Options(0, 2000);
  const double h_known = SimulatePageThresholds(3, o).critical;
  const double share = IndependentFalseAlarmShare(3, 193, 2000, o.delta, h_known, 1000, 99);
  std::cout << "[volatility] known-Omega h = " << h_known
            << " applied with Omega estimated from 193 rows: false-alarm share " << share
            << " (nominal " << o.false_alarm << ")\n";
  EXPECT_GT(share, 2.0 * o.false_alarm);
}

TEST(VolatilityMonitorTest, ExplanationNamesTheEquation) {
  VolatilityMonitorOptions o = Options(30, 200);
  o.calibration_paths = 1000;
  VolatilityMonitor mon({"calm", "wild"}, o);
  BoxMuller source(5);
  MonitorReading r;
  for (int t = 0; t < 30; ++t) ASSERT_TRUE(mon.Observe(source.Vector(2), &r).ok());
  for (int t = 0; t < 60; ++t) {
    Eigen::VectorXd w = source.Vector(2);
    w[1] *= 3.0;  // variance x9 in 'wild'
    ASSERT_TRUE(mon.Observe(w, &r).ok());
  }
  EXPECT_GT(r.statistic, 1.0);
  EXPECT_NE(r.explanation.find("'wild'"), std::string::npos) << r.explanation;
  EXPECT_NE(r.explanation.find("higher"), std::string::npos) << r.explanation;
}

TEST(VolatilityMonitorTest, ResetEqualsFreshMonitor) {
  VolatilityMonitorOptions o = Options(20, 100);
  o.calibration_paths = 400;
  VolatilityMonitor used({"a", "b"}, o);
  VolatilityMonitor fresh({"a", "b"}, o);
  BoxMuller s1(1), s2(2);
  MonitorReading r1, r2;
  for (int t = 0; t < 50; ++t) ASSERT_TRUE(used.Observe(2.0 * s1.Vector(2), &r1).ok());
  used.Reset();
  EXPECT_EQ(used.residuals(), 0);
  EXPECT_EQ(used.cusum(), 0.0);
  for (int t = 0; t < 80; ++t) {
    const Eigen::VectorXd w = s2.Vector(2) * (t > 40 ? 2.0 : 1.0);
    ASSERT_TRUE(used.Observe(w, &r1).ok());
    ASSERT_TRUE(fresh.Observe(w, &r2).ok());
    EXPECT_EQ(r1.armed, r2.armed);
    EXPECT_EQ(r1.statistic, r2.statistic);
    EXPECT_EQ(r1.explanation, r2.explanation);
  }
}

TEST(VolatilityMonitorTest, NonFiniteAndWrongSizeLeaveStateUnchanged) {
  VolatilityMonitorOptions o = Options(12, 100);
  o.calibration_paths = 400;
  VolatilityMonitor clean({"a", "b"}, o);
  VolatilityMonitor dirty({"a", "b"}, o);
  BoxMuller source(8);
  MonitorReading r1, r2;
  for (int t = 0; t < 40; ++t) {
    if (t == 3 || t == 25) {
      Eigen::Vector2d bad(1.0, std::numeric_limits<double>::quiet_NaN());
      EXPECT_EQ(dirty.Observe(bad, &r2).code(), StatusCode::kNonFinite);
      EXPECT_FALSE(r2.armed);
      bad << std::numeric_limits<double>::infinity(), 0.0;
      EXPECT_EQ(dirty.Observe(bad, &r2).code(), StatusCode::kNonFinite);
      EXPECT_EQ(dirty.Observe(Eigen::VectorXd::Zero(1), &r2).code(), StatusCode::kInvalidArgument);
    }
    const Eigen::VectorXd w = source.Vector(2);
    ASSERT_TRUE(clean.Observe(w, &r1).ok());
    ASSERT_TRUE(dirty.Observe(w, &r2).ok());
    EXPECT_EQ(r1.statistic, r2.statistic);
  }
  EXPECT_EQ(clean.residuals(), dirty.residuals());
  EXPECT_EQ(clean.cusum(), dirty.cusum());
}

TEST(VolatilityMonitorTest, SingularTrainingIsUnavailableUntilReset) {
  VolatilityMonitorOptions o = Options(12, 100);
  o.calibration_paths = 400;
  VolatilityMonitor mon({"a", "copy"}, o);
  BoxMuller source(3);
  MonitorReading r;
  for (int t = 0; t < 14; ++t) {
    const double x = source.Normal();
    const Status s = mon.Observe(Eigen::Vector2d(x, x), &r);  // collinear: Omega singular
    if (t + 1 < 12) {
      EXPECT_TRUE(s.ok());
    } else {
      EXPECT_EQ(s.code(), StatusCode::kUnavailable) << t;
      EXPECT_FALSE(r.armed);
    }
  }
  mon.Reset();
  for (int t = 0; t < 13; ++t) ASSERT_TRUE(mon.Observe(source.Vector(2), &r).ok());
  EXPECT_TRUE(r.armed);
}

TEST(VolatilityMonitorTest, UpdateWithoutPredictionIsSkipped) {
  VolatilityMonitorOptions o = Options(12, 100);
  o.calibration_paths = 400;
  VolatilityMonitor mon({"a", "b"}, o);
  MonitorReading r;
  UpdateResult u;
  ASSERT_TRUE(mon.Observe(u, &r).ok());
  EXPECT_FALSE(r.armed);
  EXPECT_EQ(mon.residuals(), 0);
}

}  // namespace
}  // namespace rimwatch
