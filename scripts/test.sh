#!/usr/bin/env bash
# Builds alphaledger with its tests (warnings as errors) and runs the whole suite.
set -euo pipefail
cd "$(dirname "$0")/.."
scripts/install-deps.sh
cmake -S . -B build -G Ninja -DCMAKE_BUILD_TYPE=Release -DALPHALEDGER_TESTS=ON -DALPHALEDGER_WERROR=ON >/dev/null
cmake --build build -j "$(nproc)"
ctest --test-dir build --output-on-failure -j 2
