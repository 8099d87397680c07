#include "rimwatch/daemon/server.h"

#include <pthread.h>
#include <spdlog/spdlog.h>
#include <sys/stat.h>

#include <algorithm>
#include <array>
#include <chrono>
#include <cstdint>
#include <ctime>
#include <deque>
#include <filesystem>
#include <fstream>
#include <functional>
#include <future>
#include <map>
#include <mutex>
#include <optional>
#include <sstream>
#include <string>
#include <utility>
#include <vector>
#include <zmq.hpp>
#include <zmq_addon.hpp>

#include "rimwatch/daemon/fit_json.h"
#include "rimwatch/daemon/model_host.h"
#include "rimwatch/daemon/model_spec_toml.h"
#include "rimwatch/daemon/model_thread.h"
#include "rimwatch/daemon/record.h"
#include "rimwatch/daemon/store.h"
#include "rimwatch/daemon/wall_clock.h"
#include "rimwatch/daemon/wire.h"

namespace rimwatch::daemon {
namespace {

using json = nlohmann::ordered_json;
using Clock = std::chrono::steady_clock;
namespace fs = std::filesystem;

bool ReadText(const fs::path& path, std::string* out) {
  std::ifstream in(path, std::ios::binary);
  if (!in) return false;
  std::ostringstream ss;
  ss << in.rdbuf();
  *out = ss.str();
  return true;
}

bool IsDataMonitor(const std::string& monitor) { return monitor.rfind("data.", 0) == 0; }

struct HostState {
  std::unique_ptr<ModelHost> host;
  Clock::time_point last_data;
  bool stale = false;
  std::optional<AlertEvent> stale_alert;  // the raise event while stale
  std::int64_t est_counter = 0;           // model thread
  std::string rebuild_reason;
  // Input rows whose results the poll thread has taken (their records are in the open group or
  // committed), and the count the store's recorded_inputs holds (committed).
  std::int64_t taken_inputs = 0;
  std::int64_t stored_inputs = 0;
  bool cursor_frozen = false;  // a failed recovery left a gap: the cursor waits for a restart
};

// What the model thread made of one input row, for the poll thread to record and publish.
struct RowDone {
  HostState* state = nullptr;
  std::int64_t inputs = 0;              // the host's input count once this row ran
  int reports = 0;                      // estimated rows (0 or 1)
  std::vector<AlertEvent> events;       // their alert transitions
  std::vector<std::string> refused;     // RowOutcome::refused
  std::vector<RowRecords> records;      // one per report
  std::vector<std::string> est_bodies;  // est.<model> events of these rows
  Status status;                        // PrepareRecords' failure, if any
};

struct SeriesEntry {
  std::optional<SeriesInfo> info;                 // empty until its first observation
  std::vector<std::pair<HostState*, int>> users;  // hosts and variable index
};

struct PendingReply {
  std::vector<zmq::message_t> envelope;
  std::optional<std::int64_t> seq;
  DataCounts counts;  // the reply of a data request, sent once its group commits
};

// A model.add whose engine set-up runs on a worker thread (WarmUp): the first Monitor::Create
// of a design calibrates its restriction scan by simulation (about a second), and fills the
// engine's per-design cache, so the add itself, on the poll loop, is then quick.
struct WarmingAdd {
  std::vector<zmq::message_t> envelope;
  Request req;
  std::string peer;  // Server::Impl::PeerOf
  std::string name;  // of the model
  std::future<void> warmed;
};

// A committed group waiting for the disk (Store::CommitDeferred): its acks and events go out,
// in commit order, once the store reports the ticket durable.
struct SyncingGroup {
  std::uint64_t ticket = 0;
  std::vector<PendingReply> replies;
  std::vector<std::pair<std::string, std::string>> events;  // topic, body
};

}  // namespace

struct Server::Impl {
  DaemonConfig config;
  fs::path data_dir;
  std::unique_ptr<Store> store;
  zmq::context_t context{1};
  zmq::socket_t router{context, zmq::socket_type::router};
  zmq::socket_t pub{context, zmq::socket_type::pub};
  std::string ingest_ep;
  std::string events_ep;

  std::vector<std::unique_ptr<HostState>> hosts;
  std::map<std::string, SeriesEntry> series;

  // The open group: acks and events wait for its commit.
  std::vector<PendingReply> pending;
  std::vector<std::pair<std::string, std::string>> events;  // topic, body
  std::deque<SyncingGroup> syncing;  // committed, not yet durable (oldest first)
  // model.add requests warming up (oldest first; completed in this order), and the requests of
  // their peers read meanwhile, held in arrival order: a peer's requests keep their order, other
  // peers are served while a design calibrates.
  std::deque<WarmingAdd> warming;
  std::map<std::string, std::deque<std::vector<zmq::message_t>>> held;  // by peer
  std::int64_t pending_obs = 0;
  Clock::time_point group_started;
  std::int64_t commits = 0;
  UtcNowCache clock_text;  // received_at of data requests

  // Health.
  Clock::time_point started = Clock::now();
  std::int64_t accepted = 0, duplicates = 0, revisions = 0, late = 0, rows_total = 0;
  std::array<std::int64_t, kErrorCodeCount> rejects{};
  std::array<std::int64_t, kErrorCodeCount> rejects_unpublished{};
  std::array<std::string, kErrorCodeCount> reject_last_message;
  std::int64_t rows_refused = 0;
  std::vector<std::pair<Clock::time_point, std::int64_t>> rate_samples;  // (time, rows_total)
  Clock::time_point last_housekeeping = Clock::now();

  // Model updates run on the model thread; their results wait in `done` for the poll thread.
  // Observations are acknowledged once committed, before their rows have run (DEVELOPERS.md,
  // "The daemon: invariants"); at most kMaxBacklog rows wait for the models
  // before the poll thread stops reading requests.
  static constexpr std::size_t kMaxBacklog = 4096;
  std::mutex done_mutex;
  std::vector<RowDone> done;
  std::vector<RowDone> collected;                  // poll thread: Collect's buffer (see there)
  std::vector<std::function<void()>> unsubmitted;  // rows admitted, not yet handed over
  ModelThread model_thread;  // last member: stopped (joined) before the hosts go

