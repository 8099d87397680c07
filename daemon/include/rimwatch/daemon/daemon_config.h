// DaemonConfig: rimwatchd's settings. Every field has a default that works (loopback sockets,
// a durable store in the data directory); `--config FILE` (TOML) overrides any of them:
//
//   [sockets]
//   ingest = "tcp://127.0.0.1:7261"   # ROUTER: data and control requests (any ZeroMQ endpoint)
//   events = "tcp://127.0.0.1:7262"   # PUB: est.<model>, alert.<model>, reject
//   allow_remote = false              # true: allow tcp endpoints that are not loopback
//   [store]
//   synchronous = "full"              # full (an ack means on disk) | normal
//   commit_interval_ms = 5            # longest wait of an observation before its commit
//   max_group = 20000                 # observations per transaction at most
//   [limits]
//   max_message_bytes = 1048576       # larger requests are refused (too_large)
//   [records]
//   tests_every = 1                   # model rows between recorded test rows
//   full_readings_every = 100         # rows between test rows with every monitor's reading
//                                     # (the others keep the readings that changed; 1 = all)
//   snapshot_every = 100              # model rows between coefficient snapshots (0 = never)
//   retention_rows = 0                # keep tests / snapshots of the last N rows (0 = all)
//   [events]
//   est_every = 1                     # publish est.<model> every N model rows (0 = never)
//   [models]
//   stale_after_s = 600               # silence before a model is stale (0 = never)
//
// Unknown keys and wrong types are refused with "FILE:LINE: key: rule" (as for model specs).
#pragma once

#include <string>
#include <string_view>

#include "rimwatch/daemon/record.h"
#include "rimwatch/engine/status.h"

namespace rimwatch::daemon {

struct DaemonConfig {
  std::string ingest_endpoint = "tcp://127.0.0.1:7261";
  std::string events_endpoint = "tcp://127.0.0.1:7262";
  bool allow_remote = false;
  bool synchronous_full = true;
  int commit_interval_ms = 5;         // 0..10000
  int max_group = 20000;              // 1..1000000
  long max_message_bytes = 1L << 20;  // 64..1<<30
  RecordOptions records;
  long retention_rows = 0;     // >= 0
  int est_every = 1;           // >= 0
  double stale_after_s = 600;  // >= 0

  // Checks ranges and the loopback rule; *why names the key.
  bool IsValid(std::string* why) const;
};

// Parses TOML text (source names the file in messages) over the defaults in *out.
Status ParseDaemonConfig(std::string_view text, std::string_view source, DaemonConfig* out);

// True for ipc:// and inproc:// endpoints and tcp:// on 127.0.0.1, localhost or [::1].
bool IsLoopbackEndpoint(std::string_view endpoint);

}  // namespace rimwatch::daemon
