// Recursive-residual CUSUM: the offline test for the report and the live open-ended monitor.
//
// Recursive residuals. The expanding-window estimator predicts row t before folding it in:
// v_t = y_t - Phi_{t-1} x_t, f_t = 1 + x_t'(X'X)_{t-1}^{-1} x_t, and w_t = v_t / sqrt(f_t). Under
// a constant VAR with Gaussian errors and fixed regressors the w_t (t = k+1..T) are independent
// N(0, Omega) (Brown, Durbin & Evans 1975, "Techniques for testing the constancy of regression
// relationships over time", JRSS B 37, Sec. 2.1); with lagged dependent regressors this holds
// asymptotically. RecursiveResidual() turns an UpdateResult into w_t.
//
// Offline test (Brown, Durbin & Evans 1975, Sec. 2.3). For one equation with N = T - k
// recursive residuals w_{k+1..T}:
//   sigma-hat = sample s.d. of the N residuals, mean removed, divisor N - 1 (Harvey 1990, The
//               Econometric Analysis of Time Series, Sec. 2.6; statsmodels 0.13.5
//               recursive_olsresiduals uses the same: var(ddof=1));
//   W_r       = sum_{t=k+1..r} w_t / sigma-hat,  r = k+1..T  (stored as path[j-1], j = r - k);
//   boundary  = +-[a sqrt(N) + 2 a (r - k) / sqrt(N)], the lines through +-a sqrt(N) at r = k and
//               +-3 a sqrt(N) at r = T; a = 1.143 / 0.948 / 0.850 for 1% / 5% / 10%
//               (BDE 1975, Sec. 2.3; Harvey 1990, Sec. 2.6). The chance that the path crosses a
//               line anywhere is about alpha = 2 [1 - Phi(3a) + exp(-4 a^2) Phi(a)] (BDE 1975,
//               from Durbin 1971), which BdeCrossingProbability() evaluates.
//
// Live monitor (Chu, Stinchcombe & White 1996, "Monitoring structural change", Econometrica 64,
// Sec. 3; boundary crossing law from Robbins & Siegmund 1970, "Boundary crossing probabilities for
// the Wiener process and sample sums", Ann. Math. Statist. 41). See CusumMonitor below.
//
// Section numbers of the sources are cited from memory.
//
// Thread safety: the free functions are pure; a CusumMonitor has one owner.
#pragma once

#include <Eigen/Core>
#include <cstdint>
#include <string>
#include <vector>

#include "rimwatch/engine/alert.h"
#include "rimwatch/engine/status.h"
#include "rimwatch/engine/var_estimator.h"

namespace rimwatch {

// w = v / sqrt(f) of an update. False (w untouched) when the update was refused or carries no
// one-step prediction (the first k rows, or a rank-deficient estimate before the row).
bool RecursiveResidual(const UpdateResult& update, Eigen::VectorXd* w);

// ---------------------------------------------------------------------------------------------
// Offline test (Brown, Durbin & Evans 1975)

// The published constant a(alpha) for alpha = 0.01, 0.05 or 0.10 (BDE 1975, Sec. 2.3:
// 1.143, 0.948, 0.850). Other alpha: kInvalidArgument.
Status BdeBoundaryConstant(double alpha, double* a);

// Approximate chance that standard Brownian motion on [0, 1] crosses +-(a + 2 a t) somewhere:
// 2 [1 - Phi(3a) + exp(-4 a^2) Phi(a)], clamped to [0, 1] (BDE 1975, Sec. 2.3).
double BdeCrossingProbability(double a);

// a sqrt(N) + 2 a j / sqrt(N): the upper line at r = k + j for N recursive residuals.
// REQUIRES: count >= 1.
double BdeBoundary(double a, std::int64_t j, std::int64_t count);

struct RecursiveCusum {
  std::int64_t count = 0;  // N = T - k recursive residuals
  double sigma = 0.0;      // sample s.d. of the residuals (mean removed, divisor N - 1)
  Eigen::VectorXd path;    // W_{k+j} for j = 1..N, path[j - 1]
  // max_j |W_{k+j}| / (sqrt(N) (1 + 2 j / N)): the a whose lines the path just touches; the
  // test at level alpha rejects when statistic > a(alpha).
  double statistic = 0.0;
  std::int64_t statistic_at = 0;  // j of that maximum (1-based)
  double p_value = 1.0;           // BdeCrossingProbability(statistic)