  // ---- models -------------------------------------------------------------------------------
  // Builds the host of a stored model and rebuilds it from stored observations, inside the
  // caller's transaction. adding: the model is new: its rows are recorded and its active alerts
  // raised. Otherwise (start): the rows after the stored recorded_inputs (acknowledged, not yet
  // run when the daemon stopped) are recorded with their alerts, which become events; then the
  // alerts the rebuilt monitor holds are compared with the stored log and only the differences
  // become events (none, when the log is whole).
  Status LoadHost(const StoredModel& stored, bool adding, std::vector<AlertEvent>* changes) {
    ModelSpec spec;
    Status st = ParseModelSpecToml(stored.spec_text, "model " + stored.name, &spec);
    if (!st.ok()) return st;
    std::vector<std::int64_t> ids;
    for (const std::string& v : spec.var.variables) {
      std::optional<SeriesInfo> info;
      st = store->FindSeries(v, &info);
      if (!st.ok()) return st;
      ids.push_back(info ? info->id : 0);
    }
    auto state = std::make_unique<HostState>();
    st = ModelHost::Create(stored.id, stored.spec_text, spec, ids, &state->host);
    if (!st.ok()) return st;
    state->last_data = Clock::now();
    RebuildOptions ro;
    ro.record = adding || stored.recorded_inputs.has_value();
    ro.record_options = config.records;
    ro.recorded_at = adding ? stored.added_at : UtcNowText();
    ro.reason = "After adding the model";
    if (!adding && stored.recorded_inputs) ro.record_from_input = *stored.recorded_inputs;
    RowOutcome outcome;
    std::vector<AlertEvent> added;
    st = state->host->Rebuild(*store, ro, &added, &outcome);
    if (!st.ok()) return st;
    rows_refused += static_cast<std::int64_t>(outcome.refused.size());
    const ModelHost& h = *state->host;
    state->taken_inputs = h.inputs();
    st = store->SetRecordedInputs(stored.id, h.inputs());
    if (!st.ok()) return st;
    state->stored_inputs = h.inputs();  // once the caller commits
    if (adding) {
      for (AlertEvent& e : added) changes->push_back(e);
    } else {
      if (!added.empty()) {
        spdlog::info("model {}: recorded {} alert transitions of rows acknowledged before the stop",
                     h.name(), added.size());
      }
      for (AlertEvent& e : added) changes->push_back(e);
      // What the log says is active versus what the rebuilt monitor says.
      std::vector<AlertEvent> log;
      st = store->LoadAlerts(stored.id, &log);
      if (!st.ok()) return st;
      std::vector<AlertEvent> model_log;
      for (const AlertEvent& e : log) {
        if (e.monitor == "data.stale") {
          state->stale = e.raised;
          state->stale_alert = e.raised ? std::optional<AlertEvent>(e) : std::nullopt;
        } else if (!IsDataMonitor(e.monitor)) {
          model_log.push_back(e);
        }
      }
      std::vector<AlertEvent> diff =
          AlertChanges(ActiveFromLog(model_log), h.monitor().ActiveAlerts(), h.rows(),
                       h.last_period(), "On restart");
      const std::string now = UtcNowText();
      for (AlertEvent& e : diff) {
        e.model = h.name();
        st = store->PutAlert(stored.id, e, now);
        if (!st.ok()) return st;
        spdlog::warn("alert {} {} {} on restart: {}", e.model, e.monitor,
                     e.raised ? "raised" : "cleared", e.message);
        changes->push_back(e);
      }
    }
    for (std::size_t j = 0; j < spec.var.variables.size(); ++j) {
      SeriesEntry& entry = series[spec.var.variables[j]];
      if (!entry.info) {
        std::optional<SeriesInfo> info;
        st = store->FindSeries(spec.var.variables[j], &info);
        if (!st.ok()) return st;
        entry.info = info;
      }
      entry.users.emplace_back(state.get(), static_cast<int>(j));
    }
    spdlog::info("model {}: {} variables, {} lags, rebuilt {} rows from the store", h.name(),
                 spec.var.variables.size(), spec.var.lags, h.rows());
    hosts.push_back(std::move(state));
    return Status::Ok();
  }

  void Unregister(HostState* state) {
    for (auto it = series.begin(); it != series.end();) {
      auto& users = it->second.users;
      users.erase(std::remove_if(users.begin(), users.end(),
                                 [&](const auto& u) { return u.first == state; }),
                  users.end());
      it = users.empty() ? series.erase(it) : std::next(it);
    }
    hosts.erase(
        std::remove_if(hosts.begin(), hosts.end(), [&](const auto& h) { return h.get() == state; }),
        hosts.end());
  }

  HostState* FindHost(const std::string& name) {
    for (auto& h : hosts) {
      if (h->host->name() == name) return h.get();
    }
    return nullptr;
  }

