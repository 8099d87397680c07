// `rimwatch demo` as a newcomer runs it, and the invented scenarios behind it.
//
// End to end: the demo (a real rimwatchd on ipc:// sockets, real SQLite) exits 0; the alerts it
// prints include a stability alert and the monitored restriction's alert after the desk's
// dynamics break and neither before it; its report exists; its alerts equal `rimwatch replay` of
// the CSV it wrote (live and offline run one engine), and equal the daemon's alert log read with
// Python's sqlite3 module (/usr/bin/python3, a reader this project did not write).
// Scenario: the generating coefficients' spectral radii against numpy, the breaks where the
// header says, the release calendar ordered, every revision after its first release.
#include <gtest/gtest.h>

#include <algorithm>
#include <cmath>
#include <filesystem>
#include <fstream>
#include <map>
#include <nlohmann/json.hpp>
#include <set>
#include <sstream>

#include "demo_scenario.h"
#include "run_process.h"

namespace {

using nlohmann::json;
using rimwatch::testing::ProcessResult;
using rimwatch::testing::ReadWholeFile;
using rimwatch::testing::RequiredEnv;
using rimwatch::testing::RunProcess;
namespace fs = std::filesystem;
namespace cli = rimwatch::cli;

ProcessResult Rimwatch(std::vector<std::string> args) {
  args.insert(args.begin(), RequiredEnv("RIMWATCH_BIN_DIR") + "/rimwatch");
  return RunProcess(args, ::testing::TempDir());
}

std::vector<json> JsonLines(const std::string& text) {
  std::vector<json> out;
  std::istringstream in(text);
  std::string line;
  while (std::getline(in, line)) {
    if (!line.empty()) out.push_back(json::parse(line));
  }
  return out;
}

fs::path FreshDir(const std::string& name) {
  const fs::path dir = fs::path(::testing::TempDir()) / ("demo_cli_test_" + name);
  fs::remove_all(dir);
  return dir;
}

// ---- the scenarios ----------------------------------------------------------------------------

TEST(DemoScenario, SpectralRadiiMatchNumpy) {
  // numpy.linalg.eigvals of the 6 x 6 companion matrices [[A1, A2], [I, 0]] of the coefficients
  // in demo_scenario.cc (numpy 1.24, Debian 12), largest modulus: 0.5984551118769899 (calm) and
  // 0.9703419903870787 (persistent). Reproduce with
  //   /usr/bin/python3 -c "import numpy as np; ...; print(max(abs(np.linalg.eigvals(F))))"
  EXPECT_NEAR(cli::DeskSpectralRadius(false), 0.5984551118769899, 1e-12);
  EXPECT_NEAR(cli::DeskSpectralRadius(true), 0.9703419903870787, 1e-12);
}

TEST(DemoScenario, DeskBarsAndBreaksAreWhereTheHeaderSays) {
  const cli::DeskScenario desk = cli::MakeDeskScenario();
  ASSERT_EQ(desk.periods.size(), static_cast<std::size_t>(cli::kDeskBars));
  ASSERT_EQ(desk.values.size(), desk.periods.size());
  EXPECT_EQ(desk.periods.front(), "2026-03-02T00:00:00Z");
  EXPECT_EQ(desk.periods[60], "2026-03-02T01:00:00Z");
  ASSERT_EQ(desk.breaks.size(), 2u);
  EXPECT_EQ(desk.breaks[0].row, cli::kDeskDynamicsBreak);
  EXPECT_EQ(desk.breaks[0].period, desk.periods[cli::kDeskDynamicsBreak - 1]);
  EXPECT_EQ(desk.breaks[1].row, cli::kDeskVarianceBreak);
  for (const auto& row : desk.values) {
    ASSERT_EQ(row.size(), 3u);
    for (double v : row) ASSERT_TRUE(std::isfinite(v));
  }
  // The innovations recovered with the true coefficients, e_t = y_t - Phi(t) [1; y_{t-1}; y_{t-2}],
  // have the covariance the header states: Omega before the variance break and 2 Omega after.
  // Each diagonal entry of a sample covariance of m Gaussian rows has relative s.d. sqrt(2/m)
  // (chi-squared with m degrees of freedom); the bands below are 4 s.d. wide (common practice).
  const Eigen::MatrixXd omega = cli::DeskErrorCovariance();
  auto innovation_variance = [&](int from, int to, int col) {  // bars from..to-1, 1-based
    double ss = 0;
    for (int t = from; t < to; ++t) {
      const Eigen::MatrixXd phi = cli::DeskCoefficients(t >= cli::kDeskDynamicsBreak);
      Eigen::VectorXd x(7);
      x(0) = 1.0;
      for (int j = 0; j < 3; ++j) {
        x(1 + j) = desk.values[t - 2][j];
        x(4 + j) = desk.values[t - 3][j];
      }
      const double e = desk.values[t - 1][col] - phi.row(col).dot(x);
      ss += e * e;
    }
    return ss / (to - from);
  };
  for (int col = 0; col < 3; ++col) {
    const double calm = innovation_variance(3, cli::kDeskDynamicsBreak, col);
    const double before =
        innovation_variance(cli::kDeskDynamicsBreak, cli::kDeskVarianceBreak, col);
    const double after = innovation_variance(cli::kDeskVarianceBreak, cli::kDeskBars + 1, col);
    EXPECT_NEAR(calm / omega(col, col), 1.0, 4 * std::sqrt(2.0 / 1197)) << col;
    EXPECT_NEAR(before / omega(col, col), 1.0, 4 * std::sqrt(2.0 / 1000)) << col;
    EXPECT_NEAR(after / omega(col, col), 2.0, 2 * 4 * std::sqrt(2.0 / 800)) << col;
  }
  // Deterministic: the same bars on every call.
  EXPECT_EQ(cli::DeskCsv(desk), cli::DeskCsv(cli::MakeDeskScenario()));
}

TEST(DemoScenario, NowcastReleasesFollowTheCalendar) {
  const cli::NowcastScenario now = cli::MakeNowcastScenario();
  ASSERT_EQ(now.months, cli::kNowcastMonths);
  std::map<std::pair<std::string, std::string>, std::string> first;  // (series, period) -> when
  int revisions = 0;
  for (std::size_t i = 0; i < now.releases.size(); ++i) {
    const cli::Release& r = now.releases[i];
    if (i > 0) {
      ASSERT_LE(now.releases[i - 1].released_at, r.released_at);
    }
    ASSERT_GT(r.value, 0.0);
    ASSERT_LT(r.period, r.released_at);  // published after the month began
    const auto key = std::make_pair(r.series, r.period);
    if (r.revision) {
      ++revisions;
      ASSERT_TRUE(first.count(key)) << r.series << " " << r.period;
      ASSERT_LT(first[key], r.released_at);
    } else {
      ASSERT_FALSE(first.count(key)) << "two first releases of " << r.series << " " << r.period;
      first[key] = r.released_at;
    }
  }
  EXPECT_EQ(first.size(), static_cast<std::size_t>(4 * now.months));
  EXPECT_EQ(revisions, now.revisions);
  // Every third output month and every fourth orders month: 100 + 75.
  EXPECT_EQ(revisions, 100 + 75);
}

// ---- end to end -------------------------------------------------------------------------------

struct DemoRun {
  ProcessResult result;
  std::vector<json> alerts;
  json summary;
};

DemoRun RunJsonDemo(const fs::path& dir) {
  DemoRun run;
  run.result = Rimwatch({"demo", "--rate", "0", "--json", "--dir", dir.string()});
  if (run.result.exit_code != 0) return run;
  for (json& line : JsonLines(run.result.out)) {
    if (line.contains("alert")) run.alerts.push_back(line["alert"]);
    if (line.contains("summary")) run.summary = line["summary"];
  }
  return run;
}

int BarOf(const std::string& period) {  // "2026-03-02THH:MM:00Z" from bar 1 at midnight
  const int day = std::stoi(period.substr(8, 2)) - 2;
  const int hour = std::stoi(period.substr(11, 2));
  const int minute = std::stoi(period.substr(14, 2));
  return day * 1440 + hour * 60 + minute + 1;
}

TEST(DemoCli, AlertsFollowTheBreaksAndEqualReplayAndTheLog) {
  const fs::path dir = FreshDir("json");
  const DemoRun run = RunJsonDemo(dir);
  ASSERT_EQ(run.result.exit_code, 0)
      << run.result.err << ReadWholeFile((dir / "rimwatchd.log").string());
  ASSERT_TRUE(run.summary.is_object()) << run.result.out;

  // Stability and the restriction raise after the dynamics break, and neither before it.
  int stability_after = 0, restriction_after = 0;
  const std::string restriction = "restriction.birch-does-not-lead-alder";
  for (const json& e : run.alerts) {
    if (e["model"] != "desk") continue;
    const std::string monitor = e["monitor"];
    const int bar = BarOf(e["period"]);
    // The daemon numbers model rows, which start after the first p = 2 bars (the presample of
    // the lags); replay numbers CSV data lines.
    EXPECT_EQ(bar - 2, e["row"].get<int>()) << e.dump();
    if (monitor != "stability" && monitor != restriction) continue;
    EXPECT_GE(bar, cli::kDeskDynamicsBreak) << "before the break: " << e.dump();
    if (e["transition"] == "raised" && bar >= cli::kDeskDynamicsBreak) {
      (monitor == "stability" ? stability_after : restriction_after)++;
    }
  }
  EXPECT_GE(stability_after, 1);
  EXPECT_GE(restriction_after, 1);
  EXPECT_TRUE(run.summary["desk_alerts_before_first_break"].empty())
      << run.summary["desk_alerts_before_first_break"].dump();
  ASSERT_EQ(run.summary["breaks"].size(), 2u);
  EXPECT_EQ(run.summary["breaks"][0]["bar"], cli::kDeskDynamicsBreak);
  EXPECT_EQ(run.summary["nowcast"]["revisions"], 175);

  // The models' state at the end.
  ASSERT_EQ(run.summary["models"].size(), 2u);
  EXPECT_EQ(run.summary["models"][0]["rows"], cli::kDeskBars - 2);  // model rows, see above
  EXPECT_EQ(run.summary["models"][0]["last_period"], "2026-03-04T01:59:00Z");
  EXPECT_EQ(run.summary["models"][1]["last_period"], "2025-12-01");

  // The files a user is pointed at.
  const std::string report = ReadWholeFile(run.summary["report"].get<std::string>());
  EXPECT_NE(report.find("<svg"), std::string::npos);
  EXPECT_NE(report.find("not trading or policy advice"), std::string::npos);
  EXPECT_TRUE(fs::exists(dir / "desk.toml"));
  EXPECT_TRUE(fs::exists(dir / "nowcast_releases.csv"));

  // Live = offline: replay the CSV the demo wrote through `rimwatch replay`.
  const ProcessResult replay = Rimwatch({"replay", "--spec", (dir / "desk.toml").string(), "--csv",
                                         (dir / "desk.csv").string(), "--json"});
  ASSERT_EQ(replay.exit_code, 0) << replay.err;
  std::vector<std::string> live, offline;
  auto key = [](const json& e) {
    return e["period"].get<std::string>() + " " + e["monitor"].get<std::string>() + " " +
           e["transition"].get<std::string>() + " " + e["level"].get<std::string>();
  };
  for (const json& e : run.alerts) {
    if (e["model"] == "desk") live.push_back(key(e));
  }
  for (const json& line : JsonLines(replay.out)) {
    if (!line.contains("summary")) offline.push_back(key(line));
  }
  EXPECT_EQ(live, offline);

  // The daemon's alert log (read with Python's sqlite3) holds exactly the published events.
  const std::string script =
      "import sqlite3, sys\n"
      "db = sqlite3.connect('file:' + sys.argv[1] + '?mode=ro', uri=True)\n"
      "print(db.execute('select count(*) from alerts').fetchone()[0])\n";
  const fs::path py = dir / "count_alerts.py";
  std::ofstream(py) << script;
  const ProcessResult count =
      RunProcess({"/usr/bin/python3", py.string(), run.summary["database"].get<std::string>()},
                 ::testing::TempDir());
  ASSERT_EQ(count.exit_code, 0) << count.err;
  EXPECT_EQ(std::stoul(count.out), run.alerts.size());
}

TEST(DemoCli, ReadableOutputNamesTheBreaksTheReportAndTheCautions) {
  const fs::path dir = FreshDir("text");
  const ProcessResult r = Rimwatch({"demo", "--rate", "0", "--dir", dir.string()});
  ASSERT_EQ(r.exit_code, 0) << r.err;
  for (const char* text : {"Where the desk's breaks really were", "bar 1200", "bar 2200",
                           "stability", "restriction.birch-does-not-lead-alder",
                           "Report:", "rimwatch replay --spec", "not trading or policy advice"}) {
    EXPECT_NE(r.out.find(text), std::string::npos) << text << "\n" << r.out;
  }
  EXPECT_EQ(r.out.find("\033["), std::string::npos) << "colour on a pipe";
}

TEST(DemoCli, RefusesADirectoryThatIsNotEmptyAndABadRate) {
  const fs::path dir = FreshDir("busy");
  fs::create_directories(dir);
  std::ofstream(dir / "keep.txt") << "mine\n";
  ProcessResult r = Rimwatch({"demo", "--dir", dir.string()});
  EXPECT_EQ(r.exit_code, 2);
  EXPECT_NE(r.err.find("not an empty directory"), std::string::npos) << r.err;
  EXPECT_EQ(ReadWholeFile((dir / "keep.txt").string()), "mine\n");
  const fs::path deep = FreshDir("deep") / std::string(100, 'd');
  r = Rimwatch({"demo", "--dir", deep.string()});
  EXPECT_EQ(r.exit_code, 2);
  EXPECT_NE(r.err.find("too long for an ipc:// socket"), std::string::npos) << r.err;
  EXPECT_FALSE(fs::exists(deep)) << "nothing is created on a refusal";
  r = Rimwatch({"demo", "--rate", "-1", "--dir", FreshDir("rate").string()});
  EXPECT_EQ(r.exit_code, 2);
  r = Rimwatch({"demo", "--daemon", "/nonexistent/rimwatchd", "--dir", FreshDir("nod").string()});
  EXPECT_EQ(r.exit_code, 2);
  EXPECT_NE(r.err.find("no rimwatchd"), std::string::npos) << r.err;
}

}  // namespace
