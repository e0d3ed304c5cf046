#!/usr/bin/env bash
# Builds alphaledger with its tests (warnings as errors), runs the whole suite, then a short seeded
# run of every fuzz target (scripts/fuzz.sh, docs/fuzzing.md; skip it with ALPHALEDGER_SKIP_FUZZ=1).
set -euo pipefail
cd "$(dirname "$0")/.."
scripts/install-deps.sh
cmake -S . -B build -G Ninja -DCMAKE_BUILD_TYPE=Release -DALPHALEDGER_TESTS=ON -DALPHALEDGER_WERROR=ON >/dev/null
cmake --build build -j "$(nproc)"
ctest --test-dir build --output-on-failure -j 2
if [ "${ALPHALEDGER_SKIP_FUZZ:-0}" != 1 ]; then
  scripts/fuzz.sh --runs 5000 --seed 1
fi