  Status Startup() {
    std::error_code ec;
    fs::create_directories(data_dir / "models", ec);
    if (ec) {
      return Status::IoError("cannot create " + (data_dir / "models").string() + ": " +
                             ec.message());
    }
    StoreOptions so;
    so.path = (data_dir / "rimwatch.sqlite").string();
    so.synchronous_full = config.synchronous_full;
    so.deferred_sync = true;  // the poll loop reads the next group while the disk syncs this one
    Status st = Store::Open(so, &store);
    if (!st.ok()) return st;

    std::vector<StoredModel> active;
    st = store->ActiveModels(&active);
    if (!st.ok()) return st;
    // Spec files not yet in the store are added; a file that differs from its active model is
    // reported and the stored model kept (drop and add it to change it).
    std::vector<fs::path> files;
    for (const auto& entry : fs::directory_iterator(data_dir / "models", ec)) {
      if (entry.is_regular_file() && entry.path().extension() == ".toml") {
        files.push_back(entry.path());
      }
    }
    std::sort(files.begin(), files.end());
    for (const fs::path& file : files) {
      std::string text;
      if (!ReadText(file, &text)) {
        spdlog::error("{}: cannot read; model not loaded", file.string());
        continue;
      }
      ModelSpec spec;
      st = ParseModelSpecToml(text, file.string(), &spec);
      if (!st.ok()) {
        spdlog::error("{}; model not loaded", st.message());
        continue;
      }
      auto same = std::find_if(active.begin(), active.end(),
                               [&](const StoredModel& m) { return m.name == spec.name; });
      if (same != active.end()) {
        if (same->spec_text != text) {
          spdlog::warn(
              "{}: differs from the active model {} in the store; the stored spec is "
              "used (drop and add the model to change it)",
              file.string(), spec.name);
        }
        continue;
      }
      StoredModel m;
      m.name = spec.name;
      m.spec_text = text;
      m.added_at = UtcNowText();
      st = store->Begin();
      if (st.ok()) st = store->AddModel(m.name, m.spec_text, m.added_at, &m.id);
      if (st.ok()) st = store->Commit();
      if (!st.ok()) {
        if (store->in_transaction()) store->Rollback();
        return st;
      }
      spdlog::info("model {}: added from {}", m.name, file.string());
      active.push_back(m);
    }
    // Each model in its own transaction: its unrecorded tail, its cursor and any alert changes.
    for (const StoredModel& m : active) {
      std::vector<AlertEvent> changes;  // recorded by LoadHost
      st = store->Begin();
      if (st.ok()) st = LoadHost(m, false, &changes);
      if (st.ok()) st = store->Commit();
      if (!st.ok()) {
        if (store->in_transaction()) store->Rollback();
        if (HostState* h = FindHost(m.name)) Unregister(h);
        spdlog::error("model {}: not loaded: {}", m.name, st.ToString());
        continue;
      }
      for (const AlertEvent& e : changes) QueueAlert(e);
    }

    try {
      router.set(zmq::sockopt::sndhwm, 0);  // never drop an ack
      router.set(zmq::sockopt::linger, 2000);
      router.bind(config.ingest_endpoint);
      ingest_ep = router.get(zmq::sockopt::last_endpoint);
      pub.set(zmq::sockopt::linger, 0);
      pub.bind(config.events_endpoint);
      events_ep = pub.get(zmq::sockopt::last_endpoint);
    } catch (const zmq::error_t& e) {
      return Status::IoError("cannot bind " + config.ingest_endpoint + " / " +
                             config.events_endpoint + ": " + e.what());
    }
    spdlog::info("rimwatchd serving: ingest {} events {} store {} ({} models)", ingest_ep,
                 events_ep, store->path(), hosts.size());
    PublishEvents();
    return Status::Ok();
  }

  // ---- replies and events -------------------------------------------------------------------
  void SendReply(std::vector<zmq::message_t>& envelope, const std::string& body) {
    try {
      for (zmq::message_t& f : envelope) router.send(f, zmq::send_flags::sndmore);
      router.send(zmq::buffer(body), zmq::send_flags::none);
    } catch (const zmq::error_t& e) {
      spdlog::warn("reply not sent: {}", e.what());
    }
  }

  // Events go out in the order they were queued: behind any group still waiting for the disk.
  void PublishEvents() {
    if (!syncing.empty()) {
      auto& tail = syncing.back().events;
      tail.insert(tail.end(), std::make_move_iterator(events.begin()),
                  std::make_move_iterator(events.end()));
      events.clear();
      return;
    }
    Publish(events);
  }
  void Publish(std::vector<std::pair<std::string, std::string>>& list) {
    for (auto& [topic, body] : list) {
      try {
        pub.send(zmq::buffer(topic), zmq::send_flags::sndmore | zmq::send_flags::dontwait);
        pub.send(zmq::buffer(body), zmq::send_flags::dontwait);
      } catch (const zmq::error_t&) {
      }
    }
    list.clear();
  }

  // Sends the acks and events of every group the store reports durable, oldest first.
  void ReleaseDurable() {
    const std::uint64_t durable = store->durable_ticket();
    while (!syncing.empty() && syncing.front().ticket <= durable) {
      SyncingGroup& g = syncing.front();
      for (PendingReply& p : g.replies) SendReply(p.envelope, EncodeDataOk(p.seq, p.counts));
      Publish(g.events);
      syncing.pop_front();
    }
  }
  // Blocks until every committed group is durable and sends their acks and events.
  Status SettleDurable() {
    if (syncing.empty()) return Status::Ok();
    Status st = store->WaitDurable(syncing.back().ticket);
    if (st.ok()) ReleaseDurable();
    return st;
  }
  // The disk refused a sync: what waits for it can never be acknowledged. rimwatchd stops
  // without acking it; senders resend after a restart (a value already stored is acked as a
  // duplicate, not stored twice).
  Status StopUndurable(const Status& why) {
    spdlog::critical(
        "rimwatchd stopping: the store cannot make data durable ({}); {} "
        "acknowledgements withheld",
        why.ToString(), WaitingAcks());
    return why;
  }
  std::size_t WaitingAcks() const {
    std::size_t n = pending.size();
    for (const SyncingGroup& g : syncing) n += g.replies.size();
    return n;
  }

  void Refuse(std::vector<zmq::message_t>& envelope, const std::optional<std::int64_t>& seq,
              const WireError& error) {
    const int code = static_cast<int>(error.code);
    ++rejects[code];
    ++rejects_unpublished[code];
    reject_last_message[code] = error.message;
    SendReply(envelope, EncodeError(seq, error));
  }

  void QueueAlert(const AlertEvent& e) {
    events.emplace_back(AlertTopic(e.model), AlertEventJson(e).dump());
    spdlog::info("alert {} {} {} {}: {}", e.model, e.monitor, e.raised ? "raised" : "cleared",
                 AlertLevelName(e.level), e.message);
  }

  // ---- the model thread --------------------------------------------------------------------
  // Model thread: runs one input row of a host and prepares its records and est events.
  // inputs: the host's input count with this row (counted when it was admitted).
  void RunInput(HostState* state, const InputRow& row, std::int64_t inputs) {
    RowDone d;
    d.state = state;
    d.inputs = inputs;
    ModelHost& h = *state->host;
    // The report stays on this thread (it is freed where it was allocated); what the poll thread
    // needs is moved into d.
    RowOutcome outcome;
    h.Run(row, &outcome);
    d.reports = static_cast<int>(outcome.reports.size());
    d.refused = std::move(outcome.refused);
    for (RowReport& report : outcome.reports) {
      RowRecords records;
      Status st = PrepareRecords(h.id(), h.monitor(), report, config.records, &records);
      if (!st.ok()) d.status = st;
      if (config.est_every > 0 && (++state->est_counter % config.est_every) == 0) {
        // Every row's event: the tests record's payload (its readings are those that changed
        // since the previous row's event), with the model added. Otherwise every reading.
        if (records.test && config.est_every == 1) {
          d.est_bodies.push_back(EventBody(records.test->payload_json, h.name()));
        } else {
          std::string body;
          AppendRowPayloadText(report, &h.name(), &body);
          d.est_bodies.push_back(std::move(body));
        }
      }
      d.records.push_back(std::move(records));
      for (AlertEvent& e : report.events) d.events.push_back(std::move(e));
    }
    std::lock_guard<std::mutex> lock(done_mutex);
    done.push_back(std::move(d));
  }

