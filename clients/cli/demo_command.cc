#include "demo_command.h"

#include <fcntl.h>
#include <signal.h>
#include <spawn.h>
#include <sys/wait.h>
#include <unistd.h>

#include <atomic>
#include <chrono>
#include <cmath>
#include <cstdio>
#include <cstdlib>
#include <cstring>
#include <filesystem>
#include <fstream>
#include <iostream>
#include <map>
#include <memory>
#include <mutex>
#include <nlohmann/json.hpp>
#include <optional>
#include <sstream>
#include <thread>
#include <vector>
#include <zmq.hpp>
#include <zmq_addon.hpp>

#include "daemon_client.h"
#include "demo_scenario.h"
#include "feed_command.h"
#include "report_command.h"

extern char** environ;

namespace rimwatch::cli {
namespace {

namespace fs = std::filesystem;
using json = nlohmann::ordered_json;
using Clock = std::chrono::steady_clock;
using Tone = TerminalStyle::Tone;

constexpr const char* kDemoDescription =
    "Run rimwatchd on two invented scenarios and show what it finds (about 20 s)";

constexpr const char* kDemoFooter =
    "\nStarts rimwatchd on a fresh data directory (its own ipc:// sockets, so it never meets a\n"
    "daemon on the default ports), adds two models and feeds them invented data:\n"
    "  desk     three one-minute return series from a VAR(2) whose dynamics shift at a known\n"
    "           bar (spectral radius 0.60 -> 0.97, and a link the model's monitored restriction\n"
    "           says is absent switches on), and whose error variance later doubles;\n"
    "  nowcast  four monthly indicators of an invented economy, released one series at a time\n"
    "           on a calendar, some of them revised a month later.\n"
    "Alerts are printed as the daemon publishes them; at the end the demo prints where each\n"
    "break really was beside the first alert of each monitor after it, writes the HTML report\n"
    "(rimwatch report) and stops the daemon. The directory is kept: it holds the specs, the\n"
    "CSV files, the daemon's SQLite log and the report, so the run can be replayed offline.\n"
    "\n"
    "Example:\n"
    "  rimwatch demo\n"
    "  rimwatch demo --rate 0 --json --dir /tmp/rw-demo   # as fast as possible, JSON lines\n"
    "\n"
    "The data are invented and describe no market, firm or economy. Alerts are statistical\n"
    "evidence, not trading or policy advice; validate on your own history before acting.\n"
    "\n"
    "Exit codes:\n"
    "  0  the demo ran to the end\n"
    "  1  rimwatchd failed to start or to stop, or the feed or the report failed\n"
    "  2  bad option, a --dir that is not new or empty, or no rimwatchd executable\n"
    "  4  the daemon refused some input (a bug: the demo's data are valid)\n"
    "  5  the daemon stopped answering\n";

// ---- files ------------------------------------------------------------------------------------

bool WriteFile(const fs::path& path, const std::string& text, std::string* error) {
  std::ofstream f(path, std::ios::binary | std::ios::trunc);
  f << text;
  f.close();
  if (!f) {
    *error = "cannot write " + path.string();
    return false;
  }
  return true;
}

// The longest directory path whose "<dir>/events.sock" still fits a Unix socket address
// (sun_path holds 108 bytes with its terminating zero).
constexpr std::size_t kMaxDirPath = 90;

bool DirPathFits(const std::string& dir, std::string* error) {
  if (dir.size() <= kMaxDirPath) return true;
  *error = "the directory path " + dir +
           " is too long for an ipc:// socket; use a shorter --dir or TMPDIR";
  return false;
}

// A new directory: `requested` (created; must be absent or empty), or a fresh one under $TMPDIR.
// Nothing is created when the path is too long for the demo's ipc:// sockets.
bool MakeDataDir(const std::string& requested, fs::path* out, std::string* error) {
  std::error_code ec;
  if (!requested.empty()) {
    const fs::path dir = fs::absolute(requested, ec);
    if (!DirPathFits(dir.string(), error)) return false;
    if (fs::exists(dir, ec) && !(fs::is_directory(dir, ec) && fs::is_empty(dir, ec))) {
      *error = "--dir " + requested + ": exists and is not an empty directory";
      return false;
    }
    fs::create_directories(dir, ec);
    if (ec) {
      *error = "--dir " + requested + ": " + ec.message();
      return false;
    }
    *out = dir;
    return true;
  }
  const char* tmp = std::getenv("TMPDIR");
  std::string pattern = std::string(tmp && *tmp ? tmp : "/tmp") + "/rimwatch-demo.XXXXXX";
  if (!DirPathFits(pattern, error)) return false;  // mkdtemp keeps the length
  std::vector<char> buf(pattern.begin(), pattern.end());
  buf.push_back('\0');
  if (mkdtemp(buf.data()) == nullptr) {
    *error = "cannot create a directory like " + pattern;
    return false;
  }
  *out = fs::path(buf.data());
  return true;
}

// rimwatchd beside this executable (both are built into build/bin).
std::string DefaultDaemonPath() {
  std::error_code ec;
  const fs::path self = fs::read_symlink("/proc/self/exe", ec);
  if (ec) return "rimwatchd";
  return (self.parent_path() / "rimwatchd").string();
}

// ---- the daemon process -----------------------------------------------------------------------

class DaemonProcess {
 public:
  ~DaemonProcess() {
    if (pid_ > 0) Stop(std::chrono::seconds(10));
  }

