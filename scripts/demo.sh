#!/usr/bin/env bash
# Builds alphaledger and runs it on the invented demo data in replay_data/:
#   1. replays two years of (invented) product experiments with six online rules and the
#      hindsight BH baseline, and prints the summary;
#   2. decides the same log in a local ledger folder (./alphaledger.db, stream "larkspur-demo"),
#      then shows the stream's status and verifies its history.
set -euo pipefail
cd "$(dirname "$0")/.."
scripts/install-deps.sh
cmake -S . -B build -G Ninja -DCMAKE_BUILD_TYPE=Release >/dev/null
cmake --build build -j "$(nproc)" --target alphaledger >/dev/null
bin=build/alphaledger
log=replay_data/larkspur_experiments.csv
echo "\$ alphaledger replay $log --rules lord++,saffron,addis,lond,alpha-investing,alpha-spending,bh --summary"
"$bin" replay "$log" --rules lord++,saffron,addis,lond,alpha-investing,alpha-spending,bh --summary
echo
echo "\$ alphaledger new larkspur-demo --rule saffron"
"$bin" new larkspur-demo --rule saffron
echo "\$ alphaledger decide larkspur-demo --file $log | tail -n 3"
"$bin" decide larkspur-demo --file "$log" | tail -n 3
echo "\$ alphaledger status larkspur-demo"
"$bin" status larkspur-demo
echo "\$ alphaledger verify larkspur-demo"
"$bin" verify larkspur-demo
