#!/usr/bin/env bash
# HTML reports of a long stream: time, peak memory and file size of `report` and `replay --report`
# at 10^5 tests. Results go to docs/benchmarks.md ("HTML reports").
#
#   bench/report_bench.sh [BINARY] [TESTS]      # default: build/alphaledger 100000
#
# The log: TESTS rows of id, team and p_value; 10 % non-null with z ~ N(3, 1) (one-sided p-value
# 1 - Phi(z)), the rest uniform, every p-value at full double precision (17 significant digits), so
# the numbers are as long as a computed p-value's. Files are written to a scratch folder under /tmp
# and deleted at the end. Needs python3 and GNU time. Nothing listens on a port.
set -euo pipefail
bin=$(realpath "${1:-build/alphaledger}")
n=${2:-100000}
work=$(mktemp -d /tmp/alphaledger-report-bench.XXXXXX)
trap 'rm -rf "$work"' EXIT

python3 - "$n" >"$work/big.csv" <<'PY'
import math, random, sys
n = int(sys.argv[1])
rng = random.Random(20261202)
teams = ["checkout", "search", "growth", "payments", "onboarding"]
print("id,team,p_value")
for i in range(1, n + 1):
    if rng.random() < 0.1:
        p = 0.5 * math.erfc(rng.gauss(3.0, 1.0) / math.sqrt(2.0))
    else:
        p = rng.random()
    print(f"exp-{i:06d},{rng.choice(teams)},{p!r}")
PY

measure() {  # label, then the command: wall time and peak memory
  local label=$1
  shift
  /usr/bin/time -f "%e s %M KB" -o "$work/time" "$@" >/dev/null
  printf '%-58s %s\n' "$label" "$(awk '{printf "%s s, %.0f MB peak", $1, $3 / 1024}' "$work/time")"
}
size() { awk -v b="$(stat -c %s "$1")" 'BEGIN {printf "%.2f MB", b / 1e6}'; }

echo "load: $(uptime)"
"$bin" --ledger "$work/ledger" new big --rule lord++ --evaluation fast >/dev/null
measure "decide big --file (lord++ fast)" "$bin" --ledger "$work/ledger" decide big --file "$work/big.csv" --sync-every 10000
measure "history big (CSV)" "$bin" --ledger "$work/ledger" history big
measure "report big -o big.html" "$bin" --ledger "$work/ledger" report big -o "$work/big.html"
measure "replay --rules lord++,saffron,addis,bh" "$bin" replay "$work/big.csv" --rules lord++,saffron,addis,bh
measure "replay ... --report replay.html" "$bin" replay "$work/big.csv" --rules lord++,saffron,addis,bh \
  --report "$work/replay.html"
"$bin" --ledger "$work/ledger" history big >"$work/history.csv"
echo "history CSV: $(size "$work/history.csv")"
echo "stream report: $(size "$work/big.html") ($(gzip -c "$work/big.html" | wc -c | awk '{printf "%.2f MB", $1 / 1e6}') gzipped)"
echo "replay report: $(size "$work/replay.html") ($(gzip -c "$work/replay.html" | wc -c | awk '{printf "%.2f MB", $1 / 1e6}') gzipped)"
# Where the bytes go: each top-level part of the data block.
for f in big replay; do
  python3 - "$work/$f.html" <<'PY'
import json, sys
html = open(sys.argv[1], encoding="utf-8").read()
start = html.index('<script type="application/json" id="report-data">') + len('<script type="application/json" id="report-data">')
data = json.loads(html[start:html.index("</script>", start)])
parts = data.get("decisions") or data.get("input")
print(sys.argv[1].rsplit("/", 1)[1], "data block:", round((html.index("</script>", start) - start) / 1e6, 2), "MB;",
      ", ".join(f"{k} {len(json.dumps(v, separators=(',', ':'))) / 1e6:.2f}" for k, v in parts.items()),
      *([", rules " + ", ".join(f"{r['rule']} {len(json.dumps(r['level'], separators=(',', ':'))) / 1e6:.2f}"
                                for r in data["rules"])] if "rules" in data else []))
PY
done