  bool Start(const std::string& binary, const fs::path& dir, std::string* error) {
    const std::string log = (dir / "rimwatchd.log").string();
    std::vector<std::string> args = {binary,
                                     "--data-dir",
                                     (dir / "data").string(),
                                     "--config",
                                     (dir / "rimwatchd.toml").string(),
                                     "--log-level",
                                     "info"};
    std::vector<char*> argv;
    for (auto& a : args) argv.push_back(a.data());
    argv.push_back(nullptr);
    posix_spawn_file_actions_t actions;
    posix_spawn_file_actions_init(&actions);
    posix_spawn_file_actions_addopen(&actions, 0, "/dev/null", O_RDONLY, 0);
    posix_spawn_file_actions_addopen(&actions, 1, log.c_str(), O_WRONLY | O_CREAT | O_APPEND, 0644);
    posix_spawn_file_actions_adddup2(&actions, 1, 2);
    const int rc = posix_spawn(&pid_, binary.c_str(), &actions, nullptr, argv.data(), environ);
    posix_spawn_file_actions_destroy(&actions);
    if (rc != 0) {
      pid_ = -1;
      *error = "cannot start " + binary + ": " + std::strerror(rc);
      return false;
    }
    return true;
  }

  // True while the process runs; false (and the exit status reaped) once it has exited.
  bool Running() {
    if (pid_ <= 0) return false;
    int status = 0;
    if (waitpid(pid_, &status, WNOHANG) == pid_) {
      pid_ = -1;
      exit_code_ = WIFEXITED(status) ? WEXITSTATUS(status) : 128 + WTERMSIG(status);
      return false;
    }
    return true;
  }

  // SIGTERM, then waits; SIGKILL after `patience`. Returns the exit code (128 + signal when
  // killed by one).
  int Stop(std::chrono::seconds patience) {
    if (pid_ <= 0) return exit_code_;
    kill(pid_, SIGTERM);
    const auto deadline = Clock::now() + patience;
    while (Running()) {
      if (Clock::now() > deadline) {
        kill(pid_, SIGKILL);
        int status = 0;
        waitpid(pid_, &status, 0);
        pid_ = -1;
        exit_code_ = 128 + SIGKILL;
        break;
      }
      std::this_thread::sleep_for(std::chrono::milliseconds(20));
    }
    return exit_code_;
  }

 private:
  pid_t pid_ = -1;
  int exit_code_ = -1;
};

// ---- what the demo prints ---------------------------------------------------------------------

// Where a period of a scenario lies: "bar 1234" or "month 2014-03".
struct Locator {
  std::map<std::string, int> desk_bar;  // canonical period -> 1-based bar

  std::string Where(const std::string& model, const std::string& period) const {
    if (model == "desk") {
      const auto it = desk_bar.find(period);
      if (it != desk_bar.end()) return "bar " + std::to_string(it->second);
    }
    if (model == "nowcast" && period.size() >= 7) return "month " + period.substr(0, 7);
    return period;
  }
  int Bar(const std::string& period) const {
    const auto it = desk_bar.find(period);
    return it == desk_bar.end() ? 0 : it->second;
  }
};

// Subscribes to alert.* and prints every alert event as it arrives, on its own thread.
class AlertPrinter {
 public:
  AlertPrinter(const std::string& endpoint, const Locator& locator, bool json_lines,
               TerminalStyle style, std::ostream& out, std::mutex& out_mutex)
      : socket_(context_, zmq::socket_type::sub),
        locator_(locator),
        json_(json_lines),
        style_(style),
        out_(out),
        out_mutex_(out_mutex) {
    socket_.set(zmq::sockopt::linger, 0);
    socket_.set(zmq::sockopt::subscribe, "alert.");
    socket_.connect(endpoint);
    thread_ = std::thread([this] { Loop(); });
  }
  ~AlertPrinter() { Finish(); }

