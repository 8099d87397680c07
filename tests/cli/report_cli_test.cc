// `rimwatch report` run as a user runs it, on a log written by `rimwatch replay --db` from an
// invented scenario with a break: two series a, b follow a calm VAR(1) for 700 days, then a
// turns persistent (root 0.97) and b starts to lead a. The HTML must be self-contained, hold one
// chart per expected panel with its data, list exactly the alerts of the log (read back with
// Python's sqlite3 module, a reader this project did not write) and state the cautions; bad
// input must be refused with clear messages and exit codes. The axis tick rule is checked on
// its own at the end.
#include <gtest/gtest.h>

#include <sys/stat.h>

#include <cmath>
#include <fstream>
#include <map>
#include <nlohmann/json.hpp>
#include <random>
#include <regex>
#include <set>
#include <sstream>

#include "report_chart.h"
#include "rimwatch/engine/random.h"
#include "run_process.h"

namespace {

using nlohmann::json;
using rimwatch::testing::ProcessResult;
using rimwatch::testing::ReadWholeFile;
using rimwatch::testing::RequiredEnv;
using rimwatch::testing::RunProcess;

constexpr int kRows = 1400;
constexpr int kBreak = 700;  // last calm data row

std::string Tmp(const std::string& name) { return ::testing::TempDir() + "/report_cli_" + name; }

std::string WriteTemp(const std::string& name, const std::string& text) {
  const std::string path = Tmp(name);
  std::ofstream(path, std::ios::binary) << text;
  return path;
}

bool Exists(const std::string& path) {
  struct stat info;
  return stat(path.c_str(), &info) == 0;
}

ProcessResult Rimwatch(std::vector<std::string> args) {
  args.insert(args.begin(), RequiredEnv("RIMWATCH_BIN"));
  return RunProcess(args, ::testing::TempDir());
}

// Calendar days from 2019-01-01 as YYYY-MM-DD (proleptic Gregorian).
std::string Day(int offset) {
  int y = 2019, m = 1, d = 1 + offset;
  auto days_in = [](int year, int month) {
    static const int kDays[] = {31, 28, 31, 30, 31, 30, 31, 31, 30, 31, 30, 31};
    const bool leap = (year % 4 == 0 && year % 100 != 0) || year % 400 == 0;
    return month == 2 && leap ? 29 : kDays[month - 1];
  };
  while (d > days_in(y, m)) {
    d -= days_in(y, m);
    if (++m == 13) {
      m = 1;
      ++y;
    }
  }
  char buf[48];
  std::snprintf(buf, sizeof buf, "%04d-%02d-%02d", y, m, d);
  return buf;
}

// Before the break: a = 0.3 a(-1) + e1, b = 0.4 b(-1) + e2 (rho 0.4, b does not lead a).
// After: a = 0.97 a(-1) + 0.5 b(-1) + e1 (rho 0.97 > warn 0.95; b leads a).
std::string BreakCsv() {
  rimwatch::DeterministicRandom gen(20240611);
  std::ostringstream csv;
  csv.precision(17);
  csv << "period,a,b\n";
  double a = 0.0, b = 0.0;
  for (int t = 1; t <= kRows; ++t) {
    const double e1 = gen.Normal(), e2 = gen.Normal();
    const double a_next = t <= kBreak ? 0.3 * a + e1 : 0.97 * a + 0.5 * b + e1;
    b = 0.4 * b + e2;
    a = a_next;
    csv << Day(t - 1) << "," << a << "," << b << "\n";
  }
  return csv.str();
}

const char* kSpec =
    "name = \"lead\"\n"
    "variables = [\"a\", \"b\"]\n"
    "lags = 1\n"
    "[window]\nkind = \"sliding\"\nrows = 200\n"
    "[training]\nrows = 200\n"
    "[[restriction]]\nname = \"b-does-not-lead-a\"\n"
    "granger = { cause = [\"b\"], effect = [\"a\"] }\n";

// What the log holds, read with Python's standard library sqlite3 module.
constexpr const char* kReadLog = R"py(
import json, sqlite3, sys
c = sqlite3.connect("file:" + sys.argv[1] + "?mode=ro", uri=True)
out = {}
for mid, name in c.execute("SELECT id, name FROM models ORDER BY id").fetchall():
    tests = c.execute("SELECT row, period, payload FROM tests WHERE model_id = ? ORDER BY row",
                      (mid,)).fetchall()
    monitors = []
    for _, _, payload in tests:
        for m in json.loads(payload)["monitors"]:
            if m not in monitors:
                monitors.append(m)
    out[name] = {
        "rows": len(tests),
        "first_period": tests[0][1] if tests else None,
        "last_period": tests[-1][1] if tests else None,
        "monitors": monitors,
        "snapshots": c.execute("SELECT COUNT(*) FROM snapshots WHERE model_id = ?",
                               (mid,)).fetchone()[0],
        "alerts": [list(r) for r in c.execute(
            "SELECT period, row, monitor, transition, level FROM alerts WHERE model_id = ? "
            "ORDER BY id", (mid,)).fetchall()],
    }
print(json.dumps(out))
)py";

