// The engine against reference values from tests/reference/make_reference.py.
//
// Every case's CSV rows go through the engine's one batch path (FitVar) or through VarEstimator +
// CovarianceContext, and each reported quantity is compared with the value the script took from
// statsmodels 0.13.5 (Seabold & Perktold 2010) or wrote in numpy from the published formula. The
// source of each value is named beside its check. Conventions (tests/data/README.md): theta index
// eq * k + regressor; the trend regressor is the 1-based observation number; HAC without
// small-sample correction; F form W / q against F(q, nobs - k).
//
// Missing files fail the test (ASSERT in SetUp); nothing is skipped. At the end the binary prints
// the worst relative error seen per quantity.
#include <gtest/gtest.h>

#include <Eigen/Core>
#include <algorithm>
#include <cmath>
#include <complex>
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
#include "rimwatch/engine/covariance.h"
#include "rimwatch/engine/lag_order.h"
#include "rimwatch/engine/var_estimator.h"
#include "rimwatch/engine/var_fit.h"
#include "rimwatch/engine/var_spec.h"
#include "rimwatch/engine/wald.h"

namespace rimwatch {
namespace {

using nlohmann::json;

constexpr double kEps = std::numeric_limits<double>::epsilon();
// Two independent double-precision computations of one estimate (Givens-folded QR here; LAPACK
// least squares and explicit inverses in statsmodels/numpy) each carry rounding of order
// cond(X) eps. 1e-8 (about 4.5e7 eps) leaves room for cond(X) up to about 1e7 on either side.
constexpr double kRelTol = 4.5e7 * kEps;
// The spectral-radius SE reference uses a central-difference gradient, step h = 1e-6 max(1,
// |theta|): truncation O(h^2) and cancellation O(eps / h) ~ 2e-10; the script checks that gradient
// against the analytic one to 1e-6, so the SE is compared to 1e-6 relative.
constexpr double kFiniteDifferenceRelTol = 1e-6;

// The cases make_reference.py writes (tests/data/README.md); a missing or extra case fails.
const std::vector<std::string>& Cases() {
  static const auto* const cases =
      new std::vector<std::string>{"e1", "sim_const", "sim_trend", "sim_none"};
  return *cases;
}

// ---------------------------------------------------------------------------------------------
// Relative checks; the worst error per quantity is printed when the binary ends
// (reference_compare.h).

using refdata::ExpectRel;

// No absolute floor anywhere: no reference value is ~0. The smallest covariance entry in
// system_cov is about 2e-4 of its Cauchy-Schwarz scale sqrt(V_ii V_jj), and every entry meets the
// relative rule. Should a regenerated reference hold a value near 0, this fails loudly rather
// than hiding it behind a floor.
void ExpectMatrixRel(const std::string& quantity, const std::string& where,
                     const Eigen::MatrixXd& got, const Eigen::MatrixXd& want, double tol) {
  ASSERT_EQ(got.rows(), want.rows()) << quantity << " " << where;
  ASSERT_EQ(got.cols(), want.cols()) << quantity << " " << where;
  for (Eigen::Index i = 0; i < want.rows(); ++i) {
    for (Eigen::Index j = 0; j < want.cols(); ++j) {
      ExpectRel(quantity, where + "[" + std::to_string(i) + "," + std::to_string(j) + "]",
                got(i, j), want(i, j), tol);
    }
  }
}

// ---------------------------------------------------------------------------------------------
// Reference files.

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
    const std::string path = r.dir + "/reference.json";
    std::ifstream in(path);
    if (!in) {
      r.why = "cannot open " + path;
      return r;
    }
    r.doc = json::parse(in, nullptr, /*allow_exceptions=*/false);
    if (r.doc.is_discarded() || !r.doc.contains("cases")) {
      r.why = path + ": not a reference file (no \"cases\")";
      return r;
    }
    r.ok = true;
    return r;
  }();
  return ref;
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

TEST(StatsmodelsReferenceFile, HoldsExactlyTheExpectedCases) {
  const Reference& ref = LoadReference();
  ASSERT_TRUE(ref.ok) << ref.why;
  std::vector<std::string> names;
  for (const json& c : ref.doc.at("cases")) names.push_back(c.at("name").get<std::string>());
  EXPECT_EQ(names, Cases());
}

// ---------------------------------------------------------------------------------------------
// One reference case: its JSON entry, its data and the engine spec that matches it.

struct SeKind {
  const char* key;  // se.<key> in the JSON
  CovarianceKind kind;
  int hac_lags;  // HAC only; -1 = the engine's Newey-West rule
};

// Standard errors, statsmodels 0.13.5: VARResults.stderr (classical) and per-equation
// OLS(...).fit(cov_type=HC0..HC3 | HAC, maxlags=L) on the VAR's own regressor matrix
// (get_robustcov_results). HC: White 1980; MacKinnon & White 1985. HAC: Newey & West 1987,
// automatic L = floor(4 (T/100)^(2/9)) from Newey & West 1994.
constexpr SeKind kSeKinds[] = {
    {"classical", CovarianceKind::kClassical, 0},
    {"HC0", CovarianceKind::kHC0, 0},
    {"HC1", CovarianceKind::kHC1, 0},
    {"HC2", CovarianceKind::kHC2, 0},
    {"HC3", CovarianceKind::kHC3, 0},
    {"HAC4", CovarianceKind::kHAC, 4},
    {"HAC_auto", CovarianceKind::kHAC, -1},
};

class StatsmodelsReference : public ::testing::TestWithParam<std::string> {
 protected:
  void SetUp() override {
    const Reference& ref = LoadReference();
    ASSERT_TRUE(ref.ok) << ref.why;
    for (const json& c : ref.doc.at("cases")) {
      if (c.at("name").get<std::string>() == GetParam()) ref_ = c;
    }
    ASSERT_FALSE(ref_.is_null()) << "case " << GetParam() << " missing from reference.json";
    std::string why;
    const std::string csv = ref.dir + "/" + ref_.at("csv").get<std::string>();
    ASSERT_TRUE(refdata::ReadReferenceCsv(csv, &data_, &why)) << why;
    ASSERT_EQ(data_.variables, ref_.at("variables").get<std::vector<std::string>>());
    ASSERT_EQ(data_.values.rows(), ref_.at("raw_rows").get<Eigen::Index>());
    spec_.variables = data_.variables;
    spec_.lags = ref_.at("lags").get<int>();
    ASSERT_TRUE(
        ParseDeterministic(ref_.at("deterministic").get<std::string>(), &spec_.deterministic));
    ASSERT_TRUE(spec_.IsValid(&why)) << why;
    ASSERT_EQ(spec_.k(), ref_.at("k").get<int>());
    n_ = spec_.n();
    k_ = spec_.k();
  }

