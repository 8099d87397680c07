#include "replay_command.h"

#include <sys/stat.h>
#include <unistd.h>

#include <Eigen/Core>
#include <chrono>
#include <cstdio>
#include <ctime>
#include <fstream>
#include <iostream>
#include <memory>
#include <sstream>

#include "csv_table.h"
#include "fit_output.h"
#include "rimwatch/daemon/model_spec_toml.h"
#include "rimwatch/daemon/period.h"
#include "rimwatch/daemon/record.h"
#include "rimwatch/daemon/store.h"
#include "rimwatch/daemon/wall_clock.h"
#include "rimwatch/engine/monitor.h"

namespace rimwatch::cli {
namespace {

using json = nlohmann::ordered_json;

constexpr const char* kReplayDescription =
    "Replay a CSV history through the live monitoring engine and print its alerts";

constexpr const char* kReplayFooter =
    "\nRuns every row of the CSV through the same Monitor that rimwatchd runs (transforms,\n"
    "tracking window, stability, CUSUM and volatility monitors, monitored restrictions, alert\n"
    "policy), so what it prints is what the daemon would have raised on that history, to the\n"
    "last bit. Use it to validate a model spec on your own history before trusting its alerts.\n"
    "\n"
    "The CSV is read as for `rimwatch fit`; its columns are matched to the spec's variables by\n"
    "name (other columns are ignored). Without --json: one line per alert transition, then the\n"
    "final state. With --json: one JSON object per transition {period, row, model, monitor,\n"
    "transition, level, statistic, threshold, message} where row is the 1-based data row of the\n"
    "CSV that completed the model row, then a last line {\"summary\": ...} with the keys of\n"
    "`rimwatch fit --json` for the tracking window.\n"
    "\n"
    "A row the model refuses (a value <= 0 under logdiff, a non-finite value) ends the replay\n"
    "with exit 2. rimwatchd instead leaves the model as it was, reports the row and goes on;\n"
    "--skip-refused does the same here, so the replay matches the daemon on such data too.\n"
    "\n"
    "With --db FILE the replay also writes the SQLite log that rimwatchd writes (same schema,\n"
    "same records): the series of the spec's variables, every observation, the model with its\n"
    "spec text, and for every model row its tests record, its snapshot at the daemon's cadence\n"
    "and its alerts. Periods come from the CSV's period column, which must then hold integers,\n"
    "dates (YYYY-MM-DD) or timestamps with a zone (YYYY-MM-DDTHH:MM[:SS]Z or +hh:mm), one kind,\n"
    "strictly increasing; the engine sees their canonical text, as in the daemon. Without a\n"
    "period column the periods are the data row numbers 1, 2, ... The log is written in one\n"
    "transaction: if the replay fails, nothing is written (a file it created is removed).\n"
    "Nothing already in FILE is lost: a missing or empty FILE becomes a new log; an existing\n"
    "FILE is used only if it is a rimwatch log of this build's schema version in which no\n"
    "active model has the spec's name. Observations of series already in it are stored as\n"
    "the daemon stores them (an equal value is a duplicate and not written again, a different\n"
    "one a new vintage); nothing is overwritten. The replay holds FILE's write lock until it\n"
    "ends, so do not point it at the log of a running rimwatchd.\n"
    "\n"
    "Example:\n"
    "  rimwatch replay --spec schemas/model.example.toml --csv history.csv --json\n"
    "  rimwatch replay --spec desk.toml --csv history.csv --db desk.sqlite\n"
    "\n"
    "Alerts are statistical evidence, not trading or policy advice.\n"
    "\n";

std::string ReadFile(const std::string& path, bool* ok) {
  std::ifstream in(path, std::ios::binary);
  *ok = in.good();
  std::ostringstream ss;
  ss << in.rdbuf();
  return ss.str();
}

json EventJson(const AlertEvent& ev, std::size_t data_row) {
  return json{{"period", ev.period},
              {"row", data_row},
              {"model", ev.model},
              {"monitor", ev.monitor},
              {"transition", ev.raised ? "raised" : "cleared"},
              {"level", AlertLevelName(ev.level)},
              {"statistic", ev.statistic},
              {"threshold", ev.threshold},
              {"message", ev.message}};
}

void WriteEventLine(const AlertEvent& ev, std::ostream& out) {
  char head[160];
  std::snprintf(head, sizeof head, "%-12s %-10s %-8s %-8s %10.4g / %-10.4g ", ev.period.c_str(),
                ev.monitor.c_str(), ev.raised ? "RAISED" : "cleared", AlertLevelName(ev.level),
                ev.statistic, ev.threshold);
  out << head << ev.message << "\n";
}

// The period of every CSV row for --db: the period column parsed as rimwatchd parses periods
// (one kind, strictly increasing), or the 1-based row numbers. False after a FILE:LINE message.
bool ReplayPeriods(const CsvTable& table, std::vector<daemon::Period>* out, std::ostream& err) {
  out->clear();
  for (std::size_t r = 0; r < table.rows(); ++r) {
    daemon::Period p = daemon::IntegerPeriod(static_cast<std::int64_t>(r) + 1);
    if (table.has_period) {
      const Status st = daemon::ParsePeriod(table.periods[r], &p);
      std::string why;
      if (!st.ok()) {
        why = st.message() + " (--db needs integer, date or timestamp periods)";
      } else if (!out->empty() && p.kind != out->front().kind) {
        why = "period " + p.text + " is of kind " + std::string(daemon::PeriodKindName(p.kind)) +
              ", the first row's of kind " +
              std::string(daemon::PeriodKindName(out->front().kind)) + " (--db needs one kind)";
      } else if (!out->empty() && p.key <= out->back().key) {
        why = "period " + p.text + " is not after the previous row's " + out->back().text +
              " (--db needs strictly increasing periods)";
      }
      if (!why.empty()) {
        err << CsvError{table.path, table.lines[r], why}.ToString() << "\n";
        return false;
      }
    }
    out->push_back(std::move(p));
  }
  return true;
}

// The --db side of a replay: one transaction holding what rimwatchd would have written for the
// same input. Abandon() (or destruction before Commit) rolls back and removes a created file.
class ReplayLog {
 public:
  ~ReplayLog() { Abandon(); }

