// Residual misspecification diagnostics of a VAR: pure functions on matrices.
//
// Input convention: e is T x n (rows = time, oldest first), the residuals e_t = y_t - Phi x_t of
// T consecutive estimation rows; x (Breusch-Godfrey only) is T x k, the regressors x_t of the
// same rows. T below is always e.rows(). Every test returns a Status and fills a result struct;
// on a non-OK Status the struct is left unspecified. Failures (never NaN):
//   kInvalidArgument  a lag order out of range, shapes that do not match
//   kNonFinite        an input entry is NaN or +-Inf (the message names row and column)
//   kNotEnoughRows    T too small for the statistic (the message gives the bound)
//   kUnavailable      a residual (or squared residual) column is constant, so the statistic
//                     divides by zero
//   kRankDeficient    a residual covariance is singular, or an auxiliary regressor matrix does
//                     not have full column rank, to working accuracy
//
// Where the statistics come from (each is checked against that source in
// tests/reference/diagnostics_reference_test.cc):
//   ARCH-LM       Engle (1982), "Autoregressive conditional heteroscedasticity...", Econometrica
//                 50. Per equation i, s_t = e_ti^2 is regressed on (1, s_{t-1}, ..., s_{t-q})
//                 over the T - q rows t = q+1..T; LM = (T - q) R^2 ~ chi2(q), R^2 centred. F form
//                 (R^2 / q) / ((1 - R^2) / (T - 2q - 1)) ~ F(q, T - 2q - 1). This is
//                 statsmodels 0.13.5 het_arch(e_i, nlags=q) with its default ddof = 0. R^2 is
//                 computed as ESS / TSS of the regression on centred lags, which keeps full
//                 relative accuracy when R^2 is tiny (1 - RSS / TSS loses about eps / R^2).
//   Ljung-Box     Ljung & Box (1978), Biometrika 65. Per equation, demeaned, r_j = c_j / c_0 with
//                 c_j = sum_{t>j} (e_t - ebar)(e_{t-j} - ebar) / T; Q = T (T + 2) sum_{j<=h}
//                 r_j^2 / (T - j) ~ chi2(h - model_df). statsmodels 0.13.5 acorr_ljungbox(e_i,
//                 lags=[h], model_df=model_df). For residuals of a VAR(p) the per-equation
//                 reference distribution is only approximate whatever model_df is (the p n^2
//                 estimated coefficients act on the whole system); model_df = 0 is the default
//                 and what the monitor uses, the caller may pass p as a conservative
//                 correction.
//   Portmanteau   Hosking (1980), JASA 75; Luetkepohl (2005), New Introduction to Multiple Time
//                 Series Analysis, Sec. 4.4.3. C_j = (1/T) sum_{t>j} u_t u_{t-j}', u_t the
//                 demeaned residuals (statsmodels 0.13.5 VARResults.test_whiteness demeans;
//                 with a constant in the VAR the mean is zero anyway).
//                 Adjusted Q*_h = T^2 sum_{j=1..h} tr(C_j' C_0^{-1} C_j C_0^{-1}) / (T - j),
//                 unadjusted Q_h = T sum_j tr(...); both ~ chi2(n^2 (h - p)) for a stable VAR(p).
//                 Computed as ||L^{-1} C_j L^{-T}||_F^2 with C_0 = L L'.
//   Breusch-      Luetkepohl (2005), Sec. 4.4.4; Edgerton & Shukur (1999), "Testing
//   Godfrey LM    autocorrelation in a system perspective", Econometric Reviews 18. Auxiliary
//                 regressions, pre-sample lags of e set to zero:
//                   unrestricted  e_t on (x_t, e_{t-1}, ..., e_{t-h}), residual covariance S_U
//                   restricted    e_t on x_t,                          residual covariance S_R
//                 (both divided by T; for full-sample OLS residuals S_R = e'e / T exactly, for a
//                 window whose Phi is not the unweighted OLS of these rows, e.g. a forgetting
//                 window, the restricted regression keeps LM >= 0).
//                 LM_h = T (K - tr(S_R^{-1} S_U)) ~ chi2(h K^2), K = n.
//                 Edgerton-Shukur F form (Rao 1951 F approximation to Wilks' lambda):
//                   FLM_h = ((1 - R_r^2)^{-1/r} - 1) (N r - q) / (K m) ~ F(h K^2, N r - q),
//                   R_r^2 = 1 - |S_U| / |S_R|, m = K h, q = K m / 2 - 1,
//                   r = ((K^2 m^2 - 4) / (K^2 + m^2 - 5))^{1/2} (r = 1 when K^2 + m^2 - 5 <= 0),
//                   N = T - k - m - (K - m + 1) / 2, k = columns of x.
//                 df2 = N r - q is kept real (not truncated to an integer). statsmodels has no
//                 VAR Breusch-Godfrey test: the reference is an independent numpy implementation.
//   Jarque-Bera   Jarque & Bera (1987), International Statistical Review 55. Per equation, moments
//                 m_k = (1/T) sum (e_t - ebar)^k: skew = m3 / m2^{3/2}, kurt = m4 / m2^2,
//                 JB = T/6 (skew^2 + (kurt - 3)^2 / 4) ~ chi2(2). statsmodels 0.13.5
//                 stats.stattools.jarque_bera.
//   Multivariate  Luetkepohl (2005), Sec. 4.5. u_t demeaned, S = (1/T) sum u_t u_t' (ML, not
//   normality     df-adjusted), S = P P' (Cholesky, P lower), w_t = P^{-1} u_t;
//                 b1_i = (1/T) sum w_ti^3, b2_i = (1/T) sum w_ti^4 - 3;
//                 skewness T b1'b1 / 6 ~ chi2(n), kurtosis T b2'b2 / 24 ~ chi2(n), joint = sum ~
//                 chi2(2n). statsmodels 0.13.5 VARResults.test_normality (joint statistic).
//
// Windows: WindowResiduals() turns the rows a VarEstimator keeps (buffer(): z_t = [x_t; y_t]) and
// its current Phi into a ResidualSample for these functions. Every buffered row counts once:
// under a forgetting window the diagnostics are unweighted over the buffered rows.
//
// Thread safety: pure functions; no shared state.
#pragma once

