#!/usr/bin/env bash
# The engine is pure numerics: every #include in engine/ must be a standard header, Eigen,
# Boost.Math or an engine header. A socket, database, file or clock header fails this test.
set -euo pipefail
dir=${1:?usage: engine_layering_test.sh ENGINE_DIR}
bad=$(grep -rhoE '^\s*#\s*include\s*[<"][^>"]+[>"]' "$dir" --include='*.h' --include='*.cc' |
  sed -E 's/^\s*#\s*include\s*[<"]([^>"]+)[>"]/\1/' | sort -u |
  grep -vE '^(Eigen/|boost/math/|rimwatch/engine/)' |
  grep -vE '^(algorithm|array|cmath|complex|cstddef|cstdint|cstdlib|functional|limits|memory|numeric|optional|set|sstream|string|string_view|utility|vector|deque|map|unordered_map|span|tuple|type_traits|stdexcept|cassert|iomanip|random|cstdio|mutex|initializer_list|list|bit)$' || true)
if [ -n "$bad" ]; then
  echo "engine includes outside its layer:"; echo "$bad"; exit 1
fi
# No clocks, files or threads by name either.
if grep -rnE 'std::chrono|fopen|std::ifstream|std::ofstream|std::thread|getenv' "$dir" --include='*.h' --include='*.cc'; then
  echo "engine uses a clock, file, thread or environment"; exit 1
fi
echo "engine layering ok"