  // Applies the file rules of the help text; false after a message.
  bool Open(const std::string& path, const ModelSpec& spec, std::ostream& err) {
    path_ = path;
    struct stat info;
    const bool exists = stat(path.c_str(), &info) == 0;
    created_ = !exists;
    if (exists && info.st_size > 0) {
      daemon::StoreOptions ro;
      ro.path = path;
      ro.read_only = true;
      std::unique_ptr<daemon::Store> existing;
      Status st = daemon::Store::Open(ro, &existing);
      std::vector<daemon::StoredModel> models;
      if (st.ok()) st = existing->ActiveModels(&models);
      if (!st.ok()) {
        err << path << ": refusing to write into it: " << st.message() << "\n";
        return false;
      }
      for (const daemon::StoredModel& m : models) {
        if (m.name == spec.name) {
          err << path << ": refusing to write into it: model '" << spec.name
              << "' is active there (id " << m.id << "); use another --db file\n";
          return false;
        }
      }
    }
    daemon::StoreOptions options;
    options.path = path;
    const Status st = daemon::Store::Open(options, &store_);
    if (!st.ok()) {
      err << path << ": " << st.message() << "\n";
      return false;
    }
    return true;
  }

  Status Begin(const ModelSpec& spec, const std::string& spec_text, daemon::PeriodKind kind) {
    now_ = daemon::UtcNowText();
    Status st = store_->Begin();
    for (std::size_t i = 0; st.ok() && i < spec.var.variables.size(); ++i) {
      series_.emplace_back();
      st = store_->EnsureSeries(spec.var.variables[i], kind, &series_.back());
    }
    model_name_ = spec.name;
    if (st.ok()) st = store_->AddModel(spec.name, spec_text, now_, &model_id_);
    return st;
  }

  Status PutRow(const daemon::Period& period, const Eigen::VectorXd& raw) {
    for (std::size_t i = 0; i < series_.size(); ++i) {
      daemon::PutOutcome outcome;
      Status st = store_->PutObservation(&series_[i], period, raw[static_cast<Eigen::Index>(i)], "",
                                         now_, &outcome);
      if (!st.ok()) return st;
      ++outcomes_[static_cast<int>(outcome)];
    }
    return Status::Ok();
  }

  Status Record(const Monitor& monitor, const RowReport& report) {
    alerts_ += report.events.size();
    return daemon::RecordRow(*store_, model_id_, monitor, report, daemon::RecordOptions{}, now_);
  }