  void Finish() {
    stop_.store(true);
    if (thread_.joinable()) thread_.join();
  }
  // The events received so far (call after Finish()).
  const std::vector<json>& events() const { return events_; }

 private:
  void Loop() {
    while (!stop_.load()) {
      zmq::pollitem_t items[] = {{socket_.handle(), 0, ZMQ_POLLIN, 0}};
      zmq::poll(items, 1, std::chrono::milliseconds(50));
      if (!(items[0].revents & ZMQ_POLLIN)) continue;
      std::vector<zmq::message_t> frames;
      if (!zmq::recv_multipart(socket_, std::back_inserter(frames)) || frames.size() < 2) continue;
      json body = json::parse(frames.back().to_string(), nullptr, /*allow_exceptions=*/false);
      if (!body.is_object()) continue;
      Print(body);
      events_.push_back(std::move(body));
    }
  }

  void Print(const json& e) {
    std::lock_guard<std::mutex> lock(out_mutex_);
    if (json_) {
      out_ << json{{"alert", e}}.dump() << std::endl;
      return;
    }
    const std::string model = e.value("model", "");
    const std::string transition = e.value("transition", "");
    const std::string level = e.value("level", "");
    const Tone tone = transition == "cleared" ? Tone::kGreen
                      : level == "critical"   ? Tone::kRed
                                              : Tone::kYellow;
    char head[160];
    std::snprintf(head, sizeof head, "  %-8s %-14s %-8s %-8s", model.c_str(),
                  locator_.Where(model, e.value("period", "")).c_str(), transition.c_str(),
                  level.c_str());
    out_ << style_.Paint(tone, head) << " " << style_.Paint(Tone::kBold, e.value("monitor", ""))
         << ": " << e.value("message", "") << std::endl;
  }

  zmq::context_t context_{1};
  zmq::socket_t socket_;
  const Locator& locator_;
  bool json_;
  TerminalStyle style_;
  std::ostream& out_;
  std::mutex& out_mutex_;
  std::atomic<bool> stop_{false};
  std::vector<json> events_;
  std::thread thread_;
};

// The first raise of each monitor at or after `from_bar` and before `to_bar` (0 = no end).
std::vector<json> FirstRaises(const std::vector<json>& events, const Locator& locator, int from_bar,
                              int to_bar) {
  std::map<std::string, json> first;
  std::vector<std::string> order;
  for (const json& e : events) {
    if (e.value("model", "") != "desk" || e.value("transition", "") != "raised") continue;
    const int bar = locator.Bar(e.value("period", ""));
    if (bar < from_bar || (to_bar > 0 && bar >= to_bar)) continue;
    const std::string monitor = e.value("monitor", "");
    if (first.count(monitor)) continue;
    first[monitor] = json{{"monitor", monitor},
                          {"level", e.value("level", "")},
                          {"bar", bar},
                          {"period", e.value("period", "")},
                          {"delay_bars", bar - from_bar}};
    order.push_back(monitor);
  }
  std::vector<json> out;
  for (const auto& m : order) out.push_back(first[m]);
  return out;
}

std::string Fixed(double v, int digits) {
  if (!std::isfinite(v)) return "-";
  char buf[32];
  std::snprintf(buf, sizeof buf, "%.*f", digits, v);
  return buf;
}

// ---- the run ----------------------------------------------------------------------------------

struct Run {
  const DemoCommandOptions& options;
  std::ostream& out;
  std::ostream& err;
  TerminalStyle style;
  std::mutex out_mutex;
  fs::path dir;
  ConnectionOptions connection;
  Locator locator;

  void Say(const std::string& line) {
    if (options.json) return;
    std::lock_guard<std::mutex> lock(out_mutex);
    out << line << std::endl;
  }

  bool WaitReady(DaemonProcess& daemon) {
    const auto deadline = Clock::now() + Timeout(connection);
    while (Clock::now() < deadline) {
      if (!daemon.Running()) return false;
      std::error_code ec;
      if (fs::exists(dir / "ingest.sock", ec) && fs::exists(dir / "events.sock", ec)) {
        Reply reply;
        std::string error;
        if (CallDaemon(connection, json{{"type", "health"}}, &reply, &error) && reply.ok()) {
          return true;
        }
      }
      std::this_thread::sleep_for(std::chrono::milliseconds(50));
    }
    return false;
  }

