// ConstancyMonitor calibration: the share of runs with any false critical alarm within the
// horizon when the coefficients are constant, for both tests, under Gaussian and GARCH errors.
//
// Design: the stable VAR(2) of restriction_calibration_test.cc (n = 3, constant, the invented
// process of tests/reference/make_reference.py case sim_const with A2(1,3) = 0), presample p = 2,
// m = 200 training rows, horizon H = 10 x 200 = 2000 rows. The tracking estimator is a sliding
// window of W = 200 rows and the monitor evaluates every B = 200 rows, so E = 10 evaluations fall
// within H, each at level alpha / 10 = 0.005 (0.02 for the warning level). Covariance HC3
// (MacKinnon & White 1985, J. Econometrics 29) for the equality test.
//   Gaussian errors: e_t = L z_t.  GARCH(1,1)-type errors: h_jt = 0.1 + 0.15 g_{j,t-1}^2 +
//   0.75 h_{j,t-1}, g_jt = sqrt(h_jt) z_jt, e_t = L g_t (Bollerslev 1986, J. Econometrics 31).
// Claim: the guarantee is Bonferroni's inequality, conservative by design, so the test asserts
// that the share of runs with any false critical alarm is at or below alpha = 0.05 up to its
// binomial interval (Clopper-Pearson lower bound <= alpha), and the same for the warning level;
// it prints the share and the per-evaluation rejection rate beside alpha / E. The per-evaluation
// sizes rest on the asymptotic laws (Hansen 1992, J. Policy Modeling 14; chi2 for the Wald form)
// at T = 200 rows and n k = 21 coefficients, which is where finite-sample distortion would show.
// RIMWATCH_CALIBRATION_SCALE (default 1) scales the replication counts down, never below 300.
#include <gtest/gtest.h>

#include <Eigen/Dense>
#include <algorithm>
#include <cmath>
#include <cstdlib>
#include <string>
#include <vector>

#include "../montecarlo/mc_support.h"
#include "rimwatch/engine/constancy.h"
#include "rimwatch/engine/var_estimator.h"
#include "rimwatch/engine/var_spec.h"

