// Store write throughput: PutObservation with group commit, as rimwatchd's ingest loop does it
// (Begin, a batch of observations, Commit; an ack is sent only after Commit returns).
//
// One iteration = one transaction of `per_txn` new observations spread over 8 integer series
// (the shape of rows arriving for an 8-variable model), on a real file in $RIMWATCH_BENCH_DIR
// (default /tmp). Wall-clock time (the commit waits for fsync), items/s = observations/s.
// Arguments: synchronous (1 = FULL, 0 = NORMAL), observations per transaction.
//
//   cmake --build build-bench -j2 --target rimwatch_store_bench
//   build-bench/tests/bench/rimwatch_store_bench --benchmark_min_time=2
#include <benchmark/benchmark.h>
#include <unistd.h>

#include <cstdlib>
#include <string>
#include <vector>

#include "rimwatch/daemon/store.h"

namespace {

using rimwatch::Status;
using namespace rimwatch::daemon;

std::string BenchFile() {
  const char* dir = std::getenv("RIMWATCH_BENCH_DIR");
  std::string path = std::string(dir != nullptr && *dir != '\0' ? dir : "/tmp") +
                     "/rimwatch_store_bench." + std::to_string(getpid()) + ".db";
  for (const char* suffix : {"", "-wal", "-shm"}) std::remove((path + suffix).c_str());
  return path;
}

void BM_PutObservation(benchmark::State& state) {
  const bool full = state.range(0) != 0;
  const int per_txn = static_cast<int>(state.range(1));
  constexpr int kSeries = 8;
  const std::string path = BenchFile();
  StoreOptions options;
  options.path = path;
  options.synchronous_full = full;
  std::unique_ptr<Store> store;
  Status st = Store::Open(options, &store);
  if (!st.ok()) {
    state.SkipWithError(st.ToString().c_str());
    return;
  }
  std::vector<SeriesInfo> series(kSeries);
  st = store->Begin();
  for (int i = 0; st.ok() && i < kSeries; ++i) {
    st = store->EnsureSeries("v" + std::to_string(i), PeriodKind::kInteger, &series[i]);
  }
  if (st.ok()) st = store->Commit();
  if (!st.ok()) {
    state.SkipWithError(st.ToString().c_str());
    return;
  }
  const std::string received_at = "2026-03-31T14:30:00.123456Z";
  std::int64_t period = 0;
  double value = 0.0;
  for (auto _ : state) {
    st = store->Begin();
    for (int j = 0; st.ok() && j < per_txn; ++j) {
      if (j % kSeries == 0) ++period;
      PutOutcome outcome;
      value += 0.001;
      st = store->PutObservation(&series[j % kSeries], IntegerPeriod(period), value, "",
                                 received_at, &outcome);
    }
    if (st.ok()) st = store->Commit();
    if (!st.ok()) {
      state.SkipWithError(st.ToString().c_str());
      break;
    }
  }
  state.SetItemsProcessed(state.iterations() * per_txn);
  state.counters["file_MB"] = static_cast<double>(store->FileBytes()) / 1e6;
  store.reset();
  for (const char* suffix : {"", "-wal", "-shm"}) std::remove((path + suffix).c_str());
}
BENCHMARK(BM_PutObservation)
    ->ArgNames({"full", "per_txn"})
    ->Args({1, 2000})
    ->Args({0, 2000})
    ->Args({1, 200})
    ->Args({1, 20000})
    ->UseRealTime()
    ->Unit(benchmark::kMillisecond);

}  // namespace

BENCHMARK_MAIN();
