// The constancy statistics against tests/reference/make_constancy_reference.py and a published
// table.
//
//   Nyblom-Hansen statistic: numpy transcription of Hansen 1992 ("Testing for parameter
//     instability in linear models", J. Policy Modeling 14, Sec. 3) on LAPACK least squares;
//     statsmodels has no robust Nyblom-Hansen test. Expanding and sliding windows.
//   Equality Wald statistic: numpy HC0 / HC3 sandwiches (White 1980; MacKinnon & White 1985).
//   Survival function and 5% points of the sum of p int B^2: Imhof's formula (Imhof 1961,
//     Biometrika 48) with the Karhunen-Loeve eigenvalues, scipy.integrate.quad.
//   Hansen 1992, Table 1 (5% critical values of L_c by simulation; from memory): 0.470 (p = 1),
//     0.749 (2), 1.01 (3), 1.24 (4), 1.47 (5). Hansen simulated finite samples, so the exact
//     asymptotic values differ by up to about 0.01 (0.4614 for p = 1, the Cramer-von Mises
//     5% point; Anderson & Darling 1952, Ann. Math. Statist. 23): tolerance 0.02.
// Missing files fail the test; nothing is skipped.
#include <gtest/gtest.h>

#include <Eigen/Core>
#include <algorithm>
#include <cmath>
#include <cstdio>
#include <fstream>
#include <limits>
#include <nlohmann/json.hpp>
#include <string>

#include "reference_csv.h"
#include "rimwatch/engine/constancy.h"
#include "rimwatch/engine/covariance.h"
#include "rimwatch/engine/var_estimator.h"
#include "rimwatch/engine/var_spec.h"

namespace rimwatch {
namespace {

using nlohmann::json;

constexpr double kEps = std::numeric_limits<double>::epsilon();
// Two double-precision least-squares fits (Givens QR here, LAPACK gelsd in numpy) and the sums
// built on them agree to cond(X) eps; 1e-8 (about 4.5e7 eps) as in statsmodels_reference_test.
constexpr double kRelTol = 4.5e7 * kEps;
// The engine's Gauss-Legendre inversion is accurate to about 1e-12 absolute and the reference's
// quad to its epsabs = 1e-12 plus the eigenvalue-tail approximation (below 1e-10 at J = 4000);
// 1e-8 absolute leaves a margin.
constexpr double kLawTol = 1e-8;

class ConstancyReference : public ::testing::Test {
 protected:
  void SetUp() override {
    std::string why;
    ASSERT_TRUE(refdata::ReferenceDir(&dir_, &why)) << why;
    std::ifstream in(dir_ + "/constancy_reference.json");
    ASSERT_TRUE(in) << "cannot open " << dir_ << "/constancy_reference.json";
    in >> ref_;
  }

  refdata::ReferenceCsv Data(const std::string& name) {
    refdata::ReferenceCsv csv;
    std::string why;
    EXPECT_TRUE(refdata::ReadReferenceCsv(dir_ + "/constancy_" + name + ".csv", &csv, &why)) << why;
    return csv;
  }

  static VarSpec Spec(const refdata::ReferenceCsv& csv, int lags, WindowKind kind, int rows) {
    VarSpec spec;
    spec.variables = csv.variables;
    spec.lags = lags;
    spec.deterministic = Deterministic::kConstant;
    spec.window.kind = kind;
    spec.window.rows = static_cast<std::size_t>(rows);
    return spec;
  }

  // Feeds data rows [0, last) of csv.
  static void Feed(const refdata::ReferenceCsv& csv, Eigen::Index last, VarEstimator* est) {
    for (Eigen::Index t = 0; t < last; ++t) {
      ASSERT_TRUE(est->Update(csv.values.row(t).transpose()).status.ok());
    }
  }

