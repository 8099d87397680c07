// `rimwatch replay` run as a user runs it: its final state equals `rimwatch fit` on the same rows
// (one engine, one code path), its events are JSON lines, and bad input is refused clearly.
// With --db it writes rimwatchd's SQLite log, read back here with Python's sqlite3 module
// (/usr/bin/python3), a reader this project did not write.
#include <gtest/gtest.h>

#include <sys/stat.h>
#include <cmath>
#include <fstream>
#include <nlohmann/json.hpp>
#include <random>
#include <sstream>

#include "run_process.h"

namespace {

using nlohmann::json;
using rimwatch::testing::ProcessResult;
using rimwatch::testing::RequiredEnv;
using rimwatch::testing::RunProcess;

std::string SourceDir() { return RequiredEnv("RIMWATCH_SOURCE_DIR"); }
std::string Example() { return SourceDir() + "/clients/examples/desk_minutes.csv"; }

ProcessResult Rimwatch(std::vector<std::string> args) {
  args.insert(args.begin(), RequiredEnv("RIMWATCH_BIN"));
  return RunProcess(args, ::testing::TempDir());
}

std::string WriteTemp(const std::string& name, const std::string& text) {
  const std::string path = ::testing::TempDir() + "/replay_cli_test_" + name;
  std::ofstream(path, std::ios::binary) << text;
  return path;
}

const char* kExpandingSpec =
    "name = \"desk\"\nvariables = [\"alpha\", \"beta\", \"gamma\"]\nlags = 2\n"
    "[training]\nrows = 150\n"
    "[[restriction]]\nname = \"beta-not-to-alpha\"\ngranger = { cause = [\"beta\"], effect = "
    "[\"alpha\"] }\n";

std::vector<json> JsonLines(const std::string& text) {
  std::vector<json> out;
  std::istringstream in(text);
  std::string line;
  while (std::getline(in, line)) out.push_back(json::parse(line));
  return out;
}

TEST(ReplayCli, FinalStateEqualsFitOnTheSameRows) {
  const std::string spec = WriteTemp("expanding.toml", kExpandingSpec);
  const ProcessResult replay = Rimwatch({"replay", "--spec", spec, "--csv", Example(), "--json"});
  ASSERT_EQ(replay.exit_code, 0) << replay.err;
  const std::vector<json> lines = JsonLines(replay.out);
  ASSERT_FALSE(lines.empty());
  ASSERT_TRUE(lines.back().contains("summary"));
  const json& summary = lines.back()["summary"];
  const ProcessResult fit =
      Rimwatch({"fit", "--csv", Example(), "--lags", "2", "--granger", "beta:alpha", "--json"});
  ASSERT_EQ(fit.exit_code, 0) << fit.err;
  const json batch = json::parse(fit.out);
  for (const char* key : {"sample", "variables", "coefficients", "sigma", "sigma_ml", "eigenvalues",
                          "spectral_radius", "covariance", "diagnostics"}) {
    EXPECT_EQ(summary[key], batch[key]) << key;  // bit-identical: the same engine code
  }
  ASSERT_EQ(summary["tests"].size(), 1u);
  EXPECT_EQ(summary["tests"][0]["name"], "beta-not-to-alpha");
  EXPECT_EQ(summary["tests"][0]["statistic"], batch["tests"][0]["statistic"]);
  for (std::size_t i = 0; i + 1 < lines.size(); ++i) {
    for (const char* key : {"period", "row", "model", "monitor", "transition", "level", "statistic",
                            "threshold", "message"}) {
      EXPECT_TRUE(lines[i].contains(key)) << key;
    }
  }
}

// Stable VAR(1) for 500 rows, then the first series turns nearly non-stationary.
std::string BreakCsv() {
  std::mt19937_64 gen(99);
  std::normal_distribution<double> e;
  std::ostringstream csv;
  csv << "period,a,b\n";
  double a = 0.0, b = 0.0;
  for (int t = 1; t <= 1500; ++t) {
    const double rho = t <= 500 ? 0.4 : 0.995;
    a = rho * a + e(gen);
    b = 0.3 * b + e(gen);
    csv.precision(17);
    csv << t << "," << a << "," << b << "\n";
  }
  return csv.str();
}

TEST(ReplayCli, StabilityAlertComesAfterTheBreakAndNotBefore) {
  const std::string spec = WriteTemp(
      "break.toml",
      "name = \"brk\"\nvariables = [\"a\", \"b\"]\nlags = 1\n[window]\nkind = \"sliding\"\n"
      "rows = 200\n[training]\nrows = 150\n");
  const std::string csv = WriteTemp("break.csv", BreakCsv());
  const ProcessResult r = Rimwatch({"replay", "--spec", spec, "--csv", csv, "--json"});
  ASSERT_EQ(r.exit_code, 0) << r.err;
  int stability_raised = 0;
  for (const json& line : JsonLines(r.out)) {
    if (line.contains("summary")) continue;
    if (line["monitor"] == "stability" && line["transition"] == "raised") {
      ++stability_raised;
      EXPECT_GT(line["row"].get<int>(), 500) << line.dump();
    }
  }
  EXPECT_GE(stability_raised, 1);
  const ProcessResult text = Rimwatch({"replay", "--spec", spec, "--csv", csv});
  ASSERT_EQ(text.exit_code, 0);
  EXPECT_NE(text.out.find("RAISED"), std::string::npos);
  EXPECT_NE(text.out.find("not trading or policy advice"), std::string::npos);
}

TEST(ReplayCli, BadInputIsExitTwoWithFileAndLine) {
  const std::string good = WriteTemp("good.toml", kExpandingSpec);
  const std::string bad = WriteTemp("bad.toml", std::string("colour = 1\n") + kExpandingSpec);
  ProcessResult r = Rimwatch({"replay", "--spec", bad, "--csv", Example()});
  EXPECT_EQ(r.exit_code, 2);
  EXPECT_TRUE(r.out.empty());
  EXPECT_NE(r.err.find("bad.toml:1: unknown key 'colour'"), std::string::npos) << r.err;

  const std::string nocol = WriteTemp("nocol.csv", "period,alpha,beta\n1,0.1,0.2\n");
  r = Rimwatch({"replay", "--spec", good, "--csv", nocol});
  EXPECT_EQ(r.exit_code, 2);
  EXPECT_NE(r.err.find("nocol.csv:1: no column 'gamma'"), std::string::npos) << r.err;

  const std::string logspec =
      WriteTemp("log.toml",
                "name = \"l\"\nvariables = [\"a\", \"b\"]\nlags = 1\ntransform = { a = "
                "\"logdiff\" }\n[training]\nrows = 20\n");
  const std::string negative = WriteTemp("neg.csv", "a,b\n1,2\n2,3\n-1,4\n");
  r = Rimwatch({"replay", "--spec", logspec, "--csv", negative});
  EXPECT_EQ(r.exit_code, 2);
  EXPECT_NE(r.err.find("neg.csv:4:"), std::string::npos) << r.err;
  EXPECT_NE(r.err.find("logdiff"), std::string::npos) << r.err;
  EXPECT_TRUE(r.out.empty());
}

// --skip-refused goes on past a refused row as rimwatchd does (ModelHost::RunRow): the model is
// left as it was, so the run equals a replay of the file without that row.
TEST(ReplayCli, SkipRefusedLeavesTheModelAsIfTheRowWereAbsent) {
  const std::string logspec =
      WriteTemp("skip.toml",
                "name = \"l\"\nvariables = [\"a\", \"b\"]\nlags = 1\ntransform = { a = "
                "\"logdiff\" }\n[training]\nrows = 20\n");
  std::mt19937_64 gen(7);
  std::normal_distribution<double> noise(0.0, 0.05);
  std::ostringstream with, without;
  with << "a,b\n";
  without << "a,b\n";
  double level = 100.0, b = 0.0;
  for (int t = 1; t <= 120; ++t) {
    level *= std::exp(noise(gen));
    b = 0.5 * b + noise(gen);
    if (t == 60) with << "-1," << b << "\n";  // refused: logdiff of a value <= 0
    with << level << "," << b << "\n";
    without << level << "," << b << "\n";
  }
  const std::string bad = WriteTemp("skip_with.csv", with.str());
  const std::string good = WriteTemp("skip_without.csv", without.str());
  const ProcessResult skipped =
      Rimwatch({"replay", "--spec", logspec, "--csv", bad, "--json", "--skip-refused"});
  ASSERT_EQ(skipped.exit_code, 0) << skipped.err;
  EXPECT_NE(skipped.err.find("skip_with.csv:61:"), std::string::npos) << skipped.err;
  EXPECT_NE(skipped.err.find("1 rows refused"), std::string::npos) << skipped.err;
  const ProcessResult plain = Rimwatch({"replay", "--spec", logspec, "--csv", good, "--json"});
  ASSERT_EQ(plain.exit_code, 0) << plain.err;
  const json a = JsonLines(skipped.out).back()["summary"];
  const json c = JsonLines(plain.out).back()["summary"];
  EXPECT_EQ(a["coefficients"], c["coefficients"]);
  EXPECT_EQ(a["sigma"], c["sigma"]);
  EXPECT_EQ(a["model_rows"], c["model_rows"]);
}

// The whole --db log as JSON, read with Python's standard library sqlite3 module.
constexpr const char* kDumpLog = R"py(
import json, math, sqlite3, sys
c = sqlite3.connect("file:" + sys.argv[1] + "?mode=ro", uri=True)
# Non-finite numbers as null, as in the replay's JSON lines (e.g. an infinite clear level).
finite = lambda v: None if isinstance(v, float) and not math.isfinite(v) else v
q = lambda s: [[finite(v) for v in r] for r in c.execute(s).fetchall()]
cols = ["model_id", "row", "period", "monitor", "transition", "level", "statistic", "threshold",
        "message"]
print(json.dumps({
    "integrity": q("PRAGMA integrity_check")[0][0],
    "journal_mode": q("PRAGMA journal_mode")[0][0],
    "version": q("SELECT version FROM schema_version")[0][0],
    "series": q("SELECT name, period_kind FROM series ORDER BY id"),
    "observations": q("SELECT COUNT(*) FROM observations")[0][0],
    "max_vintage": q("SELECT MAX(vintage) FROM observations")[0][0],
    "first_periods": [r[0] for r in q("SELECT DISTINCT period_text FROM observations "
                                      "ORDER BY period_key LIMIT 2")],
    "models": q("SELECT id, name, spec_text, dropped_at FROM models ORDER BY id"),
    "tests": q("SELECT model_id, COUNT(*), MIN(row), MAX(row) FROM tests GROUP BY model_id "
               "ORDER BY model_id"),
    "snapshots": q("SELECT model_id, COUNT(*), MIN(row), MAX(row) FROM snapshots "
                   "GROUP BY model_id ORDER BY model_id"),
    "alerts": [dict(zip(cols, r)) for r in q("SELECT " + ", ".join(cols) +
                                             " FROM alerts ORDER BY id")],
}, allow_nan=False))
)py";

