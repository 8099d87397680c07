// `rimwatch replay`: a CSV history through the very Monitor that rimwatchd runs, offline.
// Prints every alert transition (a readable timeline, or JSON lines) and ends with the final
// state in the keys of `rimwatch fit --json`.
#pragma once

#include <iosfwd>
#include <string>

#include "command.h"

namespace rimwatch::cli {

struct ReplayCommandOptions {
  std::string spec;   // --spec FILE (TOML, schemas/model.example.toml)
  std::string csv;    // --csv FILE (columns named like the spec's variables; others ignored)
  bool json = false;  // --json: one JSON object per event, then {"summary": ...}
  std::string db;     // --db FILE: also write the SQLite log rimwatchd writes (store.h)
  bool skip_refused = false;  // --skip-refused: go on past rows the model refuses, as
                              // rimwatchd does (each named on stderr); else exit 2 at the first
  bool progress = false;      // progress on stderr (set when stderr is a terminal)
};

Command RegisterReplayCommand(CLI::App* parent);

// Runs `replay`. Output goes to `out` only once the whole file has been replayed; messages to
// `err`. With options.db the log is written in one transaction that commits only on success
// (a file the run created is removed on failure). Returns kExitOk, kExitBadInput (bad spec or
// CSV, a row the model refuses without --skip-refused, a --db file that may not be written) or
// kExitNotEstimable (the final window cannot be summarised).
int RunReplay(const ReplayCommandOptions& options, std::ostream& out, std::ostream& err);

}  // namespace rimwatch::cli
