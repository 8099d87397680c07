// RestrictionMonitor: a monitored linear restriction R theta = r (q rows, wald.h) of the VAR.
//
// Two outputs per row.
//   (i)  The rolling robust Wald test of R theta = r on the tracking window, on the rows where
//        the pipeline computes robust statistics: W = (R theta - r)'(R V R')^{-1}(R theta - r)
//        with R V R' from CovarianceContext::Restricted (wald.h). Its p-value path is REPORTED;
//        it is not the alarm rule (a rolling test compared with a fixed alpha at every look
//        raises false alarms far more often than alpha).
//   (ii) The alarm rule: a change-point scan of the restricted-coefficient scores of the
//        reference estimator (expanding since the last reset) over the rows after a training
//        sample, with thresholds simulated so that the chance of any false alarm within the
//        horizon is alpha. It watches for the restriction to stop holding after training (a
//        Granger link that appears, a lag that becomes relevant); a restriction already false in
//        the training sample shows in the rolling Wald path, not in this alarm.
//
// Scores. Before row t is folded in, the reference estimate restricted to R theta = r is
// Phi~_{t-1} (RestrictedCoefficients below: restricted least squares on rows 1..t-1). The
// restricted one-step residual of row t, scaled by the estimator's f_t = 1 + x_t'(X'X)_{t-1}^{-1}
// x_t, is u_t = (y_t - Phi~_{t-1} x_t) / sqrt(f_t) (var_estimator.h gives f_t). With R_i the q x k
// block of R for equation i, and E the n_e equations R touches:
//   z_ti = R_i x_t (q-vector),  s_t = R (u_t (x) x_t) = sum_{i in E} u_ti z_ti.
// Under H0 Phi~_{t-1} is consistent and depends on rows before t only, so s_t is a martingale
// difference, and sum_{t <= n} s_t behaves like a Brownian motion with the covariance of the
// restricted-coefficient scores R (e_t (x) x_t): as for ordinary recursive residuals, the
// estimation error of Phi~_{t-1} drops out of the increments (W(t) - int_0^t W(s)/s ds is again a
// Brownian motion). If R theta moves by delta after row tau, the restricted estimate cannot absorb
// the change (it keeps R theta~ = r; only the other coefficients drift, through their
// correlation with the restricted regressors), so s_t drifts by about R (I (x) M) R' delta
// (M = E x x'): close to the full information of the restricted coefficients, which an
// unrestricted recursive residual would lose as its estimate learns the new coefficient.
//
// The window statistic (tau, n], w = n - tau rows, built from prefix sums:
//   dS  = sum s_t                                       (q)
//   dV  = sum V_t,  V_t = sum_{i,j in E} Om_ij z_ti z_tj'   (Var(s_t | x_t) at Om, q x q)
//   rho = sum u_tE' Om^{-1} u_tE / (w n_e)              (local volatility relative to Om)
//   H   = rho dV = C C' (Cholesky),  y = C^{-1} dS,  Q = |y|^2,  Q_K = y' K^{-1} y,
//   L   = w ln(1 + Q_K / (w - Q)).
// Om is the second moment of the touched equations' residuals u over the training rows
// (fixed at arming). K = Lp^{-1} J Lp^{-T}, with J = sum s_t s_t' (robust) and
// Lp Lp' = rho_all sum V_t (homoskedastic) pooled over every scored row since the reset, refreshed
// every kKernelStride rows: it carries the heteroskedasticity that the homoskedastic window
// normaliser misses (e.g. GARCH variance moving with the lagged levels), while rho carries the
// local level of volatility. For one touched equation and K = I, L = w ln(RSS_0 / RSS_1) is
// exactly twice the log-likelihood ratio of the window regression of u on z (the F test of
// zero coefficients, error variance unknown): its law is F-based and does not depend on the
// regressors, so persistent or trending-mean regressors do not distort it.
// Candidates: tau = arming row (since arming), and tau = n - w for each w of a geometric grid
// w_0 rho^j < H that fits after arming; a candidate of w rows is evaluated every
// max(1, w / stride_divisor) rows and its value held in between. Each candidate reads its
// likelihood ratio less a scale penalty,
//   P_w = L - gamma ln(H / w)   (0 for w >= H; gamma = scale_penalty, default 2),
//   G_n = max over the candidates' held values P_w;  warn when G_n >= c_warn, critical when
//   G_n >= c_crit.
// Why the penalty: under H0 each L is about chi2(q), whose upper tail falls like e^{-c/2}, and
// over the horizon the scan sees about H / w nearly independent windows of w rows, so the
// shortest windows reach the highest levels by multiplicity (about 2 ln(H / w) above the level of
// one look) and, with one common threshold, they set it for every change. gamma = 2 removes the
// leading multiplicity term and brings the scales much closer to an even footing (short windows
// still lead somewhat: in tests/unit/restriction_monitor_test.cc the two shortest of 9 grid
// windows give 78% of the null crossings at gamma = 0 and 51% at gamma = 2). The effective level
// for a window of w rows is c + 2 ln(H / w): low for the long windows that moderate changes need,
// high for the short ones (the multiscale calibration of Duembgen and Spokoiny 2001, "Multiscale
// testing of qualitative hypotheses", Ann. Statist. 29, Sec. 2, there on the root scale sqrt(2
// ln(1/h)); the penalised scan of Chan and Walther 2013, "Detection with the scan and the average
// likelihood ratio", Statistica Sinica 23; both from memory). The thresholds are still simulated
// for the penalised maximum, so the guarantee below is unchanged; what moves is which changes
// are found sooner. On the calibration design (q = 2, H = 2000, w_0 = 50) c_crit goes from 19.4
// (gamma = 0) to 13.6: the effective level of a 283-row window drops to 17.5, that of a 50-row
// window rises to 21.0, so a change large enough to show in 50 rows is flagged a little later
// and the moderate ones sooner (median delay of break (b) 278 rows instead of 312). gamma = 0
// gives the unpenalised scan.
// Without the penalty this is a window-limited generalized likelihood ratio scan (Lai 1995,
// "Sequential changepoint detection in quality control and dynamical systems", JRSS B 57, Sec. 3;
// Lai 1998, "Information bounds and quick detection of parameter changes in stochastic systems",
// IEEE Trans. Inf. Theory 44): max over the change row and the unknown q-dimensional change of
// the likelihood ratio of a drift in the scores.
//
// Thresholds. c_warn and c_crit are the levels that at most floor(alpha P) of P simulated null
// path maxima max_{0 < t <= H} G_t reach (penalty included). Each path runs exactly the scan code
// the live monitor runs, on rows whose residuals u_t ~ N(0, I_{n_e}) and regressors x~_t ~ N(0, I)
// (on the columns R touches) are drawn by DeterministicRandom with a fixed seed: N_0 = m - k
// training rows (Om, pooled sums), then H scanned rows. The law depends on (the pattern of R, m -
// k, H, grid) and not on the data; results are cached per design (penalty included) in the process
// (a mutex guards the cache), so live and replay get the same thresholds to the last bit.
//
// Guarantee (per horizon): P(any false critical alarm within the first H scanned rows after
// arming) = alpha asymptotically, up to the Monte Carlo error of the calibration, s.d.
// sqrt(alpha (1 - alpha) / P) (0.0034 at alpha = 0.05, P = 4000); the same for the warning level
// with warn_false_alarm. Assumptions: stationary VAR, martingale-difference errors; the window
// laws are exact for Gaussian homoskedastic errors with one touched equation, and conditional
// heteroskedasticity enters through rho (local level) and K (pooled shape).
// tests/calibration/restriction_calibration_test.cc shows the rate on a VAR(2) with Gaussian and
// GARCH(1,1) errors (n = 3, q = 2, m = 200, H = 2000, 2000 runs each: 4.15% and 5.20% at
// alpha = 5%) and the detection delay beside an oracle Page CUSUM that knows every coefficient
// (median 1.89 times the oracle's for a Granger link 0 -> 0.3, 2.12 times at gamma = 0). Beyond H
// scanned rows the thresholds stay and the guarantee does not extend (the chance keeps growing);
// the pipeline resets the monitor (with its reference estimator) to start a new horizon.
//
// Inputs per row (see Observe): the reference estimator after it folded the row in, the
// UpdateResult of that fold, and on robust rows the tracking window's CovarianceContext.
//
// Reading: statistic = G_n (chi-square-like units: each candidate is about chi2(q) under H0 before
// its penalty; G_n may be negative early on), warn = c_warn, critical = c_crit, clear = c_warn.
// Unarmed while training (n <= m) and for the first w_0 - 1 scanned rows (no candidate window is
// complete yet).
//
// Costs. Live, per row: the reference coefficients and the restricted estimate (O(n_e k^2 q +
// q^3)), O(n_e^2 q^2) for the score pieces, and per due candidate a q x q Cholesky (about two to
// four candidates a row with the default grid and stride). Memory: a ring of max(grid) + 1 rows
// of (q + q (q + 1) / 2 + 1) doubles (1601 rows x 6 doubles at q = 2, H = 2000).
// Calibration: P (N_0 + H) (n_e + c) normals and the same scan: about 1 s at q = 2, and 4 s at
// q = 9 in one equation, for H = 2000 and P = 4000 on one core, once per design per process
// (calibration_paths trades that time against the Monte Carlo error above).
//
// Thread safety: a RestrictionMonitor has one owner; CalibrateScan / CachedScanThresholds may be
// called from any thread. Deterministic: the same inputs give bit-identical readings.
#pragma once

