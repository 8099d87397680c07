// The Monitor pipeline: its summary equals the batch fit of the same rows, it is deterministic,
// refused rows change nothing, and a break into near non-stationarity raises the stability alert.
#include "rimwatch/engine/monitor.h"

#include <gtest/gtest.h>

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

TEST(MonitorTest, DriftTowardUnitRootRaisesStabilityAlert) {
  // Stable VAR(1) for 400 rows, then a near unit root in the first equation.
  const int n = 3;
  Eigen::MatrixXd y = Eigen::MatrixXd::Zero(1400, n);
  std::mt19937_64 gen(5);
  std::normal_distribution<double> e;
  for (int t = 1; t < y.rows(); ++t) {
    const double a = t < 400 ? 0.5 : 0.995;
    y(t, 0) = a * y(t - 1, 0) + e(gen);
    y(t, 1) = 0.3 * y(t - 1, 1) + e(gen);
    y(t, 2) = 0.2 * y(t - 1, 2) + e(gen);
  }
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

}  // namespace
}  // namespace rimwatch
