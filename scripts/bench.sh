#!/usr/bin/env bash
# Builds the benchmarks (build-bench/, Release) and runs every benchmark beside what a user would
# use instead, on the same data in the same run, printing the ratios:
#   - exact and fast evaluation against the NumPy loop (bench/exact_numpy.py);
#   - the service with 1 to 64 HTTP clients (bench/load_http.cpp): failed requests, stalls, rates;
#   - durable decisions (ledger_bench) against SQLite, one row per decision, WAL, synchronous=FULL,
#     in groups of 1, 256 and 4,096 (bench/sqlite_ledger.py); PostgreSQL only if a server answers
#     on 127.0.0.1 (pg_isready), else a note;
#   - reading a log: `replay` against `awk` on the same CSV file;
#   - the fixed CPU cost of one CLI process (--version, next, status, streams, history), and the
#     same beside /bin/true (bench/cli_start.sh);
#   - peak memory of `decide --file`, `history` and `verify` on a long stream.
# docs/benchmarks.md records a run and how to read it.
#
# Usage: scripts/bench.sh [--quick]
#   --quick: a few minutes: no 10^6-test exact runs, 10^5 rows instead of 10^6 for logs and
#            memory, shorter ledger measurements.
# Needs Debian's python3-numpy for /usr/bin/python3 (installed with apt-get when run as root),
# perf (for the CLI cost; a timed loop otherwise) and GNU time (/usr/bin/time).
set -euo pipefail
cd "$(dirname "$0")/.."

quick=0
[[ "${1:-}" == "--quick" ]] && quick=1
python=/usr/bin/python3  # Debian's: another python3 may come first on PATH

if ! "$python" -c 'import numpy' 2>/dev/null; then
  if [[ $(id -u) -eq 0 ]]; then
    DEBIAN_FRONTEND=noninteractive apt-get install -y -qq python3-numpy >/dev/null
  else
    echo "bench.sh: $python has no numpy; install Debian's python3-numpy (apt-get install python3-numpy)" >&2
    exit 2
  fi
fi

# ALPHALEDGER_BENCH_BUILD=DIR uses an existing Release build folder configured with
# -DALPHALEDGER_BENCH=ON instead of configuring build-bench/.
bdir=${ALPHALEDGER_BENCH_BUILD:-build-bench}
if [[ -z "${ALPHALEDGER_BENCH_BUILD:-}" ]]; then
  cmake -S . -B build-bench -G Ninja -DCMAKE_BUILD_TYPE=Release -DALPHALEDGER_BENCH=ON -DALPHALEDGER_TESTS=OFF >/dev/null
fi
cmake --build "$bdir" -j2 --target evaluation_bench rules_bench ledger_bench alphaledger >/dev/null
out="$bdir"/bench-run
mkdir -p "$out"

echo "== machine: $(nproc) cores, $(grep -m1 'model name' /proc/cpuinfo | cut -d: -f2 | xargs)"
echo "== load at start: $(cut -d' ' -f1-3 /proc/loadavg) (other work on the machine inflates wall times)"
echo "== numpy $("$python" -c 'import numpy; print(numpy.__version__)')"

field() { grep -oE "(^| )$2=[^ ]+" <<<"$1" | cut -d= -f2; }

# ratio LABEL NUMPY_LINE OURS_LINE: NumPy's seconds over ours, CPU and wall.
ratio() {
  local n_cpu n_wall o_cpu o_wall
  n_cpu=$(field "$2" cpu_seconds)
  n_wall=$(field "$2" wall_seconds)
  o_cpu=$(field "$3" cpu_seconds)
  o_wall=$(field "$3" wall_seconds)
  awk -v l="$1" -v nc="$n_cpu" -v nw="$n_wall" -v oc="$o_cpu" -v ow="$o_wall" -v nrj="$(field "$2" rejections)" \
    -v orj="$(field "$3" rejections)" 'BEGIN {
      printf "ratio %-28s numpy %8.3f s cpu / alphaledger %8.4f s cpu = %7.1fx   (wall: %.3f / %.4f = %.1fx)   rejections %s vs %s\n",
        l, nc, oc, nc / oc, nw, ow, nw / ow, nrj, orj }'
}

