#!/usr/bin/env bash
# Builds the tests under sanitizers and runs them:
#   build-asan  AddressSanitizer + UndefinedBehaviorSanitizer, runs the `fast` ctest label
#   build-tsan  ThreadSanitizer, runs the store and service tests
# Usage: scripts/sanitize.sh [asan|tsan|all]   (default: all)
# Environment: CXX (default g++; clang++-14 cannot compile tests/core/test_offline.cpp, which
# captures a structured binding in a lambda), JOBS (default 2).
# A finding fails the run: every sanitizer is told to halt on the first error.
# Results and timings of the last recorded run are in docs/testing.md.
set -euo pipefail
cd "$(dirname "$0")/.."

which_part="${1:-all}"
case "$which_part" in
  asan | tsan | all) ;;
  *)
    echo "sanitize.sh: unknown part '$which_part'; accepted: asan, tsan, all" >&2
    exit 2
    ;;
esac

if [[ -z "${CXX:-}" ]]; then
  CXX=g++
fi
jobs="${JOBS:-2}"
launcher=()
if command -v ccache >/dev/null; then launcher=(-DCMAKE_CXX_COMPILER_LAUNCHER=ccache); fi

# Configure and build one sanitizer tree at -O1 with line tables only (-g1): fast enough to build
# on two busy cores, optimised enough to run the tests in minutes, and stack traces still name
# file:line; asserts stay on (no NDEBUG). Warnings are not errors here: the sanitizer instrumentation changes what some
# warnings see, and the normal build already enforces them.
# Timeouts are scaled by 10: instrumented tests run several times slower.
# Usage: build_tree DIR FLAGS TARGET...  (only the targets the run needs)
build_tree() {
  local dir="$1" flags="$2"
  shift 2
  cmake -S . -B "$dir" -G Ninja -DCMAKE_BUILD_TYPE=RelWithDebInfo -DCMAKE_CXX_FLAGS_RELWITHDEBINFO="-O1 -g1" \
    -DALPHALEDGER_TESTS=ON \
    -DALPHALEDGER_WERROR=OFF -DCMAKE_CXX_COMPILER="$CXX" "${launcher[@]}" \
    -DALPHALEDGER_TEST_TIMEOUT_SCALE=10 \
    -DCMAKE_CXX_FLAGS="$flags -fno-omit-frame-pointer" \
    -DCMAKE_EXE_LINKER_FLAGS="$flags" >/dev/null
  cmake --build "$dir" -j "$jobs" --target "$@"
}

run_asan() {
  local start=$SECONDS
  build_tree build-asan "-fsanitize=address,undefined -fno-sanitize-recover=undefined" \
    alphaledger test_core test_harness test_store test_service header_examples
  ASAN_OPTIONS="detect_leaks=1:abort_on_error=0:halt_on_error=1:strict_string_checks=1:detect_stack_use_after_return=1" \
    UBSAN_OPTIONS="print_stacktrace=1:halt_on_error=1" \
    ctest --test-dir build-asan -L fast -j "$jobs" --output-on-failure
  echo "sanitize.sh: asan+ubsan passed in $((SECONDS - start)) s"
}

run_tsan() {
  local start=$SECONDS
  build_tree build-tsan "-fsanitize=thread" alphaledger test_store test_service
  TSAN_OPTIONS="halt_on_error=1:second_deadlock_stack=1:suppressions=$PWD/tests/tsan.supp" \
    ctest --test-dir build-tsan -L "store|service" -j "$jobs" --output-on-failure
  echo "sanitize.sh: tsan passed in $((SECONDS - start)) s"
}

case "$which_part" in
  asan) run_asan ;;
  tsan) run_tsan ;;
  all)
    run_asan
    run_tsan
    ;;
esac
