#!/usr/bin/env bash
# Reading logs: time and peak memory of `replay` and `decide --file` on generated CSV logs, beside
# `awk` summing one column of the same file. Results go to docs/benchmarks.md ("Reading logs").
#
#   bench/log_bench.sh [BINARY] [ROWS...]      # default: build/alphaledger 1000000
#
# Files are written to a scratch folder under /tmp and deleted at the end. Needs hyperfine and
# GNU time (/usr/bin/time -v). Nothing listens on a port; nothing leaves the machine.
set -euo pipefail
bin=${1:-build/alphaledger}
shift || true
sizes=("$@")
[ ${#sizes[@]} -eq 0 ] && sizes=(1000000)
bin=$(realpath "$bin")
work=$(mktemp -d /tmp/alphaledger-log-bench.XXXXXX)
trap 'rm -rf "$work"' EXIT

peak() {  # peak resident set of a command, in MB
  /usr/bin/time -v "$@" 2>&1 >/dev/null | awk -F: '/Maximum resident/ {printf "%.0f MB", $2 / 1024}'
}

echo "load: $(uptime)"
for n in "${sizes[@]}"; do
  # In time order (read row by row, no sort) and shuffled in time (sorted on compact records).
  awk -v n="$n" 'BEGIN { print "id,p_value,finished_at"; srand(7);
    for (i = 1; i <= n; i++) printf "t%09d,%.6g,%d\n", i, rand() ^ 3, 1700000000 + i }' >"$work/ordered.csv"
  awk -v n="$n" 'BEGIN { print "id,p_value,finished_at"; srand(7);
    for (i = 1; i <= n; i++) printf "t%09d,%.6g,%d\n", i, rand() ^ 3, 1700000000 + (i * 7919) % n }' >"$work/shuffled.csv"
  echo "== $n rows, $(du -m "$work/ordered.csv" | cut -f1) MB"
  for f in ordered shuffled; do
    echo "-- $f: peak RSS awk $(peak awk -F, '{s+=$2} END {print s}' "$work/$f.csv"), replay --summary $(peak "$bin" replay "$work/$f.csv" --rules alpha-spending --summary), replay $(peak "$bin" replay "$work/$f.csv" --rules alpha-spending)"
  done
  hyperfine --warmup 1 --runs 3 --export-markdown "$work/times.md" \
    "awk -F, '{s+=\$2} END {print s}' $work/ordered.csv" \
    "$bin replay $work/ordered.csv --rules alpha-spending --summary" \
    "$bin replay $work/shuffled.csv --rules alpha-spending --summary" \
    "$bin replay $work/ordered.csv --rules alpha-spending >/dev/null" >/dev/null
  cat "$work/times.md"
  if [ "$n" -le 1000000 ]; then
    rm -rf "$work/ledger"
    "$bin" --ledger "$work/ledger" new bench --rule alpha-spending >/dev/null
    start=$(date +%s.%N)
    echo "-- decide --file: peak RSS $(peak "$bin" --ledger "$work/ledger" decide bench --file "$work/ordered.csv"), $(echo "$(date +%s.%N) - $start" | bc) s"
  fi
done
