#!/usr/bin/env bash
# Detection delays of the monitors beside their oracle CUSUMs, in one table, from the delay parts
# of the calibration tests run with full replications (RIMWATCH_CALIBRATION_SCALE is ignored):
#   (a) dynamics break, spectral radius 0.6 -> 0.95   tests/calibration/dynamics_break_calibration_test.cc
#   (b) a Granger link switches on                    tests/calibration/restriction_calibration_test.cc
#   (c) the error variance doubles                    tests/calibration/volatility_calibration_test.cc
# Each test prints one "delay_summary.<change>/<rule>" line per rule (calibration_support.h,
# ReportDelaySummary); this script runs the three gtest cases and tabulates those lines. Builds
# nothing: build the targets first, e.g.
#   cmake --build build -j2 --target dynamics_break_calibration_test restriction_calibration_test \
#     volatility_calibration_test
#
# Usage: tests/bench/run_delay_summary.sh [BUILD_DIR]   (default: build/ of this checkout)
# Takes about 2 to 3 minutes on 2 cores (two of the cases run at a time). Exit status 1 when a
# case fails its assertions or prints no summary line (the table is still printed).
set -euo pipefail

here="$(cd "$(dirname "${BASH_SOURCE[0]}")" && pwd)"
build="${1:-${here}/../../build}"
dir="${build}/tests/calibration"
cases=(
  "dynamics_break_calibration_test DynamicsBreakCalibration.DetectionDelayBesideOracle"
  "restriction_calibration_test RestrictionCalibration.FalseAlarmsGaussianAndDetectionDelay"
  "volatility_calibration_test VolatilityCalibration.DelayAfterVarianceDoubling"
)
for c in "${cases[@]}"; do
  bin="${dir}/${c%% *}"
  if [[ ! -x "${bin}" ]]; then
    echo "run_delay_summary.sh: no test binary at ${bin}; build it first" >&2
    exit 2
  fi
done

logs="$(mktemp -d "${TMPDIR:-/tmp}/rimwatch_delay_summary.XXXXXX")"
trap 'rm -rf "${logs}"' EXIT
echo "running ${#cases[@]} calibration cases with full replications (two at a time)..."
start=${SECONDS}
run_case() {  # runs case $1 and leaves its log and exit status in ${logs}
  local name filter rc=0
  read -r name filter <<<"${cases[$1]}"
  env -u RIMWATCH_CALIBRATION_SCALE "${dir}/${name}" --gtest_filter="${filter}" \
    >"${logs}/$1.log" 2>&1 || rc=$?
  echo "${rc}" >"${logs}/$1.rc"
}
for i in "${!cases[@]}"; do
  run_case "${i}" &
  if (($(jobs -rp | wc -l) >= 2)); then wait -n || true; fi
done
wait
status=0
for i in "${!cases[@]}"; do
  [[ "$(cat "${logs}/${i}.rc")" == 0 ]] || status=1
done

# "[montecarlo] delay_summary.<change>/<rule> = median M, p90 P, oracle median O, ratio R (N runs,
#  E alarmed before the change, U undetected)"
printf '\n%-20s %-37s %7s %7s %7s %6s  %s\n' "change" "rule" "median" "p90" "oracle" "ratio" \
  "runs, early, undetected"
printf '%.0s-' {1..130}
echo
found=0
for i in "${!cases[@]}"; do
  while IFS= read -r line; do
    found=$((found + 1))
    key="${line#*delay_summary.}"
    key="${key%% = *}"
    value="${line#* = }"
    brk="${key%%/*}"
    rule="${key#*/}"
    read -r med p90 oracle ratio rest < <(sed -E \
      's/^median ([^,]+), p90 ([^,]+), oracle median ([^,]+), ratio ([^ ]+) \((.*)\)$/\1 \2 \3 \4 \5/' \
      <<<"${value}")
    printf '%-20s %-37s %7s %7s %7s %6s  %s\n' "${brk}" "${rule}" "${med}" "${p90}" "${oracle}" \
      "${ratio}" "${rest}"
  done < <(grep -F '[montecarlo] delay_summary.' "${logs}/${i}.log" || true)
  if ! grep -qF '[montecarlo] delay_summary.' "${logs}/${i}.log"; then
    echo "run_delay_summary.sh: no summary line from ${cases[$i]}; its log:" >&2
    tail -n 30 "${logs}/${i}.log" >&2
    status=1
  fi
done
echo
echo "delays in rows from the change row to the first alarm (median and 90th percentile over the"
echo "runs; inf: more than half, or a tenth, of the runs not detected within the horizon); oracle:"
echo "median delay of Page's CUSUM on the true likelihood ratio, held to the same false-alarm"
echo "chance over the horizon; ratio = median / oracle median. The change row counts as 0 in (a)"
echo "and (b), as 1 in (c)."
echo "${found} rules from ${#cases[@]} cases in $((SECONDS - start)) s."
for i in "${!cases[@]}"; do
  if grep -q '^\[  FAILED  \]' "${logs}/${i}.log"; then
    echo "FAILED: ${cases[$i]}" >&2
    grep -E '^\[  FAILED  \]|Failure' -A3 "${logs}/${i}.log" | head -n 20 >&2
  fi
done
exit "${status}"