exact_case() {  # exact_case N REPEAT RULES NUMPY_RULES
  local n=$1 repeat=$2 rules=$3 numpy_rules=$4
  "$bdir"/bench/evaluation_bench --tests "$n" --modes exact --rules "$rules" --repeat "$repeat" \
    --write-stream "$out/stream-$n.bin" --write-levels "$out/levels-$n.bin" | tee "$out/ours-$n.txt"
  "$python" bench/exact_numpy.py "$out/stream-$n.bin" --rules "$numpy_rules" --levels "$out/levels-$n.bin" |
    tee "$out/numpy-$n.txt"
  for rule in ${numpy_rules//,/ }; do
    ratio "$rule exact, $n tests" "$(grep "rule=$rule " "$out/numpy-$n.txt")" "$(grep "rule=$rule " "$out/ours-$n.txt")"
  done
}

echo "== exact evaluation vs the NumPy loop, 10^5 tests (best of 3 for alphaledger)"
exact_case 100000 3 lord++,saffron lord++,saffron
if [[ $quick -eq 0 ]]; then
  echo "== exact evaluation vs the NumPy loop, 10^6 tests (NumPy: LORD++ only, about a minute)"
  exact_case 1000000 1 lord++,saffron lord++
fi

echo "== exact ADDIS and fast evaluation (10^7 tests fast, 10^6 with --quick; best of 3)"
"$bdir"/bench/evaluation_bench --tests 100000 --modes exact --rules addis --repeat 3
fast_tests=10000000
[[ $quick -eq 1 ]] && fast_tests=1000000
"$bdir"/bench/evaluation_bench --tests "$fast_tests" --modes fast --repeat 3

echo "== rules_bench (every rule; exact runs capped at 5 s)"
"$bdir"/bench/rules_bench "$fast_tests" 5

bin="$bdir"/alphaledger
scratch=$(mktemp -d /tmp/alphaledger-bench.XXXXXX)
trap 'rm -rf "$scratch"' EXIT
# ops_per_s FILE LABEL: the ops/s column of ledger_bench's line LABEL.
ops_per_s() { grep -F "$2" "$1" | head -1 | awk '{print $(NF-1)}'; }
per_s() { grep "batch=$2 " "$1" | grep -oE 'per_second=[0-9]+' | cut -d= -f2; }
show_ratio() {  # show_ratio LABEL OURS THEIRS THEIR-NAME
  awk -v l="$1" -v o="$2" -v t="$3" -v n="$4" 'BEGIN {
    printf "ratio %-40s alphaledger %9.0f/s / %s %9.0f/s = %5.2fx\n", l, o, n, t, o / t }'
}

secs=3; group_total=1000000; rows=1000000; cli_runs=200
[[ $quick -eq 1 ]] && secs=1 && group_total=200000 && rows=100000 && cli_runs=50

echo "== durable decisions: ledger_bench ($secs s a measurement) against SQLite (WAL, synchronous=FULL)"
"$bdir"/bench/ledger_bench "$scratch/lb" "$secs" | tee "$out/ledger.txt"
"$bdir"/bench/ledger_bench "$scratch/lbg" "$group_total" group | tee "$out/ledger-group.txt"
"$python" bench/sqlite_ledger.py "$scratch/sqlite" "$secs" 1 256 4096 | tee "$out/sqlite.txt"
show_ratio "one synced write each" "$(ops_per_s "$out/ledger.txt" "decide (one synced write each)")" \
  "$(per_s "$out/sqlite.txt" 1)" sqlite
show_ratio "256 per synced write" "$(ops_per_s "$out/ledger.txt" "decide_batch, 256 per synced write")" \
  "$(per_s "$out/sqlite.txt" 256)" sqlite
show_ratio "4096 per synced write ($group_total decisions)" \
  "$(ops_per_s "$out/ledger-group.txt" "decide_batch, 4096 per synced write")" "$(per_s "$out/sqlite.txt" 4096)" sqlite
# The PostgreSQL ledger backend through `serve` (bench/pg_bench.sh starts a throwaway cluster).
if compgen -G "/usr/lib/postgresql/*/bin/initdb" >/dev/null || [[ -n "${ALPHALEDGER_PG_BIN:-}" ]]; then
  echo "== serve on RocksDB against PostgreSQL, one and two replicas (bench/pg_bench.sh)"
  cmake --build "$bdir" -j2 --target pg_load >/dev/null
  ALPHALEDGER_BENCH_BUILD="$bdir" bench/pg_bench.sh --decisions "$([[ $quick == 1 ]] && echo 500 || echo 2000)"
else
  echo "note: no PostgreSQL server programs (Debian package postgresql): PostgreSQL comparison skipped"
fi

# The service under many clients (target: no failed request, no connection stall, 32 clients at
# least as fast as 8): bench/load_http.cpp stops with an error on the first failed request.
echo "== serve: durable decisions over HTTP with 1, 8, 32 and 64 clients (load_http)"
cmake --build "$bdir" -j2 --target load_http >/dev/null
"$bdir"/bench/load_http --binary "$bin" --folder "$scratch/http" --cli 0 --clients 1,8,32,64 \
  --decisions "$([[ $quick == 1 ]] && echo 1000 || echo 4000)" | tee "$out/http.txt"

