#!/usr/bin/env bash
# Run the engine benchmark once and print its figures and the streaming/batch ratios, all taken
# from that one run. Builds nothing: build the target first, e.g.
#   cmake -S . -B build-bench -G Ninja -DCMAKE_BUILD_TYPE=Release
#   cmake --build build-bench -j2 --target rimwatch_engine_bench
#
# Usage: tests/bench/run_engine_bench.sh [path/to/rimwatch_engine_bench] [extra benchmark flags]
# Environment:
#   BENCH_MIN_TIME     seconds of CPU time per benchmark and repetition (default 0.1)
#   BENCH_REPETITIONS  repetitions; the tables use the median (default 5)
#   BENCH_JSON         keep the raw JSON here (default: a temporary file, removed at exit)
#   BENCH_VERBOSE      set: also show Google Benchmark's own console output
# Times are CPU time per row (the machine is shared, so CPU time is steadier than wall time).
set -euo pipefail

here="$(cd "$(dirname "${BASH_SOURCE[0]}")" && pwd)"
bin="${here}/../../build-bench/tests/bench/rimwatch_engine_bench"
if [[ $# -gt 0 && "$1" != --* ]]; then
  bin="$1"
  shift
fi
if [[ ! -x "${bin}" ]]; then
  echo "run_engine_bench.sh: no benchmark binary at ${bin}; build target rimwatch_engine_bench" >&2
  exit 2
fi
min_time="${BENCH_MIN_TIME:-0.1}"
reps="${BENCH_REPETITIONS:-5}"
json="${BENCH_JSON:-}"
if [[ -z "${json}" ]]; then
  json="$(mktemp "${TMPDIR:-/tmp}/rimwatch_engine_bench.XXXXXX.json")"
  trap 'rm -f "${json}"' EXIT
fi
console=/dev/null
[[ -n "${BENCH_VERBOSE:-}" ]] && console=/dev/stdout

# One run: every benchmark and repetition in one process, repetitions interleaved in random order
# so a burst of load from other processes spreads over many benchmarks instead of one.
echo "running ${bin##*/} (${reps} repetitions x ${min_time} s per benchmark; the full set takes about 2 minutes)..."
"${bin}" --benchmark_min_time="${min_time}" --benchmark_repetitions="${reps}" \
  --benchmark_enable_random_interleaving=true --benchmark_report_aggregates_only=true \
  --benchmark_out="${json}" --benchmark_out_format=json "$@" >"${console}"

/usr/bin/python3 - "${json}" "${reps}" <<'PY'
"""Tables and ratios from one Google Benchmark JSON file: medians of the repetitions, CPU time."""
import json
import math
import sys

with open(sys.argv[1]) as f:
    doc = json.load(f)
REPS = sys.argv[2]
TO_US = {"ns": 1e-3, "us": 1.0, "ms": 1e3, "s": 1e6}

median, cv, errors = {}, {}, []
for b in doc["benchmarks"]:
    if b.get("error_occurred"):
        errors.append((b["name"], b.get("error_message", "")))
        continue
    family, *args = b["run_name"].split("/")
    key = (family[3:], tuple(int(a.split(":")[1]) for a in args))  # ("StreamFull", (n, p, W))
    kind = b.get("aggregate_name", "median")  # a single repetition has no aggregates
    if kind == "median":
        b["us"] = b["cpu_time"] * TO_US[b["time_unit"]]
        median[key] = b
    elif kind == "cv":
        cv[key] = b["cpu_time"]

configs = sorted({k for (_, k) in median})
models = sorted({(n, p) for (n, p, _) in configs})
windows = sorted({w for (_, _, w) in configs})


def t(family, key):
    b = median.get((family, key))
    return b["us"] if b else math.nan


def ratio(a, b):
    return a / b if b > 0 else math.nan


def verdict(ok):
    return "PASS" if ok else "FAIL"


def cvs(family, key):
    return 100 * cv.get((family, key), math.nan)


ctx = doc["context"]
print(f"\nrimwatch engine benchmark, {ctx.get('date', '')}: {ctx.get('num_cpus')} CPUs at "
      f"{ctx.get('mhz_per_cpu')} MHz, load average "
      f"{' '.join(f'{x:.2f}' for x in ctx.get('load_avg', []))}; median of {REPS} "
      f"repetition(s), CPU microseconds per row")
if errors:
    print("\nSKIPPED WITH ERRORS (the tables below are incomplete):")
    for name, msg in errors:
        print(f"  {name}: {msg}")

print("\n(a) estimate + all companion eigenvalues per row: streaming vs batch re-fit of the window")
head = (f"{'n':>3} {'p':>2} {'W':>5} | {'stream':>8} {'no eig':>7} {'eig':>7} | "
        f"{'batch':>8} {'no eig':>8} | {'batch/str':>9} {'no-eig b/s':>10} | {'refolds*W':>9}")
print(head)
print("-" * len(head))
for key in configs:
    n, p, w = key
    sf, sn, eo = t("StreamFull", key), t("StreamNoEig", key), t("EigOnly", key)
    bf, bn = t("BatchFull", key), t("BatchNoEig", key)
    refolds = median.get(("StreamFull", key), {}).get("refolds", math.nan) * w
    print(f"{n:>3} {p:>2} {w:>5} | {sf:>8.2f} {sn:>7.2f} {eo:>7.2f} | {bf:>8.1f} {bn:>8.1f} | "
          f"{ratio(bf, sf):>9.1f} {ratio(bn, sn):>10.1f} | {refolds:>9.2f}")
print("  stream: Update + Coefficients + ComputeCompanionSpectrum (no gradient); no eig: without the\n"
      "  spectrum; eig: the spectrum alone. batch: Householder QR of [X Y], R11^-1 R12, the same\n"
      "  spectrum; no eig: without it. refolds*W: refolds per timed row of 'stream' times W (about 1:\n"
      "  the refold is in the figure at its average rate; 0: the timed rows fell between refolds).")

print("\n  flatness in W, target: W=4000 within 20% of W=250 (cv = spread of the repetitions)")
for n, p in models if len(windows) > 1 else []:
    for fam in ("StreamFull", "StreamNoEig"):
        lo, hi = (n, p, windows[0]), (n, p, windows[-1])
        r = ratio(t(fam, hi), t(fam, lo))
        print(f"    n={n:<2} p={p} {fam:<11}: {r:5.2f}  {verdict(abs(r - 1) <= 0.20)}"
              f"   (cv {cvs(fam, lo):.1f}% / {cvs(fam, hi):.1f}%)")
key = (10, 4, 1000)
if ("StreamFull", key) in median:
    r_full = ratio(t("BatchFull", key), t("StreamFull", key))
    print(f"  n=10 p=4 W=1000: batch / stream = {r_full:.1f}x, target >= 50x: {verdict(r_full >= 50)}; "
          f"the eigenvalue step is {100 * ratio(t('EigOnly', key), t('StreamFull', key)):.0f}% of "
          f"the streaming row;\n  without eigenvalues on either side: "
          f"{ratio(t('BatchNoEig', key), t('StreamNoEig', key)):.1f}x; batch (with) / stream "
          f"(without): {ratio(t('BatchFull', key), t('StreamNoEig', key)):.1f}x")

print("\n(b) HC3 Wald test of 'v2 does not Granger-cause v1' (all p lags) per row")
head = (f"{'n':>3} {'p':>2} {'W':>5} | {'stream':>8} {'ns/W-row':>8} | {'batch':>9} "
        f"{'cheap':>8} | {'batch/str':>9} {'cheap/str':>9} | {'>=3x':>4}")
print(head)
print("-" * len(head))
for key in configs:
    n, p, w = key
    sw, bw, bc = t("StreamWald", key), t("BatchWald", key), t("BatchWaldCheap", key)
    print(f"{n:>3} {p:>2} {w:>5} | {sw:>8.1f} {1e3 * sw / w:>8.1f} | {bw:>9.1f} {bc:>8.1f} | "
          f"{ratio(bw, sw):>9.1f} {ratio(bc, sw):>9.2f} | {verdict(ratio(bw, sw) >= 3):>4}")
print("  stream: Update + CovarianceContext::Create(HC3) + Restricted + WaldTest. batch: QR re-fit\n"
      "  + full (I(x)A) meat (I(x)A) + the same WaldTest. cheap: QR re-fit + the restricted meat\n"
      "  only (the engine's cheap path, written from scratch), to show where the gap comes from.")

print("\n  growth with W of the streaming Wald row, log-log slope (1 = linear)")
for n, p in models if len(windows) > 1 else []:
    slopes = []
    for w0, w1 in zip(windows, windows[1:]):
        s = math.log(ratio(t("StreamWald", (n, p, w1)), t("StreamWald", (n, p, w0)))) / math.log(w1 / w0)
        slopes.append(f"W {w0}->{w1}: {s:4.2f}")
    last = float(slopes[-1].split(":")[1])
    print(f"    n={n:<2} p={p}  {', '.join(slopes)}  {verdict(0.8 <= last <= 1.2)}")

gaps = [median[("BatchFull", k)] for k in configs if ("BatchFull", k) in median]
if gaps:
    worst = {g: max(b.get(g, 0.0) for b in gaps) for g in ("coef_gap", "eig_gap", "wald_gap")}
    print("\nstreaming vs batch outputs on one window per configuration, checked before timing "
          "(largest gap):\n  coefficients {coef_gap:.1e}, eigenvalues {eig_gap:.1e}, Wald statistic "
          "{wald_gap:.1e} (relative)".format(**worst))
noisy = sorted(((v, k) for k, v in cv.items() if v > 0.10), reverse=True)
if noisy:
    print("repetitions spread more than 10% (cv) on: " +
          ", ".join(f"{f}/{n},{p},{w} {100 * v:.0f}%" for v, (f, (n, p, w)) in noisy[:8]))
if errors:
    sys.exit(1)
PY
