// Parameter constancy of the VAR on a window: the Nyblom-Hansen score statistic, a robust Wald
// test of equal coefficients in two non-overlapping samples, and a monitor that evaluates either
// one on successive blocks of rows with a Bonferroni split of the false-alarm chance.
//
// Nyblom-Hansen statistic (Nyblom 1989, "Testing for the constancy of parameters over time",
// JASA 84; Hansen 1992, "Testing for parameter instability in linear models", J. Policy Modeling
// 14, Sec. 3). On the T rows of a window with least-squares residuals e_t at the window estimate,
// the scores g_t = e_t (x) x_t (n k entries, index eq * k + j like theta) sum to zero. With
// partial sums S_t = sum_{s<=t} g_s and the heteroskedasticity-robust V = (1/T) sum_t g_t g_t',
//   L = (1/T^2) sum_{t=1..T} S_t' V^{-1} S_t
// (Hansen 1992 writes L_c = (1/T) sum S_t' V~^{-1} S_t with V~ = sum g g', the same number).
// Joint: all n k coefficients; per equation i: the k scores e_it x_t with their own V_i. Under
// constant coefficients (stationary regressors, martingale-difference errors, conditional
// heteroskedasticity allowed) L converges to sum_{j=1..p} int_0^1 B_j(r)^2 dr over p independent
// Brownian bridges, p the number of coefficients tested; large L means the coefficients moved.
// Statsmodels has no robust Nyblom-Hansen test; tests/reference/make_constancy_reference.py
// checks the statistic against a numpy transcription of the formula above.
//
// The asymptotic law. int_0^1 B^2 = sum_j Z_j^2 / (j pi)^2 (Karhunen-Loeve), so the sum over p
// bridges has characteristic function
//   phi(t) = prod_j (1 - 2 i t / (j pi)^2)^{-p/2} = (sin(w) / w)^{-p/2},  w = sqrt(2 i t)
// (Anderson & Darling 1952, "Asymptotic theory of certain goodness of fit criteria based on
// stochastic processes", Ann. Math. Statist. 23, Sec. 4). P(L > x) comes from the Gil-Pelaez
// inversion  P(L > x) = 1/2 + (1/pi) int_0^inf Im[exp(-i t x) phi(t)] / t dt  (Gil-Pelaez 1951,
// "Note on the inversion theorem", Biometrika 38; Imhof 1961, Biometrika 48, for quadratic forms),
// evaluated with t = u^2 by Gauss-Legendre panels; critical values by root finding (TOMS 748).
// Mean p / 6, variance p / 45.
//
// Equality test. For two samples without common rows, theta_ref and theta_rec are asymptotically
// independent, so under equal coefficients
//   W = d' (V_ref + V_rec)^{-1} d,  d = theta_rec - theta_ref,  W ~ chi2(n k)
// with robust V (White 1980; the covariance kinds of covariance.h). With n k = 21 coefficients
// and 200 rows per sample the chi2 form over-rejects at small levels (about 1.5% at a nominal
// 0.5%, HC3, by simulation), because V_rec is estimated from few rows. The small-sample form
// treats W as Hotelling's T^2 with nu degrees of freedom (Hotelling 1931, "The generalization of
// Student's ratio", Ann. Math. Statist. 2):
//   F = W (nu - p + 1) / (nu p) ~ F(p, nu - p + 1),  p = n k,  nu = T - k of the smaller sample
// (conservative when both samples are small: their sum has more degrees of freedom). The
// ConstancyMonitor uses this form.
//
// Thread safety: the free functions are pure (critical values are cached behind a mutex); a
// ConstancyMonitor has one owner. Deterministic.
#pragma once

#include <Eigen/Core>
#include <cstdint>
#include <string>

#include "rimwatch/engine/alert.h"
#include "rimwatch/engine/covariance.h"
#include "rimwatch/engine/status.h"
#include "rimwatch/engine/var_estimator.h"
#include "rimwatch/engine/var_spec.h"

