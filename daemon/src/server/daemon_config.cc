#include "rimwatch/daemon/daemon_config.h"

#include <toml++/toml.h>

#include <cstdint>
#include <set>
#include <string>

namespace rimwatch::daemon {
namespace {

class ConfigReader {
 public:
  explicit ConfigReader(std::string source) : source_(std::move(source)) {}
  bool failed() const { return !error_.empty(); }
  const std::string& error() const { return error_; }

  void Fail(const toml::node& node, const std::string& msg) {
    if (!failed()) {
      error_ = source_ + ":" + std::to_string(node.source().begin.line) + ": " + msg;
    }
  }

  void OnlyKeys(const toml::table& table, const std::string& prefix,
                const std::set<std::string>& allowed) {
    for (const auto& [key, node] : table) {
      if (!allowed.count(std::string(key.str()))) {
        std::string list;
        for (const std::string& a : allowed) list += (list.empty() ? "" : ", ") + a;
        Fail(node,
             "unknown key '" + prefix + std::string(key.str()) + "' (allowed here: " + list + ")");
      }
    }
  }

  void Str(const toml::table& t, const std::string& prefix, const char* key, std::string* out) {
    if (const toml::node* n = t.get(key)) {
      if (auto v = n->value_exact<std::string>()) {
        *out = *v;
      } else {
        Fail(*n, "key '" + prefix + key + "' must be a string");
      }
    }
  }
  void Bool(const toml::table& t, const std::string& prefix, const char* key, bool* out) {
    if (const toml::node* n = t.get(key)) {
      if (auto v = n->value_exact<bool>()) {
        *out = *v;
      } else {
        Fail(*n, "key '" + prefix + key + "' must be true or false");
      }
    }
  }
  template <typename T>
  void Int(const toml::table& t, const std::string& prefix, const char* key, T* out) {
    if (const toml::node* n = t.get(key)) {
      if (auto v = n->value_exact<std::int64_t>()) {
        *out = static_cast<T>(*v);
      } else {
        Fail(*n, "key '" + prefix + key + "' must be an integer");
      }
    }
  }
  void Num(const toml::table& t, const std::string& prefix, const char* key, double* out) {
    if (const toml::node* n = t.get(key)) {
      if (auto v = n->value<double>()) {
        *out = *v;
      } else {
        Fail(*n, "key '" + prefix + key + "' must be a number");
      }
    }
  }
  const toml::table* Table(const toml::table& root, const char* key) {
    const toml::node* n = root.get(key);
    if (!n) return nullptr;
    if (!n->is_table()) {
      Fail(*n, "key '" + std::string(key) + "' must be a table");
      return nullptr;
    }
    return n->as_table();
  }

