// Residual diagnostics: constructed answers, identities between the tests, invariances the
// formulas imply, and every error path. The statsmodels / numpy comparison is in
// tests/reference/diagnostics_reference_test.cc.
#include "rimwatch/engine/diagnostics.h"

#include <gtest/gtest.h>

#include <Eigen/Dense>
#include <cmath>
#include <limits>
#include <random>

#include "sim_var.h"

namespace rimwatch {
namespace {

using Eigen::MatrixXd;
using Eigen::VectorXd;

constexpr double kEps = std::numeric_limits<double>::epsilon();
// Closed forms evaluated in a different order than the engine: a few hundred eps.
constexpr double kTightTol = 512 * kEps;
// Invariances through a Cholesky factor or a least-squares solve of a moderately conditioned
// matrix (condition numbers here are below 1e3): 1e-11.
constexpr double kSolveTol = 4.5e4 * kEps;

MatrixXd Gaussian(int rows, int cols, unsigned seed) {
  std::mt19937_64 gen(seed);
  std::normal_distribution<double> normal(0.0, 1.0);
  MatrixXd m(rows, cols);
  for (int j = 0; j < cols; ++j) {
    for (int i = 0; i < rows; ++i) m(i, j) = normal(gen);
  }
  return m;
}

// Skewed, fat-tailed draws (centred exponential cubed) so that the moment tests are far from 0.
MatrixXd Skewed(int rows, int cols, unsigned seed) {
  std::mt19937_64 gen(seed);
  std::exponential_distribution<double> expo(1.0);
  MatrixXd m(rows, cols);
  for (int j = 0; j < cols; ++j) {
    for (int i = 0; i < rows; ++i) m(i, j) = expo(gen) - 1.0 + 0.3 * std::pow(expo(gen), 2);
  }
  return m;
}

double Rel(double got, double want) { return std::abs(got - want) / std::abs(want); }

// ---------------------------------------------------------------------------------------------
// Ljung-Box

// e_t = (-1)^t with T even has mean 0 and sum_{t>j} e_t e_{t-j} = (-1)^j (T - j), so
// r_j = (-1)^j (T - j) / T and Q = T (T + 2) sum_j (T - j) / T^2 = (T + 2) / T sum_j (T - j)
// (Ljung & Box 1978 definition; closed form derived here).
TEST(LjungBoxTest, AlternatingSeriesClosedForm) {
  const int t = 40, h = 5;
  MatrixXd e(t, 1);
  for (int i = 0; i < t; ++i) e(i, 0) = (i % 2 == 0) ? 1.0 : -1.0;
  LjungBoxResult r;
  ASSERT_TRUE(LjungBoxTest(e, h, 0, &r).ok());
  double sum = 0.0;
  for (int j = 1; j <= h; ++j) sum += t - j;
  EXPECT_LE(Rel(r.statistic[0], (t + 2.0) / t * sum), kTightTol);
  EXPECT_EQ(r.df, h);
  EXPECT_LT(r.p_value[0], 1e-30);
}

TEST(LjungBoxTest, ModelDfOnlyChangesDegreesOfFreedom) {
  const MatrixXd e = Gaussian(120, 2, 3);
  LjungBoxResult a, b;
  ASSERT_TRUE(LjungBoxTest(e, 8, 0, &a).ok());
  ASSERT_TRUE(LjungBoxTest(e, 8, 3, &b).ok());
  EXPECT_EQ(a.statistic, b.statistic);
  EXPECT_EQ(b.df, 5);
  EXPECT_LT(b.p_value[0], a.p_value[0]);  // fewer df, same statistic: smaller tail
}

// ---------------------------------------------------------------------------------------------
// Jarque-Bera and multivariate normality

// Symmetric two-point sample +-1: skewness 0, kurtosis 1, JB = T/6 (0 + (1 - 3)^2 / 4) = T / 6.
// Three-point {-1, 0, 1} in equal shares: m2 = m4 = 2/3, kurtosis 3/2, JB = T/6 (9/4)/4.
// (Jarque & Bera 1987 statistic; the moments are elementary.)
TEST(JarqueBeraTest, TwoAndThreePointSamplesClosedForm) {
  const int t = 60;
  MatrixXd e(t, 2);
  for (int i = 0; i < t; ++i) {
    e(i, 0) = (i % 2 == 0) ? 1.0 : -1.0;
    e(i, 1) = static_cast<double>(i % 3) - 1.0;
  }
  JarqueBeraResult r;
  ASSERT_TRUE(JarqueBeraTest(e, &r).ok());
  EXPECT_LE(std::abs(r.skewness[0]), kTightTol);
  EXPECT_LE(std::abs(r.kurtosis[0] - 1.0), kTightTol);
  EXPECT_LE(Rel(r.statistic[0], t / 6.0), kTightTol);
  EXPECT_LE(std::abs(r.skewness[1]), kTightTol);
  EXPECT_LE(std::abs(r.kurtosis[1] - 1.5), kTightTol);
  EXPECT_LE(Rel(r.statistic[1], t / 6.0 * 2.25 / 4.0), kTightTol);
  // chi2(2) survival is exp(-x / 2).
  EXPECT_LE(Rel(r.p_value[0], std::exp(-r.statistic[0] / 2.0)), 1e3 * kEps);
}

// With one variable the Cholesky-standardised statistic is the Jarque-Bera statistic (Luetkepohl
// 2005, Sec. 4.5: w_t = u_t / sd).
TEST(MultivariateNormalityTest, OneVariableEqualsJarqueBera) {
  const MatrixXd e = Skewed(150, 1, 11);
  JarqueBeraResult jb;
  MultivariateNormalityResult mn;
  ASSERT_TRUE(JarqueBeraTest(e, &jb).ok());
  ASSERT_TRUE(MultivariateNormalityTest(e, &mn).ok());
  EXPECT_LE(Rel(mn.statistic, jb.statistic[0]), kSolveTol);
  EXPECT_LE(Rel(mn.skewness[0], jb.skewness[0]), kSolveTol);
  EXPECT_LE(Rel(mn.excess_kurtosis[0], jb.kurtosis[0] - 3.0), kSolveTol);
  EXPECT_EQ(mn.df, 2);
}

// Exactly uncorrelated demeaned columns give a diagonal Cholesky factor, so the joint statistic
// is the sum of the per-column Jarque-Bera statistics (Luetkepohl 2005, Sec. 4.5).
TEST(MultivariateNormalityTest, UncorrelatedColumnsAddUpToJarqueBera) {
  MatrixXd e = Skewed(200, 3, 5);
  e = (e.rowwise() - e.colwise().mean()).eval();
  e = Eigen::HouseholderQR<MatrixXd>(e).householderQ() * MatrixXd::Identity(200, 3) * 3.0;
  e.col(1) *= 0.01;  // scale does not matter
  JarqueBeraResult jb;
  MultivariateNormalityResult mn;
  ASSERT_TRUE(JarqueBeraTest(e, &jb).ok());
  ASSERT_TRUE(MultivariateNormalityTest(e, &mn).ok());
  // The thin Q of centred columns spans their space: orthonormal columns with mean 0.
  EXPECT_LE(Rel(mn.statistic, jb.statistic.sum()), kSolveTol);
  EXPECT_LE(Rel(mn.skewness_statistic, 200.0 / 6.0 * jb.skewness.squaredNorm()), kSolveTol);
}

// u_t -> L u_t with L lower triangular, positive diagonal, leaves w_t = P^{-1} u_t unchanged
// (the Cholesky factor becomes L P), so every part of the statistic is invariant.
TEST(MultivariateNormalityTest, InvariantToLowerTriangularMixing) {
  const MatrixXd e = Skewed(180, 3, 21);
  MatrixXd l(3, 3);
  l << 2.0, 0.0, 0.0, -0.7, 0.5, 0.0, 1.3, 0.4, 3.0;
  MultivariateNormalityResult a, b;
  ASSERT_TRUE(MultivariateNormalityTest(e, &a).ok());
  ASSERT_TRUE(MultivariateNormalityTest(e * l.transpose(), &b).ok());
  EXPECT_LE(Rel(b.skewness_statistic, a.skewness_statistic), kSolveTol);
  EXPECT_LE(Rel(b.kurtosis_statistic, a.kurtosis_statistic), kSolveTol);
  EXPECT_GT(a.statistic, 20.0);  // the skewed draws are clearly non-normal
}

// ---------------------------------------------------------------------------------------------
// ARCH-LM

// With q = 1 the auxiliary regression has one slope, so its centred R^2 is the squared sample
// correlation of s_t and s_{t-1} over rows 2..T (common practice identity).
TEST(ArchLmTest, OneLagRSquaredIsSquaredCorrelation) {
  const MatrixXd e = Skewed(100, 2, 9);
  ArchLmResult r;
  ASSERT_TRUE(ArchLmTest(e, 1, &r).ok());
  for (int i = 0; i < 2; ++i) {
    const VectorXd s = e.col(i).array().square();
    const VectorXd a = s.tail(99).array() - s.tail(99).mean();
    const VectorXd b = s.head(99).array() - s.head(99).mean();
    const double corr = a.dot(b) / std::sqrt(a.squaredNorm() * b.squaredNorm());
    EXPECT_LE(Rel(r.r_squared[i], corr * corr), 1e-10) << i;
    EXPECT_LE(Rel(r.statistic[i], 99.0 * corr * corr), 1e-10) << i;
    // F(1, T - 3) = (T - 3) R^2 / (1 - R^2).
    EXPECT_LE(Rel(r.f_statistic[i], 97.0 * corr * corr / (1.0 - corr * corr)), 1e-10) << i;
  }
  EXPECT_EQ(r.rows_used, 99);
  EXPECT_EQ(r.f_df2, 97);
}

// Volatility clustering (variance switching in long blocks) is detected; the signs of e do not
// matter, only e^2.
TEST(ArchLmTest, DetectsVolatilityBlocksAndIgnoresSigns) {
  MatrixXd e = Gaussian(300, 1, 17);
  for (int i = 0; i < 300; ++i) e(i, 0) *= ((i / 50) % 2 == 0) ? 0.2 : 3.0;
  ArchLmResult a, b;
  ASSERT_TRUE(ArchLmTest(e, 4, &a).ok());
  ASSERT_TRUE(ArchLmTest(-e, 4, &b).ok());
  EXPECT_LT(a.p_value[0], 1e-4);
  EXPECT_EQ(a.statistic[0], b.statistic[0]);
}

// ---------------------------------------------------------------------------------------------
// Portmanteau

// With n = 1, C_j / C_0 = r_j, so Q*_h = T^2 sum r_j^2 / (T - j) = T / (T + 2) times the
// Ljung-Box statistic (Luetkepohl 2005, Sec. 4.4.3; Ljung & Box 1978).
TEST(PortmanteauTest, OneVariableIsScaledLjungBox) {
  const MatrixXd e = Gaussian(90, 1, 2);
  PortmanteauResult pm;
  LjungBoxResult lb;
  ASSERT_TRUE(PortmanteauTest(e, 6, 1, &pm).ok());
  ASSERT_TRUE(LjungBoxTest(e, 6, 0, &lb).ok());
  EXPECT_LE(Rel(pm.statistic, 90.0 / 92.0 * lb.statistic[0]), kSolveTol);
  EXPECT_EQ(pm.df, 5);
}

// C_j -> A C_j A' for u_t -> A u_t, and tr(C_j' C_0^{-1} C_j C_0^{-1}) is invariant to any
// nonsingular A (similarity), so both statistics are.
TEST(PortmanteauTest, InvariantToNonsingularMixing) {
  const MatrixXd e = Gaussian(150, 3, 4);
  MatrixXd a(3, 3);
  a << 1.0, 2.0, -1.0, 0.5, -3.0, 0.2, 4.0, 0.1, 1.5;
  PortmanteauResult x, y;
  ASSERT_TRUE(PortmanteauTest(e, 10, 2, &x).ok());
  ASSERT_TRUE(PortmanteauTest(e * a.transpose(), 10, 2, &y).ok());
  EXPECT_LE(Rel(y.statistic, x.statistic), kSolveTol);
  EXPECT_LE(Rel(y.unadjusted_statistic, x.unadjusted_statistic), kSolveTol);
  EXPECT_EQ(x.df, 9 * 8);
  EXPECT_GT(x.statistic, x.unadjusted_statistic);  // T / (T - j) > 1
}

// ---------------------------------------------------------------------------------------------
// Breusch-Godfrey

// Residuals and regressors of an OLS fit built here (Eigen's QR) on simulated VAR data.
ResidualSample OlsSample(const MatrixXd& y, int p) {
  const int n = static_cast<int>(y.cols()), t = static_cast<int>(y.rows()) - p;
  MatrixXd x(t, 1 + n * p);
  for (int r = 0; r < t; ++r) {
    x(r, 0) = 1.0;
    for (int l = 1; l <= p; ++l) x.row(r).segment(1 + (l - 1) * n, n) = y.row(p + r - l);
  }
  const MatrixXd yy = y.bottomRows(t);
  ResidualSample s;
  s.regressors = x;
  s.residuals = yy - x * x.householderQr().solve(yy);
  s.lags = p;
  return s;
}

// For n = 1 the system test is the single-equation Breusch-Godfrey test: LM = T (1 - RSS_U /
// RSS_R) and the Rao F is exact, F = ((RSS_R - RSS_U) / h) / (RSS_U / (T - k - h)) (Edgerton &
// Shukur 1999; Rao 1951, r = 1 for one response).
TEST(BreuschGodfreyTest, OneVariableReducesToSingleEquationF) {
  const ResidualSample s = OlsSample(testing::SimulateVar(1, 2, 160, 8), 2);
  const int h = 3, t = 158, k = 3;
  BreuschGodfreyResult r;
  ASSERT_TRUE(BreuschGodfreyTest(s.residuals, s.regressors, h, &r).ok());
  MatrixXd w(t, k + h);
  w.leftCols(k) = s.regressors;
  w.rightCols(h).setZero();
  for (int l = 1; l <= h; ++l) w.col(k + l - 1).tail(t - l) = s.residuals.col(0).head(t - l);
  const VectorXd eu = s.residuals.col(0) - w * w.colPivHouseholderQr().solve(s.residuals.col(0));
  const double rss_u = eu.squaredNorm(), rss_r = s.residuals.squaredNorm();
  EXPECT_LE(Rel(r.lm_statistic, t * (1.0 - rss_u / rss_r)), 1e-9);
  EXPECT_LE(Rel(r.f_statistic, ((rss_r - rss_u) / h) / (rss_u / (t - k - h))), 1e-9);
  EXPECT_EQ(r.rao_r, 1.0);
  EXPECT_DOUBLE_EQ(r.f_df2, t - k - h);
}

// Rao's r = ((K^2 m^2 - 4) / (K^2 + m^2 - 5))^{1/2}: K = 2, h = 1 (m = 2) gives sqrt(12 / 3) = 2;
// K = 3, h = 2 (m = 6) gives sqrt(320 / 40) = sqrt(8).
TEST(BreuschGodfreyTest, RaoExponentFromTheFormula) {
  for (const auto& [n, h, want] : {std::tuple{2, 1, 2.0}, std::tuple{3, 2, std::sqrt(8.0)}}) {
    const ResidualSample s = OlsSample(testing::SimulateVar(n, 1, 200, 12 + n), 1);
    BreuschGodfreyResult r;
    ASSERT_TRUE(BreuschGodfreyTest(s.residuals, s.regressors, h, &r).ok());
    EXPECT_LE(Rel(r.rao_r, want), kTightTol) << n << " " << h;
    // N = T - k - m - (K - m + 1) / 2, df2 = N r - (K m / 2 - 1).
    const double m = n * h, big_n = 199.0 - (1 + n) - m - (n - m + 1) / 2.0;
    EXPECT_LE(Rel(r.f_df2, big_n * want - (n * m / 2.0 - 1.0)), kTightTol);
    EXPECT_GE(r.lm_statistic, 0.0);
  }
}

// e_t -> A e_t maps the lagged-residual block onto a block of the same span, so S_U and S_R
// become A S A' and both LM and the determinant ratio are unchanged.
TEST(BreuschGodfreyTest, InvariantToNonsingularMixing) {
  const ResidualSample s = OlsSample(testing::SimulateVar(3, 2, 220, 31), 2);
  MatrixXd a(3, 3);
  a << 1.0, 0.3, 0.0, -2.0, 1.0, 0.5, 0.2, 0.1, 4.0;
  BreuschGodfreyResult x, y;
  ASSERT_TRUE(BreuschGodfreyTest(s.residuals, s.regressors, 2, &x).ok());
  ASSERT_TRUE(BreuschGodfreyTest(s.residuals * a.transpose(), s.regressors, 2, &y).ok());
  EXPECT_LE(Rel(y.lm_statistic, x.lm_statistic), 1e-9);
  EXPECT_LE(Rel(y.f_statistic, x.f_statistic), 1e-9);
}

// Residuals of a VAR(1) fitted to VAR(2) data keep autocorrelation: both forms reject.
TEST(BreuschGodfreyTest, DetectsOmittedLag) {
  const int t = 300;
  MatrixXd y = Gaussian(t, 2, 77);
  for (int i = 2; i < t; ++i) y.row(i) += 0.6 * y.row(i - 2);
  const ResidualSample s = OlsSample(y, 1);
  BreuschGodfreyResult r;
  ASSERT_TRUE(BreuschGodfreyTest(s.residuals, s.regressors, 2, &r).ok());
  EXPECT_LT(r.lm_p_value, 1e-10);
  EXPECT_LT(r.f_p_value, 1e-10);
}

// ---------------------------------------------------------------------------------------------
// Windows

VarSpec Spec(int n, int p, WindowKind kind, std::size_t rows) {
  VarSpec spec;
  for (int i = 0; i < n; ++i) spec.variables.push_back("v" + std::to_string(i));
  spec.lags = p;
  spec.window.kind = kind;
  spec.window.rows = rows;
  return spec;
}

// A sliding window of W rows gives W residuals e_t = y_t - Phi x_t of the last W estimation rows;
// checked against the regressors rebuilt here from the data.
TEST(WindowResidualsTest, SlidingWindowRowsAndResiduals) {
  const MatrixXd y = testing::SimulateVar(2, 2, 150, 5);
  VarEstimator est(Spec(2, 2, WindowKind::kSliding, 60));
  for (int r = 0; r < 150; ++r) ASSERT_TRUE(est.Update(y.row(r).transpose()).status.ok());
  ResidualSample s;
  ASSERT_TRUE(WindowResiduals(est, 0, &s).ok());
  ASSERT_EQ(s.residuals.rows(), 60);
  EXPECT_EQ(s.first_index, 148 - 60 + 1);
  EXPECT_EQ(s.lags, 2);
  MatrixXd phi;
  ASSERT_TRUE(est.Coefficients(&phi).ok());
  for (int i = 0; i < 60; ++i) {
    const int row = 150 - 60 + i;  // data row of estimation row i
    VectorXd x(5);
    x << 1.0, y.row(row - 1).transpose(), y.row(row - 2).transpose();
    EXPECT_EQ(s.regressors.row(i).transpose(), x) << i;
    const VectorXd e = y.row(row).transpose() - phi * x;
    EXPECT_LE((s.residuals.row(i).transpose() - e).cwiseAbs().maxCoeff(), kTightTol) << i;
  }
  ResidualSample last;
  ASSERT_TRUE(WindowResiduals(est, 25, &last).ok());
  EXPECT_EQ(last.residuals, s.residuals.bottomRows(25));
  EXPECT_EQ(last.first_index, s.first_index + 35);
}

TEST(WindowResidualsTest, RankDeficientOrEmptyEstimatorFails) {
  VarEstimator est(Spec(2, 1, WindowKind::kExpanding, 500));
  ResidualSample s;
  EXPECT_EQ(WindowResiduals(est, 0, &s).code(), StatusCode::kNotEnoughRows);
  const MatrixXd y = Gaussian(3, 2, 1);
  for (int r = 0; r < 3; ++r) ASSERT_TRUE(est.Update(y.row(r).transpose()).status.ok());
  EXPECT_EQ(WindowResiduals(est, 0, &s).code(), StatusCode::kRankDeficient);  // 2 rows, k = 3
}

TEST(WindowResidualsTest, ResidualsFromRowsChecksShapes) {
  ResidualSample s;
  EXPECT_EQ(ResidualsFromRows(MatrixXd::Zero(4, 10), MatrixXd::Zero(2, 3), 1, &s).code(),
            StatusCode::kInvalidArgument);
  MatrixXd rows = MatrixXd::Ones(5, 10);
  rows(4, 3) = std::numeric_limits<double>::quiet_NaN();
  EXPECT_EQ(ResidualsFromRows(rows, MatrixXd::Zero(2, 3), 1, &s).code(), StatusCode::kNonFinite);
}

// RunResidualDiagnostics runs each test with its own Status: an invalid portmanteau order does
// not stop the others, and each result equals the single call.
TEST(RunResidualDiagnosticsTest, EachTestKeepsItsStatus) {
  const ResidualSample s = OlsSample(testing::SimulateVar(2, 3, 200, 44), 3);
  DiagnosticOptions options;
  options.portmanteau_lags = 3;  // not above p = 3
  const ResidualDiagnostics d = RunResidualDiagnostics(s, options);
  EXPECT_EQ(d.portmanteau_status.code(), StatusCode::kInvalidArgument);
  ASSERT_TRUE(d.arch_status.ok() && d.ljung_box_status.ok() && d.breusch_godfrey_status.ok() &&
              d.jarque_bera_status.ok() && d.normality_status.ok());
  BreuschGodfreyResult bg;
  ASSERT_TRUE(
      BreuschGodfreyTest(s.residuals, s.regressors, options.breusch_godfrey_lags, &bg).ok());
  EXPECT_EQ(d.breusch_godfrey.lm_statistic, bg.lm_statistic);
  EXPECT_EQ(d.arch.lags, options.arch_lags);
  EXPECT_EQ(d.ljung_box.lags, options.ljung_box_lags);
}

// ---------------------------------------------------------------------------------------------
// Error paths: a Status, never NaN.

TEST(DiagnosticsErrors, NonFiniteResidualNamesRowAndColumn) {
  MatrixXd e = Gaussian(50, 2, 6);
  e(17, 1) = std::numeric_limits<double>::infinity();
  ArchLmResult a;
  const Status st = ArchLmTest(e, 2, &a);
  EXPECT_EQ(st.code(), StatusCode::kNonFinite);
  EXPECT_NE(st.message().find("row 18 column 2"), std::string::npos) << st.message();
  LjungBoxResult lb;
  PortmanteauResult pm;
  BreuschGodfreyResult bg;
  JarqueBeraResult jb;
  MultivariateNormalityResult mn;
  EXPECT_EQ(LjungBoxTest(e, 3, 0, &lb).code(), StatusCode::kNonFinite);
  EXPECT_EQ(PortmanteauTest(e, 3, 1, &pm).code(), StatusCode::kNonFinite);
  EXPECT_EQ(BreuschGodfreyTest(e, MatrixXd::Ones(50, 1), 2, &bg).code(), StatusCode::kNonFinite);
  EXPECT_EQ(JarqueBeraTest(e, &jb).code(), StatusCode::kNonFinite);
  EXPECT_EQ(MultivariateNormalityTest(e, &mn).code(), StatusCode::kNonFinite);
  const MatrixXd ok = Gaussian(50, 2, 6);
  MatrixXd x = MatrixXd::Ones(50, 1);
  x(3, 0) = std::numeric_limits<double>::quiet_NaN();
  EXPECT_EQ(BreuschGodfreyTest(ok, x, 2, &bg).code(), StatusCode::kNonFinite);
}

TEST(DiagnosticsErrors, InvalidLagOrders) {
  const MatrixXd e = Gaussian(60, 2, 7);
  ArchLmResult a;
  LjungBoxResult lb;
  PortmanteauResult pm;
  BreuschGodfreyResult bg;
  EXPECT_EQ(ArchLmTest(e, 0, &a).code(), StatusCode::kInvalidArgument);
  EXPECT_EQ(LjungBoxTest(e, 0, 0, &lb).code(), StatusCode::kInvalidArgument);
  EXPECT_EQ(LjungBoxTest(e, 4, 4, &lb).code(), StatusCode::kInvalidArgument);
  EXPECT_EQ(LjungBoxTest(e, 4, -1, &lb).code(), StatusCode::kInvalidArgument);
  EXPECT_EQ(PortmanteauTest(e, 2, 2, &pm).code(), StatusCode::kInvalidArgument);
  EXPECT_EQ(PortmanteauTest(e, 2, -1, &pm).code(), StatusCode::kInvalidArgument);
  EXPECT_EQ(BreuschGodfreyTest(e, MatrixXd::Ones(60, 1), 0, &bg).code(),
            StatusCode::kInvalidArgument);
  EXPECT_EQ(BreuschGodfreyTest(e, MatrixXd::Ones(59, 1), 1, &bg).code(),
            StatusCode::kInvalidArgument);
  JarqueBeraResult jb;
  EXPECT_EQ(JarqueBeraTest(MatrixXd(10, 0), &jb).code(), StatusCode::kInvalidArgument);
}

TEST(DiagnosticsErrors, TooFewRows) {
  ArchLmResult a;
  LjungBoxResult lb;
  PortmanteauResult pm;
  BreuschGodfreyResult bg;
  JarqueBeraResult jb;
  MultivariateNormalityResult mn;
  // ARCH needs T >= 2q + 2; T = 9 with q = 4 is one short.
  EXPECT_EQ(ArchLmTest(Gaussian(9, 1, 1), 4, &a).code(), StatusCode::kNotEnoughRows);
  EXPECT_TRUE(ArchLmTest(Gaussian(10, 1, 1), 4, &a).ok());
  EXPECT_EQ(LjungBoxTest(Gaussian(5, 1, 1), 5, 0, &lb).code(), StatusCode::kNotEnoughRows);
  EXPECT_EQ(PortmanteauTest(Gaussian(3, 3, 1), 2, 1, &pm).code(), StatusCode::kNotEnoughRows);
  // BG: T >= k + n (h + 1) = 1 + 2 * 4 = 9.
  EXPECT_EQ(BreuschGodfreyTest(Gaussian(8, 2, 1), MatrixXd::Ones(8, 1), 3, &bg).code(),
            StatusCode::kNotEnoughRows);
  EXPECT_TRUE(BreuschGodfreyTest(Gaussian(9, 2, 1), MatrixXd::Ones(9, 1), 3, &bg).ok());
  EXPECT_EQ(JarqueBeraTest(Gaussian(1, 2, 1), &jb).code(), StatusCode::kNotEnoughRows);
  EXPECT_EQ(MultivariateNormalityTest(Gaussian(3, 3, 1), &mn).code(), StatusCode::kNotEnoughRows);
}

TEST(DiagnosticsErrors, ConstantColumnIsUnavailable) {
  MatrixXd e = Gaussian(80, 2, 8);
  e.col(1).setConstant(0.1);  // the mean of 0.1 is not exact in binary: rounding must not count
  LjungBoxResult lb;
  PortmanteauResult pm;
  BreuschGodfreyResult bg;
  JarqueBeraResult jb;
  MultivariateNormalityResult mn;
  EXPECT_EQ(LjungBoxTest(e, 4, 0, &lb).code(), StatusCode::kUnavailable);
  EXPECT_EQ(PortmanteauTest(e, 4, 1, &pm).code(), StatusCode::kUnavailable);
  EXPECT_EQ(BreuschGodfreyTest(e, MatrixXd::Ones(80, 1), 2, &bg).code(), StatusCode::kUnavailable);
  EXPECT_EQ(JarqueBeraTest(e, &jb).code(), StatusCode::kUnavailable);
  EXPECT_EQ(MultivariateNormalityTest(e, &mn).code(), StatusCode::kUnavailable);
  // ARCH works on e^2: a column of +-c has constant squares.
  MatrixXd signs = Gaussian(80, 1, 9).array().sign().matrix() * 0.3;
  ArchLmResult a;
  const Status st = ArchLmTest(signs, 2, &a);
  EXPECT_EQ(st.code(), StatusCode::kUnavailable);
  EXPECT_NE(st.message().find("column 1"), std::string::npos) << st.message();
  EXPECT_EQ(ArchLmTest(MatrixXd::Zero(80, 1), 2, &a).code(), StatusCode::kUnavailable);
  // A huge constant (its squared deviations from the rounded mean would overflow) is still one.
  e.col(1).setConstant(3e200);
  EXPECT_EQ(LjungBoxTest(e, 4, 0, &lb).code(), StatusCode::kUnavailable);
  EXPECT_EQ(JarqueBeraTest(e, &jb).code(), StatusCode::kUnavailable);
}

TEST(DiagnosticsErrors, SingularCovarianceIsRankDeficient) {
  MatrixXd e = Gaussian(100, 3, 10);
  e.col(2) = 2.0 * e.col(0) - 0.5 * e.col(1);
  PortmanteauResult pm;
  BreuschGodfreyResult bg;
  MultivariateNormalityResult mn;
  EXPECT_EQ(PortmanteauTest(e, 4, 1, &pm).code(), StatusCode::kRankDeficient);
  EXPECT_EQ(BreuschGodfreyTest(e, MatrixXd::Ones(100, 1), 1, &bg).code(),
            StatusCode::kRankDeficient);
  EXPECT_EQ(MultivariateNormalityTest(e, &mn).code(), StatusCode::kRankDeficient);
}

TEST(DiagnosticsErrors, CollinearRegressorsAreRankDeficient) {
  const MatrixXd e = Gaussian(100, 2, 12);
  MatrixXd x(100, 3);
  x.col(0).setOnes();
  x.col(1) = Eigen::VectorXd::LinSpaced(100, 1.0, 100.0);
  x.col(2) = 3.0 * x.col(1) - 2.0 * x.col(0);
  BreuschGodfreyResult bg;
  EXPECT_EQ(BreuschGodfreyTest(e, x, 2, &bg).code(), StatusCode::kRankDeficient);
  x.col(2).setZero();
  EXPECT_EQ(BreuschGodfreyTest(e, x, 2, &bg).code(), StatusCode::kRankDeficient);
}

// Residuals of order 1e-150 or 1e150 (fourth powers under- or overflow) give the statistics of
// unit-scale residuals: every test is invariant to the scale of a column. Tiny but varying
// residuals are not mistaken for constants.
TEST(DiagnosticsErrors, ExtremeScalesGiveTheUnitScaleStatistics) {
  const MatrixXd unit = Skewed(120, 2, 13);
  const MatrixXd x = MatrixXd::Ones(120, 1);
  auto all = [&x](const MatrixXd& e, VectorXd* stats) {
    ArchLmResult a;
    LjungBoxResult lb;
    PortmanteauResult pm;
    BreuschGodfreyResult bg;
    JarqueBeraResult jb;
    MultivariateNormalityResult mn;
    ASSERT_TRUE(ArchLmTest(e, 2, &a).ok());
    ASSERT_TRUE(LjungBoxTest(e, 5, 0, &lb).ok());
    ASSERT_TRUE(PortmanteauTest(e, 5, 1, &pm).ok());
    ASSERT_TRUE(BreuschGodfreyTest(e, x, 2, &bg).ok());
    ASSERT_TRUE(JarqueBeraTest(e, &jb).ok());
    ASSERT_TRUE(MultivariateNormalityTest(e, &mn).ok());
    stats->resize(8);
    *stats << a.statistic[0], lb.statistic[1], pm.statistic, bg.lm_statistic, bg.f_statistic,
        jb.statistic[0], mn.skewness_statistic, mn.kurtosis_statistic;
  };
  VectorXd want, tiny, huge;
  all(unit, &want);
  all(unit * 1e-150, &tiny);
  all(unit * 1e150, &huge);
  for (Eigen::Index i = 0; i < want.size(); ++i) {
    EXPECT_LE(Rel(tiny[i], want[i]), kSolveTol) << i;
    EXPECT_LE(Rel(huge[i], want[i]), kSolveTol) << i;
  }
}

}  // namespace
}  // namespace rimwatch
