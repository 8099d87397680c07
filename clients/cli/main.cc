// rimwatch: the command line. Each subcommand lives in its own file and registers itself here
// (see command.h); this file only parses the command line and runs the chosen subcommand.
#include <CLI/CLI.hpp>
#include <exception>
#include <iostream>
#include <string>
#include <vector>

#include "command.h"
#include "fit_command.h"
#include "replay_command.h"

#ifndef RIMWATCH_VERSION
#define RIMWATCH_VERSION "unknown"
#endif

namespace {

constexpr const char* kDescription =
    "rimwatch: estimate vector autoregressions recursively and monitor them.\n"
    "Run `rimwatch SUBCOMMAND --help` for the options of one subcommand.";

constexpr const char* kFooter =
    "\nExample:\n"
    "  rimwatch fit --csv clients/examples/desk_minutes.csv --lags 2 --granger beta:alpha\n"
    "\n";

}  // namespace

int main(int argc, char** argv) {
  using namespace rimwatch::cli;
  CLI::App app(kDescription, "rimwatch");
  app.set_version_flag("--version", std::string("rimwatch ") + RIMWATCH_VERSION);
  app.require_subcommand(1);
  app.footer(std::string(kFooter) + kExitCodeHelp);

  std::vector<Command> commands;
  commands.push_back(RegisterFitCommand(&app));
  commands.push_back(RegisterReplayCommand(&app));

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