json ReadLog(const std::string& db) {
  const std::string script = WriteTemp("read_log.py", kReadLog);
  const ProcessResult r = RunProcess({"/usr/bin/python3", script, db}, ::testing::TempDir());
  EXPECT_EQ(r.exit_code, 0) << "/usr/bin/python3 failed: " << r.err;
  return r.exit_code == 0 ? json::parse(r.out) : json();
}

// Runs SQL on a copy of a log with Python's sqlite3 (to build broken or empty logs).
void PythonSql(const std::string& db, const std::string& sql) {
  const std::string script = WriteTemp(
      "sql.py",
      "import sqlite3, sys\nc = sqlite3.connect(sys.argv[1])\nc.executescript(sys.argv[2])\n"
      "c.commit()\nc.close()\n");
  const ProcessResult r = RunProcess({"/usr/bin/python3", script, db, sql}, ::testing::TempDir());
  ASSERT_EQ(r.exit_code, 0) << r.err;
}

// The <svg ...>...</svg> elements of a document by id.
std::map<std::string, std::string> SvgById(const std::string& html) {
  std::map<std::string, std::string> out;
  std::size_t at = 0;
  while ((at = html.find("<svg", at)) != std::string::npos) {
    const std::size_t end = html.find("</svg>", at);
    const std::string svg = html.substr(at, end - at + 6);
    std::smatch m;
    if (std::regex_search(svg, m, std::regex("^<svg[^>]* id=\"([^\"]+)\""))) {
      EXPECT_EQ(out.count(m[1]), 0u) << "duplicate svg id " << m[1];
      out[m[1]] = svg;
    } else {
      ADD_FAILURE() << "an <svg> without id: " << svg.substr(0, 120);
    }
    at = end;
  }
  return out;
}

// Points of the longest <path class="data" d="..."> in an svg (M and L commands).
std::size_t DataPoints(const std::string& svg) {
  std::size_t best = 0;
  const std::regex re("<path class=\"data\" d=\"([^\"]*)\"");
  for (auto it = std::sregex_iterator(svg.begin(), svg.end(), re); it != std::sregex_iterator();
       ++it) {
    const std::string d = (*it)[1];
    best = std::max<std::size_t>(
        best, std::count(d.begin(), d.end(), 'L') + std::count(d.begin(), d.end(), 'M'));
  }
  return best;
}

std::size_t Count(const std::string& text, const std::string& what) {
  std::size_t n = 0;
  for (std::size_t at = text.find(what); at != std::string::npos; at = text.find(what, at + 1)) ++n;
  return n;
}

