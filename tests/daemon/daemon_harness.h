// A real rimwatchd for integration tests: the binary from RIMWATCH_BIN_DIR, started on a fresh
// data directory with ipc:// endpoints inside it (so tests running in parallel never share a
// port), a DEALER client that pipelines requests, and a SUB socket for events.
#pragma once

#include <fcntl.h>
#include <gtest/gtest.h>
#include <signal.h>
#include <spawn.h>
#include <sys/wait.h>
#include <unistd.h>

#include <chrono>
#include <cstdlib>
#include <filesystem>
#include <fstream>
#include <nlohmann/json.hpp>
#include <optional>
#include <sstream>
#include <stdexcept>
#include <string>
#include <thread>
#include <vector>
#include <zmq.hpp>
#include <zmq_addon.hpp>

extern char** environ;

namespace rimwatch::testing {

inline std::string EnvOrThrow(const char* name) {
  const char* v = std::getenv(name);
  if (!v || !*v) throw std::runtime_error(std::string("environment variable ") + name + " unset");
  return v;
}

inline std::string SlurpFile(const std::string& path) {
  std::ifstream in(path, std::ios::binary);
  std::ostringstream s;
  s << in.rdbuf();
  return s.str();
}

// A fresh directory under the gtest temp dir.
inline std::filesystem::path FreshDir(const std::string& stem) {
  std::string tmpl = (std::filesystem::path(::testing::TempDir()) / (stem + ".XXXXXX")).string();
  if (!mkdtemp(tmpl.data())) throw std::runtime_error("mkdtemp failed");
  return tmpl;
}

class Daemon {
 public:
  // extra_config: TOML appended after the [sockets] table the harness writes.
  explicit Daemon(std::filesystem::path dir, std::string extra_config = "")
      : dir_(std::move(dir)), extra_(std::move(extra_config)) {
    ingest_ = "ipc://" + (dir_ / "ingest.sock").string();
    events_ = "ipc://" + (dir_ / "events.sock").string();
    std::ofstream(dir_ / "rimwatchd.toml")
        << "[sockets]\ningest = \"" << ingest_ << "\"\nevents = \"" << events_ << "\"\n"
        << extra_;
  }
  ~Daemon() {
    if (pid_ > 0) {
      kill(pid_, SIGKILL);
      waitpid(pid_, nullptr, 0);
    }
  }

  const std::filesystem::path& dir() const { return dir_; }
  const std::string& ingest() const { return ingest_; }
  const std::string& events() const { return events_; }
  std::string log() const { return SlurpFile((dir_ / "rimwatchd.log").string()); }
  pid_t pid() const { return pid_; }

  void Start() {
    // A killed daemon leaves its ipc socket files behind; readiness is judged on fresh ones.
    std::filesystem::remove(dir_ / "ingest.sock");
    std::filesystem::remove(dir_ / "events.sock");
    const std::string bin = EnvOrThrow("RIMWATCH_BIN_DIR") + "/rimwatchd";
    std::vector<std::string> args = {bin,
                                     "--data-dir",
                                     (dir_ / "data").string(),
                                     "--config",
                                     (dir_ / "rimwatchd.toml").string(),
                                     "--log-level",
                                     "info"};
    std::vector<char*> argv;
    for (auto& a : args) argv.push_back(a.data());
    argv.push_back(nullptr);
    posix_spawn_file_actions_t fa;
    posix_spawn_file_actions_init(&fa);
    const std::string log_path = (dir_ / "rimwatchd.log").string();
    posix_spawn_file_actions_addopen(&fa, 2, log_path.c_str(), O_WRONLY | O_CREAT | O_APPEND, 0644);
    posix_spawn_file_actions_addopen(&fa, 0, "/dev/null", O_RDONLY, 0);
    if (posix_spawn(&pid_, bin.c_str(), &fa, nullptr, argv.data(), environ) != 0) {
      throw std::runtime_error("cannot start " + bin);
    }
    posix_spawn_file_actions_destroy(&fa);
    // Ready when the ingest socket file exists and health answers.
    const auto deadline = std::chrono::steady_clock::now() + std::chrono::seconds(60);
    while (!std::filesystem::exists(dir_ / "ingest.sock")) {
      int status = 0;
      if (waitpid(pid_, &status, WNOHANG) == pid_) {
        pid_ = -1;
        throw std::runtime_error("rimwatchd exited at start: " + log());
      }
      if (std::chrono::steady_clock::now() > deadline) throw std::runtime_error("start timeout");
      std::this_thread::sleep_for(std::chrono::milliseconds(20));
    }
  }