#include <Eigen/Core>
#include <cstdint>
#include <string>
#include <vector>

#include "rimwatch/engine/alert.h"
#include "rimwatch/engine/covariance.h"
#include "rimwatch/engine/status.h"
#include "rimwatch/engine/var_estimator.h"
#include "rimwatch/engine/var_spec.h"
#include "rimwatch/engine/wald.h"

namespace rimwatch {

// ---------------------------------------------------------------------------------------------
// The scan and its calibration (public for tests and for the report).

// The restriction's shape as the scan sees it, the candidate windows and the schedule.
struct ScanDesign {
  int q = 1;  // restriction rows, >= 1
  // One q x c block per touched equation: R_i restricted to the c regressor columns any block
  // touches (the simulation draws those c regressors). At least one block, all the same shape.
  std::vector<Eigen::MatrixXd> blocks = {Eigen::MatrixXd::Identity(1, 1)};
  std::int64_t training_scores = 190;  // N_0: scored rows before arming (m - k), >= n_e + 1
  std::int64_t horizon_rows = 2000;    // H, >= 1
  std::int64_t min_window = 20;        // w_0: no candidate with fewer rows, >= q + 1
  std::vector<std::int64_t> windows;   // the grid, increasing, each in [w_0, H)
  bool since_arming = true;            // candidate tau = arming row
  std::int64_t stride_divisor = 16;    // evaluation stride max(1, w / stride_divisor), >= 1
  double scale_penalty = 2.0;          // gamma >= 0: a candidate of w rows reads L - gamma ln(H/w)

