// Recording what a Monitor row produced, in the store's tables. rimwatchd and
// `rimwatch replay --db` both call RecordRow, so a live log and an offline log of the same data
// hold the same records (wall-clock columns aside).
//
// Per estimated row:
//   - tests: one TestRecord every `tests_every` model rows, and on every row that carries an alert
//     event; payload = RowPayloadText(report, readings) (below). With tests_every = 1 its
//     "monitors" hold only the readings that changed since the previous row
//     (MonitorSample::changed), except on every `full_readings_every`-th model row, which holds
//     them all: a monitor missing from a row reads as on the latest earlier row that has it, and
//     a reader finds every monitor within full_readings_every rows. (Block-wise tests and the
//     advisory diagnostics hold their readings between evaluations: most rows change four or
//     five readings of twenty.) With tests_every > 1 every record holds every reading;
//   - snapshots: one every `snapshot_every` model rows, payload = SnapshotPayload(monitor)
//     (none on a row whose window cannot be summarised, e.g. rank deficient: its tests record
//     says why in "estimate");
//   - alerts: every AlertEvent of the row.
// The tests record's payload, with the model added (EventBody), is also the body of the daemon's
// per-row `est.<model>` event when every row has one (events.est_every = 1); otherwise the event
// carries every reading.
//
// Thread safety: none (the store has one owner).
#pragma once

#include <cstdint>
#include <nlohmann/json.hpp>
#include <optional>
#include <string>
#include <vector>

#include "rimwatch/daemon/store.h"
#include "rimwatch/engine/monitor.h"
#include "rimwatch/engine/status.h"

namespace rimwatch::daemon {

struct RecordOptions {
  int tests_every = 1;       // model rows between TestRecords, >= 1
  int snapshot_every = 100;  // model rows between snapshots, >= 1; 0 = never
  // Model rows between tests records that hold every monitor's reading (see above), >= 1; 1 =
  // every record holds them all (larger rows, about 2.3 KB instead of 0.6 KB for a model of
  // three variables with the default monitors).
  int full_readings_every = 100;
  bool alerts = true;  // false: write tests and snapshots only (a rebuild after a revision
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
// Which readings a payload's "monitors" holds.
enum class PayloadReadings {
  kAll,      // every monitor's
  kChanged,  // those with MonitorSample::changed
};
// The same document written directly as text (what the store and est.<model> carry; equal to
// RowPayload(report) as JSON values, number for number, with kAll; with kChanged the same less
// the unchanged readings). model: when not null, a last member "model" (the event body).
// Appends to *out.
void AppendRowPayloadText(const RowReport& report, const std::string* model, std::string* out,
                          PayloadReadings readings = PayloadReadings::kAll);
std::string RowPayloadText(const RowReport& report,
                           PayloadReadings readings = PayloadReadings::kAll);
// The readings a tests record of this row holds under these options (see above).
PayloadReadings RecordedReadings(const RowReport& report, const RecordOptions& options);
// RowPayloadText's text with the last member "model" added: the same as AppendRowPayloadText
// with a model, from a payload already built. REQUIRES: payload_text is RowPayloadText's.
std::string EventBody(const std::string& payload_text, const std::string& model);

// {"coefficients":[[..]],"se":[[..]],"sigma":[[..]],"eigenvalues":[[re,im],..],"rho":..,
//  "rho_se":..|null,"regressors":[..],"variables":[..]} from Monitor::Summary.
Status SnapshotPayload(const Monitor& monitor, nlohmann::ordered_json* out);

// The records of one row, built but not yet written.
struct RowRecords {
  std::optional<TestRecord> test;
  std::optional<SnapshotRecord> snapshot;
  std::vector<AlertEvent> alerts;
};

// Builds the records of one row (see above) from the Monitor right after it ran that row (the
// snapshot reads the Monitor's current estimate); a refused row (report.status not OK) has none.
// No store access: rimwatchd runs this beside the model, off the thread that owns the store.
// kInvalidArgument for options out of range.
Status PrepareRecords(std::int64_t model_id, const Monitor& monitor, const RowReport& report,
                      const RecordOptions& options, RowRecords* out);
// Writes them. kInvalidArgument outside a transaction; store errors as they come.
Status WriteRecords(Store& store, std::int64_t model_id, const RowRecords& records,
                    const std::string& recorded_at);
// PrepareRecords, then WriteRecords (options are checked first, then the transaction).
Status RecordRow(Store& store, std::int64_t model_id, const Monitor& monitor,
                 const RowReport& report, const RecordOptions& options,
                 const std::string& recorded_at);

}  // namespace rimwatch::daemon
