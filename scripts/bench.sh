#!/usr/bin/env bash
# Builds the benchmarks (build-bench/, Release) and runs the rule benchmarks beside the NumPy loop a
# user would write instead, on the same streams in the same run, printing the ratios.
# docs/benchmarks.md ("Rules: exact and fast evaluation") records a run and how to read it.
#
# Usage: scripts/bench.sh [--quick]
#   --quick: skip the 10^6-test runs (the NumPy loop alone takes a minute or more there)
# Needs Debian's python3-numpy for /usr/bin/python3 (installed with apt-get when run as root).
set -euo pipefail
cd "$(dirname "$0")/.."

quick=0
[[ "${1:-}" == "--quick" ]] && quick=1
python=/usr/bin/python3  # Debian's: another python3 may come first on PATH
out=build-bench/bench-run
mkdir -p "$out"

if ! "$python" -c 'import numpy' 2>/dev/null; then
  if [[ $(id -u) -eq 0 ]]; then
    DEBIAN_FRONTEND=noninteractive apt-get install -y -qq python3-numpy >/dev/null
  else
    echo "bench.sh: $python has no numpy; install Debian's python3-numpy (apt-get install python3-numpy)" >&2
    exit 2
  fi
fi

cmake -S . -B build-bench -G Ninja -DCMAKE_BUILD_TYPE=Release -DALPHALEDGER_BENCH=ON -DALPHALEDGER_TESTS=OFF >/dev/null
cmake --build build-bench -j2 --target evaluation_bench rules_bench >/dev/null

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
  build-bench/bench/evaluation_bench --tests "$n" --modes exact --rules "$rules" --repeat "$repeat" \
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

echo "== exact ADDIS and fast evaluation (10^7 tests fast, best of 3)"
build-bench/bench/evaluation_bench --tests 100000 --modes exact --rules addis --repeat 3
build-bench/bench/evaluation_bench --tests 10000000 --modes fast --repeat 3

echo "== rules_bench (every rule; exact runs capped at 5 s)"
build-bench/bench/rules_bench 10000000 5

echo "== load at end: $(cut -d' ' -f1-3 /proc/loadavg)"
