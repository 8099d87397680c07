// The daemon-facing subcommands of `rimwatch` against a real rimwatchd (ipc:// endpoints in a
// temp dir, tests/daemon/daemon_harness.h), run as a user runs them. What is checked:
//   - model add / feed / state --json: the live estimate equals `rimwatch replay` on the same CSV,
//     bit for bit (coefficients, sigma, eigenvalues, spectral_radius); feeding the file again
//     stores nothing and counts duplicates;
//   - feed survives a kill -9 and restart of the daemon mid-stream (resends what was not
//     acknowledged) and still ends equal to replay;
//   - tail --alerts --json --count 1 sees the stability alert of a break scenario;
//   - health, model list / drop, the readable outputs;
//   - refused input exits 4 naming FILE:LINE and the code; a malformed file exits 2 before
//     anything is sent; no daemon exits 5 without waiting for --timeout;
//   - against a stand-in peer that does not answer: feed resends after --timeout, and gives up
//     with exit 5 after 3 silent rounds.
// The data are invented: a two-variable VAR(1) whose first series turns nearly non-stationary
// at row 500.
#include <gtest/gtest.h>

#include <array>
#include <atomic>
#include <chrono>
#include <random>
#include <regex>

#include "daemon/daemon_harness.h"
#include "run_process.h"

namespace {

using nlohmann::json;
using rimwatch::testing::Daemon;
using rimwatch::testing::FreshDir;
using rimwatch::testing::ProcessResult;
using rimwatch::testing::RunProcess;
using Clock = std::chrono::steady_clock;

const char* kSpec =
    "name = \"brk\"\nvariables = [\"a\", \"b\"]\nlags = 1\n[window]\nkind = \"sliding\"\n"
    "rows = 200\n[training]\nrows = 150\n"
    "[[restriction]]\nname = \"b-not-to-a\"\ngranger = { cause = [\"b\"], effect = [\"a\"] }\n";

std::vector<std::array<double, 2>> BreakScenario(int n, std::uint64_t seed) {
  std::mt19937_64 gen(seed);
  std::normal_distribution<double> e;
  std::vector<std::array<double, 2>> rows;
  double a = 0.0, b = 0.0;
  for (int t = 1; t <= n; ++t) {
    const double rho = t <= 500 ? 0.4 : 0.97;
    const double na = rho * a + e(gen);
    b = 0.3 * b + e(gen);
    a = na;
    rows.push_back({a, b});
  }
  return rows;
}

std::string Csv(const std::vector<std::array<double, 2>>& rows) {
  std::ostringstream csv;
  csv.precision(17);
  csv << "period,a,b\n";
  for (std::size_t t = 0; t < rows.size(); ++t) {
    csv << (t + 1) << "," << rows[t][0] << "," << rows[t][1] << "\n";
  }
  return csv.str();
}

std::string Bin() { return rimwatch::testing::EnvOrThrow("RIMWATCH_BIN_DIR") + "/rimwatch"; }

// A process left running (tail, a slow feed), with its output in files.
class Background {
 public:
  Background(const std::vector<std::string>& argv, const std::filesystem::path& dir,
             const std::string& stem)
      : out_((dir / (stem + ".out")).string()), err_((dir / (stem + ".err")).string()) {
    posix_spawn_file_actions_t fa;
    posix_spawn_file_actions_init(&fa);
    posix_spawn_file_actions_addopen(&fa, 0, "/dev/null", O_RDONLY, 0);
    posix_spawn_file_actions_addopen(&fa, 1, out_.c_str(), O_WRONLY | O_CREAT | O_TRUNC, 0644);
    posix_spawn_file_actions_addopen(&fa, 2, err_.c_str(), O_WRONLY | O_CREAT | O_TRUNC, 0644);
    std::vector<char*> args;
    for (const std::string& a : argv) args.push_back(const_cast<char*>(a.c_str()));
    args.push_back(nullptr);
    if (posix_spawn(&pid_, args[0], &fa, nullptr, args.data(), environ) != 0) {
      throw std::runtime_error("cannot start " + argv[0]);
    }
    posix_spawn_file_actions_destroy(&fa);
  }
  ~Background() {
    if (pid_ > 0) {
      kill(pid_, SIGKILL);
      waitpid(pid_, nullptr, 0);
    }
  }
  // The exit code (-1: killed after the timeout, or died of a signal).
  int Wait(int timeout_s) {
    const auto deadline = Clock::now() + std::chrono::seconds(timeout_s);
    int status = 0;
    while (waitpid(pid_, &status, WNOHANG) != pid_) {
      if (Clock::now() > deadline) {
        kill(pid_, SIGKILL);
        waitpid(pid_, nullptr, 0);
        pid_ = -1;
        return -1;
      }
      std::this_thread::sleep_for(std::chrono::milliseconds(20));
    }
    pid_ = -1;
    return WIFEXITED(status) ? WEXITSTATUS(status) : -1;
  }
  void Signal(int sig) { kill(pid_, sig); }
  std::string out() const { return rimwatch::testing::SlurpFile(out_); }
  std::string err() const { return rimwatch::testing::SlurpFile(err_); }