// An svg without its legend row (whose swatches reuse the classes of what they explain).
std::string WithoutLegend(const std::string& svg) {
  return std::regex_replace(svg, std::regex("<g class=\"legend-row\">.*?</g>"), "");
}

std::string StripTags(const std::string& cell) {
  return std::regex_replace(cell, std::regex("<[^>]*>"), "");
}

class ReportCli : public ::testing::Test {
 protected:
  static void SetUpTestSuite() {
    spec_ = WriteTemp("lead.toml", kSpec);
    csv_ = WriteTemp("lead.csv", BreakCsv());
    db_ = Tmp("lead.sqlite");
    for (const char* suffix : {"", "-wal", "-shm"}) std::remove((db_ + suffix).c_str());
    const ProcessResult r = Rimwatch({"replay", "--spec", spec_, "--csv", csv_, "--db", db_});
    ASSERT_EQ(r.exit_code, 0) << r.err;
    html_path_ = Tmp("lead.html");
    std::remove(html_path_.c_str());
    const ProcessResult rep = Rimwatch({"report", "--db", db_, "--out", html_path_});
    ASSERT_EQ(rep.exit_code, 0) << rep.err;
    EXPECT_TRUE(rep.out.empty());
    EXPECT_NE(rep.err.find("report: wrote " + html_path_), std::string::npos) << rep.err;
    html_ = ReadWholeFile(html_path_);
    log_ = ReadLog(db_);
  }
  static std::string spec_, csv_, db_, html_path_, html_;
  static json log_;
};
std::string ReportCli::spec_, ReportCli::csv_, ReportCli::db_, ReportCli::html_path_,
    ReportCli::html_;
json ReportCli::log_;

TEST_F(ReportCli, ScenarioRaisesAlertsOnlyAfterTheBreak) {
  // The report is only as good a test as its data: the invented break must show in the log,
  // and the calm part must not (the residual checks, advisory, are left out of this).
  const json& m = log_["lead"];
  ASSERT_EQ(m["rows"], kRows - 1);  // one lag of presample
  std::set<std::string> raised;
  for (const json& a : m["alerts"]) {
    const std::string monitor = a[2];
    if (a[3] != "raised" || monitor.rfind("diagnostics.", 0) == 0) continue;
    raised.insert(monitor);
    // Model row r is completed by data row r + 1; the break starts at data row kBreak + 1.
    EXPECT_GE(a[1].get<int>(), kBreak) << a.dump();
  }
  EXPECT_EQ(raised.count("stability"), 1u);
  EXPECT_EQ(raised.count("restriction.b-does-not-lead-a"), 1u);
}

TEST_F(ReportCli, HtmlIsSelfContained) {
  ASSERT_EQ(html_.rfind("<!DOCTYPE html>", 0), 0u);
  EXPECT_NE(html_.find("</html>"), std::string::npos);
  // No network: the only URL is the SVG namespace, once per chart.
  std::string rest = html_;
  const std::string ns = "http://www.w3.org/2000/svg";
  const std::size_t svgs = Count(html_, "<svg");
  EXPECT_EQ(Count(html_, ns), svgs);
  for (std::size_t at; (at = rest.find(ns)) != std::string::npos;) rest.erase(at, ns.size());
  EXPECT_EQ(rest.find("http://"), std::string::npos);
  EXPECT_EQ(rest.find("https://"), std::string::npos);
  EXPECT_EQ(rest.find("//www."), std::string::npos);
  // No external resources of any kind.
  for (const char* banned : {"<link", "<img", "<iframe", "@import", "src=", "@font-face"}) {
    EXPECT_EQ(html_.find(banned), std::string::npos) << banned;
  }
  // url(...) only for the in-document clip paths.
  const std::regex url("url\\(([^)]*)\\)");
  for (auto it = std::sregex_iterator(html_.begin(), html_.end(), url);
       it != std::sregex_iterator(); ++it) {
    EXPECT_EQ((*it)[1].str().front(), '#') << (*it)[0];
  }
  EXPECT_EQ(Count(html_, "<script"), 1u);  // the inline beforeprint handler
  EXPECT_NE(html_.find("@media print"), std::string::npos);
  // Deterministic: the same log gives the same bytes.
  const std::string again = Tmp("again.html");
  ASSERT_EQ(Rimwatch({"report", "--db", db_, "--out", again}).exit_code, 0);
  EXPECT_EQ(ReadWholeFile(again), html_);
}