  void Kill9() {
    kill(pid_, SIGKILL);
    waitpid(pid_, nullptr, 0);
    pid_ = -1;
  }

  // SIGTERM, then the exit code (-1 if it died of a signal or did not stop in time).
  int Terminate(int timeout_s = 60) {
    kill(pid_, SIGTERM);
    const auto deadline = std::chrono::steady_clock::now() + std::chrono::seconds(timeout_s);
    int status = 0;
    while (waitpid(pid_, &status, WNOHANG) != pid_) {
      if (std::chrono::steady_clock::now() > deadline) {
        Kill9();
        return -1;
      }
      std::this_thread::sleep_for(std::chrono::milliseconds(10));
    }
    pid_ = -1;
    return WIFEXITED(status) ? WEXITSTATUS(status) : -1;
  }

 private:
  std::filesystem::path dir_;
  std::string extra_;
  std::string ingest_;
  std::string events_;
  pid_t pid_ = -1;
};

// A pipelining feeder / control client (DEALER).
class Client {
 public:
  explicit Client(const std::string& endpoint) : socket_(context_, zmq::socket_type::dealer) {
    socket_.set(zmq::sockopt::linger, 0);
    socket_.connect(endpoint);
  }
  void Send(const nlohmann::json& message) { Send(message.dump()); }
  void Send(const std::string& bytes) { socket_.send(zmq::buffer(bytes), zmq::send_flags::none); }
  // The next reply, or nothing within timeout.
  std::optional<nlohmann::json> Receive(int timeout_ms = 30000) {
    zmq::pollitem_t items[] = {{socket_.handle(), 0, ZMQ_POLLIN, 0}};
    zmq::poll(items, 1, std::chrono::milliseconds(timeout_ms));
    if (!(items[0].revents & ZMQ_POLLIN)) return std::nullopt;
    std::vector<zmq::message_t> frames;
    (void)zmq::recv_multipart(socket_, std::back_inserter(frames));
    return nlohmann::json::parse(frames.back().to_string());
  }
  // One request, waiting for its reply (no other request in flight).
  nlohmann::json Call(nlohmann::json message, int timeout_ms = 60000) {
    message["seq"] = ++seq_;
    Send(message);
    for (;;) {
      auto reply = Receive(timeout_ms);
      if (!reply) throw std::runtime_error("no reply to " + message.dump().substr(0, 200));
      if ((*reply)["seq"] == message["seq"]) return *reply;
    }
  }

 private:
  zmq::context_t context_{1};
  zmq::socket_t socket_;
  std::int64_t seq_ = 1000000000;
};

class Subscriber {
 public:
  explicit Subscriber(const std::string& endpoint, const std::string& prefix = "")
      : socket_(context_, zmq::socket_type::sub) {
    socket_.set(zmq::sockopt::linger, 0);
    socket_.set(zmq::sockopt::subscribe, prefix);
    socket_.connect(endpoint);
  }
  // (topic, body) or nothing within timeout.
  std::optional<std::pair<std::string, nlohmann::json>> Receive(int timeout_ms) {
    zmq::pollitem_t items[] = {{socket_.handle(), 0, ZMQ_POLLIN, 0}};
    zmq::poll(items, 1, std::chrono::milliseconds(timeout_ms));
    if (!(items[0].revents & ZMQ_POLLIN)) return std::nullopt;
    std::vector<zmq::message_t> frames;
    (void)zmq::recv_multipart(socket_, std::back_inserter(frames));
    return std::make_pair(frames.front().to_string(),
                          nlohmann::json::parse(frames.back().to_string()));
  }

 private:
  zmq::context_t context_{1};
  zmq::socket_t socket_;
};

}  // namespace rimwatch::testing