 private:
  std::string out_, err_;
  pid_t pid_ = -1;
};

class DaemonCli : public ::testing::Test {
 protected:
  void SetUp() override {
    dir_ = FreshDir("cli");
    daemon_ = std::make_unique<Daemon>(dir_);
    daemon_->Start();
    std::ofstream(dir_ / "brk.toml") << kSpec;
  }
  void TearDown() override {
    if (daemon_) {
      EXPECT_EQ(daemon_->Terminate(), 0) << daemon_->log();
    }
    if (!HasFailure()) std::filesystem::remove_all(dir_);  // kept for a look when it failed
  }

  ProcessResult Rw(std::vector<std::string> args) {
    args.insert(args.begin(), Bin());
    const bool events = std::find(args.begin(), args.end(), "tail") != args.end();
    args.push_back(events ? "--events" : "--endpoint");
    args.push_back(events ? daemon_->events() : daemon_->ingest());
    return RunProcess(args, dir_.string());
  }

  std::string Write(const std::string& name, const std::string& text) {
    std::ofstream(dir_ / name) << text;
    return (dir_ / name).string();
  }

  json Replay(const std::string& csv) {
    const ProcessResult r = RunProcess(
        {Bin(), "replay", "--spec", (dir_ / "brk.toml").string(), "--csv", csv, "--json"},
        dir_.string());
    EXPECT_EQ(r.exit_code, 0) << r.err;
    std::istringstream in(r.out);
    std::string line, last;
    while (std::getline(in, line)) last = line;
    return json::parse(last).at("summary");
  }

  void ExpectStateEqualsReplay(const std::string& csv) {
    const ProcessResult state = Rw({"state", "brk", "--json"});
    ASSERT_EQ(state.exit_code, 0) << state.err;
    const json reply = json::parse(state.out);
    ASSERT_TRUE(reply.at("ok").get<bool>()) << state.out;
    const json summary = Replay(csv);
    for (const char* key : {"coefficients", "sigma", "eigenvalues", "spectral_radius"}) {
      ASSERT_TRUE(summary.contains(key)) << key;
      EXPECT_EQ(reply["fit"][key], summary[key]) << key;  // the same engine code: bit-identical
    }
  }

