// Server: rimwatchd's one poll loop. It owns the sockets, the store and every ModelHost.
//
// One iteration: poll the ingest ROUTER; decode each request (wire.h); data requests are
// validated whole against the registry (unknown series, period kind), then their observations
// are written into the open transaction, offered to the hosts of their series, and the rows
// that complete run through the Monitors, whose records go into the same transaction; the
// request's ack waits. The transaction commits when the oldest waiting observation has waited
// commit_interval_ms or max_group observations wait (group commit); after the commit the acks
// go out and the events of the committed rows are published. An ack therefore means durable,
// and a crash before a commit loses only unacknowledged input, whose model effects die with the
// process (the restart rebuilds from what was committed). Control requests (model.*, state,
// health) first commit what waits, so they see every acknowledged observation.
//
// Start: the store's active models, plus DIR/models/*.toml not yet in the store, are rebuilt
// from stored observations; their active alerts are compared with the stored alert log and only
// the differences are recorded and published (normally none), so nothing is raised twice.
//
// Thread safety: Run() on one thread; RequestStop() from any thread or a signal handler.
#pragma once

#include <atomic>
#include <memory>
#include <string>

#include "rimwatch/daemon/daemon_config.h"
#include "rimwatch/engine/status.h"

namespace rimwatch::daemon {

class Server {
 public:
  // Creates DIR and DIR/models if missing, opens DIR/rimwatch.sqlite, loads and rebuilds the
  // models, binds the sockets. Errors name the file, endpoint or model that failed.
  static Status Create(const std::string& data_dir, const DaemonConfig& config,
                       std::unique_ptr<Server>* out);
  ~Server();

  // Serves until `stop` becomes true, then stops reading input, commits, sends every pending
  // ack, closes the sockets. Returns OK, or why serving failed.
  Status Run(const std::atomic<bool>& stop);

  // The endpoints actually bound (a tcp port 0 or wildcard is resolved).
  std::string ingest_endpoint() const;
  std::string events_endpoint() const;

 private:
  struct Impl;
  explicit Server(std::unique_ptr<Impl> impl);
  std::unique_ptr<Impl> impl_;
};

}  // namespace rimwatch::daemon
