// VolatilityMonitor: Page's CUSUM for a change in the scale of the forecast-error covariance.
//
// Input: the recursive residual vectors w_t of the reference (expanding, reset with this monitor)
// estimator, in control independent N(0, Omega) (see cusum.h). The first m of them train:
//   Omega-hat = sample covariance (mean removed, divisor m - 1), Omega-hat = L L' (Cholesky).
// Then for every later row
//   u_t = L^{-1} w_t,  s_t = |u_t|^2          (about chi2(n) in control),
//   l_t = -(n/2) ln(delta) + (1 - 1/delta) s_t / 2,
// the log-likelihood ratio of N(0, delta Omega) against N(0, Omega) for one row, and
//   S_t = max(0, S_{t-1} + l_t),  S = 0 at the end of training;  alarm when S_t > h
// (Page 1954, "Continuous inspection schemes", Biometrika 41; with the true LLR this is the
// rule that minimises the worst-case detection delay for a given in-control ARL, Lorden 1971,
// Ann. Math. Statist. 42). delta > 1 watches for a rise (default 2: the variance doubles),
// delta < 1 for a fall.
//
// Threshold. h is set by simulation at construction so that the chance of any false alarm within
// the first H monitored rows equals alpha: P paths, each with m training vectors z ~ N(0, I_n)
// (their sample covariance S, which makes the law of s_t = z' S^{-1} z exactly that of the
// monitor's statistic for any Omega, since it is affine invariant) and H monitored rows; h is
// the ceil((1 - alpha) P)-th smallest path maximum of S_t. Estimating Omega from m rows matters:
// at m = 193, n = 3 a threshold simulated with Omega known gives about 3x the false-alarm rate
// (tests/unit/volatility_monitor_test.cc prints it).
// The draws come from DeterministicRandom with a fixed seed, so live and replay get the same
// h to the last bit. Monte Carlo error: the achieved false-alarm chance of the simulated h has
// s.d. about sqrt(alpha (1 - alpha) / P) (0.0049 at alpha = 0.05, P = 2000: +-10% relative).
// Cost: P (m + H) n normals (ziggurat, a few ns each); about 80 ms of CPU at n = 3, m = 193,
// H = 2000, P = 2000 on a shared development machine, paid once per object (Reset() keeps h).
// Siegmund's ARL approximation (Siegmund 1985, Sequential Analysis, Ch. X) is not used: its
// Gaussian overshoot correction is far off for the skewed chi2 increments here.
//
// Guarantee: P(any false critical alarm within H rows after training) = alpha (up to the Monte
// Carlo error above), for Gaussian errors. Beyond H rows the chance keeps growing (about
// 1 - (1 - alpha)^(t / H)). Under conditionally heteroskedastic errors (GARCH) the variance does
// change from row to row and the monitor alarms much more often: that is a true signal of
// volatility clustering, not a false alarm of this rule.
//
// Reading (normalised so the critical level is 1): statistic = S_t / h_crit, critical = 1,
// warn = clear = h_warn / h_crit with h_warn simulated for warn_false_alarm. When statistic >=
// warn the explanation names the equation whose squared standardised errors moved most (in the
// direction of delta) over the current excursion of S (rows since it last left 0); below warn it is
// a short status line.
//
// Section numbers of the sources are cited from memory.
//
// Thread safety: none; one owner. Deterministic.
#pragma once

#include <Eigen/Core>
#include <cstdint>
#include <string>
#include <vector>

#include "rimwatch/engine/alert.h"
#include "rimwatch/engine/status.h"
#include "rimwatch/engine/var_estimator.h"

