// `rimwatch replay` run as a user runs it: its final state equals `rimwatch fit` on the same rows
// (one engine, one code path), its events are JSON lines, and bad input is refused clearly.
#include <gtest/gtest.h>

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

}  // namespace
