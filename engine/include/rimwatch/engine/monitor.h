// Monitor: the per-model pipeline. rimwatchd and `rimwatch replay` both run exactly this class,
// so live and offline agree to the last bit.
//
// Per raw row (values in spec.var.variables order, untransformed):
//   1. RowTransformer applies level / diff / logdiff (the first raw row may yield no model row).
//   2. The tracking estimator (the spec's window) and each sequential monitor's reference
//      estimator (expanding since that monitor's last reset) fold the row in.
//   3. Every row: coefficients, companion eigenvalues and the spectral radius. Every
//      inference.every rows ("robust rows"): the robust CovarianceContext of the tracking window,
//      the SE of rho (cheap path with the gradient as a 1-row restriction) and the Wald test of
//      each monitored restriction.
//   4. Each monitor turns what it needs into a MonitorReading; one AlertTracker per monitor turns
//      readings into raised / cleared events, in a fixed monitor order: stability, cusum,
//      volatility, restriction.<name> (spec order), constancy.nyblom_hansen,
//      constancy.reference_equality, diagnostics.<test>[.<variable>].
// Residual diagnostics (diagnostics.h) are advisory: every training_rows rows, on the last
// training_rows rows, each test line at level warn_false_alarm / (lines x evaluations in the
// horizon), so the chance of any false advisory within the horizon is at most warn_false_alarm
// (Bonferroni). They raise warn-level events "diagnostics.<test>[.<variable>]" only.
// A sequential monitor (CUSUM, volatility) restarts on a fresh training sample after it raises a
// critical alert; the alert clears once the restarted monitor has been quiet for the hysteresis.
//
// Parameter constancy (spec.constancy, constancy.h): "constancy.nyblom_hansen" (the robust
// Nyblom-Hansen statistic of all n k coefficients on one block) and
// "constancy.reference_equality" (robust Wald equality of the reference sample and the block).
// The block is a sliding window of the last B = spec.ConstancyBlockRows() rows, shared by both
// and independent of the tracking window's kind; each test has its own reference estimator
// (expanding since its start) that counts its rows. The presample rows enter these estimators
// too, so in the first cycle they arm at model row m = training_rows and evaluate at model rows
// m + j B (j = 1, 2, ...), on their own schedule rather than on robust rows, with the model's
// covariance kind. Each evaluation is held to alpha / E and warn_false_alarm / E, E =
// max(1, floor(H / B)) evaluations in the horizon H = spec.HorizonRows().
// Guarantee (per horizon, per test): P(any false critical alarm within the H rows after arming)
// <= alpha = alarms.false_alarm, and <= warn_false_alarm for warnings, by Bonferroni's inequality
// (conservative by design), given that each evaluation has its asymptotic size.
// tests/calibration/constancy_calibration_test.cc shows the share for the ConstancyMonitor alone
// and wired into this Monitor. A constancy monitor restarts (fresh reference, m rows of training)
// after a critical alarm; reference_equality also restarts once its E evaluations are used, so its
// reference sample stays within m + H rows and the guarantee holds cycle by cycle.
// nyblom_hansen needs no reference sample and runs on past the horizon at the same levels: every
// E consecutive evaluations again hold the chance to alpha. Nyblom-Hansen sees a change only
// inside a block (a change on a block boundary leaves both blocks constant); the equality test
// sees it one block later at the latest.
//
// The Monitor never sees a clock: periods are labels that come with the data.
// Thread safety: a Monitor has one owner; Create may be called from any thread (the volatility
// thresholds it calibrates are cached per design in the process behind a mutex).
#pragma once

#include <Eigen/Core>
#include <cstdint>
#include <memory>
#include <optional>
#include <string>
#include <string_view>
#include <vector>

#include "rimwatch/engine/alert.h"
#include "rimwatch/engine/model_spec.h"
#include "rimwatch/engine/status.h"
#include "rimwatch/engine/var_fit.h"
#include "rimwatch/engine/wald.h"

namespace rimwatch {

struct RestrictionRow {
  std::string name;
  Status status;  // not OK: not computable this row (e.g. rank deficient), message says why
  WaldResult wald;
};

// What one monitor read on one row (armed or not), for logs and charts.
struct MonitorSample {
  std::string_view monitor;  // as in MonitorNames() (InternMonitorName: valid for the process)
  MonitorReading reading;
  // The reading differs from this monitor's reading on the model's previous estimated row (in
  // armed, statistic, warn or critical, bit for bit); true on the first row. Block-wise tests
  // hold their reading between evaluations, a Page CUSUM at zero reads the same row after row:
  // logs may keep only the changed readings.
  bool changed = true;
};

struct RowReport {
  Status status;           // not OK: the raw row was refused and nothing changed
  bool estimated = false;  // a model row entered estimation
  std::int64_t row = 0;    // model row number (1-based), valid when estimated
  std::string period;
  Status estimate_status;  // tracking window: OK, or rank deficient / not enough rows
  bool has_spectral_radius = false;
  double spectral_radius = 0.0;
  bool robust_row = false;                   // robust statistics were recomputed on this row
  std::optional<double> rho_se;              // latest SE of rho (carried between robust rows)
  std::optional<double> rows_to_unit;        // projected rows until rho reaches 1
  std::vector<RestrictionRow> restrictions;  // fresh on robust rows, else empty
  // On estimated rows: one entry per monitor, in MonitorNames() order, with the reading that
  // monitor produced on this row (armed = false while it trains or when its statistic is
  // unavailable; held readings, e.g. of block-wise tests, are repeated). Empty otherwise. The
  // samples carry the numbers; their explanation is left empty (events carry the text).
  std::vector<MonitorSample> readings;
  std::vector<AlertEvent> events;
};

class Monitor {
 public:
  // Validates the spec (ModelSpec::IsValid) and builds every component, calibrating simulated
  // thresholds once.
  static Status Create(const ModelSpec& spec, std::unique_ptr<Monitor>* out);
  ~Monitor();

  RowReport Update(const std::string& period, const Eigen::Ref<const Eigen::VectorXd>& raw);

  const ModelSpec& spec() const;
  std::int64_t rows() const;  // model rows so far
  const VarEstimator& tracking() const;
  // The raise events of the alerts active now (most recent raise per monitor).
  std::vector<AlertEvent> ActiveAlerts() const;
  // The tracking estimate summarised (keys of `rimwatch fit`), restrictions as tests;
  // with_diagnostics = false skips the residual tests (SummarizeEstimate).
  Status Summary(FitReport* out, bool with_diagnostics = true) const;
  // Names of the monitors in event order.
  std::vector<std::string> MonitorNames() const;

 private:
  struct Impl;
  explicit Monitor(std::unique_ptr<Impl> impl);
  std::unique_ptr<Impl> impl_;
};

}  // namespace rimwatch
