// ModelHost: one monitored model inside rimwatchd. It owns the model's Monitor and turns stored
// observations of the model's series into model rows.
//
// The invariant: a model's state is a function of the stored data only. It equals a fresh
// Monitor fed, in ascending period order, every period for which all of the model's series have
// a value (the latest vintage of each). Hence
//   - a period after the last processed one runs through the Monitor as soon as it is complete
//     (market bars complete at once, data releases when the last series arrives);
//   - anything that touches a period at or before the last processed one (a revision, a late
//     arrival, an old period that completes late) changes history: the host is marked and
//     Rebuild() re-runs the Monitor from the store, which is what a replay of the revised data
//     gives. No gap is invented: an incomplete period is never a row.
// Rebuild() finds the first model row whose input changed (a 64-bit fingerprint of each row's
// period key and values), re-records tests and snapshots from that row on, and turns the
// difference between the alerts active before and after into events (alerts are an append-only
// log of what was published; nothing is raised twice).
//
// A row the Monitor refuses (e.g. logdiff of a non-positive value) leaves its state unchanged
// in live running and in a replay alike; the host reports it in RowOutcome::refused.
//
// Two sides. Offer() assembles input rows (the period bookkeeping, fingerprints, last period)
// and hands complete ones back as InputRows; Run() feeds one to the Monitor (row_keys, the last
// report). rimwatchd calls Offer on its poll thread and Run on its model thread, in the order
// Offer produced the rows.
//
// Thread safety: none inside; the caller keeps the two sides apart: Run, monitor(), rows(),
// last_report() and RowPeriod() belong to whichever thread runs the rows, and the rest of the
// host may be touched by another thread only while no Run of it is in progress or queued
// (rimwatchd drains its model thread first). Rebuild() uses both sides.
#pragma once

#include <Eigen/Core>
#include <cstdint>
#include <map>
#include <memory>
#include <optional>
#include <string>
#include <vector>

#include "rimwatch/daemon/period.h"
#include "rimwatch/daemon/record.h"
#include "rimwatch/daemon/store.h"
#include "rimwatch/engine/model_spec.h"
#include "rimwatch/engine/monitor.h"
#include "rimwatch/engine/status.h"

namespace rimwatch::daemon {

// What running rows produced: the reports of estimated rows, and rows the Monitor refused.
struct RowOutcome {
  std::vector<RowReport> reports;
  std::vector<std::string> refused;  // "period 2026-03-31: <reason>"
};

// One complete period of a model's series, in variable order: the Monitor's next input row.
struct InputRow {
  std::int64_t key = 0;  // period key
  std::string text;      // period label
  Eigen::VectorXd raw;
};

struct RebuildOptions {
  bool record = true;  // write tests / snapshots for changed rows and alert changes to the store
  // Restart mode: the store already holds the records of the first *record_from_input inputs
  // (StoredModel::recorded_inputs); with `record`, the inputs from there on are recorded with
  // their alerts, which are returned as the alert changes (nothing else is compared).
  std::optional<std::int64_t> record_from_input;
  RecordOptions record_options;
  std::string recorded_at;  // wall-clock text for alert records
  std::string reason;       // e.g. "a revision of b for 2026-03-31"; used in alert-change messages
};

class ModelHost {
 public:
  // Builds the Monitor (Monitor::Create). series_ids[j] is the store id of variable j's series.
  static Status Create(std::int64_t model_id, std::string spec_text, const ModelSpec& spec,
                       std::vector<std::int64_t> series_ids, std::unique_ptr<ModelHost>* out);

  std::int64_t id() const { return model_id_; }
  const std::string& name() const { return spec_.name; }
  const std::string& spec_text() const { return spec_text_; }
  const ModelSpec& spec() const { return spec_; }
  const Monitor& monitor() const { return *monitor_; }
  const std::vector<std::int64_t>& series_ids() const { return series_ids_; }
  // The store id of variable var's series, once the series exists (its first observation).
  void set_series_id(std::size_t var, std::int64_t id) { series_ids_.at(var) = id; }
  std::int64_t rows() const { return monitor_->rows(); }
  // Text of the last period that entered the Monitor (empty before the first).
  const std::string& last_period() const { return last_text_; }
  // Period text of model row `row` (1-based), or empty when out of range.
  std::string RowPeriod(std::int64_t row) const;
  // The latest estimated row's report (tests, readings), if any since start or rebuild.
  const std::optional<RowReport>& last_report() const { return last_report_; }

  // Input rows admitted so far (each is Run, or queued to be).
  std::int64_t inputs() const { return static_cast<std::int64_t>(fingerprints_.size()); }

  // One stored observation of variable `var` (its outcome from Store::PutObservation). A period
  // after the last admitted one that is now complete is admitted and appended to *ready, to be
  // passed to Run in that order.
  void Offer(int var, const Period& period, double value, PutOutcome outcome,
             std::vector<InputRow>* ready);
  // Runs one admitted input row through the Monitor; its report (estimated rows) or refusal is
  // appended to *out.
  void Run(const InputRow& row, RowOutcome* out);
  // True when an observation touched history at or before the last processed period.
  bool needs_rebuild() const { return needs_rebuild_; }

  // Re-runs the Monitor from the store (see above). Alert changes (events) are appended to
  // *alert_changes; with options.record they are also written, with the changed rows' tests and
  // snapshots. REQUIRES: store.in_transaction() when options.record.
  Status Rebuild(Store& store, const RebuildOptions& options,
                 std::vector<AlertEvent>* alert_changes, RowOutcome* out);

 private:
  ModelHost() = default;
  struct Pending {
    std::string text;
    std::vector<std::optional<double>> values;
    int filled = 0;
  };
  void Admit(const InputRow& row);
  static std::uint64_t Fingerprint(std::int64_t key, const Eigen::VectorXd& raw);

  std::int64_t model_id_ = 0;
  std::string spec_text_;
  ModelSpec spec_;
  std::vector<std::int64_t> series_ids_;
  std::unique_ptr<Monitor> monitor_;
  std::optional<std::int64_t> last_key_;
  std::string last_text_;
  std::map<std::int64_t, Pending> pending_;  // periods after last_key_ not yet complete
  std::vector<std::uint64_t> fingerprints_;  // one per raw row offered to the Monitor
  std::vector<std::int64_t> row_keys_;       // period key of each model row
  std::optional<RowReport> last_report_;
  bool needs_rebuild_ = false;
};

// Alert changes between two sets of active alerts (the raise events of Monitor::ActiveAlerts),
// as events at (row, period): a monitor active only in `after`, or at another level, gives a
// raised event; one active only in `before` gives a cleared event. Messages start with `reason`.
std::vector<AlertEvent> AlertChanges(const std::vector<AlertEvent>& before,
                                     const std::vector<AlertEvent>& after, std::int64_t row,
                                     const std::string& period, const std::string& reason);

// The alerts a stored log leaves active: per monitor, the last event if it was a raise.
std::vector<AlertEvent> ActiveFromLog(const std::vector<AlertEvent>& log);

}  // namespace rimwatch::daemon