TEST_F(ReportCli, OneChartPerPanelWithItsData) {
  const std::map<std::string, std::string> svgs = SvgById(html_);
  const std::string r = "restriction.b-does-not-lead-a";
  // Panels with a per-row data path.
  const std::vector<std::string> row_charts = {"m1-rho",
                                               "m1-" + r + "-pvalue",
                                               "m1-" + r,
                                               "m1-cusum",
                                               "m1-volatility",
                                               "m1-constancy.nyblom_hansen",
                                               "m1-constancy.reference_equality"};
  for (const std::string& id : row_charts) {
    ASSERT_EQ(svgs.count(id), 1u) << id;
    // The rows drawn: at least one point per plot pixel column over the armed stretch (the
    // constancy tests hold one value per block, so their paths are flat runs).
    EXPECT_GT(DataPoints(svgs.at(id)), 200u) << id;
  }
  // Every monitor the log records has its chart (stability is the spectral radius chart).
  for (const json& m : log_["lead"]["monitors"]) {
    const std::string name = m.get<std::string>();
    EXPECT_EQ(svgs.count(name == "stability" ? "m1-rho" : "m1-" + name), 1u) << name;
  }
  // Eigenvalues: n p = 2 of the last snapshot, and the trail of the 13 earlier ones.
  ASSERT_EQ(svgs.count("m1-eigen"), 1u);
  const std::string eigen = WithoutLegend(svgs.at("m1-eigen"));
  EXPECT_EQ(Count(eigen, "class=\"eig-last\""), 2u);
  EXPECT_EQ(Count(eigen, "class=\"eig-trail\""),
            2u * (log_["lead"]["snapshots"].get<std::size_t>() - 1));
  EXPECT_EQ(Count(eigen, "class=\"unit-circle\""), 1u);
  // Coefficient paths of the first equation (a): const, L1.a, L1.b over the 13 snapshots.
  for (const char* reg : {"const", "L1.a", "L1.b"}) {
    const std::string id = std::string("m1-coef-a-") + reg;
    ASSERT_EQ(svgs.count(id), 1u) << id;
    EXPECT_EQ(DataPoints(svgs.at(id)), log_["lead"]["snapshots"].get<std::size_t>()) << id;
    EXPECT_NE(svgs.at(id).find("class=\"band\""), std::string::npos) << id;
  }
  ASSERT_EQ(svgs.count("m1-timeline"), 1u);
  // The rho chart has its band, both levels and period tick labels from the log.
  const std::string& rho = svgs.at("m1-rho");
  EXPECT_NE(rho.find("<path class=\"band\""), std::string::npos);
  EXPECT_NE(rho.find("<path class=\"lvl warn\""), std::string::npos);
  EXPECT_NE(rho.find("<path class=\"lvl crit\""), std::string::npos);
  std::smatch m;
  ASSERT_TRUE(
      std::regex_search(rho, m, std::regex("<text class=\"tick\"[^>]*>(20\\d\\d-\\d\\d-\\d\\d)<")));
  // Tick labels thinned: every x label fits its share of the width (8 at most on 876 units).
  std::size_t dates = 0;
  const std::regex date_tick("<text class=\"tick\"[^>]*>20\\d\\d-\\d\\d-\\d\\d<");
  for (auto it = std::sregex_iterator(rho.begin(), rho.end(), date_tick);
       it != std::sregex_iterator(); ++it)
    ++dates;
  EXPECT_GE(dates, 3u);
  EXPECT_LE(dates, 10u);
  // Every svg in the page is one of the expected panels or a residual check.
  for (const auto& [id, svg] : svgs) {
    const bool known = id == "m1-eigen" || id == "m1-timeline" || id.rfind("m1-coef-a-", 0) == 0 ||
                       id.rfind("m1-diagnostics.", 0) == 0 ||
                       std::find(row_charts.begin(), row_charts.end(), id) != row_charts.end();
    EXPECT_TRUE(known) << id;
  }
}

