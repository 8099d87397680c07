// The CLI's side of the wire (schemas/wire/*.json, daemon/include/rimwatch/daemon/wire.h): a
// DEALER client for rimwatchd's ingest socket, the connection options the daemon-facing
// subcommands share (feed, tail, state, model, health), their exit codes, and the terminal habits
// of their output.
//
// DaemonClient keeps one DEALER socket with ZMQ_IMMEDIATE set, so a request is queued only onto
// a connection whose handshake has completed: Send() never parks a request in front of a daemon
// that is not there, it returns false instead. A socket monitor (inproc PAIR) tells the client
// when a connection attempt failed (nothing listens at the endpoint: connection refused, no such
// ipc socket file) and when an established connection dropped, so callers can fail fast at start
// and resend after a reconnect. Requests are pipelined: any number may be in flight; replies are
// matched by their "seq" by the caller. Reopen() replaces the socket (a fresh routing identity),
// which drops whatever the old socket still queued and every late reply addressed to it.
//
// Thread safety: none; one DaemonClient per thread.
#pragma once

#include <CLI/CLI.hpp>
#include <chrono>
#include <cstdint>
#include <iosfwd>
#include <memory>
#include <nlohmann/json.hpp>
#include <optional>
#include <string>
#include <vector>
#include <zmq.hpp>

namespace rimwatch::cli {

// Exit codes of the daemon-facing subcommands, beyond kExitOk, kExitInternal and kExitBadInput
// of command.h.
enum DaemonExitCode : int {
  kExitRefused = 4,      // the daemon answered but refused the request, or some of the input
  kExitUnreachable = 5,  // no daemon at the endpoint, or not everything acknowledged in time
};

// The exit-code paragraph of every daemon-facing --help.
inline constexpr const char* kDaemonExitCodeHelp =
    "Exit codes:\n"
    "  0  success\n"
    "  1  unexpected internal failure\n"
    "  2  bad input: a bad option value, or an unreadable or malformed file; nothing was sent\n"
    "  4  the daemon refused the request, or some of the input (stderr names each refusal\n"
    "     with its code, e.g. unknown_series, bad_period, model_exists)\n"
    "  5  the daemon could not be reached, or did not answer within --timeout (feed: some\n"
    "     input was not acknowledged; sending the same input again is safe)\n";

// The caution line of every daemon-facing --help.
inline constexpr const char* kAlertCaution =
    "Alerts are statistical evidence, not trading or policy advice.";

// Options shared by the daemon-facing subcommands.
struct ConnectionOptions {
  std::string endpoint = "tcp://127.0.0.1:7261";  // rimwatchd's ingest socket (ROUTER)
  std::string events = "tcp://127.0.0.1:7262";    // rimwatchd's event socket (PUB)
  double timeout_s = 30.0;  // longest wait for a connection or a reply, seconds, > 0
};

// Which sockets a subcommand talks to.
enum class Sockets { kIngest, kEvents };

// Adds --timeout (0.01 .. 1e6 seconds) to `app`, and --endpoint (env RIMWATCH_ENDPOINT) or
// --events (env RIMWATCH_EVENTS) as `sockets` says.
void AddConnectionOptions(CLI::App* app, ConnectionOptions* options, Sockets sockets);

// options.timeout_s as a duration.
std::chrono::milliseconds Timeout(const ConnectionOptions& options);

enum class ConnectState {
  kConnected,  // a connection is established (its handshake completed)
  kRefused,    // a connection attempt failed: nothing listens at the endpoint
  kTimedOut,   // neither within the time allowed
};

// Watches the connection events of one socket (zmq_socket_monitor over an inproc PAIR).
class ConnectionWatch {
 public:
  // REQUIRES: `socket` outlives this watch, and has not connected yet.
  ConnectionWatch(zmq::context_t& context, zmq::socket_t& socket);
  ~ConnectionWatch();
  ConnectionWatch(const ConnectionWatch&) = delete;
  ConnectionWatch& operator=(const ConnectionWatch&) = delete;

  // Reads the events that arrived, waiting up to `wait` for the first one.
  void Poll(std::chrono::milliseconds wait);
  bool connected() const { return connected_; }
  // Failed connection attempts since the last established connection.
  int failed_attempts() const { return failed_attempts_; }
  // True once after each drop of an established connection.
  bool TakeDropped();

