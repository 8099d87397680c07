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
//      readings into raised / cleared events, in a fixed monitor order.
// Residual diagnostics (diagnostics.h) are advisory: every training_rows rows, on the last
// training_rows rows, each test line at level warn_false_alarm / (lines x evaluations in the
// horizon), so the chance of any false advisory within the horizon is at most warn_false_alarm
// (Bonferroni). They raise warn-level events "diagnostics.<test>[.<variable>]" only.
// A sequential monitor (CUSUM, volatility) restarts on a fresh training sample after it raises a
// critical alert; the alert clears once the restarted monitor has been quiet for the hysteresis.
//
// The Monitor never sees a clock: periods are labels that come with the data.
// Thread safety: none; one owner per model.
#pragma once

#include <Eigen/Core>
#include <cstdint>
#include <memory>
#include <optional>
#include <string>
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
  // The tracking estimate summarised (keys of `rimwatch fit`), restrictions as tests.
  Status Summary(FitReport* out) const;
  // Names of the monitors in event order.
  std::vector<std::string> MonitorNames() const;

 private:
  struct Impl;
  explicit Monitor(std::unique_ptr<Impl> impl);
  std::unique_ptr<Impl> impl_;
};

}  // namespace rimwatch
