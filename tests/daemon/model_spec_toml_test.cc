// The TOML model spec: the shipped example parses to the documented values; every class of bad
// input is refused with the source, the line and the key.
#include "rimwatch/daemon/model_spec_toml.h"

#include <gtest/gtest.h>

#include <cstdlib>
#include <fstream>
#include <sstream>

namespace rimwatch {
namespace {

std::string ReadExample() {
  const char* root = std::getenv("RIMWATCH_SOURCE_DIR");
  EXPECT_NE(root, nullptr) << "RIMWATCH_SOURCE_DIR not set";
  std::ifstream in(std::string(root ? root : ".") + "/schemas/model.example.toml");
  EXPECT_TRUE(in.good());
  std::stringstream ss;
  ss << in.rdbuf();
  return ss.str();
}

TEST(ModelSpecTomlTest, ExampleParsesToDocumentedValues) {
  ModelSpec m;
  const Status st = ParseModelSpecToml(ReadExample(), "model.example.toml", &m);
  ASSERT_TRUE(st.ok()) << st.ToString();
  EXPECT_EQ(m.name, "trio");
  EXPECT_EQ(m.var.variables, (std::vector<std::string>{"a", "b", "c"}));
  EXPECT_EQ(m.var.lags, 2);
  EXPECT_EQ(m.var.deterministic, Deterministic::kConstant);
  EXPECT_EQ(m.transforms[0], Transform::kLogDiff);
  EXPECT_EQ(m.transforms[1], Transform::kLevel);
  EXPECT_EQ(m.var.window.kind, WindowKind::kForgetting);
  EXPECT_EQ(m.var.window.lambda, 0.995);
  EXPECT_EQ(m.inference.covariance.kind, CovarianceKind::kHC3);
  EXPECT_EQ(m.training_rows, 200);
  ASSERT_EQ(m.restrictions.size(), 1u);
  EXPECT_EQ(m.restrictions[0].kind, RestrictionKind::kGranger);
  EXPECT_EQ(m.restrictions[0].cause, std::vector<std::string>{"b"});
  EXPECT_EQ(m.alarms.horizon, 10.0);
  EXPECT_EQ(m.HorizonRows(), 2000);
  EXPECT_TRUE(m.constancy.nyblom_hansen);
  EXPECT_TRUE(m.constancy.reference_equality);
  EXPECT_EQ(m.constancy.block_rows, 0);
  EXPECT_EQ(m.ConstancyBlockRows(), 200);  // automatic: training.rows (>= (n + 1) k + 10 = 38)
}

const char* kBase = "name = \"m\"\nvariables = [\"a\", \"b\"]\nlags = 1\n";

void ExpectRefused(const std::string& text, const std::string& fragment) {
  ModelSpec m;
  const Status st = ParseModelSpecToml(text, "spec.toml", &m);
  EXPECT_EQ(st.code(), StatusCode::kInvalidArgument) << text;
  EXPECT_NE(st.message().find(fragment), std::string::npos) << st.message();
}

TEST(ModelSpecTomlTest, MinimalSpecTakesDefaults) {
  ModelSpec m;
  ASSERT_TRUE(ParseModelSpecToml(kBase, "spec.toml", &m).ok());
  EXPECT_EQ(m.var.window.kind, WindowKind::kExpanding);
  EXPECT_EQ(m.inference.every, 1);
  EXPECT_EQ(m.alarms.false_alarm, 0.05);
  EXPECT_TRUE(m.constancy.nyblom_hansen && m.constancy.reference_equality);
  EXPECT_EQ(m.constancy.block_rows, 0);
}

TEST(ModelSpecTomlTest, ConstancyKeys) {
  ModelSpec m;
  Status st = ParseModelSpecToml(
      std::string(kBase) + "[constancy]\ntests = [\"reference_equality\"]\nblock_rows = 150\n",
      "spec.toml", &m);
  ASSERT_TRUE(st.ok()) << st.ToString();
  EXPECT_FALSE(m.constancy.nyblom_hansen);
  EXPECT_TRUE(m.constancy.reference_equality);
  EXPECT_EQ(m.ConstancyBlockRows(), 150);
  st = ParseModelSpecToml(std::string(kBase) + "[constancy]\ntests = []\n", "spec.toml", &m);
  ASSERT_TRUE(st.ok()) << st.ToString();
  EXPECT_FALSE(m.constancy.any());
  // n = 2, k = 3: (n + 1) k + 10 = 19; horizon 10 x 200 = 2000 rows.
  ExpectRefused(std::string(kBase) + "[constancy]\nblock_rows = 18\n",
                "spec.toml:5: constancy.block_rows = 18: must be >= (n + 1) k + 10 = 19");
  ExpectRefused(std::string(kBase) + "[constancy]\nblock_rows = 2001\n",
                "spec.toml:5: constancy.block_rows = 2001: must be <= the horizon of 2000 rows");
  ExpectRefused(std::string(kBase) + "[constancy]\ntests = [\"cusum\"]\n",
                "spec.toml:5: constancy.tests: unknown test 'cusum'");
  ExpectRefused(
      std::string(kBase) + "[constancy]\ntests = [\"nyblom_hansen\", \"nyblom_hansen\"]\n",
      "names 'nyblom_hansen' twice");
  ExpectRefused(std::string(kBase) + "[constancy]\ntests = \"nyblom_hansen\"\n",
                "key 'constancy.tests' must be an array of strings");
  ExpectRefused(std::string(kBase) + "[constancy]\nevery = 3\n",
                "spec.toml:5: unknown key 'constancy.every'");
  // The automatic block must fit in the horizon (no line to point at): with p = 2, k = 5 and
  // (n + 1) k + 10 = 25 > 20 rows of training and horizon.
  const std::string lags2 = "name = \"m\"\nvariables = [\"a\", \"b\"]\nlags = 2\n";
  ExpectRefused(lags2 + "[training]\nrows = 20\n[alarms]\nhorizon = 1\n",
                "spec.toml: constancy.block_rows = 25 (automatic");
  st = ParseModelSpecToml(lags2 +
                              "[training]\nrows = 20\n[alarms]\nhorizon = 1\n[constancy]\n"
                              "tests = []\n",
                          "spec.toml", &m);
  EXPECT_TRUE(st.ok()) << st.ToString();
}

TEST(ModelSpecTomlTest, RefusesBadInputWithLineAndKey) {
  ExpectRefused(std::string(kBase) + "colour = 3\n", "spec.toml:4: unknown key 'colour'");
  ExpectRefused(std::string(kBase) + "[window]\nkind = \"sliding\"\nsize = 3\n",
                "spec.toml:6: unknown key 'window.size'");
  ExpectRefused(std::string(kBase) + "[window]\nkind = \"forgetting\"\nlambda = 1.5\n",
                "spec.toml:6: window.lambda = 1.5");
  ExpectRefused("name = \"m\"\nvariables = [\"a\", \"b\"]\nlags = \"two\"\n",
                "spec.toml:3: key 'lags' must be an integer");
  ExpectRefused("name = \"m\"\nvariables = [\"a\", \"b\"]\nlags = 0\n", "spec.toml:3: lags = 0");
  ExpectRefused(std::string(kBase) +
                    "[[restriction]]\nname = \"r\"\n"
                    "granger = { cause = [\"zz\"], effect = [\"a\"] }\n",
                "unknown variable 'zz'");
  ExpectRefused(std::string(kBase) +
                    "[[restriction]]\nname = \"r\"\nexclude_lag = 1\n"
                    "granger = { cause = [\"b\"], effect = [\"a\"] }\n",
                "exactly one of");
  ExpectRefused(std::string(kBase) + "transform = { q = \"diff\" }\n",
                "spec.toml:4: transform names unknown variable 'q'");
  ExpectRefused("name = \"m\"\nvariables = [\"a\"\n", "spec.toml:");
  ExpectRefused("variables = [\"a\"]\nlags = 1\n", "key 'name' is required");
  ExpectRefused(std::string(kBase) +
                    "[[restriction]]\nname = \"r\"\n"
                    "matrix = { R = [[1, 0, 0]], r = [0] }\n",
                "n k = 6 columns");
}

TEST(ModelSpecTomlTest, MatrixRestrictionRoundTrips) {
  ModelSpec m;
  const std::string text =
      std::string(kBase) +
      "[[restriction]]\nname = \"r\"\n"
      "matrix = { R = [[0, 1, 0, 0, 0, 0], [0, 0, 0, 0, 1, -1]], r = [0, 0.5] }\n";
  const Status st = ParseModelSpecToml(text, "spec.toml", &m);
  ASSERT_TRUE(st.ok()) << st.ToString();
  ASSERT_EQ(m.restrictions[0].r_matrix.rows(), 2);
  EXPECT_EQ(m.restrictions[0].r_matrix(1, 5), -1.0);
  EXPECT_EQ(m.restrictions[0].r_value[1], 0.5);
}

}  // namespace
}  // namespace rimwatch
