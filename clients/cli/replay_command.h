// `rimwatch replay`: a CSV history through the very Monitor that rimwatchd runs, offline.
// Prints every alert transition (a readable timeline, or JSON lines) and ends with the final
// state in the keys of `rimwatch fit --json`.
#pragma once

#include <iosfwd>
#include <string>

#include "command.h"

namespace rimwatch::cli {

struct ReplayCommandOptions {
  std::string spec;       // --spec FILE (TOML, schemas/model.example.toml)
  std::string csv;        // --csv FILE (columns named like the spec's variables; others ignored)
  bool json = false;      // --json: one JSON object per event, then {"summary": ...}
  bool progress = false;  // progress on stderr (set when stderr is a terminal)
};

Command RegisterReplayCommand(CLI::App* parent);

// Runs `replay`. Output goes to `out` only once the whole file has been replayed; messages to
// `err`. Returns kExitOk, kExitBadInput (bad spec or CSV, a row the model refuses) or
// kExitNotEstimable (the final window cannot be summarised).
int RunReplay(const ReplayCommandOptions& options, std::ostream& out, std::ostream& err);

}  // namespace rimwatch::cli