TEST_F(ReportCli, AlertTableEqualsTheLog) {
  const json& alerts = log_["lead"]["alerts"];
  ASSERT_GE(alerts.size(), 2u);
  std::vector<std::vector<std::string>> rows;
  const std::regex tr("<tr class=\"ev ([a-z]+) ([a-z]+)\">(.*?)</tr>");
  const std::regex td("<td[^>]*>(.*?)</td>");
  for (auto it = std::sregex_iterator(html_.begin(), html_.end(), tr); it != std::sregex_iterator();
       ++it) {
    const std::string cells = (*it)[3];
    std::vector<std::string> row;
    for (auto c = std::sregex_iterator(cells.begin(), cells.end(), td); c != std::sregex_iterator();
         ++c)
      row.push_back(StripTags((*c)[1]));
    rows.push_back(row);
  }
  ASSERT_EQ(rows.size(), alerts.size());
  std::size_t raised = 0;
  for (std::size_t i = 0; i < rows.size(); ++i) {
    ASSERT_EQ(rows[i].size(), 8u);
    EXPECT_EQ(rows[i][0], alerts[i][0].get<std::string>()) << i;          // period
    EXPECT_EQ(rows[i][1], std::to_string(alerts[i][1].get<int>())) << i;  // row
    EXPECT_EQ(rows[i][2], alerts[i][2].get<std::string>()) << i;          // monitor
    EXPECT_EQ(rows[i][3], alerts[i][3].get<std::string>()) << i;          // transition
    EXPECT_EQ(rows[i][4], alerts[i][4].get<std::string>()) << i;          // level
    EXPECT_FALSE(rows[i][7].empty()) << i;                                // message
    raised += alerts[i][3] == "raised";
  }
  // One timeline bar per raise.
  const std::string timeline = WithoutLegend(SvgById(html_).at("m1-timeline"));
  EXPECT_EQ(Count(timeline, "<rect class=\"span-bar "), raised);
}

TEST_F(ReportCli, HeaderSpecAndCautions) {
  const json& m = log_["lead"];
  EXPECT_NE(html_.find("<h2>lead</h2>"), std::string::npos);
  EXPECT_NE(html_.find("<dt>variables</dt><dd>a, b</dd>"), std::string::npos);
  EXPECT_NE(html_.find("<dt>lags</dt><dd>1</dd>"), std::string::npos);
  EXPECT_NE(html_.find("<dt>window</dt><dd>sliding, 200 rows</dd>"), std::string::npos);
  EXPECT_NE(html_.find("<dt>first period</dt><dd>" + m["first_period"].get<std::string>()),
            std::string::npos);
  EXPECT_EQ(m["first_period"], "2019-01-02");
  EXPECT_NE(html_.find("<dt>last period</dt><dd>" + m["last_period"].get<std::string>()),
            std::string::npos);
  EXPECT_NE(html_.find("<dt>rows recorded</dt><dd>1399 (model rows 1\u20131399)</dd>"),
            std::string::npos);
  // The spec text, escaped, inside a collapsible block.
  const std::size_t details = html_.find("<details class=\"spec\">");
  ASSERT_NE(details, std::string::npos);
  EXPECT_NE(html_.find("granger = { cause = [&quot;b&quot;], effect = [&quot;a&quot;] }", details),
            std::string::npos);
  for (const char* caution : {"not trading or policy advice", "Models fail",
                              "Validate a model spec by replay on your "
                              "own history",
                              "institution's model-risk rules"}) {
    EXPECT_NE(html_.find(caution), std::string::npos) << caution;
  }
}