  // Poll thread: queues the admitted rows of one host for the model thread. They wait in
  // `unsubmitted` until SubmitQueued (once per batch of requests read, and before every drain),
  // so the model thread is woken once per batch rather than once per row.
  void SubmitRows(HostState* state, std::vector<InputRow>& ready) {
    std::int64_t inputs = state->host->inputs() - static_cast<std::int64_t>(ready.size());
    for (InputRow& row : ready) {
      ++inputs;
      unsubmitted.emplace_back(
          [this, state, inputs, row = std::move(row)] { RunInput(state, row, inputs); });
    }
    ready.clear();
  }
  void SubmitQueued() {
    if (unsubmitted.empty()) return;
    model_thread.Submit(&unsubmitted);  // leaves it empty, with its capacity
  }
  std::size_t Backlog() const { return model_thread.Backlog() + unsubmitted.size(); }

  bool HasDone() {
    std::lock_guard<std::mutex> lock(done_mutex);
    return !done.empty();
  }

  // Poll thread: records and queues what the model thread finished, in the open group (opened
  // here if none is). Returns a storage failure.
  Status Collect() {
    {
      // `collected` is empty here and keeps the capacity of earlier rounds, and so does `done`
      // after the swap: the two buffers trade places, and neither thread grows a fresh vector
      // (large blocks, allocated on one thread and freed on the other) for every batch of rows.
      std::lock_guard<std::mutex> lock(done_mutex);
      collected.swap(done);
    }
    const Status st = CollectRows(collected);
    collected.clear();
    return st;
  }
  Status CollectRows(std::vector<RowDone>& batch) {
    if (batch.empty()) return Status::Ok();
    Status st = EnsureGroup();
    if (!st.ok()) return st;
    const std::string now = UtcNowText();
    for (RowDone& d : batch) {
      HostState& state = *d.state;
      ModelHost& h = *state.host;
      if (!d.status.ok()) return d.status;
      rows_total += d.reports;
      for (const RowRecords& records : d.records) {
        st = WriteRecords(*store, h.id(), records, now);
        if (!st.ok()) return st;
      }
      for (const AlertEvent& e : d.events) QueueAlert(e);
      for (std::string& body : d.est_bodies) {
        events.emplace_back(EstimateTopic(h.name()), std::move(body));
      }
      for (const std::string& why : d.refused) {
        ++rows_refused;
        json body = {{"code", "row_refused"}, {"model", h.name()}, {"message", why}, {"count", 1}};
        events.emplace_back(kRejectTopic, body.dump());
        spdlog::warn("model {}: row refused: {}", h.name(), why);
      }
      state.taken_inputs = d.inputs;
    }
    return Status::Ok();
  }

  // Poll thread: waits for the model thread to finish every queued row, then collects. After it
  // the poll thread may read and change every host.
  Status Drain() {
    SubmitQueued();
    model_thread.Drain();
    return Collect();
  }

  // ---- groups -------------------------------------------------------------------------------
  Status EnsureGroup() {
    if (store->in_transaction()) return Status::Ok();
    group_started = Clock::now();
    return store->Begin();
  }

  // The store failed inside the group: nothing of it stays. Every waiting request gets a storage
  // error, the models and the series registry are rebuilt from what is committed.
  void FailGroup(const Status& why) {
    spdlog::error("store failure, {} waiting requests refused: {}", pending.size(), why.ToString());
    if (store->in_transaction()) store->Rollback();
    WireError err{ErrorCode::kStorage, "nothing of this request was kept: " + why.message()};
    for (PendingReply& p : pending) Refuse(p.envelope, p.seq, err);
    pending.clear();
    events.clear();
    pending_obs = 0;
    for (auto& [name, entry] : series) {
      std::optional<SeriesInfo> info;
      if (store->FindSeries(name, &info).ok()) entry.info = info;
    }
    // What the model thread made of rows of the failed group is dropped: the rebuild below
    // starts again from what is committed.
    SubmitQueued();
    model_thread.Drain();
    {
      std::lock_guard<std::mutex> lock(done_mutex);
      done.clear();
    }
    for (auto& state : hosts) {
      ModelHost& h = *state->host;
      for (std::size_t j = 0; j < h.spec().var.variables.size(); ++j) {
        auto it = series.find(h.spec().var.variables[j]);
        if (it != series.end() && it->second.info) h.set_series_id(j, it->second.info->id);
      }
      // As on restart: the committed records cover the first stored_inputs rows; the rows after
      // them (acknowledged in earlier groups, recorded in the failed one) are recorded again.
      RebuildOptions ro;
      ro.record = !state->cursor_frozen;
      ro.record_options = config.records;
      ro.recorded_at = UtcNowText();
      ro.record_from_input = state->stored_inputs;
      std::vector<AlertEvent> tail;
      RowOutcome outcome;
      Status st = store->Begin();
      if (st.ok()) st = h.Rebuild(*store, ro, &tail, &outcome);
      if (st.ok() && ro.record) st = store->SetRecordedInputs(h.id(), h.inputs());
      if (st.ok()) st = store->Commit();
      if (st.ok()) {
        state->taken_inputs = h.inputs();
        if (ro.record) state->stored_inputs = h.inputs();
        for (const AlertEvent& e : tail) QueueAlert(e);
        continue;
      }
      if (store->in_transaction()) store->Rollback();
      ro.record = false;
      tail.clear();
      outcome = RowOutcome();
      Status again = h.Rebuild(*store, ro, &tail, &outcome);
      // The store cursor stays where it is until a restart records the rows after it (their
      // tests and snapshots are rewritten then; alerts raised in between may be logged twice).
      state->cursor_frozen = true;
      state->taken_inputs = h.inputs();
      spdlog::error(
          "model {}: records of rows after input {} not written ({}); they are "
          "written on the next restart{}",
          h.name(), state->stored_inputs, st.ToString(),
          again.ok() ? "" : "; rebuild failed: " + again.ToString());
    }
    PublishEvents();
  }

