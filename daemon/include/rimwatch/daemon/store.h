// Store: rimwatch's durable log in one SQLite file (DDL: schemas/store.sql).
//
// One schema for live and offline: rimwatchd writes it, `rimwatch replay --db` writes the same
// tables, `rimwatch report` reads either. Tables: schema_version, series, observations (every
// vintage of every (series, period) value), models (spec text, added / dropped), snapshots
// (coefficients, sigma, eigenvalues, rho and its SE at a cadence), tests (per-row statistics),
// alerts (raised and cleared events).
//
// Durability: WAL journal; synchronous FULL by default, so a committed transaction is on disk
// before Commit() returns (rimwatchd acks only once its group is durable: deferred_sync below);
// NORMAL by option (a power loss may
// lose the last transactions, an application crash may not). Every statement is prepared once.
// Writes happen inside Begin() ... Commit(); the caller groups many observations per transaction
// (group commit).
//
// Observation semantics (PutObservation):
//   kNew        first value of (series, period) and period after the series' latest period
//   kDuplicate  the latest vintage already holds exactly this value (bitwise); nothing written
//   kRevision   a different value for a stored (series, period): stored as vintage + 1
//   kLate       first value of a period older than the series' latest period (history changed)
// The latest vintage of each (series, period) is the value models see. Values are stored bit for
// bit (-0.0 stays -0.0); a non-finite value is refused. The store keeps each series' latest key
// itself (Rollback restores it), so a stale SeriesInfo copy cannot misclassify.
//
// Errors: Status code kIoError with the SQLite message; kInvalidArgument for a rule broken by
// the caller (unknown series id, period of the wrong kind, a model name already active).
// Thread safety: none; one owner (the daemon's poll loop, or one replay), except the durability
// queries marked below. The background checkpointer (StoreOptions) uses its own connection and
// touches nothing else; the WAL syncer (deferred_sync) only calls fdatasync on the WAL file.
#pragma once

#include <cstdint>
#include <memory>
#include <optional>
#include <string>
#include <vector>

#include "rimwatch/daemon/period.h"
#include "rimwatch/engine/alert.h"
#include "rimwatch/engine/status.h"

namespace rimwatch::daemon {

struct StoreOptions {
  std::string path;              // the SQLite file; created with the schema if missing
  bool synchronous_full = true;  // PRAGMA synchronous = FULL (ack = on disk); false: NORMAL
  int busy_timeout_ms = 5000;    // wait this long for a lock held by another process (a reader)
  bool read_only = false;        // open an existing file for reading (report); no migration
  // Writable files: WAL checkpoints run on a background thread with a second connection instead
  // of inside the commit that crosses 1,000 WAL frames (the writer's commits stay short).
  bool background_checkpoint = true;
  // Writable files with synchronous_full: the store makes each commit durable itself, with
  // fdatasync on the WAL file from a thread of its own, and SQLite runs at synchronous = NORMAL.
  // The caller can then write the next group while the disk works (CommitDeferred); Commit()
  // still returns only once its transaction is on disk. The guarantee is FULL's: in WAL mode FULL
  // syncs the WAL at each commit, NORMAL syncs it before each checkpoint and the database file
  // after; this adds the per-commit sync (and a sync of the directory when the WAL file is first
  // seen), done after COMMIT instead of inside it.
  bool deferred_sync = false;
};

enum class PutOutcome { kNew, kDuplicate, kRevision, kLate };

struct SeriesInfo {
  std::int64_t id = 0;
  std::string name;
  PeriodKind kind = PeriodKind::kInteger;
  std::optional<std::int64_t> latest_key;  // the largest stored period key, if any
};

struct StoredValue {
  std::int64_t period_key = 0;
  std::string period_text;
  double value = 0.0;
  int vintage = 1;  // 1 = first release
};

struct StoredModel {
  std::int64_t id = 0;
  std::string name;
  std::string spec_text;  // the TOML as given
  std::string added_at;   // ISO 8601 UTC wall-clock time (daemon side; never seen by the engine)
  // How many input rows (complete periods, in period order) have their records (tests,
  // snapshots, alerts) in this file; empty when never set (a model written before the column
  // existed, or by `rimwatch replay --db`, records every row as it runs).
  std::optional<std::int64_t> recorded_inputs;
};

// One row per model row at the tests cadence: the statistics a report draws.
struct TestRecord {
  std::int64_t model_id = 0;
  std::int64_t row = 0;
  std::string period;
  std::optional<double> rho;
  std::optional<double> rho_se;
  std::string payload_json;  // RowPayload (record.h): restrictions, monitors, rho, ...
};

struct SnapshotRecord {
  std::int64_t model_id = 0;
  std::int64_t row = 0;
  std::string period;
  std::string payload_json;  // SnapshotPayload (record.h): {"coefficients":[[..]],"se":[[..]],
                             //  "sigma":[[..]],"eigenvalues":[[re,im],..],"rho":..,"rho_se":..,..}
};

class Store {
 public:
  // Opens or creates the file, applies PRAGMAs, creates or migrates the schema to the current
  // version (schema_version table), prepares the statements.
  static Status Open(const StoreOptions& options, std::unique_ptr<Store>* out);
  ~Store();
  Store(const Store&) = delete;
  Store& operator=(const Store&) = delete;