  int equations() const { return static_cast<int>(blocks.size()); }  // n_e
  bool IsValid(std::string* why) const;
};

// The design for restriction and spec: blocks from R, N_0 = m - k, and the grid
// round(w_0 ratio^j) < H (duplicates dropped). REQUIRES a valid restriction for spec with at
// least one non-zero block, min_window >= q + 1, ratio > 1.
ScanDesign MakeScanDesign(const VarSpec& spec, const LinearRestriction& restriction,
                          std::int64_t training_rows, std::int64_t horizon_rows,
                          std::int64_t min_window, double ratio);
// The grid alone.
std::vector<std::int64_t> ScanWindows(std::int64_t min_window, std::int64_t horizon_rows,
                                      double ratio);

// gamma ln(H / w) for a candidate of w rows (0 when w >= H).
double ScalePenalty(const ScanDesign& design, std::int64_t w);

// One row's score pieces (see the file comment). V packed lower row-major: (i, j), j <= i, at
// i (i + 1) / 2 + j.
struct ScanRow {
  Eigen::VectorXd s;  // q
  Eigen::VectorXd v;  // q (q + 1) / 2
  double r = 0.0;     // u_E' Om^{-1} u_E
};

// Builds ScanRow from residuals and regressor images, with Om fixed (shared by the live monitor
// and the simulation).
class ScanScores {
 public:
  ScanScores() = default;
  // REQUIRES om positive definite, n_e x n_e.
  ScanScores(int q, const Eigen::MatrixXd& om);
  // u: n_e residuals; z: q x n_e, column a = z for the a-th touched equation.
  void Build(const Eigen::Ref<const Eigen::VectorXd>& u, const Eigen::Ref<const Eigen::MatrixXd>& z,
             ScanRow* row) const;