json DumpLog(const std::string& db) {
  const std::string script = WriteTemp("dump_log.py", kDumpLog);
  const ProcessResult r = RunProcess({"/usr/bin/python3", script, db}, ::testing::TempDir());
  EXPECT_EQ(r.exit_code, 0) << "/usr/bin/python3 failed: " << r.err;
  return r.exit_code == 0 ? json::parse(r.out) : json();
}

std::string FreshDb(const std::string& name) {
  const std::string path = ::testing::TempDir() + "/replay_cli_test_" + name;
  for (const char* suffix : {"", "-wal", "-shm"}) std::remove((path + suffix).c_str());
  return path;
}

bool Exists(const std::string& path) {
  struct stat info;
  return stat(path.c_str(), &info) == 0;
}

const char* kBreakSpec =
    "name = \"brk\"\nvariables = [\"a\", \"b\"]\nlags = 1\n[window]\nkind = \"sliding\"\n"
    "rows = 200\n[training]\nrows = 150\n";

TEST(ReplayCli, DbLogHoldsTheRunAndItsAlertsEqualTheJsonEvents) {
  const std::string spec = WriteTemp("db_break.toml", kBreakSpec);
  const std::string csv = WriteTemp("db_break.csv", BreakCsv());
  const std::string db = FreshDb("break.sqlite");
  const ProcessResult r = Rimwatch({"replay", "--spec", spec, "--csv", csv, "--json", "--db", db});
  ASSERT_EQ(r.exit_code, 0) << r.err;
  EXPECT_NE(r.err.find("replay: wrote model 'brk' (id 1) to " + db + ": 3000 new observations"),
            std::string::npos)
      << r.err;
  std::vector<json> events = JsonLines(r.out);
  ASSERT_TRUE(events.back().contains("summary"));
  const std::int64_t model_rows = events.back()["summary"]["model_rows"];
  events.pop_back();
  ASSERT_GE(events.size(), 2u);
  // Without --db the replay prints exactly the same (integer periods are already canonical).
  const ProcessResult plain = Rimwatch({"replay", "--spec", spec, "--csv", csv, "--json"});
  EXPECT_EQ(plain.out, r.out);

  const json log = DumpLog(db);
  EXPECT_EQ(log["integrity"], "ok");
  EXPECT_EQ(log["journal_mode"], "wal");
  EXPECT_EQ(log["version"], 2);
  EXPECT_EQ(log["series"], json::parse(R"([["a","integer"],["b","integer"]])"));
  EXPECT_EQ(log["observations"], 3000);  // 1500 rows x 2 series
  EXPECT_EQ(log["max_vintage"], 1);
  EXPECT_EQ(log["first_periods"], json::parse(R"(["1","2"])"));
  ASSERT_EQ(log["models"].size(), 1u);
  EXPECT_EQ(log["models"][0][1], "brk");
  EXPECT_EQ(log["models"][0][2], kBreakSpec);  // the spec text as given
  EXPECT_TRUE(log["models"][0][3].is_null());
  EXPECT_EQ(model_rows, 1499);  // one lag of presample
  // Tests every model row (the daemon's default cadence), a snapshot every 100 rows.
  EXPECT_EQ(log["tests"], json::array({json::array({1, model_rows, 1, model_rows})}));
  EXPECT_EQ(log["snapshots"], json::array({json::array({1, model_rows / 100, 100, 1400})}));
  // The alerts table holds exactly the events of the JSON lines, numbers bit for bit.
  const json& alerts = log["alerts"];
  ASSERT_EQ(alerts.size(), events.size());
  for (std::size_t i = 0; i < events.size(); ++i) {
    for (const char* key :
         {"period", "monitor", "transition", "level", "statistic", "threshold", "message"}) {
      EXPECT_EQ(alerts[i][key], events[i][key]) << i << " " << key;
    }
    EXPECT_EQ(alerts[i]["model_id"], 1);
    // Without lags lost to transforms, model row r is completed by data row r + p.
    EXPECT_EQ(alerts[i]["row"].get<int>() + 1, events[i]["row"].get<int>()) << i;
  }

  // The same log takes a second model of another name over the same series: nothing is
  // written twice (every observation is a duplicate) and the first model's records stay.
  const std::string spec2 =
      WriteTemp("db_break2.toml", std::string(kBreakSpec).replace(8, 3, "two"));
  const ProcessResult second =
      Rimwatch({"replay", "--spec", spec2, "--csv", csv, "--json", "--db", db});
  ASSERT_EQ(second.exit_code, 0) << second.err;
  EXPECT_NE(second.err.find("0 new observations (and 3000 duplicates not written"),
            std::string::npos)
      << second.err;
  const json both = DumpLog(db);
  EXPECT_EQ(both["observations"], 3000);
  ASSERT_EQ(both["models"].size(), 2u);
  EXPECT_EQ(both["models"][1][1], "two");
  EXPECT_EQ(both["tests"].size(), 2u);
  EXPECT_EQ(both["alerts"].size(), 2 * alerts.size());
}

