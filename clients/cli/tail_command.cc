#include "tail_command.h"

#include "rimwatch/daemon/wall_clock.h"

#include <unistd.h>

#include <atomic>
#include <chrono>
#include <cmath>
#include <csignal>
#include <ctime>
#include <iostream>
#include <memory>
#include <vector>
#include <zmq_addon.hpp>

namespace rimwatch::cli {
namespace {

using json = nlohmann::ordered_json;
using Clock = std::chrono::steady_clock;
using Tone = TerminalStyle::Tone;

constexpr const char* kTailDescription = "Follow rimwatchd's estimates, alerts and refusals";

constexpr const char* kTailFooter =
    "\nSubscribes to the daemon's event socket and prints one line per event as it arrives:\n"
    "  estimate  what a model row produced: row, period, spectral radius and its SE, the\n"
    "            p-values of the monitored restrictions tested on that row\n"
    "  <monitor> an alert raised or cleared (stability, cusum.<var>, volatility,\n"
    "            restriction.<name>, ...), with the statistic, its threshold and a sentence\n"
    "  reject    input the daemon refused since its last summary, by code\n"
    "Readable lines give the local time of arrival, model, monitor, level and message.\n"
    "--json prints JSON lines {\"topic\", \"received_at\" (UTC), \"event\"}, the event body as\n"
    "published (schemas/wire/event.*.schema.json). --model M keeps model M's events (and\n"
    "refusals not tied to another model); --alerts keeps only alerts.\n"
    "\n"
    "Runs until Ctrl-C, --count N events or --for SECONDS, then exits 0. Events published\n"
    "while tail is not connected (before it starts, during a daemon restart) are not seen:\n"
    "the alert history is in the daemon's store, and `rimwatch state` shows the active ones.\n"
    "\n"
    "Example:\n"
    "  rimwatch tail --alerts\n"
    "  rimwatch tail --model desk --json --count 100 > events.jsonl\n"
    "\n"
    "Alerts are statistical evidence, not trading or policy advice.\n"
    "\n";

std::atomic<bool> g_stop{false};
extern "C" void OnTailSignal(int) { g_stop.store(true); }

std::string LocalTime() {
  const std::time_t t = std::time(nullptr);
  std::tm tm{};
  localtime_r(&t, &tm);
  char buf[32];
  std::strftime(buf, sizeof buf, "%Y-%m-%d %H:%M:%S", &tm);
  return buf;
}

std::string Field(const json& body, const char* key) {
  const auto it = body.find(key);
  return it == body.end() ? std::string("-") : Text(*it);
}

struct Line {
  std::string model, monitor, level, message;
  Tone tone = Tone::kPlain;
};

Line EstimateLine(const json& body) {
  Line line{Field(body, "model"), "estimate", "-", "", Tone::kDim};
  std::string m = "row " + Field(body, "row") + " (period " + Field(body, "period") + "): ";
  const std::string estimate = Field(body, "estimate");
  if (estimate != "ok") {
    m += "not estimable: " + estimate;
  } else {
    m += "rho " + Num(body.value("rho", json()), 4);
    if (body.contains("rho_se") && body["rho_se"].is_number()) {
      m += " (SE " + Num(body["rho_se"], 3) + ")";
    }
    if (body.contains("restrictions") && body["restrictions"].is_object()) {
      for (const auto& [name, r] : body["restrictions"].items()) {
        m += "; " + name + " " +
             (r.contains("p_value") ? "p " + Num(r["p_value"], 3) : std::string("unavailable"));
      }
    }
  }
  line.message = m;
  return line;
}

Line AlertLine(const json& body) {
  const bool raised = body.value("transition", "") == "raised";
  const std::string level = Field(body, "level");
  Line line{Field(body, "model"), Field(body, "monitor"), (raised ? "RAISED " : "cleared ") + level,
            "", Tone::kPlain};
  line.tone = !raised ? Tone::kGreen : level == "critical" ? Tone::kRed : Tone::kYellow;
  line.message = "period " + Field(body, "period") + ", statistic " +
                 Num(body.value("statistic", json()), 4) + " vs threshold " +
                 Num(body.value("threshold", json()), 4) + ": " + Field(body, "message");
  return line;
}

Line RejectLine(const json& body) {
  Line line{Field(body, "model"), "reject", Field(body, "code"), "", Tone::kYellow};
  line.message = Field(body, "count") + " refused; last: " + Field(body, "message");
  return line;
}

// Whether an event passes the filters; the subscriptions are prefixes, so "alert.ab" arrives for
// a subscription to "alert.a" and is dropped here.
bool Wanted(const TailCommandOptions& options, const std::string& topic, const json& body) {
  if (options.model.empty()) return true;
  if (topic == "reject") {
    return !body.contains("model") || body["model"] == options.model;
  }
  return topic == "est." + options.model || topic == "alert." + options.model;
}

std::vector<std::string> Topics(const TailCommandOptions& options) {
  const std::string suffix = options.model.empty() ? "" : options.model;
  if (options.alerts) return {"alert." + suffix};
  return {"est." + suffix, "alert." + suffix, "reject"};
}

}  // namespace

int RunTail(const TailCommandOptions& options, std::ostream& out, std::ostream& err) {
  if (options.count < 0) {
    err << "rimwatch tail: --count " << options.count << ": must be >= 0\n";
    return kExitBadInput;
  }
  if (!(options.for_seconds >= 0) || !std::isfinite(options.for_seconds)) {
    err << "rimwatch tail: --for " << options.for_seconds << ": must be a finite number >= 0\n";
    return kExitBadInput;
  }
  zmq::context_t context(1);
  zmq::socket_t sub(context, zmq::socket_type::sub);
  std::unique_ptr<ConnectionWatch> watch;
  try {
    sub.set(zmq::sockopt::linger, 0);
    sub.set(zmq::sockopt::rcvhwm, 0);
    sub.set(zmq::sockopt::reconnect_ivl, 100);
    sub.set(zmq::sockopt::reconnect_ivl_max, 1000);
    for (const std::string& topic : Topics(options)) sub.set(zmq::sockopt::subscribe, topic);
    watch = std::make_unique<ConnectionWatch>(context, sub);
    sub.connect(options.connection.events);
  } catch (const zmq::error_t& e) {
    err << "rimwatch tail: cannot connect to " << options.connection.events << ": " << e.what()
        << "\n";
    return kExitBadInput;
  }
  const auto start = Clock::now();
  switch (watch->WaitConnected(start + Timeout(options.connection), /*fail_fast=*/true)) {
    case ConnectState::kConnected:
      break;
    case ConnectState::kRefused:
      err << "rimwatch tail: cannot reach rimwatchd's events at " << options.connection.events
          << ": nothing is listening there (is rimwatchd running? see --events)\n";
      return kExitUnreachable;
    case ConnectState::kTimedOut:
      err << "rimwatch tail: no connection to " << options.connection.events << " within "
          << Num(options.connection.timeout_s, 4) << " s\n";
      return kExitUnreachable;
  }
  const TerminalStyle style = TerminalStyle::For(STDOUT_FILENO);
  const bool err_tty = isatty(STDERR_FILENO) != 0;
  if (err_tty) err << "tail: following " << options.connection.events << " (Ctrl-C stops)\n";

  g_stop.store(false);
  struct sigaction action {};
  struct sigaction old_int {};
  struct sigaction old_term {};
  action.sa_handler = OnTailSignal;
  sigemptyset(&action.sa_mask);
  sigaction(SIGINT, &action, &old_int);
  sigaction(SIGTERM, &action, &old_term);

  const bool bounded = options.for_seconds > 0;
  const auto deadline =
      start + std::chrono::duration_cast<Clock::duration>(
                  std::chrono::duration<double>(bounded ? options.for_seconds : 0.0));
  std::int64_t printed = 0;
  bool was_connected = true;
  while (!g_stop.load() && (options.count == 0 || printed < options.count)) {
    const auto now = Clock::now();
    if (bounded && now >= deadline) break;
    watch->Poll(std::chrono::milliseconds(0));
    if (watch->TakeDropped() && was_connected) {
      err << "rimwatch tail: lost the event socket; waiting for rimwatchd (events published "
             "meanwhile are not seen)\n";
      was_connected = false;
    }
    if (!was_connected && watch->connected()) {
      err << "rimwatch tail: reconnected to " << options.connection.events << "\n";
      was_connected = true;
    }
    auto wait = std::chrono::milliseconds(200);
    if (bounded) {
      wait = std::min(wait, std::chrono::duration_cast<std::chrono::milliseconds>(deadline - now) +
                                std::chrono::milliseconds(1));
    }
    zmq::pollitem_t items[] = {{sub.handle(), 0, ZMQ_POLLIN, 0}};
    try {
      zmq::poll(items, 1, wait);
    } catch (const zmq::error_t&) {
      continue;  // EINTR: the loop condition sees the signal
    }
    if (!(items[0].revents & ZMQ_POLLIN)) continue;
    std::vector<zmq::message_t> frames;
    try {
      if (!zmq::recv_multipart(sub, std::back_inserter(frames), zmq::recv_flags::dontwait)) {
        continue;
      }
    } catch (const zmq::error_t&) {
      continue;
    }
    if (frames.size() != 2) continue;
    const std::string topic = frames[0].to_string();
    const json body = json::parse(frames[1].to_string(), nullptr, false);
    if (!body.is_object()) {
      err << "rimwatch tail: an event on topic " << topic << " is not a JSON object; skipped\n";
      continue;
    }
    if (!Wanted(options, topic, body)) continue;
    if (options.json) {
      out << json{{"topic", topic}, {"received_at", daemon::UtcNowText()}, {"event", body}}.dump()
          << "\n"
          << std::flush;
    } else {
      Line line = topic.rfind("alert.", 0) == 0 ? AlertLine(body)
                  : topic == "reject"           ? RejectLine(body)
                                                : EstimateLine(body);
      out << LocalTime() << "  " << line.model << "  " << line.monitor << "  "
          << style.Paint(line.tone, line.level) << "  " << line.message << "\n"
          << std::flush;
    }
    ++printed;
  }
  sigaction(SIGINT, &old_int, nullptr);
  sigaction(SIGTERM, &old_term, nullptr);
  watch.reset();
  return kExitOk;
}

Command RegisterTailCommand(CLI::App* parent) {
  auto options = std::make_shared<TailCommandOptions>();
  CLI::App* sub = parent->add_subcommand("tail", kTailDescription);
  sub->add_option("--model", options->model, "only this model's events")->type_name("MODEL");
  sub->add_flag("--alerts", options->alerts, "only alerts (raised and cleared)");
  sub->add_flag("--json", options->json, "JSON lines {topic, received_at, event}");
  sub->add_option("--count", options->count, "stop after N events")->type_name("N");
  sub->add_option("--for", options->for_seconds, "stop after SECONDS")->type_name("SECONDS");
  AddConnectionOptions(sub, &options->connection, Sockets::kEvents);
  sub->footer(std::string(kTailFooter) + kDaemonExitCodeHelp);
  return Command{sub, [options] { return RunTail(*options, std::cout, std::cerr); }};
}

}  // namespace rimwatch::cli
