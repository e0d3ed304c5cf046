#!/usr/bin/env bash
# The fixed cost of one alphaledger process (docs/benchmarks.md "CLI fixed cost after lazy start"):
# CPU (task-clock) and page faults per process of --version and of the read commands on a small
# ledger, beside /bin/true measured in the same run, with each figure minus /bin/true and its ratio
# to the target of 5 ms of CPU per read command.
#
# Usage: bench/cli_start.sh [BINARY] [RUNS]
#   BINARY: the alphaledger executable (default build/alphaledger); RUNS: processes per figure
#   (default 60). Needs perf (perf stat); without it, a timed loop gives CPU only.
# The ledger is made in a temporary folder: one LORD++ stream (fast evaluation) of 50 decisions,
# as in the earlier measurements. A busy machine inflates every figure, /bin/true's too: compare
# the "minus /bin/true" column across runs, and read the load printed first and last.
set -euo pipefail

bin=${1:-build/alphaledger}
runs=${2:-60}
[[ -x "$bin" ]] || { echo "cli_start.sh: no executable at $bin (build first, or give its path)" >&2; exit 2; }
bin=$(cd "$(dirname "$bin")" && pwd)/$(basename "$bin")
scratch=$(mktemp -d /tmp/alphaledger-cli-start.XXXXXX)
trap 'rm -rf "$scratch"' EXIT

ledger="$scratch/ledger"
"$bin" --ledger "$ledger" new S --rule lord++ --evaluation fast >/dev/null
{
  echo "id,p_value"
  for ((i = 1; i <= 50; i++)); do echo "t$i,0.0$((i % 9 + 1))"; done
} >"$scratch/50.csv"
"$bin" --ledger "$ledger" decide S --file "$scratch/50.csv" >/dev/null

have_perf=0
if command -v perf >/dev/null && perf stat -x, -e task-clock true >/dev/null 2>&1; then have_perf=1; fi

# measure CMD...: "CPU_MS PAGE_FAULTS" per process, means of $runs runs.
measure() {
  if [[ $have_perf -eq 1 ]]; then
    perf stat -x, -r "$runs" -e task-clock,page-faults "$@" 2>&1 >/dev/null |
      awk -F, '$3 == "task-clock" { cpu = $1 } $3 == "page-faults" { pf = $1 } END { printf "%.2f %d", cpu, pf }'
  else
    /usr/bin/time -f '%U %S' bash -c 'for ((i = 0; i < $0; i++)); do "$@" >/dev/null; done' "$runs" "$@" \
      2>&1 | tail -1 | awk -v n="$runs" '{printf "%.2f -", 1000 * ($1 + $2) / n}'
  fi
}

echo "== CLI fixed cost: $runs processes each, $bin"
echo "== load at start: $(cut -d' ' -f1-3 /proc/loadavg)"
read -r true_cpu true_pf <<<"$(measure /bin/true)"
printf "%-22s %9s %9s %13s %12s\n" "command" "CPU ms" "faults" "minus true" "/ 5 ms"
printf "%-22s %9.2f %9s %13s %12s\n" "/bin/true" "$true_cpu" "$true_pf" "" ""
for args in "--version" "next S" "status S" "streams" "history S"; do
  if [[ $args == --* ]]; then
    # shellcheck disable=SC2086
    read -r cpu pf <<<"$(measure "$bin" $args)"
  else
    # shellcheck disable=SC2086
    read -r cpu pf <<<"$(measure "$bin" --ledger "$ledger" $args)"
  fi
  awk -v l="$args" -v c="$cpu" -v p="$pf" -v t="$true_cpu" 'BEGIN {
    printf "%-22s %9.2f %9s %10.2f ms %11.2fx\n", l, c, p, c - t, c / 5 }'
done
echo "== load at end: $(cut -d' ' -f1-3 /proc/loadavg)"
