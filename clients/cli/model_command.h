// `rimwatch model add FILE.toml | drop MODEL | list`: manage the models rimwatchd monitors
// (requests model.add, model.drop, model.list of schemas/wire/request.schema.json).
//
// add checks the spec locally first (the reader rimwatchd uses, so a bad file is refused with
// FILE:LINE before anything is sent), then sends its text; the daemon estimates the new model on
// the history it already stores and keeps DIR/models/<name>.toml in step. drop stops monitoring
// a model (its records stay in the store). list prints the active models.
#pragma once

#include <iosfwd>
#include <string>

#include "command.h"
#include "daemon_client.h"

namespace rimwatch::cli {

struct ModelCommandOptions {
  ConnectionOptions connection;
  std::string action;  // "add" | "drop" | "list" (the sub-subcommand that was chosen)
  std::string file;    // add: the spec file
  std::string model;   // drop: the model name
  bool json = false;   // --json: the reply as is
};

Command RegisterModelCommand(CLI::App* parent);

// Runs `model <action>`: the result to `out`, messages to `err`. Returns kExitOk, kExitBadInput
// (add: unreadable or invalid spec file), kExitRefused (bad_spec, model_exists, unknown_model)
// or kExitUnreachable.
int RunModel(const ModelCommandOptions& options, std::ostream& out, std::ostream& err);

// The models of a model.list or health reply as a table (aligned, or tab-separated); `spec`:
// with the columns variables and lags (a model.list reply has them, a health reply not).
void WriteModelTable(const nlohmann::ordered_json& models, bool spec, bool aligned,
                     std::ostream& out);

}  // namespace rimwatch::cli