  std::filesystem::path dir_;
  std::unique_ptr<Daemon> daemon_;
};

// "feed: 1400 requests, sent 1400, acked 1400 (stored 2800, duplicates 0, revisions 0), ..."
std::map<std::string, long> SummaryCounts(const std::string& err) {
  const std::regex re(
      R"(feed: (\d+) requests, sent (\d+), acked (\d+) \(stored (\d+), duplicates (\d+), )"
      R"(revisions (\d+)\), refused (\d+).*, unacked (\d+), resent (\d+))");
  std::smatch m;
  std::map<std::string, long> out;
  if (!std::regex_search(err, m, re)) return out;
  const char* names[] = {"requests",  "sent",    "acked",   "stored", "duplicates",
                         "revisions", "refused", "unacked", "resent"};
  for (int i = 0; i < 9; ++i) out[names[i]] = std::stol(m[i + 1].str());
  return out;
}

TEST_F(DaemonCli, FeedThenStateEqualsReplayAndRefeedingIsIdempotent) {
  const ProcessResult add = Rw({"model", "add", (dir_ / "brk.toml").string()});
  ASSERT_EQ(add.exit_code, 0) << add.err;
  EXPECT_NE(add.out.find("model brk added"), std::string::npos) << add.out;

  const auto rows = BreakScenario(1400, 7);
  const std::string csv = Write("history.csv", Csv(rows));
  const ProcessResult feed = Rw({"feed", csv, "--in-flight", "300"});
  ASSERT_EQ(feed.exit_code, 0) << feed.err;
  auto counts = SummaryCounts(feed.err);
  ASSERT_FALSE(counts.empty()) << feed.err;
  EXPECT_EQ(counts["requests"], 1400);
  EXPECT_EQ(counts["acked"], 1400);
  EXPECT_EQ(counts["stored"], 2800);  // two series a row
  EXPECT_EQ(counts["duplicates"], 0);
  EXPECT_EQ(counts["refused"], 0);
  EXPECT_EQ(counts["unacked"], 0);
  EXPECT_TRUE(feed.out.empty()) << feed.out;  // the summary is on stderr only
  ExpectStateEqualsReplay(csv);

  // The same file again, through stdin: every value is an idempotent duplicate.
  const std::string cmd = Bin() + " feed - --endpoint " + daemon_->ingest() + " < " + csv + " 2> " +
                          (dir_ / "refeed.err").string();
  EXPECT_EQ(std::system(cmd.c_str()), 0);
  counts = SummaryCounts(rimwatch::testing::SlurpFile((dir_ / "refeed.err").string()));
  EXPECT_EQ(counts["acked"], 1400);
  EXPECT_EQ(counts["stored"], 0);
  EXPECT_EQ(counts["duplicates"], 2800);
  ExpectStateEqualsReplay(csv);

  // The readable report names every part.
  const ProcessResult text = Rw({"state", "brk"});
  ASSERT_EQ(text.exit_code, 0) << text.err;
  for (const char* part : {"Model brk: 1399 rows, last period 1400", "Coefficients (HC3", "a[t-1]",
                           "Companion eigenvalues", "Spectral radius", "b-not-to-a",
                           "Active alerts", "not trading or policy advice"}) {
    EXPECT_NE(text.out.find(part), std::string::npos) << part << "\n" << text.out;
  }
  EXPECT_EQ(text.out.find("\033["), std::string::npos);  // no colour on a pipe
}

TEST_F(DaemonCli, FeedResendsAcrossADaemonRestart) {
  ASSERT_EQ(Rw({"model", "add", (dir_ / "brk.toml").string()}).exit_code, 0);
  const auto rows = BreakScenario(1200, 19);
  const std::string csv = Write("history.csv", Csv(rows));
  Background feed({Bin(), "feed", csv, "--rate", "600", "--endpoint", daemon_->ingest()}, dir_,
                  "feed");
  std::this_thread::sleep_for(std::chrono::milliseconds(800));
  daemon_->Kill9();
  std::this_thread::sleep_for(std::chrono::milliseconds(300));
  daemon_->Start();
  ASSERT_EQ(feed.Wait(120), 0) << feed.err();
  auto counts = SummaryCounts(feed.err());
  ASSERT_FALSE(counts.empty()) << feed.err();
  EXPECT_EQ(counts["acked"], 1200);
  EXPECT_EQ(counts["unacked"], 0);
  EXPECT_NE(feed.err().find("connection to"), std::string::npos) << feed.err();
  // Nothing lost, nothing counted twice: the model equals a replay of the whole file.
  const json health = json::parse(Rw({"health", "--json"}).out);
  EXPECT_EQ(health["models"][0]["rows"], 1199);
  ExpectStateEqualsReplay(csv);
}

TEST_F(DaemonCli, TailSeesTheAlertOfABreak) {
  ASSERT_EQ(Rw({"model", "add", (dir_ / "brk.toml").string()}).exit_code, 0);
  Background tail({Bin(), "tail", "--alerts", "--json", "--count", "1", "--for", "120", "--events",
                   daemon_->events()},
                  dir_, "tail");
  std::this_thread::sleep_for(std::chrono::milliseconds(1000));  // connected and subscribed
  const auto rows = BreakScenario(1400, 7);
  const ProcessResult feed = Rw({"feed", Write("history.csv", Csv(rows))});
  ASSERT_EQ(feed.exit_code, 0) << feed.err;
  ASSERT_EQ(tail.Wait(120), 0) << tail.err();
  std::istringstream lines(tail.out());
  std::vector<json> events;
  for (std::string line; std::getline(lines, line);) events.push_back(json::parse(line));
  ASSERT_EQ(events.size(), 1u) << tail.out();
  EXPECT_EQ(events[0]["topic"], "alert.brk");
  const json& e = events[0]["event"];
  EXPECT_EQ(e["model"], "brk");
  EXPECT_EQ(e["transition"], "raised");
  EXPECT_GT(std::stoi(e["period"].get<std::string>()), 500) << e.dump();  // after the break
  EXPECT_FALSE(e["message"].get<std::string>().empty());

  // Readable lines: a bounded run prints the est lines of a short feed, then ends by itself.
  Background readable(
      {Bin(), "tail", "--model", "brk", "--for", "3", "--events", daemon_->events()}, dir_,
      "tail2");
  std::this_thread::sleep_for(std::chrono::milliseconds(1000));
  std::ostringstream more;
  more << "period,a,b\n1401,0.25,-0.5\n1402,0.5,0.125\n";
  ASSERT_EQ(Rw({"feed", Write("more.csv", more.str())}).exit_code, 0);
  ASSERT_EQ(readable.Wait(60), 0) << readable.err();
  EXPECT_NE(readable.out().find("  brk  estimate  -  row 1400 (period 1401): rho "),
            std::string::npos)
      << readable.out();
}

TEST_F(DaemonCli, TailStopsOnSigint) {
  Background tail({Bin(), "tail", "--events", daemon_->events()}, dir_, "tail");
  std::this_thread::sleep_for(std::chrono::milliseconds(500));
  tail.Signal(SIGINT);
  EXPECT_EQ(tail.Wait(30), 0) << tail.err();
}

TEST_F(DaemonCli, HealthAndModelListAndDrop) {
  ProcessResult list = Rw({"model", "list"});
  ASSERT_EQ(list.exit_code, 0) << list.err;
  EXPECT_EQ(list.out, "model\tvariables\tlags\trows\tlast_period\tstale\n");
  ASSERT_EQ(Rw({"model", "add", (dir_ / "brk.toml").string()}).exit_code, 0);
  ASSERT_EQ(Rw({"feed", Write("h.csv", Csv(BreakScenario(300, 3)))}).exit_code, 0);

  list = Rw({"model", "list"});
  ASSERT_EQ(list.exit_code, 0) << list.err;
  EXPECT_NE(list.out.find("\nbrk\ta,b\t1\t299\t300\t-\n"), std::string::npos) << list.out;
  const json listed = json::parse(Rw({"model", "list", "--json"}).out);
  ASSERT_EQ(listed["models"].size(), 1u);
  EXPECT_EQ(listed["models"][0]["rows"], 299);

  const ProcessResult health = Rw({"health", "--json"});
  ASSERT_EQ(health.exit_code, 0) << health.err;
  const json h = json::parse(health.out);
  EXPECT_TRUE(h["ok"].get<bool>());
  EXPECT_EQ(h["observations"]["stored"], 600);
  EXPECT_EQ(h["models"][0]["name"], "brk");
  const ProcessResult readable = Rw({"health"});
  ASSERT_EQ(readable.exit_code, 0) << readable.err;
  EXPECT_NE(readable.out.find("rimwatchd up "), std::string::npos) << readable.out;
  EXPECT_NE(readable.out.find("600 stored, 0 duplicates, 0 revisions"), std::string::npos)
      << readable.out;

  // Refusals of control requests: exit 4 with the code on stderr.
  const ProcessResult again = Rw({"model", "add", (dir_ / "brk.toml").string()});
  EXPECT_EQ(again.exit_code, 4);
  EXPECT_NE(again.err.find("model_exists"), std::string::npos) << again.err;
  const ProcessResult drop = Rw({"model", "drop", "brk"});
  EXPECT_EQ(drop.exit_code, 0) << drop.err;
  EXPECT_NE(drop.out.find("model brk dropped"), std::string::npos);
  const ProcessResult drop2 = Rw({"model", "drop", "brk"});
  EXPECT_EQ(drop2.exit_code, 4);
  EXPECT_NE(drop2.err.find("unknown_model"), std::string::npos) << drop2.err;
  const ProcessResult state = Rw({"state", "brk"});
  EXPECT_EQ(state.exit_code, 4);
  EXPECT_TRUE(state.out.empty());
  EXPECT_EQ(Rw({"model", "list"}).out, "model\tvariables\tlags\trows\tlast_period\tstale\n");

  // A spec the reader refuses never leaves the machine: exit 2 with FILE:LINE.
  const std::string bad = Write("bad.toml", "name = \"x\"\nvariables = [\"a\"]\nlags = 0\n");
  const ProcessResult refused = Rw({"model", "add", bad});
  EXPECT_EQ(refused.exit_code, 2);
  EXPECT_NE(refused.err.find(bad + ":3"), std::string::npos) << refused.err;
}

TEST_F(DaemonCli, RefusedInputExitsFourNamingTheLine) {
  ASSERT_EQ(Rw({"model", "add", (dir_ / "brk.toml").string()}).exit_code, 0);
  // Long format: line 4 has an impossible date; line 5 a series no model uses.
  const std::string csv = Write("long.csv",
                                "# releases\nseries,period,value,released_at\n"
                                "a,1,0.5,2026-01-02T08:30:00Z\n"
                                "b,2026-02-30,0.25,\n"
                                "zz,1,1.0,\n"
                                "b,1,-0.75,\n");
  const ProcessResult feed = Rw({"feed", "--series", csv});
  EXPECT_EQ(feed.exit_code, 4) << feed.err;
  EXPECT_NE(feed.err.find(csv + ":4: refused: bad_period: "), std::string::npos) << feed.err;
  EXPECT_NE(feed.err.find(csv + ":5: refused: unknown_series: "), std::string::npos) << feed.err;
  auto counts = SummaryCounts(feed.err);
  ASSERT_FALSE(counts.empty()) << feed.err;
  EXPECT_EQ(counts["acked"], 2);
  EXPECT_EQ(counts["stored"], 2);
  EXPECT_EQ(counts["refused"], 2);
  EXPECT_NE(feed.err.find("refused 2 (bad_period 1, unknown_series 1)"), std::string::npos)
      << feed.err;

  // A wide file with a column no model uses: every row is refused whole.
  const ProcessResult wide = Rw({"feed", Write("wide.csv", "period,a,zz\n2,1,2\n3,1,2\n")});
  EXPECT_EQ(wide.exit_code, 4) << wide.err;
  EXPECT_NE(wide.err.find("refused 2 (unknown_series 2)"), std::string::npos) << wide.err;
  // ... unless --columns leaves it out.
  const ProcessResult only = Rw({"feed", (dir_ / "wide.csv").string(), "--columns", "a"});
  EXPECT_EQ(only.exit_code, 0) << only.err;

  // A malformed file: exit 2, nothing sent.
  const ProcessResult bad = Rw({"feed", Write("bad.csv", "period,a,b\n4,1,x\n")});
  EXPECT_EQ(bad.exit_code, 2);
  EXPECT_NE(bad.err.find("bad.csv:2: column 'b'"), std::string::npos) << bad.err;
  const json h = json::parse(Rw({"health", "--json"}).out);
  EXPECT_EQ(h["observations"]["stored"], 4) << h.dump();  // 2 long + 2 from --columns a
}

// A stand-in for rimwatchd that leaves the first `drop` requests unanswered and acknowledges
// every other one, to drive feed's timeout path (a real daemon answers everything it receives).
class SilentRouter {
 public:
  SilentRouter(const std::string& endpoint, int drop) : drop_(drop) {
    router_.set(zmq::sockopt::linger, 0);
    router_.bind(endpoint);
    thread_ = std::thread([this] { Serve(); });
  }
  ~SilentRouter() {
    stop_ = true;
    thread_.join();
  }
  int received() const { return received_; }

