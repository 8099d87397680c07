// ModelSpec::IsValid names the key, the value and the rule; RowTransformer applies transforms.
#include "rimwatch/engine/model_spec.h"

#include <gtest/gtest.h>

#include <cmath>

#include "rimwatch/engine/stability_monitor.h"
#include "rimwatch/engine/transform.h"

namespace rimwatch {
namespace {

ModelSpec Good() {
  ModelSpec m;
  m.name = "trio";
  m.var.variables = {"a", "b", "c"};
  m.var.lags = 2;
  m.transforms.assign(3, Transform::kLevel);
  RestrictionSpec r;
  r.name = "b-does-not-lead-a";
  r.cause = {"b"};
  r.effect = {"a"};
  m.restrictions.push_back(r);
  return m;
}

void ExpectInvalid(const ModelSpec& m, const std::string& fragment) {
  std::string why;
  EXPECT_FALSE(m.IsValid(&why));
  EXPECT_NE(why.find(fragment), std::string::npos) << why;
}

TEST(ModelSpecTest, GoodSpecIsValid) {
  std::string why;
  EXPECT_TRUE(Good().IsValid(&why)) << why;
  EXPECT_EQ(Good().HorizonRows(), 2000);
}

TEST(ModelSpecTest, BadValuesNameTheKey) {
  ModelSpec m = Good();
  m.var.lags = 0;
  ExpectInvalid(m, "lags = 0");
  m = Good();
  m.var.window.kind = WindowKind::kForgetting;
  m.var.window.lambda = 1.5;
  ExpectInvalid(m, "window.lambda = 1.5");
  m = Good();
  m.restrictions[0].cause = {"zz"};
  ExpectInvalid(m, "unknown variable 'zz'");
  m = Good();
  m.restrictions[0].kind = RestrictionKind::kExcludeLag;
  m.restrictions[0].lag = 3;
  ExpectInvalid(m, "exclude_lag = 3");
  m = Good();
  m.training_rows = 5;
  ExpectInvalid(m, "training.rows = 5");
  m = Good();
  m.alarms.false_alarm = 0.0;
  ExpectInvalid(m, "alarms.false_alarm = 0");
  m = Good();
  m.name = "has space";
  ExpectInvalid(m, "name = 'has space'");
  m = Good();
  m.restrictions.push_back(m.restrictions[0]);
  ExpectInvalid(m, "used twice");
}

TEST(RowTransformerTest, DiffAndLogDiffNeedThePreviousRow) {
  RowTransformer t({"a", "b", "c"}, {Transform::kLevel, Transform::kDiff, Transform::kLogDiff});
  Eigen::VectorXd out;
  bool ready = true;
  ASSERT_TRUE(t.Apply(Eigen::Vector3d(1.0, 10.0, 100.0), &out, &ready).ok());
  EXPECT_FALSE(ready);
  ASSERT_TRUE(t.Apply(Eigen::Vector3d(2.0, 13.0, 110.0), &out, &ready).ok());
  ASSERT_TRUE(ready);
  EXPECT_EQ(out[0], 2.0);
  EXPECT_EQ(out[1], 3.0);
  EXPECT_EQ(out[2], std::log(110.0) - std::log(100.0));
}

TEST(RowTransformerTest, RefusesNonPositiveForLogDiffAndKeepsState) {
  RowTransformer t({"a"}, {Transform::kLogDiff});
  Eigen::VectorXd out;
  bool ready = false;
  ASSERT_TRUE(t.Apply(Eigen::VectorXd::Constant(1, 4.0), &out, &ready).ok());
  const Status st = t.Apply(Eigen::VectorXd::Constant(1, -1.0), &out, &ready);
  EXPECT_EQ(st.code(), StatusCode::kInvalidArgument);
  EXPECT_NE(st.message().find("'a'"), std::string::npos);
  ASSERT_TRUE(t.Apply(Eigen::VectorXd::Constant(1, 8.0), &out, &ready).ok());
  EXPECT_DOUBLE_EQ(out[0], std::log(2.0));  // against 4.0: the refused row left no trace
}

TEST(StabilityMonitorTest, CriticalWhenUpperBoundReachesOne) {
  StabilitySpec spec;
  StabilityMonitor mon(spec);
  MonitorReading r = mon.Observe(0.90, 0.02, true);
  EXPECT_LT(r.statistic, r.warn);
  r = mon.Observe(0.96, 0.01, true);  // above warn, bound 0.976 < 1
  EXPECT_GE(r.statistic, r.warn);
  EXPECT_LT(r.statistic, r.critical);
  r = mon.Observe(0.96, 0.03, true);  // bound 1.009 >= 1: critical although rho < 0.99
  EXPECT_GE(r.statistic, r.critical);
}

// The sentence of a raised alert is written only for a reading above the tracker's active
// level; the tracker raises only then, so every raised event still carries it.
TEST(StabilityMonitorTest, ExplainsOnlyReadingsThatCanRaise) {
  StabilitySpec spec;
  StabilityMonitor mon(spec);
  const auto full = [](const MonitorReading& r) {
    return r.explanation.find("shocks die out slowly") != std::string::npos;
  };
  EXPECT_FALSE(full(mon.Observe(0.90, 0.02, true)));  // below warn
  EXPECT_TRUE(full(mon.Observe(0.96, 0.01, true)));   // warn, nothing active
  EXPECT_FALSE(full(mon.Observe(0.96, 0.01, true, AlertLevel::kWarn)));
  EXPECT_TRUE(full(mon.Observe(0.96, 0.03, true, AlertLevel::kWarn)));  // critical above warn
  EXPECT_FALSE(full(mon.Observe(0.96, 0.03, true, AlertLevel::kCritical)));
  EXPECT_FALSE(full(mon.Observe(0.99, 0.01, false)));  // unarmed

  // Through a tracker: every raise carries the full sentence, row after row.
  StabilityMonitor fed(spec);
  AlertTracker tracker("m", "stability", AlertRule{2, 0});
  const double rhos[] = {0.90, 0.96, 0.97, 0.96, 0.999, 0.999, 0.90, 0.90, 0.90, 0.97, 0.999};
  int raised = 0;
  std::int64_t row = 0;
  for (double rho : rhos) {
    const MonitorReading r = fed.Observe(rho, 0.001, true, tracker.level());
    const std::optional<AlertEvent> ev = tracker.Observe(++row, "p", r);
    if (ev && ev->raised) {
      ++raised;
      EXPECT_NE(ev->message.find("shocks die out slowly"), std::string::npos) << rho;
    }
  }
  EXPECT_EQ(raised, 4);  // warn, critical, (cleared), warn, critical
}

TEST(StabilityMonitorTest, ProjectsRowsToUnitFromSlope) {
  StabilitySpec spec;
  spec.slope_rows = 10;
  StabilityMonitor mon(spec);
  for (int i = 0; i < 10; ++i) mon.Observe(0.5 + 0.01 * i, std::nullopt, true);
  EXPECT_NEAR(mon.slope(), 0.01, 1e-12);
  ASSERT_TRUE(mon.rows_to_unit());
  EXPECT_NEAR(*mon.rows_to_unit(), (1.0 - 0.59) / 0.01, 1e-9);
}

}  // namespace
}  // namespace rimwatch
