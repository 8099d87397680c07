// rimwatch: the command line. Each subcommand lives in its own file and registers itself here
// (see command.h); this file only parses the command line and runs the chosen subcommand.
#include <CLI/CLI.hpp>
#include <exception>
#include <iostream>
#include <string>
#include <vector>

#include "command.h"
#include "demo_command.h"
#include "feed_command.h"
#include "fit_command.h"
#include "health_command.h"
#include "model_command.h"
#include "replay_command.h"
#include "report_command.h"
#include "state_command.h"
#include "tail_command.h"

#ifndef RIMWATCH_VERSION
#define RIMWATCH_VERSION "unknown"
#endif

namespace {

constexpr const char* kDescription =
    "rimwatch: estimate vector autoregressions recursively and monitor them.\n"
    "Run `rimwatch SUBCOMMAND --help` for the options of one subcommand.";

constexpr const char* kFooter =
    "\nFirst look: demo (starts its own rimwatchd on invented data).\n"
    "Offline: fit, replay, report. With a running rimwatchd: model, feed, state, tail, health\n"
    "(--endpoint / --events / --timeout; defaults tcp://127.0.0.1:7261 and :7262).\n"
    "\n"
    "Example:\n"
    "  rimwatch fit --csv clients/examples/desk_minutes.csv --lags 2 --granger beta:alpha\n"
    "  rimwatch model add desk.toml && rimwatch feed history.csv && rimwatch state desk\n"
    "\n";

// The codes only the daemon-facing subcommands use (see daemon_client.h).
constexpr const char* kDaemonOnlyExitCodes =
    "  4  (model, feed, state, health) the daemon refused the request or some input\n"
    "  5  (model, feed, state, tail, health) the daemon could not be reached, or did not\n"
    "     acknowledge everything within --timeout\n";

}  // namespace

int main(int argc, char** argv) {
  using namespace rimwatch::cli;
  CLI::App app(kDescription, "rimwatch");
  app.set_version_flag("--version", std::string("rimwatch ") + RIMWATCH_VERSION);
  app.require_subcommand(1);
  app.footer(std::string(kFooter) + kExitCodeHelp + kDaemonOnlyExitCodes);

  std::vector<Command> commands;
  commands.push_back(RegisterDemoCommand(&app));
  commands.push_back(RegisterFitCommand(&app));
  commands.push_back(RegisterReplayCommand(&app));
  commands.push_back(RegisterReportCommand(&app));
  commands.push_back(RegisterModelCommand(&app));
  commands.push_back(RegisterFeedCommand(&app));
  commands.push_back(RegisterStateCommand(&app));
  commands.push_back(RegisterTailCommand(&app));
  commands.push_back(RegisterHealthCommand(&app));

  try {
    app.parse(argc, argv);
  } catch (const CLI::ParseError& e) {
    // Help and version go to stdout with exit 0; parse errors to stderr with exit 2.
    return app.exit(e) == 0 ? kExitOk : kExitBadInput;
  }
  try {
    for (const Command& command : commands) {
      if (command.app->parsed()) return command.run();
    }
  } catch (const std::exception& e) {
    std::cerr << "rimwatch: internal error: " << e.what() << "\n";
    return kExitInternal;
  }
  return kExitBadInput;
}