 private:
  int q_ = 0;
  Eigen::MatrixXd om_;
  Eigen::MatrixXd om_inv_;
};

// Sums over the training rows, turned into Om and the pooled sums at arming (shared by the live
// monitor and the simulation).
class ScanTraining {
 public:
  ScanTraining() = default;
  ScanTraining(int q, int equations);
  // u: n_e residuals; z: q x n_e as in ScanScores::Build.
  void Add(const Eigen::Ref<const Eigen::VectorXd>& u, const Eigen::Ref<const Eigen::MatrixXd>& z);
  std::int64_t rows() const { return rows_; }
  // Om = sum u u' / N, sum s s', sum V_t at Om, sum r_t (= N n_e) and N. False when Om is not
  // positive definite (fewer than n_e + 1 rows, or a degenerate residual).
  bool Finish(Eigen::MatrixXd* om, Eigen::MatrixXd* pooled_ss, Eigen::MatrixXd* pooled_v,
              double* pooled_r) const;

 private:
  int q_ = 0;
  int equations_ = 0;
  Eigen::MatrixXd uu_;
  std::vector<Eigen::MatrixXd> zz_;  // sum z_a z_b' for a <= b, index a * n_e + b
  Eigen::MatrixXd ss_;
  std::int64_t rows_ = 0;
};

struct ScanValue {
  bool available = false;   // false: no candidate evaluated yet, or every normaliser failed
  double statistic = 0.0;   // G_n (penalised)
  std::int64_t window = 0;  // w of the maximising candidate
};

// The scan state: prefix sums (S, V, r) since arming, a ring of their past values, and pooled
// sums (J, V, r, count) since the reset for K.
class ChangeScan {
 public:
  ChangeScan() = default;
  explicit ChangeScan(ScanDesign design);

  // Arming with the training rows' pooled sums: sum s s' (q x q), sum V_t (q x q), sum r_t and
  // their count.
  void Start(const Eigen::MatrixXd& pooled_ss, const Eigen::MatrixXd& pooled_v, double pooled_r,
             std::int64_t pooled_rows);
  // The next scanned row; returns G_n, the largest held candidate value.
  ScanValue Add(const ScanRow& row);
  // The same state update and schedule for simulation: the largest value among the candidates
  // evaluated at this row that exceeds `floor`, else `floor`.
  double AddAbove(const ScanRow& row, double floor);

  const ScanDesign& design() const { return design_; }
  std::int64_t rows() const { return rows_; }  // rows added since Start()
  bool started() const { return started_; }

  // Rows between refreshes of K^{-1} from the pooled sums.
  static constexpr std::int64_t kKernelStride = 16;

 private:
  void Push(const ScanRow& row);
  void RefreshKernel();
  double Ratio(const double* base, std::int64_t w);  // Q_K / max(w - Q, eps w), or -1
  std::int64_t Stride(std::int64_t w) const;
  double Penalty(int slot, std::int64_t w) const;
  template <typename Visit>
  void ForEachDue(Visit visit);

