// `rimwatch health`: how rimwatchd is doing (a "health" request, reply in
// schemas/wire/reply.health.schema.json): uptime, model rows per second, observations stored,
// refused input by code, every model's progress, database size, acknowledgements waiting.
// --json prints the reply exactly as received.
#pragma once

#include <iosfwd>

#include "command.h"
#include "daemon_client.h"

namespace rimwatch::cli {

struct HealthCommandOptions {
  ConnectionOptions connection;
  bool json = false;  // --json: the reply as is
};

Command RegisterHealthCommand(CLI::App* parent);

// Runs `health`: the report (or the reply) to `out`, messages to `err`. Returns kExitOk or
// kExitUnreachable (kExitRefused if the daemon refuses the request, which it should not).
int RunHealth(const HealthCommandOptions& options, std::ostream& out, std::ostream& err);

}  // namespace rimwatch::cli
