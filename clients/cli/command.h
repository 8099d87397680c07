// How subcommands plug into the `rimwatch` executable.
//
// Each subcommand lives in its own file and offers one function
//     Command RegisterXxxCommand(CLI::App* parent);
// that adds a CLI11 subcommand to `parent` with its options and help, and returns the subcommand
// together with the function that runs it. main.cc calls every Register function, parses the
// command line once, and runs the one subcommand that was chosen.
//
// A run function writes its result to stdout only when it succeeded as a whole (it builds the
// output in memory first), and writes messages to stderr. Its return value is the exit code.
#pragma once

#include <CLI/CLI.hpp>
#include <functional>

namespace rimwatch::cli {

// Exit codes shared by all subcommands (documented in `rimwatch --help`).
enum ExitCode : int {
  kExitOk = 0,            // done; the result is on stdout
  kExitInternal = 1,      // an unexpected failure (a bug, or stdout could not be written)
  kExitBadInput = 2,      // bad command line, unreadable or malformed input file
  kExitNotEstimable = 3,  // the input is well formed but the model cannot be estimated on it
};

// The text shared by every --help that lists the exit codes.
inline constexpr const char* kExitCodeHelp =
    "Exit codes:\n"
    "  0  success: the result is on stdout\n"
    "  1  unexpected internal failure\n"
    "  2  bad input: a bad option value, or an unreadable or malformed file; nothing is\n"
    "     written to stdout and stderr names the problem (FILE:LINE: for file problems)\n"
    "  3  the model cannot be estimated on this data (e.g. a constant or collinear series\n"
    "     makes the regressors rank deficient); stderr names the regressors\n";

struct Command {
  CLI::App* app = nullptr;   // the registered subcommand (owned by its parent App)
  std::function<int()> run;  // call after a successful parse when app->parsed()
};

}  // namespace rimwatch::cli
