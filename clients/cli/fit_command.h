// `rimwatch fit`: the batch face of the engine. Reads a CSV file, calls FitVar (which does all the
// numerics) and prints a readable report or one JSON document (schemas/fit.schema.json).
#pragma once

#include <iosfwd>
#include <string>
#include <vector>

#include "command.h"

namespace rimwatch::cli {

// The command line of `rimwatch fit`, as parsed; RunFit validates it against the file.
struct FitCommandOptions {
  std::string csv;                         // --csv FILE
  int lags = 0;                            // --lags P, P >= 1
  std::string deterministic = "constant";  // --deterministic none|constant|trend
  std::string covariance = "HC3";          // --covariance classical|HC0|HC1|HC2|HC3|HAC
  int hac_lags = -1;                       // --hac-lags L (HAC only); -1 = floor(4 (T/100)^(2/9))
  bool hac_lags_given = false;             // --hac-lags appeared on the command line
  std::vector<int> exclude_lags;           // --exclude-lag J, repeatable
  std::vector<std::string> granger;        // --granger CAUSE:EFFECT, repeatable
  int criteria_pmax = -1;                  // --criteria PMAX; -1 = not requested
  bool json = false;                       // --json
};

// Adds the `fit` subcommand to `parent`.
Command RegisterFitCommand(CLI::App* parent);

// Runs `fit`. On success writes the whole report to `out` and returns kExitOk; otherwise writes
// one message to `err`, nothing to `out`, and returns kExitBadInput or kExitNotEstimable.
int RunFit(const FitCommandOptions& options, std::ostream& out, std::ostream& err);

}  // namespace rimwatch::cli