  bool AddModel(const std::string& spec, const std::string& name) {
    Reply reply;
    std::string error;
    if (!CallDaemon(connection, json{{"type", "model.add"}, {"spec", spec}}, &reply, &error)) {
      err << "rimwatch demo: model.add " << name << ": " << error << "\n";
      return false;
    }
    if (!reply.ok()) {
      err << "rimwatch demo: model.add " << name << " refused: " << RefusalText(reply) << "\n";
      return false;
    }
    return true;
  }

  int Feed(const fs::path& file, bool series, const std::string& what) {
    FeedCommandOptions feed;
    feed.connection = connection;
    feed.input = file.string();
    feed.series = series;
    feed.rate = options.rate;
    std::ostringstream log;
    const int code = RunFeed(feed, std::cin, log);
    std::string line, last;
    std::istringstream lines(log.str());
    while (std::getline(lines, line)) {
      if (code != kExitOk) err << line << "\n";
      last = line;
    }
    Say("  (" + what + ") " + last);
    return code;
  }

  json State(const std::string& model) {
    Reply reply;
    std::string error;
    if (!CallDaemon(connection, json{{"type", "state"}, {"model", model}}, &reply, &error) ||
        !reply.ok()) {
      return json(nullptr);
    }
    return reply.doc;
  }

