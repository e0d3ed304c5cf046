#!/usr/bin/env bash
# Builds the libFuzzer targets of fuzz/ in build-fuzz (clang-14, AddressSanitizer and
# UndefinedBehaviorSanitizer on every library) and runs each from its seed corpus in fuzz/corpus/.
#
#   scripts/fuzz.sh                 short seeded run of every target (what scripts/test.sh does)
#   scripts/fuzz.sh --seconds 300   each target for 300 s (the longer run of docs/fuzzing.md)
#   scripts/fuzz.sh --build-only
#   scripts/fuzz.sh --runs 20000 --seed 1 fuzz_codec   one target
#
# The seed corpus is only read: inputs a timed run finds go to build-fuzz/corpus/<target>/. An input that
# breaks a target is saved as build-fuzz/artifacts/<target>-crash-... and the script exits 1.
set -euo pipefail
cd "$(dirname "$0")/.."
runs=20000
seed=1
seconds=""
build_only=0
targets=()
while [ $# -gt 0 ]; do
  case "$1" in
    --runs) runs="$2"; shift 2 ;;
    --seed) seed="$2"; shift 2 ;;
    --seconds) seconds="$2"; shift 2 ;;
    --build-only) build_only=1; shift ;;
    -h|--help) sed -n 2,12p "$0"; exit 0 ;;
    -*) echo "fuzz.sh: unknown option $1" >&2; exit 2 ;;
    *) targets+=("$1"); shift ;;
  esac
done
all=(fuzz_log_reader fuzz_fields fuzz_summary fuzz_test_json fuzz_stream_request fuzz_codec)
if [ ${#targets[@]} -eq 0 ]; then targets=("${all[@]}"); fi

cxx="${CXX_FUZZ:-clang++-14}"
if ! command -v "$cxx" >/dev/null; then
  echo "fuzz.sh: $cxx not found; install clang-14 and libclang-rt-14-dev (scripts/install-deps.sh)" >&2
  exit 2
fi
launcher=()
if command -v ccache >/dev/null; then launcher=(-DCMAKE_CXX_COMPILER_LAUNCHER=ccache); fi
flags="-fsanitize=fuzzer-no-link,address,undefined -fno-sanitize-recover=undefined -fno-omit-frame-pointer -g -O1"
# The core's 4-lane vector code passes 32-byte vectors between inline helpers, which clang refuses
# without AVX ("changes the ABI"); the fuzz binaries only run on the machine that builds them.
if grep -qw avx2 /proc/cpuinfo 2>/dev/null; then flags="$flags -mavx2"; fi
cmake -S . -B build-fuzz -G Ninja -DCMAKE_BUILD_TYPE=RelWithDebInfo -DCMAKE_CXX_COMPILER="$cxx" \
  -DCMAKE_CXX_FLAGS="$flags" -DALPHALEDGER_FUZZ=ON -DALPHALEDGER_TESTS=OFF "${launcher[@]}" >/dev/null
cmake --build build-fuzz --target "${targets[@]}" -j "${FUZZ_JOBS:-2}"
if [ "$build_only" -eq 1 ]; then exit 0; fi

mkdir -p build-fuzz/artifacts
export ASAN_OPTIONS="${ASAN_OPTIONS:-detect_leaks=1:abort_on_error=1}"
export UBSAN_OPTIONS="${UBSAN_OPTIONS:-print_stacktrace=1:halt_on_error=1}"
for t in "${targets[@]}"; do
  # A run counted in runs starts from the seeds alone, so the same seed gives the same run; a timed
  # run keeps what it finds in build-fuzz/corpus/ for the next one.
  work="build-fuzz/corpus/$t"
  limit=(-runs="$runs")
  if [ -n "$seconds" ]; then
    limit=(-max_total_time="$seconds")
  else
    work="build-fuzz/corpus-seeded/$t"
    rm -rf "$work"
  fi
  mkdir -p "$work"
  dict=()
  if [ -f "fuzz/dict/$t.dict" ]; then dict=(-dict="fuzz/dict/$t.dict"); fi
  echo "== $t ${limit[*]} -seed=$seed" >&2
  log="build-fuzz/$t.log"
  echo "(log: $log)" >&2
  if ! "build-fuzz/fuzz/$t" "${limit[@]}" -seed="$seed" -max_len=8192 -timeout=20 -rss_limit_mb=2048 \
       -print_final_stats=1 "${dict[@]}" -artifact_prefix="build-fuzz/artifacts/$t-" \
       "$work" "fuzz/corpus/$t" >"$log" 2>&1; then
    tail -n 40 "$log" >&2
    echo "fuzz.sh: $t found a failing input (build-fuzz/artifacts/$t-*)" >&2
    exit 1
  fi
  grep -E "stat::number_of_executed_units|stat::new_units_added" "$log" | tr '\n' ' ' >&2
  echo >&2
done
