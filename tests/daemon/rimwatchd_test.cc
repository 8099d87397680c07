// rimwatchd end to end: real ZeroMQ sockets (ipc:// in a temp dir), real SQLite files, the real
// binary. What is checked: the live state and events equal `rimwatch replay` on the same data;
// kill -9 mid-stream loses no acknowledged observation and counts none twice; revisions
// re-estimate to what a replay of the revised data gives; every bad input gets its code and the
// daemon keeps serving; SIGTERM sends every pending ack and exits 0.
#include <gtest/gtest.h>

#include <algorithm>
#include <cmath>
#include <map>
#include <random>
#include <set>

#include <sqlite3.h>
#include "daemon/daemon_harness.h"

#include "rimwatch/daemon/store.h"

namespace {

using nlohmann::json;
using rimwatch::testing::Client;
using rimwatch::testing::Daemon;
using rimwatch::testing::FreshDir;
using rimwatch::testing::Subscriber;

// A two-variable VAR(1) whose first series turns nearly non-stationary at row 500, and whose
// second series starts to lead the first at row 800 (the restriction says it does not).
struct Scenario {
  std::vector<std::array<double, 2>> rows;
};

Scenario MakeScenario(int n, std::uint64_t seed) {
  std::mt19937_64 gen(seed);
  std::normal_distribution<double> e;
  Scenario s;
  double a = 0.0, b = 0.0;
  for (int t = 1; t <= n; ++t) {
    const double rho = t <= 500 ? 0.4 : 0.97;
    const double lead = t <= 800 ? 0.0 : 0.5;
    const double na = rho * a + lead * b + e(gen);
    const double nb = 0.3 * b + e(gen);
    a = na;
    b = nb;
    s.rows.push_back({a, b});
  }
  return s;
}

const char* kSpec =
    "name = \"brk\"\nvariables = [\"a\", \"b\"]\nlags = 1\n[window]\nkind = \"sliding\"\n"
    "rows = 200\n[training]\nrows = 150\n"
    "[[restriction]]\nname = \"b-not-to-a\"\ngranger = { cause = [\"b\"], effect = [\"a\"] }\n";

std::string Csv(const Scenario& s) {
  std::ostringstream csv;
  csv.precision(17);
  csv << "period,a,b\n";
  for (std::size_t t = 0; t < s.rows.size(); ++t) {
    csv << (t + 1) << "," << s.rows[t][0] << "," << s.rows[t][1] << "\n";
  }
  return csv.str();
}

json RowMessage(std::int64_t seq, std::int64_t period, double a, double b) {
  return json{{"type", "row"}, {"seq", seq}, {"period", period}, {"values", {{"a", a}, {"b", b}}}};
}

std::string BinDir() { return rimwatch::testing::EnvOrThrow("RIMWATCH_BIN_DIR"); }

// Replies and events received, for the schema check (rimwatchd_schema_test reads the file).
void Dump(const std::string& schema, const json& doc) {
  const char* dir = std::getenv("RIMWATCH_DAEMON_DUMP_DIR");
  if (!dir || !*dir) return;
  static bool fresh = true;
  std::filesystem::create_directories(dir);
  std::ofstream out(std::filesystem::path(dir) / "documents.jsonl",
                    fresh ? std::ios::trunc : std::ios::app);
  fresh = false;
  out << json{{"schema", schema}, {"doc", doc}}.dump() << "\n";
}

struct ReplayResult {
  std::vector<json> events;
  json summary;
};

ReplayResult Replay(const std::filesystem::path& dir, const std::string& spec,
                    const std::string& csv) {
  std::ofstream(dir / "replay.toml") << spec;
  std::ofstream(dir / "replay.csv") << csv;
  const std::string out = (dir / "replay.out").string();
  const std::string cmd = BinDir() + "/rimwatch replay --spec " + (dir / "replay.toml").string() +
                          " --csv " + (dir / "replay.csv").string() + " --json > " + out;
  EXPECT_EQ(std::system(cmd.c_str()), 0) << cmd;
  ReplayResult r;
  std::istringstream in(rimwatch::testing::SlurpFile(out));
  std::string line;
  while (std::getline(in, line)) {
    json j = json::parse(line);
    if (j.contains("summary")) {
      r.summary = j["summary"];
    } else {
      r.events.push_back(j);
    }
  }
  return r;
}

// The keys of an alert event that live and replay share (replay's row is the CSV line).
json EventKey(const json& e) {
  return json{{"period", e["period"]},         {"monitor", e["monitor"]},
              {"transition", e["transition"]}, {"level", e["level"]},
              {"statistic", e["statistic"]},   {"threshold", e["threshold"]},
              {"message", e["message"]}};
}

void ExpectEstimateEqualsReplay(const json& state, const json& summary) {
  ASSERT_TRUE(state["ok"].get<bool>()) << state.dump();
  const json& est = state["fit"];
  for (const char* key : {"variables", "coefficients", "sigma", "sigma_ml", "eigenvalues",
                          "spectral_radius", "covariance"}) {
    ASSERT_TRUE(summary.contains(key)) << key;
    EXPECT_EQ(est[key], summary[key]) << key;  // the same engine code: bit-identical
  }
}

// Feeds rows [first, last) pipelined with at most `window` requests in flight; returns the seqs
// acknowledged ok.
std::set<std::int64_t> FeedRows(Client& client, const Scenario& s, std::size_t first,
                                std::size_t last, std::size_t window = 256) {
  std::set<std::int64_t> acked;
  std::size_t in_flight = 0;
  std::size_t next = first;
  while (next < last || in_flight > 0) {
    while (next < last && in_flight < window) {
      client.Send(RowMessage(static_cast<std::int64_t>(next + 1),
                             static_cast<std::int64_t>(next + 1), s.rows[next][0],
                             s.rows[next][1]));
      ++next;
      ++in_flight;
    }
    auto reply = client.Receive(60000);
    if (!reply) break;
    --in_flight;
    EXPECT_TRUE((*reply)["ok"].get<bool>()) << reply->dump();
    acked.insert((*reply)["seq"].get<std::int64_t>());
  }
  return acked;
}

std::vector<json> DrainAlerts(Subscriber& sub, int quiet_ms = 500) {
  std::vector<json> out;
  while (auto ev = sub.Receive(quiet_ms)) {
    if (ev->first.rfind("alert.", 0) == 0) out.push_back(ev->second);
  }
  return out;
}

TEST(Rimwatchd, LiveStateAndEventsEqualReplay) {
  const auto dir = FreshDir("live");
  std::filesystem::create_directories(dir / "data" / "models");
  std::ofstream(dir / "data" / "models" / "brk.toml") << kSpec;
  Daemon d(dir);
  d.Start();
  Subscriber sub(d.events(), "alert.");
  Client client(d.ingest());
  ASSERT_TRUE(client.Call({{"type", "health"}})["ok"].get<bool>());
  std::this_thread::sleep_for(std::chrono::milliseconds(300));  // the SUB joins

  const Scenario s = MakeScenario(1400, 7);
  const auto acked = FeedRows(client, s, 0, s.rows.size());
  EXPECT_EQ(acked.size(), s.rows.size());
  // Acks come once observations are committed; the models may still be running the last rows.
  // A control request is answered only after they have (and their events are published).
  ASSERT_TRUE(client.Call({{"type", "health"}})["ok"].get<bool>());
  const std::vector<json> live = DrainAlerts(sub);
  const json state = client.Call({{"type", "state"}, {"model", "brk"}});
  Dump("reply.state", state);
  Dump("reply.health", client.Call({{"type", "health"}}));
  Dump("reply", client.Call({{"type", "model.list"}}));
  for (const json& e : live) Dump("event.alert", e);
  // A few est events of new rows.
  Subscriber est(d.events(), "est.");
  std::this_thread::sleep_for(std::chrono::milliseconds(300));
  const Scenario more = MakeScenario(1420, 7);
  for (std::size_t t = s.rows.size(); t < more.rows.size(); ++t) {
    const json ack = client.Call(
        RowMessage(0, static_cast<std::int64_t>(t + 1), more.rows[t][0], more.rows[t][1]));
    Dump("reply", ack);
  }
  int est_events = 0;
  while (auto ev = est.Receive(500)) {
    EXPECT_EQ(ev->first, "est.brk");
    Dump("event.est", ev->second);
    ++est_events;
  }
  EXPECT_EQ(est_events, 20);

  const ReplayResult replay = Replay(dir, kSpec, Csv(s));
  ExpectEstimateEqualsReplay(state, replay.summary);
  ASSERT_EQ(live.size(), replay.events.size());
  for (std::size_t i = 0; i < live.size(); ++i) {
    EXPECT_EQ(EventKey(live[i]), EventKey(replay.events[i])) << i;
  }
  // The scenario's breaks are seen after they happen and not before.
  bool stability = false, restriction = false;
  for (const json& e : live) {
    if (e["transition"] != "raised") continue;
    const int period = std::stoi(e["period"].get<std::string>());
    if (e["monitor"] == "stability") {
      stability = true;
      EXPECT_GT(period, 500) << e.dump();
    }
    if (e["monitor"].get<std::string>().rfind("restriction.", 0) == 0) {
      restriction = true;
      EXPECT_GT(period, 800) << e.dump();
    }
  }
  EXPECT_TRUE(stability);
  EXPECT_TRUE(restriction);
  EXPECT_EQ(d.Terminate(), 0) << d.log();
}

TEST(Rimwatchd, KillNineMidStreamLosesNoAckedObservation) {
  const auto dir = FreshDir("kill9");
  std::filesystem::create_directories(dir / "data" / "models");
  std::ofstream(dir / "data" / "models" / "brk.toml") << kSpec;
  const Scenario s = MakeScenario(1200, 11);
  std::mt19937_64 gen(std::random_device{}());
  const std::size_t cut = 300 + gen() % 700;

  std::set<std::int64_t> acked;
  {
    Daemon d(dir);
    d.Start();
    Client client(d.ingest());
    acked = FeedRows(client, s, 0, cut);
    // More requests in flight, then kill -9 without waiting for their acks.
    for (std::size_t t = cut; t < std::min(cut + 200, s.rows.size()); ++t) {
      client.Send(RowMessage(static_cast<std::int64_t>(t + 1), static_cast<std::int64_t>(t + 1),
                             s.rows[t][0], s.rows[t][1]));
    }
    std::this_thread::sleep_for(std::chrono::milliseconds(gen() % 20));
    while (auto r = client.Receive(0)) acked.insert((*r)["seq"].get<std::int64_t>());
    d.Kill9();
  }
  {
    rimwatch::daemon::StoreOptions so;
    so.path = (dir / "data" / "rimwatch.sqlite").string();
    so.read_only = true;
    std::unique_ptr<rimwatch::daemon::Store> store;
    ASSERT_TRUE(rimwatch::daemon::Store::Open(so, &store).ok());
    std::string integrity;
    ASSERT_TRUE(store->IntegrityCheck(&integrity).ok());
    EXPECT_EQ(integrity, "ok");
    std::int64_t stored = 0;
    ASSERT_TRUE(store->CountObservations(&stored).ok());
    EXPECT_GE(stored, 2 * static_cast<std::int64_t>(acked.size()));  // nothing acked is lost
  }
  Daemon d(dir);
  d.Start();
  Subscriber sub(d.events(), "alert.");
  Client client(d.ingest());
  // Resend everything: acknowledged rows are idempotent duplicates, the rest is new.
  const auto again = FeedRows(client, s, 0, s.rows.size());
  EXPECT_EQ(again.size(), s.rows.size());
  const json health = client.Call({{"type", "health"}});
  EXPECT_EQ(health["models"][0]["rows"].get<std::int64_t>(),
            static_cast<std::int64_t>(s.rows.size()) - 1);  // lags = 1
  const json state = client.Call({{"type", "state"}, {"model", "brk"}});
  const ReplayResult replay = Replay(dir, kSpec, Csv(s));
  ExpectEstimateEqualsReplay(state, replay.summary);
  EXPECT_EQ(d.Terminate(), 0) << d.log();

  // The alert log holds each of replay's transitions exactly once, in order.
  rimwatch::daemon::StoreOptions so;
  so.path = (dir / "data" / "rimwatch.sqlite").string();
  so.read_only = true;
  std::unique_ptr<rimwatch::daemon::Store> store;
  ASSERT_TRUE(rimwatch::daemon::Store::Open(so, &store).ok());
  std::vector<rimwatch::AlertEvent> log;
  ASSERT_TRUE(store->LoadAlerts(1, &log).ok());
  ASSERT_EQ(log.size(), replay.events.size()) << "cut at row " << cut;
  for (std::size_t i = 0; i < log.size(); ++i) {
    EXPECT_EQ(log[i].monitor, replay.events[i]["monitor"].get<std::string>()) << i;
    EXPECT_EQ(log[i].period, replay.events[i]["period"].get<std::string>()) << i;
    EXPECT_EQ(log[i].raised, replay.events[i]["transition"] == "raised") << i;
  }
  std::string integrity;
  ASSERT_TRUE(store->IntegrityCheck(&integrity).ok());
  EXPECT_EQ(integrity, "ok");
  // Every model row has its tests record once (tests_every = 1), including rows that were
  // acknowledged but not yet run by the model thread when the daemon was killed, and the record
  // cursor covers every input row.
  sqlite3* db = nullptr;
  ASSERT_EQ(sqlite3_open_v2((dir / "data" / "rimwatch.sqlite").c_str(), &db, SQLITE_OPEN_READONLY,
                            nullptr),
            SQLITE_OK);
  auto ints = [&](const char* sql) {
    sqlite3_stmt* q = nullptr;
    std::vector<std::int64_t> out;
    if (sqlite3_prepare_v2(db, sql, -1, &q, nullptr) == SQLITE_OK &&
        sqlite3_step(q) == SQLITE_ROW) {
      for (int i = 0; i < sqlite3_column_count(q); ++i) out.push_back(sqlite3_column_int64(q, i));
    }
    sqlite3_finalize(q);
    return out;
  };
  const auto rows = static_cast<std::int64_t>(s.rows.size()) - 1;
  EXPECT_EQ(ints("SELECT COUNT(*), COUNT(DISTINCT row), MIN(row), MAX(row) FROM tests"),
            (std::vector<std::int64_t>{rows, rows, 1, rows}))
      << "cut at row " << cut;
  EXPECT_EQ(ints("SELECT recorded_inputs FROM models"),
            (std::vector<std::int64_t>{static_cast<std::int64_t>(s.rows.size())}));
  sqlite3_close(db);
}

TEST(Rimwatchd, RevisionsReestimateToAReplayOfTheRevisedData) {
  const auto dir = FreshDir("revise");
  Daemon d(dir);
  d.Start();
  Client client(d.ingest());
  json add = client.Call({{"type", "model.add"}, {"spec", kSpec}});
  ASSERT_TRUE(add["ok"].get<bool>()) << add.dump();
  Scenario s = MakeScenario(700, 23);
  // Releases one series at a time, b before a for each period; b's value for period 640 is
  // held back and arrives last (a late arrival into history).
  std::int64_t seq = 0;
  for (std::size_t t = 0; t < s.rows.size(); ++t) {
    for (int j : {1, 0}) {
      if (t == 639 && j == 1) continue;
      client.Send(json{{"type", "obs"},
                       {"seq", ++seq},
                       {"series", j == 0 ? "a" : "b"},
                       {"period", static_cast<std::int64_t>(t + 1)},
                       {"value", s.rows[t][j]}});
    }
  }
  for (std::int64_t i = 0; i < seq; ++i) {
    auto r = client.Receive();
    ASSERT_TRUE(r && (*r)["ok"].get<bool>()) << (r ? r->dump() : "timeout");
  }
  // Without period 640 the model has one row fewer than the full data gives.
  const json before = client.Call({{"type", "state"}, {"model", "brk"}});
  EXPECT_EQ(before["rows"].get<std::int64_t>(), static_cast<std::int64_t>(s.rows.size()) - 2);
  json late =
      client.Call({{"type", "obs"}, {"series", "b"}, {"period", 640}, {"value", s.rows[639][1]}});
  ASSERT_TRUE(late["ok"].get<bool>()) << late.dump();
  EXPECT_EQ(late["late"], 1) << late.dump();
  // Revise a value inside the final sliding window, and send one duplicate.
  const Scenario original = s;
  s.rows[650][0] += 3.0;
  json rev =
      client.Call({{"type", "obs"}, {"series", "a"}, {"period", 651}, {"value", s.rows[650][0]}});
  ASSERT_TRUE(rev["ok"].get<bool>()) << rev.dump();
  EXPECT_EQ(rev["revisions"], 1);
  json dup =
      client.Call({{"type", "obs"}, {"series", "a"}, {"period", 651}, {"value", s.rows[650][0]}});
  EXPECT_EQ(dup["duplicates"], 1) << dup.dump();
  const json state = client.Call({{"type", "state"}, {"model", "brk"}});
  EXPECT_EQ(state["rows"].get<std::int64_t>(), static_cast<std::int64_t>(s.rows.size()) - 1);
  const ReplayResult replay = Replay(dir, kSpec, Csv(s));
  ExpectEstimateEqualsReplay(state, replay.summary);
  // The revision matters: the unrevised history gives other coefficients.
  const ReplayResult unrevised = Replay(dir, kSpec, Csv(original));
  EXPECT_NE(state["fit"]["coefficients"], unrevised.summary["coefficients"]);
  EXPECT_EQ(d.Terminate(), 0) << d.log();
}

TEST(Rimwatchd, BadInputGetsItsCodeAndTheDaemonKeepsServing) {
  const auto dir = FreshDir("bad");
  Daemon d(dir, "[limits]\nmax_message_bytes = 4096\n");
  d.Start();
  Client client(d.ingest());
  ASSERT_TRUE(client.Call({{"type", "model.add"}, {"spec", kSpec}})["ok"].get<bool>());
  ASSERT_TRUE(client.Call({{"type", "obs"}, {"series", "a"}, {"period", 1}, {"value", 0.5}})["ok"]
                  .get<bool>());
  struct Case {
    std::string bytes;
    std::string code;
  };
  const std::vector<Case> cases = {
      {"{not json", "bad_json"},
      {R"({"type":"obs","seq":5,"series":"a","period":2})", "bad_message"},
      {R"({"type":"obs","seq":5,"series":"a","period":2,"value":"x"})", "bad_message"},
      {R"({"type":"teleport","seq":5})", "unknown_type"},
      {R"({"type":"obs","seq":5,"series":"zz","period":2,"value":1})", "unknown_series"},
      {R"({"type":"state","seq":5,"model":"nope"})", "unknown_model"},
      {R"({"type":"obs","seq":5,"series":"a","period":2,"value":1e999})", "non_finite"},
      {R"({"type":"obs","seq":5,"series":"a","period":"2026-01-31","value":1})", "period_kind"},
      {R"({"type":"obs","seq":5,"series":"a","period":"2026-02-30","value":1})", "bad_period"},
      {R"({"type":"model.add","seq":5,"spec":"lags = 0"})", "bad_spec"},
      {json{{"type", "model.add"}, {"seq", 5}, {"spec", kSpec}}.dump(), "model_exists"},
      {std::string(R"({"type":"health","seq":5,"pad":")") + std::string(5000, 'x') + "\"}",
       "too_large"},
      {R"({"type":"batch","seq":5,"items":[{"series":"a","period":3,"value":1},)"
       R"({"series":"zz","period":3,"value":1}]})",
       "unknown_series"},
  };
  for (const Case& c : cases) {
    client.Send(c.bytes);
    auto reply = client.Receive();
    ASSERT_TRUE(reply) << c.bytes;
    EXPECT_FALSE((*reply)["ok"].get<bool>()) << c.bytes;
    EXPECT_EQ((*reply)["code"], c.code) << c.bytes << " -> " << reply->dump();
    EXPECT_FALSE((*reply)["message"].get<std::string>().empty());
  }
  // The batch was refused whole: period 3 of a was not stored.
  const json health = client.Call({{"type", "health"}});
  Dump("reply.health", health);
  // Refusals are summarised on the reject topic (at most once a second per code).
  Subscriber rejects(d.events(), "reject");
  std::this_thread::sleep_for(std::chrono::milliseconds(300));
  client.Send(std::string("{not json"));
  ASSERT_TRUE(client.Receive().has_value());
  bool seen = false;
  while (auto summary = rejects.Receive(3000)) {
    Dump("event.reject", summary->second);
    EXPECT_GE(summary->second["count"].get<int>(), 1);
    if (summary->second["code"] == "bad_json") {
      seen = true;
      break;
    }
  }
  EXPECT_TRUE(seen);
  ASSERT_TRUE(health["ok"].get<bool>());
  EXPECT_EQ(health["observations"]["stored"], 1) << health.dump();
  EXPECT_EQ(health["rejects"]["unknown_series"], 2) << health.dump();
  EXPECT_EQ(health["rejects"]["bad_message"], 2) << health.dump();
  EXPECT_EQ(d.Terminate(), 0) << d.log();
}

TEST(Rimwatchd, SigtermSendsEveryPendingAckAndExitsZero) {
  const auto dir = FreshDir("term");
  Daemon d(dir, "[store]\ncommit_interval_ms = 2000\n");  // acks wait for the commit
  d.Start();
  Client client(d.ingest());
  ASSERT_TRUE(client.Call({{"type", "model.add"}, {"spec", kSpec}})["ok"].get<bool>());
  const Scenario s = MakeScenario(300, 5);
  for (std::size_t t = 0; t < s.rows.size(); ++t) {
    client.Send(RowMessage(static_cast<std::int64_t>(t + 1), static_cast<std::int64_t>(t + 1),
                           s.rows[t][0], s.rows[t][1]));
  }
  std::this_thread::sleep_for(std::chrono::milliseconds(500));  // received, not yet committed
  EXPECT_FALSE(client.Receive(0).has_value());                  // nothing acked before the commit
  kill(d.pid(), SIGTERM);
  std::size_t acks = 0;
  while (auto r = client.Receive(5000)) {
    EXPECT_TRUE((*r)["ok"].get<bool>());
    ++acks;
  }
  EXPECT_EQ(acks, s.rows.size());
  EXPECT_EQ(d.Terminate(), 0) << d.log();
  // What was acknowledged is there after a restart.
  Daemon again(dir);
  again.Start();
  Client c2(again.ingest());
  const json health = c2.Call({{"type", "health"}});
  EXPECT_EQ(health["models"][0]["rows"].get<std::int64_t>(),
            static_cast<std::int64_t>(s.rows.size()) - 1);
  EXPECT_EQ(again.Terminate(), 0);
}

// Acks wait for the store's sync on its own thread while the poll loop reads on; a control
// request still answers after the acks of everything sent before it, and sees it all run.
TEST(Rimwatchd, ControlRepliesFollowTheAcksOfEarlierData) {
  const auto dir = FreshDir("order");
  Daemon d(dir);
  d.Start();
  Client client(d.ingest());
  ASSERT_TRUE(client.Call({{"type", "model.add"}, {"spec", kSpec}})["ok"].get<bool>());
  const Scenario s = MakeScenario(400, 5);
  for (int round = 0; round < 4; ++round) {
    const std::size_t from = s.rows.size() * static_cast<std::size_t>(round) / 4;
    const std::size_t to = s.rows.size() * static_cast<std::size_t>(round + 1) / 4;
    for (std::size_t t = from; t < to; ++t) {
      client.Send(RowMessage(static_cast<std::int64_t>(t + 1), static_cast<std::int64_t>(t + 1),
                             s.rows[t][0], s.rows[t][1]));
    }
    client.Send(json{{"type", "health"}, {"seq", -1 - round}});
    std::size_t acks = 0;
    for (;;) {
      const auto r = client.Receive(30000);
      ASSERT_TRUE(r.has_value()) << "no reply; " << acks << " acks so far";
      ASSERT_TRUE((*r)["ok"].get<bool>()) << r->dump();
      if ((*r)["seq"].get<std::int64_t>() < 0) {
        EXPECT_EQ((*r)["seq"].get<std::int64_t>(), -1 - round);
        EXPECT_EQ(acks, to - from) << "the health reply overtook data acks";
        EXPECT_EQ((*r)["pending_acks"].get<std::int64_t>(), 0);
        EXPECT_EQ((*r)["models"][0]["rows"].get<std::int64_t>(), static_cast<std::int64_t>(to) - 1);
        break;
      }
      ++acks;
    }
  }
  EXPECT_EQ(d.Terminate(), 0) << d.log();
}

// model.add calibrates a new design on a worker thread: another peer is answered meanwhile, and
// the adding peer's own pipelined requests wait behind its add, in order, and all succeed.
TEST(Rimwatchd, ModelAddDoesNotStallOtherPeers) {
  const auto dir = FreshDir("warmup");
  Daemon d(dir);
  d.Start();
  Client adder(d.ingest());
  Client other(d.ingest());
  ASSERT_TRUE(other.Call({{"type", "health"}})["ok"].get<bool>());  // connected
  const Scenario s = MakeScenario(300, 11);
  adder.Send(json{{"type", "model.add"}, {"seq", -1}, {"spec", kSpec}});
  for (std::size_t t = 0; t < s.rows.size(); ++t) {
    adder.Send(RowMessage(static_cast<std::int64_t>(t + 1), static_cast<std::int64_t>(t + 1),
                          s.rows[t][0], s.rows[t][1]));
  }
  // The first add of this design simulates its scan thresholds (about a second); health
  // requests of the other peer are answered meanwhile. The two peers' connections are not
  // ordered, so the other peer first waits until the daemon has taken the add.
  json health;
  const auto deadline = std::chrono::steady_clock::now() + std::chrono::seconds(60);
  for (;;) {
    health = other.Call({{"type", "health"}});
    ASSERT_TRUE(health["ok"].get<bool>()) << health.dump();
    if (!health["models_being_added"].empty() || !health["models"].empty()) break;
    ASSERT_LT(std::chrono::steady_clock::now(), deadline) << "the add never arrived";
    std::this_thread::sleep_for(std::chrono::milliseconds(2));
  }
  EXPECT_EQ(health["models_being_added"], json::array({"brk"})) << health.dump();
  EXPECT_TRUE(health["models"].empty()) << health.dump();  // answered before the add completed
  const json twice = other.Call({{"type", "model.add"}, {"spec", kSpec}});
  EXPECT_EQ(twice["code"], "model_exists") << twice.dump();
  // Warming ends only once: if it still is after the refusal, it was at the refusal too.
  if (!other.Call({{"type", "health"}})["models_being_added"].empty()) {
    EXPECT_NE(twice["message"].get<std::string>().find("being added"), std::string::npos)
        << twice.dump();
  }
  const auto added = adder.Receive(60000);
  ASSERT_TRUE(added.has_value());
  EXPECT_EQ((*added)["seq"].get<std::int64_t>(), -1) << added->dump();
  EXPECT_TRUE((*added)["ok"].get<bool>()) << added->dump();
  for (std::size_t t = 0; t < s.rows.size(); ++t) {
    const auto r = adder.Receive(30000);
    ASSERT_TRUE(r.has_value()) << "no ack for row " << t + 1;
    EXPECT_EQ((*r)["seq"].get<std::int64_t>(), static_cast<std::int64_t>(t + 1));
    EXPECT_TRUE((*r)["ok"].get<bool>()) << r->dump();
  }
  const json after = other.Call({{"type", "health"}});
  EXPECT_EQ(after["models"][0]["rows"].get<std::int64_t>(),
            static_cast<std::int64_t>(s.rows.size()) - 1);
  EXPECT_EQ(adder.Call({{"type", "model.add"}, {"spec", kSpec}})["code"], "model_exists");
  EXPECT_EQ(d.Terminate(), 0) << d.log();
}

TEST(Rimwatchd, ModelsAreAddedListedAndDropped) {
  const auto dir = FreshDir("models");
  Daemon d(dir);
  d.Start();
  Client client(d.ingest());
  EXPECT_EQ(client.Call({{"type", "model.list"}})["models"].size(), 0u);
  ASSERT_TRUE(client.Call({{"type", "model.add"}, {"spec", kSpec}})["ok"].get<bool>());
  const json list = client.Call({{"type", "model.list"}});
  ASSERT_EQ(list["models"].size(), 1u);
  EXPECT_EQ(list["models"][0]["name"], "brk");
  EXPECT_TRUE(std::filesystem::exists(dir / "data" / "models" / "brk.toml"));
  ASSERT_TRUE(client.Call({{"type", "model.drop"}, {"model", "brk"}})["ok"].get<bool>());
  EXPECT_EQ(client.Call({{"type", "model.list"}})["models"].size(), 0u);
  EXPECT_EQ(client.Call({{"type", "model.drop"}, {"model", "brk"}})["code"], "unknown_model");
  EXPECT_EQ(d.Terminate(), 0);
  // A restart does not bring a dropped model back.
  Daemon again(dir);
  again.Start();
  Client c2(again.ingest());
  EXPECT_EQ(c2.Call({{"type", "model.list"}})["models"].size(), 0u);
  EXPECT_EQ(again.Terminate(), 0);
}

}  // namespace