echo "== reading a log: replay against awk, $rows rows"
awk -v n="$rows" 'BEGIN { print "id,p_value,finished_at"; srand(7);
  for (i = 1; i <= n; i++) printf "t%09d,%.6g,%d\n", i, rand() ^ 3, 1700000000 + i }' >"$scratch/log.csv"
# cpu_of CMD...: user+system seconds and peak MB of one run, as "CPU MB".
cpu_of() { /usr/bin/time -f '%U %S %M' "$@" 2>&1 >/dev/null | tail -1 | awk '{printf "%.3f %.0f", $1 + $2, $3 / 1024}'; }
read -r awk_cpu awk_mb <<<"$(cpu_of awk -F, '{s+=$2} END {print s}' "$scratch/log.csv")"
read -r replay_cpu replay_mb <<<"$(cpu_of "$bin" replay "$scratch/log.csv" --rules alpha-spending --summary)"
echo "awk: $awk_cpu s CPU, $awk_mb MB; replay --rules alpha-spending --summary: $replay_cpu s CPU, $replay_mb MB"
awk -v a="$awk_cpu" -v r="$replay_cpu" 'BEGIN { printf "ratio replay/awk CPU time = %.2fx (the target: a few times)\n", r / a }'

echo "== peak memory: decide --file, history, verify of $rows rows (alpha-spending)"
"$bin" --ledger "$scratch/mem" new mem --rule alpha-spending >/dev/null
read -r c m <<<"$(cpu_of "$bin" --ledger "$scratch/mem" decide mem --file "$scratch/log.csv")"
echo "decide --file: $c s CPU, peak $m MB (target: under 100 MB at 10^6 rows)"
read -r c m <<<"$(cpu_of "$bin" --ledger "$scratch/mem" history mem)"
echo "history: $c s CPU, peak $m MB"
read -r c m <<<"$(cpu_of "$bin" --ledger "$scratch/mem" verify mem)"
echo "verify: $c s CPU, peak $m MB"

echo "== CLI fixed cost: CPU ms per process, mean of $cli_runs runs (ledger: LORD++ fast, 10,001 decisions)"
"$bin" --ledger "$scratch/cli" new S --rule lord++ --evaluation fast >/dev/null
"$bin" --ledger "$scratch/cli" new small --rule lord++ >/dev/null
head -10001 "$scratch/log.csv" >"$scratch/10k.csv"
"$bin" --ledger "$scratch/cli" decide S --file "$scratch/10k.csv" >/dev/null
"$bin" --ledger "$scratch/cli" decide S --id extra --p 0.3 >/dev/null
"$bin" --ledger "$scratch/cli" decide small --id a --p 0.01 >/dev/null
cli_cost() {  # cli_cost ARGS...: mean task-clock ms and mean wall ms
  if command -v perf >/dev/null && perf stat -x, -e task-clock true 2>/dev/null; then
    perf stat -x, -r "$cli_runs" -e task-clock "$bin" "$@" 2>&1 >/dev/null | grep task-clock | cut -d, -f1
  else
    /usr/bin/time -f '%U %S' bash -c 'for ((i = 0; i < $0; i++)); do "$@" >/dev/null; done' "$cli_runs" "$bin" "$@" \
      2>&1 | tail -1 | awk -v n="$cli_runs" '{printf "%.2f", 1000 * ($1 + $2) / n}'
  fi
}
if command -v perf >/dev/null && perf stat -x, -e task-clock true 2>/dev/null; then
  printf "cli %-24s %8.2f ms CPU per process (what starting any process costs here)\n" "(/bin/true)" \
    "$(perf stat -x, -r "$cli_runs" -e task-clock /bin/true 2>&1 >/dev/null | grep task-clock | cut -d, -f1)"
fi
for args in "--version" "--ledger $scratch/cli next S" "--ledger $scratch/cli status S" \
  "--ledger $scratch/cli streams" "--ledger $scratch/cli history small"; do
  # shellcheck disable=SC2086
  printf "cli %-24s %8.2f ms CPU per process (target: 5 ms)\n" "${args#--ledger $scratch/cli }" "$(cli_cost $args)"
done

# The same fixed cost beside /bin/true, minus it, and against the 5 ms target, on a 50-decision
# ledger (docs/benchmarks.md "CLI fixed cost after lazy start").
bench/cli_start.sh "$bin" "$cli_runs"

echo "== load at end: $(cut -d' ' -f1-3 /proc/loadavg)"