TEST_F(ReportCli, EquationModelAndStdoutOptions) {
  ProcessResult r = Rimwatch({"report", "--db", db_, "--equation", "b", "--out", "-"});
  ASSERT_EQ(r.exit_code, 0) << r.err;
  const std::map<std::string, std::string> svgs = SvgById(r.out);
  for (const char* reg : {"const", "L1.a", "L1.b"}) {
    EXPECT_EQ(svgs.count(std::string("m1-coef-b-") + reg), 1u) << reg;
  }
  EXPECT_EQ(svgs.count("m1-coef-a-const"), 0u);

  r = Rimwatch({"report", "--db", db_, "--equation", "c", "--out", Tmp("c.html")});
  EXPECT_EQ(r.exit_code, 2);
  EXPECT_NE(r.err.find("--equation c: model 'lead' has no such variable; its variables: a, b"),
            std::string::npos)
      << r.err;
  EXPECT_FALSE(Exists(Tmp("c.html")));

  // A second model in the same log: both by default, one with --model.
  const std::string two_db = Tmp("two.sqlite");
  for (const char* suffix : {"", "-wal", "-shm"}) std::remove((two_db + suffix).c_str());
  ASSERT_EQ(Rimwatch({"replay", "--spec", spec_, "--csv", csv_, "--db", two_db}).exit_code, 0);
  std::string spec2 = kSpec;
  spec2.replace(spec2.find("\"lead\""), 6, "\"calm\"");
  spec2.replace(spec2.find("rows = 200\n[training]"), 10, "rows = 180");
  const std::string spec2_path = WriteTemp("calm.toml", spec2);
  ASSERT_EQ(Rimwatch({"replay", "--spec", spec2_path, "--csv", csv_, "--db", two_db}).exit_code, 0);
  r = Rimwatch({"report", "--db", two_db, "--out", "-"});
  ASSERT_EQ(r.exit_code, 0) << r.err;
  EXPECT_EQ(SvgById(r.out).count("m2-rho"), 1u);
  EXPECT_NE(r.out.find("<h2>calm</h2>"), std::string::npos);
  r = Rimwatch({"report", "--db", two_db, "--model", "calm", "--out", "-"});
  ASSERT_EQ(r.exit_code, 0) << r.err;
  EXPECT_EQ(SvgById(r.out).count("m2-rho"), 0u);
  EXPECT_NE(r.out.find("<h2>calm</h2>"), std::string::npos);
  EXPECT_EQ(r.out.find("<h2>lead</h2>"), std::string::npos);
}

