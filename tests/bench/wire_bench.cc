// Per-message cost of decoding a data request on rimwatchd's poll thread: the daemon benchmark's
// row message (three series) and a batch of 20 such rows, through DecodeRequest with the
// single-pass plain-data reader (the daemon's default) and with the general decoder only.
//   build/tests/bench/rimwatch_wire_bench --benchmark_repetitions=5
#include <benchmark/benchmark.h>

#include <cstdio>
#include <cstdlib>
#include <string>

#include "rimwatch/daemon/wire.h"

namespace rimwatch::daemon {
namespace {

std::string RowText(long period) {
  char buf[256];
  std::snprintf(buf, sizeof buf,
                "{\"type\":\"row\",\"seq\":%ld,\"period\":%ld,\"values\":{\"m0_a\":%.17g,"
                "\"m0_b\":%.17g,\"m0_c\":%.17g}}",
                period, period, 0.1 * static_cast<double>(period) - 3.0, -1.0 / 3.0, 2.5e-3);
  return buf;
}

std::string BatchText() {
  std::string out = R"({"type":"batch","seq":7,"items":[)";
  for (long p = 1; p <= 20; ++p) {
    const std::string row = RowText(p);
    // The row item: the row message without its type and seq.
    out += (p > 1 ? "," : "") + std::string("{") + row.substr(row.find("\"period\""));
  }
  return out + "]}";
}

void Run(benchmark::State& state, const std::string& text, bool fast) {
  DecodeOptions options;
  options.fast_path = fast;
  Request request;
  WireError error;
  for (auto _ : state) {
    if (!DecodeRequest(text, options, &request, &error)) std::abort();
    benchmark::DoNotOptimize(request.observations.data());
  }
}

void BM_DecodeRow(benchmark::State& state) { Run(state, RowText(12345), state.range(0) != 0); }
void BM_DecodeBatch20(benchmark::State& state) { Run(state, BatchText(), state.range(0) != 0); }

BENCHMARK(BM_DecodeRow)->ArgName("fast")->Arg(1)->Arg(0)->Unit(benchmark::kMicrosecond);
BENCHMARK(BM_DecodeBatch20)->ArgName("fast")->Arg(1)->Arg(0)->Unit(benchmark::kMicrosecond);

}  // namespace
}  // namespace rimwatch::daemon

BENCHMARK_MAIN();