  std::string dir_;
  json ref_;
};

double Rel(double a, double b) { return std::abs(a - b) / std::max(std::abs(b), 1e-300); }

TEST_F(ConstancyReference, NyblomHansenMatchesNumpy) {
  ASSERT_EQ(ref_["nyblom"].size(), 3u);
  for (const json& c : ref_["nyblom"]) {
    const refdata::ReferenceCsv csv = Data(c["case"]);
    const int lags = c["lags"];
    const int rows = c["rows"];
    const bool sliding = c["window"] == "sliding";
    VarEstimator est(
        Spec(csv, lags, sliding ? WindowKind::kSliding : WindowKind::kExpanding, rows));
    Feed(csv, csv.values.rows(), &est);
    ASSERT_EQ(est.rows_in_window(), rows);
    NyblomResult r;
    const Status st = NyblomHansenTest(est, &r);
    ASSERT_TRUE(st.ok()) << st.ToString();
    const std::string where = std::string(c["case"]) + "/" + std::string(c["window"]);
    std::printf("Nyblom-Hansen %s: joint %.10g (numpy %.10g, rel %.2e)\n", where.c_str(), r.joint,
                static_cast<double>(c["joint"]), Rel(r.joint, c["joint"]));
    EXPECT_LE(Rel(r.joint, c["joint"]), kRelTol) << where << " joint " << r.joint;
    ASSERT_EQ(r.equation.size(), static_cast<Eigen::Index>(c["equation"].size()));
    for (Eigen::Index i = 0; i < r.equation.size(); ++i) {
      EXPECT_LE(Rel(r.equation[i], c["equation"][i]), kRelTol) << where << " equation " << i;
    }
  }
}

TEST_F(ConstancyReference, EqualityWaldMatchesNumpySandwich) {
  const refdata::ReferenceCsv csv = Data("garch");
  const int lags = 2;
  ASSERT_EQ(ref_["equality"].size(), 2u);
  for (const json& c : ref_["equality"]) {
    CovarianceOptions options;
    ASSERT_TRUE(ParseCovarianceKind(c["kind"], &options.kind));
    // Reference: the first 200 estimation rows; recent: the last 200 (sliding window).
    VarEstimator reference(Spec(csv, lags, WindowKind::kExpanding, 0));
    Feed(csv, lags + static_cast<int>(c["reference_rows"]), &reference);
    VarEstimator recent(Spec(csv, lags, WindowKind::kSliding, c["recent_rows"]));
    Feed(csv, csv.values.rows(), &recent);
    CovarianceContext a, b;
    ASSERT_TRUE(CovarianceContext::Create(reference, options, &a).ok());
    ASSERT_TRUE(CovarianceContext::Create(recent, options, &b).ok());
    EqualityResult r;
    ASSERT_TRUE(EqualityWaldTest(a, b, &r).ok());
    EXPECT_EQ(r.df, c["df"]);
    std::printf("equality %s: W %.10g (numpy %.10g, rel %.2e)\n", std::string(c["kind"]).c_str(),
                r.statistic, static_cast<double>(c["statistic"]), Rel(r.statistic, c["statistic"]));
    EXPECT_LE(Rel(r.statistic, c["statistic"]), kRelTol) << c["kind"];
  }
}

TEST_F(ConstancyReference, LawMatchesImhof) {
  ASSERT_GE(ref_["survival"].size(), 15u);
  double worst = 0.0;
  for (const json& c : ref_["survival"]) {
    const double got = NyblomSurvival(c["x"], c["p"]);
    worst = std::max(worst, std::abs(got - static_cast<double>(c["survival"])));
    EXPECT_NEAR(got, static_cast<double>(c["survival"]), kLawTol)
        << "p = " << c["p"] << ", x = " << c["x"];
  }
  std::printf("survival: worst absolute difference from Imhof %.2e\n", worst);
  for (const json& c : ref_["critical"]) {
    const double got = NyblomCriticalValue(c["alpha"], c["p"]);
    std::printf("p = %d: 5%% point %.10f (Imhof %.10f)\n", static_cast<int>(c["p"]), got,
                static_cast<double>(c["value"]));
    EXPECT_NEAR(got, static_cast<double>(c["value"]), 1e-7) << "p = " << c["p"];
  }
}

TEST(ConstancyPublished, HansenTable1FivePercent) {
  // Hansen 1992, J. Policy Modeling 14, Table 1 (from memory), 5% column.
  const double table[] = {0.470, 0.749, 1.01, 1.24, 1.47};
  for (int p = 1; p <= 5; ++p) {
    const double c = NyblomCriticalValue(0.05, p);
    std::printf("p = %d: 5%% critical value %.5f (Hansen 1992: %.3f)\n", p, c, table[p - 1]);
    EXPECT_NEAR(c, table[p - 1], 0.02) << "p = " << p;
  }
  // Cramer-von Mises asymptotic 5% point (Anderson & Darling 1952; from memory): 0.4614.
  EXPECT_NEAR(NyblomCriticalValue(0.05, 1), 0.4614, 1e-4);
}

}  // namespace
}  // namespace rimwatch
