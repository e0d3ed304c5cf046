#!/usr/bin/env bash
# Installs a built tree into a scratch prefix, builds tests/package/consumer against it twice
# (CMake find_package, then pkg-config), runs both and checks their output; also runs the
# installed executable. Usage: run_package_test.sh BUILD_DIR SCRATCH_DIR CXX VERSION
set -euo pipefail
build_dir="$1" scratch="$2" cxx="$3" version="$4"
here="$(cd "$(dirname "$0")" && pwd)"

fail() {
  echo "package test: $*" >&2
  exit 1
}

rm -rf "$scratch"
mkdir -p "$scratch"
prefix="$scratch/prefix"
cmake --install "$build_dir" --prefix "$prefix" >"$scratch/install.log" || fail "cmake --install failed (see $scratch/install.log)"

for f in include/alphaledger/rules.hpp include/alphaledger/version.hpp bin/alphaledger; do
  [[ -e "$prefix/$f" ]] || fail "not installed: $f"
done
for part in core harness store service; do
  [[ -n "$(find "$prefix" -name "libalphaledger_$part.a")" ]] || fail "not installed: libalphaledger_$part.a"
done
config="$(find "$prefix" -name alphaledgerConfig.cmake | head -n1)"
[[ -n "$config" && -e "$(dirname "$config")/alphaledgerConfigVersion.cmake" ]] || fail "no alphaledgerConfig.cmake / alphaledgerConfigVersion.cmake"
pc="$(find "$prefix" -name alphaledger.pc | head -n1)"
[[ -n "$pc" ]] || fail "no alphaledger.pc"

# What a correct consumer prints. Levels: docs/methods.md 14.3 rows 1-3 (LORD++, alpha 0.05).
expected="version $version $(echo "$version" | tr . ' ' | awk '{printf "%d.%d.%d", $1, $2, $3}')
level 1 0.001370386057 R
level 2 0.0016684017 R
level 3 0.003292613799 ."

check_output() {
  local how="$1" got="$2"
  if [[ "$got" != "$expected" ]]; then
    printf 'package test (%s): output differs\n--- expected\n%s\n--- got\n%s\n' "$how" "$expected" "$got" >&2
    exit 1
  fi
  echo "package test ($how): ok"
}

# 1. CMake: find_package(alphaledger) from the scratch prefix only.
cmake -S "$here/consumer" -B "$scratch/consumer-cmake" -DCMAKE_BUILD_TYPE=Release \
  -DCMAKE_CXX_COMPILER="$cxx" -DCMAKE_PREFIX_PATH="$prefix" >"$scratch/consumer-cmake.log" 2>&1 ||
  fail "configuring the consumer failed (see $scratch/consumer-cmake.log)"
cmake --build "$scratch/consumer-cmake" >>"$scratch/consumer-cmake.log" 2>&1 ||
  fail "building the consumer failed (see $scratch/consumer-cmake.log)"
check_output cmake "$("$scratch/consumer-cmake/consumer")"

# 2. pkg-config: only the scratch prefix's .pc besides the system ones.
flags="$(PKG_CONFIG_PATH="$(dirname "$pc")" pkg-config --cflags --libs alphaledger)" ||
  fail "pkg-config --cflags --libs alphaledger failed"
[[ "$(PKG_CONFIG_PATH="$(dirname "$pc")" pkg-config --modversion alphaledger)" == "$version" ]] ||
  fail "pkg-config --modversion is not $version"
# shellcheck disable=SC2086  # flags are words
"$cxx" -std=c++20 -O1 "$here/consumer/consumer.cpp" -o "$scratch/consumer-pc" $flags ||
  fail "building the consumer with pkg-config flags failed: $flags"
check_output pkg-config "$("$scratch/consumer-pc")"

# 3. The installed executable runs and knows its version.
got="$("$prefix/bin/alphaledger" --version)"
[[ "$got" == *"$version"* ]] || fail "installed alphaledger --version printed '$got', expected it to contain $version"
echo "package test (executable): ok"
