#!/usr/bin/env bash
# rimwatch set-up on Debian 12: installs the Debian packages it needs (apt-get, as root or with
# sudo; packages already present are left alone), then configures and builds into build/.
# Nothing is downloaded at build time.
#
#   ./setup.sh              install + build (RelWithDebInfo, warnings on) into build/
#   ./setup.sh --sanitize   install + build with AddressSanitizer and UBSan into build-asan/
#   ./setup.sh --no-build   install packages only
set -euo pipefail
cd "$(dirname "$0")"
mode=${1:-build}
packages=(
  cmake ninja-build g++ pkg-config
  libeigen3-dev libboost-math-dev
  libgtest-dev libgmock-dev libbenchmark-dev
  libcli11-dev nlohmann-json3-dev libtomlplusplus-dev libspdlog-dev
  libzmq3-dev cppzmq-dev libsqlite3-dev sqlite3 libjemalloc-dev chromium
  python3-numpy python3-scipy python3-statsmodels python3-pandas python3-zmq python3-jsonschema
)
missing=()
for p in "${packages[@]}"; do
  dpkg-query -W -f='${Status}' "$p" 2>/dev/null | grep -q "install ok installed" || missing+=("$p")
done
if [ ${#missing[@]} -gt 0 ]; then
  echo "setup: installing ${missing[*]}" >&2
  SUDO=""
  [ "$(id -u)" -ne 0 ] && SUDO=sudo
  export DEBIAN_FRONTEND=noninteractive
  $SUDO apt-get update -qq
  $SUDO apt-get install -y -qq --no-install-recommends "${missing[@]}" >&2
fi
[ "$mode" = "--no-build" ] && exit 0

jobs=$(nproc 2>/dev/null || echo 2)
case "$mode" in
  build)
    cmake -S . -B build -G Ninja -DCMAKE_BUILD_TYPE=RelWithDebInfo >&2
    cmake --build build -j "$jobs" >&2 ;;
  --sanitize)
    cmake -S . -B build-asan -G Ninja -DCMAKE_BUILD_TYPE=Debug -DRIMWATCH_SANITIZE=ON \
      -DRIMWATCH_BENCH=OFF >&2
    cmake --build build-asan -j "$jobs" >&2 ;;
  *)
    echo "setup: unknown option '$mode' (use --sanitize or --no-build)" >&2; exit 2 ;;
esac
