// RecordRow: a Monitor run over simulated data with a break, recorded into a real store file and
// read back through a second SQLite connection. Tests and snapshots follow their cadences, the
// alerts table holds exactly the Monitor's events, and the snapshots hold Monitor::Summary's
// numbers bit for bit.
#include "rimwatch/daemon/record.h"

#include <gtest/gtest.h>

#include <bit>
#include <cmath>
#include <map>
#include <set>

#include "store_sqlite.h"
#include "unit/sim_var.h"

namespace rimwatch::daemon {
namespace {

using json = nlohmann::ordered_json;
using testing::FreshDir;
using testing::SqliteFile;

#define ASSERT_OK(expr)                                       \
  do {                                                        \
    const ::rimwatch::Status st_ = (expr);                    \
    ASSERT_TRUE(st_.ok()) << #expr << ": " << st_.ToString(); \
  } while (0)

ModelSpec Spec() {
  ModelSpec m;
  m.name = "rec";
  m.var.variables = {"a", "b", "c"};
  m.var.lags = 2;
  m.var.window.kind = WindowKind::kSliding;
  m.var.window.rows = 250;
  m.transforms.assign(3, Transform::kLevel);
  m.training_rows = 100;
  m.inference.every = 3;  // robust rows 3, 6, ...: restrictions are fresh only there
  m.alarms.horizon = 5;
  RestrictionSpec r;
  r.name = "b-not-to-a";
  r.cause = {"b"};
  r.effect = {"a"};
  m.restrictions.push_back(r);
  return m;
}

// 500 rows of a stable VAR(2), then 500 rows of another one with three times the noise scale and
// a level shift: enough for the volatility and CUSUM monitors to raise (and later clear).
Eigen::MatrixXd BreakData() {
  const Eigen::MatrixXd calm = testing::SimulateVar(3, 2, 500, 41);
  Eigen::MatrixXd wild = 3.0 * testing::SimulateVar(3, 2, 500, 42);
  wild.col(0).array() += 2.0;
  Eigen::MatrixXd y(1000, 3);
  y << calm, wild;
  return y;
}

bool SameBits(double a, double b) {
  return std::bit_cast<std::uint64_t>(a) == std::bit_cast<std::uint64_t>(b);
}

void ExpectMatrixBits(const json& rows, const Eigen::MatrixXd& m, const char* what) {
  ASSERT_EQ(rows.size(), static_cast<std::size_t>(m.rows())) << what;
  for (Eigen::Index i = 0; i < m.rows(); ++i) {
    ASSERT_EQ(rows[i].size(), static_cast<std::size_t>(m.cols())) << what;
    for (Eigen::Index j = 0; j < m.cols(); ++j) {
      EXPECT_TRUE(SameBits(rows[i][j].get<double>(), m(i, j)))
          << what << "(" << i << "," << j << "): " << rows[i][j] << " vs " << m(i, j);
    }
  }
}

struct Expected {
  std::set<std::int64_t> test_rows, snapshot_rows, robust_rows;
  std::map<std::int64_t, double> rho;  // per tests row with a spectral radius
  std::set<std::int64_t> no_rho_rows;  // tests rows whose window was not estimable
  std::map<std::int64_t, FitReport> summaries;
  std::vector<AlertEvent> events;
  std::vector<std::string> monitors;
};

TEST(RecordTest, CadencesAlertsAndSnapshotsMatchTheMonitor) {
  const std::string path = FreshDir("record_run") + "/log.db";
  StoreOptions so;
  so.path = path;
  std::unique_ptr<Store> store;
  ASSERT_OK(Store::Open(so, &store));
  std::unique_ptr<Monitor> monitor;
  ASSERT_OK(Monitor::Create(Spec(), &monitor));
  RecordOptions ro;
  ro.tests_every = 5;
  ro.snapshot_every = 50;
  std::int64_t model = 0;
  ASSERT_OK(store->Begin());
  ASSERT_OK(store->AddModel("rec", "name = \"rec\"\n", "2026-01-01T00:00:00Z", &model));

  const Eigen::MatrixXd y = BreakData();
  Expected want;
  want.monitors = monitor->MonitorNames();
  for (Eigen::Index r = 0; r < y.rows(); ++r) {
    const RowReport report = monitor->Update(std::to_string(r + 1), y.row(r).transpose());
    ASSERT_TRUE(report.status.ok()) << report.status.ToString();
    ASSERT_OK(RecordRow(*store, model, *monitor, report, ro, "2026-01-01T00:00:01Z"));
    if (report.estimated) {
      // The direct text writer says what the document tree says, number for number (each
      // double's shortest text reads back to the same bits; json == compares values).
      const json tree = RowPayload(report);
      const std::string text = RowPayloadText(report);
      ASSERT_EQ(json::parse(text), tree) << text;
      std::string event;
      const std::string name = "rec";
      AppendRowPayloadText(report, &name, &event);
      json with_model = tree;
      with_model["model"] = name;
      ASSERT_EQ(json::parse(event), with_model) << event;
      ASSERT_EQ(EventBody(text, name), event);
      if (report.row % 5 == 0 || !report.events.empty()) {
        want.test_rows.insert(report.row);
        if (report.has_spectral_radius) {
          want.rho[report.row] = report.spectral_radius;
        } else {
          want.no_rho_rows.insert(report.row);
        }
        if (report.robust_row) want.robust_rows.insert(report.row);
      }
      if (report.row % 50 == 0) {
        FitReport fit;
        if (monitor->Summary(&fit).ok()) {
          want.snapshot_rows.insert(report.row);
          want.summaries[report.row] = fit;
        }
      }
    }
    want.events.insert(want.events.end(), report.events.begin(), report.events.end());
    if ((r + 1) % 100 == 0) {
      ASSERT_OK(store->Commit());
      ASSERT_OK(store->Begin());
    }
  }
  ASSERT_OK(store->Commit());
  const std::int64_t rows = monitor->rows();
  ASSERT_EQ(rows, 998);  // 1000 raw rows, 2 lags of presample
  ASSERT_GE(want.events.size(), 2u) << "the break should raise alerts";
  bool some_alert_row_off_cadence = false;
  for (const AlertEvent& ev : want.events) some_alert_row_off_cadence |= ev.row % 5 != 0;
  EXPECT_TRUE(some_alert_row_off_cadence);    // so the "tests on alert rows" rule is exercised
  EXPECT_EQ(want.snapshot_rows.size(), 19u);  // rows 50, 100, ..., 950

  SqliteFile f(path);
  const std::string where = " WHERE model_id = " + std::to_string(model);
  // Tests: the cadence plus every alert row.
  std::set<std::int64_t> test_rows;
  for (const auto& r : f.Rows("SELECT row FROM tests" + where + " ORDER BY row")) {
    test_rows.insert(std::stoll(r[0]));
  }
  EXPECT_EQ(test_rows, want.test_rows);
  const std::vector<double> rho =
      f.Doubles("SELECT rho FROM tests" + where + " AND rho IS NOT NULL ORDER BY row");
  std::set<std::int64_t> no_rho;
  for (const auto& r : f.Rows("SELECT row FROM tests" + where + " AND rho IS NULL")) {
    no_rho.insert(std::stoll(r[0]));
  }
  EXPECT_EQ(no_rho, want.no_rho_rows);
  EXPECT_EQ(no_rho, (std::set<std::int64_t>{5}));  // fewer rows than the k = 7 regressors
  ASSERT_EQ(rho.size(), want.rho.size());
  std::size_t i = 0;
  for (const auto& [row, value] : want.rho) {
    EXPECT_TRUE(SameBits(rho[i++], value)) << "rho of row " << row;
  }
  for (const auto& r : f.Rows("SELECT row, period, payload FROM tests" + where)) {
    const json payload = json::parse(r[2]);
    EXPECT_EQ(payload["row"].get<std::int64_t>(), std::stoll(r[0]));
    EXPECT_EQ(payload["period"], r[1]);
    std::vector<std::string> monitors;
    for (const auto& [name, reading] : payload["monitors"].items()) {
      monitors.push_back(name);
      EXPECT_TRUE(reading.contains("armed") && reading.contains("statistic"));
    }
    EXPECT_EQ(monitors, want.monitors);
    const bool robust = want.robust_rows.count(std::stoll(r[0])) != 0;
    EXPECT_EQ(payload["restrictions"].contains("b-not-to-a"), robust) << r[0];
  }
  // Snapshots: the cadence, and Summary's numbers bit for bit.
  std::set<std::int64_t> snapshot_rows;
  for (const auto& r : f.Rows("SELECT row, payload FROM snapshots" + where + " ORDER BY row")) {
    const std::int64_t row = std::stoll(r[0]);
    snapshot_rows.insert(row);
    ASSERT_EQ(want.summaries.count(row), 1u) << row;
    const FitReport& fit = want.summaries[row];
    const json payload = json::parse(r[1]);
    ExpectMatrixBits(payload["coefficients"], fit.phi, "coefficients");
    ExpectMatrixBits(payload["se"], fit.std_error, "se");
    ExpectMatrixBits(payload["sigma"], fit.sigma, "sigma");
    ASSERT_EQ(payload["eigenvalues"].size(), fit.eigenvalues.size());
    for (std::size_t e = 0; e < fit.eigenvalues.size(); ++e) {
      EXPECT_TRUE(SameBits(payload["eigenvalues"][e][0].get<double>(), fit.eigenvalues[e].real()));
      EXPECT_TRUE(SameBits(payload["eigenvalues"][e][1].get<double>(), fit.eigenvalues[e].imag()));
    }
    EXPECT_TRUE(SameBits(payload["rho"].get<double>(), fit.spectral_radius));
    ASSERT_TRUE(fit.spectral_radius_se_status.ok());
    EXPECT_TRUE(SameBits(payload["rho_se"].get<double>(), fit.spectral_radius_se));
    EXPECT_EQ(payload["variables"], json({"a", "b", "c"}));
    EXPECT_EQ(payload["regressors"][0], "const");
    EXPECT_EQ(payload["regressors"].size(), 7u);
  }
  EXPECT_EQ(snapshot_rows, want.snapshot_rows);
  // Alerts: exactly the Monitor's events, in order.
  const auto alerts =
      f.Rows("SELECT row, period, monitor, transition, level, message, recorded_at FROM alerts" +
             where + " ORDER BY id");
  const std::vector<double> statistic =
      f.Doubles("SELECT statistic FROM alerts" + where + " ORDER BY id");
  const std::vector<double> threshold =
      f.Doubles("SELECT threshold FROM alerts" + where + " ORDER BY id");
  ASSERT_EQ(alerts.size(), want.events.size());
  for (std::size_t k = 0; k < alerts.size(); ++k) {
    const AlertEvent& ev = want.events[k];
    EXPECT_EQ(alerts[k][0], std::to_string(ev.row));
    EXPECT_EQ(alerts[k][1], ev.period);
    EXPECT_EQ(alerts[k][2], ev.monitor);
    EXPECT_EQ(alerts[k][3], ev.raised ? "raised" : "cleared");
    EXPECT_EQ(alerts[k][4], AlertLevelName(ev.level));
    EXPECT_EQ(alerts[k][5], ev.message);
    EXPECT_EQ(alerts[k][6], "2026-01-01T00:00:01Z");
    EXPECT_TRUE(SameBits(statistic[k], ev.statistic)) << k;
    EXPECT_TRUE(SameBits(threshold[k], ev.threshold)) << k;
  }
  std::vector<AlertEvent> loaded;
  ASSERT_OK(store->LoadAlerts(model, &loaded));
  ASSERT_EQ(loaded.size(), want.events.size());
  for (std::size_t k = 0; k < loaded.size(); ++k) {
    EXPECT_EQ(loaded[k].model, want.events[k].model);
    EXPECT_EQ(loaded[k].monitor, want.events[k].monitor);
  }
  std::string check;
  ASSERT_OK(store->IntegrityCheck(&check));
  EXPECT_EQ(check, "ok");
}

// With a tests record on every row, a record keeps only the readings that changed since the
// previous row, and every full_readings_every-th row keeps them all. The invariant a reader relies
// on: carrying each monitor's reading forward over the stored rows gives back, row for row, every
// reading the Monitor produced (RowPayload, bit for bit).
TEST(RecordTest, ChangedReadingsCarriedForwardGiveEveryReading) {
  const std::string path = FreshDir("record_changed") + "/log.db";
  StoreOptions so;
  so.path = path;
  std::unique_ptr<Store> store;
  ASSERT_OK(Store::Open(so, &store));
  std::unique_ptr<Monitor> monitor;
  ASSERT_OK(Monitor::Create(Spec(), &monitor));
  RecordOptions ro;  // tests on every row (the default)
  ro.full_readings_every = 50;
  std::int64_t model = 0;
  ASSERT_OK(store->Begin());
  ASSERT_OK(store->AddModel("rec", "name = \"rec\"\n", "2026-01-01T00:00:00Z", &model));
  const Eigen::MatrixXd y = BreakData();
  std::map<std::int64_t, json> full;  // row -> RowPayload(report)["monitors"]
  std::map<std::int64_t, std::set<std::string>> changed;
  std::size_t full_bytes = 0;
  for (Eigen::Index r = 0; r < y.rows(); ++r) {
    const RowReport report = monitor->Update(std::to_string(r + 1), y.row(r).transpose());
    ASSERT_TRUE(report.status.ok()) << report.status.ToString();
    ASSERT_OK(RecordRow(*store, model, *monitor, report, ro, "2026-01-01T00:00:01Z"));
    if (!report.estimated) continue;
    full[report.row] = RowPayload(report)["monitors"];
    for (const MonitorSample& s : report.readings) {
      if (s.changed) changed[report.row].insert(std::string(s.monitor));
    }
    full_bytes += RowPayloadText(report).size();
  }
  ASSERT_OK(store->Commit());
  ASSERT_EQ(full.size(), 998u);
  const std::vector<std::string> names = monitor->MonitorNames();

  SqliteFile f(path);
  json carried = json::object();
  std::size_t stored_bytes = 0, rows = 0;
  for (const auto& r : f.Rows("SELECT row, payload FROM tests WHERE model_id = " +
                              std::to_string(model) + " ORDER BY row")) {
    const std::int64_t row = std::stoll(r[0]);
    ++rows;
    stored_bytes += r[1].size();
    const json payload = json::parse(r[1]);
    std::set<std::string> present;
    for (const auto& [name, reading] : payload["monitors"].items()) {
      present.insert(name);
      carried[name] = reading;
    }
    if (row == 1 || row % 50 == 0) {
      EXPECT_EQ(present.size(), names.size()) << "row " << row << " keeps every reading";
    } else {
      EXPECT_EQ(present, changed[row]) << "row " << row;
    }
    ASSERT_EQ(carried, full[row]) << "row " << row;
  }
  EXPECT_EQ(rows, 998u);
  std::printf("tests payloads: %zu bytes stored, %zu with every reading (%.2f)\n", stored_bytes,
              full_bytes, static_cast<double>(stored_bytes) / static_cast<double>(full_bytes));
  EXPECT_LT(stored_bytes, full_bytes / 2);  // most readings hold from row to row
}

TEST(RecordTest, OptionsAndTransactionAreChecked) {
  const std::string path = FreshDir("record_options") + "/log.db";
  StoreOptions so;
  so.path = path;
  std::unique_ptr<Store> store;
  ASSERT_OK(Store::Open(so, &store));
  std::unique_ptr<Monitor> monitor;
  ASSERT_OK(Monitor::Create(Spec(), &monitor));
  RowReport report;
  report.estimated = true;
  report.row = 1;
  report.period = "1";
  AlertEvent ev;
  ev.row = 1;
  ev.period = "1";
  ev.monitor = "stability";
  ev.level = AlertLevel::kWarn;
  report.events.push_back(ev);
  Status st = RecordRow(*store, 1, *monitor, report, RecordOptions{}, "t");
  EXPECT_EQ(st.code(), StatusCode::kInvalidArgument);
  EXPECT_NE(st.message().find("outside a transaction"), std::string::npos);
  ASSERT_OK(store->Begin());
  std::int64_t model = 0;
  ASSERT_OK(store->AddModel("rec", "", "t", &model));
  RecordOptions bad;
  bad.tests_every = 0;
  EXPECT_EQ(RecordRow(*store, model, *monitor, report, bad, "t").message(),
            "record: tests_every = 0: must be >= 1");
  bad = RecordOptions{};
  bad.full_readings_every = 0;
  EXPECT_EQ(RecordRow(*store, model, *monitor, report, bad, "t").message(),
            "record: full_readings_every = 0: must be >= 1");
  bad = RecordOptions{};
  bad.snapshot_every = -1;
  EXPECT_EQ(RecordRow(*store, model, *monitor, report, bad, "t").code(),
            StatusCode::kInvalidArgument);
  // alerts = false: the tests record of the alert row, but no alert.
  RecordOptions no_alerts;
  no_alerts.alerts = false;
  no_alerts.snapshot_every = 1;  // the Monitor has no rows: no snapshot can be summarised
  ASSERT_OK(RecordRow(*store, model, *monitor, report, no_alerts, "t"));
  // A refused row writes nothing.
  RowReport refused = report;
  refused.status = Status::NonFinite("row 2: NaN");
  refused.row = 2;
  ASSERT_OK(RecordRow(*store, model, *monitor, refused, RecordOptions{}, "t"));
  ASSERT_OK(store->Commit());
  SqliteFile f(path);
  EXPECT_EQ(f.Int("SELECT COUNT(*) FROM tests"), 1);
  EXPECT_EQ(f.Int("SELECT COUNT(*) FROM snapshots"), 0);
  EXPECT_EQ(f.Int("SELECT COUNT(*) FROM alerts"), 0);
}

TEST(RecordTest, RowPayloadWritesNullsAndUnavailableTests) {
  RowReport report;
  report.estimated = true;
  report.row = 12;
  report.period = "2026-03-31";
  report.estimate_status = Status::RankDeficient("regressor L1.b is collinear");
  report.rho_se = 0.02;
  RestrictionRow ok;
  ok.name = "r1";
  ok.wald.statistic = 4.5;
  ok.wald.df = 2;
  ok.wald.p_value = 0.105;
  RestrictionRow bad;
  bad.name = "r2";
  bad.status = Status::RankDeficient("singular R V R'");
  report.restrictions = {ok, bad};
  MonitorSample sample;
  sample.monitor = "cusum.a";
  sample.reading.armed = false;
  sample.reading.statistic = 0.25;
  report.readings.push_back(sample);  // warn / critical are infinite by default
  const nlohmann::ordered_json p = RowPayload(report);
  EXPECT_EQ(p.dump(),
            "{\"row\":12,\"period\":\"2026-03-31\",\"estimate\":\"rank_deficient: regressor L1.b "
            "is collinear\",\"rho\":null,\"rho_se\":0.02,\"rows_to_unit\":null,\"restrictions\":{"
            "\"r1\":{\"statistic\":4.5,\"df\":2,\"p_value\":0.105},\"r2\":{\"unavailable\":\"rank_"
            "deficient: singular R V R'\"}},\"monitors\":{\"cusum.a\":{\"armed\":false,"
            "\"statistic\":0.25,\"warn\":null,\"critical\":null}}}");
  EXPECT_EQ(json::parse(RowPayloadText(report)), p);
  EXPECT_EQ(RowPayloadText(report), p.dump());  // the same text here: no whole or tiny numbers
}

TEST(RecordTest, RowPayloadTextEscapesNamesAndKeepsDoublesExact) {
  RowReport report;
  report.estimated = true;
  report.row = 3;
  report.period = "q\"uote\\back\nline\x01";
  report.has_spectral_radius = true;
  report.spectral_radius = 1.0;  // whole: written 1.0, read back as a double
  report.rho_se = 1e-300;
  report.rows_to_unit = 123456789012.0;
  MonitorSample sample;
  sample.monitor = "restriction.a\tb";
  sample.reading.armed = true;
  sample.reading.statistic = 0.1 + 0.2;  // 0.30000000000000004
  sample.reading.warn = std::nextafter(1.0, 2.0);
  sample.reading.critical = -0.0;
  report.readings.push_back(sample);
  const std::string text = RowPayloadText(report);
  const json back = json::parse(text);  // throws on bad escaping
  EXPECT_EQ(back, RowPayload(report));
  EXPECT_EQ(back["period"].get<std::string>(), report.period);
  EXPECT_TRUE(back["rho"].is_number_float()) << text;
  EXPECT_TRUE(back["rows_to_unit"].is_number_float()) << text;
  const json& m = back["monitors"]["restriction.a\tb"];
  EXPECT_TRUE(SameBits(m["statistic"].get<double>(), 0.1 + 0.2));
  EXPECT_TRUE(SameBits(m["warn"].get<double>(), std::nextafter(1.0, 2.0)));
  EXPECT_TRUE(SameBits(back["rho_se"].get<double>(), 1e-300));
}

}  // namespace
}  // namespace rimwatch::daemon