namespace rimwatch {

// P(L > x) for the sum of p independent int_0^1 B(r)^2 dr (B a Brownian bridge). Absolute error
// below 1e-9. REQUIRES p >= 1; x <= 0 gives 1.
double NyblomSurvival(double x, int p);
// The x with NyblomSurvival(x, p) = alpha, to a relative 1e-10. REQUIRES 0 < alpha < 1, p >= 1.
// Cached per (alpha, p) in the process.
double NyblomCriticalValue(double alpha, int p);

struct NyblomResult {
  std::int64_t rows = 0;       // T
  int parameters = 0;          // n k (joint)
  double joint = 0.0;          // L over all n k coefficients
  double joint_p_value = 1.0;  // NyblomSurvival(joint, n k); NaN unless p-values were asked for
  Eigen::VectorXd equation;    // n values: L over each equation's k coefficients
  Eigen::VectorXd equation_p_value;  // NyblomSurvival(equation[i], k); empty unless asked for
};

// Whether NyblomHansenStatistic / NyblomHansenTest also compute the p-values (each a numerical
// integral, NyblomSurvival, far dearer than the statistics): a monitor that compares the
// statistic with precomputed critical values needs them only for an alert's text.
enum class NyblomPValues { kCompute, kSkip };

// From regressors x (k x T) and least-squares residuals e (n x T) of the same T rows, oldest
// first. Errors: kInvalidArgument on shape mismatch; kNonFinite; kNotEnoughRows when T <= n k;
// kRankDeficient when V (or a V_i) is singular to working accuracy.
Status NyblomHansenStatistic(const Eigen::Ref<const Eigen::MatrixXd>& x,
                             const Eigen::Ref<const Eigen::MatrixXd>& e, NyblomResult* out,
                             NyblomPValues p_values = NyblomPValues::kCompute);
// On the window of an estimator: its buffered rows and residuals at its current estimate.
// Errors: the estimator's rank status; kUnavailable for a forgetting window with lambda < 1
// (unequal weights) or when the buffer holds fewer rows than the window (truncated); as above.
Status NyblomHansenTest(const VarEstimator& window, NyblomResult* out,
                        NyblomPValues p_values = NyblomPValues::kCompute);

struct EqualityResult {
  double statistic = 0.0;    // W
  int df = 0;                // p = n k
  double p_value = 1.0;      // P(chi2(p) > W)
  double dof = 0.0;          // nu
  bool has_f = false;        // nu > p - 1: the small-sample form is defined
  double f_statistic = 0.0;  // W (nu - p + 1) / (nu p)
  double f_df2 = 0.0;        // nu - p + 1
  double f_p_value = 1.0;    // P(F(p, nu - p + 1) > f_statistic); equals p_value when !has_f
};

// Critical value of W for the small-sample form: p nu / (nu - p + 1) times the upper-alpha
// quantile of F(p, nu - p + 1); the chi2(p) quantile when nu <= p - 1.
double EqualityCriticalValue(double alpha, int p, double nu);

// REQUIRES equal sizes; nu = T - k of the smaller sample. Errors: kInvalidArgument on shape;
// kNonFinite; kRankDeficient when V_ref + V_rec is singular to working accuracy.
Status EqualityWaldTest(const Eigen::Ref<const Eigen::VectorXd>& theta_ref,
                        const Eigen::Ref<const Eigen::MatrixXd>& v_ref,
                        const Eigen::Ref<const Eigen::VectorXd>& theta_rec,
                        const Eigen::Ref<const Eigen::MatrixXd>& v_rec, double nu,
                        EqualityResult* out);
// theta() and Full() of two contexts, nu = the smaller info().dof. The caller guarantees that
// their rows do not overlap.
Status EqualityWaldTest(const CovarianceContext& reference, const CovarianceContext& recent,
                        EqualityResult* out);

// ---------------------------------------------------------------------------------------------
// ConstancyMonitor
//
// Evaluates one test on successive blocks after training. Rows are counted on the reference
// estimator (expanding since this monitor's last reset): n = reference.rows_in_window(). The
// monitor arms at n = m and evaluates at n_j = m + j B (j = 1, 2, ...):
//   kNyblomHansen       joint L on the tracking window at n_j, against its critical value for
//                       alpha / E (p = n k). With a sliding tracking window of W <= B rows the
//                       evaluated windows do not overlap.
//   kReferenceEquality  W between the reference estimator as it stood at row n_j - W (rows
//                       1..n_j - W since the reset) and the tracking window at n_j (rows
//                       n_j - W + 1..n_j): two samples without common rows. Needs a sliding
//                       tracking window with W <= B (checked by IsValid); critical value
//                       EqualityCriticalValue(alpha / E, n k, W - k) (the small-sample form).
// E = max(1, floor(H / B)) evaluations fall within the horizon; each is held to alpha / E (and
// warn_false_alarm / E for the warning level).
// Guarantee: by Bonferroni's inequality, P(any false critical alarm within H rows after arming)
// <= E (alpha / E) = alpha whatever the dependence between evaluations (conservative by design;
// nearly exact when evaluations are close to independent, as with disjoint Nyblom windows),
// given that each evaluation has its asymptotic size. tests/calibration/
// constancy_calibration_test.cc shows the share by simulation. Beyond H the same levels apply:
// the chance since arming keeps growing (the bound does not extend), while any E consecutive
// evaluations again hold it to alpha by the same inequality. The Monitor (monitor.h) runs both
// tests as "constancy.<ConstancyTestName>" on a sliding window of B rows.
//
// Reading: statistic = the latest evaluation's statistic (L or W), held until the next one;
// critical / warn = the critical values above; clear = warn. Unarmed before the first evaluation
// and after an evaluation that failed (status says why).
struct ConstancyMonitorOptions {
  enum class Test { kNyblomHansen, kReferenceEquality };
  Test test = Test::kNyblomHansen;
  // m: reference rows before arming (ModelSpec::training_rows). Range >= k + 10.
  std::int64_t training_rows = 200;
  // H: rows after arming over which the chance is held (AlarmSpec::horizon * training_rows).
  std::int64_t horizon_rows = 2000;
  // B: rows between evaluations; the tracking window length for a sliding window is the
  // natural choice. Range [1, H].
  std::int64_t block_rows = 200;
  double false_alarm = 0.05;       // (0, 0.5]
  double warn_false_alarm = 0.20;  // [false_alarm, 0.9]
  // kReferenceEquality: covariance of both samples (robust kinds recommended).
  CovarianceOptions covariance;