TEST(ReplayCli, DbPeriodsAreCanonicalDatesAndTimestamps) {
  std::ostringstream csv;
  csv << "period,a,b\n";
  std::mt19937_64 gen(5);
  std::normal_distribution<double> e;
  for (int t = 0; t < 400; ++t) {
    // One bar a minute from 2026-03-31T08:00 at +02:00, i.e. 06:00 UTC.
    char period[40];
    std::snprintf(period, sizeof period, "2026-03-31T%02d:%02d:00+02:00", 8 + t / 60, t % 60);
    csv.precision(17);
    csv << period << "," << e(gen) << "," << e(gen) << "\n";
  }
  const std::string spec = WriteTemp("db_ts.toml", kBreakSpec);
  const std::string path = WriteTemp("db_ts.csv", csv.str());
  const std::string db = FreshDb("ts.sqlite");
  const ProcessResult r = Rimwatch({"replay", "--spec", spec, "--csv", path, "--json", "--db", db});
  ASSERT_EQ(r.exit_code, 0) << r.err;
  const json log = DumpLog(db);
  EXPECT_EQ(log["series"], json::parse(R"([["a","timestamp"],["b","timestamp"]])"));
  EXPECT_EQ(log["first_periods"],
            json::parse(R"(["2026-03-31T06:00:00Z","2026-03-31T06:01:00Z"])"));
  // The engine saw the canonical labels too.
  const json summary = JsonLines(r.out).back()["summary"];
  EXPECT_EQ(summary["sample"]["last_period"], "2026-03-31T12:39:00Z") << summary["sample"].dump();

  std::string dates = "period,a,b\n2026-01-01,1,2\n2026-01-02,2,1\n2026-01-02,3,3\n";
  const std::string dup = WriteTemp("db_dup.csv", dates);
  const std::string db2 = FreshDb("dup.sqlite");
  ProcessResult bad = Rimwatch({"replay", "--spec", spec, "--csv", dup, "--db", db2});
  EXPECT_EQ(bad.exit_code, 2);
  EXPECT_NE(bad.err.find("db_dup.csv:4: period 2026-01-02 is not after the previous row's "
                         "2026-01-02"),
            std::string::npos)
      << bad.err;
  EXPECT_FALSE(Exists(db2));
  const std::string quarters = WriteTemp("db_q.csv", "period,a,b\n2026Q1,1,2\n");
  bad = Rimwatch({"replay", "--spec", spec, "--csv", quarters, "--db", db2});
  EXPECT_EQ(bad.exit_code, 2);
  EXPECT_NE(bad.err.find("db_q.csv:2: period \"2026Q1\": not an integer, a date"),
            std::string::npos)
      << bad.err;
  const std::string mixed = WriteTemp("db_mixed.csv", "period,a,b\n2026-01-01,1,2\n17,2,1\n");
  bad = Rimwatch({"replay", "--spec", spec, "--csv", mixed, "--db", db2});
  EXPECT_EQ(bad.exit_code, 2);
  EXPECT_NE(
      bad.err.find("db_mixed.csv:3: period 17 is of kind integer, the first row's of kind date"),
      std::string::npos)
      << bad.err;
  EXPECT_FALSE(Exists(db2));
}