  // Commits the open group: first what the model thread finished (drain: every queued row),
  // re-estimations after revisions, the record cursors; then acks and events.
  void Flush(bool drain) {
    Status st = drain ? Drain() : Collect();
    if (!st.ok()) return FailGroup(st);
    const bool rebuild = std::any_of(hosts.begin(), hosts.end(),
                                     [](const auto& h) { return h->host->needs_rebuild(); });
    if (rebuild && !drain) {
      st = Drain();
      if (!st.ok()) return FailGroup(st);
    }
    if (!store->in_transaction()) {
      PublishEvents();
      return;
    }
    const std::string now = UtcNowText();
    for (auto& state : hosts) {
      ModelHost& h = *state->host;
      if (!h.needs_rebuild()) continue;
      RebuildOptions ro;
      ro.record = true;
      ro.record_options = config.records;
      ro.recorded_at = now;
      ro.reason = "After " + state->rebuild_reason;
      std::vector<AlertEvent> changes;
      RowOutcome outcome;
      st = h.Rebuild(*store, ro, &changes, &outcome);
      if (!st.ok()) return FailGroup(st);
      state->taken_inputs = h.inputs();
      spdlog::info("model {}: re-estimated after {} ({} rows re-run)", h.name(),
                   state->rebuild_reason, outcome.reports.size());
      rows_refused += static_cast<std::int64_t>(outcome.refused.size());
      for (const AlertEvent& e : changes) QueueAlert(e);
      state->rebuild_reason.clear();
    }
    if (config.retention_rows > 0 && (commits % 256) == 0) {
      st = store->PruneRecords(config.retention_rows);
      if (!st.ok()) return FailGroup(st);
    }
    for (auto& state : hosts) {
      if (state->cursor_frozen || state->taken_inputs == state->stored_inputs) continue;
      st = store->SetRecordedInputs(state->host->id(), state->taken_inputs);
      if (!st.ok()) return FailGroup(st);
    }
    std::uint64_t ticket = 0;
    st = store->CommitDeferred(&ticket);
    if (!st.ok()) return FailGroup(st);
    ++commits;
    for (auto& state : hosts) {
      if (!state->cursor_frozen) state->stored_inputs = state->taken_inputs;
    }
    // Acks and events wait for the disk (ReleaseDurable); the loop reads on meanwhile.
    syncing.push_back(SyncingGroup{ticket, std::move(pending), std::move(events)});
    pending.clear();
    events.clear();
    pending_obs = 0;
    ReleaseDurable();
  }

  // ---- requests -----------------------------------------------------------------------------
  void HandleData(std::vector<zmq::message_t>& envelope, Request& req) {
    // Validate the whole request first: it is refused whole or taken whole.
    std::map<std::string, PeriodKind> first_kind;
    for (const Observation& o : req.observations) {
      auto it = series.find(o.series);
      if (it == series.end()) {
        return Refuse(envelope, req.seq,
                      {ErrorCode::kUnknownSeries,
                       "series \"" + o.series + "\": no active model uses it (add a model first)"});
      }
      PeriodKind kind = o.period.kind;
      if (it->second.info) {
        kind = it->second.info->kind;
      } else if (auto f = first_kind.find(o.series); f != first_kind.end()) {
        kind = f->second;
      } else {
        first_kind[o.series] = o.period.kind;
      }
      if (kind != o.period.kind) {
        return Refuse(envelope, req.seq,
                      {ErrorCode::kPeriodKind, "series \"" + o.series + "\" holds " +
                                                   std::string(PeriodKindName(kind)) +
                                                   " periods; period " + o.period.text + " is " +
                                                   std::string(PeriodKindName(o.period.kind))});
      }
    }
    Status st = EnsureGroup();
    if (!st.ok()) {
      pending.push_back({std::move(envelope), req.seq, DataCounts{}});
      return FailGroup(st);
    }
    const std::string& now = clock_text.Now();
    const auto wall = Clock::now();
    std::int64_t n_new = 0, n_dup = 0, n_rev = 0, n_late = 0;
    for (const Observation& o : req.observations) {
      SeriesEntry& entry = series[o.series];
      if (!entry.info) {
        SeriesInfo info;
        st = store->EnsureSeries(o.series, o.period.kind, &info);
        if (!st.ok()) break;
        entry.info = info;
        for (auto& [state, var] : entry.users) state->host->set_series_id(var, info.id);
      }
      PutOutcome outcome = PutOutcome::kNew;
      st = store->PutObservation(&*entry.info, o.period, o.value, o.released_at, now, &outcome);
      if (!st.ok()) break;
      switch (outcome) {
        case PutOutcome::kNew:
          ++n_new;
          break;
        case PutOutcome::kDuplicate:
          ++n_dup;
          break;
        case PutOutcome::kRevision:
          ++n_rev;
          break;
        case PutOutcome::kLate:
          ++n_late;
          break;
      }
      if (outcome == PutOutcome::kDuplicate) continue;
      for (auto& [state, var] : entry.users) {
        ModelHost& h = *state->host;
        const bool was = h.needs_rebuild();
        std::vector<InputRow> ready;
        h.Offer(var, o.period, o.value, outcome, &ready);
        SubmitRows(state, ready);
        state->last_data = wall;
        if (state->stale) {
          st = Drain();  // the clear event carries the host's row count
          if (!st.ok()) break;
          ClearStale(*state, now);
        }
        if (!was && h.needs_rebuild()) {
          state->rebuild_reason =
              std::string(outcome == PutOutcome::kRevision ? "a revision" : "a value") + " of " +
              o.series + " for period " + o.period.text;
        }
      }
      if (!st.ok()) break;
    }
    if (!st.ok()) {
      pending.push_back({std::move(envelope), req.seq, DataCounts{}});
      return FailGroup(st);
    }
    accepted += n_new + n_rev + n_late;
    duplicates += n_dup;
    revisions += n_rev;
    late += n_late;
    pending_obs += static_cast<std::int64_t>(req.observations.size());
    pending.push_back(
        {std::move(envelope), req.seq, DataCounts{n_new + n_rev + n_late, n_dup, n_rev, n_late}});
  }

  void ClearStale(HostState& state, const std::string& now) {
    if (!state.stale) return;
    state.stale = false;
    AlertEvent e = state.stale_alert.value_or(AlertEvent{});
    e.model = state.host->name();
    e.monitor = "data.stale";
    e.raised = false;
    e.level = AlertLevel::kWarn;
    e.row = state.host->rows();
    e.period = state.host->last_period();
    e.message = "Data for model " + e.model + " is arriving again.";
    state.stale_alert.reset();
    if (store->in_transaction()) store->PutAlert(state.host->id(), e, now);
    QueueAlert(e);
  }