  std::string Where(const std::string& what) const { return GetParam() + " " + what; }

  // FitVar with one covariance kind, the reference's Granger and top-lag tests, criteria off.
  void Fit(CovarianceKind kind, int hac_lags, FitReport* out) const {
    FitOptions options;
    options.lags = spec_.lags;
    options.deterministic = spec_.deterministic;
    options.covariance.kind = kind;
    options.covariance.hac_lags = hac_lags;
    options.exclude_lags = {ref_.at("exclude_lag").at("lag").get<int>()};
    for (const json& g : ref_.at("granger")) {
      options.granger.push_back({g.at("causing").get<std::vector<std::string>>(),
                                 g.at("caused").get<std::vector<std::string>>()});
    }
    const Status st = FitVar(data_.values, data_.variables, options, out);
    ASSERT_TRUE(st.ok()) << st.ToString();
    ASSERT_EQ(out->rows, ref_.at("nobs").get<std::int64_t>());
    ASSERT_EQ(out->tests.size(), 1 + ref_.at("granger").size());
  }

  // The expanding-window estimator after every CSV row.
  void Estimate(VarEstimator* est) const {
    for (Eigen::Index r = 0; r < data_.values.rows(); ++r) {
      const UpdateResult u = est->Update(data_.values.row(r).transpose());
      ASSERT_TRUE(u.status.ok()) << u.status.ToString();
    }
    ASSERT_EQ(est->rows_estimated(), ref_.at("nobs").get<std::int64_t>());
  }

  // The engine's restriction matrices for the reference's Granger tests, then the top lag.
  void Restrictions(std::vector<LinearRestriction>* out) const {
    for (const json& g : ref_.at("granger")) {
      std::vector<int> cause, effect;
      for (const json& v : g.at("causing")) cause.push_back(spec_.VariableIndex(v));
      for (const json& v : g.at("caused")) effect.push_back(spec_.VariableIndex(v));
      LinearRestriction r;
      ASSERT_TRUE(GrangerRestriction(spec_, cause, effect, &r).ok());
      out->push_back(std::move(r));
    }
    LinearRestriction r;
    ASSERT_TRUE(ExcludeLagRestriction(spec_, ref_.at("exclude_lag").at("lag").get<int>(), &r).ok());
    out->push_back(std::move(r));
  }