  int Go();
};

int Run::Go() {
  std::string error;
  const std::string daemon_path = options.daemon.empty() ? DefaultDaemonPath() : options.daemon;
  if (access(daemon_path.c_str(), X_OK) != 0) {
    err << "rimwatch demo: no rimwatchd executable at " << daemon_path
        << " (build it, or name it with --daemon)\n";
    return kExitBadInput;
  }
  if (!MakeDataDir(options.dir, &dir, &error)) {
    err << "rimwatch demo: " << error << "\n";
    return kExitBadInput;
  }
  const std::string ingest = "ipc://" + (dir / "ingest.sock").string();
  const std::string events = "ipc://" + (dir / "events.sock").string();
  connection.endpoint = ingest;
  connection.events = events;
  connection.timeout_s = options.timeout_s;

  const DeskScenario desk = MakeDeskScenario();
  const NowcastScenario nowcast = MakeNowcastScenario();
  for (std::size_t t = 0; t < desk.periods.size(); ++t) {
    locator.desk_bar[desk.periods[t]] = static_cast<int>(t) + 1;
  }
  const std::string config =
      "# rimwatchd settings of `rimwatch demo`: sockets inside this directory\n"
      "[sockets]\ningest = \"" +
      ingest + "\"\nevents = \"" + events + "\"\n";
  if (!WriteFile(dir / "desk.toml", desk.spec_toml, &error) ||
      !WriteFile(dir / "desk.csv", DeskCsv(desk), &error) ||
      !WriteFile(dir / "nowcast.toml", nowcast.spec_toml, &error) ||
      !WriteFile(dir / "nowcast_releases.csv", NowcastCsv(nowcast), &error) ||
      !WriteFile(dir / "rimwatchd.toml", config, &error)) {
    err << "rimwatch demo: " << error << "\n";
    return kExitBadInput;
  }

  Say(style.Paint(Tone::kBold, "rimwatch demo") + ": invented data, a real rimwatchd, in " +
      dir.string());
  Say("  The data describe no market, firm or economy.");
  Say("  Alerts are statistical evidence, not trading or policy advice; models fail; validate on");
  Say("  your own history (rimwatch replay) before acting, under your institution's model-risk "
      "rules.");
  DaemonProcess daemon;
  if (!daemon.Start(daemon_path, dir, &error)) {
    err << "rimwatch demo: " << error << "\n";
    return kExitInternal;
  }
  if (!WaitReady(daemon)) {
    err << "rimwatch demo: rimwatchd did not become ready; its log is " << (dir / "rimwatchd.log")
        << "\n";
    daemon.Stop(std::chrono::seconds(10));
    return kExitInternal;
  }
  Say("started rimwatchd (log " + (dir / "rimwatchd.log").string() + ")");
  AlertPrinter printer(events, locator, options.json, style, out, out_mutex);
  const auto started = Clock::now();
  Say("adding models desk and nowcast (thresholds are simulated once per design)...");
  if (!AddModel(desk.spec_toml, "desk") || !AddModel(nowcast.spec_toml, "nowcast")) {
    daemon.Stop(std::chrono::seconds(10));
    return kExitInternal;
  }
  // A subscription reaches the publisher asynchronously; the model.add round trips above took
  // far longer than that, so no alert of the feeds below is missed.
  const std::string pace =
      options.rate > 0 ? " at " + Fixed(options.rate, 0) + " per second" : " as fast as acked";
  Say("");
  Say(style.Paint(Tone::kBold, "desk") + ": " + std::to_string(desk.periods.size()) +
      " one-minute bars of alder, birch, cedar" + pace + "; alerts as they arrive:");
  int code = Feed(dir / "desk.csv", false, "desk");
  if (code == kExitOk) {
    Say("");
    Say(style.Paint(Tone::kBold, "nowcast") + ": " + std::to_string(nowcast.months) +
        " months of output, orders, prices, hours, released one series at a time (" +
        std::to_string(nowcast.releases.size()) + " releases, " +
        std::to_string(nowcast.revisions) + " of them revisions)" + pace + ":");
    code = Feed(dir / "nowcast_releases.csv", true, "nowcast");
  }
  // Acks come once observations are committed; a state request is answered after the models
  // have run every acknowledged row and their events are out. Give the last of them time to
  // arrive.
  const json desk_state = State("desk"), nowcast_state = State("nowcast");
  std::this_thread::sleep_for(std::chrono::milliseconds(300));
  printer.Finish();
  const double fed_s = std::chrono::duration<double>(Clock::now() - started).count();
  const int daemon_code = daemon.Stop(std::chrono::seconds(60));
  if (code != kExitOk) {
    err << "rimwatch demo: a feed did not complete; see " << (dir / "rimwatchd.log") << "\n";
    return code;
  }
  if (daemon_code != 0) {
    err << "rimwatch demo: rimwatchd exited with " << daemon_code << "; see "
        << (dir / "rimwatchd.log") << "\n";
    return kExitInternal;
  }

  ReportCommandOptions report;
  report.db = (dir / "data" / "rimwatch.sqlite").string();
  report.out = (dir / "report.html").string();
  std::ostringstream report_out, report_err;
  if (RunReport(report, report_out, report_err) != kExitOk) {
    err << "rimwatch demo: the report failed: " << report_err.str();
    return kExitInternal;
  }

  // What was found, beside the truth.
  const std::vector<json>& alerts = printer.events();
  const int first_break = desk.breaks.front().row;
  json breaks = json::array();
  for (std::size_t b = 0; b < desk.breaks.size(); ++b) {
    const DemoBreak& br = desk.breaks[b];
    const int next = b + 1 < desk.breaks.size() ? desk.breaks[b + 1].row : 0;
    json first = json::array();
    for (json& f : FirstRaises(alerts, locator, br.row, next)) first.push_back(std::move(f));
    breaks.push_back(json{{"model", br.model},
                          {"bar", br.row},
                          {"period", br.period},
                          {"change", br.change},
                          {"first_alerts", std::move(first)}});
  }
  const std::vector<json> early = FirstRaises(alerts, locator, 1, first_break);
  int nowcast_alerts = 0;
  for (const json& e : alerts) nowcast_alerts += e.value("model", "") == "nowcast";

  if (options.json) {
    json models = json::array();
    for (const json* s : {&desk_state, &nowcast_state}) {
      if (!s->is_object()) continue;
      models.push_back(json{{"model", s->value("model", "")},
                            {"rows", s->value("rows", 0)},
                            {"last_period", s->value("last_period", json())},
                            {"stability", s->value("stability", json())},
                            {"active_alerts", s->value("active_alerts", json::array())}});
    }
    json early_json = json::array();
    for (const json& e : early) early_json.push_back(e);
    out << json{{"summary",
                 {{"data_dir", dir.string()},
                  {"report", report.out},
                  {"database", report.db},
                  {"alert_events", alerts.size()},
                  {"breaks", breaks},
                  {"desk_alerts_before_first_break", early_json},
                  {"nowcast",
                   {{"months", nowcast.months},
                    {"releases", nowcast.releases.size()},
                    {"revisions", nowcast.revisions},
                    {"alert_events", nowcast_alerts}}},
                  {"models", models},
                  {"seconds", fed_s}}}}
               .dump()
        << std::endl;
    return kExitOk;
  }

  Say("");
  Say(style.Paint(Tone::kBold, "Where the desk's breaks really were") +
      ", and the first alert of each monitor after each:");
  for (const json& b : breaks) {
    Say("  bar " + std::to_string(b["bar"].get<int>()) + " (" + b["period"].get<std::string>() +
        "): " + b["change"].get<std::string>());
    if (b["first_alerts"].empty()) Say("      no monitor raised an alert before the next break");
    for (const json& f : b["first_alerts"]) {
      char line[200];
      std::snprintf(line, sizeof line, "      %-40s %-8s at bar %d, %d bars after the break",
                    f["monitor"].get<std::string>().c_str(), f["level"].get<std::string>().c_str(),
                    f["bar"].get<int>(), f["delay_bars"].get<int>());
      Say(line);
    }
  }
  if (early.empty()) {
    Say("  Before bar " + std::to_string(first_break) + ": no desk alert (no false alarm).");
  } else {
    Say("  Before bar " + std::to_string(first_break) + ": " + std::to_string(early.size()) +
        " monitors raised an alert although nothing had changed (false alarms; each monitor's");
    Say("  chance of one over the horizon is set by [alarms] false_alarm in desk.toml).");
  }
  Say("  nowcast: " + std::to_string(nowcast_alerts) +
      " alert events (its data have no break; revisions re-estimate the model from the log).");
  Say("");
  Say(style.Paint(Tone::kBold, "Models at the end") + " (rimwatch state):");
  for (const json* s : {&desk_state, &nowcast_state}) {
    if (!s->is_object()) continue;
    const json stability = s->value("stability", json::object());
    const json rho = stability.value("rho", json()), se = stability.value("rho_se", json());
    Say("  " + s->value("model", std::string()) + ": " + std::to_string(s->value("rows", 0)) +
        " rows to " + Text(s->value("last_period", json())) + ", spectral radius " +
        (rho.is_number() ? Fixed(rho.get<double>(), 3) : "-") + " (SE " +
        (se.is_number() ? Fixed(se.get<double>(), 3) : "-") + "), " +
        std::to_string(s->value("active_alerts", json::array()).size()) + " alerts active");
  }
  Say("");
  Say("Report:    " + report.out);
  Say("Log:       " + report.db + "   (rimwatch report --db ... draws it again)");
  Say("Replay:    rimwatch replay --spec " + (dir / "desk.toml").string() + " --csv " +
      (dir / "desk.csv").string());
  Say("           runs the same bars offline through the same engine and prints the same alerts.");
  Say("Data dir:  " + dir.string() + "   (remove it when done)");
  Say("Fed and monitored in " + Fixed(fed_s, 1) + " s.");
  return kExitOk;
}

}  // namespace

int RunDemo(const DemoCommandOptions& options, std::ostream& out, std::ostream& err) {
  if (!(options.rate >= 0) || !std::isfinite(options.rate)) {
    err << "rimwatch demo: --rate " << options.rate << ": must be a finite number >= 0\n";
    return kExitBadInput;
  }
  Run run{options, out, err, TerminalStyle::For(STDOUT_FILENO), {}, {}, {}, {}};
  return run.Go();
}

Command RegisterDemoCommand(CLI::App* parent) {
  auto options = std::make_shared<DemoCommandOptions>();
  CLI::App* sub = parent->add_subcommand("demo", kDemoDescription);
  sub->add_option("--dir", options->dir,
                  "data directory to create (must be new or empty); default: a new one under "
                  "$TMPDIR or /tmp")
      ->type_name("DIR");
  sub->add_option("--rate", options->rate,
                  "requests per second of each feed (bars, releases); 0 = as fast as acked")
      ->capture_default_str()
      ->type_name("N");
  sub->add_flag("--json", options->json,
                "JSON lines: {\"alert\": event} as they arrive, then {\"summary\": ...}");
  sub->add_option("--daemon", options->daemon,
                  "the rimwatchd executable; default: the one beside this rimwatch")
      ->type_name("FILE");
  sub->add_option("--timeout", options->timeout_s,
                  "seconds to wait for the demo's rimwatchd (start, a reply; adding a model "
                  "calibrates its alarms first, which takes longest)")
      ->envname("RIMWATCH_TIMEOUT")
      ->check(CLI::Range(0.01, 1e6))
      ->capture_default_str()
      ->type_name("SECONDS");
  sub->footer(kDemoFooter);
  return Command{sub, [options] { return RunDemo(*options, std::cout, std::cerr); }};
}

}  // namespace rimwatch::cli