  void CheckStale() {
    if (config.stale_after_s <= 0) return;
    const auto wall = Clock::now();
    bool drained = false;
    for (auto& state : hosts) {
      if (state->stale) continue;
      const double silent = std::chrono::duration<double>(wall - state->last_data).count();
      if (silent < config.stale_after_s) continue;
      if (!drained) {  // the stale events carry each host's row count
        Status st = Drain();
        if (!st.ok()) return FailGroup(st);
        drained = true;
      }
      AlertEvent e;
      e.model = state->host->name();
      e.monitor = "data.stale";
      e.raised = true;
      e.level = AlertLevel::kWarn;
      e.row = state->host->rows();
      e.period = state->host->last_period();
      e.statistic = silent;
      e.threshold = config.stale_after_s;
      e.message = "No data for model " + e.model + " for " + std::to_string(int(silent)) +
                  " s: its series have stopped arriving, so its estimates and alerts are frozen" +
                  (e.period.empty() ? std::string(".") : " at period " + e.period + ".");
      Status st = EnsureGroup();
      if (st.ok()) st = store->PutAlert(state->host->id(), e, UtcNowText());
      if (!st.ok()) return FailGroup(st);
      state->stale = true;
      state->stale_alert = e;
      QueueAlert(e);
    }
  }

  // brief: the health form {name, rows, last_period, stale}; else also variables and lags.
  json ModelListJson(bool brief) {
    json models = json::array();
    for (auto& state : hosts) {
      const ModelHost& h = *state->host;
      json m = {{"name", h.name()}};
      if (!brief) {
        m["variables"] = h.spec().var.variables;
        m["lags"] = h.spec().var.lags;
      }
      m["rows"] = h.rows();
      m["last_period"] = h.last_period().empty() ? json(nullptr) : json(h.last_period());
      m["stale"] = state->stale;
      models.push_back(std::move(m));
    }
    return models;
  }

  void HandleControl(std::vector<zmq::message_t>& envelope, Request& req) {
    // Control requests see every acknowledged observation, run, and are answered after the acks
    // and events of everything read before them.
    Flush(/*drain=*/true);
    if (Status st = SettleDurable(); !st.ok()) {
      return Refuse(envelope, req.seq, {ErrorCode::kStorage, st.ToString()});
    }
    switch (req.type) {
      case RequestType::kHealth:
        return SendReply(envelope, EncodeOk(req.seq, HealthJson()));
      case RequestType::kModelList:
        return SendReply(envelope, EncodeOk(req.seq, json{{"models", ModelListJson(false)}}));
      case RequestType::kState: {
        HostState* state = FindHost(req.model);
        if (!state) {
          return Refuse(envelope, req.seq,
                        {ErrorCode::kUnknownModel, "model: no active model \"" + req.model + "\""});
        }
        json result;
        Status st = StateJson(*state, &result);
        if (!st.ok()) {
          return Refuse(envelope, req.seq, {ErrorCode::kInternal, st.ToString()});
        }
        return SendReply(envelope, EncodeOk(req.seq, result));
      }
      case RequestType::kModelAdd:
        return StartAdd(envelope, req);
      case RequestType::kModelDrop:
        return DropModel(envelope, req);
      default:
        return Refuse(envelope, req.seq, {ErrorCode::kInternal, "unhandled request type"});
    }
  }

  // model.add: the checks that need no engine here, the engine set-up on a worker thread; the add
  // completes in FinishAdds. This peer's next requests wait behind it.
  void StartAdd(std::vector<zmq::message_t>& envelope, Request& req) {
    ModelSpec spec;
    Status st = ParseModelSpecToml(req.spec_text, "spec", &spec);
    if (!st.ok()) return Refuse(envelope, req.seq, {ErrorCode::kBadSpec, st.message()});
    const bool adding = std::any_of(warming.begin(), warming.end(),
                                    [&](const WarmingAdd& w) { return w.name == spec.name; });
    if (FindHost(spec.name) || adding) {
      return Refuse(
          envelope, req.seq,
          {ErrorCode::kModelExists, "spec: model \"" + spec.name + "\" is already " +
                                        (adding ? "being added" : "active (drop it first)")});
    }
    WarmingAdd w;
    w.peer = PeerOf(envelope, envelope.size());
    w.name = spec.name;
    w.envelope = std::move(envelope);
    w.req = std::move(req);
    w.warmed = std::async(std::launch::async, [spec = std::move(spec)] {
      pthread_setname_np(pthread_self(), "rw-warmup");
      std::unique_ptr<Monitor> monitor;
      try {
        (void)Monitor::Create(spec, &monitor);  // errors are reported by the add itself
      } catch (const std::exception&) {
      }
    });
    held.try_emplace(w.peer);
    warming.push_back(std::move(w));
  }

  // Completes the model.adds whose warm-up finished, oldest first, then hands their peers' held
  // requests back to Handle in order (a held model.add starts warming and holds the rest again).
  // wait: block until every warm-up is done (shutdown).
  void FinishAdds(bool wait) {
    while (!warming.empty()) {
      WarmingAdd& w = warming.front();
      if (!wait && w.warmed.wait_for(std::chrono::seconds(0)) != std::future_status::ready) {
        return;
      }
      w.warmed.get();
      WarmingAdd finished = std::move(w);
      warming.pop_front();
      Flush(/*drain=*/true);  // as every control request
      if (Status st = SettleDurable(); !st.ok()) {
        Refuse(finished.envelope, finished.req.seq, {ErrorCode::kStorage, st.ToString()});
      } else {
        AddModel(finished.envelope, finished.req);
      }
      if (std::any_of(warming.begin(), warming.end(),
                      [&](const WarmingAdd& o) { return o.peer == finished.peer; })) {
        continue;  // its held requests stay behind its next add
      }
      auto it = held.find(finished.peer);
      if (it == held.end()) continue;
      std::deque<std::vector<zmq::message_t>> queue = std::move(it->second);
      held.erase(it);
      while (!queue.empty()) {
        std::vector<zmq::message_t> frames = std::move(queue.front());
        queue.pop_front();
        Handle(frames);  // held again behind a new add of this peer, if one started
      }
      SubmitQueued();
    }
  }

