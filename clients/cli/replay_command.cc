#include "replay_command.h"

#include <unistd.h>

#include <Eigen/Core>
#include <cstdio>
#include <fstream>
#include <iostream>
#include <memory>
#include <sstream>

#include "csv_table.h"
#include "fit_output.h"
#include "rimwatch/daemon/model_spec_toml.h"
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
    "Example:\n"
    "  rimwatch replay --spec schemas/model.example.toml --csv history.csv --json\n"
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

  std::ostringstream body;
  std::vector<std::size_t> data_row_of;  // model row (1-based) -> 0-based data row
  Eigen::VectorXd raw(static_cast<Eigen::Index>(column.size()));
  std::size_t events = 0;
  for (std::size_t r = 0; r < table.rows(); ++r) {
    for (std::size_t i = 0; i < column.size(); ++i)
      raw[static_cast<Eigen::Index>(i)] = table.value(r, column[i]);
    const RowReport report = monitor->Update(table.PeriodLabel(r), raw);
    if (!report.status.ok()) {
      err << CsvError{table.path, table.lines[r], report.status.message()}.ToString() << "\n";
      return kExitBadInput;
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
  sub->footer(std::string(kReplayFooter) + kExitCodeHelp);
  return Command{sub, [options] {
                   options->progress = isatty(STDERR_FILENO) != 0;
                   return RunReplay(*options, std::cout, std::cerr);
                 }};
}

}  // namespace rimwatch::cli
