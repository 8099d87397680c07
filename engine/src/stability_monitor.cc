#include "rimwatch/engine/stability_monitor.h"

#include <algorithm>
#include <cstdio>

namespace rimwatch {

MonitorReading StabilityMonitor::Observe(double rho, std::optional<double> se, bool armed,
                                         AlertLevel active) {
  recent_.push_back(rho);
  while (static_cast<int>(recent_.size()) > spec_.slope_rows) recent_.pop_front();
  const int m = static_cast<int>(recent_.size());
  slope_ = 0.0;
  if (m >= 3) {
    // Least-squares slope of rho on 0..m-1.
    const double tbar = 0.5 * (m - 1);
    double sxy = 0.0, sxx = 0.0, ybar = 0.0;
    for (double v : recent_) ybar += v;
    ybar /= m;
    for (int i = 0; i < m; ++i) {
      sxy += (i - tbar) * (recent_[i] - ybar);
      sxx += (i - tbar) * (i - tbar);
    }
    slope_ = sxy / sxx;
  }
  rows_to_unit_.reset();
  if (slope_ > 0.0 && rho < 1.0) rows_to_unit_ = (1.0 - rho) / slope_;

  MonitorReading r;
  r.armed = armed;
  r.statistic = rho;
  r.warn = spec_.warn;
  r.critical = spec_.critical;
  if (se && *se > 0.0) r.critical = std::min(r.critical, 1.0 - 1.645 * *se);
  r.critical = std::max(r.critical, r.warn);  // a huge SE must not make warn unreachable
  r.clear = spec_.warn;
  // The full text only where an alert can be raised (armed, at a level above the active alert's:
  // alert.cc); an ordinary row, or a row of an alert already raised at this level, formats
  // nothing.
  const AlertLevel level = ReadingLevel(r);
  if (level <= active) {
    r.explanation = level == AlertLevel::kNone ? "Spectral radius below warn."
                                               : "Spectral radius at the active alert's level.";
    return r;
  }
  char buf[320];
  if (se) {
    std::snprintf(buf, sizeof buf,
                  "spectral radius %.3f (SE %.3f, upper 95%% bound %.3f): shocks die out slowly "
                  "or not at all; forecasts and impulse responses from this model are fragile",
                  rho, *se, rho + 1.645 * *se);
  } else {
    std::snprintf(buf, sizeof buf,
                  "spectral radius %.3f (SE unavailable): shocks die out slowly or not at all; "
                  "forecasts and impulse responses from this model are fragile",
                  rho);
  }
  r.explanation = buf;
  if (rows_to_unit_) {
    std::snprintf(buf, sizeof buf, "; at the recent slope it reaches 1 in about %.0f rows",
                  *rows_to_unit_);
    r.explanation += buf;
  }
  r.explanation += ".";
  return r;
}

}  // namespace rimwatch
