#include "report_command.h"

#include <unistd.h>

#include <cstdio>
#include <fstream>
#include <iostream>
#include <memory>
#include <vector>

#include "report_history.h"
#include "report_page.h"

#ifndef RIMWATCH_VERSION
#define RIMWATCH_VERSION "unknown"
#endif

namespace rimwatch::cli {
namespace {

constexpr const char* kReportDescription =
    "Write a self-contained HTML report (charts and alerts) of a rimwatch log";

constexpr const char* kReportFooter =
    "\nReads the SQLite log that rimwatchd or `rimwatch replay --db` wrote (opened read only: no\n"
    "record is changed) and writes one HTML file that needs nothing else: inline SVG charts\n"
    "and styles, no network, no external fonts or scripts; it prints on paper too.\n"
    "For each model (or the one given with --model):\n"
    "  - a header: variables, lags, window, rows, first and last period, the spec text;\n"
    "  - stability: the spectral radius per row with its 95% band (rho +- 1.96 SE) and the\n"
    "    warn and critical levels; the companion eigenvalues of the last snapshot in the\n"
    "    complex plane with the unit circle, earlier snapshots as a fading trail;\n"
    "  - each monitored restriction: the rolling robust Wald p-value (log scale) and its alarm\n"
    "    scan against the warn and critical thresholds;\n"
    "  - the CUSUM, volatility, parameter-constancy and residual-check monitors against their\n"
    "    levels (grey where a monitor is not armed, tinted where an alert was active);\n"
    "  - the alert timeline (raised to cleared, by level) and a table of every transition;\n"
    "  - the coefficient paths of one equation (--equation, default the first variable) over\n"
    "    the snapshots, with +-1.96 SE bands.\n"
    "Periods on the axes are the period labels stored in the log.\n"
    "\n"
    "Example:\n"
    "  rimwatch replay --spec desk.toml --csv history.csv --db desk.sqlite\n"
    "  rimwatch report --db desk.sqlite --model desk --equation beta --out desk.html\n"
    "\n"
    "The report is statistical evidence, not trading or policy advice.\n"
    "\n"
    "Exit codes:\n"
    "  0  success: the report is written to --out\n"
    "  1  unexpected internal failure\n"
    "  2  bad input: a missing or unreadable log, a file that is not a rimwatch log (or of\n"
    "     another schema version), an unknown --model (stderr lists the models in the log) or\n"
    "     --equation, an --out file that cannot be written; nothing is written\n"
    "  3  the log holds no estimated rows yet for the model(s) to report: nothing to chart\n";

std::string Join(const std::vector<std::string>& items) {
  std::string out;
  for (const std::string& s : items) out += (out.empty() ? "" : ", ") + s;
  return out;
}

// Writes the text to path via a temporary file renamed over it, so a failure leaves no partial
// report. False after a message.
bool WriteWhole(const std::string& path, const std::string& text, std::ostream& err) {
  const std::string tmp = path + ".tmp." + std::to_string(getpid());
  {
    std::ofstream f(tmp, std::ios::binary | std::ios::trunc);
    if (!f) {
      err << "rimwatch report: " << path << ": cannot be written (cannot create " << tmp << ")\n";
      return false;
    }
    f << text;
    f.flush();
    if (!f) {
      err << "rimwatch report: " << path << ": writing failed\n";
      f.close();
      std::remove(tmp.c_str());
      return false;
    }
  }
  if (std::rename(tmp.c_str(), path.c_str()) != 0) {
    err << "rimwatch report: " << path << ": cannot be written (rename from " << tmp
        << " failed)\n";
    std::remove(tmp.c_str());
    return false;
  }
  return true;
}

}  // namespace

int RunReport(const ReportCommandOptions& options, std::ostream& out, std::ostream& err) {
  if (options.out.empty()) {
    err << "rimwatch report: --out FILE is required (\"-\" writes to stdout)\n";
    return kExitBadInput;
  }
  std::unique_ptr<HistoryReader> reader;
  Status st = HistoryReader::Open(options.db, &reader);
  if (!st.ok()) {
    err << "rimwatch report: " << st.message() << "\n";
    return kExitBadInput;
  }
  std::vector<LoggedModel> logged;
  st = reader->Models(&logged);
  if (!st.ok()) {
    err << "rimwatch report: " << st.message() << "\n";
    return kExitBadInput;
  }
  if (logged.empty()) {
    err << "rimwatch report: " << options.db << " holds no model yet (add one to rimwatchd, or "
        << "write one with `rimwatch replay --db`)\n";
    return kExitNotEstimable;
  }
  std::vector<LoggedModel> chosen;
  if (options.model.empty()) {
    chosen = logged;
  } else {
    // The active model of that name, else the latest dropped one.
    const LoggedModel* pick = nullptr;
    for (const LoggedModel& m : logged) {
      if (m.name != options.model) continue;
      if (pick == nullptr || !m.dropped_at || pick->dropped_at) pick = &m;
    }
    if (pick == nullptr) {
      std::vector<std::string> names;
      for (const LoggedModel& m : logged) {
        names.push_back(m.name + (m.dropped_at ? " (dropped)" : ""));
      }
      err << "rimwatch report: no model '" << options.model << "' in " << options.db
          << "; it holds: " << Join(names) << "\n";
      return kExitBadInput;
    }
    chosen.push_back(*pick);
  }
  std::vector<ModelHistory> histories(chosen.size());
  bool any_rows = false;
  for (std::size_t i = 0; i < chosen.size(); ++i) {
    st = reader->Load(chosen[i], &histories[i]);
    if (!st.ok()) {
      err << "rimwatch report: " << options.db << ": " << st.message() << "\n";
      return kExitBadInput;
    }
    any_rows = any_rows || !histories[i].rows.empty();
  }
  if (!any_rows) {
    err << "rimwatch report: no rows yet: " << options.db << " holds no estimated rows for "
        << (chosen.size() == 1 ? "model '" + chosen[0].name + "'"
                               : std::to_string(chosen.size()) + " models")
        << " (a model records its first row once it has more rows than lags); nothing to chart\n";
    return kExitNotEstimable;
  }
  if (!options.equation.empty()) {
    for (const ModelHistory& h : histories) {
      if (h.rows.empty()) continue;
      const std::vector<std::string> vars = ModelVariables(h);
      bool found = false;
      for (const std::string& v : vars) found = found || v == options.equation;
      if (!found) {
        err << "rimwatch report: --equation " << options.equation << ": model '" << h.model.name
            << "' has no such variable; its variables: " << Join(vars)
            << (options.model.empty() ? " (choose one model with --model)" : "") << "\n";
        return kExitBadInput;
      }
    }
  }
  ReportPageOptions page;
  page.db_path = options.db;
  page.equation = options.equation;
  page.version = RIMWATCH_VERSION;
  const std::string html = RenderReportPage(histories, page);
  if (options.out == "-") {
    out << html;
    return out ? kExitOk : kExitInternal;
  }
  if (!WriteWhole(options.out, html, err)) return kExitBadInput;
  std::size_t rows = 0, alerts = 0;
  for (const ModelHistory& h : histories) {
    rows += h.rows.size();
    alerts += h.alerts.size();
  }
  err << "report: wrote " << options.out << " (" << histories.size()
      << (histories.size() == 1 ? " model, " : " models, ") << rows << " rows, " << alerts
      << " alert transitions)\n";
  return kExitOk;
}

Command RegisterReportCommand(CLI::App* parent) {
  auto options = std::make_shared<ReportCommandOptions>();
  CLI::App* sub = parent->add_subcommand("report", kReportDescription);
  sub->add_option("--db", options->db, "the rimwatch log (SQLite) to read")
      ->required()
      ->type_name("FILE");
  sub->add_option("--model", options->model, "report only this model (default: every model)")
      ->type_name("NAME");
  sub->add_option("--equation", options->equation,
                  "coefficient paths of this variable's equation (default: the first variable)")
      ->type_name("VAR");
  sub->add_option("--out", options->out, "the HTML file to write (\"-\": stdout)")
      ->required()
      ->type_name("FILE");
  sub->footer(kReportFooter);
  return Command{sub, [options] { return RunReport(*options, std::cout, std::cerr); }};
}

}  // namespace rimwatch::cli