  // Polls until connected, or (when fail_fast) the first failed attempt, or the deadline.
  ConnectState WaitConnected(std::chrono::steady_clock::time_point deadline, bool fail_fast);

 private:
  zmq::socket_t* socket_;
  zmq::socket_t pair_;
  bool connected_ = false;
  bool dropped_ = false;
  int failed_attempts_ = 0;
};

// One reply: the bytes as received and their parse.
struct Reply {
  std::string raw;
  nlohmann::ordered_json doc;  // an object with "seq" and "ok" (anything else is not a Reply)
  std::optional<std::int64_t> seq() const;
  bool ok() const;
  std::string code() const;     // "" when ok
  std::string message() const;  // "" when ok
};

class DaemonClient {
 public:
  // Opens the socket and starts connecting; false (and *error) for an endpoint ZeroMQ refuses.
  static bool Open(const std::string& endpoint, std::unique_ptr<DaemonClient>* out,
                   std::string* error);
  ~DaemonClient();

  const std::string& endpoint() const { return endpoint_; }
  ConnectionWatch& watch() { return *watch_; }

  // Waits for the connection (see ConnectionWatch::WaitConnected).
  ConnectState WaitConnected(std::chrono::steady_clock::time_point deadline, bool fail_fast);

  // Sends one request without blocking. False when no established connection can take it now
  // (the request was not sent).
  bool Send(const std::string& bytes);

  // The next reply, waiting up to `wait`; nothing on timeout. A message that is not a reply
  // object (it cannot come from rimwatchd) is skipped and counted in malformed_replies().
  std::optional<Reply> Receive(std::chrono::milliseconds wait);
  std::int64_t malformed_replies() const { return malformed_; }

  // Closes the socket and opens a new one to the same endpoint (see the file comment).
  bool Reopen(std::string* error);

 private:
  explicit DaemonClient(std::string endpoint);
  bool OpenSocket(std::string* error);

  std::string endpoint_;
  zmq::context_t context_{1};
  std::unique_ptr<zmq::socket_t> socket_;
  std::unique_ptr<ConnectionWatch> watch_;
  std::int64_t malformed_ = 0;
};

// One control request (model.*, state, health) and its reply: connects (failing fast when
// nothing listens), sends `request` with a seq, waits up to options.timeout_s for the reply with
// that seq. On failure returns false with *error naming the endpoint and what happened (the exit
// code is then kExitUnreachable).
bool CallDaemon(const ConnectionOptions& options, nlohmann::ordered_json request, Reply* reply,
                std::string* error);

// The text "<code>: <message>" of a refusal.
std::string RefusalText(const Reply& reply);

// ---- terminal habits --------------------------------------------------------------------------

// Whether a stream is a terminal, and whether colour may be used on it (a terminal, NO_COLOR
// unset or empty, TERM not "dumb").
struct TerminalStyle {
  bool tty = false;
  bool colour = false;
  static TerminalStyle For(int fd);

  enum class Tone { kPlain, kBold, kRed, kYellow, kGreen, kDim };
  // `text` wrapped in the tone's SGR escape when colour is on, else as is.
  std::string Paint(Tone tone, const std::string& text) const;
};

// A JSON number for a readable table: "%.*g" with `digits` significant digits; "-" for null or
// anything that is not a number.
std::string Num(const nlohmann::ordered_json& value, int digits = 6);
// A JSON value as short text: strings without quotes, null as "-", numbers as Num().
std::string Text(const nlohmann::ordered_json& value);

// A table of text cells. Written aligned (columns padded, a column whose cells are all numbers
// right-aligned) for a terminal, or tab-separated (header included, no padding) for a pipe.
class TextTable {
 public:
  explicit TextTable(std::vector<std::string> header) : header_(std::move(header)) {}
  void Add(std::vector<std::string> row) { rows_.push_back(std::move(row)); }
  bool empty() const { return rows_.empty(); }
  void Write(std::ostream& out, bool aligned, const std::string& indent = "") const;

 private:
  std::vector<std::string> header_;
  std::vector<std::vector<std::string>> rows_;
};

}  // namespace rimwatch::cli
