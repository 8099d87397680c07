// RestrictionMonitor and its scan: constructed answers, general-purpose libraries (Eigen's QR and
// LU, Boost's F distribution) and small simulations with binomial bands.
#include "rimwatch/engine/restriction_monitor.h"

#include <gtest/gtest.h>

#include <Eigen/Dense>
#include <boost/math/distributions/binomial.hpp>
#include <boost/math/distributions/fisher_f.hpp>
#include <cmath>
#include <cstdio>
#include <limits>
#include <random>
#include <string>
#include <vector>

#include "rimwatch/engine/covariance.h"
#include "rimwatch/engine/random.h"
#include "rimwatch/engine/var_estimator.h"
#include "rimwatch/engine/wald.h"
#include "sim_var.h"

namespace rimwatch {
namespace {

constexpr double kEps = std::numeric_limits<double>::epsilon();

VarSpec Spec(int n, int p, WindowKind kind = WindowKind::kExpanding) {
  VarSpec spec;
  for (int i = 0; i < n; ++i) spec.variables.push_back("v" + std::to_string(i));
  spec.lags = p;
  spec.deterministic = Deterministic::kConstant;
  spec.window.kind = kind;
  spec.window.rows = 150;
  spec.window.robust_row_cap = 5000;
  return spec;
}

// A small, fast monitor configuration for the unit tests.
RestrictionMonitorOptions SmallOptions() {
  RestrictionMonitorOptions o;
  o.training_rows = 100;
  o.horizon_rows = 400;
  o.calibration_paths = 1000;
  return o;
}

// ---------------------------------------------------------------------------------------------
// The grid and the window statistic

TEST(ScanWindows, GeometricGridRoundedBelowTheHorizon) {
  // round(50 * 2^(j/2)): 50, 70.7, 100, 141.4, 200, 282.8, (400 is not < H).
  const std::vector<std::int64_t> expected = {50, 71, 100, 141, 200, 283};
  EXPECT_EQ(ScanWindows(50, 400, std::sqrt(2.0)), expected);
  // Duplicates after rounding are dropped: 3 * 1.1^j = 3, 3.3, 3.63, 3.99, 4.39, ...
  const std::vector<std::int64_t> dedup = {3, 4, 5, 6};
  EXPECT_EQ(ScanWindows(3, 7, 1.1), dedup);
}

// One touched equation, q = 2, a single look at w rows since arming, K = I (pooled sums with
// J = rho V at arming and no refresh before row 16).
ScanDesign SingleLook(std::int64_t w) {
  ScanDesign d;
  d.q = 2;
  d.blocks = {Eigen::MatrixXd::Identity(2, 2)};
  d.training_scores = 10;
  d.horizon_rows = w;
  d.min_window = w;
  d.since_arming = true;
  return d;
}

void StartWithIdentityKernel(ChangeScan* scan) {
  scan->Start(Eigen::MatrixXd::Identity(2, 2), Eigen::MatrixXd::Identity(2, 2), 10.0, 10);
}

TEST(ChangeScan, WindowStatisticIsTheRegressionLikelihoodRatio) {
  const std::int64_t w = 12;
  ASSERT_LT(w, ChangeScan::kKernelStride);
  ChangeScan scan(SingleLook(w));
  StartWithIdentityKernel(&scan);
  // Om = 2.5: the statistic does not depend on the scale of Om.
  const ScanScores scores(2, Eigen::MatrixXd::Constant(1, 1, 2.5));
  std::mt19937_64 gen(7);
  std::normal_distribution<double> normal;
  Eigen::VectorXd u(w);
  Eigen::MatrixXd z(w, 2);
  ScanValue value;
  for (std::int64_t t = 0; t < w; ++t) {
    u[t] = normal(gen) + 0.4;  // a shifted mean, so the fit is not trivial
    z.row(t) << normal(gen) + 1.0, normal(gen);
    ScanRow row;
    scores.Build(u.segment(t, 1), z.row(t).transpose(), &row);
    value = scan.Add(row);
    if (t + 1 < w) {
      EXPECT_FALSE(value.available) << "row " << t + 1;
    }
  }
  ASSERT_TRUE(value.available);
  EXPECT_EQ(value.window, w);
  // Twice the Gaussian log-likelihood ratio of the regression of u on z (no intercept), error
  // variance unknown: w ln(RSS_0 / RSS_1), RSS_1 from Eigen's Householder QR.
  const Eigen::VectorXd beta = z.householderQr().solve(u);
  const double rss1 = (u - z * beta).squaredNorm();
  const double expected = w * std::log(u.squaredNorm() / rss1);
  EXPECT_NEAR(value.statistic, expected, 1e3 * kEps * expected);
}

TEST(ChangeScan, ScalePenaltyShiftsEachCandidateByGammaLnHOverW) {
  // gamma ln(H / w) from the definition; none at or beyond the horizon.
  ScanDesign d = SingleLook(12);
  d.horizon_rows = 48;
  d.scale_penalty = 2.0;
  EXPECT_NEAR(ScalePenalty(d, 12), 2.0 * std::log(4.0), 4.0 * kEps);
  EXPECT_EQ(ScalePenalty(d, 48), 0.0);
  EXPECT_EQ(ScalePenalty(d, 60), 0.0);
  d.scale_penalty = 0.0;
  EXPECT_EQ(ScalePenalty(d, 12), 0.0);
  // The same rows through a penalised and an unpenalised single look (since arming, due first at
  // w_0 = 12 rows): the readings differ by exactly 2 ln(48 / 12) at that row.
  ScanDesign plain = SingleLook(12), penalised = SingleLook(12);
  plain.horizon_rows = penalised.horizon_rows = 48;
  plain.scale_penalty = 0.0;
  penalised.scale_penalty = 2.0;
  ChangeScan a(plain), b(penalised);
  StartWithIdentityKernel(&a);
  StartWithIdentityKernel(&b);
  const ScanScores scores(2, Eigen::MatrixXd::Identity(1, 1));
  DeterministicRandom rng(5);
  ScanValue va, vb;
  for (int t = 0; t < 12; ++t) {
    Eigen::VectorXd u(1), z(2);
    u << rng.Normal() + 0.3;
    z << rng.Normal(), rng.Normal();
    ScanRow row;
    scores.Build(u, z, &row);
    va = a.Add(row);
    vb = b.Add(row);
  }
  ASSERT_TRUE(va.available && vb.available);
  EXPECT_NEAR(va.statistic - vb.statistic, 2.0 * std::log(4.0), 64.0 * kEps * va.statistic);
}

TEST(ChangeScan, SingleLookFollowsTheFLaw) {
  // Under u ~ N(0, 1) independent of z, F = ((RSS_0 - RSS_1) / q) / (RSS_1 / (w - q)) is
  // F(q, w - q) (the regression F test; common practice), so L = w ln(1 + q F / (w - q)).
  const std::int64_t w = 12;
  const int q = 2;
  const double alpha = 0.05;
  const boost::math::fisher_f f(q, static_cast<double>(w - q));
  const double f_crit = boost::math::quantile(boost::math::complement(f, alpha));
  const double l_crit = w * std::log1p(q * f_crit / static_cast<double>(w - q));
  const ScanScores scores(2, Eigen::MatrixXd::Identity(1, 1));
  DeterministicRandom rng(99);
  const int trials = 20000;
  int above = 0;
  ChangeScan scan(SingleLook(w));
  for (int trial = 0; trial < trials; ++trial) {
    StartWithIdentityKernel(&scan);
    ScanValue value;
    for (std::int64_t t = 0; t < w; ++t) {
      Eigen::VectorXd u(1), z(2);
      u << rng.Normal();
      z << rng.Normal(), rng.Normal();
      ScanRow row;
      scores.Build(u, z, &row);
      value = scan.Add(row);
    }
    above += value.available && value.statistic >= l_crit;
  }
  const boost::math::binomial_distribution<double> law(trials, alpha);
  const double lo = boost::math::quantile(law, 0.0005), hi = boost::math::quantile(law, 0.9995);
  EXPECT_GE(above, lo);
  EXPECT_LE(above, hi);
}

// ---------------------------------------------------------------------------------------------
// Calibration

ScanDesign SmallDesign(double scale_penalty = 2.0) {
  ScanDesign d;
  d.scale_penalty = scale_penalty;
  d.q = 1;
  d.blocks = {Eigen::MatrixXd::Identity(1, 1)};
  d.training_scores = 60;
  d.horizon_rows = 400;
  d.min_window = 20;
  d.windows = ScanWindows(20, 400, std::sqrt(2.0));
  return d;
}

TEST(CalibrateScan, DeterministicOrderedAndCached) {
  for (double gamma : {0.0, 2.0}) {
    const ScanDesign d = SmallDesign(gamma);
    ASSERT_TRUE(d.IsValid(nullptr));
    const ScanThresholds a = CalibrateScan(d, 0.2, 0.05, 1000, 11);
    const ScanThresholds b = CalibrateScan(d, 0.2, 0.05, 1000, 11);
    EXPECT_EQ(a.critical, b.critical) << gamma;  // bit for bit
    EXPECT_EQ(a.warn, b.warn) << gamma;
    EXPECT_GT(a.critical, a.warn) << gamma;
    const ScanThresholds c = CachedScanThresholds(d, 0.2, 0.05, 1000, 11);
    EXPECT_EQ(c.critical, a.critical) << gamma;
    EXPECT_EQ(CachedScanThresholds(d, 0.2, 0.05, 1000, 11).critical, a.critical) << gamma;
    if (gamma == 0.0) {
      // A single window's statistic is about chi2(1); the maximum over many looks lies well
      // above its 95% point 3.84.
      EXPECT_GT(a.critical, 3.84);
    } else {
      // The cache tells the penalised design from the plain one, and the penalty (at least
      // 2 ln(400 / 320) = 0.45 for every grid window) lowers the level.
      EXPECT_LT(a.critical, CachedScanThresholds(SmallDesign(0.0), 0.2, 0.05, 1000, 11).critical);
    }
  }
}

TEST(CalibrateScan, ThresholdHoldsItsRateOnFreshPaths) {
  for (double gamma : {0.0, 2.0}) {
    const ScanDesign d = SmallDesign(gamma);
    const int paths = 4000;
    const ScanThresholds t = CalibrateScan(d, 0.2, 0.05, paths, 123);
    const std::vector<double> fresh = SimulateScanMaxima(d, paths, 456);
    int crit = 0, warn = 0;
    for (double m : fresh) {
      crit += m >= t.critical;
      warn += m >= t.warn;
    }
    // Two independent binomial errors (threshold and fresh share): 4 combined s.d. (common
    // practice).
    auto band = [&](double alpha) { return 4.0 * std::sqrt(2.0 * alpha * (1.0 - alpha) / paths); };
    EXPECT_NEAR(crit / static_cast<double>(paths), 0.05, band(0.05)) << gamma;
    EXPECT_NEAR(warn / static_cast<double>(paths), 0.20, band(0.20)) << gamma;
  }
}

TEST(CalibrateScan, PenaltyMovesTheNullMaximumOffTheShortestWindows) {
  // Under H0 the unpenalised maximum over a path is reached mostly on short windows (there are
  // about H / w looks of w rows); gamma = 2 removes that multiplicity term, so the path maxima
  // that reach the critical level come from longer windows more often. Counted here on the paths
  // that reach each design's own 5% level: the share whose reading at the first crossing came
  // from the shortest two grid windows (20, 28 rows). A property of the definition checked by
  // simulation; the shares are reported, and the penalised one must be the smaller by a clear
  // margin (binomial s.d. of each share at most 0.5 / sqrt(paths reaching) ~ 0.035).
  const int paths = 4000;
  double share[2] = {0.0, 0.0};
  for (int g = 0; g < 2; ++g) {
    const ScanDesign d = SmallDesign(g == 0 ? 0.0 : 2.0);
    const ScanThresholds t = CalibrateScan(d, 0.2, 0.05, paths, 77);
    ChangeScan scan(d);
    DeterministicRandom rng(31);
    int reached = 0, short_windows = 0;
    Eigen::VectorXd u(1), z(1);
    ScanRow row;
    for (int path = 0; path < paths; ++path) {
      ScanTraining training(1, 1);
      for (std::int64_t s = 0; s < d.training_scores; ++s) {
        u << rng.Normal();
        z << rng.Normal();
        training.Add(u, z);
      }
      Eigen::MatrixXd om, pss, pv;
      double pr = 0.0;
      ASSERT_TRUE(training.Finish(&om, &pss, &pv, &pr));
      const ScanScores scores(1, om);
      scan.Start(pss, pv, pr, training.rows());
      for (std::int64_t s = 0; s < d.horizon_rows; ++s) {
        u << rng.Normal();
        z << rng.Normal();
        scores.Build(u, z, &row);
        const ScanValue v = scan.Add(row);
        if (v.available && v.statistic >= t.critical) {
          ++reached;
          short_windows += v.window <= d.windows[1];
          break;
        }
      }
    }
    ASSERT_GT(reached, 100);
    share[g] = short_windows / static_cast<double>(reached);
    std::printf("[montecarlo] scan.gamma_%d.short_window_share_of_crossings = %.3f (%d paths)\n",
                g == 0 ? 0 : 2, share[g], reached);
  }
  EXPECT_GT(share[0], share[1] + 0.15);
}

TEST(ScanDesign, RejectsBrokenDesigns) {
  ScanDesign d = SmallDesign();
  d.min_window = 1;  // < q + 1
  EXPECT_FALSE(d.IsValid(nullptr));
  d = SmallDesign();
  d.windows = {30, 25};
  std::string why;
  EXPECT_FALSE(d.IsValid(&why));
  EXPECT_NE(why.find("increasing"), std::string::npos);
  d = SmallDesign();
  d.blocks = {Eigen::MatrixXd::Identity(1, 1), Eigen::MatrixXd::Identity(1, 2)};
  EXPECT_FALSE(d.IsValid(nullptr));
}

// ---------------------------------------------------------------------------------------------
// Restricted least squares

TEST(RestrictedCoefficients, SolveTheConstrainedLeastSquaresProblem) {
  const int n = 3, p = 2;
  const Eigen::MatrixXd y = testing::SimulateVar(n, p, 300, 5);
  VarSpec spec = Spec(n, p);
  VarEstimator est(spec);
  for (Eigen::Index t = 0; t < y.rows(); ++t)
    ASSERT_TRUE(est.Update(y.row(t).transpose()).status.ok());
  const int k = spec.k();
  // Batch regressors, built here: x_t = [1, y_{t-1}, y_{t-2}].
  Eigen::MatrixXd x(y.rows() - p, k);
  for (Eigen::Index t = p; t < y.rows(); ++t) {
    x.row(t - p) << 1.0, y.row(t - 1), y.row(t - 2);
  }
  const Eigen::MatrixXd yy = y.bottomRows(y.rows() - p);

  LinearRestriction granger;
  ASSERT_TRUE(GrangerRestriction(spec, {2}, {0}, &granger).ok());
  Eigen::MatrixXd user_r = Eigen::MatrixXd::Zero(1, n * k);
  user_r(0, 0 * k + 1) = 1.0;  // eq 1, L1.v0
  user_r(0, 1 * k + 2) = 1.0;  // eq 2, L1.v1  (a cross-equation restriction)
  LinearRestriction user;
  ASSERT_TRUE(
      UserRestriction(spec, "cross", user_r, Eigen::VectorXd::Constant(1, 0.3), &user).ok());

  for (const LinearRestriction* h : {&granger, &user}) {
    Eigen::MatrixXd phi;
    const Status st = RestrictedCoefficients(est, *h, &phi);
    ASSERT_TRUE(st.ok()) << st.ToString();
    // From the coefficients at hand (the monitor's row): the same values to the last bit; the
    // wrong shape is refused.
    Eigen::MatrixXd unrestricted, again;
    ASSERT_TRUE(est.Coefficients(&unrestricted).ok());
    ASSERT_TRUE(RestrictedCoefficients(est, *h, unrestricted, &again).ok());
    EXPECT_EQ(again, phi) << h->name;
    EXPECT_EQ(RestrictedCoefficients(est, *h, unrestricted.leftCols(k - 1), &again).code(),
              StatusCode::kInvalidArgument);
    // KKT system of min sum |y - Phi x|^2 s.t. R theta = r, solved by Eigen's full-pivot LU:
    //   [2 (I (x) X'X)  R'] [theta ]   [2 vec_eq(X'y_i)]
    //   [R              0 ] [lambda] = [r             ]
    const Eigen::Index q = h->r_matrix.rows();
    Eigen::MatrixXd kkt = Eigen::MatrixXd::Zero(n * k + q, n * k + q);
    Eigen::VectorXd rhs(n * k + q);
    for (int i = 0; i < n; ++i) {
      kkt.block(i * k, i * k, k, k) = 2.0 * x.transpose() * x;
      rhs.segment(i * k, k) = 2.0 * x.transpose() * yy.col(i);
    }
    kkt.bottomLeftCorner(q, n * k) = h->r_matrix;
    kkt.topRightCorner(n * k, q) = h->r_matrix.transpose();
    rhs.tail(q) = h->r_value;
    const Eigen::VectorXd sol = kkt.fullPivLu().solve(rhs);
    Eigen::VectorXd theta(n * k);
    for (int i = 0; i < n; ++i) theta.segment(i * k, k) = phi.row(i).transpose();
    // Both are double-precision solutions of a system with cond about 1e4: 1e-9 relative.
    EXPECT_LE((theta - sol.head(n * k)).cwiseAbs().maxCoeff(),
              1e-9 * sol.head(n * k).cwiseAbs().maxCoeff())
        << h->name;
    EXPECT_LE((h->r_matrix * theta - h->r_value).cwiseAbs().maxCoeff(), 1e3 * kEps) << h->name;
  }
}

// ---------------------------------------------------------------------------------------------
// The monitor

struct Fed {
  std::vector<RestrictionReading> readings;
};

Fed FeedMonitor(const Eigen::MatrixXd& y, const VarSpec& spec, RestrictionMonitor* monitor,
                int robust_every = 0) {
  VarEstimator ref(spec);
  VarSpec tspec = spec;
  tspec.window.kind = WindowKind::kSliding;
  VarEstimator tracking(tspec);
  Fed fed;
  for (Eigen::Index t = 0; t < y.rows(); ++t) {
    const UpdateResult u = ref.Update(y.row(t).transpose());
    tracking.Update(y.row(t).transpose());
    if (!u.estimated) continue;
    CovarianceContext ctx;
    const CovarianceContext* tracking_ctx = nullptr;
    if (robust_every > 0 && ref.rows_in_window() % robust_every == 0 &&
        CovarianceContext::Create(tracking, CovarianceOptions(), &ctx).ok()) {
      tracking_ctx = &ctx;
    }
    RestrictionReading r;
    EXPECT_TRUE(monitor->Observe(ref, u, tracking_ctx, &r).ok());
    fed.readings.push_back(r);
  }
  return fed;
}

TEST(RestrictionMonitor, CreateValidates) {
  const VarSpec spec = Spec(3, 2);
  LinearRestriction h0;
  ASSERT_TRUE(GrangerRestriction(spec, {2}, {0}, &h0).ok());
  RestrictionMonitor m;
  RestrictionMonitorOptions o = SmallOptions();
  o.training_rows = spec.k() + 9;
  Status st = RestrictionMonitor::Create(spec, h0, o, &m);
  EXPECT_EQ(st.code(), StatusCode::kInvalidArgument);
  EXPECT_NE(st.message().find("training_rows"), std::string::npos) << st.message();
  o = SmallOptions();
  o.warn_false_alarm = 0.01;  // below false_alarm
  EXPECT_EQ(RestrictionMonitor::Create(spec, h0, o, &m).code(), StatusCode::kInvalidArgument);
  o = SmallOptions();
  o.scale_penalty = -1.0;
  st = RestrictionMonitor::Create(spec, h0, o, &m);
  EXPECT_EQ(st.code(), StatusCode::kInvalidArgument);
  EXPECT_NE(st.message().find("scale_penalty"), std::string::npos) << st.message();
  o = SmallOptions();
  o.stride_divisor = 0;
  st = RestrictionMonitor::Create(spec, h0, o, &m);
  EXPECT_EQ(st.code(), StatusCode::kInvalidArgument);
  EXPECT_NE(st.message().find("stride_divisor"), std::string::npos) << st.message();
  LinearRestriction zero = h0;
  zero.r_matrix.setZero();
  EXPECT_EQ(RestrictionMonitor::Create(spec, zero, SmallOptions(), &m).code(),
            StatusCode::kInvalidArgument);
  LinearRestriction wrong = h0;
  wrong.r_matrix = Eigen::MatrixXd::Ones(1, 3);
  EXPECT_EQ(RestrictionMonitor::Create(spec, wrong, SmallOptions(), &m).code(),
            StatusCode::kInvalidArgument);
  ASSERT_TRUE(RestrictionMonitor::Create(spec, h0, SmallOptions(), &m).ok());
  EXPECT_EQ(m.design().q, 2);
  EXPECT_EQ(m.design().equations(), 1);
  EXPECT_EQ(m.design().min_window, 50);  // max(50, 10 q)
  EXPECT_EQ(m.design().scale_penalty, 2.0);
  EXPECT_EQ(m.design().stride_divisor, 16);
  EXPECT_EQ(m.design().training_scores, 100 - spec.k());
}

TEST(RestrictionMonitor, TrainsArmsAndReadsWithTheRollingWald) {
  const VarSpec spec = Spec(3, 2);
  LinearRestriction h0;
  ASSERT_TRUE(GrangerRestriction(spec, {2}, {0}, &h0).ok());
  RestrictionMonitor m;
  ASSERT_TRUE(RestrictionMonitor::Create(spec, h0, SmallOptions(), &m).ok());
  const Eigen::MatrixXd y = testing::SimulateVar(3, 2, 402, 21);
  const Fed fed = FeedMonitor(y, spec, &m, 10);
  ASSERT_EQ(fed.readings.size(), 400u);
  const std::int64_t w0 = m.design().min_window;
  for (const RestrictionReading& r : fed.readings) {
    const std::int64_t n = r.rows_since_reset;
    if (n < 100) {
      EXPECT_FALSE(r.alarm.armed) << n;
      EXPECT_NE(r.alarm.explanation.find("training"), std::string::npos) << n;
    } else if (n < 100 + w0) {
      EXPECT_FALSE(r.alarm.armed) << n;  // no candidate window complete yet
    } else {
      EXPECT_TRUE(r.alarm.armed) << n;
      EXPECT_EQ(r.alarm.critical, m.thresholds().critical);
      EXPECT_EQ(r.alarm.warn, m.thresholds().warn);
      EXPECT_EQ(r.scanned_rows, n - 100);
      EXPECT_TRUE(r.within_horizon);
      // The alert text where a raise is possible (at or above warn), a status line below.
      EXPECT_NE(r.alarm.explanation.find(r.alarm.statistic >= r.alarm.warn ? "may no longer hold"
                                                                           : "below warn"),
                std::string::npos)
          << r.alarm.explanation;
    }
    EXPECT_EQ(r.has_wald, n % 10 == 0) << n;  // every robust row (T_eff > k from n = 8 on)
  }
  // The rolling Wald equals WaldTest on the same tracking covariance.
  VarSpec tspec = spec;
  tspec.window.kind = WindowKind::kSliding;
  VarEstimator tracking(tspec);
  for (Eigen::Index t = 0; t < y.rows(); ++t) tracking.Update(y.row(t).transpose());
  CovarianceContext ctx;
  ASSERT_TRUE(CovarianceContext::Create(tracking, CovarianceOptions(), &ctx).ok());
  WaldResult direct;
  ASSERT_TRUE(WaldTest(ctx.theta(), h0, ctx.Restricted(h0.r_matrix), ctx.info().dof, &direct).ok());
  const RestrictionReading& last = fed.readings.back();
  ASSERT_TRUE(last.has_wald);
  ASSERT_TRUE(last.wald_status.ok());
  EXPECT_EQ(last.wald.statistic, direct.statistic);
  EXPECT_EQ(last.wald.p_value, direct.p_value);
}

TEST(RestrictionMonitor, DeterministicAndResetsWithTheReference) {
  const VarSpec spec = Spec(2, 1);
  LinearRestriction h0;
  ASSERT_TRUE(GrangerRestriction(spec, {1}, {0}, &h0).ok());
  RestrictionMonitor a, b;
  ASSERT_TRUE(RestrictionMonitor::Create(spec, h0, SmallOptions(), &a).ok());
  ASSERT_TRUE(RestrictionMonitor::Create(spec, h0, SmallOptions(), &b).ok());
  const Eigen::MatrixXd y = testing::SimulateVar(2, 1, 301, 3);
  const Fed fa = FeedMonitor(y, spec, &a), fb = FeedMonitor(y, spec, &b);
  ASSERT_EQ(fa.readings.size(), fb.readings.size());
  for (std::size_t i = 0; i < fa.readings.size(); ++i) {
    EXPECT_EQ(fa.readings[i].alarm.statistic, fb.readings[i].alarm.statistic) << i;
  }
  // Feeding a fresh reference (smaller row count) resets the monitor: the same readings again.
  const Fed again = FeedMonitor(y, spec, &a);
  for (std::size_t i = 0; i < again.readings.size(); ++i) {
    EXPECT_EQ(again.readings[i].alarm.statistic, fa.readings[i].alarm.statistic) << i;
    EXPECT_EQ(again.readings[i].alarm.armed, fa.readings[i].alarm.armed) << i;
  }
}

TEST(RestrictionMonitor, RefusedRowsAndMisuse) {
  const VarSpec spec = Spec(2, 1);
  LinearRestriction h0;
  ASSERT_TRUE(GrangerRestriction(spec, {1}, {0}, &h0).ok());
  RestrictionMonitor m;
  ASSERT_TRUE(RestrictionMonitor::Create(spec, h0, SmallOptions(), &m).ok());
  VarEstimator ref(spec);
  RestrictionReading r;
  UpdateResult u = ref.Update(Eigen::Vector2d(0.1, 0.2));  // presample: not estimated
  EXPECT_TRUE(m.Observe(ref, u, nullptr, &r).ok());
  EXPECT_FALSE(r.alarm.armed);
  u = ref.Update(Eigen::Vector2d(std::nan(""), 0.2));  // refused
  EXPECT_FALSE(u.status.ok());
  EXPECT_TRUE(m.Observe(ref, u, nullptr, &r).ok());
  VarSpec sliding = spec;
  sliding.window.kind = WindowKind::kSliding;
  VarEstimator not_expanding(sliding);
  EXPECT_EQ(m.Observe(not_expanding, u, nullptr, &r).code(), StatusCode::kInvalidArgument);
  VarEstimator other(Spec(3, 1));
  EXPECT_EQ(m.Observe(other, u, nullptr, &r).code(), StatusCode::kInvalidArgument);
}

TEST(RestrictionMonitor, FlagsALinkThatSwitchesOn) {
  // y_t = A y_{t-1} + e_t with A(1,2) = 0 until row 200 of the reference, then 0.8.
  const VarSpec spec = Spec(2, 1);
  LinearRestriction h0;
  ASSERT_TRUE(GrangerRestriction(spec, {1}, {0}, &h0).ok());
  RestrictionMonitor m;
  ASSERT_TRUE(RestrictionMonitor::Create(spec, h0, SmallOptions(), &m).ok());
  std::mt19937_64 gen(2024);
  std::normal_distribution<double> normal;
  Eigen::MatrixXd y = Eigen::MatrixXd::Zero(501, 2);
  for (int t = 1; t < 501; ++t) {
    Eigen::Matrix2d a;
    a << 0.4, (t > 200 ? 0.8 : 0.0), 0.2, 0.3;
    y.row(t) =
        (a * y.row(t - 1).transpose() + Eigen::Vector2d(normal(gen), normal(gen))).transpose();
  }
  const Fed fed = FeedMonitor(y, spec, &m);
  std::int64_t first = 0;
  for (const RestrictionReading& r : fed.readings) {
    if (r.alarm.armed && r.alarm.statistic >= r.alarm.critical) {
      first = r.rows_since_reset;
      break;
    }
  }
  // Reference row n is data row n (lag order 1); the change enters at n = 200. A coefficient
  // of 0.8 on a unit-variance regressor is found within a few dozen rows.
  EXPECT_GT(first, 200);
  EXPECT_LT(first, 300);
}

}  // namespace
}  // namespace rimwatch