namespace rimwatch {

struct VolatilityMonitorOptions {
  // m: recursive residual vectors that estimate Omega (since the reference estimator's reset;
  // the pipeline passes training_rows - k). Range >= n + 10 (checked at construction).
  std::int64_t training = 190;
  // H: monitored rows over which the false-alarm chance is held (the pipeline passes
  // AlarmSpec::horizon * training_rows). Range >= 1. Cost of calibration grows linearly in H.
  std::int64_t horizon = 2000;
  // Chance of any false critical alarm within H rows, in (0, 0.5].
  double false_alarm = 0.05;
  // The same for the warning level, in [false_alarm, 0.9].
  double warn_false_alarm = 0.20;
  // Design scale of the change: Omega -> delta Omega. > 0 and != 1; 2 = variance doubles.
  double delta = 2.0;
  // Simulated paths for the threshold. Range: false_alarm * paths >= 20. Trade-off: Monte Carlo
  // s.d. of the achieved false-alarm chance sqrt(alpha (1 - alpha) / P) against time P (m + H) n.
  int calibration_paths = 2000;
  // Seed of DeterministicRandom for the calibration (fixed so live and replay agree).
  std::uint64_t seed = 0x5eed0f7a9ec05dULL;

  // True when usable for n equations; otherwise *why (may be null) names the field and rule.
  bool IsValid(int n, std::string* why) const;
};

struct PageThresholds {
  double critical = 0.0;  // h for false_alarm
  double warn = 0.0;      // h for warn_false_alarm
};

// The simulation described above: (1 - alpha) quantiles of max_{t <= H} S_t over P paths.
// options.training = 0 simulates a known Omega (s_t exactly chi2(n)), for tests and oracles.
// REQUIRES: n >= 1, options valid except that training may be 0.
PageThresholds SimulatePageThresholds(int n, const VolatilityMonitorOptions& options);

class VolatilityMonitor {
 public:
  // Calibrates h (see above). REQUIRES: options.IsValid(variables.size(), nullptr).
  VolatilityMonitor(std::vector<std::string> variables, VolatilityMonitorOptions options);

  // Feed the reference estimator's update of one row. An update without a recursive residual is
  // skipped: state unchanged, reading unarmed, returns OK.
  Status Observe(const UpdateResult& update, MonitorReading* reading);
  // Feed one recursive residual vector. kInvalidArgument on a wrong size and kNonFinite on NaN or
  // +-Inf (state unchanged, reading unarmed). kUnavailable, from the end of training until
  // Reset(), when the training covariance is not positive definite.
  Status Observe(const Eigen::Ref<const Eigen::VectorXd>& w, MonitorReading* reading);
  // Forget the training sample and the CUSUM; the thresholds stay (they depend on options only).
  void Reset();

  const VolatilityMonitorOptions& options() const { return options_; }
  int equations() const { return static_cast<int>(variables_.size()); }
  const PageThresholds& thresholds() const { return thresholds_; }
  std::int64_t residuals() const { return count_; }  // since Reset()
  bool armed() const { return armed_; }
  double cusum() const { return cusum_; }                  // S_t
  const Eigen::MatrixXd& omega() const { return omega_; }  // after training

 private:
  void FinishTraining();
  void UpdateCusum(const Eigen::Ref<const Eigen::VectorXd>& w);
  void Fill(MonitorReading* reading) const;

  std::vector<std::string> variables_;
  VolatilityMonitorOptions options_;
  PageThresholds thresholds_;
  double llr_constant_ = 0.0;  // -(n/2) ln(delta)
  double llr_slope_ = 0.0;     // (1 - 1/delta) / 2
  std::int64_t count_ = 0;
  bool armed_ = false;
  bool degenerate_ = false;
  Eigen::VectorXd mean_;      // Welford running mean of the training vectors
  Eigen::MatrixXd comoment_;  // Welford sum of outer products of deviations
  Eigen::MatrixXd omega_;
  Eigen::MatrixXd chol_;  // L, lower triangular
  Eigen::VectorXd work_;
  double cusum_ = 0.0;
  // The current excursion (rows since S last left 0): rows and per-equation sums of
  // w_i^2 / Omega_ii, for the explanation.
  std::int64_t excursion_rows_ = 0;
  Eigen::VectorXd excursion_ratio_;
};

}  // namespace rimwatch
