// `rimwatch demo`: the whole product in one command, on invented data (demo_scenario.h).
//
// Steps: make a fresh data directory (a new temporary one unless --dir); write the two scenarios
// there as the files a user would have (desk.toml + desk.csv, nowcast.toml +
// nowcast_releases.csv) and a rimwatchd config with ipc:// sockets inside the directory (so the
// demo never collides with a daemon on the default ports); start rimwatchd (found beside this
// executable unless --daemon); add both models (`model.add`); subscribe to alert.* events and
// print each as it arrives; feed the desk's bars (rows), then the nowcast releases one
// observation at a time with their release times (revisions included), paced by --rate; ask the
// daemon for each model's state; stop the daemon with SIGTERM (it commits and exits 0); write the
// HTML report from the daemon's log; print where each break really was beside the first alert of
// each monitor after it, and the commands that reproduce the run offline.
//
// The feeds are the ones `rimwatch feed` runs (feed_command.h) and the report is `rimwatch
// report` (report_command.h), so the demo shows nothing the product does not do.
//
// Thread safety: one run at a time (the alert printer runs on a second thread for the run).
#pragma once

#include <iosfwd>
#include <string>

#include "command.h"

namespace rimwatch::cli {

struct DemoCommandOptions {
  std::string dir;          // --dir: data directory (created; must be new or empty); "" = a new one
                            // under $TMPDIR (default /tmp)
  double rate = 300.0;      // --rate: requests per second of each feed, > 0; 0 = as fast as acks
  bool json = false;        // --json: JSON lines {"alert":..} as they arrive, then {"summary":..}
  std::string daemon;       // --daemon: the rimwatchd executable; "" = beside this executable
  double timeout_s = 60.0;  // --timeout (or $RIMWATCH_TIMEOUT): longest wait for a reply, s
};

Command RegisterDemoCommand(CLI::App* parent);

// Runs the demo, printing to `out` (flushed per line) and messages to `err`. Returns kExitOk,
// kExitBadInput (a bad option, a --dir that is not empty or cannot be written, no rimwatchd),
// kExitInternal (the daemon failed to start or stop, a feed or the report failed), or the feed's
// exit code when the daemon refused input or stopped answering.
int RunDemo(const DemoCommandOptions& options, std::ostream& out, std::ostream& err);

}  // namespace rimwatch::cli
