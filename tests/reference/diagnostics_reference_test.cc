// Residual diagnostics against tests/reference/make_diagnostics_reference.py.
//
// Each case's CSV rows are fitted by the engine (VarEstimator with the expanding window, the path
// FitVar uses; FitVar's Phi is checked to be the same), the residuals and regressors of the fit
// are taken with WindowResiduals(), and every diagnostic is compared with the value the script took
// from statsmodels 0.13.5 (Seabold & Perktold 2010) or, for the VAR Breusch-Godfrey test that
// statsmodels lacks, from its numpy implementation of Luetkepohl (2005), Sec. 4.4.4 and Edgerton &
// Shukur (1999). The source is named beside each check. Every diagnostic is also run on the
// residuals statsmodels itself produced (stored in the JSON), which isolates the diagnostics from
// the estimator's rounding.
//
// Missing files fail the test; nothing is skipped. The binary prints the worst relative error
// per quantity at the end.
#include <gtest/gtest.h>

#include <Eigen/Core>
#include <algorithm>
#include <cmath>
#include <cstdio>
#include <fstream>
#include <limits>
#include <map>
#include <nlohmann/json.hpp>
#include <string>
#include <utility>
#include <vector>

#include "reference_compare.h"
#include "reference_csv.h"
#include "rimwatch/engine/diagnostics.h"
#include "rimwatch/engine/var_estimator.h"
#include "rimwatch/engine/var_fit.h"
#include "rimwatch/engine/var_spec.h"

namespace rimwatch {
namespace {

using nlohmann::json;

constexpr double kEps = std::numeric_limits<double>::epsilon();
// 1e-8 relative (about 4.5e7 eps): the engine's Givens-folded QR and statsmodels' LAPACK least
// squares each carry cond(X) eps rounding in the residuals, and the diagnostics amplify it (a
// p-value of 1e-40 moves by about statistic/2 times the statistic's relative error).
constexpr double kRelTol = 4.5e7 * kEps;
// Residuals compared to the largest residual of their column (single residuals can be ~0).
constexpr double kResidualTol = 4.5e7 * kEps;

const std::vector<std::string>& Cases() {
  static const auto* const cases =
      new std::vector<std::string>{"e1", "sim_const", "sim_trend", "sim_none", "misspec", "ar_uni"};
  return *cases;
}

// |got - want| <= tol * max(1e-300, |want|). No reference value here is near 0 except p-values
// that underflow in both programs.
void ExpectRel(const std::string& quantity, const std::string& where, double got, double want,
               double tol = kRelTol) {
  refdata::ExpectRel(quantity, where, got, want, tol);
}

void ExpectVectorRel(const std::string& quantity, const std::string& where,
                     const Eigen::VectorXd& got, const json& want) {
  ASSERT_EQ(static_cast<std::size_t>(got.size()), want.size()) << quantity << " " << where;
  for (Eigen::Index i = 0; i < got.size(); ++i) {
    ExpectRel(quantity, where + "[eq " + std::to_string(i) + "]", got[i],
              want.at(static_cast<std::size_t>(i)).get<double>());
  }
}

Eigen::MatrixXd ToMatrix(const json& rows) {
  const auto r = static_cast<Eigen::Index>(rows.size());
  const auto c = r == 0 ? Eigen::Index{0} : static_cast<Eigen::Index>(rows.at(0).size());
  Eigen::MatrixXd m(r, c);
  for (Eigen::Index i = 0; i < r; ++i) {
    for (Eigen::Index j = 0; j < c; ++j) m(i, j) = rows.at(i).at(j).get<double>();
  }
  return m;
}

struct Reference {
  bool ok = false;
  std::string why;
  std::string dir;
  json doc;
};

const Reference& LoadReference() {
  static const Reference ref = [] {
    Reference r;
    if (!refdata::ReferenceDir(&r.dir, &r.why)) return r;
    const std::string path = r.dir + "/diagnostics.json";
    std::ifstream in(path);
    if (!in) {
      r.why = "cannot open " + path;
      return r;
    }
    r.doc = json::parse(in, nullptr, /*allow_exceptions=*/false);
    if (r.doc.is_discarded() || !r.doc.contains("cases")) {
      r.why = path + ": not a diagnostics reference file (no \"cases\")";
      return r;
    }
    r.ok = true;
    return r;
  }();
  return ref;
}

TEST(DiagnosticsReferenceFile, HoldsExactlyTheExpectedCases) {
  const Reference& ref = LoadReference();
  ASSERT_TRUE(ref.ok) << ref.why;
  std::vector<std::string> names;
  for (const json& c : ref.doc.at("cases")) names.push_back(c.at("name").get<std::string>());
  EXPECT_EQ(names, Cases());
}

class DiagnosticsReference : public ::testing::TestWithParam<std::string> {
 protected:
  void SetUp() override {
    const Reference& ref = LoadReference();
    ASSERT_TRUE(ref.ok) << ref.why;
    for (const json& c : ref.doc.at("cases")) {
      if (c.at("name").get<std::string>() == GetParam()) ref_ = c;
    }
    ASSERT_FALSE(ref_.is_null()) << "case " << GetParam() << " missing from diagnostics.json";
    std::string why;
    refdata::ReferenceCsv data;
    ASSERT_TRUE(
        refdata::ReadReferenceCsv(ref.dir + "/" + ref_.at("csv").get<std::string>(), &data, &why))
        << why;
    ASSERT_EQ(data.variables, ref_.at("variables").get<std::vector<std::string>>());
    const std::string det = ref_.at("deterministic").get<std::string>();
    Deterministic d;
    ASSERT_TRUE(ParseDeterministic(det, &d)) << det;
    const int p = ref_.at("lags").get<int>();

    VarSpec spec;
    spec.variables = data.variables;
    spec.lags = p;
    spec.deterministic = d;
    spec.window.kind = WindowKind::kExpanding;
    spec.window.robust_row_cap = static_cast<std::size_t>(data.values.rows());
    VarEstimator est(spec);
    for (Eigen::Index r = 0; r < data.values.rows(); ++r) {
      ASSERT_TRUE(est.Update(data.values.row(r).transpose()).status.ok()) << "row " << r;
    }
    Status st = WindowResiduals(est, 0, &sample_);
    ASSERT_TRUE(st.ok()) << st.ToString();
    ASSERT_EQ(sample_.residuals.rows(), ref_.at("nobs").get<Eigen::Index>());
    ASSERT_EQ(sample_.regressors.cols(), ref_.at("k").get<Eigen::Index>());
    ASSERT_EQ(sample_.first_index, 1);
    ASSERT_EQ(sample_.lags, p);

    // FitVar is the same code path: same Phi, bit for bit.
    FitOptions options;
    options.lags = p;
    options.deterministic = d;
    FitReport report;
    st = FitVar(data.values, data.variables, options, &report);
    ASSERT_TRUE(st.ok()) << st.ToString();
    Eigen::MatrixXd phi;
    ASSERT_TRUE(est.Coefficients(&phi).ok());
    EXPECT_EQ(report.phi, phi);

    statsmodels_residuals_ = ToMatrix(ref_.at("residuals"));
    ASSERT_EQ(statsmodels_residuals_.rows(), sample_.residuals.rows());
    ASSERT_EQ(statsmodels_residuals_.cols(), sample_.residuals.cols());
  }

