// What `rimwatch report` reads from a rimwatch log (schemas/store.sql): each model's spec, its
// per-row statistics (tests table, RowPayload of daemon/record.h), its snapshots (SnapshotPayload)
// and its alert transitions.
//
// The file is opened twice, both read-only: once with the store library (daemon/store.h), which
// checks that it is a rimwatch log of this build's schema version (with its own clear messages)
// and reads the alerts; once with SQLite directly for what the store has no read call for
// (every model including dropped ones, the tests and snapshots tables). Nothing is written.
//
// Per-row series are column-wise and aligned to ModelHistory::rows; a value the payload does not
// carry on a row (not a robust row, a null number) is NaN there. A monitor's reading absent from
// a row's payload is its reading on the previous row (logs keep the readings that changed,
// daemon/record.h), NaN before the first row that has it.
//
// Thread safety: none (one owner).
#pragma once

#include <complex>
#include <cstdint>
#include <map>
#include <memory>
#include <optional>
#include <string>
#include <vector>

#include "rimwatch/engine/alert.h"
#include "rimwatch/engine/model_spec.h"
#include "rimwatch/engine/status.h"

struct sqlite3;

namespace rimwatch::daemon {
class Store;
}  // namespace rimwatch::daemon

namespace rimwatch::cli {

struct LoggedModel {
  std::int64_t id = 0;
  std::string name;
  std::string spec_text;
  std::string added_at;
  std::optional<std::string> dropped_at;
};

// One monitor's readings ("monitors" of RowPayload), aligned to ModelHistory::rows.
struct MonitorTrack {
  std::vector<double> statistic, warn, critical;
  std::vector<char> armed;  // 1 armed, 0 training / unavailable / absent
};

// One monitored restriction's rolling Wald test ("restrictions" of RowPayload).
struct RestrictionTrack {
  std::vector<double> statistic, p_value;
  int df = 0;                    // from the last row that had the test
  std::int64_t unavailable = 0;  // rows on which it could not be computed
  std::string last_unavailable;  // the reason given on the last of them
};

struct Snapshot {
  std::int64_t row = 0;
  std::string period;
  std::vector<std::vector<double>> coefficients;  // n x k, NaN for null
  std::vector<std::vector<double>> se;            // n x k
  std::vector<std::complex<double>> eigenvalues;  // companion eigenvalues
  double rho = 0.0;
  double rho_se = 0.0;  // NaN when unavailable
  std::vector<std::string> regressors;
  std::vector<std::string> variables;
};

struct ModelHistory {
  LoggedModel model;
  bool spec_parsed = false;
  ModelSpec spec;          // when spec_parsed
  std::string spec_error;  // otherwise: why the stored text did not parse with this build
  std::vector<std::int64_t> rows;
  std::vector<std::string> periods;
  std::vector<double> rho, rho_se, rows_to_unit;
  std::int64_t rows_not_estimable = 0;     // rows whose "estimate" was not "ok"
  std::string last_not_estimable;          // and the last such message
  std::vector<std::string> monitor_names;  // in payload order (the engine's event order)
  std::map<std::string, MonitorTrack> monitors;
  std::vector<std::string> restriction_names;
  std::map<std::string, RestrictionTrack> restrictions;
  std::vector<Snapshot> snapshots;  // by row
  std::vector<AlertEvent> alerts;   // in the order recorded

  // The period text of the recorded row nearest to `row` (rows is ascending).
  const std::string& PeriodNear(double row, std::size_t* index = nullptr) const;
};

class HistoryReader {
 public:
  // kInvalidArgument: missing file, not a rimwatch log, other schema version (message says
  // which); kIoError for SQLite failures.
  static Status Open(const std::string& path, std::unique_ptr<HistoryReader>* out);
  ~HistoryReader();
  HistoryReader(const HistoryReader&) = delete;
  HistoryReader& operator=(const HistoryReader&) = delete;

  int schema_version() const { return schema_version_; }
  // Every model ever added, by id (dropped ones too).
  Status Models(std::vector<LoggedModel>* out);
  // Everything the report draws for one model. kIoError / kInvalidArgument naming the table and
  // row for an unreadable or malformed record.
  Status Load(const LoggedModel& model, ModelHistory* out);

 private:
  HistoryReader() = default;
  Status LoadTests(ModelHistory* out);
  Status LoadSnapshots(ModelHistory* out);

  std::string path_;
  sqlite3* db_ = nullptr;
  int schema_version_ = 0;
  std::unique_ptr<daemon::Store> store_;
};

}  // namespace rimwatch::cli