  void AddModel(std::vector<zmq::message_t>& envelope, Request& req) {
    ModelSpec spec;
    Status st = ParseModelSpecToml(req.spec_text, "spec", &spec);
    if (!st.ok()) return Refuse(envelope, req.seq, {ErrorCode::kBadSpec, st.message()});
    if (FindHost(spec.name)) {
      return Refuse(envelope, req.seq,
                    {ErrorCode::kModelExists,
                     "spec: model \"" + spec.name + "\" is already active (drop it first)"});
    }
    StoredModel m;
    m.name = spec.name;
    m.spec_text = req.spec_text;
    m.added_at = UtcNowText();
    std::vector<AlertEvent> changes;
    st = store->Begin();
    if (st.ok()) st = store->AddModel(m.name, m.spec_text, m.added_at, &m.id);
    if (st.ok()) st = LoadHost(m, true, &changes);  // records its rows and alerts
    if (st.ok()) st = store->Commit();
    if (!st.ok()) {
      if (store->in_transaction()) store->Rollback();
      if (HostState* h = FindHost(m.name)) Unregister(h);
      return Refuse(envelope, req.seq, {ErrorCode::kStorage, st.ToString()});
    }
    for (const AlertEvent& e : changes) QueueAlert(e);
    PublishEvents();
    // Keep DIR/models in step so a restart loads the same set.
    std::ofstream(data_dir / "models" / (m.name + ".toml"), std::ios::binary) << m.spec_text;
    spdlog::info("model {}: added by request ({} rows from stored history)", m.name,
                 FindHost(m.name)->host->rows());
    SendReply(envelope,
              EncodeOk(req.seq, json{{"model", m.name}, {"rows", FindHost(m.name)->host->rows()}}));
  }

  void DropModel(std::vector<zmq::message_t>& envelope, Request& req) {
    HostState* state = FindHost(req.model);
    if (!state) {
      return Refuse(envelope, req.seq,
                    {ErrorCode::kUnknownModel, "model: no active model \"" + req.model + "\""});
    }
    Status st = store->Begin();
    if (st.ok()) st = store->DropModel(req.model, UtcNowText());
    if (st.ok()) st = store->Commit();
    if (!st.ok()) {
      if (store->in_transaction()) store->Rollback();
      return Refuse(envelope, req.seq, {ErrorCode::kStorage, st.ToString()});
    }
    Unregister(state);
    const fs::path file = data_dir / "models" / (req.model + ".toml");
    std::error_code ec;
    if (fs::exists(file, ec)) fs::rename(file, fs::path(file.string() + ".dropped"), ec);
    spdlog::info("model {}: dropped by request (its records stay in the store)", req.model);
    SendReply(envelope, EncodeOk(req.seq, json{{"model", req.model}, {"dropped", true}}));
  }

  Status StateJson(HostState& state, json* out) {
    const ModelHost& h = *state.host;
    json result = json::object();
    result["model"] = h.name();
    result["rows"] = h.rows();
    result["last_period"] = h.last_period().empty() ? json(nullptr) : json(h.last_period());
    result["stale"] = state.stale;
    FitReport report;
    Status st = h.monitor().Summary(&report);
    if (st.ok()) {
      FitOptions fo;
      fo.lags = h.spec().var.lags;
      fo.deterministic = h.spec().var.deterministic;
      fo.covariance = h.spec().inference.covariance;
      const std::int64_t window = h.monitor().tracking().rows_in_window();
      report.rows = window;
      result["fit"] = FitReportJson(report, fo, json(h.RowPeriod(h.rows() - window + 1)),
                                    json(h.last_period()));
    } else {
      result["fit"] = nullptr;
      result["fit_unavailable"] = st.ToString();
    }
    json stability = json::object();
    const std::optional<RowReport>& last = h.last_report();
    const bool has_rho = last && last->has_spectral_radius;
    stability["rho"] = has_rho ? json(last->spectral_radius) : json(nullptr);
    const bool has_se = has_rho && last->rho_se.has_value();
    stability["rho_se"] = has_se ? json(*last->rho_se) : json(nullptr);
    stability["upper"] =
        has_se ? json(last->spectral_radius + 1.645 * *last->rho_se) : json(nullptr);
    stability["warn"] = h.spec().stability.warn;
    stability["critical"] = h.spec().stability.critical;
    std::string level = "none";
    json alerts = json::array();
    for (const AlertEvent& e : h.monitor().ActiveAlerts()) {
      if (e.monitor == "stability") level = std::string(AlertLevelName(e.level));
      alerts.push_back(AlertEventJson(e));
    }
    if (state.stale_alert) alerts.push_back(AlertEventJson(*state.stale_alert));
    stability["level"] = level;
    stability["rows_to_unit"] =
        last && last->rows_to_unit ? json(*last->rows_to_unit) : json(nullptr);
    result["stability"] = std::move(stability);
    result["latest"] = last ? RowPayload(*last) : json(nullptr);
    result["active_alerts"] = std::move(alerts);
    *out = std::move(result);
    return Status::Ok();
  }

  double RowsPerSecond() {
    const auto now = Clock::now();
    rate_samples.emplace_back(now, rows_total);
    while (rate_samples.size() > 2 && now - rate_samples.front().first > std::chrono::seconds(10)) {
      rate_samples.erase(rate_samples.begin());
    }
    const auto& first = rate_samples.front();
    const double dt = std::chrono::duration<double>(now - first.first).count();
    return dt > 0 ? static_cast<double>(rows_total - first.second) / dt : 0.0;
  }

  json HealthJson() {
    json rej = json::object();
    for (int c = 0; c < kErrorCodeCount; ++c) {
      rej[std::string(ErrorCodeName(static_cast<ErrorCode>(c)))] = rejects[c];
    }
    return json{
        {"uptime_s", std::chrono::duration<double>(Clock::now() - started).count()},
        {"rows_per_s", RowsPerSecond()},
        {"rows", rows_total},
        {"observations",
         {{"stored", accepted},
          {"duplicates", duplicates},
          {"revisions", revisions},
          {"late", late}}},
        {"rows_refused", rows_refused},
        {"rejects", rej},
        {"models", ModelListJson(true)},
        {"database_bytes", store->FileBytes()},
        {"pending_acks", static_cast<std::int64_t>(WaitingAcks())},
        {"models_being_added", AddingNames()},
    };
  }

  // Names of the model.add requests still calibrating (oldest first).
  json AddingNames() const {
    json names = json::array();
    for (const WarmingAdd& w : warming) names.push_back(w.name);
    return names;
  }