namespace rimwatch {
namespace {

constexpr int kLags = 2;
constexpr int kBurnIn = 200;
constexpr int kTrainRows = 200;
constexpr int kHorizon = 10 * kTrainRows;
constexpr int kWindow = 200;  // sliding tracking window and block length
constexpr int kObservations = kLags + kTrainRows + kHorizon;
constexpr double kAlpha = 0.05;
constexpr double kWarnAlpha = 0.20;

int Scaled(int base, int floor) {
  const char* env = std::getenv("RIMWATCH_CALIBRATION_SCALE");
  const double scale = env != nullptr ? std::atof(env) : 1.0;
  if (!(scale > 0.0) || scale >= 1.0) return base;
  return std::max(floor, static_cast<int>(std::lround(base * scale)));
}

VarSpec Spec(WindowKind kind) {
  VarSpec spec;
  spec.variables = {"y1", "y2", "y3"};
  spec.lags = kLags;
  spec.deterministic = Deterministic::kConstant;
  spec.window.kind = kind;
  spec.window.rows = kWindow;
  spec.window.robust_row_cap = kObservations;
  return spec;
}

Eigen::MatrixXd Simulate(bool garch, mc::GaussianSource* src) {
  Eigen::MatrixXd a1(3, 3), a2(3, 3), l(3, 3);
  a1 << 0.55, 0.15, 0.00, 0.10, 0.45, 0.10, 0.05, 0.20, 0.40;
  a2 << -0.15, 0.00, 0.00, 0.00, 0.10, 0.00, 0.10, -0.05, -0.10;
  l << 1.0, 0.0, 0.0, 0.3, 0.8, 0.0, -0.2, 0.1, 0.6;
  const Eigen::Vector3d c(0.5, -0.2, 0.1);
  Eigen::VectorXd h = Eigen::VectorXd::Ones(3), g_prev = Eigen::VectorXd::Zero(3);
  auto law = [&](const Eigen::MatrixXd&, mc::GaussianSource* s) {
    Eigen::VectorXd g = s->NormalVector(3);
    if (garch) {
      h = (0.1 + 0.15 * g_prev.array().square() + 0.75 * h.array()).matrix();
      g = g.cwiseProduct(h.cwiseSqrt());
      g_prev = g;
    }
    return Eigen::VectorXd(l * g);
  };
  return mc::SimulateVar({a1, a2}, Eigen::VectorXd(c), kBurnIn, kObservations, src, law);
}

struct Summary {
  int runs = 0;
  int critical = 0;  // runs with any critical reading within the horizon
  int warn = 0;
  int evaluations = 0;  // evaluations within the horizon, over all runs
  int rejections = 0;   // of those, at the critical level
};

Summary RunMonitor(ConstancyMonitorOptions::Test test, bool garch, int runs, std::uint64_t seed) {
  ConstancyMonitorOptions options;
  options.test = test;
  options.training_rows = kTrainRows;
  options.horizon_rows = kHorizon;
  options.block_rows = kWindow;
  options.false_alarm = kAlpha;
  options.warn_false_alarm = kWarnAlpha;
  options.covariance.kind = CovarianceKind::kHC3;
  ConstancyMonitor monitor;
  const Status st = ConstancyMonitor::Create(Spec(WindowKind::kSliding), options, &monitor);
  EXPECT_TRUE(st.ok()) << st.ToString();
  mc::GaussianSource source(seed);
  Summary s;
  s.runs = runs;
  for (int r = 0; r < runs; ++r) {
    const Eigen::MatrixXd y = Simulate(garch, &source);
    VarEstimator tracking(Spec(WindowKind::kSliding)), reference(Spec(WindowKind::kExpanding));
    monitor.Reset();
    bool critical = false, warn = false;
    ConstancyReading reading;
    for (Eigen::Index t = 0; t < y.rows(); ++t) {
      tracking.Update(y.row(t).transpose());
      if (!reference.Update(y.row(t).transpose()).estimated) continue;
      EXPECT_TRUE(monitor.Observe(tracking, reference, &reading).ok());
      if (!reading.evaluated || !reading.within_horizon) continue;
      EXPECT_TRUE(reading.status.ok()) << reading.status.ToString();
      ++s.evaluations;
      const bool reject = reading.alarm.statistic >= reading.alarm.critical;
      s.rejections += reject;
      critical = critical || reject;
      warn = warn || reading.alarm.statistic >= reading.alarm.warn;
    }
    s.critical += critical;
    s.warn += warn;
  }
  return s;
}

void Check(const Summary& s, const std::string& label) {
  const mc::BinomialShare crit = mc::ShareWithInterval(s.critical, s.runs);
  const mc::BinomialShare warn = mc::ShareWithInterval(s.warn, s.runs);
  const mc::BinomialShare each = mc::ShareWithInterval(s.rejections, s.evaluations);
  mc::Report(label + ".critical_false_alarm_share", mc::FormatShare(crit));
  mc::Report(label + ".warn_false_alarm_share", mc::FormatShare(warn));
  mc::Report(label + ".per_evaluation_rejection",
             mc::FormatShare(each) + " vs nominal alpha/E = 0.50%");
  EXPECT_EQ(s.evaluations, 10 * s.runs) << label;
  EXPECT_LE(crit.lower, kAlpha) << label;
  EXPECT_LE(warn.lower, kWarnAlpha) << label;
}

TEST(ConstancyCalibration, NyblomHansenGaussian) {
  Check(RunMonitor(ConstancyMonitorOptions::Test::kNyblomHansen, false, Scaled(1000, 300), 31001),
        "nyblom.gaussian");
}

TEST(ConstancyCalibration, NyblomHansenGarch) {
  Check(RunMonitor(ConstancyMonitorOptions::Test::kNyblomHansen, true, Scaled(1000, 300), 31002),
        "nyblom.garch");
}

TEST(ConstancyCalibration, ReferenceEqualityGaussian) {
  Check(RunMonitor(ConstancyMonitorOptions::Test::kReferenceEquality, false, Scaled(1000, 300),
                   31003),
        "equality.gaussian");
}

TEST(ConstancyCalibration, ReferenceEqualityGarch) {
  Check(
      RunMonitor(ConstancyMonitorOptions::Test::kReferenceEquality, true, Scaled(1000, 300), 31004),
      "equality.garch");
}

}  // namespace
}  // namespace rimwatch