  // First j (1-based) with |W_{k+j}| > BdeBoundary(a, j, N), or 0 when the path stays inside.
  std::int64_t FirstCrossing(double a) const;
};

// One equation's recursive residuals w_{k+1..T}, oldest first. Errors: kNotEnoughRows when
// fewer than 2; kNonFinite naming the first bad entry; kUnavailable when they have zero spread.
Status ComputeRecursiveCusum(const Eigen::Ref<const Eigen::VectorXd>& w, RecursiveCusum* out);

// ---------------------------------------------------------------------------------------------
// Live open-ended monitor

// Root c > 0 of 2 [1 - Phi(c) + c phi(c)] = alpha (Boost.Math normal, TOMS 748 root finder):
// for standard Brownian motion W, P(|W(t)| >= sqrt(t (c^2 + ln t)) for some t >= 1) equals this
// (Robbins & Siegmund 1970; CSW 1996, Sec. 3). REQUIRES 0 < alpha < 1.
double CswCriticalValue(double alpha);

// c = sqrt(-2 ln alpha): for W started at 0 at time 1, P(|W(t) - W(1)| >= sqrt(t (c^2 + ln t)) for
// some t >= 1) = exp(-c^2 / 2) (Robbins & Siegmund 1970, normal mixture with h = 1: the
// martingale t^{-1/2} exp(B(u)^2 / (2t)), u = t - 1, starts at 1 and crosses exp(c^2/2) with
// probability exp(-c^2/2)). REQUIRES 0 < alpha < 1.
double AfterTrainingCriticalValue(double alpha);

// Where the monitored sum starts (see CusumMonitor).
enum class CusumOrigin {
  kAfterTraining,  // S_n = sum_{t=m+1..n} w_t / sigma: only the monitored rows (default)
  kFirstResidual,  // S_n = sum_{t=1..n} w_t / sigma: the training rows too (CSW 1996 as published)
};
const char* CusumOriginName(CusumOrigin origin);  // "after_training" | "first_residual"

struct CusumMonitorOptions {
  // m: recursive residuals in the training sample (counted from the reference estimator's reset;
  // the pipeline passes training_rows - k). Range >= 10; sigma_i comes from these m residuals.
  std::int64_t training = 190;
  // Chance of any false critical alarm over an unbounded horizon (asymptotically), in (0, 0.5].
  double false_alarm = 0.05;
  // The same for the warning level, in [false_alarm, 0.9].
  double warn_false_alarm = 0.20;
  CusumOrigin origin = CusumOrigin::kAfterTraining;