  json ref_;
  refdata::ReferenceCsv data_;
  VarSpec spec_;
  int n_ = 0;
  int k_ = 0;
};

TEST_P(StatsmodelsReference, RegressorOrderMatches) {
  // statsmodels 0.13.5 VARResults.exog_names: const, trend, L1.<var>..., Lp.<var>.
  const auto names = ref_.at("regressors").get<std::vector<std::string>>();
  ASSERT_EQ(static_cast<int>(names.size()), k_);
  for (int j = 0; j < k_; ++j) EXPECT_EQ(spec_.RegressorName(j), names[j]) << Where("regressor");
}

TEST_P(StatsmodelsReference, CoefficientsAndResidualCovariances) {
  FitReport fit;
  ASSERT_NO_FATAL_FAILURE(Fit(CovarianceKind::kClassical, 0, &fit));
  // statsmodels 0.13.5 VAR.fit: params (transposed to n x k), sigma_u (/ (nobs - k)),
  // sigma_u_mle (/ nobs).
  ExpectMatrixRel("params", Where("params"), fit.phi, ToMatrix(ref_.at("params")), kRelTol);
  ExpectMatrixRel("sigma", Where("sigma"), fit.sigma, ToMatrix(ref_.at("sigma")), kRelTol);
  ExpectMatrixRel("sigma_ml", Where("sigma_ml"), fit.sigma_ml, ToMatrix(ref_.at("sigma_ml")),
                  kRelTol);
}

TEST_P(StatsmodelsReference, StandardErrors) {
  for (const SeKind& se : kSeKinds) {
    SCOPED_TRACE(se.key);
    FitReport fit;
    ASSERT_NO_FATAL_FAILURE(Fit(se.kind, se.hac_lags, &fit));
    if (se.kind == CovarianceKind::kHAC) {
      // Newey & West 1994 rule of thumb, as the script applied it (hac_auto_lags), or L = 4.
      const int want = se.hac_lags >= 0 ? se.hac_lags : ref_.at("hac_auto_lags").get<int>();
      EXPECT_EQ(fit.covariance_info.hac_lags, want) << Where("HAC lag count");
    }
    const std::string quantity = std::string("se.") + se.key;
    ExpectMatrixRel(quantity, Where(quantity), fit.std_error, ToMatrix(ref_.at("se").at(se.key)),
                    kRelTol);
  }
}

struct SystemKind {
  const char* key;  // system_cov.<key>
  CovarianceKind kind;
  int hac_lags;
};

// numpy cross-equation sandwiches written from the formulas (White 1980; MacKinnon & White 1985
// for HC1..HC3; Newey & West 1987 Bartlett HAC, L = 4, no small-sample correction); the script
// checks their diagonal blocks against statsmodels 0.13.5 OLS get_robustcov_results.
constexpr SystemKind kSystemKinds[] = {
    {"HC0", CovarianceKind::kHC0, 0},  {"HC1", CovarianceKind::kHC1, 0},
    {"HC2", CovarianceKind::kHC2, 0},  {"HC3", CovarianceKind::kHC3, 0},
    {"HAC4", CovarianceKind::kHAC, 4},
};

TEST_P(StatsmodelsReference, SystemCovarianceFullAndRestricted) {
  VarEstimator est(spec_);
  ASSERT_NO_FATAL_FAILURE(Estimate(&est));
  std::vector<LinearRestriction> restrictions;
  ASSERT_NO_FATAL_FAILURE(Restrictions(&restrictions));
  for (const SystemKind& sk : kSystemKinds) {
    SCOPED_TRACE(sk.key);
    CovarianceContext ctx;
    const Status st = CovarianceContext::Create(est, {sk.kind, sk.hac_lags}, &ctx);
    ASSERT_TRUE(st.ok()) << st.ToString();
    const Eigen::MatrixXd want = ToMatrix(ref_.at("system_cov").at(sk.key));
    const std::string key(sk.key);
    ExpectMatrixRel("system_cov." + key, Where("Full " + key), ctx.Full(), want, kRelTol);
    // The cheap path R V R' (meat of s_t = R (I (x) A) g_t) against R V_numpy R'.
    for (const LinearRestriction& r : restrictions) {
      const Eigen::MatrixXd rvr = r.r_matrix * want * r.r_matrix.transpose();
      ExpectMatrixRel("restricted." + key, Where(r.name + " " + key), ctx.Restricted(r.r_matrix),
                      rvr, kRelTol);
    }
  }
  // Classical: diag(Omega (x) A) against statsmodels 0.13.5 VARResults.stderr squared.
  CovarianceContext ctx;
  ASSERT_TRUE(CovarianceContext::Create(est, {CovarianceKind::kClassical, 0}, &ctx).ok());
  const Eigen::MatrixXd se = ToMatrix(ref_.at("se").at("classical"));
  const Eigen::MatrixXd full = ctx.Full();
  for (int eq = 0; eq < n_; ++eq) {
    for (int j = 0; j < k_; ++j) {
      ExpectRel("system_cov.classical diag", Where("classical diag"),
                full(eq * k_ + j, eq * k_ + j), se(eq, j) * se(eq, j), kRelTol);
    }
  }
}

TEST_P(StatsmodelsReference, CompanionEigenvaluesAndSpectralRadiusSe) {
  FitReport classical, hc3;
  ASSERT_NO_FATAL_FAILURE(Fit(CovarianceKind::kClassical, 0, &classical));
  ASSERT_NO_FATAL_FAILURE(Fit(CovarianceKind::kHC3, 0, &hc3));
  // numpy eigvals of the companion matrix built from statsmodels 0.13.5 coefs (cross-checked
  // by the script against 1 / |VARResults.roots|), sorted by modulus.
  const auto moduli = ref_.at("eigen_moduli").get<std::vector<double>>();
  ASSERT_EQ(classical.eigenvalues.size(), moduli.size());
  for (std::size_t i = 0; i < moduli.size(); ++i) {
    ExpectRel("eigen_moduli", Where("modulus " + std::to_string(i)),
              std::abs(classical.eigenvalues[i]), moduli[i], kRelTol);
  }
  ExpectRel("spectral_radius", Where("rho"), classical.spectral_radius, moduli[0], kRelTol);
  const json& top = ref_.at("top_eigenvalue");
  ExpectRel("top_eigenvalue", Where("Re lambda_1"), classical.eigenvalues[0].real(),
            top.at("re").get<double>(), kRelTol);
  if (top.at("im").get<double>() != 0.0) {  // a complex pair: the sign of Im is a labelling choice
    ExpectRel("top_eigenvalue", Where("|Im lambda_1|"), std::abs(classical.eigenvalues[0].imag()),
              std::abs(top.at("im").get<double>()), kRelTol);
  }
  // Delta method SE of rho: numpy central finite differences of the spectral radius (checked in
  // the script against the analytic eigenvalue derivative) with the classical (statsmodels
  // cov_params) and numpy HC3 covariances.
  const json& se = ref_.at("spectral_radius_se");
  ASSERT_FALSE(se.is_null()) << Where("reference has no spectral radius SE");
  ASSERT_TRUE(classical.spectral_radius_se_status.ok())
      << classical.spectral_radius_se_status.ToString();
  ASSERT_TRUE(hc3.spectral_radius_se_status.ok()) << hc3.spectral_radius_se_status.ToString();
  ExpectRel("spectral_radius_se.classical", Where("rho SE classical"), classical.spectral_radius_se,
            se.at("classical").get<double>(), kFiniteDifferenceRelTol);
  ExpectRel("spectral_radius_se.HC3", Where("rho SE HC3"), hc3.spectral_radius_se,
            se.at("HC3").get<double>(), kFiniteDifferenceRelTol);
}

void ExpectWald(const std::string& prefix, const std::string& where, const NamedWaldResult& got,
                double stat, double p_value, int df) {
  ASSERT_TRUE(got.status.ok()) << where << ": " << got.status.ToString();
  EXPECT_EQ(got.result.df, df) << where;
  ExpectRel(prefix + ".wald", where + " W", got.result.statistic, stat, kRelTol);
  ExpectRel(prefix + ".p_value", where + " p", got.result.p_value, p_value, kRelTol);
}

TEST_P(StatsmodelsReference, GrangerAndExcludeLagWaldTests) {
  FitReport classical, hc3;
  ASSERT_NO_FATAL_FAILURE(Fit(CovarianceKind::kClassical, 0, &classical));
  ASSERT_NO_FATAL_FAILURE(Fit(CovarianceKind::kHC3, 0, &hc3));
  const json& granger = ref_.at("granger");
  for (std::size_t i = 0; i < granger.size(); ++i) {
    const json& g = granger.at(i);
    const NamedWaldResult& cl = classical.tests.at(1 + i);
    const std::string where = Where(cl.name);
    const int df = g.at("df").get<int>();
    // statsmodels 0.13.5 VARResults.test_causality(kind='wald'): W and its chi2 p-value.
    ExpectWald("granger.classical", where, cl, g.at("wald_classical").get<double>(),
               g.at("p_value").get<double>(), df);
    // numpy Wald with the numpy HC3 sandwich (MacKinnon & White 1985); scipy chi2.sf.
    ExpectWald("granger.HC3", where + " HC3", hc3.tests.at(1 + i), g.at("wald_HC3").get<double>(),
               g.at("p_value_HC3").get<double>(), df);
    // F form W / q against F(q, nobs - k): statistic equal to statsmodels' test_causality(kind='f')
    // statistic; df2 and scipy f.sf p-value per the README convention (not statsmodels' df2).
    EXPECT_EQ(cl.result.f_df1, g.at("f_df1").get<int>()) << where;
    EXPECT_EQ(cl.result.f_df2, g.at("f_df2").get<double>()) << where;
    ExpectRel("granger.f_statistic", where + " F", cl.result.f_statistic,
              g.at("f_statistic").get<double>(), kRelTol);
    ExpectRel("granger.f_p_value", where + " F p", cl.result.f_p_value,
              g.at("f_p_value").get<double>(), kRelTol);
  }
  // Top-lag exclusion: numpy Wald with statsmodels 0.13.5 cov_params (classical) and the numpy
  // HC3 sandwich; scipy chi2.sf p-values.
  const json& ex = ref_.at("exclude_lag");
  const int df = ex.at("df").get<int>();
  const std::string where = Where(classical.tests.at(0).name);
  ExpectWald("exclude_lag.classical", where, classical.tests.at(0),
             ex.at("wald_classical").get<double>(), ex.at("p_value_classical").get<double>(), df);
  ExpectWald("exclude_lag.HC3", where + " HC3", hc3.tests.at(0), ex.at("wald_HC3").get<double>(),
             ex.at("p_value_HC3").get<double>(), df);
}

TEST_P(StatsmodelsReference, LagOrderCriteria) {
  // statsmodels 0.13.5 VAR.select_order(maxlags=pmax): first pmax rows held out for every p,
  // m = p n^2 + n d, FPE with k_p = d + n p; no p = 0 when there are no deterministic terms.
  const json& crit = ref_.at("criteria");
  const int pmax = crit.at("pmax").get<int>();
  std::vector<LagCriteria> got;
  const Status st = LagOrderCriteria(data_.values, spec_.deterministic, pmax, &got);
  ASSERT_TRUE(st.ok()) << st.ToString();
  std::vector<int> got_p, want_p;
  for (const LagCriteria& c : got) got_p.push_back(c.lags);
  for (const auto& [p, values] : crit.at("p").items()) want_p.push_back(std::stoi(p));
  std::sort(want_p.begin(), want_p.end());
  ASSERT_EQ(got_p, want_p) << Where("lag orders with criteria");
  std::map<std::string, std::pair<double, int>> best;  // criterion -> (min, argmin)
  for (const LagCriteria& c : got) {
    ASSERT_TRUE(c.status.ok()) << Where("p = " + std::to_string(c.lags)) << c.status.ToString();
    const json& want = crit.at("p").at(std::to_string(c.lags));
    const std::pair<const char*, double> values[] = {
        {"aic", c.aic}, {"hq", c.hq}, {"bic", c.bic}, {"fpe", c.fpe}};
    for (const auto& [name, value] : values) {
      ExpectRel(std::string("criteria.") + name,
                Where(name + std::string(" p=") + std::to_string(c.lags)), value,
                want.at(name).get<double>(), kRelTol);
      auto it = best.find(name);
      if (it == best.end() || value < it->second.first) best[name] = {value, c.lags};
    }
  }
  // statsmodels 0.13.5 LagOrderResults.selected_orders.
  for (const auto& [name, entry] : best) {
    EXPECT_EQ(entry.second, crit.at("selected").at(name).get<int>()) << Where(name + " selected");
  }
}

INSTANTIATE_TEST_SUITE_P(Cases, StatsmodelsReference, ::testing::ValuesIn(Cases()),
                         [](const ::testing::TestParamInfo<std::string>& param) {
                           return param.param;
                         });

}  // namespace
}  // namespace rimwatch
