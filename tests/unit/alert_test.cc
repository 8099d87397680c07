// AlertTracker: raise, escalate, hysteresis, cooldown. Checked against a plain re-statement of
// the rules (a simple model of the state machine) under random reading sequences.
#include "rimwatch/engine/alert.h"

#include <gtest/gtest.h>

#include <random>

namespace rimwatch {
namespace {

MonitorReading Reading(double stat, bool armed = true) {
  MonitorReading r;
  r.armed = armed;
  r.statistic = stat;
  r.warn = 1.0;
  r.critical = 2.0;
  r.clear = 0.8;
  r.explanation = "test statistic high.";
  return r;
}

TEST(AlertTrackerTest, RaisesEscalatesAndClearsAfterHysteresis) {
  AlertTracker t("m", "mon", AlertRule{3, 0});
  EXPECT_FALSE(t.Observe(1, "1", Reading(0.5)));
  auto ev = t.Observe(2, "2", Reading(1.5));
  ASSERT_TRUE(ev);
  EXPECT_TRUE(ev->raised);
  EXPECT_EQ(ev->level, AlertLevel::kWarn);
  EXPECT_EQ(ev->threshold, 1.0);
  EXPECT_EQ(ev->message, "test statistic high.");
  ev = t.Observe(3, "3", Reading(2.5));
  ASSERT_TRUE(ev);
  EXPECT_EQ(ev->level, AlertLevel::kCritical);
  EXPECT_FALSE(t.Observe(4, "4", Reading(1.5)));  // drop to warn range: no transition down
  EXPECT_FALSE(t.Observe(5, "5", Reading(0.5)));
  EXPECT_FALSE(t.Observe(6, "6", Reading(0.5)));
  ev = t.Observe(7, "7", Reading(0.5));
  ASSERT_TRUE(ev);
  EXPECT_FALSE(ev->raised);
  EXPECT_EQ(ev->level, AlertLevel::kCritical);
  EXPECT_EQ(t.level(), AlertLevel::kNone);
}

TEST(AlertTrackerTest, HysteresisCountRestartsAboveClearLevel) {
  AlertTracker t("m", "mon", AlertRule{2, 0});
  ASSERT_TRUE(t.Observe(1, "1", Reading(1.5)));
  EXPECT_FALSE(t.Observe(2, "2", Reading(0.5)));
  EXPECT_FALSE(t.Observe(3, "3", Reading(0.9)));  // between clear and warn: resets the count
  EXPECT_FALSE(t.Observe(4, "4", Reading(0.5)));
  EXPECT_TRUE(t.Observe(5, "5", Reading(0.5)));
}

TEST(AlertTrackerTest, CooldownSuppressesImmediateReRaise) {
  AlertTracker t("m", "mon", AlertRule{1, 5});
  ASSERT_TRUE(t.Observe(1, "1", Reading(1.5)));
  ASSERT_TRUE(t.Observe(2, "2", Reading(0.1)));  // cleared at row 2
  for (int row = 3; row <= 7; ++row) EXPECT_FALSE(t.Observe(row, "", Reading(3.0))) << row;
  EXPECT_TRUE(t.Observe(8, "8", Reading(3.0)));
}

TEST(AlertTrackerTest, UnarmedReadingsNeverRaiseAndCountTowardClearing) {
  AlertTracker t("m", "mon", AlertRule{2, 0});
  EXPECT_FALSE(t.Observe(1, "1", Reading(9.0, false)));
  ASSERT_TRUE(t.Observe(2, "2", Reading(9.0)));
  EXPECT_FALSE(t.Observe(3, "3", Reading(9.0, false)));
  EXPECT_TRUE(t.Observe(4, "4", Reading(9.0, false)));
}

// The rules restated as plainly as possible, for randomised comparison.
struct PlainModel {
  int level = 0, below = 0;
  long last_clear = -1000000;
  int hysteresis, cooldown;
  int Step(long row, double stat, bool armed) {  // returns +level raised, -level cleared, 0
    int now = !armed ? 0 : stat >= 2.0 ? 2 : stat >= 1.0 ? 1 : 0;
    if (now > level) {
      if (level == 0 && row - last_clear <= cooldown) return 0;
      level = now;
      below = 0;
      return now;
    }
    if (level == 0) return 0;
    below = (!armed || stat < 0.8) ? below + 1 : 0;
    if (below < hysteresis) return 0;
    int was = level;
    level = 0;
    below = 0;
    last_clear = row;
    return -was;
  }
};

TEST(AlertTrackerTest, MatchesPlainModelOnRandomSequences) {
  std::mt19937 gen(7);
  std::uniform_real_distribution<double> stat(0.0, 2.6);
  for (int trial = 0; trial < 50; ++trial) {
    const int hyst = 1 + trial % 4, cool = trial % 7;
    AlertTracker t("m", "mon", AlertRule{hyst, cool});
    PlainModel plain{0, 0, -1000000, hyst, cool};
    for (long row = 1; row <= 400; ++row) {
      const double s = stat(gen);
      const bool armed = gen() % 10 != 0;
      const auto ev = t.Observe(row, "", Reading(s, armed));
      const int want = plain.Step(row, s, armed);
      const int got = !ev ? 0 : (ev->raised ? 1 : -1) * static_cast<int>(ev->level);
      ASSERT_EQ(got, want) << "trial " << trial << " row " << row;
    }
  }
}

}  // namespace
}  // namespace rimwatch
