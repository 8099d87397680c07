// The SQLite store on real files: schema version and migrations, observation outcomes and
// vintages against a std::map twin under random operations with rollbacks, models, records,
// deletion and retention, persistence across reopen, read-only use, and every refused call.
#include "rimwatch/daemon/store.h"

#include <gtest/gtest.h>
#include <unistd.h>

#include <cmath>
#include <fstream>
#include <map>
#include <random>

#include "store_sqlite.h"

namespace rimwatch::daemon {
namespace {

using testing::FreshDir;
using testing::SqliteFile;

std::unique_ptr<Store> OpenWith(const StoreOptions& options) {
  std::unique_ptr<Store> s;
  const Status st = Store::Open(options, &s);
  EXPECT_TRUE(st.ok()) << st.ToString();
  return s;
}

std::unique_ptr<Store> OpenStore(const std::string& path, bool read_only = false) {
  StoreOptions o;
  o.path = path;
  o.read_only = read_only;
  return OpenWith(o);
}

Status TryOpen(const std::string& path, bool read_only = false) {
  StoreOptions o;
  o.path = path;
  o.read_only = read_only;
  std::unique_ptr<Store> s;
  return Store::Open(o, &s);
}

#define ASSERT_OK(expr)                                       \
  do {                                                        \
    const ::rimwatch::Status st_ = (expr);                    \
    ASSERT_TRUE(st_.ok()) << #expr << ": " << st_.ToString(); \
  } while (0)

PutOutcome Put(Store& s, SeriesInfo* series, std::int64_t key, double value) {
  PutOutcome out = PutOutcome::kDuplicate;
  const Status st =
      s.PutObservation(series, IntegerPeriod(key), value, "", "2026-01-01T00:00:00Z", &out);
  EXPECT_TRUE(st.ok()) << st.ToString();
  return out;
}

TEST(StoreTest, FreshFileGetsTheCurrentSchemaVersion) {
  const std::string path = FreshDir("store_fresh") + "/log.db";
  {
    auto s = OpenStore(path);
    ASSERT_TRUE(s);
    EXPECT_EQ(s->schema_version(), Store::CurrentSchemaVersion());
    EXPECT_EQ(Store::CurrentSchemaVersion(), 2);
    EXPECT_EQ(s->path(), path);
    EXPECT_FALSE(s->in_transaction());
  }
  SqliteFile f(path);
  EXPECT_EQ(f.Int("SELECT COUNT(*) FROM schema_version"), 1);
  EXPECT_EQ(f.Int("SELECT version FROM schema_version"), 2);
  EXPECT_EQ(f.Rows("PRAGMA journal_mode")[0][0], "wal");
  const auto tables = f.Rows("SELECT name FROM sqlite_schema WHERE type = 'table' ORDER BY name");
  std::vector<std::string> names;
  for (const auto& r : tables) names.push_back(r[0]);
  EXPECT_EQ(names, (std::vector<std::string>{"alerts", "models", "observations", "schema_version",
                                             "series", "snapshots", "tests"}));
  // The version row is a singleton.
  EXPECT_THROW(f.Exec("INSERT INTO schema_version VALUES (2, 1)"), std::runtime_error);
  // Reopening an up-to-date file changes nothing.
  auto again = OpenStore(path);
  ASSERT_TRUE(again);
  EXPECT_EQ(f.Int("SELECT COUNT(*) FROM schema_version"), 1);
}

TEST(StoreTest, NewerOrUnknownSchemaVersionsAreRefused) {
  const std::string path = FreshDir("store_newer") + "/log.db";
  OpenStore(path);
  {
    SqliteFile f(path);
    f.Exec("UPDATE schema_version SET version = 7");
  }
  for (bool read_only : {false, true}) {
    const Status st = TryOpen(path, read_only);
    EXPECT_EQ(st.code(), StatusCode::kInvalidArgument);
    EXPECT_NE(st.message().find("has schema version 7, newer than this build knows (2); use a "
                                "newer rimwatch"),
              std::string::npos)
        << st.message();
  }
  {
    SqliteFile f(path);
    EXPECT_EQ(f.Int("SELECT version FROM schema_version"), 7);  // refused, not touched
    f.Exec("UPDATE schema_version SET version = 0");
  }
  EXPECT_NE(TryOpen(path).message().find("schema version 0, which no rimwatch wrote"),
            std::string::npos);
  {
    SqliteFile f(path);
    f.Exec("DELETE FROM schema_version");
  }
  EXPECT_NE(TryOpen(path).message().find("schema_version table has no row"), std::string::npos);
}

// A version 1 file (the models table without recorded_inputs) is upgraded in place on open:
// its models keep their rows, the new column reads NULL (every row recorded), and the upgraded
// table has the same columns as a fresh version 2 file.
TEST(StoreTest, VersionOneFileIsUpgraded) {
  const std::string fresh = FreshDir("store_v1") + "/fresh.db";
  const std::string path = FreshDir("store_v1") + "/old.db";
  OpenStore(fresh);
  {
    auto s = OpenStore(path);
    std::int64_t id = 0;
    ASSERT_OK(s->Begin());
    ASSERT_OK(s->AddModel("m", "name = \"m\"\n", "2026-01-01T00:00:00Z", &id));
    ASSERT_OK(s->Commit());
  }
  {
    SqliteFile f(path);  // make it what version 1 wrote
    f.Exec("ALTER TABLE models DROP COLUMN recorded_inputs");
    f.Exec("UPDATE schema_version SET version = 1");
  }
  auto s = OpenStore(path);
  ASSERT_TRUE(s);
  EXPECT_EQ(s->schema_version(), 2);
  std::vector<StoredModel> active;
  ASSERT_OK(s->ActiveModels(&active));
  ASSERT_EQ(active.size(), 1u);
  EXPECT_EQ(active[0].name, "m");
  EXPECT_FALSE(active[0].recorded_inputs.has_value());
  SqliteFile old_file(path), new_file(fresh);
  EXPECT_EQ(old_file.Rows("SELECT name, type, \"notnull\" FROM pragma_table_info('models')"),
            new_file.Rows("SELECT name, type, \"notnull\" FROM pragma_table_info('models')"));
  EXPECT_EQ(old_file.Int("SELECT version FROM schema_version"), 2);
}

TEST(StoreTest, OutcomesAndVintages) {
  const std::string path = FreshDir("store_outcomes") + "/log.db";
  auto s = OpenStore(path);
  ASSERT_OK(s->Begin());
  SeriesInfo a;
  ASSERT_OK(s->EnsureSeries("a", PeriodKind::kInteger, &a));
  EXPECT_GT(a.id, 0);
  EXPECT_FALSE(a.latest_key.has_value());
  EXPECT_EQ(Put(*s, &a, 1, 1.5), PutOutcome::kNew);
  EXPECT_EQ(Put(*s, &a, 2, 2.5), PutOutcome::kNew);
  EXPECT_EQ(a.latest_key, 2);
  EXPECT_EQ(Put(*s, &a, 2, 2.5), PutOutcome::kDuplicate);
  EXPECT_EQ(Put(*s, &a, 2, 2.75), PutOutcome::kRevision);  // vintage 2
  EXPECT_EQ(Put(*s, &a, 2, 2.5), PutOutcome::kRevision);   // vintage 3: only the latest counts
  EXPECT_EQ(Put(*s, &a, 2, 2.5), PutOutcome::kDuplicate);
  EXPECT_EQ(Put(*s, &a, 1, 1.5), PutOutcome::kDuplicate);
  EXPECT_EQ(Put(*s, &a, 0, 0.5), PutOutcome::kLate);  // older than the latest, first value
  EXPECT_EQ(Put(*s, &a, 0, 0.5), PutOutcome::kDuplicate);
  EXPECT_EQ(Put(*s, &a, -5, 0.0), PutOutcome::kLate);
  EXPECT_EQ(Put(*s, &a, -5, -0.0), PutOutcome::kRevision);   // bitwise: -0.0 is another value
  EXPECT_EQ(Put(*s, &a, -5, -0.0), PutOutcome::kDuplicate);  // and it is stored with its sign
  EXPECT_EQ(Put(*s, &a, 3, 3.0), PutOutcome::kNew);          // an integral double stays a double
  EXPECT_EQ(Put(*s, &a, 3, 3.0), PutOutcome::kDuplicate);
  EXPECT_EQ(a.latest_key, 3);
  // A stale copy of the series (latest_key unset) is classified by the store's own state.
  SeriesInfo stale = a;
  stale.latest_key.reset();
  EXPECT_EQ(Put(*s, &stale, 3, 3.25), PutOutcome::kRevision);
  EXPECT_EQ(stale.latest_key, 3);
  ASSERT_OK(s->Commit());

  std::vector<StoredValue> values;
  ASSERT_OK(s->LoadSeries(a.id, &values));
  ASSERT_EQ(values.size(), 5u);
  const std::int64_t keys[] = {-5, 0, 1, 2, 3};
  const double latest[] = {-0.0, 0.5, 1.5, 2.5, 3.25};
  const int vintages[] = {2, 1, 1, 3, 2};
  for (std::size_t i = 0; i < values.size(); ++i) {
    EXPECT_EQ(values[i].period_key, keys[i]);
    EXPECT_EQ(values[i].period_text, std::to_string(keys[i]));
    EXPECT_EQ(values[i].value, latest[i]);
    EXPECT_EQ(std::signbit(values[i].value), std::signbit(latest[i]));
    EXPECT_EQ(values[i].vintage, vintages[i]);
  }
  std::int64_t count = 0;
  ASSERT_OK(s->CountObservations(&count));
  EXPECT_EQ(count, 9);  // every vintage is kept
  SqliteFile f(path);
  EXPECT_EQ(f.Int("SELECT COUNT(*) FROM observations WHERE typeof(value) = 'real'"), 9);
  EXPECT_EQ(f.Int("SELECT COUNT(*) FROM observations WHERE released_at IS NULL"), 9);
  EXPECT_EQ(f.Rows("SELECT received_at FROM observations LIMIT 1")[0][0], "2026-01-01T00:00:00Z");
}

TEST(StoreTest, DateAndTimestampSeriesStoreCanonicalText) {
  const std::string path = FreshDir("store_kinds") + "/log.db";
  auto s = OpenStore(path);
  ASSERT_OK(s->Begin());
  SeriesInfo d, t;
  ASSERT_OK(s->EnsureSeries("d", PeriodKind::kDate, &d));
  ASSERT_OK(s->EnsureSeries("t", PeriodKind::kTimestamp, &t));
  Period p, q;
  ASSERT_OK(ParsePeriod("2026-03-31", &p));
  ASSERT_OK(ParsePeriod("2026-03-31T16:30:00.250+02:00", &q));
  PutOutcome out;
  ASSERT_OK(s->PutObservation(&d, p, 1.0, "2026-04-02T08:30:00Z", "now", &out));
  EXPECT_EQ(out, PutOutcome::kNew);
  ASSERT_OK(s->PutObservation(&t, q, 2.0, "", "now", &out));
  ASSERT_OK(s->Commit());
  SqliteFile f(path);
  EXPECT_EQ(f.Rows("SELECT period_text, released_at FROM observations WHERE series_id = " +
                   std::to_string(d.id)),
            (std::vector<std::vector<std::string>>{{"2026-03-31", "2026-04-02T08:30:00Z"}}));
  EXPECT_EQ(
      f.Rows("SELECT period_text, period_key FROM observations WHERE series_id = " +
             std::to_string(t.id)),
      (std::vector<std::vector<std::string>>{{"2026-03-31T14:30:00.25Z", std::to_string(q.key)}}));
  EXPECT_EQ(f.Rows("SELECT name, period_kind FROM series ORDER BY id"),
            (std::vector<std::vector<std::string>>{{"d", "date"}, {"t", "timestamp"}}));
}

// A std::map twin of the observation log, driven by random puts in transactions that are
// committed or rolled back at random; outcomes, latest keys and the loaded values must agree.
TEST(StoreTest, RandomOperationsAgreeWithAMapTwin) {
  const std::string path = FreshDir("store_twin") + "/log.db";
  auto s = OpenStore(path);
  using Log = std::map<std::int64_t, std::map<std::int64_t, std::vector<double>>>;
  Log committed, pending;
  std::mt19937_64 gen(31);
  std::uniform_int_distribution<int> series_pick(0, 2), key_step(-3, 4), value_pick(0, 3);
  std::bernoulli_distribution commit(0.7);
  std::vector<SeriesInfo> series(3);
  ASSERT_OK(s->Begin());
  for (int i = 0; i < 3; ++i) {
    ASSERT_OK(s->EnsureSeries("s" + std::to_string(i), PeriodKind::kInteger, &series[i]));
  }
  ASSERT_OK(s->Commit());
  std::int64_t cursor[3] = {0, 0, 0};
  int counts[4] = {0, 0, 0, 0};
  for (int txn = 0; txn < 60; ++txn) {
    ASSERT_OK(s->Begin());
    pending = committed;
    for (int op = 0; op < 50; ++op) {
      const int i = series_pick(gen);
      cursor[i] += key_step(gen);
      const std::int64_t key = cursor[i];
      const double value = 0.25 * value_pick(gen);
      auto& periods = pending[series[i].id];
      PutOutcome expect;
      auto it = periods.find(key);
      if (it == periods.end()) {
        expect =
            periods.empty() || key > periods.rbegin()->first ? PutOutcome::kNew : PutOutcome::kLate;
        periods[key].push_back(value);
      } else if (it->second.back() == value) {
        expect = PutOutcome::kDuplicate;
      } else {
        expect = PutOutcome::kRevision;
        it->second.push_back(value);
      }
      ASSERT_EQ(Put(*s, &series[i], key, value), expect) << "txn " << txn << " op " << op;
      ASSERT_EQ(series[i].latest_key, periods.rbegin()->first);
      ++counts[static_cast<int>(expect)];
    }
    if (commit(gen)) {
      ASSERT_OK(s->Commit());
      committed = pending;
    } else {
      ASSERT_OK(s->Rollback());
      for (int i = 0; i < 3; ++i) {  // the store's latest keys are back to the committed state
        std::optional<SeriesInfo> found;
        ASSERT_OK(s->FindSeries(series[i].name, &found));
        ASSERT_TRUE(found);
        const auto& periods = committed[series[i].id];
        if (periods.empty()) {
          EXPECT_FALSE(found->latest_key.has_value());
        } else {
          EXPECT_EQ(found->latest_key, periods.rbegin()->first);
        }
        series[i] = *found;
      }
    }
  }
  for (int c : counts) EXPECT_GT(c, 50);  // every outcome was exercised
  auto check = [&](Store& store) {
    std::int64_t rows = 0;
    for (int i = 0; i < 3; ++i) {
      std::vector<StoredValue> values;
      ASSERT_OK(store.LoadSeries(series[i].id, &values));
      const auto& periods = committed[series[i].id];
      ASSERT_EQ(values.size(), periods.size());
      auto it = periods.begin();
      for (const StoredValue& v : values) {
        EXPECT_EQ(v.period_key, it->first);
        EXPECT_EQ(v.value, it->second.back());
        EXPECT_EQ(v.vintage, static_cast<int>(it->second.size()));
        rows += static_cast<std::int64_t>(it->second.size());
        ++it;
      }
    }
    std::int64_t count = 0;
    ASSERT_OK(store.CountObservations(&count));
    EXPECT_EQ(count, rows);
  };
  check(*s);
  s.reset();
  auto reopened = OpenStore(path);
  check(*reopened);
}

TEST(StoreTest, RollbackForgetsNewPeriodsAndNewSeries) {
  const std::string path = FreshDir("store_rollback") + "/log.db";
  auto s = OpenStore(path);
  SeriesInfo a;
  ASSERT_OK(s->Begin());
  ASSERT_OK(s->EnsureSeries("a", PeriodKind::kInteger, &a));
  Put(*s, &a, 1, 1.0);
  ASSERT_OK(s->Commit());
  ASSERT_OK(s->Begin());
  EXPECT_EQ(Put(*s, &a, 5, 5.0), PutOutcome::kNew);
  SeriesInfo b;
  ASSERT_OK(s->EnsureSeries("b", PeriodKind::kDate, &b));
  ASSERT_OK(s->Rollback());
  ASSERT_OK(s->Begin());
  // Period 3 is new (after the committed latest 1), not late (before the rolled-back 5).
  EXPECT_EQ(Put(*s, &a, 3, 3.0), PutOutcome::kNew);
  std::optional<SeriesInfo> gone;
  ASSERT_OK(s->FindSeries("b", &gone));
  EXPECT_FALSE(gone.has_value());
  ASSERT_OK(s->EnsureSeries("b", PeriodKind::kInteger, &b));  // free to take another kind now
  ASSERT_OK(s->Commit());
  std::vector<StoredValue> values;
  ASSERT_OK(s->LoadSeries(a.id, &values));
  ASSERT_EQ(values.size(), 2u);
  EXPECT_EQ(values[1].period_key, 3);
}

TEST(StoreTest, RefusedCalls) {
  const std::string path = FreshDir("store_refused") + "/log.db";
  auto s = OpenStore(path);
  SeriesInfo a;
  // Writes outside a transaction.
  Status st = s->EnsureSeries("a", PeriodKind::kInteger, &a);
  EXPECT_EQ(st.code(), StatusCode::kInvalidArgument);
  EXPECT_NE(st.message().find("EnsureSeries outside a transaction"), std::string::npos);
  std::int64_t id = 0;
  EXPECT_NE(s->AddModel("m", "", "t", &id).message().find("outside a transaction"),
            std::string::npos);
  EXPECT_NE(s->PutTest(TestRecord{}).message().find("outside a transaction"), std::string::npos);
  EXPECT_NE(s->PutAlert(1, AlertEvent{}, "t").message().find("outside a transaction"),
            std::string::npos);
  EXPECT_NE(s->PruneRecords(1).message().find("outside a transaction"), std::string::npos);
  EXPECT_EQ(s->Commit().code(), StatusCode::kInvalidArgument);
  EXPECT_EQ(s->Rollback().code(), StatusCode::kInvalidArgument);
  ASSERT_OK(s->Begin());
  EXPECT_NE(s->Begin().message().find("already open"), std::string::npos);
  ASSERT_OK(s->EnsureSeries("a", PeriodKind::kInteger, &a));
  ASSERT_OK(s->Commit());
  PutOutcome out;
  EXPECT_NE(s->PutObservation(&a, IntegerPeriod(1), 1.0, "", "t", &out)
                .message()
                .find("PutObservation outside a transaction"),
            std::string::npos);

  ASSERT_OK(s->Begin());
  // Kind mismatches.
  st = s->EnsureSeries("a", PeriodKind::kDate, &a);
  EXPECT_EQ(st.code(), StatusCode::kInvalidArgument);
  EXPECT_EQ(st.message(), "series a holds integer periods, got date");
  Period date;
  ASSERT_OK(ParsePeriod("2026-03-31", &date));
  st = s->PutObservation(&a, date, 1.0, "", "t", &out);
  EXPECT_EQ(st.code(), StatusCode::kInvalidArgument);
  EXPECT_EQ(st.message(), "series a holds integer periods, got date period 2026-03-31");
  // Non-finite values and unknown series.
  st = s->PutObservation(&a, IntegerPeriod(1), std::nan(""), "", "t", &out);
  EXPECT_EQ(st.code(), StatusCode::kInvalidArgument);
  EXPECT_NE(st.message().find("must be finite"), std::string::npos);
  SeriesInfo ghost{999, "ghost", PeriodKind::kInteger, std::nullopt};
  EXPECT_EQ(s->PutObservation(&ghost, IntegerPeriod(1), 1.0, "", "t", &out).message(),
            "store: unknown series id 999");
  EXPECT_EQ(s->EnsureSeries("", PeriodKind::kInteger, &a).code(), StatusCode::kInvalidArgument);
  // Models.
  ASSERT_OK(s->AddModel("m", "spec", "t0", &id));
  std::int64_t other = 0;
  st = s->AddModel("m", "spec 2", "t1", &other);
  EXPECT_EQ(st.code(), StatusCode::kInvalidArgument);
  EXPECT_NE(st.message().find("model m is already active"), std::string::npos);
  EXPECT_EQ(s->DropModel("nope", "t2").message(), "store: no active model named nope");
  EXPECT_EQ(s->PruneRecords(-1).code(), StatusCode::kInvalidArgument);
  // A record for a model that does not exist breaks a foreign key: an SQLite error.
  TestRecord orphan;
  orphan.model_id = 12345;
  orphan.row = 1;
  orphan.period = "1";
  orphan.payload_json = "{}";
  st = s->PutTest(orphan);
  EXPECT_EQ(st.code(), StatusCode::kIoError);
  EXPECT_NE(st.message().find("store: record tests of model 12345 row 1: FOREIGN KEY constraint"),
            std::string::npos)
      << st.message();
  // Recording the same row twice is refused (the rebuild path deletes first).
  TestRecord rec{id, 1, "1", 0.5, std::nullopt, "{}"};
  ASSERT_OK(s->PutTest(rec));
  st = s->PutTest(rec);
  EXPECT_EQ(st.code(), StatusCode::kIoError);
  EXPECT_NE(st.message().find("UNIQUE constraint failed"), std::string::npos) << st.message();
  ASSERT_OK(s->Commit());
}

TEST(StoreTest, ModelsAddDropList) {
  const std::string path = FreshDir("store_models") + "/log.db";
  auto s = OpenStore(path);
  std::int64_t x = 0, y = 0, x2 = 0;
  ASSERT_OK(s->Begin());
  ASSERT_OK(s->AddModel("x", "name = \"x\"\n", "2026-01-01T00:00:00Z", &x));
  ASSERT_OK(s->AddModel("y", "name = \"y\"\n", "2026-01-01T00:00:01Z", &y));
  ASSERT_OK(s->DropModel("x", "2026-01-02T00:00:00Z"));
  ASSERT_OK(s->AddModel("x", "name = \"x\"\nlags = 2\n", "2026-01-03T00:00:00Z", &x2));
  ASSERT_OK(s->Commit());
  EXPECT_NE(x, x2);
  std::vector<StoredModel> active;
  ASSERT_OK(s->ActiveModels(&active));
  ASSERT_EQ(active.size(), 2u);
  EXPECT_EQ(active[0].id, y);
  EXPECT_EQ(active[0].name, "y");
  EXPECT_EQ(active[1].id, x2);
  EXPECT_EQ(active[1].spec_text, "name = \"x\"\nlags = 2\n");
  EXPECT_EQ(active[1].added_at, "2026-01-03T00:00:00Z");
  EXPECT_FALSE(active[1].recorded_inputs.has_value());
  ASSERT_OK(s->Begin());
  ASSERT_OK(s->SetRecordedInputs(x2, 17));
  EXPECT_EQ(s->SetRecordedInputs(x2, -1).code(), StatusCode::kInvalidArgument);
  EXPECT_EQ(s->SetRecordedInputs(999, 1).code(), StatusCode::kInvalidArgument);
  ASSERT_OK(s->Commit());
  EXPECT_EQ(s->SetRecordedInputs(x2, 18).code(), StatusCode::kInvalidArgument);  // no transaction
  ASSERT_OK(s->ActiveModels(&active));
  EXPECT_EQ(active[1].recorded_inputs, std::optional<std::int64_t>(17));
  SqliteFile f(path);
  EXPECT_EQ(f.Rows("SELECT id, dropped_at FROM models ORDER BY id"),
            (std::vector<std::vector<std::string>>{{std::to_string(x), "2026-01-02T00:00:00Z"},
                                                   {std::to_string(y), "NULL"},
                                                   {std::to_string(x2), "NULL"}}));
}

AlertEvent Event(std::int64_t row, const std::string& monitor, bool raised, AlertLevel level,
                 double statistic, double threshold) {
  AlertEvent ev;
  ev.row = row;
  ev.period = std::to_string(row + 100);
  ev.model = "m";
  ev.monitor = monitor;
  ev.raised = raised;
  ev.level = level;
  ev.statistic = statistic;
  ev.threshold = threshold;
  ev.message = monitor + (raised ? " raised" : " cleared");
  return ev;
}

void ExpectSameEvent(const AlertEvent& a, const AlertEvent& b) {
  EXPECT_EQ(a.row, b.row);
  EXPECT_EQ(a.period, b.period);
  EXPECT_EQ(a.model, b.model);
  EXPECT_EQ(a.monitor, b.monitor);
  EXPECT_EQ(a.raised, b.raised);
  EXPECT_EQ(a.level, b.level);
  EXPECT_EQ(a.statistic, b.statistic);
  EXPECT_EQ(a.threshold, b.threshold);
  EXPECT_EQ(a.message, b.message);
}

TEST(StoreTest, AlertsRoundTripInRecordedOrder) {
  const std::string path = FreshDir("store_alerts") + "/log.db";
  auto s = OpenStore(path);
  std::int64_t m = 0, other = 0;
  ASSERT_OK(s->Begin());
  ASSERT_OK(s->AddModel("m", "spec", "t", &m));
  ASSERT_OK(s->AddModel("other", "spec", "t", &other));
  const std::vector<AlertEvent> events = {
      Event(7, "stability", true, AlertLevel::kWarn, 0.9512345678901234, 0.95),
      Event(7, "cusum.a", true, AlertLevel::kCritical, 3.25, 2.5),
      Event(9, "stability", true, AlertLevel::kCritical, 0.991, 0.99),
      Event(20, "stability", false, AlertLevel::kCritical, 0.5, 0.93),
      Event(21, "volatility", true, AlertLevel::kWarn, 1e300,
            std::numeric_limits<double>::infinity()),
  };
  for (const AlertEvent& ev : events) ASSERT_OK(s->PutAlert(m, ev, "2026-01-01T00:00:00Z"));
  ASSERT_OK(s->PutAlert(other, Event(1, "x", true, AlertLevel::kWarn, 1, 1), "t"));
  ASSERT_OK(s->Commit());
  std::vector<AlertEvent> back;
  ASSERT_OK(s->LoadAlerts(m, &back));
  ASSERT_EQ(back.size(), events.size());
  for (std::size_t i = 0; i < events.size(); ++i) ExpectSameEvent(back[i], events[i]);
  ASSERT_OK(s->LoadAlerts(other, &back));
  ASSERT_EQ(back.size(), 1u);
  EXPECT_EQ(back[0].model, "other");
}

// Tests rows 1..n of a model, snapshots every 10th row, alerts every 7th.
void RecordRows(Store& s, std::int64_t model, int n) {
  for (int r = 1; r <= n; ++r) {
    ASSERT_OK(s.PutTest(TestRecord{model, r, std::to_string(r), 0.5, 0.01, "{}"}));
    if (r % 10 == 0) ASSERT_OK(s.PutSnapshot(SnapshotRecord{model, r, std::to_string(r), "{}"}));
    if (r % 7 == 0) {
      ASSERT_OK(s.PutAlert(model, Event(r, "stability", true, AlertLevel::kWarn, 1, 1), "t"));
    }
  }
}

TEST(StoreTest, DeleteRecordsAfterAndPrune) {
  const std::string path = FreshDir("store_prune") + "/log.db";
  auto s = OpenStore(path);
  std::int64_t a = 0, b = 0;
  ASSERT_OK(s->Begin());
  ASSERT_OK(s->AddModel("a", "spec", "t", &a));
  ASSERT_OK(s->AddModel("b", "spec", "t", &b));
  RecordRows(*s, a, 100);
  RecordRows(*s, b, 60);
  ASSERT_OK(s->DeleteRecordsAfter(b, 45));
  ASSERT_OK(s->Commit());
  SqliteFile f(path);
  const std::string where_b = " WHERE model_id = " + std::to_string(b);
  const std::string where_a = " WHERE model_id = " + std::to_string(a);
  EXPECT_EQ(f.Int("SELECT MAX(row) FROM tests" + where_b), 45);
  EXPECT_EQ(f.Int("SELECT COUNT(*) FROM tests" + where_b), 45);
  EXPECT_EQ(f.Int("SELECT COUNT(*) FROM snapshots" + where_b), 4);  // 10..40
  EXPECT_EQ(f.Int("SELECT COUNT(*) FROM alerts" + where_b), 8);     // 7..56: alerts stay
  EXPECT_EQ(f.Int("SELECT COUNT(*) FROM tests" + where_a), 100);    // the other model untouched
  // Re-recording the deleted rows is allowed.
  ASSERT_OK(s->Begin());
  ASSERT_OK(s->PutTest(TestRecord{b, 46, "46", std::nullopt, std::nullopt, "{}"}));
  ASSERT_OK(s->PruneRecords(20));
  ASSERT_OK(s->Commit());
  EXPECT_EQ(f.Int("SELECT MIN(row) FROM tests" + where_a), 81);
  EXPECT_EQ(f.Int("SELECT COUNT(*) FROM tests" + where_a), 20);
  EXPECT_EQ(f.Rows("SELECT row FROM snapshots" + where_a + " ORDER BY row"),
            (std::vector<std::vector<std::string>>{{"90"}, {"100"}}));
  EXPECT_EQ(f.Int("SELECT MIN(row) FROM tests" + where_b), 27);   // last row 46
  EXPECT_EQ(f.Int("SELECT COUNT(*) FROM alerts" + where_a), 14);  // alerts are never pruned
  EXPECT_EQ(f.Rows("SELECT rho, rho_se FROM tests" + where_b + " AND row = 46"),
            (std::vector<std::vector<std::string>>{{"NULL", "NULL"}}));
}

TEST(StoreTest, ReopenPersistsAndReadOnlyReads) {
  const std::string path = FreshDir("store_reopen") + "/log.db";
  std::int64_t model = 0, series_id = 0;
  {
    auto s = OpenStore(path);
    ASSERT_OK(s->Begin());
    SeriesInfo a;
    ASSERT_OK(s->EnsureSeries("a", PeriodKind::kInteger, &a));
    series_id = a.id;
    for (int k = 1; k <= 10; ++k) Put(*s, &a, k, k * 0.5);
    ASSERT_OK(s->AddModel("m", "spec text", "t", &model));
    ASSERT_OK(s->PutAlert(model, Event(3, "stability", true, AlertLevel::kWarn, 1, 1), "t"));
    ASSERT_OK(s->Commit());
    EXPECT_GT(s->FileBytes(), 0);
  }
  {
    auto s = OpenStore(path);
    std::optional<SeriesInfo> a;
    ASSERT_OK(s->FindSeries("a", &a));
    ASSERT_TRUE(a);
    EXPECT_EQ(a->id, series_id);
    EXPECT_EQ(a->latest_key, 10);
    ASSERT_OK(s->Begin());
    EXPECT_EQ(Put(*s, &*a, 10, 5.0), PutOutcome::kDuplicate);
    EXPECT_EQ(Put(*s, &*a, 4, 2.0), PutOutcome::kDuplicate);
    EXPECT_EQ(Put(*s, &*a, 11, 5.5), PutOutcome::kNew);
    ASSERT_OK(s->Commit());
    std::vector<StoredModel> models;
    ASSERT_OK(s->ActiveModels(&models));
    ASSERT_EQ(models.size(), 1u);
    EXPECT_EQ(models[0].spec_text, "spec text");
    std::string check;
    ASSERT_OK(s->IntegrityCheck(&check));
    EXPECT_EQ(check, "ok");
  }
  auto r = OpenStore(path, /*read_only=*/true);
  ASSERT_TRUE(r);
  std::vector<StoredValue> values;
  ASSERT_OK(r->LoadSeries(series_id, &values));
  EXPECT_EQ(values.size(), 11u);
  std::vector<AlertEvent> alerts;
  ASSERT_OK(r->LoadAlerts(model, &alerts));
  EXPECT_EQ(alerts.size(), 1u);
  std::string check;
  ASSERT_OK(r->IntegrityCheck(&check));
  EXPECT_EQ(check, "ok");
  Status st = r->Begin();
  EXPECT_EQ(st.code(), StatusCode::kInvalidArgument);
  EXPECT_NE(st.message().find("is open read-only"), std::string::npos);
  std::int64_t id = 0;
  EXPECT_NE(r->AddModel("n", "", "t", &id).message().find("is open read-only"), std::string::npos);
}

TEST(StoreTest, BadFilesAreRefusedClearly) {
  const std::string dir = FreshDir("store_bad");
  Status st = TryOpen(dir + "/missing.db", /*read_only=*/true);
  EXPECT_EQ(st.code(), StatusCode::kIoError);
  EXPECT_NE(st.message().find("store: open " + dir + "/missing.db: "), std::string::npos)
      << st.message();
  st = TryOpen(dir + "/no/such/dir/x.db");
  EXPECT_EQ(st.code(), StatusCode::kIoError);
  std::ofstream(dir + "/garbage.db") << std::string(8192, 'x');
  st = TryOpen(dir + "/garbage.db");
  EXPECT_EQ(st.code(), StatusCode::kIoError);
  EXPECT_NE(st.message().find("file is not a database"), std::string::npos) << st.message();
  {
    std::unique_ptr<Store> s;
    StoreOptions o;
    o.path = dir + "/foreign.db";
    ASSERT_OK(Store::Open(o, &s));  // make a file, then turn it into someone else's database
  }
  {
    SqliteFile f(dir + "/foreign.db");
    f.Exec("DROP TABLE schema_version");
  }
  st = TryOpen(dir + "/foreign.db");
  EXPECT_EQ(st.code(), StatusCode::kInvalidArgument);
  EXPECT_NE(st.message().find("is an SQLite database but not a rimwatch store"), std::string::npos)
      << st.message();
  // An empty file is a new store.
  std::ofstream(dir + "/empty.db").close();
  EXPECT_TRUE(TryOpen(dir + "/empty.db").ok());
  EXPECT_FALSE(TryOpen("").ok());
  // A read-only open of a file with no store in it.
  std::ofstream(dir + "/empty2.db").close();
  st = TryOpen(dir + "/empty2.db", /*read_only=*/true);
  EXPECT_EQ(st.code(), StatusCode::kInvalidArgument);
  EXPECT_NE(st.message().find("holds no rimwatch store"), std::string::npos) << st.message();
}

TEST(StoreTest, NormalSynchronousStoresTheSame) {
  const std::string path = FreshDir("store_normal") + "/log.db";
  auto s = OpenWith({.path = path, .synchronous_full = false});
  ASSERT_TRUE(s);
  ASSERT_OK(s->Begin());
  SeriesInfo a;
  ASSERT_OK(s->EnsureSeries("a", PeriodKind::kInteger, &a));
  for (int k = 1; k <= 2000; ++k) Put(*s, &a, k, k);
  ASSERT_OK(s->Commit());
  SqliteFile f(path);  // a second connection sees the committed rows
  EXPECT_EQ(f.Int("SELECT COUNT(*) FROM observations"), 2000);
}

// Deferred sync (StoreOptions::deferred_sync): tickets count commits, each becomes durable
// (WaitDurable, the wake fd), Commit() still returns durable, and the data is the same.
TEST(StoreTest, DeferredSyncTicketsBecomeDurableInOrder) {
  const std::string path = FreshDir("store_deferred") + "/log.db";
  auto s = OpenWith({.path = path, .deferred_sync = true});
  ASSERT_TRUE(s);
  ASSERT_GE(s->sync_wake_fd(), 0);
  SeriesInfo a;
  std::uint64_t last = 0;
  for (int g = 0; g < 50; ++g) {
    ASSERT_OK(s->Begin());
    if (g == 0) ASSERT_OK(s->EnsureSeries("a", PeriodKind::kInteger, &a));
    for (int k = 1; k <= 40; ++k) Put(*s, &a, g * 40 + k, k);
    std::uint64_t ticket = 0;
    ASSERT_OK(s->CommitDeferred(&ticket));
    EXPECT_EQ(ticket, last + 1);
    last = ticket;
  }
  ASSERT_OK(s->WaitDurable(last));
  EXPECT_GE(s->durable_ticket(), last);
  std::uint64_t woken = 0;
  EXPECT_EQ(::read(s->sync_wake_fd(), &woken, sizeof woken), static_cast<ssize_t>(sizeof woken));
  EXPECT_GE(woken, 1u);
  s->ClearSyncWake();
  EXPECT_EQ(::read(s->sync_wake_fd(), &woken, sizeof woken), -1);  // cleared, non-blocking
  // The blocking Commit: durable when it returns.
  ASSERT_OK(s->Begin());
  Put(*s, &a, 5000, 1.5);
  ASSERT_OK(s->Commit());
  EXPECT_EQ(s->durable_ticket(), last + 1);
  EXPECT_TRUE(s->sync_status().ok());
  SqliteFile f(path);
  EXPECT_EQ(f.Int("SELECT COUNT(*) FROM observations"), 50 * 40 + 1);
  // Without deferred_sync the same calls work and every ticket is durable at once.
  auto plain = OpenStore(FreshDir("store_not_deferred") + "/log.db");
  ASSERT_TRUE(plain);
  EXPECT_EQ(plain->sync_wake_fd(), -1);
  ASSERT_OK(plain->Begin());
  std::uint64_t ticket = 0;
  ASSERT_OK(plain->CommitDeferred(&ticket));
  EXPECT_EQ(plain->durable_ticket(), ticket);
}

// A sync that fails is final: the commit is never reported durable and the store takes no
// more writes. (The WAL file is removed under the store to make fdatasync's stat fail.)
TEST(StoreTest, DeferredSyncFailureIsFinal) {
  const std::string path = FreshDir("store_deferred_fail") + "/log.db";
  auto s = OpenWith({.path = path, .background_checkpoint = false, .deferred_sync = true});
  ASSERT_TRUE(s);
  SeriesInfo a;
  ASSERT_OK(s->Begin());
  ASSERT_OK(s->EnsureSeries("a", PeriodKind::kInteger, &a));
  Put(*s, &a, 1, 1.0);
  ASSERT_OK(s->Commit());
  const std::uint64_t durable = s->durable_ticket();
  ASSERT_EQ(::unlink((path + "-wal").c_str()), 0);
  ASSERT_OK(s->Begin());
  Put(*s, &a, 2, 2.0);
  std::uint64_t ticket = 0;
  ASSERT_OK(s->CommitDeferred(&ticket));
  const Status waited = s->WaitDurable(ticket);
  EXPECT_FALSE(waited.ok());
  EXPECT_NE(waited.message().find("-wal"), std::string::npos) << waited.ToString();
  EXPECT_EQ(s->durable_ticket(), durable);
  EXPECT_FALSE(s->sync_status().ok());
  const Status again = s->Begin();
  EXPECT_FALSE(again.ok());
  EXPECT_EQ(again.message(), waited.message());
}

}  // namespace
}  // namespace rimwatch::daemon
