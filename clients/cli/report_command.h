// `rimwatch report`: one self-contained HTML file (inline SVG charts, no network) from the SQLite
// log that rimwatchd or `rimwatch replay --db` wrote: per model the spectral radius with its band,
// the companion eigenvalues, each monitored restriction, the CUSUM, volatility, constancy and
// residual-check monitors against their levels, the alert timeline with its table of events and
// one equation's coefficient paths (report_page.h lists the charts).
#pragma once

#include <iosfwd>
#include <string>

#include "command.h"

namespace rimwatch::cli {

struct ReportCommandOptions {
  std::string db;        // --db FILE: the rimwatch log (read only)
  std::string model;     // --model NAME: only this model; empty = every model in the log
  std::string equation;  // --equation VAR: coefficient paths of this equation; empty = the first
  std::string out;       // --out FILE: the HTML file; "-" = stdout
};

Command RegisterReportCommand(CLI::App* parent);

// Runs `report`. The HTML is written only when the whole report was built (to FILE.tmp, then
// renamed over FILE); `out` receives it with --out -. Messages go to `err`. Returns kExitOk,
// kExitBadInput (missing or unreadable log, not a rimwatch log, unknown model or equation, an
// output file that cannot be written) or kExitNotEstimable (no model to report has rows yet).
int RunReport(const ReportCommandOptions& options, std::ostream& out, std::ostream& err);

}  // namespace rimwatch::cli