  ScanDesign design_;
  double (*statistic_)(int, int, const double*, const double*, std::int64_t, const double*,
                       double*) = nullptr;
  int record_ = 0;  // doubles per row: S (q), V packed (q (q + 1) / 2), r
  std::int64_t ring_rows_ = 0;
  std::vector<double> ring_;
  std::vector<double> zero_;  // the record at arming
  std::vector<double> current_;
  std::vector<double> work_;
  Eigen::MatrixXd pooled_ss_, pooled_v_;
  double pooled_r_ = 0.0;
  std::int64_t pooled_rows_ = 0;
  Eigen::MatrixXd kernel_inv_;   // K^{-1}
  std::vector<double> penalty_;  // per grid window
  std::vector<double> held_;     // latest value per candidate slot, -inf = none
  std::vector<std::int64_t> held_window_;
  std::vector<std::int64_t> stride_;     // per grid window
  std::vector<std::int64_t> countdown_;  // rows until a grid window is due
  std::int64_t next_arming_ = 0;         // row when "since arming" is due next
  std::int64_t ring_pos_ = 0;            // ring slot of the current row
  std::int64_t rows_ = 0;
  bool started_ = false;
};

struct ScanThresholds {
  double warn = 0.0;      // c_warn
  double critical = 0.0;  // c_crit
  int paths = 0;          // P
};

// Path maxima max_{0 < t <= H} G_t of `paths` simulated null paths (see the file comment). A path
// on which no candidate is ever available contributes 0. REQUIRES design.IsValid().
std::vector<double> SimulateScanMaxima(const ScanDesign& design, int paths, std::uint64_t seed);
// Thresholds: for each alpha the smallest simulated level that at most floor(alpha P) path
// maxima reach (the (P - floor(alpha P) + 1)-th smallest maximum).
// REQUIRES design.IsValid(), 0 < critical_alpha <= warn_alpha < 1, alpha P >= 1.
ScanThresholds CalibrateScan(const ScanDesign& design, double warn_alpha, double critical_alpha,
                             int paths, std::uint64_t seed);
// As CalibrateScan, computed once per distinct argument set in the process.
ScanThresholds CachedScanThresholds(const ScanDesign& design, double warn_alpha,
                                    double critical_alpha, int paths, std::uint64_t seed);

// ---------------------------------------------------------------------------------------------
// The monitor.

// Restricted least squares on the estimator's (weighted) rows, equation-wise metric
// A = (X'WX)^{-1} (Rao 1973, Linear Statistical Inference and Its Applications, Sec. 4a.9):
//   theta~ = theta^ - (I (x) A) R' [R (I (x) A) R']^{-1} (R theta^ - r),
// the minimiser of sum_t w_t |y_t - Phi x_t|^2 subject to R theta = r. Only the equations R
// touches change. Errors: the estimator's rank status; kInvalidArgument on shape;
// kRankDeficient when R (I (x) A) R' is singular (redundant rows of R).
Status RestrictedCoefficients(const VarEstimator& est, const LinearRestriction& restriction,
                              Eigen::MatrixXd* phi);
// The same from the estimator's unrestricted coefficients already at hand (est.Coefficients,
// which must have succeeded): saves the second triangular solve on a monitor's row.
Status RestrictedCoefficients(const VarEstimator& est, const LinearRestriction& restriction,
                              const Eigen::MatrixXd& unrestricted, Eigen::MatrixXd* phi);

struct RestrictionMonitorOptions {
  // m: reference rows (counted since the reference estimator's reset) before the scan arms; the
  // pipeline passes ModelSpec::training_rows. Range >= k + 10 (checked with the spec).
  std::int64_t training_rows = 200;
  // H: scanned rows over which the false-alarm chance is held; the pipeline passes
  // AlarmSpec::horizon * training_rows (ModelSpec::HorizonRows()). Range >= 1.
  std::int64_t horizon_rows = 2000;
  // Chance of any false critical alarm within H scanned rows (AlarmSpec::false_alarm), (0, 0.5].
  double false_alarm = 0.05;
  // The same for the warning level (AlarmSpec::warn_false_alarm), [false_alarm, 0.9].
  double warn_false_alarm = 0.20;
  // w_0, the shortest candidate window; 0 selects max(50, 10 q). Short windows react sooner to
  // large changes but raise the thresholds for every change. Range 0 or >= q + 1.
  std::int64_t min_window = 0;
  // Grid ratio > 1. A change needing w rows of evidence is flagged by the first grid window
  // >= w, so the delay can exceed the ideal by up to this factor; cost grows like 1 / ln(ratio).
  double window_ratio = 1.4142135623730951;
  // A candidate of w rows is evaluated every max(1, w / stride_divisor) rows (its value is held
  // in between). Larger: a finer schedule, more candidates a row and a slower calibration; at the
  // default the schedule adds at most w / 16 rows to a delay. Range >= 1.
  std::int64_t stride_divisor = 16;
  // gamma: a candidate of w rows reads L - gamma ln(H / w) (see the file comment). 2 removes the
  // multiplicity of short windows, so moderate changes are found sooner; 0 is the unpenalised
  // scan (one level for every window: quicker on changes that show within about w_0 rows).
  // Range [0, 10].
  double scale_penalty = 2.0;
  // Simulated paths P. Range: false_alarm * P >= 20. Trade-off: Monte Carlo s.d. of the achieved
  // chance sqrt(alpha (1 - alpha) / P) against calibration time (linear in P).
  int calibration_paths = 4000;
  // Seed of DeterministicRandom for the calibration (fixed so live and replay agree).
  std::uint64_t seed = 0x7e57a1c7ed5ca11ULL;