TEST_F(ReportCli, ErrorsAreClearAndWriteNothing) {
  const std::string out = Tmp("never.html");
  std::remove(out.c_str());
  // Missing file.
  ProcessResult r = Rimwatch({"report", "--db", Tmp("missing.sqlite"), "--out", out});
  EXPECT_EQ(r.exit_code, 2);
  EXPECT_NE(r.err.find("missing.sqlite: no such file"), std::string::npos) << r.err;
  // Not SQLite at all.
  const std::string text = WriteTemp("text.sqlite", "period,a\n1,2\n");
  r = Rimwatch({"report", "--db", text, "--out", out});
  EXPECT_EQ(r.exit_code, 2);
  EXPECT_NE(r.err.find("is not a rimwatch log (not an SQLite database)"), std::string::npos)
      << r.err;
  // SQLite, but not a rimwatch log (no schema_version).
  const std::string other = Tmp("other.sqlite");
  std::remove(other.c_str());
  PythonSql(other, "CREATE TABLE t (x INTEGER);");
  r = Rimwatch({"report", "--db", other, "--out", out});
  EXPECT_EQ(r.exit_code, 2);
  EXPECT_NE(r.err.find("not a rimwatch store (it has no schema_version table)"), std::string::npos)
      << r.err;
  // A newer schema version than this build knows.
  const std::string newer = Tmp("newer.sqlite");
  std::ofstream(newer, std::ios::binary) << ReadWholeFile(db_);
  PythonSql(newer, "PRAGMA journal_mode = DELETE; UPDATE schema_version SET version = 99;");
  r = Rimwatch({"report", "--db", newer, "--out", out});
  EXPECT_EQ(r.exit_code, 2);
  EXPECT_NE(r.err.find("schema version 99, newer than this build knows"), std::string::npos)
      << r.err;
  // Unknown model: the message lists those there.
  r = Rimwatch({"report", "--db", db_, "--model", "nosuch", "--out", out});
  EXPECT_EQ(r.exit_code, 2);
  EXPECT_NE(r.err.find("no model 'nosuch' in " + db_ + "; it holds: lead"), std::string::npos)
      << r.err;
  // A model with no rows yet.
  const std::string empty = Tmp("empty.sqlite");
  std::ofstream(empty, std::ios::binary) << ReadWholeFile(db_);
  PythonSql(empty,
            "PRAGMA journal_mode = DELETE; DELETE FROM tests; DELETE FROM snapshots; DELETE FROM "
            "alerts;");
  r = Rimwatch({"report", "--db", empty, "--out", out});
  EXPECT_EQ(r.exit_code, 3);
  EXPECT_NE(r.err.find("no rows yet"), std::string::npos) << r.err;
  EXPECT_NE(r.err.find("model 'lead'"), std::string::npos) << r.err;
  // An output that cannot be written.
  r = Rimwatch({"report", "--db", db_, "--out", Tmp("no/such/dir/x.html")});
  EXPECT_EQ(r.exit_code, 2);
  EXPECT_NE(r.err.find("cannot be written"), std::string::npos) << r.err;
  // --db and --out are required.
  r = Rimwatch({"report", "--db", db_});
  EXPECT_EQ(r.exit_code, 2);
  EXPECT_NE(r.err.find("--out"), std::string::npos) << r.err;
  EXPECT_FALSE(Exists(out));
  // The log is read only: it is byte-identical after all of the above.
  const ProcessResult again = Rimwatch({"report", "--db", db_, "--out", "-"});
  EXPECT_EQ(again.out, html_);
}

TEST(ReportCliHelp, HelpHasAnExample) {
  const ProcessResult r = Rimwatch({"report", "--help"});
  EXPECT_EQ(r.exit_code, 0);
  EXPECT_NE(r.out.find("Example:"), std::string::npos) << r.out;
  EXPECT_NE(r.out.find("rimwatch report --db desk.sqlite"), std::string::npos) << r.out;
  EXPECT_NE(r.out.find("--equation"), std::string::npos);
  const ProcessResult top = Rimwatch({"--help"});
  EXPECT_NE(top.out.find("report"), std::string::npos);
}

// ---------------------------------------------------------------------------------------------
// Axis ticks (report_chart.h): nice steps are 1, 2 or 5 times a power of ten (Heckbert 1990,
// "Nice numbers for graph labels", Graphics Gems I; common practice), the smallest that fits.

bool IsNiceStep(double step) {
  const double e = std::floor(std::log10(step));
  const double m = step / std::pow(10.0, e);
  return std::fabs(m - 1) < 1e-9 || std::fabs(m - 2) < 1e-9 || std::fabs(m - 5) < 1e-9 ||
         std::fabs(m - 10) < 1e-9;
}
double NextSmallerNice(double step) {
  const double e = std::floor(std::log10(step) + 1e-12);
  const double m = std::round(step / std::pow(10.0, e));
  return m == 1 ? 0.5 * std::pow(10.0, e) : (m == 2 ? std::pow(10.0, e) : 2 * std::pow(10.0, e));
}

