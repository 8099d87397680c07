#include "daemon_client.h"

#include <unistd.h>
#include <zmq.h>

#include <zmq_addon.hpp>

#include <algorithm>
#include <atomic>
#include <cmath>
#include <cstdio>
#include <cstdlib>
#include <cstring>
#include <ostream>

namespace rimwatch::cli {
namespace {

using Clock = std::chrono::steady_clock;

// Each watch binds its own inproc address.
std::string NextMonitorAddress() {
  static std::atomic<int> counter{0};
  return "inproc://rimwatch-cli-monitor-" + std::to_string(counter.fetch_add(1));
}

std::chrono::milliseconds Until(Clock::time_point deadline, std::chrono::milliseconds cap) {
  const auto left = std::chrono::duration_cast<std::chrono::milliseconds>(deadline - Clock::now());
  return std::clamp(left, std::chrono::milliseconds(0), cap);
}

bool IsNumberCell(const std::string& cell) {
  if (cell.empty()) return false;
  char* end = nullptr;
  std::strtod(cell.c_str(), &end);
  return end == cell.c_str() + cell.size();
}

}  // namespace

// ---- options ----------------------------------------------------------------------------------

void AddConnectionOptions(CLI::App* app, ConnectionOptions* options, Sockets sockets) {
  if (sockets == Sockets::kIngest) {
    app->add_option("--endpoint", options->endpoint, "rimwatchd's ingest socket")
        ->envname("RIMWATCH_ENDPOINT")
        ->capture_default_str()
        ->type_name("ENDPOINT");
  } else {
    app->add_option("--events", options->events, "rimwatchd's event socket")
        ->envname("RIMWATCH_EVENTS")
        ->capture_default_str()
        ->type_name("ENDPOINT");
  }
  app->add_option("--timeout", options->timeout_s,
                  "seconds to wait for the daemon (a connection, a reply)")
      ->envname("RIMWATCH_TIMEOUT")
      ->check(CLI::Range(0.01, 1e6))
      ->capture_default_str()
      ->type_name("SECONDS");
}

std::chrono::milliseconds Timeout(const ConnectionOptions& options) {
  return std::chrono::milliseconds(static_cast<std::int64_t>(std::ceil(options.timeout_s * 1e3)));
}

// ---- ConnectionWatch --------------------------------------------------------------------------

ConnectionWatch::ConnectionWatch(zmq::context_t& context, zmq::socket_t& socket)
    : socket_(&socket), pair_(context, zmq::socket_type::pair) {
  const std::string address = NextMonitorAddress();
  const int events = ZMQ_EVENT_HANDSHAKE_SUCCEEDED | ZMQ_EVENT_CONNECT_RETRIED |
                     ZMQ_EVENT_DISCONNECTED | ZMQ_EVENT_HANDSHAKE_FAILED_NO_DETAIL |
                     ZMQ_EVENT_HANDSHAKE_FAILED_PROTOCOL | ZMQ_EVENT_HANDSHAKE_FAILED_AUTH;
  if (zmq_socket_monitor(socket.handle(), address.c_str(), events) != 0) throw zmq::error_t();
  pair_.set(zmq::sockopt::linger, 0);
  pair_.connect(address);
}

ConnectionWatch::~ConnectionWatch() {
  zmq_socket_monitor(socket_->handle(), nullptr, 0);
  pair_.close();
}

void ConnectionWatch::Poll(std::chrono::milliseconds wait) {
  zmq::pollitem_t items[] = {{pair_.handle(), 0, ZMQ_POLLIN, 0}};
  try {
    zmq::poll(items, 1, wait);
  } catch (const zmq::error_t&) {
    return;  // EINTR: the caller looks again
  }
  for (;;) {
    zmq::message_t head;
    zmq::message_t address;
    try {
      if (!pair_.recv(head, zmq::recv_flags::dontwait)) return;
      if (head.more()) (void)pair_.recv(address, zmq::recv_flags::none);
    } catch (const zmq::error_t&) {
      return;
    }
    if (head.size() < sizeof(std::uint16_t)) continue;
    std::uint16_t event = 0;
    std::memcpy(&event, head.data(), sizeof event);
    switch (event) {
      case ZMQ_EVENT_HANDSHAKE_SUCCEEDED:
        connected_ = true;
        failed_attempts_ = 0;
        break;
      case ZMQ_EVENT_DISCONNECTED:
        if (connected_) dropped_ = true;
        connected_ = false;
        break;
      default:  // a failed attempt: refused, no socket file, a peer that is not rimwatchd
        ++failed_attempts_;
        break;
    }
  }
}

bool ConnectionWatch::TakeDropped() {
  const bool dropped = dropped_;
  dropped_ = false;
  return dropped;
}

ConnectState ConnectionWatch::WaitConnected(Clock::time_point deadline, bool fail_fast) {
  for (;;) {
    Poll(std::chrono::milliseconds(0));
    if (connected_) return ConnectState::kConnected;
    if (fail_fast && failed_attempts_ > 0) return ConnectState::kRefused;
    if (Clock::now() >= deadline) return ConnectState::kTimedOut;
    Poll(Until(deadline, std::chrono::milliseconds(100)));
  }
}

// ---- Reply ------------------------------------------------------------------------------------

std::optional<std::int64_t> Reply::seq() const {
  const auto it = doc.find("seq");
  if (it == doc.end() || !it->is_number_integer()) return std::nullopt;
  return it->get<std::int64_t>();
}

bool Reply::ok() const { return doc.value("ok", false); }

std::string Reply::code() const {
  const auto it = doc.find("code");
  return it != doc.end() && it->is_string() ? it->get<std::string>() : std::string();
}

std::string Reply::message() const {
  const auto it = doc.find("message");
  return it != doc.end() && it->is_string() ? it->get<std::string>() : std::string();
}

std::string RefusalText(const Reply& reply) { return reply.code() + ": " + reply.message(); }

// ---- DaemonClient -----------------------------------------------------------------------------

DaemonClient::DaemonClient(std::string endpoint) : endpoint_(std::move(endpoint)) {}

DaemonClient::~DaemonClient() {
  watch_.reset();
  socket_.reset();
}

bool DaemonClient::Open(const std::string& endpoint, std::unique_ptr<DaemonClient>* out,
                        std::string* error) {
  std::unique_ptr<DaemonClient> client(new DaemonClient(endpoint));
  if (!client->OpenSocket(error)) return false;
  *out = std::move(client);
  return true;
}

bool DaemonClient::OpenSocket(std::string* error) {
  watch_.reset();
  socket_.reset();
  try {
    socket_ = std::make_unique<zmq::socket_t>(context_, zmq::socket_type::dealer);
    socket_->set(zmq::sockopt::linger, 0);
    socket_->set(zmq::sockopt::immediate, 1);  // queue only onto a completed connection
    socket_->set(zmq::sockopt::sndhwm, 0);     // the caller bounds what is in flight
    socket_->set(zmq::sockopt::rcvhwm, 0);
    socket_->set(zmq::sockopt::reconnect_ivl, 100);
    socket_->set(zmq::sockopt::reconnect_ivl_max, 1000);
    watch_ = std::make_unique<ConnectionWatch>(context_, *socket_);
    socket_->connect(endpoint_);
  } catch (const zmq::error_t& e) {
    *error = "cannot connect to " + endpoint_ + ": " + e.what();
    watch_.reset();
    socket_.reset();
    return false;
  }
  return true;
}

bool DaemonClient::Reopen(std::string* error) { return OpenSocket(error); }

ConnectState DaemonClient::WaitConnected(Clock::time_point deadline, bool fail_fast) {
  return watch_->WaitConnected(deadline, fail_fast);
}

bool DaemonClient::Send(const std::string& bytes) {
  try {
    return socket_->send(zmq::buffer(bytes), zmq::send_flags::dontwait).has_value();
  } catch (const zmq::error_t&) {
    return false;
  }
}

std::optional<Reply> DaemonClient::Receive(std::chrono::milliseconds wait) {
  const auto deadline = Clock::now() + wait;
  for (;;) {
    std::vector<zmq::message_t> frames;
    std::optional<std::size_t> got;
    try {
      got = zmq::recv_multipart(*socket_, std::back_inserter(frames), zmq::recv_flags::dontwait);
    } catch (const zmq::error_t&) {
      got.reset();
    }
    if (got && !frames.empty()) {
      Reply reply;
      reply.raw = frames.back().to_string();
      reply.doc = nlohmann::ordered_json::parse(reply.raw, nullptr, false);
      if (reply.doc.is_object() && reply.doc.contains("seq") && reply.doc.contains("ok") &&
          reply.doc["ok"].is_boolean()) {
        return reply;
      }
      ++malformed_;
      continue;
    }
    watch_->Poll(std::chrono::milliseconds(0));
    if (Clock::now() >= deadline) return std::nullopt;
    zmq::pollitem_t items[] = {{socket_->handle(), 0, ZMQ_POLLIN, 0}};
    try {
      zmq::poll(items, 1, Until(deadline, std::chrono::milliseconds(100)));
    } catch (const zmq::error_t&) {
      return std::nullopt;  // EINTR: a signal; the caller decides
    }
  }
}

bool CallDaemon(const ConnectionOptions& options, nlohmann::ordered_json request, Reply* reply,
                std::string* error) {
  std::unique_ptr<DaemonClient> client;
  if (!DaemonClient::Open(options.endpoint, &client, error)) return false;
  const auto deadline = Clock::now() + Timeout(options);
  switch (client->WaitConnected(deadline, /*fail_fast=*/true)) {
    case ConnectState::kConnected:
      break;
    case ConnectState::kRefused:
      *error = "cannot reach rimwatchd at " + options.endpoint +
               ": nothing is listening there (is rimwatchd running? see --endpoint)";
      return false;
    case ConnectState::kTimedOut:
      *error = "no connection to rimwatchd at " + options.endpoint + " within " +
               Num(options.timeout_s, 4) + " s";
      return false;
  }
  constexpr std::int64_t kSeq = 1;
  request["seq"] = kSeq;
  const std::string bytes = request.dump();
  while (!client->Send(bytes)) {
    if (client->WaitConnected(deadline, false) != ConnectState::kConnected) {
      *error = "the connection to rimwatchd at " + options.endpoint + " dropped";
      return false;
    }
  }
  while (Clock::now() < deadline) {
    std::optional<Reply> got = client->Receive(Until(deadline, std::chrono::milliseconds(200)));
    if (got && got->seq() == kSeq) {
      *reply = std::move(*got);
      return true;
    }
    if (client->watch().TakeDropped()) {
      *error = "the connection to rimwatchd at " + options.endpoint +
               " dropped before its reply (the request may or may not have been carried out)";
      return false;
    }
  }
  *error = "no reply from rimwatchd at " + options.endpoint + " within " +
           Num(options.timeout_s, 4) + " s";
  return false;
}

// ---- terminal habits --------------------------------------------------------------------------

TerminalStyle TerminalStyle::For(int fd) {
  TerminalStyle style;
  style.tty = isatty(fd) != 0;
  const char* no_colour = std::getenv("NO_COLOR");
  const char* term = std::getenv("TERM");
  style.colour = style.tty && (no_colour == nullptr || *no_colour == '\0') &&
                 !(term != nullptr && std::strcmp(term, "dumb") == 0);
  return style;
}

std::string TerminalStyle::Paint(Tone tone, const std::string& text) const {
  if (!colour || tone == Tone::kPlain) return text;
  const char* sgr = "";
  switch (tone) {
    case Tone::kBold:
      sgr = "1";
      break;
    case Tone::kRed:
      sgr = "1;31";
      break;
    case Tone::kYellow:
      sgr = "33";
      break;
    case Tone::kGreen:
      sgr = "32";
      break;
    case Tone::kDim:
      sgr = "2";
      break;
    case Tone::kPlain:
      break;
  }
  return std::string("\033[") + sgr + "m" + text + "\033[0m";
}

std::string Num(const nlohmann::ordered_json& value, int digits) {
  if (!value.is_number()) return "-";
  char buf[64];
  std::snprintf(buf, sizeof buf, "%.*g", digits, value.get<double>());
  return buf;
}

std::string Text(const nlohmann::ordered_json& value) {
  if (value.is_string()) return value.get<std::string>();
  if (value.is_number_integer()) return std::to_string(value.get<std::int64_t>());
  if (value.is_number()) return Num(value);
  if (value.is_boolean()) return value.get<bool>() ? "yes" : "no";
  if (value.is_null()) return "-";
  return value.dump();
}

void TextTable::Write(std::ostream& out, bool aligned, const std::string& indent) const {
  const std::size_t cols = header_.size();
  if (!aligned) {
    auto line = [&](const std::vector<std::string>& cells) {
      for (std::size_t c = 0; c < cols; ++c) {
        out << (c ? "\t" : "") << (c < cells.size() ? cells[c] : "");
      }
      out << "\n";
    };
    line(header_);
    for (const auto& row : rows_) line(row);
    return;
  }
  std::vector<std::size_t> width(cols, 0);
  std::vector<bool> numeric(cols, !rows_.empty());
  for (std::size_t c = 0; c < cols; ++c) width[c] = header_[c].size();
  for (const auto& row : rows_) {
    for (std::size_t c = 0; c < cols && c < row.size(); ++c) {
      width[c] = std::max(width[c], row[c].size());
      if (row[c] != "-" && !IsNumberCell(row[c])) numeric[c] = false;
    }
  }
  auto line = [&](const std::vector<std::string>& cells) {
    std::string text = indent;
    for (std::size_t c = 0; c < cols; ++c) {
      const std::string cell = c < cells.size() ? cells[c] : "";
      const std::string pad(width[c] - std::min(width[c], cell.size()), ' ');
      if (c) text += "  ";
      text += numeric[c] ? pad + cell : cell + pad;
    }
    text.erase(text.find_last_not_of(' ') + 1);
    out << text << "\n";
  };
  line(header_);
  for (const auto& row : rows_) line(row);
}

}  // namespace rimwatch::cli