 private:
  void Serve() {
    while (!stop_) {
      zmq::pollitem_t items[] = {{router_.handle(), 0, ZMQ_POLLIN, 0}};
      zmq::poll(items, 1, std::chrono::milliseconds(20));
      if (!(items[0].revents & ZMQ_POLLIN)) continue;
      std::vector<zmq::message_t> frames;
      (void)zmq::recv_multipart(router_, std::back_inserter(frames));
      ++received_;
      if (drop_ > 0) {
        --drop_;
        continue;
      }
      const json request = json::parse(frames.back().to_string());
      const json reply = {{"seq", request["seq"]},
                          {"ok", true},
                          {"stored", 1},
                          {"duplicates", 0},
                          {"revisions", 0}};
      router_.send(frames.front(), zmq::send_flags::sndmore);
      router_.send(zmq::buffer(reply.dump()), zmq::send_flags::none);
    }
  }

  zmq::context_t context_{1};
  zmq::socket_t router_{context_, zmq::socket_type::router};
  std::atomic<int> drop_;
  std::atomic<int> received_{0};
  std::atomic<bool> stop_{false};
  std::thread thread_;
};

TEST(DaemonCliSilentPeer, FeedResendsWhatWasNotAnsweredWithinTheTimeout) {
  const auto dir = FreshDir("silent");
  const std::string ipc = "ipc://" + (dir / "router.sock").string();
  std::ostringstream csv;
  csv << "period,a\n";
  for (int t = 1; t <= 20; ++t) csv << t << "," << 0.25 * t << "\n";
  std::ofstream(dir / "x.csv") << csv.str();
  SilentRouter router(ipc, 3);
  const ProcessResult r =
      RunProcess({Bin(), "feed", (dir / "x.csv").string(), "--endpoint", ipc, "--timeout", "0.5"},
                 dir.string());
  EXPECT_EQ(r.exit_code, 0) << r.err;
  EXPECT_NE(r.err.find("no reply within 0.5 s; reconnecting to resend 3 requests"),
            std::string::npos)
      << r.err;
  auto counts = SummaryCounts(r.err);
  ASSERT_FALSE(counts.empty()) << r.err;
  EXPECT_EQ(counts["sent"], 20);
  EXPECT_EQ(counts["resent"], 3);
  EXPECT_EQ(counts["acked"], 20);
  EXPECT_EQ(router.received(), 23);
}

TEST(DaemonCliSilentPeer, FeedGivesUpAndExitsFiveWhenNothingIsAnswered) {
  const auto dir = FreshDir("mute");
  const std::string ipc = "ipc://" + (dir / "router.sock").string();
  std::ofstream(dir / "x.csv") << "period,a\n1,0.5\n2,0.25\n";
  SilentRouter router(ipc, 1000000);
  const ProcessResult r =
      RunProcess({Bin(), "feed", (dir / "x.csv").string(), "--endpoint", ipc, "--timeout", "0.2"},
                 dir.string());
  EXPECT_EQ(r.exit_code, 5) << r.err;
  EXPECT_NE(r.err.find("gave up"), std::string::npos) << r.err;
  auto counts = SummaryCounts(r.err);
  ASSERT_FALSE(counts.empty()) << r.err;
  EXPECT_EQ(counts["acked"], 0);
  EXPECT_EQ(counts["unacked"], 2);
  // Every round resends both: the first send and kMaxSilentRounds (3) resends.
  EXPECT_EQ(counts["resent"], 6);
  EXPECT_EQ(router.received(), 8);
}

TEST(DaemonCliNoDaemon, UnreachableExitsFiveWithoutWaitingForTheTimeout) {
  const auto dir = FreshDir("nodaemon");
  const std::string ipc = "ipc://" + (dir / "nobody.sock").string();
  std::ofstream(dir / "x.csv") << "period,a\n1,0.5\n";
  std::ofstream(dir / "m.toml") << kSpec;
  const std::vector<std::vector<std::string>> commands = {
      {"health", "--endpoint", ipc},
      {"state", "brk", "--endpoint", ipc},
      {"model", "list", "--endpoint", ipc},
      {"model", "add", (dir / "m.toml").string(), "--endpoint", ipc},
      {"feed", (dir / "x.csv").string(), "--endpoint", ipc},
      {"tail", "--events", ipc},
      {"health", "--endpoint", "tcp://127.0.0.1:1"},  // a loopback port nothing listens on
  };
  for (std::vector<std::string> args : commands) {
    args.insert(args.begin(), Bin());
    args.push_back("--timeout");
    args.push_back("60");
    const auto t0 = Clock::now();
    const ProcessResult r = RunProcess(args, dir.string());
    const double seconds = std::chrono::duration<double>(Clock::now() - t0).count();
    EXPECT_EQ(r.exit_code, 5) << args[1] << ": " << r.err;
    EXPECT_NE(r.err.find("nothing is listening"), std::string::npos) << r.err;
    // Fails on the refused connection, far from the 60 s timeout.
    EXPECT_LT(seconds, 20.0) << args[1];
  }
}

}  // namespace
