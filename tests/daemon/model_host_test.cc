// ModelHost::Rebuild in restart mode (RebuildOptions::record_from_input), the recovery rimwatchd
// runs on start: a store that holds the records of only the first N input rows (the daemon had
// acknowledged the rest, then stopped before its model thread ran them) ends up with exactly the
// records of a store written row by row without a stop, and the alert transitions of the rows
// after N come back as events, once. Checked on real SQLite files through a second connection.
#include "rimwatch/daemon/model_host.h"

#include <gtest/gtest.h>

#include <string>
#include <vector>

#include "store_sqlite.h"
#include "unit/sim_var.h"

namespace rimwatch::daemon {
namespace {

using testing::FreshDir;
using testing::SqliteFile;

#define ASSERT_OK(expr)                                       \
  do {                                                        \
    const ::rimwatch::Status st_ = (expr);                    \
    ASSERT_TRUE(st_.ok()) << #expr << ": " << st_.ToString(); \
  } while (0)

ModelSpec Spec() {
  ModelSpec m;
  m.name = "host";
  m.var.variables = {"a", "b", "c"};
  m.var.lags = 2;
  m.var.window.kind = WindowKind::kSliding;
  m.var.window.rows = 200;
  m.transforms.assign(3, Transform::kLevel);
  m.training_rows = 100;
  m.inference.every = 4;
  m.alarms.horizon = 5;
  RestrictionSpec r;
  r.name = "b-not-to-a";
  r.cause = {"b"};
  r.effect = {"a"};
  m.restrictions.push_back(r);
  return m;
}

// 400 calm rows, then 400 with three times the noise and a level shift (alerts raise).
Eigen::MatrixXd Data() {
  const Eigen::MatrixXd calm = testing::SimulateVar(3, 2, 400, 51);
  Eigen::MatrixXd wild = 3.0 * testing::SimulateVar(3, 2, 400, 52);
  wild.col(0).array() += 2.0;
  Eigen::MatrixXd y(800, 3);
  y << calm, wild;
  return y;
}

struct Log {
  std::unique_ptr<Store> store;
  std::int64_t model = 0;
  std::vector<std::int64_t> series;
};

// A store with every observation of Data() and the model added (no records yet).
void MakeLog(const std::string& path, Log* log) {
  StoreOptions so;
  so.path = path;
  ASSERT_OK(Store::Open(so, &log->store));
  Store& s = *log->store;
  ASSERT_OK(s.Begin());
  ASSERT_OK(s.AddModel("host", "name = \"host\"\n", "2026-01-01T00:00:00Z", &log->model));
  const Eigen::MatrixXd y = Data();
  std::vector<SeriesInfo> info(3);
  for (int j = 0; j < 3; ++j) {
    ASSERT_OK(s.EnsureSeries(Spec().var.variables[static_cast<std::size_t>(j)],
                             PeriodKind::kInteger, &info[static_cast<std::size_t>(j)]));
    log->series.push_back(info[static_cast<std::size_t>(j)].id);
  }
  for (Eigen::Index t = 0; t < y.rows(); ++t) {
    Period p;
    ASSERT_OK(ParsePeriod(std::to_string(t + 1), &p));
    for (int j = 0; j < 3; ++j) {
      PutOutcome outcome;
      ASSERT_OK(s.PutObservation(&info[static_cast<std::size_t>(j)], p, y(t, j), "",
                                 "2026-01-01T00:00:00Z", &outcome));
    }
  }
  ASSERT_OK(s.Commit());
}

std::unique_ptr<ModelHost> NewHost(const Log& log) {
  std::unique_ptr<ModelHost> host;
  const Status st = ModelHost::Create(log.model, "", Spec(), log.series, &host);
  EXPECT_TRUE(st.ok()) << st.ToString();
  return host;
}

using Table = std::vector<std::vector<std::string>>;
Table Records(const std::string& path, const std::string& table) {
  SqliteFile f(path);
  if (table == "alerts") {
    return f.Rows(
        "SELECT row, period, monitor, transition, level, statistic, threshold, message FROM "
        "alerts ORDER BY id");
  }
  return f.Rows("SELECT * FROM " + table + " ORDER BY model_id, row");
}

TEST(ModelHostTest, RestartRecordsExactlyTheRowsAfterTheCursor) {
  const std::string dir = FreshDir("model_host_tail");
  // Reference: every row recorded as it ran, with its alerts (a live run that never stopped).
  Log whole;
  MakeLog(dir + "/whole.db", &whole);
  auto a = NewHost(whole);
  ASSERT_TRUE(a);
  {
    const Eigen::MatrixXd y = Data();
    ASSERT_OK(whole.store->Begin());
    for (Eigen::Index t = 0; t < y.rows(); ++t) {
      Period p;
      ASSERT_OK(ParsePeriod(std::to_string(t + 1), &p));
      std::vector<InputRow> ready;
      for (int j = 0; j < 3; ++j) a->Offer(j, p, y(t, j), PutOutcome::kNew, &ready);
      ASSERT_EQ(ready.size(), 1u);
      RowOutcome outcome;
      a->Run(ready[0], &outcome);
      for (const RowReport& r : outcome.reports) {
        ASSERT_OK(RecordRow(*whole.store, whole.model, a->monitor(), r, RecordOptions{}, "t"));
      }
    }
    ASSERT_OK(whole.store->Commit());
  }
  const std::int64_t inputs = a->inputs();
  ASSERT_EQ(inputs, 800);
  const Table want_alerts = Records(dir + "/whole.db", "alerts");
  ASSERT_GE(want_alerts.size(), 2u) << "the scenario should raise alerts";

  for (const std::int64_t cursor :
       {std::int64_t{0}, std::int64_t{450}, std::int64_t{799}, std::int64_t{800}}) {
    SCOPED_TRACE("cursor " + std::to_string(cursor));
    // The model row that the input at the cursor becomes, from a Monitor fed that far.
    std::unique_ptr<Monitor> m;
    ASSERT_OK(Monitor::Create(Spec(), &m));
    const Eigen::MatrixXd y = Data();
    for (std::int64_t t = 0; t < cursor; ++t) {
      (void)m->Update(std::to_string(t + 1), y.row(t).transpose());
    }
    const std::int64_t rows_at_cursor = m->rows();

    // The interrupted log: the reference's records up to the cursor's row, nothing after.
    const std::string path = dir + "/cut" + std::to_string(cursor) + ".db";
    Log cut;
    MakeLog(path, &cut);
    {
      SqliteFile f(path);
      f.Exec("ATTACH '" + dir + "/whole.db' AS w");
      f.Exec("INSERT INTO tests SELECT * FROM w.tests WHERE row <= " +
             std::to_string(rows_at_cursor));
      f.Exec("INSERT INTO snapshots SELECT * FROM w.snapshots WHERE row <= " +
             std::to_string(rows_at_cursor));
      f.Exec("INSERT INTO alerts SELECT * FROM w.alerts WHERE row <= " +
             std::to_string(rows_at_cursor) + " ORDER BY id");
    }
    const std::size_t alerts_before = Records(path, "alerts").size();

    auto b = NewHost(cut);
    ASSERT_TRUE(b);
    RebuildOptions tail;
    tail.recorded_at = "t";
    tail.record_from_input = cursor;
    std::vector<AlertEvent> events;
    RowOutcome out;
    ASSERT_OK(cut.store->Begin());
    ASSERT_OK(b->Rebuild(*cut.store, tail, &events, &out));
    ASSERT_OK(cut.store->Commit());

    EXPECT_EQ(b->inputs(), inputs);
    EXPECT_EQ(Records(path, "tests"), Records(dir + "/whole.db", "tests"));
    EXPECT_EQ(Records(path, "snapshots"), Records(dir + "/whole.db", "snapshots"));
    EXPECT_EQ(Records(path, "alerts"), want_alerts);
    // The returned events are the transitions recorded now, in order, each once.
    ASSERT_EQ(events.size(), want_alerts.size() - alerts_before);
    for (std::size_t i = 0; i < events.size(); ++i) {
      EXPECT_EQ(std::to_string(events[i].row), want_alerts[alerts_before + i][0]) << i;
      EXPECT_EQ(events[i].monitor, want_alerts[alerts_before + i][2]) << i;
      EXPECT_EQ(events[i].model, "host");
    }
    // Same monitor state as the uninterrupted host.
    ASSERT_EQ(b->rows(), a->rows());
    EXPECT_EQ(b->monitor().ActiveAlerts().size(), a->monitor().ActiveAlerts().size());
  }
}

// Offer admits complete periods only, in order, and hands them out for Run; running them gives
// the reports a Monitor fed the same rows gives.
TEST(ModelHostTest, OfferAdmitsCompleteRowsAndRunMatchesTheMonitor) {
  Log log;
  MakeLog(FreshDir("model_host_offer") + "/log.db", &log);
  auto host = NewHost(log);
  ASSERT_TRUE(host);
  std::unique_ptr<Monitor> twin;
  ASSERT_OK(Monitor::Create(Spec(), &twin));
  const Eigen::MatrixXd y = Data();
  for (Eigen::Index t = 0; t < 300; ++t) {
    Period p;
    ASSERT_OK(ParsePeriod(std::to_string(t + 1), &p));
    std::vector<InputRow> ready;
    for (int j : {2, 0, 1}) {  // series arrive one at a time, in any order
      host->Offer(j, p, y(t, j), PutOutcome::kNew, &ready);
      if (j != 1) {
        EXPECT_TRUE(ready.empty());
      }
    }
    ASSERT_EQ(ready.size(), 1u);
    EXPECT_EQ(ready[0].key, t + 1);
    EXPECT_EQ(host->inputs(), t + 1);
    RowOutcome out;
    host->Run(ready[0], &out);
    const RowReport want = twin->Update(std::to_string(t + 1), y.row(t).transpose());
    ASSERT_EQ(out.reports.size(), want.estimated ? 1u : 0u);
    if (want.estimated && want.has_spectral_radius) {
      EXPECT_EQ(out.reports[0].spectral_radius, want.spectral_radius);
    }
  }
  EXPECT_EQ(host->rows(), twin->rows());
  EXPECT_FALSE(host->needs_rebuild());
}

}  // namespace
}  // namespace rimwatch::daemon
