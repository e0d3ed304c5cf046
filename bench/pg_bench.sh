#!/usr/bin/env bash
# Decisions per second through `serve` on RocksDB against PostgreSQL with one and two replicas, in
# one run (bench/pg_load.cpp), on a throwaway cluster (scripts/pg_cluster.sh) stopped at exit.
# Sync settings: RocksDB writes synced (WriteOptions::sync); PostgreSQL fsync=on,
# synchronous_commit=on (the cluster script sets both). docs/benchmarks.md "PostgreSQL backend"
# records a run and how to read it.
#
# Usage: bench/pg_bench.sh [--decisions N] [--clients 1,8,32] [--port PORT]
#   ALPHALEDGER_BENCH_BUILD=DIR uses an existing Release build configured with -DALPHALEDGER_BENCH=ON
set -euo pipefail
cd "$(dirname "$0")/.."
decisions=2000
clients=1,8,32
port=55434
while [ $# -gt 0 ]; do
  case "$1" in
    --decisions) decisions=$2; shift 2 ;;
    --clients) clients=$2; shift 2 ;;
    --port) port=$2; shift 2 ;;
    *) echo "usage: $0 [--decisions N] [--clients 1,8,32] [--port PORT]" >&2; exit 2 ;;
  esac
done
bdir=${ALPHALEDGER_BENCH_BUILD:-build-bench}
if [[ -z "${ALPHALEDGER_BENCH_BUILD:-}" ]]; then
  cmake -S . -B build-bench -G Ninja -DCMAKE_BUILD_TYPE=Release -DALPHALEDGER_BENCH=ON -DALPHALEDGER_TESTS=OFF >/dev/null
fi
cmake --build "$bdir" -j2 --target pg_load alphaledger >/dev/null

cluster=$(mktemp -d "${TMPDIR:-/tmp}/alphaledger-pg-bench.XXXXXX")
rmdir "$cluster"
work=$(mktemp -d "${TMPDIR:-/tmp}/alphaledger-pg-load.XXXXXX")
trap 'scripts/pg_cluster.sh stop "$cluster" || true; rm -rf "$work"' EXIT
eval "$(scripts/pg_cluster.sh start "$cluster" "$port")"
echo "== machine: $(nproc) cores, $(grep -m1 'model name' /proc/cpuinfo | cut -d: -f2 | xargs)"
echo "== load at start: $(cut -d' ' -f1-3 /proc/loadavg)"
echo "== PostgreSQL $("$ALPHALEDGER_TEST_PG_BIN/postgres" --version | awk '{print $3}'), fsync=on, synchronous_commit=on; RocksDB synced writes"
"$bdir"/bench/pg_load --pg "$ALPHALEDGER_TEST_PG" --psql "$ALPHALEDGER_TEST_PG_BIN/psql" \
  --folder "$work/run" --decisions "$decisions" --clients "$clients"