  static int CurrentSchemaVersion();
  int schema_version() const;
  const std::string& path() const;

  // BEGIN IMMEDIATE / COMMIT / ROLLBACK. Every write below requires an open transaction
  // (kInvalidArgument otherwise, and on a read-only store). A Commit that fails rolls the
  // transaction back: nothing of it is kept, and the transaction is closed.
  Status Begin();
  Status Commit();
  Status Rollback();
  bool in_transaction() const;

  // Group commit without waiting for the disk (StoreOptions::deferred_sync). CommitDeferred
  // commits like Commit() and sets *ticket; the transaction is durable once durable_ticket()
  // >= *ticket. Tickets grow by one per commit. Without deferred_sync it is Commit() and the
  // ticket is durable at once. sync_wake_fd() (deferred_sync only, else -1) is an eventfd that
  // turns readable when durable_ticket() advances or a sync fails; ClearSyncWake() resets it.
  // sync_status() is the first failed fdatasync (kIoError): it is final; nothing committed
  // after it is reported durable, and Begin() refuses with it. WaitDurable blocks until the
  // ticket is durable or a sync failed. durable_ticket(), sync_status() and WaitDurable are safe
  // from any thread; the rest belongs to the store's owner.
  Status CommitDeferred(std::uint64_t* ticket);
  std::uint64_t durable_ticket() const;
  Status WaitDurable(std::uint64_t ticket);
  Status sync_status() const;
  int sync_wake_fd() const;
  void ClearSyncWake();

  // Series. FindSeries: *out empty when unknown. EnsureSeries creates the series with `kind` if
  // new; an existing series of another kind is kInvalidArgument
  // ("series b holds date periods, got integer").
  Status FindSeries(const std::string& name, std::optional<SeriesInfo>* out);
  Status EnsureSeries(const std::string& name, PeriodKind kind, SeriesInfo* out);

  // Stores one observation (see the semantics above) and updates series->latest_key.
  // released_at: ISO 8601 text from the sender or empty; received_at: daemon wall-clock text.
  Status PutObservation(SeriesInfo* series, const Period& period, double value,
                        const std::string& released_at, const std::string& received_at,
                        PutOutcome* outcome);
  // Latest vintage of every stored period of the series, ascending by key.
  Status LoadSeries(std::int64_t series_id, std::vector<StoredValue>* out);
  // Number of stored observation rows (all vintages) of all series.
  Status CountObservations(std::int64_t* out);

  // Models. AddModel fails if an active model has the name. DropModel marks it dropped (its
  // records stay). ActiveModels: in the order they were added.
  Status AddModel(const std::string& name, const std::string& spec_text, const std::string& at,
                  std::int64_t* model_id);
  Status DropModel(const std::string& name, const std::string& at);
  Status ActiveModels(std::vector<StoredModel>* out);
  // Sets StoredModel::recorded_inputs (>= 0) of model_id, in the transaction that writes those
  // records. kInvalidArgument for a negative count or an unknown id.
  Status SetRecordedInputs(std::int64_t model_id, std::int64_t inputs);

  // Records written as the models run.
  Status PutTest(const TestRecord& record);
  Status PutSnapshot(const SnapshotRecord& record);
  Status PutAlert(std::int64_t model_id, const AlertEvent& event, const std::string& recorded_at);
  // Removes every test and snapshot record of a model with row > after_row (used when a
  // revision re-estimates a model: the rebuilt run re-records those rows). Alerts are an
  // append-only log of what was published and are never deleted.
  Status DeleteRecordsAfter(std::int64_t model_id, std::int64_t after_row);
  // Alerts of a model in the order recorded.
  Status LoadAlerts(std::int64_t model_id, std::vector<AlertEvent>* out);
  // Retention: keep only tests and snapshots of the last keep_rows (>= 0) model rows of each
  // model (the last row: the larger of its last tests and last snapshot row). Alerts stay.
  Status PruneRecords(std::int64_t keep_rows);

  // Size of the database file plus its WAL, in bytes.
  std::int64_t FileBytes() const;
  // PRAGMA integrity_check: *result is "ok" when the file is sound.
  Status IntegrityCheck(std::string* result);

 private:
  struct Impl;
  explicit Store(std::unique_ptr<Impl> impl);
  Status CommitStep();  // COMMIT (a failure rolls back), no waiting for a deferred sync
  std::unique_ptr<Impl> impl_;
};

}  // namespace rimwatch::daemon