  std::int64_t Evaluations() const;  // E
  // True when usable with the tracking window's spec; otherwise *why names the field and rule.
  bool IsValid(const VarSpec& tracking, std::string* why) const;
};

const char* ConstancyTestName(ConstancyMonitorOptions::Test test);  // "nyblom_hansen" | ...

struct ConstancyReading {
  MonitorReading alarm;
  bool evaluated = false;       // a fresh evaluation on this row
  Status status;                // of the latest evaluation
  std::int64_t evaluation = 0;  // j of the latest evaluation (0: none yet)
  bool within_horizon = false;  // j <= E
  // kNyblomHansen: the latest evaluation. Its p-values are computed only when the statistic
  // reaches warn (the alert text names the equation that moved most, with its p-value): the
  // joint p-value stays NaN, and equation_p_value holds that one equation's entry (the others
  // NaN), or is empty below warn.
  NyblomResult nyblom;
  EqualityResult equality;  // kReferenceEquality: the latest evaluation
};

class ConstancyMonitor {
 public:
  // Validates options against the tracking spec and computes the critical values.
  static Status Create(const VarSpec& tracking, const ConstancyMonitorOptions& options,
                       ConstancyMonitor* out);
  ConstancyMonitor() = default;

  // Call once per model row after both estimators folded the row in (the same row). A row that
  // entered neither estimator should not be passed; a repeated reference count returns the last
  // reading, a smaller one means the reference was reset and resets this monitor.
  // Errors (state unchanged): kInvalidArgument when the estimators' shapes differ from the spec
  // or the reference is not an expanding window.
  Status Observe(const VarEstimator& tracking, const VarEstimator& reference,
                 ConstancyReading* reading);
  void Reset();

  const ConstancyMonitorOptions& options() const { return options_; }
  double critical_value() const { return critical_; }
  double warn_value() const { return warn_; }

 private:
  void Evaluate(const VarEstimator& tracking, std::int64_t j, ConstancyReading* r);
  void Fill(ConstancyReading* r) const;

  VarSpec spec_;
  ConstancyMonitorOptions options_;
  double critical_ = 0.0;
  double warn_ = 0.0;
  std::int64_t last_rows_ = 0;
  bool has_reference_ = false;  // kReferenceEquality: snapshot for the next evaluation
  Eigen::VectorXd reference_theta_;
  Eigen::MatrixXd reference_cov_;
  double reference_dof_ = 0.0;
  ConstancyReading last_;
};

}  // namespace rimwatch