  // Both residual sets: the engine's fit and statsmodels' (JSON).
  std::vector<std::pair<std::string, Eigen::MatrixXd>> ResidualSets() const {
    return {{GetParam() + "/engine", sample_.residuals},
            {GetParam() + "/statsmodels", statsmodels_residuals_}};
  }

  json ref_;
  ResidualSample sample_;
  Eigen::MatrixXd statsmodels_residuals_;
};

// statsmodels 0.13.5 VAR.fit residuals (OLS per equation for n = 1), relative to the largest
// residual of each column.
TEST_P(DiagnosticsReference, EngineResidualsMatchStatsmodels) {
  for (Eigen::Index j = 0; j < sample_.residuals.cols(); ++j) {
    const double scale = statsmodels_residuals_.col(j).cwiseAbs().maxCoeff();
    const double err =
        (sample_.residuals.col(j) - statsmodels_residuals_.col(j)).cwiseAbs().maxCoeff();
    refdata::WorstErrors::Get().Record("residuals (max-norm)", err / scale, GetParam());
    EXPECT_LE(err, kResidualTol * scale) << GetParam() << " column " << j;
  }
}

// statsmodels 0.13.5 stats.diagnostic.het_arch(e_i, nlags=q), ddof = 0 (Engle 1982).
TEST_P(DiagnosticsReference, ArchLmMatchesStatsmodelsHetArch) {
  for (const auto& [where, e] : ResidualSets()) {
    for (const json& r : ref_.at("arch")) {
      const int q = r.at("lags").get<int>();
      const std::string at = where + " q=" + std::to_string(q);
      ArchLmResult got;
      const Status st = ArchLmTest(e, q, &got);
      ASSERT_TRUE(st.ok()) << at << ": " << st.ToString();
      EXPECT_EQ(got.df, r.at("df").get<int>()) << at;
      EXPECT_EQ(got.rows_used, r.at("rows_used").get<std::int64_t>()) << at;
      EXPECT_EQ(got.f_df2, r.at("f_df2").get<int>()) << at;
      ExpectVectorRel("arch lm", at, got.statistic, r.at("lm"));
      ExpectVectorRel("arch lm p-value", at, got.p_value, r.at("lm_p"));
      // numpy, the same LM from the explained sum of squares on centred lags (statsmodels'
      // 1 - RSS / TSS loses about eps / R^2 when R^2 is tiny, 1.5e-9 relative for sim_none q=1).
      ExpectVectorRel("arch lm (numpy, centred)", at, got.statistic, r.at("lm_centred"));
      ExpectVectorRel("arch F", at, got.f_statistic, r.at("f"));
      ExpectVectorRel("arch F p-value", at, got.f_p_value, r.at("f_p"));
    }
  }
}

// statsmodels 0.13.5 stats.diagnostic.acorr_ljungbox(e_i, lags=[h], model_df=m) (Ljung & Box
// 1978).
TEST_P(DiagnosticsReference, LjungBoxMatchesStatsmodels) {
  for (const auto& [where, e] : ResidualSets()) {
    for (const json& r : ref_.at("ljung_box")) {
      const int h = r.at("lags").get<int>(), md = r.at("model_df").get<int>();
      const std::string at = where + " h=" + std::to_string(h) + " model_df=" + std::to_string(md);
      LjungBoxResult got;
      const Status st = LjungBoxTest(e, h, md, &got);
      ASSERT_TRUE(st.ok()) << at << ": " << st.ToString();
      EXPECT_EQ(got.df, r.at("df").get<int>()) << at;
      ExpectVectorRel("ljung-box Q", at, got.statistic, r.at("stat"));
      ExpectVectorRel("ljung-box p-value", at, got.p_value, r.at("p"));
    }
  }
}

// statsmodels 0.13.5 VARResults.test_whiteness(nlags=h, adjusted=True / False) (Hosking 1980;
// Luetkepohl 2005, Sec. 4.4.3); for n = 1, which statsmodels' VAR refuses, T / (T + 2) times
// its acorr_ljungbox statistic and the Box-Pierce statistic (the same sums when n = 1).
TEST_P(DiagnosticsReference, PortmanteauMatchesStatsmodelsTestWhiteness) {
  const int p = ref_.at("lags").get<int>();
  ASSERT_FALSE(ref_.at("portmanteau").empty());
  for (const auto& [where, e] : ResidualSets()) {
    for (const json& r : ref_.at("portmanteau")) {
      const int h = r.at("lags").get<int>();
      const std::string at = where + " h=" + std::to_string(h);
      PortmanteauResult got;
      const Status st = PortmanteauTest(e, h, p, &got);
      ASSERT_TRUE(st.ok()) << at << ": " << st.ToString();
      EXPECT_EQ(got.df, r.at("df").get<int>()) << at;
      ExpectRel("portmanteau Q* adjusted", at, got.statistic,
                r.at("adjusted").at("stat").get<double>());
      ExpectRel("portmanteau Q* p-value", at, got.p_value, r.at("adjusted").at("p").get<double>());
      ExpectRel("portmanteau Q unadjusted", at, got.unadjusted_statistic,
                r.at("unadjusted").at("stat").get<double>());
      ExpectRel("portmanteau Q p-value", at, got.unadjusted_p_value,
                r.at("unadjusted").at("p").get<double>());
    }
  }
}

// numpy from Luetkepohl (2005), Sec. 4.4.4 (LM) and Edgerton & Shukur (1999) (F form); for
// n = 1 also statsmodels 0.13.5 acorr_breusch_godfrey, to which the system test reduces.
TEST_P(DiagnosticsReference, BreuschGodfreyMatchesFormulaReference) {
  for (const auto& [where, e] : ResidualSets()) {
    for (const json& r : ref_.at("breusch_godfrey")) {
      const int h = r.at("lags").get<int>();
      const std::string at = where + " h=" + std::to_string(h);
      BreuschGodfreyResult got;
      const Status st = BreuschGodfreyTest(e, sample_.regressors, h, &got);
      ASSERT_TRUE(st.ok()) << at << ": " << st.ToString();
      EXPECT_EQ(got.lm_df, r.at("lm_df").get<int>()) << at;
      EXPECT_EQ(got.f_df1, r.at("f_df1").get<int>()) << at;
      ExpectRel("bg LM", at, got.lm_statistic, r.at("lm").get<double>());
      ExpectRel("bg LM p-value", at, got.lm_p_value, r.at("lm_p").get<double>());
      ExpectRel("bg wilks ratio", at, got.wilks_ratio, r.at("wilks_ratio").get<double>());
      ExpectRel("bg rao r", at, got.rao_r, r.at("rao_r").get<double>());
      ExpectRel("bg F (Edgerton-Shukur)", at, got.f_statistic, r.at("f").get<double>());
      ExpectRel("bg F df2", at, got.f_df2, r.at("f_df2").get<double>());
      ExpectRel("bg F p-value", at, got.f_p_value, r.at("f_p").get<double>());
    }
    if (!ref_.contains("breusch_godfrey_statsmodels")) continue;
    for (const json& r : ref_.at("breusch_godfrey_statsmodels")) {
      const int h = r.at("lags").get<int>();
      const std::string at = where + " h=" + std::to_string(h);
      BreuschGodfreyResult got;
      ASSERT_TRUE(BreuschGodfreyTest(e, sample_.regressors, h, &got).ok()) << at;
      ExpectRel("bg LM (statsmodels, n=1)", at, got.lm_statistic, r.at("lm").get<double>());
      ExpectRel("bg F (statsmodels, n=1)", at, got.f_statistic, r.at("f").get<double>());
      ExpectRel("bg F p-value (statsmodels, n=1)", at, got.f_p_value, r.at("f_p").get<double>());
    }
  }
}

// statsmodels 0.13.5 stats.stattools.jarque_bera per column (Jarque & Bera 1987).
TEST_P(DiagnosticsReference, JarqueBeraMatchesStatsmodels) {
  const json& r = ref_.at("jarque_bera");
  for (const auto& [where, e] : ResidualSets()) {
    JarqueBeraResult got;
    const Status st = JarqueBeraTest(e, &got);
    ASSERT_TRUE(st.ok()) << where << ": " << st.ToString();
    ExpectVectorRel("jarque-bera JB", where, got.statistic, r.at("stat"));
    ExpectVectorRel("jarque-bera p-value", where, got.p_value, r.at("p"));
    ExpectVectorRel("jarque-bera skewness", where, got.skewness, r.at("skew"));
    ExpectVectorRel("jarque-bera kurtosis", where, got.kurtosis, r.at("kurtosis"));
  }
}

// Joint statistic: statsmodels 0.13.5 VARResults.test_normality (jarque_bera for n = 1); the
// skewness and kurtosis parts: numpy from Luetkepohl (2005), Sec. 4.5, checked by the script to
// add up to statsmodels' joint value.
TEST_P(DiagnosticsReference, MultivariateNormalityMatchesStatsmodelsTestNormality) {
  const json& r = ref_.at("normality");
  for (const auto& [where, e] : ResidualSets()) {
    MultivariateNormalityResult got;
    const Status st = MultivariateNormalityTest(e, &got);
    ASSERT_TRUE(st.ok()) << where << ": " << st.ToString();
    EXPECT_EQ(got.df, r.at("df").get<int>()) << where;
    EXPECT_EQ(got.skewness_df, r.at("skewness_df").get<int>()) << where;
    ExpectRel("normality joint", where, got.statistic, r.at("stat").get<double>());
    ExpectRel("normality joint p-value", where, got.p_value, r.at("p").get<double>());
    ExpectRel("normality skewness part", where, got.skewness_statistic,
              r.at("skewness_stat").get<double>());
    ExpectRel("normality skewness p-value", where, got.skewness_p_value,
              r.at("skewness_p").get<double>());
    ExpectRel("normality kurtosis part", where, got.kurtosis_statistic,
              r.at("kurtosis_stat").get<double>());
    ExpectRel("normality kurtosis p-value", where, got.kurtosis_p_value,
              r.at("kurtosis_p").get<double>());
    ExpectVectorRel("normality b1", where, got.skewness, r.at("b1"));
    ExpectVectorRel("normality b2", where, got.excess_kurtosis, r.at("b2"));
  }
}

INSTANTIATE_TEST_SUITE_P(Cases, DiagnosticsReference, ::testing::ValuesIn(Cases()),
                         [](const ::testing::TestParamInfo<std::string>& param) {
                           return param.param;
                         });

}  // namespace
}  // namespace rimwatch
