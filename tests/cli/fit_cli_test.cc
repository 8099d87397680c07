// `rimwatch fit` run as a user runs it: the built binary (RIMWATCH_BIN) on the bundled example
// and on small files written here. Checks the JSON contract (schemas/fit.schema.json), that its
// numbers are exactly those of a direct FitVar call, the text report, the exit codes and messages.
#include <gtest/gtest.h>

#include <Eigen/Core>
#include <bit>
#include <cstdint>
#include <cstdlib>
#include <fstream>
#include <nlohmann/json.hpp>
#include <random>
#include <sstream>
#include <string>
#include <vector>

#include "rimwatch/engine/var_fit.h"
#include "run_process.h"

namespace rimwatch {
namespace {

using nlohmann::json;
using testing::ProcessResult;
using testing::RequiredEnv;
using testing::RunProcess;

// The sentence the brief requires at the end of every readable report.
constexpr const char* kCaution =
    "statistical output is evidence, not trading or policy advice; validate on your own history "
    "before acting";

std::string Bin() { return RequiredEnv("RIMWATCH_BIN"); }
std::string SourceDir() { return RequiredEnv("RIMWATCH_SOURCE_DIR"); }
std::string Example() { return SourceDir() + "/clients/examples/desk_minutes.csv"; }

ProcessResult Rimwatch(std::vector<std::string> args) {
  args.insert(args.begin(), Bin());
  return RunProcess(args, ::testing::TempDir());
}

ProcessResult Fit(std::vector<std::string> args) {
  args.insert(args.begin(), "fit");
  return Rimwatch(std::move(args));
}

std::string WriteTemp(const std::string& name, const std::string& text) {
  const std::string path = ::testing::TempDir() + "/fit_cli_test_" + name + ".csv";
  std::ofstream(path, std::ios::binary) << text;
  return path;
}

// ---- an independent reader for the well-formed test files: '#' lines skipped, header, then
// comma-separated decimals parsed by std::strtod (correctly rounded in glibc).
struct Data {
  std::vector<std::string> names;
  std::vector<std::string> periods;
  Eigen::MatrixXd values;
};

Data ReadPlainCsv(const std::string& path) {
  std::ifstream in(path);
  std::string line;
  Data d;
  std::vector<std::vector<double>> rows;
  bool header = true, period = false;
  while (std::getline(in, line)) {
    if (line.empty() || line[0] == '#') continue;
    std::stringstream fields(line);
    std::string f;
    std::vector<double> row;
    for (int c = 0; std::getline(fields, f, ','); ++c) {
      if (header) {
        if (c == 0 && f == "period")
          period = true;
        else
          d.names.push_back(f);
      } else if (c == 0 && period) {
        d.periods.push_back(f);
      } else {
        row.push_back(std::strtod(f.c_str(), nullptr));
      }
    }
    if (!header) rows.push_back(row);
    header = false;
  }
  d.values.resize(static_cast<Eigen::Index>(rows.size()),
                  static_cast<Eigen::Index>(d.names.size()));
  for (std::size_t r = 0; r < rows.size(); ++r) {
    for (std::size_t c = 0; c < rows[r].size(); ++c) {
      d.values(static_cast<Eigen::Index>(r), static_cast<Eigen::Index>(c)) = rows[r][c];
    }
  }
  return d;
}

// ---- shape checks

// A subset of JSON Schema, enough for schemas/fit.schema.json: type, required, properties,
// additionalProperties, items, $ref into #/$defs, enum, const, minItems. (A full validator runs in
// the Python test beside this one.)
bool TypeMatches(const json& v, const std::string& type) {
  if (type == "object") return v.is_object();
  if (type == "array") return v.is_array();
  if (type == "string") return v.is_string();
  if (type == "integer") return v.is_number_integer();
  if (type == "number") return v.is_number();
  if (type == "null") return v.is_null();
  if (type == "boolean") return v.is_boolean();
  return false;
}

void CheckAgainstSchema(const json& root, const json& schema, const json& v,
                        const std::string& at) {
  if (schema.contains("$ref")) {
    const std::string ref = schema["$ref"];
    ASSERT_EQ(ref.rfind("#/$defs/", 0), 0u) << ref;
    CheckAgainstSchema(root, root["$defs"][ref.substr(8)], v, at);
  }
  if (schema.contains("type")) {
    const json types = schema["type"].is_array() ? schema["type"] : json::array({schema["type"]});
    bool any = false;
    for (const json& t : types) any = any || TypeMatches(v, t.get<std::string>());
    EXPECT_TRUE(any) << at << " = " << v.dump() << " is not of type " << schema["type"].dump();
  }
  if (schema.contains("enum")) {
    EXPECT_NE(std::find(schema["enum"].begin(), schema["enum"].end(), v), schema["enum"].end())
        << at << " = " << v.dump();
  }
  if (schema.contains("const")) {
    EXPECT_EQ(v, schema["const"]) << at;
  }
  if (v.is_object()) {
    for (const json& key : schema.value("required", json::array())) {
      EXPECT_TRUE(v.contains(key.get<std::string>())) << at << " lacks required key " << key;
    }
    const json props = schema.value("properties", json::object());
    for (const auto& [key, value] : v.items()) {
      if (props.contains(key)) {
        CheckAgainstSchema(root, props[key], value, at + "." + key);
      } else if (schema.contains("additionalProperties")) {
        const json& extra = schema["additionalProperties"];
        if (extra.is_boolean()) {
          EXPECT_TRUE(extra.get<bool>()) << at << " has unexpected key " << key;
        } else {
          CheckAgainstSchema(root, extra, value, at + "." + key);
        }
      }
    }
  }
  if (v.is_array()) {
    if (schema.contains("minItems")) {
      EXPECT_GE(v.size(), schema["minItems"].get<std::size_t>()) << at;
    }
    if (schema.contains("items")) {
      for (std::size_t i = 0; i < v.size(); ++i) {
        CheckAgainstSchema(root, schema["items"], v[i], at + "[" + std::to_string(i) + "]");
      }
    }
  }
}

json LoadSchema() {
  std::ifstream in(SourceDir() + "/schemas/fit.schema.json");
  return json::parse(in);
}

void ExpectSquare(const json& m, std::size_t n, const std::string& what) {
  ASSERT_TRUE(m.is_array()) << what;
  ASSERT_EQ(m.size(), n) << what;
  for (const json& row : m) {
    ASSERT_TRUE(row.is_array()) << what;
    ASSERT_EQ(row.size(), n) << what;
    for (const json& x : row) EXPECT_TRUE(x.is_number_float()) << what;
  }
}

TEST(FitCliJson, ExampleHasEveryKeyWithTheRightTypesAndShapes) {
  const ProcessResult r = Fit({"--csv", Example(), "--lags", "2", "--granger", "beta:alpha",
                               "--exclude-lag", "2", "--criteria", "4", "--json"});
  ASSERT_EQ(r.exit_code, 0) << r.err;
  EXPECT_EQ(r.err, "");
  const json doc = json::parse(r.out);  // throws unless stdout is exactly one JSON document
  const json schema = LoadSchema();
  CheckAgainstSchema(schema, schema, doc, "$");

  const std::size_t n = 3, p = 2, k = 1 + n * p;
  EXPECT_EQ(doc["variables"], json::array({"alpha", "beta", "gamma"}));
  EXPECT_EQ(doc["sample"]["rows"], 598);
  EXPECT_EQ(doc["sample"]["first_period"], "3");  // a period column: labels stay text
  EXPECT_EQ(doc["sample"]["last_period"], "600");
  ASSERT_EQ(doc["coefficients"].size(), n * k);
  EXPECT_EQ(doc["coefficients"][0]["term"], "const");
  EXPECT_TRUE(doc["coefficients"][0]["variable"].is_null());
  EXPECT_TRUE(doc["coefficients"][0]["lag"].is_null());
  EXPECT_EQ(doc["coefficients"][k + 1]["equation"], "beta");
  EXPECT_EQ(doc["coefficients"][k + 1]["variable"], "alpha");
  EXPECT_EQ(doc["coefficients"][k + 1]["lag"], 1);
  ExpectSquare(doc["sigma"], n, "sigma");
  ExpectSquare(doc["sigma_ml"], n, "sigma_ml");
  ASSERT_EQ(doc["eigenvalues"].size(), n * p);
  for (std::size_t i = 1; i < doc["eigenvalues"].size(); ++i) {
    EXPECT_GE(doc["eigenvalues"][i - 1]["modulus"].get<double>(),
              doc["eigenvalues"][i]["modulus"].get<double>());
  }
  EXPECT_EQ(doc["spectral_radius"]["value"], doc["eigenvalues"][0]["modulus"]);
  EXPECT_TRUE(doc["spectral_radius"]["std_error"].is_number_float());
  EXPECT_FALSE(doc["spectral_radius"].contains("std_error_unavailable"));
  EXPECT_EQ(doc["covariance"]["kind"], "HC3");
  EXPECT_EQ(doc["covariance"]["rows_used"], 598);
  EXPECT_FALSE(doc["covariance"].contains("hac_lags"));
  ASSERT_EQ(doc["tests"].size(), 2u);
  EXPECT_EQ(doc["tests"][0]["name"], "exclude_lag_2");
  EXPECT_EQ(doc["tests"][0]["df"], n * n);
  EXPECT_EQ(doc["tests"][1]["name"], "granger_beta_to_alpha");
  EXPECT_EQ(doc["tests"][1]["df"], p);
  ASSERT_EQ(doc["criteria"].size(), 5u);
  for (int q = 0; q <= 4; ++q) EXPECT_TRUE(doc["criteria"].contains(std::to_string(q))) << q;
}

TEST(FitCliJson, ExampleSpectralRadiusIsNearTheGeneratorValue) {
  // make_desk_minutes.py simulates 600 rows from a VAR(2) whose spectral radius is 0.598455
  // (printed by the generator). By the delta method the estimate is approximately normal around
  // it with the reported SE (from memory; the design note's Stability section), so 4 SE is a
  // loose band (common practice) that still catches a gross error.
  const ProcessResult r = Fit({"--csv", Example(), "--lags", "2", "--json"});
  ASSERT_EQ(r.exit_code, 0) << r.err;
  const json doc = json::parse(r.out);
  const double rho = doc["spectral_radius"]["value"], se = doc["spectral_radius"]["std_error"];
  EXPECT_GT(se, 0.0);
  EXPECT_LT(std::abs(rho - 0.598455), 4.0 * se) << rho << " +- " << se;
}

TEST(FitCliJson, WithoutPeriodColumnPeriodsAreRowNumbers) {
  std::string text = "u,v\n";
  std::mt19937 gen(7);
  for (int i = 0; i < 40; ++i) {
    text += std::to_string(static_cast<int>(gen() % 1000)) + "," +
            std::to_string(static_cast<int>(gen() % 1000)) + "\n";
  }
  const ProcessResult r = Fit({"--csv", WriteTemp("noperiod", text), "--lags", "3", "--json"});
  ASSERT_EQ(r.exit_code, 0) << r.err;
  const json doc = json::parse(r.out);
  EXPECT_EQ(doc["sample"]["first_period"], 4);
  EXPECT_EQ(doc["sample"]["last_period"], 40);
  EXPECT_EQ(doc["sample"]["rows"], 37);
}

// ---- numbers: the JSON must carry FitVar's doubles bit for bit

void ExpectSameBits(double expected, const json& got, const std::string& what) {
  ASSERT_TRUE(got.is_number()) << what << " = " << got.dump();
  const double g = got.get<double>();
  EXPECT_EQ(std::bit_cast<std::uint64_t>(expected), std::bit_cast<std::uint64_t>(g))
      << what << ": FitVar " << expected << ", JSON " << g;
}

void ExpectMatrixBits(const Eigen::MatrixXd& m, const json& got, const std::string& what) {
  ASSERT_EQ(got.size(), static_cast<std::size_t>(m.rows())) << what;
  for (Eigen::Index i = 0; i < m.rows(); ++i) {
    for (Eigen::Index j = 0; j < m.cols(); ++j) {
      ExpectSameBits(m(i, j), got[i][j],
                     what + "(" + std::to_string(i) + "," + std::to_string(j) + ")");
    }
  }
}

void ExpectCoefficients(const FitReport& rep, const json& doc) {
  const VarSpec& spec = rep.spec;
  ASSERT_EQ(doc["coefficients"].size(), static_cast<std::size_t>(spec.n() * spec.k()));
  for (int eq = 0; eq < spec.n(); ++eq) {
    for (int j = 0; j < spec.k(); ++j) {
      const json& c = doc["coefficients"][eq * spec.k() + j];
      const std::string term = c["term"];
      const std::string name = term == "lag" ? "L" + std::to_string(c["lag"].get<int>()) + "." +
                                                   c["variable"].get<std::string>()
                                             : term;
      EXPECT_EQ(c["equation"], spec.variables[eq]);
      EXPECT_EQ(name, spec.RegressorName(j));
      ExpectSameBits(rep.phi(eq, j), c["estimate"], "estimate " + name);
      ExpectSameBits(rep.std_error(eq, j), c["std_error"], "std_error " + name);
    }
  }
}

void ExpectTests(const FitReport& rep, const json& doc) {
  ASSERT_EQ(doc["tests"].size(), rep.tests.size());
  for (std::size_t i = 0; i < rep.tests.size(); ++i) {
    const json& t = doc["tests"][i];
    const WaldResult& w = rep.tests[i].result;
    ASSERT_TRUE(rep.tests[i].status.ok()) << rep.tests[i].status.ToString();
    EXPECT_EQ(t["name"], rep.tests[i].name);
    ExpectSameBits(w.statistic, t["statistic"], t["name"].get<std::string>() + " W");
    EXPECT_EQ(t["df"], w.df);
    ExpectSameBits(w.p_value, t["p_value"], "p_value");
    ExpectSameBits(w.f_statistic, t["f_statistic"], "f_statistic");
    EXPECT_EQ(t["f_df1"], w.f_df1);
    ExpectSameBits(w.f_df2, t["f_df2"], "f_df2");
    ExpectSameBits(w.f_p_value, t["f_p_value"], "f_p_value");
  }
}

void ExpectSpectrum(const FitReport& rep, const json& doc) {
  ASSERT_EQ(doc["eigenvalues"].size(), rep.eigenvalues.size());
  for (std::size_t i = 0; i < rep.eigenvalues.size(); ++i) {
    ExpectSameBits(rep.eigenvalues[i].real(), doc["eigenvalues"][i]["re"], "re");
    ExpectSameBits(rep.eigenvalues[i].imag(), doc["eigenvalues"][i]["im"], "im");
    ExpectSameBits(std::abs(rep.eigenvalues[i]), doc["eigenvalues"][i]["modulus"], "modulus");
  }
  ExpectSameBits(rep.spectral_radius, doc["spectral_radius"]["value"], "spectral radius");
  ASSERT_TRUE(rep.spectral_radius_se_status.ok());
  ExpectSameBits(rep.spectral_radius_se, doc["spectral_radius"]["std_error"], "rho SE");
}

void ExpectCriteria(const FitReport& rep, const json& doc) {
  ASSERT_EQ(doc["criteria"].size(), rep.criteria.size());
  for (const LagCriteria& c : rep.criteria) {
    const json& row = doc["criteria"][std::to_string(c.lags)];
    ExpectSameBits(c.aic, row["aic"], "aic");
    ExpectSameBits(c.hq, row["hq"], "hq");
    ExpectSameBits(c.bic, row["bic"], "bic");
    ExpectSameBits(c.fpe, row["fpe"], "fpe");
  }
}

struct NumbersCase {
  const char* label;
  std::vector<std::string> args;  // after --csv FILE
  FitOptions options;             // the same request for FitVar
};

FitOptions Options(int lags, Deterministic d, CovarianceKind kind, int hac, std::vector<int> excl,
                   std::vector<GrangerRequest> granger, int pmax) {
  FitOptions o;
  o.lags = lags;
  o.deterministic = d;
  o.covariance.kind = kind;
  o.covariance.hac_lags = hac;
  o.exclude_lags = std::move(excl);
  o.granger = std::move(granger);
  o.criteria_pmax = pmax;
  return o;
}

void PrintTo(const NumbersCase& c, std::ostream* os) { *os << c.label; }

class FitCliNumbers : public ::testing::TestWithParam<NumbersCase> {};

TEST_P(FitCliNumbers, JsonEqualsDirectFitVarToTheLastBit) {
  const NumbersCase& c = GetParam();
  std::vector<std::string> args = {"--csv", Example(), "--json"};
  args.insert(args.end(), c.args.begin(), c.args.end());
  const ProcessResult r = Fit(args);
  ASSERT_EQ(r.exit_code, 0) << r.err;
  const json doc = json::parse(r.out);

  const Data data = ReadPlainCsv(Example());
  FitReport rep;
  const Status st = FitVar(data.values, data.names, c.options, &rep);
  ASSERT_TRUE(st.ok()) << st.ToString();
  EXPECT_EQ(doc["sample"]["rows"], rep.rows);
  EXPECT_EQ(doc["sample"]["first_period"], data.periods[static_cast<std::size_t>(rep.first_row)]);
  EXPECT_EQ(doc["sample"]["last_period"], data.periods.back());
  ExpectCoefficients(rep, doc);
  ExpectMatrixBits(rep.sigma, doc["sigma"], "sigma");
  ExpectMatrixBits(rep.sigma_ml, doc["sigma_ml"], "sigma_ml");
  ExpectSpectrum(rep, doc);
  EXPECT_EQ(doc["covariance"]["kind"], CovarianceKindName(c.options.covariance.kind));
  EXPECT_EQ(doc["covariance"]["rows_used"], rep.covariance_info.rows_used);
  if (c.options.covariance.kind == CovarianceKind::kHAC) {
    EXPECT_EQ(doc["covariance"]["hac_lags"], rep.covariance_info.hac_lags);
  }
  ExpectTests(rep, doc);
  if (c.options.criteria_pmax >= 0) ExpectCriteria(rep, doc);
}

INSTANTIATE_TEST_SUITE_P(
    Cases, FitCliNumbers,
    ::testing::Values(
        NumbersCase{
            "readme_command",
            {"--lags", "2", "--granger", "beta:alpha", "--exclude-lag", "2", "--criteria", "4"},
            Options(2, Deterministic::kConstant, CovarianceKind::kHC3, -1, {2},
                    {{{"beta"}, {"alpha"}}}, 4)},
        NumbersCase{
            "hac_trend_groups",
            {"--lags", "1", "--deterministic", "trend", "--covariance", "HAC", "--hac-lags", "3",
             "--granger", "alpha:beta,gamma", "--granger", "beta,gamma:alpha", "--criteria", "2"},
            Options(1, Deterministic::kTrend, CovarianceKind::kHAC, 3, {},
                    {{{"alpha"}, {"beta", "gamma"}}, {{"beta", "gamma"}, {"alpha"}}}, 2)},
        NumbersCase{"hac_rule_of_thumb",
                    {"--lags", "2", "--covariance", "HAC", "--exclude-lag", "1"},
                    Options(2, Deterministic::kConstant, CovarianceKind::kHAC, -1, {1}, {}, -1)},
        NumbersCase{
            "classical_none",
            {"--lags", "3", "--deterministic", "none", "--covariance", "classical", "--exclude-lag",
             "3", "--exclude-lag", "1", "--criteria", "3"},
            Options(3, Deterministic::kNone, CovarianceKind::kClassical, -1, {3, 1}, {}, 3)},
        NumbersCase{"hc1",
                    {"--lags", "1", "--covariance", "HC1"},
                    Options(1, Deterministic::kConstant, CovarianceKind::kHC1, -1, {}, {}, -1)}),
    [](const ::testing::TestParamInfo<NumbersCase>& p) { return std::string(p.param.label); });

// ---- the readable report

TEST(FitCliText, ReportRunsAndEndsWithTheCaution) {
  const ProcessResult r = Fit({"--csv", Example(), "--lags", "2", "--granger", "beta:alpha",
                               "--exclude-lag", "2", "--criteria", "4"});
  ASSERT_EQ(r.exit_code, 0) << r.err;
  EXPECT_EQ(r.err, "");
  const std::string& out = r.out;
  const std::size_t caution = out.find(kCaution);
  ASSERT_NE(caution, std::string::npos) << out;
  EXPECT_EQ(out.find('\n', caution), out.size() - 1) << "the caution is not the last line";
  for (const char* part : {"alpha", "beta", "gamma", "spectral radius", "exclude_lag_2",
                           "granger_beta_to_alpha", "AIC", "FPE"}) {
    EXPECT_NE(out.find(part), std::string::npos) << part;
  }
  // One '*' per criterion column marks its minimum (4 columns, no ties on this data).
  const std::string criteria = out.substr(out.find("Lag-order criteria"));
  const std::string table = criteria.substr(criteria.find('\n'));
  EXPECT_EQ(std::count(table.begin(), table.end(), '*'), 4) << criteria;

  // The report's spectral radius is the JSON one, rounded for display.
  const ProcessResult j = Fit({"--csv", Example(), "--lags", "2", "--json"});
  ASSERT_EQ(j.exit_code, 0);
  char rho[64];
  std::snprintf(rho, sizeof rho, "spectral radius %.6f",
                json::parse(j.out)["spectral_radius"]["value"].get<double>());
  EXPECT_NE(out.find(rho), std::string::npos) << rho;
}

TEST(FitCliText, HelpVersionAndSubcommandList) {
  const ProcessResult top = Rimwatch({"--help"});
  EXPECT_EQ(top.exit_code, 0);
  EXPECT_NE(top.out.find("fit"), std::string::npos);
  EXPECT_NE(top.out.find("Exit codes"), std::string::npos);
  const ProcessResult fit = Fit({"--help"});
  EXPECT_EQ(fit.exit_code, 0);
  for (const char* part :
       {"--csv", "--lags", "--granger", "--exclude-lag", "--criteria", "--hac-lags", "--json",
        "'#'", "Example", "desk_minutes.csv", "Exit codes", "  3  "}) {
    EXPECT_NE(fit.out.find(part), std::string::npos) << part;
  }
  const ProcessResult version = Rimwatch({"--version"});
  EXPECT_EQ(version.exit_code, 0);
  EXPECT_EQ(version.out.rfind("rimwatch ", 0), 0u) << version.out;
}

// ---- bad input: exit 2, nothing on stdout, the problem on stderr

struct BadInputCase {
  const char* label;
  const char* csv;  // nullptr: the bundled example
  std::vector<std::string> args;
  int line;             // > 0: stderr starts with FILE:LINE:; 0: an option message
  const char* message;  // a fragment of stderr
};

void PrintTo(const BadInputCase& c, std::ostream* os) { *os << c.label; }

class FitCliBadInput : public ::testing::TestWithParam<BadInputCase> {};

TEST_P(FitCliBadInput, ExitTwoNamesTheProblemAndPrintsNothing) {
  const BadInputCase& c = GetParam();
  const std::string path = c.csv ? WriteTemp(c.label, c.csv) : Example();
  std::vector<std::string> args = {"--csv", path};
  args.insert(args.end(), c.args.begin(), c.args.end());
  const ProcessResult r = Fit(args);
  EXPECT_EQ(r.exit_code, 2) << r.err;
  EXPECT_EQ(r.out, "");
  if (c.line > 0) {
    const std::string prefix = path + ":" + std::to_string(c.line) + ": ";
    EXPECT_EQ(r.err.rfind(prefix, 0), 0u) << "expected " << prefix << "\ngot " << r.err;
  }
  EXPECT_NE(r.err.find(c.message), std::string::npos) << r.err;
}

INSTANTIATE_TEST_SUITE_P(
    Csv, FitCliBadInput,
    ::testing::Values(
        BadInputCase{"ragged", "a,b\n1,2\n3,4,5\n", {"--lags", "1"}, 3, "ragged line"},
        BadInputCase{"non_number", "a,b\n1,2\n3,four\n", {"--lags", "1"}, 3, "'four'"},
        BadInputCase{"empty", "", {"--lags", "1"}, 1, "empty file"},
        BadInputCase{"missing_header", "1,2\n3,4\n", {"--lags", "1"}, 1, "missing header"},
        BadInputCase{"non_finite", "# c\na,b\n1,2\n3,inf\n", {"--lags", "1"}, 4, "'inf'"},
        BadInputCase{"nan", "a,b\n1,NaN\n", {"--lags", "1"}, 2, "'NaN'"},
        BadInputCase{"duplicate", "a,b,a\n1,2,3\n", {"--lags", "1"}, 1, "duplicate variable"},
        BadInputCase{"quoted", "a,b\n\"1\",2\n", {"--lags", "1"}, 2, "quoted fields"},
        BadInputCase{"too_few_rows",
                     "a,b\n1,2\n3,4\n5,6\n6,1\n\n",
                     {"--lags", "1"},
                     5,
                     "too few for lag order 1"},
        BadInputCase{"criteria_too_long",
                     "a\n1\n2\n4\n3\n5\n2\n",
                     {"--lags", "1", "--criteria", "3"},
                     7,
                     "--criteria 3"}),
    [](const ::testing::TestParamInfo<BadInputCase>& p) { return std::string(p.param.label); });

INSTANTIATE_TEST_SUITE_P(
    Options, FitCliBadInput,
    ::testing::Values(
        BadInputCase{"granger_unknown",
                     nullptr,
                     {"--lags", "2", "--granger", "beta:zeta"},
                     5,
                     "no variable 'zeta'"},
        BadInputCase{
            "granger_no_colon", nullptr, {"--lags", "2", "--granger", "beta"}, 0, "CAUSE:EFFECT"},
        BadInputCase{"granger_overlap",
                     nullptr,
                     {"--lags", "2", "--granger", "beta,alpha:alpha"},
                     0,
                     "both a cause and an effect"},
        BadInputCase{"granger_empty", nullptr, {"--lags", "2", "--granger", ":alpha"}, 0, "empty"},
        BadInputCase{"lags_zero", nullptr, {"--lags", "0"}, 0, "--lags"},
        BadInputCase{"lags_huge", nullptr, {"--lags", "2000000000"}, 0, "--lags 2000000000"},
        BadInputCase{"lags_text", nullptr, {"--lags", "two"}, 0, "--lags"},
        BadInputCase{"exclude_lag_range",
                     nullptr,
                     {"--lags", "2", "--exclude-lag", "3"},
                     0,
                     "--exclude-lag 3"},
        BadInputCase{"covariance_unknown",
                     nullptr,
                     {"--lags", "2", "--covariance", "HC9"},
                     0,
                     "--covariance"},
        BadInputCase{"deterministic_unknown",
                     nullptr,
                     {"--lags", "2", "--deterministic", "cubic"},
                     0,
                     "--deterministic"},
        BadInputCase{
            "hac_lags_without_hac", nullptr, {"--lags", "2", "--hac-lags", "4"}, 0, "--hac-lags"},
        BadInputCase{"hac_lags_negative",
                     nullptr,
                     {"--lags", "2", "--covariance", "HAC", "--hac-lags", "-2"},
                     0,
                     "--hac-lags"},
        BadInputCase{
            "criteria_negative", nullptr, {"--lags", "2", "--criteria", "-1"}, 0, "--criteria"},
        BadInputCase{"unknown_option", nullptr, {"--lags", "2", "--bogus"}, 0, "--bogus"}),
    [](const ::testing::TestParamInfo<BadInputCase>& p) { return std::string(p.param.label); });

TEST(FitCliBadInputTop, MissingFileIsExitTwoNamingTheFile) {
  const ProcessResult r = Fit({"--csv", "/nonexistent/x.csv", "--lags", "1"});
  EXPECT_EQ(r.exit_code, 2);
  EXPECT_EQ(r.out, "");
  EXPECT_EQ(r.err.rfind("/nonexistent/x.csv: cannot open", 0), 0u) << r.err;
}

TEST(FitCliBadInputTop, NoSubcommandIsExitTwo) {
  const ProcessResult r = Rimwatch({});
  EXPECT_EQ(r.exit_code, 2);
  EXPECT_EQ(r.out, "");
  EXPECT_NE(r.err, "");
}

// ---- rank deficiency: exit 3 with the engine's message naming the regressors

std::string IntegerSeries(int rows, bool constant_b, bool c_is_sum) {
  std::mt19937 gen(11);
  std::string text = "period,a,b,c\n";
  for (int t = 1; t <= rows; ++t) {
    const int a = static_cast<int>(gen() % 101) - 50;
    const int b = constant_b ? 5 : static_cast<int>(gen() % 101) - 50;
    const int c = c_is_sum ? a + b : static_cast<int>(gen() % 101) - 50;
    text += std::to_string(t) + "," + std::to_string(a) + "," + std::to_string(b) + "," +
            std::to_string(c) + "\n";
  }
  return text;
}

TEST(FitCliRank, ConstantSeriesIsExitThreeNamingTheRegressor) {
  const std::string path = WriteTemp("constant_b", IntegerSeries(60, true, false));
  const ProcessResult r = Fit({"--csv", path, "--lags", "1"});
  EXPECT_EQ(r.exit_code, 3) << r.err;
  EXPECT_EQ(r.out, "");
  EXPECT_NE(r.err.find(path), std::string::npos) << r.err;
  EXPECT_NE(r.err.find("rank_deficient"), std::string::npos) << r.err;
  EXPECT_NE(r.err.find("L1.b"), std::string::npos) << r.err;  // b is collinear with the constant
}

TEST(FitCliRank, CollinearSeriesIsExitThreeNamingTheRegressors) {
  const std::string path = WriteTemp("sum_c", IntegerSeries(60, false, true));  // c = a + b
  const ProcessResult r = Fit({"--csv", path, "--lags", "2", "--json"});
  EXPECT_EQ(r.exit_code, 3) << r.err;
  EXPECT_EQ(r.out, "");
  EXPECT_NE(r.err.find("L1.c"), std::string::npos) << r.err;
  EXPECT_NE(r.err.find("L2.c"), std::string::npos) << r.err;
}

}  // namespace
}  // namespace rimwatch
