// Formatting of a FitReport: the JSON document of `rimwatch fit --json` (schemas/fit.schema.json)
// and the readable report. Pure formatting: every number comes from FitVar.
#pragma once

#include <iosfwd>
#include <nlohmann/json.hpp>

#include "csv_table.h"
#include "rimwatch/engine/var_fit.h"

namespace rimwatch::cli {

// The last line of every readable report.
inline constexpr const char* kCaution =
    "Caution: statistical output is evidence, not trading or policy advice; validate on your own "
    "history before acting.";

// The JSON document: daemon::FitReportJson (rimwatch/daemon/fit_json.h, shared with the daemon's
// state reply) with the table's labels of the first and last estimation rows.
// REQUIRES: `report` came from FitVar(table data, table.names, options) with status OK.
nlohmann::ordered_json FitReportJson(const CsvTable& table, const FitOptions& options,
                                     const FitReport& report);

// The readable report, ending with kCaution.
void WriteFitText(const CsvTable& table, const FitOptions& options, const FitReport& report,
                  std::ostream& out);

}  // namespace rimwatch::cli
