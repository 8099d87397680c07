// Per-row cost of what rimwatchd's model thread does for one complete row of one model, on the
// daemon benchmark's model (tests/bench/daemon_bench.cc: n = 3, p = 2, sliding window of 500
// rows, HC3 every 100 rows, training 200 rows, one monitored Granger restriction, the default
// constancy monitors and diagnostics):
//   MonitorUpdate   Monitor::Update alone (every monitor, the alert policy)
//   RowWithRecords  Monitor::Update + PrepareRecords (the tests record's payload text; a
//                   snapshot every 100 rows) + the est event body, as Server::RunInput does
// One iteration = one row. The data: a stable (3,2) VAR simulated with DeterministicRandom and a
// fixed seed (invented series a, b, c), 200,000 rows; the cursor wraps onto a fresh Monitor, so
// every timed row is a row of a warm, armed model except the first training rows of each pass
// (the warm-up below runs a whole pass before timing starts).
//   build/tests/bench/rimwatch_row_bench --benchmark_repetitions=5
#include <benchmark/benchmark.h>

#include <Eigen/Dense>
#include <cstdio>
#include <memory>
#include <string>
#include <vector>

#include "rimwatch/daemon/model_spec_toml.h"
#include "rimwatch/daemon/record.h"
#include "rimwatch/engine/monitor.h"
#include "rimwatch/engine/random.h"

namespace rimwatch::daemon {
namespace {

constexpr int kRows = 200000;

const char* kSpec = R"(name = "m0"
variables = ["a", "b", "c"]
lags = 2
[window]
kind = "sliding"
rows = 500
[covariance]
kind = "HC3"
every = 100
[training]
rows = 200
[[restriction]]
name = "b-not-to-a"
granger = { cause = ["b"], effect = ["a"] }
)";

const std::vector<Eigen::Vector3d>& Data() {
  static const std::vector<Eigen::Vector3d> data = [] {
    DeterministicRandom rng(20261203);
    std::vector<Eigen::Vector3d> out;
    Eigen::Vector3d y1 = Eigen::Vector3d::Zero(), y2 = Eigen::Vector3d::Zero();
    for (int t = 0; t < kRows; ++t) {
      Eigen::Vector3d y;
      y[0] = 0.3 * y1[0] + 0.08 * y2[0] + rng.Normal();
      y[1] = 0.2 * y1[1] + 0.1 * y1[0] + rng.Normal();
      y[2] = 0.25 * y1[2] - 0.1 * y2[2] + rng.Normal();
      y2 = y1;
      y1 = y;
      out.push_back(y);
    }
    return out;
  }();
  return data;
}

std::unique_ptr<Monitor> NewMonitor() {
  ModelSpec spec;
  std::unique_ptr<Monitor> m;
  if (!ParseModelSpecToml(kSpec, "row_bench", &spec).ok() || !Monitor::Create(spec, &m).ok()) {
    std::fprintf(stderr, "row_bench: the model spec was refused\n");
    std::abort();
  }
  return m;
}

// Runs rows through a Monitor, wrapping onto a fresh one at the end of the data.
class Feed {
 public:
  Feed() : monitor_(NewMonitor()) {
    for (int i = 0; i < 2000; ++i) Next();  // warm: trained and armed
  }
  RowReport Next() {
    if (cursor_ == kRows) {
      monitor_ = NewMonitor();
      cursor_ = 0;
    }
    const Eigen::Vector3d& y = Data()[cursor_];
    ++cursor_;
    return monitor_->Update(std::to_string(cursor_), y);
  }
  const Monitor& monitor() const { return *monitor_; }

 private:
  std::unique_ptr<Monitor> monitor_;
  int cursor_ = 0;
};

void BM_MonitorUpdate(benchmark::State& state) {
  Feed feed;
  for (auto _ : state) {
    RowReport r = feed.Next();
    benchmark::DoNotOptimize(r.spectral_radius);
  }
  state.SetItemsProcessed(state.iterations());
}

void BM_RowWithRecords(benchmark::State& state) {
  Feed feed;
  const RecordOptions options;  // rimwatchd's defaults: tests every row, snapshot every 100
  const std::string model = "m0";
  for (auto _ : state) {
    RowReport r = feed.Next();
    RowRecords records;
    if (!PrepareRecords(1, feed.monitor(), r, options, &records).ok()) {
      state.SkipWithError("PrepareRecords failed");
      break;
    }
    std::string body;
    if (records.test) body = EventBody(records.test->payload_json, model);
    benchmark::DoNotOptimize(body.data());
  }
  state.SetItemsProcessed(state.iterations());
}

BENCHMARK(BM_MonitorUpdate)->Unit(benchmark::kMicrosecond);
BENCHMARK(BM_RowWithRecords)->Unit(benchmark::kMicrosecond);

}  // namespace
}  // namespace rimwatch::daemon

BENCHMARK_MAIN();
