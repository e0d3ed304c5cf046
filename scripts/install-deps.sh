#!/usr/bin/env bash
# Installs the Debian 12 packages alphaledger builds and tests with, if any is missing.
# Needs root (or sudo). Safe to run again: it does nothing when everything is there.
set -euo pipefail
packages=(g++ cmake ninja-build libboost-math-dev libspdlog-dev libcli11-dev librocksdb-dev
          doctest-dev nlohmann-json3-dev libcpp-httplib-dev pkgconf
          clang-14 libclang-rt-14-dev   # libFuzzer and sanitizers for scripts/fuzz.sh
          pybind11-dev python3-pybind11 python3-pandas  # the Python module and its tests (docs/python.md)
          python3-pytest                # runs the Python tests (ctest python)
          python3-pip python3-setuptools python3-wheel python3-venv  # the offline pip install (ctest python_install)
          libjs-chart.js                # Chart.js, embedded into the HTML reports (docs/reports.md)
          chromium                      # a real browser for the report tests (tests/cli/test_report_cli.cpp)
          firefox-esr                   # the second browser the reports are rendered in (same tests)
          libpq-dev                     # the PostgreSQL ledger backend (docs/postgresql.md)
          postgresql)                   # the throwaway cluster of the PostgreSQL tests (scripts/pg_cluster.sh)
if [ "${1:-}" = "--with-references" ]; then
  # Only to regenerate reference values in tests/data (R's stats, SciPy).
  packages+=(r-base-core python3-scipy)
fi
missing=()
for p in "${packages[@]}"; do
  dpkg-query -W -f='${Status}' "$p" 2>/dev/null | grep -q "install ok installed" || missing+=("$p")
done
if [ ${#missing[@]} -eq 0 ]; then exit 0; fi
echo "installing: ${missing[*]}" >&2
sudo_cmd=()
if [ "$(id -u)" -ne 0 ]; then sudo_cmd=(sudo); fi
"${sudo_cmd[@]}" apt-get update -qq
DEBIAN_FRONTEND=noninteractive "${sudo_cmd[@]}" apt-get install -y -qq --no-install-recommends "${missing[@]}" >&2
