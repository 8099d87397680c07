// `rimwatch feed`: sends a CSV to rimwatchd, pipelined, and reports what the daemon did with it.
//
// Wide CSV (the reader of csv_table.h): one request {"type":"row","period":..,"values":{..}} per
// line, the columns being series names; a first column `period` gives the periods (an integer
// text goes as a JSON integer, any other text as a string, which the daemon reads as a date or
// timestamp), else the periods are the data row numbers 1, 2, ...
// Long CSV (--series): columns series, period, value and optionally released_at, in any order;
// one request {"type":"obs",...} per line.
//
// Up to `in_flight` requests are unanswered at once (seq = 1-based request number). A request
// that is not answered (no reply within the timeout, or the connection dropped) is sent again
// after the socket is reopened; the daemon stores an identical value once and answers a repeat as
// a duplicate, so resending is safe. When kMaxSilentRounds resends in a row bring no reply at all,
// the feed gives up. The input is read and checked whole before anything is sent.
//
// Thread safety: RunFeed uses a process-wide SIGINT flag; one run at a time.
#pragma once

#include <iosfwd>
#include <string>
#include <vector>

#include "command.h"
#include "daemon_client.h"

namespace rimwatch::cli {

struct FeedCommandOptions {
  ConnectionOptions connection;
  std::string input;                 // FILE, or "-" for stdin
  bool series = false;               // --series: long format
  std::vector<std::string> columns;  // --columns: send only these columns (wide format)
  int in_flight = 1000;              // --in-flight: unanswered requests at most, 1..100000
  double rate = 0.0;                 // --rate: requests per second; 0 = as fast as acks allow
  bool progress = false;             // progress on stderr (set when stderr is a terminal)
};

// Resend rounds in a row that bring no reply at all before the feed gives up (the timeout after
// the last of them ends the feed).
inline constexpr int kMaxSilentRounds = 3;

Command RegisterFeedCommand(CLI::App* parent);

// Runs `feed`; stdin is `in` for input "-". Everything is written to `err` (refusals with
// FILE:LINE, the closing summary). Returns kExitOk when every request was acknowledged ok,
// kExitBadInput (nothing sent), kExitRefused (some requests refused), kExitUnreachable (no
// daemon, or some requests not acknowledged; this wins over kExitRefused).
int RunFeed(const FeedCommandOptions& options, std::istream& in, std::ostream& err);

}  // namespace rimwatch::cli
