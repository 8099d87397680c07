// Alerts: each monitor is a small deterministic state machine fed one reading per row.
//
// A reading says where a statistic stands against the monitor's levels (statistic >= warn: warn
// level; >= critical: critical level). AlertTracker turns readings into transitions:
//   raised   the level went up (none -> warn, none -> critical, warn -> critical), unless the
//            monitor is in cooldown after its last clear;
//   cleared  the statistic stayed below the clear level for `hysteresis` consecutive rows.
// Every transition is an AlertEvent with the statistic, the threshold crossed, the period and one
// plain sentence a desk can act on.
#pragma once

#include <cstdint>
#include <limits>
#include <optional>
#include <string>
#include <string_view>

namespace rimwatch {

enum class AlertLevel { kNone = 0, kWarn = 1, kCritical = 2 };

// The process's one copy of a monitor name, for per-row readings that name their monitor without
// copying the text (MonitorSample). The copies are never freed; there are as many as distinct
// monitor names ever used (a few dozen per model spec). Thread-safe.
std::string_view InternMonitorName(std::string_view name);
const char* AlertLevelName(AlertLevel level);  // "none" | "warn" | "critical"

struct MonitorReading {
  bool armed = false;  // false: training, or the statistic is unavailable this row
  double statistic = 0.0;
  double warn = std::numeric_limits<double>::infinity();
  double critical = std::numeric_limits<double>::infinity();
  double clear = std::numeric_limits<double>::infinity();  // below this counts toward clearing
  // The sentence used when an alert is raised (monitor specific, plain words; it should say what
  // the statistic is, what crossing the threshold means and what to check).
  std::string explanation;
};

// The level a reading stands at: none when unarmed, else critical at or above critical, warn at
// or above warn. AlertTracker raises only to a level above the one it holds.
AlertLevel ReadingLevel(const MonitorReading& reading);

struct AlertEvent {
  std::int64_t row = 0;  // model row number (1-based estimation row of the model)
  std::string period;    // period label of that row
  std::string model;
  std::string monitor;  // e.g. "stability", "cusum.a", "restriction.b-does-not-lead-a"
  bool raised = true;   // false: cleared
  AlertLevel level = AlertLevel::kNone;  // level raised to, or the level that cleared
  double statistic = 0.0;
  double threshold = 0.0;  // the level crossed (raised) or the clear level (cleared)
  std::string message;
};

struct AlertRule {
  int hysteresis = 5;  // rows below clear before clearing, >= 1
  int cooldown = 20;   // rows after a clear with no new raise, >= 0
};

class AlertTracker {
 public:
  AlertTracker() = default;
  AlertTracker(std::string model, std::string monitor, AlertRule rule)
      : model_(std::move(model)),
        monitor_(std::move(monitor)),
        interned_(InternMonitorName(monitor_)),
        rule_(rule) {}

  // Feed the reading of row `row`; returns the transition, if any.
  std::optional<AlertEvent> Observe(std::int64_t row, const std::string& period,
                                    const MonitorReading& reading);
  AlertLevel level() const { return level_; }
  const std::string& monitor() const { return monitor_; }
  std::string_view interned_monitor() const { return interned_; }  // InternMonitorName(monitor())

 private:
  std::string model_;
  std::string monitor_;
  std::string_view interned_;
  AlertRule rule_;
  AlertLevel level_ = AlertLevel::kNone;
  int rows_below_clear_ = 0;
  std::int64_t last_clear_row_ = std::numeric_limits<std::int64_t>::min() / 2;
};

}  // namespace rimwatch
