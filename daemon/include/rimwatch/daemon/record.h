// Recording what a Monitor row produced, in the store's tables. rimwatchd and
// `rimwatch replay --db` both call RecordRow, so a live log and an offline log of the same data
// hold the same records (wall-clock columns aside).
//
// Per estimated row:
//   - tests: one TestRecord every `tests_every` model rows, and on every row that carries an alert
//     event; payload = RowPayload(report) (below);
//   - snapshots: one every `snapshot_every` model rows, payload = SnapshotPayload(monitor)
//     (none on a row whose window cannot be summarised, e.g. rank deficient: its tests record
//     says why in "estimate");
//   - alerts: every AlertEvent of the row.
// RowPayload is also the body of the daemon's per-row `est.<model>` event.
//
// Thread safety: none (the store has one owner).
#pragma once

#include <cstdint>
#include <nlohmann/json.hpp>
#include <string>

#include "rimwatch/daemon/store.h"
#include "rimwatch/engine/monitor.h"
#include "rimwatch/engine/status.h"

namespace rimwatch::daemon {

struct RecordOptions {
  int tests_every = 1;       // model rows between TestRecords, >= 1
  int snapshot_every = 100;  // model rows between snapshots, >= 1; 0 = never
  bool alerts = true;        // false: write tests and snapshots only (a rebuild after a revision
                             // records its alert changes itself)
};

// {"row":..,"period":..,"estimate":"ok"|"<code>: <why>","rho":..|null,"rho_se":..|null,
//  "rows_to_unit":..|null,
//  "restrictions":{"<name>":{"statistic":..,"df":..,"p_value":..}|{"unavailable":"<why>"}},
//  "monitors":{"<monitor>":{"armed":bool,"statistic":..,"warn":..,"critical":..}}}
// Non-finite numbers (e.g. an infinite threshold) are written as null. "restrictions" is empty on
// rows that are not robust rows (RowReport::restrictions); doubles print as the shortest text
// that reads back to the same double.
nlohmann::ordered_json RowPayload(const RowReport& report);
// The same document written directly as text (what the store and est.<model> carry; equal to
// RowPayload(report) as JSON values, number for number). model: when not null, a last member
// "model" (the event body). Appends to *out.
void AppendRowPayloadText(const RowReport& report, const std::string* model, std::string* out);
std::string RowPayloadText(const RowReport& report);

// {"coefficients":[[..]],"se":[[..]],"sigma":[[..]],"eigenvalues":[[re,im],..],"rho":..,
//  "rho_se":..|null,"regressors":[..],"variables":[..]} from Monitor::Summary.
Status SnapshotPayload(const Monitor& monitor, nlohmann::ordered_json* out);

// Writes the records of one row (see above); a refused row (report.status not OK) writes
// nothing. kInvalidArgument outside a transaction or for options out of range; store errors as
// they come. payload_text: RowPayloadText(report) when the caller already built it; nullptr
// builds it here if needed.
Status RecordRow(Store& store, std::int64_t model_id, const Monitor& monitor,
                 const RowReport& report, const RecordOptions& options,
                 const std::string& recorded_at, const std::string* payload_text = nullptr);

}  // namespace rimwatch::daemon
