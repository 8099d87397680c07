// The Monitor pipeline: its summary equals the batch fit of the same rows, it is deterministic,
// refused rows change nothing, a break into near non-stationarity raises the stability alert,
// every estimated row carries one reading per monitor (the readings behind the events), and a
// coefficient break raises the parameter-constancy alerts after it and not before.
#include "rimwatch/engine/monitor.h"

#include <gtest/gtest.h>

#include <algorithm>
#include <bit>
#include <map>
#include <random>

#include "sim_var.h"

namespace rimwatch {
namespace {

ModelSpec Spec(WindowKind kind) {
  ModelSpec m;
  m.name = "unit";
  m.var.variables = {"a", "b", "c"};
  m.var.lags = 2;
  m.var.window.kind = kind;
  m.var.window.rows = 300;
  m.transforms.assign(3, Transform::kLevel);
  m.training_rows = 100;
  m.alarms.horizon = 5;
  RestrictionSpec r;
  r.name = "b-not-to-a";
  r.cause = {"b"};
  r.effect = {"a"};
  m.restrictions.push_back(r);
  return m;
}

TEST(MonitorTest, SummaryEqualsBatchFitForExpandingWindow) {
  const Eigen::MatrixXd y = testing::SimulateVar(3, 2, 400, 21);
  std::unique_ptr<Monitor> mon;
  ASSERT_TRUE(Monitor::Create(Spec(WindowKind::kExpanding), &mon).ok());
  RowReport last;
  for (int r = 0; r < y.rows(); ++r)
    last = mon->Update(std::to_string(r + 1), y.row(r).transpose());
  FitReport live;
  ASSERT_TRUE(mon->Summary(&live).ok());
  FitOptions opt;
  opt.lags = 2;
  opt.covariance.kind = CovarianceKind::kHC3;
  opt.granger.push_back({{"b"}, {"a"}});
  FitReport batch;
  ASSERT_TRUE(FitVar(y, {"a", "b", "c"}, opt, &batch).ok());
  EXPECT_EQ(live.rows, batch.rows);
  EXPECT_EQ(live.phi, batch.phi);  // the same code path: bit-identical
  EXPECT_EQ(live.std_error, batch.std_error);
  ASSERT_EQ(last.restrictions.size(), 1u);
  EXPECT_EQ(last.restrictions[0].wald.statistic, batch.tests[0].result.statistic);
  EXPECT_DOUBLE_EQ(last.spectral_radius, batch.spectral_radius);
  ASSERT_TRUE(last.rho_se.has_value());
  EXPECT_NEAR(*last.rho_se, batch.spectral_radius_se, 1e-12);  // cheap path vs full V
}

// On a robust row Summary reuses the covariance and spectrum the row computed; on the others it
// computes them. Either way it must equal a fresh SummarizeEstimate of the tracking estimator,
// bit for bit (snapshots are compared bit for bit between live runs and replays).
TEST(MonitorTest, SummaryEqualsAFreshSummaryOnEveryRow) {
  const Eigen::MatrixXd y = testing::SimulateVar(3, 2, 460, 24);
  ModelSpec spec = Spec(WindowKind::kSliding);
  spec.inference.every = 20;
  std::unique_ptr<Monitor> mon;
  ASSERT_TRUE(Monitor::Create(spec, &mon).ok());
  LinearRestriction granger;
  ASSERT_TRUE(GrangerRestriction(spec.var, {1}, {0}, &granger).ok());
  granger.name = "b-not-to-a";
  int robust_rows = 0;
  for (int r = 0; r < y.rows(); ++r) {
    const RowReport report = mon->Update(std::to_string(r + 1), y.row(r).transpose());
    if (!report.estimated || report.row < 30) continue;
    robust_rows += report.robust_row ? 1 : 0;
    for (bool diagnostics : {false, true}) {
      if (diagnostics && report.row % 50 != 0) continue;  // the residual tests are slow
      FitReport live, fresh;
      ASSERT_TRUE(mon->Summary(&live, diagnostics).ok()) << report.row;
      ASSERT_TRUE(SummarizeEstimate(mon->tracking(), spec.inference.covariance, {granger}, &fresh,
                                    diagnostics)
                      .ok());
      ASSERT_EQ(live.phi, fresh.phi) << report.row;
      ASSERT_EQ(live.sigma, fresh.sigma) << report.row;
      ASSERT_EQ(live.std_error, fresh.std_error) << report.row;
      ASSERT_EQ(live.eigenvalues, fresh.eigenvalues) << report.row;
      ASSERT_EQ(live.spectral_radius, fresh.spectral_radius) << report.row;
      ASSERT_EQ(live.spectral_radius_se, fresh.spectral_radius_se) << report.row;
      ASSERT_EQ(live.tests.size(), 1u);
      ASSERT_EQ(fresh.tests.size(), 1u);
      ASSERT_EQ(live.tests[0].result.statistic, fresh.tests[0].result.statistic) << report.row;
      ASSERT_EQ(live.tests[0].result.p_value, fresh.tests[0].result.p_value) << report.row;
      ASSERT_EQ(live.diagnostics.size(), fresh.diagnostics.size()) << report.row;
      for (std::size_t i = 0; i < live.diagnostics.size(); ++i) {
        ASSERT_EQ(live.diagnostics[i].p_value, fresh.diagnostics[i].p_value) << report.row;
      }
    }
  }
  EXPECT_GE(robust_rows, 20);  // the reuse was exercised
}

TEST(MonitorTest, RunsAreBitIdentical) {
  const Eigen::MatrixXd y = testing::SimulateVar(3, 2, 600, 22);
  std::unique_ptr<Monitor> a, b;
  ASSERT_TRUE(Monitor::Create(Spec(WindowKind::kSliding), &a).ok());
  ASSERT_TRUE(Monitor::Create(Spec(WindowKind::kSliding), &b).ok());
  for (int r = 0; r < y.rows(); ++r) {
    const RowReport ra = a->Update("p", y.row(r).transpose());
    const RowReport rb = b->Update("p", y.row(r).transpose());
    ASSERT_EQ(ra.spectral_radius, rb.spectral_radius);
    ASSERT_EQ(ra.events.size(), rb.events.size());
    for (std::size_t i = 0; i < ra.events.size(); ++i) {
      ASSERT_EQ(ra.events[i].monitor, rb.events[i].monitor);
      ASSERT_EQ(ra.events[i].statistic, rb.events[i].statistic);
    }
    ASSERT_EQ(ra.readings.size(), rb.readings.size());
    for (std::size_t i = 0; i < ra.readings.size(); ++i) {
      ASSERT_EQ(ra.readings[i].reading.armed, rb.readings[i].reading.armed);
      ASSERT_EQ(ra.readings[i].reading.statistic, rb.readings[i].reading.statistic)
          << ra.readings[i].monitor << " row " << ra.row;
      ASSERT_EQ(ra.readings[i].reading.critical, rb.readings[i].reading.critical);
    }
  }
  EXPECT_EQ(a->tracking().factor().R(), b->tracking().factor().R());
}

TEST(MonitorTest, RefusedRowChangesNothing) {
  const Eigen::MatrixXd y = testing::SimulateVar(3, 2, 50, 23);
  std::unique_ptr<Monitor> mon;
  ASSERT_TRUE(Monitor::Create(Spec(WindowKind::kExpanding), &mon).ok());
  for (int r = 0; r < 50; ++r) mon->Update("p", y.row(r).transpose());
  const auto rows = mon->rows();
  const Eigen::MatrixXd before = mon->tracking().factor().R();
  const RowReport bad = mon->Update("x", Eigen::Vector3d(1.0, std::nan(""), 0.0));
  EXPECT_EQ(bad.status.code(), StatusCode::kNonFinite);
  EXPECT_FALSE(bad.estimated);
  EXPECT_EQ(mon->rows(), rows);
  EXPECT_EQ(mon->tracking().factor().R(), before);
}

// Stable VAR(1) for 400 rows, then a near unit root in the first equation (1400 rows in all).
Eigen::MatrixXd DriftTowardUnitRoot() {
  Eigen::MatrixXd y = Eigen::MatrixXd::Zero(1400, 3);
  std::mt19937_64 gen(5);
  std::normal_distribution<double> e;
  for (int t = 1; t < y.rows(); ++t) {
    const double a = t < 400 ? 0.5 : 0.995;
    y(t, 0) = a * y(t - 1, 0) + e(gen);
    y(t, 1) = 0.3 * y(t - 1, 1) + e(gen);
    y(t, 2) = 0.2 * y(t - 1, 2) + e(gen);
  }
  return y;
}

TEST(MonitorTest, DriftTowardUnitRootRaisesStabilityAlert) {
  const Eigen::MatrixXd y = DriftTowardUnitRoot();
  ModelSpec spec = Spec(WindowKind::kSliding);
  spec.var.lags = 1;
  spec.restrictions.clear();
  std::unique_ptr<Monitor> mon;
  ASSERT_TRUE(Monitor::Create(spec, &mon).ok());
  std::int64_t first_stability = 0;
  for (int r = 0; r < y.rows(); ++r) {
    for (const AlertEvent& ev : mon->Update(std::to_string(r), y.row(r).transpose()).events) {
      if (ev.monitor == "stability" && ev.raised && first_stability == 0) first_stability = ev.row;
    }
  }
  EXPECT_GT(first_stability, 400);
  bool active = false;
  for (const AlertEvent& ev : mon->ActiveAlerts()) active |= ev.monitor == "stability";
  EXPECT_TRUE(active);
}

TEST(MonitorTest, ReadingsFollowMonitorNamesAndDriveTheEvents) {
  const Eigen::MatrixXd y = DriftTowardUnitRoot();
  ModelSpec spec = Spec(WindowKind::kSliding);
  spec.var.lags = 1;
  std::unique_ptr<Monitor> mon;
  ASSERT_TRUE(Monitor::Create(spec, &mon).ok());
  const std::vector<std::string> names = mon->MonitorNames();
  ASSERT_GE(names.size(), 4u);
  EXPECT_EQ(names[0], "stability");
  EXPECT_EQ(names[1], "cusum");
  EXPECT_EQ(names[2], "volatility");
  EXPECT_EQ(names[3], "restriction.b-not-to-a");
  ASSERT_GE(names.size(), 6u);
  EXPECT_EQ(names[4], "constancy.nyblom_hansen");
  EXPECT_EQ(names[5], "constancy.reference_equality");
  std::map<std::string, int> armed_rows;  // per monitor: estimated rows with an armed reading
  int events = 0, estimated = 0, changed = 0, held = 0;
  std::vector<MonitorSample> previous;
  auto same = [](double a, double b) {
    return std::bit_cast<std::uint64_t>(a) == std::bit_cast<std::uint64_t>(b);
  };
  for (int r = 0; r < y.rows(); ++r) {
    const RowReport report = mon->Update(std::to_string(r), y.row(r).transpose());
    if (!report.estimated) {
      EXPECT_TRUE(report.readings.empty());
      continue;
    }
    ++estimated;
    ASSERT_EQ(report.readings.size(), names.size()) << "row " << report.row;
    for (std::size_t i = 0; i < names.size(); ++i) {
      const MonitorSample& s = report.readings[i];
      ASSERT_EQ(s.monitor, names[i]);
      // changed: differs from the previous row's reading in a logged number (all on row 1).
      const bool differs = previous.empty() || previous[i].reading.armed != s.reading.armed ||
                           !same(previous[i].reading.statistic, s.reading.statistic) ||
                           !same(previous[i].reading.warn, s.reading.warn) ||
                           !same(previous[i].reading.critical, s.reading.critical);
      EXPECT_EQ(s.changed, differs) << s.monitor << " row " << report.row;
      (s.changed ? changed : held) += 1;
      if (report.row <= spec.training_rows && s.monitor.rfind("diagnostics.", 0) != 0) {
        EXPECT_FALSE(s.reading.armed) << s.monitor << " armed while training, row " << report.row;
      }
      armed_rows[std::string(s.monitor)] += s.reading.armed;
    }
    previous = report.readings;
    for (const AlertEvent& ev : report.events) {
      ++events;
      auto it = std::find_if(report.readings.begin(), report.readings.end(),
                             [&](const MonitorSample& s) { return s.monitor == ev.monitor; });
      ASSERT_NE(it, report.readings.end()) << ev.monitor;
      EXPECT_EQ(ev.statistic, it->reading.statistic) << ev.monitor << " row " << ev.row;
      if (ev.raised) {
        EXPECT_TRUE(it->reading.armed);
        EXPECT_EQ(ev.threshold,
                  ev.level == AlertLevel::kCritical ? it->reading.critical : it->reading.warn);
        EXPECT_GE(it->reading.statistic, ev.threshold);
      } else {
        EXPECT_EQ(ev.threshold, it->reading.clear);
      }
    }
  }
  EXPECT_EQ(estimated, mon->rows());
  EXPECT_GT(events, 0);
  EXPECT_GT(changed, 0);
  EXPECT_GT(held, 0);  // the block-wise tests and diagnostics hold between evaluations
  // After training every monitor has armed readings: the stability, CUSUM, volatility and
  // restriction monitors on (nearly) every later row, each diagnostic line on its evaluations.
  const int after = estimated - spec.training_rows;
  for (const char* always : {"stability", "cusum", "volatility", "restriction.b-not-to-a"}) {
    EXPECT_GE(armed_rows[always], after - 3 * spec.training_rows) << always;
  }
  for (const std::string& name : names) EXPECT_GT(armed_rows[name], 0) << name;
}

// Constancy monitors: a coefficient break in the middle of a block raises both constancy alerts
// (critical) after the break and none before; the spec can turn them off; a block too short
// for the coefficients is refused with the key named.
TEST(MonitorTest, CoefficientBreakRaisesConstancyAlerts) {
  // VAR(1): y1 = a y1(-1) + 0.2 y2(-1) + e with a from 0.6 to -0.6 at row 600, the middle of the
  // block (500, 700] (training 100, B = 200: evaluations at rows 300, 500, 700, ...).
  Eigen::MatrixXd y = Eigen::MatrixXd::Zero(1200, 3);
  std::mt19937_64 gen(17);
  std::normal_distribution<double> e;
  constexpr int kBreak = 600;
  for (int t = 1; t < y.rows(); ++t) {
    const double a = t < kBreak ? 0.6 : -0.6;
    y(t, 0) = a * y(t - 1, 0) + 0.2 * y(t - 1, 1) + e(gen);
    y(t, 1) = 0.3 * y(t - 1, 1) + e(gen);
    y(t, 2) = 0.1 * y(t - 1, 0) + 0.2 * y(t - 1, 2) + e(gen);
  }
  ModelSpec spec = Spec(WindowKind::kForgetting);  // constancy uses its own sliding block
  spec.var.lags = 1;
  spec.restrictions.clear();
  spec.alarms.horizon = 10;                   // H = 1000 rows: E = 5 evaluations at alpha / 5
  EXPECT_EQ(spec.ConstancyBlockRows(), 100);  // automatic: training.rows
  spec.constancy.block_rows = 200;
  std::unique_ptr<Monitor> mon;
  ASSERT_TRUE(Monitor::Create(spec, &mon).ok());
  std::map<std::string, std::int64_t> first_critical;
  for (int r = 0; r < y.rows(); ++r) {
    const RowReport rep = mon->Update(std::to_string(r), y.row(r).transpose());
    for (const AlertEvent& ev : rep.events) {
      if (ev.monitor.rfind("constancy.", 0) != 0 || !ev.raised) continue;
      EXPECT_GE(ev.row, kBreak) << ev.monitor << ": " << ev.message;
      if (ev.level == AlertLevel::kCritical && !first_critical.count(ev.monitor)) {
        first_critical[ev.monitor] = ev.row;
        EXPECT_NE(ev.message.find("coefficients"), std::string::npos) << ev.message;
      }
    }
  }
  // Nyblom-Hansen sees the break inside the block (500, 700]; the equality test there or one
  // block later, once the recent block is all post-break.
  ASSERT_TRUE(first_critical.count("constancy.nyblom_hansen"));
  ASSERT_TRUE(first_critical.count("constancy.reference_equality"));
  EXPECT_EQ(first_critical["constancy.nyblom_hansen"], 700);
  EXPECT_LE(first_critical["constancy.reference_equality"], 900);

  spec.constancy.nyblom_hansen = spec.constancy.reference_equality = false;
  ASSERT_TRUE(Monitor::Create(spec, &mon).ok());
  for (const std::string& name : mon->MonitorNames()) {
    EXPECT_NE(name.rfind("constancy.", 0), 0u) << name;
  }
  spec.constancy.reference_equality = true;
  spec.alarms.horizon = 5;
  spec.constancy.block_rows = 25;  // (n + 1) k + 10 = 26 for n = 3, k = 4
  const Status st = Monitor::Create(spec, &mon);
  EXPECT_EQ(st.code(), StatusCode::kInvalidArgument);
  EXPECT_NE(st.message().find("constancy.block_rows = 25: must be >= (n + 1) k + 10 = 26"),
            std::string::npos)
      << st.message();
  spec.constancy.block_rows = 26;
  EXPECT_TRUE(Monitor::Create(spec, &mon).ok());
  spec.constancy.block_rows = 501;  // horizon 5 x 100 rows
  EXPECT_NE(Monitor::Create(spec, &mon).message().find("must be <= the horizon of 500 rows"),
            std::string::npos);
}

}  // namespace
}  // namespace rimwatch
