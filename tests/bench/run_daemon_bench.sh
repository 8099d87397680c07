#!/usr/bin/env bash
# rimwatchd throughput and latency with durable acks over TCP loopback, beside a bare baseline
# (the same sockets, decoder and SQLite inserts, no engine) measured in the same run.
# Builds nothing: run ./setup.sh first (Release figures: configure build-release as below).
#   tests/bench/run_daemon_bench.sh [BUILD_DIR] [daemon_bench options, e.g. --rows 60000]
set -euo pipefail
cd "$(dirname "$0")/../.."
build=${1:-build}
shift || true
"$build/tests/bench/rimwatch_daemon_bench" --bin-dir "$build/bin" "$@"
