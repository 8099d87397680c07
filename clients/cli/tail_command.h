// `rimwatch tail`: follows rimwatchd's events (SUB on the event socket) and prints one line per
// event: est.<model> (what a model row produced), alert.<model> (an alert raised or cleared) and
// reject (summaries of refused input). Readable lines, or JSON lines
// {"topic":..,"received_at":..,"event":{..}} where event is the body exactly as published
// (schemas/wire/event.*.schema.json).
//
// Runs until SIGINT or SIGTERM (exit 0), --count events or --for seconds.
//
// Thread safety: RunTail uses a process-wide signal flag; one run at a time.
#pragma once

#include <cstdint>
#include <iosfwd>
#include <string>

#include "command.h"
#include "daemon_client.h"

namespace rimwatch::cli {

struct TailCommandOptions {
  ConnectionOptions connection;
  std::string model;         // --model: only this model's events (and reject events about it)
  bool alerts = false;       // --alerts: only alert events
  bool json = false;         // --json: JSON lines
  std::int64_t count = 0;    // --count: stop after N printed events; 0 = no limit
  double for_seconds = 0.0;  // --for: stop after this many seconds; 0 = no limit
};

Command RegisterTailCommand(CLI::App* parent);

// Runs `tail`, printing to `out` (flushed after every event) and messages to `err`. Returns
// kExitOk (stopped by a signal, --count or --for), kExitBadInput or kExitUnreachable (nothing
// listens at the event endpoint when tail starts; once connected, tail waits through restarts).
int RunTail(const TailCommandOptions& options, std::ostream& out, std::ostream& err);

}  // namespace rimwatch::cli