TEST(ReplayCli, DbRefusesWhatItWouldSpoilAndLeavesNothingOnFailure) {
  const std::string spec = WriteTemp("db_refuse.toml", kBreakSpec);
  const std::string csv = WriteTemp("db_refuse.csv", BreakCsv());
  const std::string db = FreshDb("refuse.sqlite");
  ASSERT_EQ(Rimwatch({"replay", "--spec", spec, "--csv", csv, "--db", db}).exit_code, 0);
  const json before = DumpLog(db);
  // The same model name is active there.
  ProcessResult r = Rimwatch({"replay", "--spec", spec, "--csv", csv, "--db", db});
  EXPECT_EQ(r.exit_code, 2);
  EXPECT_TRUE(r.out.empty());
  EXPECT_NE(r.err.find("model 'brk' is active there"), std::string::npos) << r.err;
  EXPECT_EQ(DumpLog(db), before);
  // A file that is not a rimwatch log is not touched.
  const std::string notes = WriteTemp("notes.txt", "my notes, not a database\n");
  r = Rimwatch({"replay", "--spec", spec, "--csv", csv, "--db", notes});
  EXPECT_EQ(r.exit_code, 2);
  EXPECT_NE(r.err.find("notes.txt: refusing to write into it"), std::string::npos) << r.err;
  std::ifstream in(notes);
  std::string text((std::istreambuf_iterator<char>(in)), std::istreambuf_iterator<char>());
  EXPECT_EQ(text, "my notes, not a database\n");
  // A row the model refuses half-way: the new file is removed, an existing one unchanged.
  const std::string logspec = WriteTemp(
      "db_log.toml",
      "name = \"l\"\nvariables = [\"a\", \"b\"]\nlags = 1\ntransform = { a = \"logdiff\" }\n"
      "[training]\nrows = 20\n");
  const std::string negative = WriteTemp("db_neg.csv", "a,b\n1,2\n2,3\n-1,4\n");
  const std::string fresh = FreshDb("neg.sqlite");
  r = Rimwatch({"replay", "--spec", logspec, "--csv", negative, "--db", fresh});
  EXPECT_EQ(r.exit_code, 2);
  EXPECT_NE(r.err.find("db_neg.csv:4:"), std::string::npos) << r.err;
  EXPECT_FALSE(Exists(fresh));
  EXPECT_FALSE(Exists(fresh + "-wal"));
  r = Rimwatch({"replay", "--spec", logspec, "--csv", negative, "--db", db});
  EXPECT_EQ(r.exit_code, 2);
  EXPECT_EQ(DumpLog(db), before);
  // The help says what the rule is.
  const ProcessResult help = Rimwatch({"replay", "--help"});
  EXPECT_NE(help.out.find("Nothing already in"), std::string::npos);
  EXPECT_NE(help.out.find("--db"), std::string::npos);
}

}  // namespace
