// rimwatchd: the rimwatch daemon. Parses flags, sets up logging and signals, runs the Server.
#include <spdlog/sinks/stdout_color_sinks.h>
#include <spdlog/spdlog.h>

#include <malloc.h>

#include <CLI/CLI.hpp>
#include <atomic>
#include <csignal>
#include <fstream>
#include <iostream>
#include <sstream>

#include "rimwatch/daemon/daemon_config.h"
#include "rimwatch/daemon/server.h"

namespace {

std::atomic<bool> g_stop{false};

extern "C" void OnSignal(int) { g_stop.store(true); }

constexpr const char* kFooter = R"(
Takes observations over ZeroMQ (ROUTER, default tcp://127.0.0.1:7261), commits each to the
SQLite log DIR/rimwatch.sqlite before acknowledging it, updates every model whose series it
completes, and publishes estimates and alerts (PUB, default tcp://127.0.0.1:7262). Model specs
(TOML, see schemas/model.example.toml) load from DIR/models/ at start; `rimwatch model add`
adds more while it runs. On start every model is rebuilt from the stored observations, so a
restart (even after kill -9) resumes where the last acknowledged observation left it.
SIGTERM or SIGINT: stop reading, commit, send every pending ack, exit 0.

Config file (TOML; every key optional, defaults shown in the README): [sockets] ingest, events,
allow_remote; [store] synchronous, commit_interval_ms, max_group; [limits] max_message_bytes;
[records] tests_every, snapshot_every, retention_rows; [events] est_every;
[models] stale_after_s.

Example:
  rimwatchd --data-dir /var/lib/rimwatch --log-level info

Exit codes: 0 stopped by a signal; 2 bad flags or config; 3 could not start (store, sockets).
Alerts are statistical evidence, not trading or policy advice.
)";

}  // namespace

int main(int argc, char** argv) {
#ifndef RIMWATCH_JEMALLOC
  // Built without jemalloc (daemon/CMakeLists.txt): every row allocates and frees the same small
  // working set on two threads; glibc's default trims freed heap top back to the kernel and
  // faults it in again (a tenth of the model thread in the daemon bench). Keep up to 256 MiB of
  // freed memory per arena instead.
  mallopt(M_TRIM_THRESHOLD, 256 << 20);
  mallopt(M_TOP_PAD, 16 << 20);
#endif
  CLI::App app{"rimwatchd: keeps VAR models estimated as data arrives and raises alerts"};
  app.footer(kFooter);
  std::string data_dir;
  std::string config_path;
  std::string level = "info";
  bool version = false;
  app.add_option("--data-dir", data_dir, "Directory for rimwatch.sqlite and models/ (created)")
      ->required();
  app.add_option("--config", config_path, "TOML settings file")->check(CLI::ExistingFile);
  app.add_option("--log-level", level, "trace, debug, info, warn, error or off")
      ->check(CLI::IsMember({"trace", "debug", "info", "warn", "error", "off"}));
  app.add_flag("--version", version, "Print the version and exit");
  try {
    app.parse(argc, argv);
  } catch (const CLI::ParseError& e) {
    if (version) {
      std::cout << "rimwatchd " << RIMWATCH_VERSION << "\n";
      return 0;
    }
    const int code = app.exit(e);
    return code == 0 ? 0 : 2;
  }
  auto logger = spdlog::stderr_color_mt("rimwatchd");
  spdlog::set_default_logger(logger);
  spdlog::set_level(spdlog::level::from_str(level));
  spdlog::set_pattern("%Y-%m-%dT%H:%M:%S.%e %^%l%$ %v");

  rimwatch::daemon::DaemonConfig config;
  if (!config_path.empty()) {
    std::ifstream in(config_path, std::ios::binary);
    std::ostringstream ss;
    ss << in.rdbuf();
    rimwatch::Status st = rimwatch::daemon::ParseDaemonConfig(ss.str(), config_path, &config);
    if (!st.ok()) {
      std::cerr << "rimwatchd: " << st.message() << "\n";
      return 2;
    }
  }
  std::signal(SIGTERM, OnSignal);
  std::signal(SIGINT, OnSignal);
  std::signal(SIGPIPE, SIG_IGN);

  std::unique_ptr<rimwatch::daemon::Server> server;
  rimwatch::Status st = rimwatch::daemon::Server::Create(data_dir, config, &server);
  if (!st.ok()) {
    spdlog::error("cannot start: {}", st.ToString());
    return 3;
  }
  st = server->Run(g_stop);
  if (!st.ok()) {
    spdlog::error("stopped on error: {}", st.ToString());
    return 3;
  }
  return 0;
}