TEST(ReportTicks, WorkedCases) {
  using rimwatch::cli::NiceTicks;
  rimwatch::cli::Ticks t = NiceTicks(1, 1399, 8);
  EXPECT_DOUBLE_EQ(t.step, 200);
  EXPECT_EQ(t.values, (std::vector<double>{200, 400, 600, 800, 1000, 1200}));
  t = NiceTicks(0, 1, 6);
  EXPECT_DOUBLE_EQ(t.step, 0.2);
  EXPECT_EQ(t.decimals, 1);
  ASSERT_EQ(t.values.size(), 6u);
  EXPECT_EQ(rimwatch::cli::FormatTick(t.values[3], t.decimals), "0.6");
  double lo = 0.31, hi = 0.98;
  t = rimwatch::cli::LooseTicks(&lo, &hi, 6);
  EXPECT_DOUBLE_EQ(t.step, 0.2);
  EXPECT_DOUBLE_EQ(lo, 0.2);
  EXPECT_DOUBLE_EQ(hi, 1.0);
  EXPECT_EQ(rimwatch::cli::FormatTick(-1e-17, 2), "0.00");  // no "-0.00"
  EXPECT_EQ(rimwatch::cli::FormatTick(-0.0, 0), "0");
  EXPECT_EQ(rimwatch::cli::DecadeTicks(1e-7, 1, 7), (std::vector<double>{1e-6, 1e-4, 1e-2, 1}));
  EXPECT_EQ(rimwatch::cli::DecadeTicks(3e-3, 0.9, 7), (std::vector<double>{1e-3, 1e-2, 1e-1, 1}));
  // Degenerate ranges still give a tick.
  EXPECT_FALSE(NiceTicks(5, 5, 6).values.empty());
  EXPECT_FALSE(NiceTicks(0, 0, 6).values.empty());
}

TEST(ReportTicks, RandomRangesGetTheSmallestNiceStepThatFits) {
  std::mt19937_64 gen(7);
  std::uniform_real_distribution<double> exponent(-6, 6), unit(0, 1);
  for (int i = 0; i < 5000; ++i) {
    const double scale = std::pow(10.0, exponent(gen));
    const double lo = (unit(gen) - 0.5) * scale, hi = lo + unit(gen) * scale + 1e-300;
    const int max_ticks = 2 + static_cast<int>(unit(gen) * 10);
    const rimwatch::cli::Ticks t = rimwatch::cli::NiceTicks(lo, hi, max_ticks);
    ASSERT_TRUE(IsNiceStep(t.step)) << t.step;
    ASSERT_LE(static_cast<int>(t.values.size()), max_ticks) << lo << " " << hi;
    for (double v : t.values) {
      ASSERT_GE(v, lo - 1e-9 * scale);
      ASSERT_LE(v, hi + 1e-9 * scale);
    }
    // The next smaller nice step would not fit.
    const double s = NextSmallerNice(t.step);
    const double count = std::floor(hi / s + 1e-9) - std::ceil(lo / s - 1e-9) + 1;
    ASSERT_GT(count, max_ticks) << lo << " " << hi << " step " << t.step;
    // Loose: the widened domain covers the range and its ticks are its ends.
    double l = lo, h = hi;
    const rimwatch::cli::Ticks loose = rimwatch::cli::LooseTicks(&l, &h, max_ticks);
    ASSERT_LE(l, lo + 1e-12 * scale);
    ASSERT_GE(h, hi - 1e-12 * scale);
    ASSERT_LE(static_cast<int>(loose.values.size()), std::max(max_ticks, 3));
    ASSERT_DOUBLE_EQ(loose.values.front(), l);
    ASSERT_DOUBLE_EQ(loose.values.back(), h);
  }
}

}  // namespace