  // True when usable; otherwise *why (may be null) names the field, its value and the rule.
  bool IsValid(std::string* why) const;
};

// CusumMonitor: one open-ended CUSUM per equation on the recursive residuals of the reference
// (expanding, reset with this monitor) estimator.
//
// Count recursive residuals n = 1, 2, ... since Reset(). The first m train: sigma_i is their
// sample s.d. (mean removed, divisor m - 1). For n > m equation i alarms when
//     |S_{n,i}| > b_n(c) = sqrt(n (c^2 + ln(n / m)))        (n counted from the first residual)
// with alpha_i = alpha / n_eq (Bonferroni over the n_eq equations). Index convention: with
// s = n / m and Donsker's theorem, S_n / sqrt(m) behaves like a Brownian motion in s and the
// boundary like sqrt(m) sqrt(s (c^2 + ln s)), s >= 1. Which crossing law applies depends on where
// the sum starts:
//   kAfterTraining  S_n / sqrt(m) ~ W(s) - W(1), zero at s = 1: P(any crossing) -> exp(-c^2/2),
//                   so c = AfterTrainingCriticalValue(alpha_i) (c = 2.4477 at alpha_i = 0.05).
//   kFirstResidual  S_n / sqrt(m) ~ W(s), W(1) ~ N(0, 1): P(any crossing) ->
//                   2 [1 - Phi(c) + c phi(c)], so c = CswCriticalValue(alpha_i) (2.7955 at 0.05).
// (Using the CSW constant with the after-training sum is valid but gives exp(-c^2/2) = 0.020 at
// alpha = 0.05.) The after-training sum is the default: its boundary is lower and it carries no
// training noise, so it detects sooner at the same guarantee.
//
// Guarantee: P(any false critical alarm over an unbounded horizon) -> alpha as m grows (per
// equation alpha / n_eq, so <= alpha for the system). Over a finite horizon it is conservative by
// design (the boundary is open-ended, and a discrete sum crosses less often than Brownian
// motion): at alpha = 0.05 on a VAR with n = 3, m = 193, about 2.0% (after training) and 4.1%
// (first residual) over 10 m rows. The guarantee is asymptotic in m too: sigma estimated from
// few residuals (m = 50) lifts the share over 100 m rows to 5-6%. Details and figures:
// tests/calibration/cusum_calibration_test.cc.
//
// Reading (normalised so the critical level is 1):
//   statistic = max_i |S_{n,i}| / b_n(c_crit),  critical = 1,
//   warn = clear = b_n(c_warn) / b_n(c_crit)  (c_warn from warn_false_alarm / n_eq; < 1).
// The explanation names the equation with the largest |S| and whether its forecasts have been
// persistently too low (S > 0: outcomes above forecasts) or too high. It is written out when
// statistic >= warn (the only rows on which an alert can be raised); below, a short status line.
//
// Thread safety: none; one owner. Deterministic.
class CusumMonitor {
 public:
  // REQUIRES: options.IsValid(nullptr), variables non-empty (one name per equation).
  CusumMonitor(std::vector<std::string> variables, CusumMonitorOptions options);

  // Feed the reference estimator's update of one row. An update without a recursive residual
  // (refused, or no prediction) is skipped: state unchanged, reading unarmed, returns OK.
  Status Observe(const UpdateResult& update, MonitorReading* reading);
  // Feed one recursive residual vector. kInvalidArgument on a wrong size and kNonFinite on NaN or
  // +-Inf (state unchanged, reading unarmed). kUnavailable, from the end of training until
  // Reset(), when a training s.d. is zero (reading unarmed, explanation says which equation).
  Status Observe(const Eigen::Ref<const Eigen::VectorXd>& w, MonitorReading* reading);
  // Forget everything and train again on the next m residuals. The pipeline resets the reference
  // estimator at the same row.
  void Reset();

  const CusumMonitorOptions& options() const { return options_; }
  int equations() const { return static_cast<int>(variables_.size()); }
  std::int64_t residuals() const { return count_; }  // n since Reset()
  bool armed() const { return armed_; }
  const Eigen::VectorXd& sigma() const { return sigma_; }  // after training
  const Eigen::VectorXd& sums() const { return sums_; }    // S_{n,i} (standardised once armed)
  double critical_value() const { return c_critical_; }    // c for alpha / n_eq
  double warn_value() const { return c_warn_; }            // c for warn_false_alarm / n_eq
  // b_n(c) = sqrt(n (c^2 + ln(n / m))). REQUIRES n >= m.
  double Boundary(double c, std::int64_t n) const;

 private:
  void FinishTraining();
  void Fill(MonitorReading* reading) const;

  std::vector<std::string> variables_;
  CusumMonitorOptions options_;
  double c_critical_ = 0.0;
  double c_warn_ = 0.0;
  std::int64_t count_ = 0;
  bool armed_ = false;
  int degenerate_ = -1;   // equation with zero training spread, or -1
  Eigen::VectorXd mean_;  // Welford running mean of the training residuals
  Eigen::VectorXd m2_;    // Welford sum of squared deviations
  Eigen::VectorXd sigma_;
  Eigen::VectorXd sums_;  // raw sums while training, standardised sums once armed
};

}  // namespace rimwatch
