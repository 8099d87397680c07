#include "rimwatch/engine/alert.h"

#include <mutex>
#include <set>
#include <sstream>

namespace rimwatch {

std::string_view InternMonitorName(std::string_view name) {
  static std::mutex mutex;
  static auto* names = new std::set<std::string, std::less<>>;  // never freed: views stay valid
  std::lock_guard<std::mutex> lock(mutex);
  auto it = names->find(name);
  if (it == names->end()) it = names->emplace(name).first;
  return *it;
}

const char* AlertLevelName(AlertLevel level) {
  switch (level) {
    case AlertLevel::kNone:
      return "none";
    case AlertLevel::kWarn:
      return "warn";
    case AlertLevel::kCritical:
      return "critical";
  }
  return "?";
}

AlertLevel ReadingLevel(const MonitorReading& reading) {
  if (!reading.armed) return AlertLevel::kNone;
  if (reading.statistic >= reading.critical) return AlertLevel::kCritical;
  if (reading.statistic >= reading.warn) return AlertLevel::kWarn;
  return AlertLevel::kNone;
}

std::optional<AlertEvent> AlertTracker::Observe(std::int64_t row, const std::string& period,
                                                const MonitorReading& reading) {
  const AlertLevel now = ReadingLevel(reading);
  // The event is built only for a transition (most rows have none, and its strings cost).
  const auto event = [&] {
    AlertEvent ev;
    ev.row = row;
    ev.period = period;
    ev.model = model_;
    ev.monitor = monitor_;
    ev.statistic = reading.statistic;
    return ev;
  };
  if (now > level_) {
    const bool cooling = level_ == AlertLevel::kNone && row - last_clear_row_ <= rule_.cooldown;
    if (cooling) return std::nullopt;
    level_ = now;
    rows_below_clear_ = 0;
    AlertEvent ev = event();
    ev.raised = true;
    ev.level = now;
    ev.threshold = now == AlertLevel::kCritical ? reading.critical : reading.warn;
    ev.message = reading.explanation;
    return ev;
  }
  if (level_ == AlertLevel::kNone) return std::nullopt;
  // An alert is active: count rows below the clear level (an unarmed monitor counts as below:
  // it is re-training and has nothing to say).
  const bool below = !reading.armed || reading.statistic < reading.clear;
  rows_below_clear_ = below ? rows_below_clear_ + 1 : 0;
  if (rows_below_clear_ < rule_.hysteresis) return std::nullopt;
  AlertEvent ev = event();
  ev.raised = false;
  ev.level = level_;
  ev.threshold = reading.clear;
  std::ostringstream msg;
  msg << monitor_ << " back to normal: " << (reading.armed ? "the statistic stayed below " : "")
      << (reading.armed ? std::to_string(reading.clear) : "the monitor restarted on fresh rows")
      << " for " << rule_.hysteresis << " rows.";
  ev.message = msg.str();
  level_ = AlertLevel::kNone;
  rows_below_clear_ = 0;
  last_clear_row_ = row;
  return ev;
}

}  // namespace rimwatch