  // The peer of a request: its ROUTER envelope (routing id and any delimiter frames).
  static std::string PeerOf(const std::vector<zmq::message_t>& frames, std::size_t n) {
    std::string peer;
    for (std::size_t i = 0; i < n; ++i) {
      peer += frames[i].to_string_view();
      peer += '\0';
    }
    return peer;
  }

  void Handle(std::vector<zmq::message_t>& frames) {
    if (frames.empty()) return;
    if (!held.empty()) {
      auto it = held.find(PeerOf(frames, frames.size() - 1));
      if (it != held.end()) {  // behind this peer's model.add
        it->second.push_back(std::move(frames));
        return;
      }
    }
    zmq::message_t body = std::move(frames.back());
    frames.pop_back();
    Request req;
    WireError err;
    DecodeOptions options;
    options.max_bytes = static_cast<std::size_t>(config.max_message_bytes);
    if (!DecodeRequest(std::string_view(static_cast<const char*>(body.data()), body.size()),
                       options, &req, &err)) {
      return Refuse(frames, req.seq, err);
    }
    switch (req.type) {
      case RequestType::kObs:
      case RequestType::kRow:
      case RequestType::kBatch:
        return HandleData(frames, req);
      default:
        return HandleControl(frames, req);
    }
  }

  void Housekeeping() {
    const auto now = Clock::now();
    if (now - last_housekeeping < std::chrono::seconds(1)) return;
    last_housekeeping = now;
    CheckStale();
    for (int c = 0; c < kErrorCodeCount; ++c) {
      if (rejects_unpublished[c] == 0) continue;
      WireError e{static_cast<ErrorCode>(c), reject_last_message[c]};
      events.emplace_back(kRejectTopic, EncodeRejectEvent(e, rejects_unpublished[c]));
      spdlog::warn("refused {} request(s) with {} (last: {})", rejects_unpublished[c],
                   ErrorCodeName(e.code), e.message);
      rejects_unpublished[c] = 0;
    }
    if (!store->in_transaction()) PublishEvents();
  }

  bool GroupDue() const {
    if (!store->in_transaction()) return false;
    if (pending_obs >= config.max_group) return true;
    return Clock::now() - group_started >= std::chrono::milliseconds(config.commit_interval_ms);
  }

  Status Run(const std::atomic<bool>& stop) {
    // The second item: the store's eventfd, readable when a committed group became durable.
    const int sync_fd = store->sync_wake_fd();
    zmq::pollitem_t items[] = {{router.handle(), 0, ZMQ_POLLIN, 0},
                               {nullptr, sync_fd, ZMQ_POLLIN, 0}};
    const int n_items = sync_fd >= 0 ? 2 : 1;
    while (!stop.load()) {
      long timeout_ms = 200;
      if (!store->in_transaction() && (Backlog() > 0 || HasDone())) {
        timeout_ms = config.commit_interval_ms;  // results of running models are due
      } else if (store->in_transaction()) {
        // Rounded up: a poll with timeout 0 in the last millisecond would spin on a core.
        const auto left =
            group_started + std::chrono::milliseconds(config.commit_interval_ms) - Clock::now();
        timeout_ms = std::max<long>(0, std::chrono::ceil<std::chrono::milliseconds>(left).count());
      }
      if (!warming.empty()) timeout_ms = std::min<long>(timeout_ms, 5);  // FinishAdds looks
      try {
        zmq::poll(items, n_items, std::chrono::milliseconds(timeout_ms));
      } catch (const zmq::error_t& e) {
        if (e.num() == EINTR) continue;
        return Status::IoError(std::string("poll: ") + e.what());
      }
      if (n_items == 2 && (items[1].revents & ZMQ_POLLIN)) {
        store->ClearSyncWake();
        ReleaseDurable();
      }
      if (Status synced = store->sync_status(); !synced.ok()) {
        return StopUndurable(synced);
      }
      if (items[0].revents & ZMQ_POLLIN) {
        for (;;) {
          std::vector<zmq::message_t> frames;
          std::optional<std::size_t> got;
          try {
            got =
                zmq::recv_multipart(router, std::back_inserter(frames), zmq::recv_flags::dontwait);
          } catch (const zmq::error_t& e) {
            if (e.num() == EINTR) break;
            return Status::IoError(std::string("recv: ") + e.what());
          }
          if (!got) break;
          Handle(frames);
          if (GroupDue() || stop.load() || Backlog() >= kMaxBacklog) break;
        }
        SubmitQueued();
      }
      if (HasDone()) {
        Status st = Collect();
        if (!st.ok()) FailGroup(st);
      }
      if (!warming.empty()) FinishAdds(/*wait=*/false);
      if (GroupDue()) Flush(/*drain=*/false);
      // A full model queue: wait (briefly) for the models instead of reading more requests.
      if (Backlog() >= kMaxBacklog) {
        model_thread.WaitBelow(kMaxBacklog / 2, std::chrono::milliseconds(1));
      }
      Housekeeping();
    }
    if (!warming.empty()) {
      spdlog::info("rimwatchd stopping: completing {} model.add requests first", warming.size());
      FinishAdds(/*wait=*/true);
    }
    spdlog::info("rimwatchd stopping: committing {} waiting requests", WaitingAcks());
    Flush(/*drain=*/true);
    if (Status synced = SettleDurable(); !synced.ok()) return StopUndurable(synced);
    PublishEvents();
    router.close();
    pub.close();
    spdlog::info("rimwatchd stopped");
    return Status::Ok();
  }
};

Server::Server(std::unique_ptr<Impl> impl) : impl_(std::move(impl)) {}
Server::~Server() = default;

Status Server::Create(const std::string& data_dir, const DaemonConfig& config,
                      std::unique_ptr<Server>* out) {
  std::string why;
  if (!config.IsValid(&why)) return Status::InvalidArgument(why);
  auto impl = std::make_unique<Impl>();
  impl->config = config;
  impl->data_dir = data_dir;
  Status st = impl->Startup();
  if (!st.ok()) return st;
  out->reset(new Server(std::move(impl)));
  return Status::Ok();
}

Status Server::Run(const std::atomic<bool>& stop) { return impl_->Run(stop); }
std::string Server::ingest_endpoint() const { return impl_->ingest_ep; }
std::string Server::events_endpoint() const { return impl_->events_ep; }

}  // namespace rimwatch::daemon
