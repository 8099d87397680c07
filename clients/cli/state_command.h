// `rimwatch state MODEL`: the daemon's current state of one model (a "state" request, reply in
// schemas/wire/reply.state.schema.json): the tracking window's coefficients with the configured
// standard errors, residual covariance, companion eigenvalues, the spectral radius against its
// alert band, the latest Wald test of each monitored restriction and the active alerts.
// --json prints the reply exactly as received.
#pragma once

#include <iosfwd>
#include <string>

#include "command.h"
#include "daemon_client.h"

namespace rimwatch::cli {

struct StateCommandOptions {
  ConnectionOptions connection;
  std::string model;  // positional MODEL
  bool json = false;  // --json: the reply as is
};

Command RegisterStateCommand(CLI::App* parent);

// Runs `state`: the report (or the reply) to `out`, messages to `err`. Returns kExitOk,
// kExitRefused (e.g. unknown_model) or kExitUnreachable.
int RunState(const StateCommandOptions& options, std::ostream& out, std::ostream& err);

// The readable report of a state reply (exposed for tests).
void WriteStateText(const nlohmann::ordered_json& reply, const TerminalStyle& style,
                    std::ostream& out);

}  // namespace rimwatch::cli