  Status Commit() {
    const Status st = store_->Commit();
    if (st.ok()) committed_ = true;
    return st;
  }

  void Abandon() {
    if (committed_ || !store_) return;
    if (store_->in_transaction()) store_->Rollback();
    store_.reset();
    if (created_) {
      for (const char* suffix : {"", "-wal", "-shm"}) std::remove((path_ + suffix).c_str());
    }
  }

  std::string Describe(std::int64_t model_rows) const {
    std::ostringstream s;
    s << "replay: wrote model '" << model_name_ << "' (id " << model_id_ << ") to " << path_ << ": "
      << outcomes_[0] << " new observations";
    if (outcomes_[1] + outcomes_[2] + outcomes_[3] > 0) {
      s << " (and " << outcomes_[1] << " duplicates not written, " << outcomes_[2] << " revisions, "
        << outcomes_[3] << " late)";
    }
    s << ", " << model_rows << " model rows, " << alerts_ << " alerts";
    return s.str();
  }

 private:
  std::string path_;
  bool created_ = false;
  bool committed_ = false;
  std::unique_ptr<daemon::Store> store_;
  std::vector<daemon::SeriesInfo> series_;
  std::int64_t model_id_ = 0;
  std::string model_name_;
  std::string now_;
  std::int64_t outcomes_[4] = {0, 0, 0, 0};  // PutOutcome order
  std::size_t alerts_ = 0;
};

}  // namespace

int RunReplay(const ReplayCommandOptions& options, std::ostream& out, std::ostream& err) {
  bool ok = false;
  const std::string text = ReadFile(options.spec, &ok);
  if (!ok) {
    err << options.spec << ": cannot read the model spec\n";
    return kExitBadInput;
  }
  ModelSpec spec;
  Status st = ParseModelSpecToml(text, options.spec, &spec);
  if (!st.ok()) {
    err << st.message() << "\n";
    return kExitBadInput;
  }
  CsvTable table;
  CsvError csv_error;
  if (!ReadCsvTable(options.csv, &table, &csv_error)) {
    err << csv_error.ToString() << "\n";
    return kExitBadInput;
  }
  std::vector<std::size_t> column;  // CSV column of each spec variable
  for (const std::string& v : spec.var.variables) {
    std::size_t c = 0;
    while (c < table.cols() && table.names[c] != v) ++c;
    if (c == table.cols()) {
      err << CsvError{table.path, table.header_line,
                      "no column '" + v + "' for variable '" + v + "' of model '" + spec.name + "'"}
                 .ToString()
          << "\n";
      return kExitBadInput;
    }
    column.push_back(c);
  }
  std::unique_ptr<Monitor> monitor;
  st = Monitor::Create(spec, &monitor);
  if (!st.ok()) {
    err << options.spec << ": " << st.message() << "\n";
    return kExitBadInput;
  }
  std::vector<daemon::Period> periods;
  std::unique_ptr<ReplayLog> log;
  if (!options.db.empty()) {
    if (!ReplayPeriods(table, &periods, err)) return kExitBadInput;
    // Labels everywhere (engine, events, summary) are the canonical text the daemon uses.
    if (table.has_period) {
      for (std::size_t r = 0; r < table.rows(); ++r) table.periods[r] = periods[r].text;
    }
    log = std::make_unique<ReplayLog>();
    if (!log->Open(options.db, spec, err)) return kExitBadInput;
    st = log->Begin(spec, text,
                    periods.empty() ? daemon::PeriodKind::kInteger : periods.front().kind);
    if (!st.ok()) {
      err << options.db << ": " << st.message() << "\n";
      return kExitBadInput;
    }
  }

  std::ostringstream body;
  std::vector<std::size_t> data_row_of;  // model row (1-based) -> 0-based data row
  Eigen::VectorXd raw(static_cast<Eigen::Index>(column.size()));
  std::size_t events = 0;
  std::size_t refused = 0;
  constexpr std::size_t kRefusalsShown = 20;
  for (std::size_t r = 0; r < table.rows(); ++r) {
    for (std::size_t i = 0; i < column.size(); ++i)
      raw[static_cast<Eigen::Index>(i)] = table.value(r, column[i]);
    if (log) {
      st = log->PutRow(periods[r], raw);
      if (!st.ok()) {
        err << CsvError{table.path, table.lines[r], options.db + ": " + st.message()}.ToString()
            << "\n";
        return kExitBadInput;
      }
    }
    const RowReport report = monitor->Update(table.PeriodLabel(r), raw);
    if (!report.status.ok()) {
      const std::string why =
          CsvError{table.path, table.lines[r], report.status.message()}.ToString();
      if (!options.skip_refused) {
        err << why << "\n";
        return kExitBadInput;
      }
      // What rimwatchd does with a row its model refuses: the row leaves the model as it was,
      // the refusal is reported, and the next row goes on (ModelHost::RunRow).
      if (options.progress) err << "\r\033[K";
      if (++refused <= kRefusalsShown) err << why << " (row skipped)\n";
      continue;
    }
    if (log) {
      st = log->Record(*monitor, report);
      if (!st.ok()) {
        err << options.db << ": " << st.message() << "\n";
        return kExitBadInput;
      }
    }
    if (report.estimated) data_row_of.push_back(r);
    for (const AlertEvent& ev : report.events) {
      ++events;
      if (options.json) {
        body << EventJson(ev, r + 1).dump() << "\n";
      } else {
        WriteEventLine(ev, body);
      }
    }
    if (options.progress && (r + 1) % 5000 == 0) {
      err << "\rreplay: " << (r + 1) << " / " << table.rows() << " rows, " << events << " events"
          << std::flush;
    }
  }
  if (options.progress) err << "\r\033[K";
  if (refused > 0) {
    if (refused > kRefusalsShown) err << "(" << (refused - kRefusalsShown) << " more not shown)\n";
    err << options.csv << ": " << refused << " rows refused by the model and skipped\n";
  }

  FitReport summary;
  st = monitor->Summary(&summary);
  if (!st.ok()) {
    err << options.csv << ": the final window cannot be summarised: " << st.ToString() << "\n";
    return kExitNotEstimable;
  }
  // The summary describes the tracking window: its rows and where they start in the file.
  const std::int64_t window = monitor->tracking().rows_in_window();
  summary.rows = window;
  summary.first_row =
      static_cast<int>(data_row_of[data_row_of.size() - static_cast<std::size_t>(window)]);
  FitOptions as_fit;
  as_fit.lags = spec.var.lags;
  as_fit.deterministic = spec.var.deterministic;
  as_fit.covariance = spec.inference.covariance;
  if (options.json) {
    json doc = FitReportJson(table, as_fit, summary);
    json active = json::array();
    for (const AlertEvent& ev : monitor->ActiveAlerts())
      active.push_back(EventJson(ev, data_row_of[static_cast<std::size_t>(ev.row - 1)] + 1));
    doc["active_alerts"] = active;
    doc["model_rows"] = monitor->rows();
    body << json{{"summary", doc}}.dump() << "\n";
  } else {
    if (events == 0) body << "no alert transitions in " << table.rows() << " rows\n";
    body << "\nFinal state of model '" << spec.name << "' (" << WindowKindName(spec.var.window.kind)
         << " window, " << window << " rows):\n\n";
    WriteFitText(table, as_fit, summary, body);
  }
  if (log) {
    st = log->Commit();
    if (!st.ok()) {
      err << options.db << ": " << st.message() << "\n";
      return kExitBadInput;
    }
    err << log->Describe(monitor->rows()) << "\n";
  }
  out << body.str();
  return kExitOk;
}

Command RegisterReplayCommand(CLI::App* parent) {
  auto options = std::make_shared<ReplayCommandOptions>();
  CLI::App* sub = parent->add_subcommand("replay", kReplayDescription);
  sub->add_option("--spec", options->spec, "model spec (TOML)")->required()->type_name("FILE");
  sub->add_option("--csv", options->csv, "history to replay, oldest row first")
      ->required()
      ->type_name("FILE");
  sub->add_flag("--json", options->json, "JSON lines instead of the readable timeline");
  sub->add_flag("--skip-refused", options->skip_refused,
                "go on past rows the model refuses (e.g. a value <= 0 under logdiff), as "
                "rimwatchd does; each is named on stderr");
  sub->add_option("--db", options->db,
                  "also write rimwatchd's SQLite log of this run to FILE (see below)")
      ->type_name("FILE");
  sub->footer(std::string(kReplayFooter) + kExitCodeHelp);
  return Command{sub, [options] {
                   options->progress = isatty(STDERR_FILENO) != 0;
                   return RunReplay(*options, std::cout, std::cerr);
                 }};
}

}  // namespace rimwatch::cli
