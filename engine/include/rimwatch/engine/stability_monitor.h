// StabilityMonitor: the spectral radius of the tracking window against fixed levels.
//
// Reading per row: statistic = rho; warn level = stability.warn; critical level =
// min(stability.critical, 1 - 1.645 SE(rho)), i.e. critical also when the one-sided 95% upper
// bound rho + 1.645 SE reaches 1 (SE from the delta method with the model's covariance kind,
// available on robust-statistics rows; the last one is carried between them). Clear level = warn.
// These are level rules on an estimate, not sequential tests: their false-alarm rate is not
// controlled over a horizon (a spectral radius that sits near the warn level will touch it); the
// hysteresis and cooldown of the alert policy keep them from flapping.
//
// Also reported: the slope of rho over the last slope_rows rows (least squares on the row
// number) and, when it is positive, the projected rows until rho reaches 1 at that slope.
#pragma once

#include <deque>
#include <optional>

#include "rimwatch/engine/alert.h"
#include "rimwatch/engine/model_spec.h"

namespace rimwatch {

class StabilityMonitor {
 public:
  explicit StabilityMonitor(const StabilitySpec& spec) : spec_(spec) {}

  // rho of this row; se when known (nullopt: unavailable, e.g. repeated top eigenvalue).
  // active: the level of the alert this monitor's tracker holds now. The explanation (the
  // sentence of a raised alert) is written only when the reading's level is above it, the only
  // case in which the tracker can raise (alert.cc); otherwise a short status line.
  MonitorReading Observe(double rho, std::optional<double> se, bool armed,
                         AlertLevel active = AlertLevel::kNone);
  // Slope of rho per row over the last slope_rows rows (0 with fewer than 3 rows).
  double slope() const { return slope_; }
  // Rows until rho reaches 1 at the current slope; nullopt when the slope is <= 0 or rho >= 1.
  std::optional<double> rows_to_unit() const { return rows_to_unit_; }

 private:
  StabilitySpec spec_;
  std::deque<double> recent_;
  double slope_ = 0.0;
  std::optional<double> rows_to_unit_;
};

}  // namespace rimwatch
