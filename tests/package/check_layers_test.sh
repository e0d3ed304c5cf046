#!/usr/bin/env bash
# Test of scripts/check_layers.sh: the real tree passes; a scratch copy with one new upward include
# fails and names the file and line; an unknown public header fails.
# Usage: check_layers_test.sh SOURCE_DIR SCRATCH_DIR
set -euo pipefail
src="$1" scratch="$2"
check="$src/scripts/check_layers.sh"

fail() {
  echo "check_layers test: $*" >&2
  exit 1
}

"$check" "$src" >/dev/null || fail "the real tree does not pass"

fresh_copy() {
  rm -rf "$scratch"
  mkdir -p "$scratch/scripts"
  cp -r "$src/src" "$src/include" "$scratch/"
  cp "$src/scripts/check_layers.allow" "$scratch/scripts/"
}

fresh_copy
"$check" "$scratch" >/dev/null || fail "an untouched copy does not pass"

# A core file including a service header.
core_file="$(find "$scratch/src/core" -name '*.cpp' | sort | head -n1)"
echo '#include "alphaledger/service.hpp"' >>"$core_file"
bad_line="$(wc -l <"$core_file")"
if out="$("$check" "$scratch" 2>&1)"; then fail "a core file including alphaledger/service.hpp passed"; fi
rel="${core_file#"$scratch"/}"
[[ "$out" == *"$rel:$bad_line:"*"alphaledger/service.hpp"* ]] || fail "the message does not name $rel:$bad_line: $out"

# A store file including a private service header: also upward, and not on the allow-list.
fresh_copy
store_file="$(find "$scratch/src/store" -name '*.cpp' | sort | head -n1)"
echo '#include "service/anything.hpp"' >>"$store_file"
if "$check" "$scratch" >/dev/null 2>&1; then fail "a store file including service/anything.hpp passed"; fi

# A public header that has no layer.
fresh_copy
echo '#pragma once' >"$scratch/include/alphaledger/unmapped_for_test.hpp"
if "$check" "$scratch" >/dev/null 2>&1; then fail "a public header with no known layer passed"; fi

rm -rf "$scratch"
echo "check_layers test: ok"