  // w_0 actually used for q restriction rows.
  std::int64_t MinWindow(int q) const;
  // True when usable with q restriction rows and spec; otherwise *why (may be null) names the
  // field, its value and the rule.
  bool IsValid(int q, const VarSpec& spec, std::string* why) const;
};

struct RestrictionReading {
  MonitorReading alarm;  // the scan against its thresholds (see the file comment)
  // Rolling robust Wald test on the tracking window: fresh on rows given a CovarianceContext.
  bool has_wald = false;
  Status wald_status;  // not OK: the test could not be computed this row (message says why)
  WaldResult wald;
  // Scan details.
  std::int64_t rows_since_reset = 0;  // n = reference.rows_in_window()
  std::int64_t scanned_rows = 0;      // rows scanned since arming (n - m)
  bool within_horizon = false;        // 0 < scanned_rows <= H: the guarantee applies
  std::int64_t change_window = 0;     // w of the maximising candidate (valid when armed)
  Eigen::VectorXd departure;          // R theta_n - r of the reference (empty if rank deficient)
};

class RestrictionMonitor {
 public:
  // Validates spec, the restriction's shape (UserRestriction rules; R must touch at least one
  // coefficient) and options, then calibrates (or fetches from the process cache) the thresholds.
  // `spec` is the model's VarSpec.
  static Status Create(const VarSpec& spec, LinearRestriction restriction,
                       const RestrictionMonitorOptions& options, RestrictionMonitor* out);
  RestrictionMonitor() = default;

  // Call once per model row after the reference estimator (expanding window, reset together
  // with this monitor) has folded the row in, with the UpdateResult of that fold. `tracking` is
  // the tracking window's CovarianceContext on robust rows and nullptr otherwise (it feeds only
  // the rolling Wald test). Rules:
  //   - An update that was refused or did not enter estimation changes nothing and returns the
  //     last reading.
  //   - n = reference.rows_in_window(); a smaller n than last time means the reference was reset,
  //     and this monitor resets too.
  //   - Rows n <= m train (unarmed reading; rows with a one-step prediction feed Om and the
  //     pooled sums); the scan arms at the first row n >= m and scans every later row.
  //   - A row without a one-step prediction or with a non-finite score is skipped (unarmed
  //     reading saying why; state unchanged). Arming needs at least n_e + 1 training scores.
  // Errors (state unchanged): kInvalidArgument when the reference has another shape or is not an
  // expanding window.
  Status Observe(const VarEstimator& reference, const UpdateResult& update,
                 const CovarianceContext* tracking, RestrictionReading* reading);
  // Forget the scan and train again; the pipeline resets the reference estimator at the same row.
  void Reset();

  const LinearRestriction& restriction() const { return restriction_; }
  const RestrictionMonitorOptions& options() const { return options_; }
  const ScanDesign& design() const { return scan_.design(); }
  const ScanThresholds& thresholds() const { return thresholds_; }
  bool armed() const { return scan_.started(); }

 private:
  bool Residuals(const VarEstimator& reference, const UpdateResult& update, Eigen::VectorXd* u,
                 Eigen::MatrixXd* z) const;
  bool Arm();
  void RollingWald(const CovarianceContext* tracking, RestrictionReading* reading) const;
  void FillAlarm(const ScanValue& value, RestrictionReading* reading) const;

  VarSpec spec_;
  LinearRestriction restriction_;
  RestrictionMonitorOptions options_;
  ScanThresholds thresholds_;
  ChangeScan scan_;
  ScanScores scores_;
  ScanTraining training_;
  std::vector<int> equations_;  // touched equations, in order
  // Restricted estimate (touched equations' rows) after the previous row, when available.
  Eigen::MatrixXd previous_;
  bool has_previous_ = false;
  Status restricted_status_;  // of the latest restricted estimate
  std::int64_t last_rows_ = 0;
  RestrictionReading last_;
};

}  // namespace rimwatch