#include <Eigen/Core>
#include <cstddef>
#include <cstdint>

#include "rimwatch/engine/status.h"
#include "rimwatch/engine/var_estimator.h"

namespace rimwatch {

// Residuals and regressors of T consecutive estimation rows, oldest first.
struct ResidualSample {
  Eigen::MatrixXd residuals;     // T x n, e_t = y_t - Phi x_t
  Eigen::MatrixXd regressors;    // T x k, x_t
  int lags = 0;                  // p of the VAR that produced them
  std::int64_t first_index = 0;  // estimation index (1-based) of the oldest row; 0 when unknown
};

// rows: (k + n) x T, column t = [x_t; y_t] (the layout of RowBuffer::Ordered()); phi: n x k.
Status ResidualsFromRows(const Eigen::Ref<const Eigen::MatrixXd>& rows,
                         const Eigen::Ref<const Eigen::MatrixXd>& phi, int lags,
                         ResidualSample* out);

// The most recent max_rows buffered rows of `est` (0 = all buffered rows) with the estimator's
// current Phi. Fails with the estimator's rank status, or kNotEnoughRows when nothing is
// buffered.
Status WindowResiduals(const VarEstimator& est, std::size_t max_rows, ResidualSample* out);

struct ArchLmResult {
  int lags = 0;                 // q
  std::int64_t rows_used = 0;   // T - q rows in each auxiliary regression
  int df = 0;                   // q
  Eigen::VectorXd r_squared;    // n, centred R^2 of each auxiliary regression
  Eigen::VectorXd statistic;    // n, (T - q) R^2
  Eigen::VectorXd p_value;      // n, P(chi2(q) > LM)
  Eigen::VectorXd f_statistic;  // n
  int f_df1 = 0;                // q
  int f_df2 = 0;                // T - 2q - 1
  Eigen::VectorXd f_p_value;    // n
};
// REQUIRES lags >= 1. Needs T >= 2 lags + 2.
Status ArchLmTest(const Eigen::Ref<const Eigen::MatrixXd>& e, int lags, ArchLmResult* out);

struct LjungBoxResult {
  int lags = 0;  // h
  int model_df = 0;
  int df = 0;                 // h - model_df
  std::int64_t rows = 0;      // T
  Eigen::VectorXd statistic;  // n
  Eigen::VectorXd p_value;    // n
};
// REQUIRES lags >= 1, 0 <= model_df < lags. Needs T >= lags + 1.
Status LjungBoxTest(const Eigen::Ref<const Eigen::MatrixXd>& e, int lags, int model_df,
                    LjungBoxResult* out);

struct PortmanteauResult {
  int lags = 0;      // h
  int var_lags = 0;  // p
  std::int64_t rows = 0;
  double statistic = 0.0;  // adjusted Q*_h
  int df = 0;              // n^2 (h - p)
  double p_value = 1.0;
  double unadjusted_statistic = 0.0;  // Q_h
  double unadjusted_p_value = 1.0;
};
// REQUIRES var_lags >= 0, lags > var_lags. Needs T >= lags + 1 and T > n.
Status PortmanteauTest(const Eigen::Ref<const Eigen::MatrixXd>& e, int lags, int var_lags,
                       PortmanteauResult* out);

struct BreuschGodfreyResult {
  int lags = 0;  // h
  std::int64_t rows = 0;
  int regressors = 0;         // k
  double lm_statistic = 0.0;  // LM_h
  int lm_df = 0;              // h n^2
  double lm_p_value = 1.0;
  double wilks_ratio = 1.0;  // |S_U| / |S_R| = 1 - R_r^2
  double rao_r = 1.0;        // r
  double f_statistic = 0.0;  // FLM_h
  int f_df1 = 0;             // h n^2
  double f_df2 = 0.0;        // N r - q
  double f_p_value = 1.0;
};
// x: T x k regressors of the original model (k may be 0). REQUIRES lags >= 1.
// Needs T >= k + n (lags + 1), so that S_U can be nonsingular.
Status BreuschGodfreyTest(const Eigen::Ref<const Eigen::MatrixXd>& e,
                          const Eigen::Ref<const Eigen::MatrixXd>& x, int lags,
                          BreuschGodfreyResult* out);

struct JarqueBeraResult {
  std::int64_t rows = 0;
  int df = 2;
  Eigen::VectorXd skewness;   // n, m3 / m2^{3/2}
  Eigen::VectorXd kurtosis;   // n, m4 / m2^2 (not excess)
  Eigen::VectorXd statistic;  // n
  Eigen::VectorXd p_value;    // n
};
// Needs T >= 2.
Status JarqueBeraTest(const Eigen::Ref<const Eigen::MatrixXd>& e, JarqueBeraResult* out);

struct MultivariateNormalityResult {
  std::int64_t rows = 0;
  Eigen::VectorXd skewness;         // n, b1
  Eigen::VectorXd excess_kurtosis;  // n, b2
  double skewness_statistic = 0.0;  // T b1'b1 / 6
  int skewness_df = 0;              // n
  double skewness_p_value = 1.0;
  double kurtosis_statistic = 0.0;  // T b2'b2 / 24
  int kurtosis_df = 0;              // n
  double kurtosis_p_value = 1.0;
  double statistic = 0.0;  // joint
  int df = 0;              // 2n
  double p_value = 1.0;
};
// Needs T > n.
Status MultivariateNormalityTest(const Eigen::Ref<const Eigen::MatrixXd>& e,
                                 MultivariateNormalityResult* out);

// Lag orders for RunResidualDiagnostics (from memory: orders commonly used for quarterly and
// monthly macro VARs; the portmanteau order must exceed p, else that test reports
// kInvalidArgument).
struct DiagnosticOptions {
  int arch_lags = 4;             // q >= 1
  int ljung_box_lags = 10;       // h >= 1
  int ljung_box_model_df = 0;    // 0 <= model_df < h
  int portmanteau_lags = 12;     // h > p
  int breusch_godfrey_lags = 4;  // h >= 1
};

struct ResidualDiagnostics {
  Status arch_status;
  ArchLmResult arch;
  Status ljung_box_status;
  LjungBoxResult ljung_box;
  Status portmanteau_status;
  PortmanteauResult portmanteau;
  Status breusch_godfrey_status;
  BreuschGodfreyResult breusch_godfrey;
  Status jarque_bera_status;
  JarqueBeraResult jarque_bera;
  Status normality_status;
  MultivariateNormalityResult normality;
};

// Every test above on one sample; each keeps its own Status.
ResidualDiagnostics RunResidualDiagnostics(const ResidualSample& sample,
                                           const DiagnosticOptions& options);

}  // namespace rimwatch