 private:
  std::string source_;
  std::string error_;
};

}  // namespace

bool IsLoopbackEndpoint(std::string_view ep) {
  if (ep.rfind("ipc://", 0) == 0 || ep.rfind("inproc://", 0) == 0) return true;
  if (ep.rfind("tcp://", 0) != 0) return false;
  std::string_view rest = ep.substr(6);
  for (std::string_view host : {"127.0.0.1:", "localhost:", "[::1]:"}) {
    if (rest.rfind(host, 0) == 0) return true;
  }
  return false;
}

bool DaemonConfig::IsValid(std::string* why) const {
  auto fail = [&](const std::string& m) {
    if (why) *why = m;
    return false;
  };
  for (const auto& [key, ep] :
       {std::pair<const char*, const std::string&>{"sockets.ingest", ingest_endpoint},
        {"sockets.events", events_endpoint}}) {
    if (ep.find("://") == std::string::npos) {
      return fail(std::string(key) + " = \"" + ep +
                  "\": must be a ZeroMQ endpoint (tcp://host:port, ipc://path)");
    }
    if (!allow_remote && !IsLoopbackEndpoint(ep)) {
      return fail(std::string(key) + " = \"" + ep +
                  "\": not a loopback endpoint; set sockets.allow_remote = true to listen beyond "
                  "this machine");
    }
  }
  if (ingest_endpoint == events_endpoint) {
    return fail("sockets.events = \"" + events_endpoint + "\": must differ from sockets.ingest");
  }
  if (commit_interval_ms < 0 || commit_interval_ms > 10000) {
    return fail("store.commit_interval_ms = " + std::to_string(commit_interval_ms) +
                ": must lie in 0..10000");
  }
  if (max_group < 1 || max_group > 1000000) {
    return fail("store.max_group = " + std::to_string(max_group) + ": must lie in 1..1000000");
  }
  if (max_message_bytes < 64 || max_message_bytes > (1L << 30)) {
    return fail("limits.max_message_bytes = " + std::to_string(max_message_bytes) +
                ": must lie in 64..1073741824");
  }
  if (records.tests_every < 1) {
    return fail("records.tests_every = " + std::to_string(records.tests_every) +
                ": must be at least 1");
  }
  if (records.full_readings_every < 1) {
    return fail("records.full_readings_every = " + std::to_string(records.full_readings_every) +
                ": must be at least 1");
  }
  if (records.snapshot_every < 0) {
    return fail("records.snapshot_every = " + std::to_string(records.snapshot_every) +
                ": must be 0 (never) or more");
  }
  if (retention_rows < 0) {
    return fail("records.retention_rows = " + std::to_string(retention_rows) +
                ": must be 0 (keep all) or more");
  }
  if (est_every < 0) {
    return fail("events.est_every = " + std::to_string(est_every) + ": must be 0 (never) or more");
  }
  if (!(stale_after_s >= 0)) {
    return fail("models.stale_after_s = " + std::to_string(stale_after_s) +
                ": must be 0 (never) or more");
  }
  return true;
}

Status ParseDaemonConfig(std::string_view text, std::string_view source, DaemonConfig* out) {
  toml::table root;
  try {
    root = toml::parse(text, std::string(source));
  } catch (const toml::parse_error& e) {
    return Status::InvalidArgument(std::string(source) + ":" +
                                   std::to_string(e.source().begin.line) + ": " +
                                   std::string(e.description()));
  }
  ConfigReader r{std::string(source)};
  DaemonConfig c = *out;
  r.OnlyKeys(root, "", {"sockets", "store", "limits", "records", "events", "models"});
  if (const toml::table* t = r.Table(root, "sockets")) {
    r.OnlyKeys(*t, "sockets.", {"ingest", "events", "allow_remote"});
    r.Str(*t, "sockets.", "ingest", &c.ingest_endpoint);
    r.Str(*t, "sockets.", "events", &c.events_endpoint);
    r.Bool(*t, "sockets.", "allow_remote", &c.allow_remote);
  }
  if (const toml::table* t = r.Table(root, "store")) {
    r.OnlyKeys(*t, "store.", {"synchronous", "commit_interval_ms", "max_group"});
    std::string sync = c.synchronous_full ? "full" : "normal";
    r.Str(*t, "store.", "synchronous", &sync);
    if (sync == "full") {
      c.synchronous_full = true;
    } else if (sync == "normal") {
      c.synchronous_full = false;
    } else if (!r.failed()) {
      r.Fail(*t->get("synchronous"),
             "store.synchronous = \"" + sync + "\": must be \"full\" or \"normal\"");
    }
    r.Int(*t, "store.", "commit_interval_ms", &c.commit_interval_ms);
    r.Int(*t, "store.", "max_group", &c.max_group);
  }
  if (const toml::table* t = r.Table(root, "limits")) {
    r.OnlyKeys(*t, "limits.", {"max_message_bytes"});
    r.Int(*t, "limits.", "max_message_bytes", &c.max_message_bytes);
  }
  if (const toml::table* t = r.Table(root, "records")) {
    r.OnlyKeys(*t, "records.",
               {"tests_every", "full_readings_every", "snapshot_every", "retention_rows"});
    r.Int(*t, "records.", "tests_every", &c.records.tests_every);
    r.Int(*t, "records.", "full_readings_every", &c.records.full_readings_every);
    r.Int(*t, "records.", "snapshot_every", &c.records.snapshot_every);
    r.Int(*t, "records.", "retention_rows", &c.retention_rows);
  }
  if (const toml::table* t = r.Table(root, "events")) {
    r.OnlyKeys(*t, "events.", {"est_every"});
    r.Int(*t, "events.", "est_every", &c.est_every);
  }
  if (const toml::table* t = r.Table(root, "models")) {
    r.OnlyKeys(*t, "models.", {"stale_after_s"});
    r.Num(*t, "models.", "stale_after_s", &c.stale_after_s);
  }
  if (r.failed()) return Status::InvalidArgument(r.error());
  std::string why;
  if (!c.IsValid(&why)) return Status::InvalidArgument(std::string(source) + ": " + why);
  *out = c;
  return Status::Ok();
}

}  // namespace rimwatch::daemon
