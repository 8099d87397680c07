#!/usr/bin/env bash
# Runs every tests/reference/make_*.py with Debian's /usr/bin/python3 (numpy, scipy, statsmodels;
# the python3 first on PATH may lack them). Each writes its reference files into OUTDIR.
set -euo pipefail
out=${1:?usage: run_generators.sh OUTDIR}
mkdir -p "$out"
here=$(cd "$(dirname "$0")" && pwd)
for script in "$here"/make_*.py; do
  echo "reference: $(basename "$script")"
  /usr/bin/python3 "$script" "$out"
done
