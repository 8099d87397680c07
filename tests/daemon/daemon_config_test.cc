// ParseDaemonConfig (daemon/daemon_config.h): defaults that work, the records keys, and refusals
// that name the file, line, key and rule.
#include "rimwatch/daemon/daemon_config.h"

#include <gtest/gtest.h>

namespace rimwatch::daemon {
namespace {

TEST(DaemonConfigTest, DefaultsAndRecordsKeys) {
  DaemonConfig c;
  ASSERT_TRUE(ParseDaemonConfig("", "empty.toml", &c).ok());
  EXPECT_EQ(c.records.tests_every, 1);
  EXPECT_EQ(c.records.full_readings_every, 100);
  EXPECT_EQ(c.records.snapshot_every, 100);
  const Status st = ParseDaemonConfig(
      "[records]\ntests_every = 2\nfull_readings_every = 1\nsnapshot_every = 0\n", "r.toml", &c);
  ASSERT_TRUE(st.ok()) << st.ToString();
  EXPECT_EQ(c.records.tests_every, 2);
  EXPECT_EQ(c.records.full_readings_every, 1);
  EXPECT_EQ(c.records.snapshot_every, 0);
}

TEST(DaemonConfigTest, RefusesFullReadingsEveryBelowOne) {
  DaemonConfig c;
  const Status st = ParseDaemonConfig("[records]\nfull_readings_every = 0\n", "bad.toml", &c);
  EXPECT_FALSE(st.ok());
  EXPECT_NE(st.message().find("records.full_readings_every = 0: must be at least 1"),
            std::string::npos)
      << st.ToString();
}

TEST(DaemonConfigTest, RefusesUnknownRecordsKey) {
  DaemonConfig c;
  const Status st = ParseDaemonConfig("[records]\nfull_reading_every = 5\n", "typo.toml", &c);
  EXPECT_FALSE(st.ok());
  EXPECT_NE(st.message().find("typo.toml:2"), std::string::npos) << st.ToString();
  EXPECT_NE(st.message().find("full_reading_every"), std::string::npos) << st.ToString();
}

}  // namespace
}  // namespace rimwatch::daemon
