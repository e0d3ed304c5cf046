#!/usr/bin/env bash
# Checks that no file includes a header of a higher layer. Layers, lowest first:
#   core < store < harness < service < cli
# A file under src/<layer>/ belongs to that layer; a public header include/alphaledger/X.hpp belongs
# to the layer given in header_layer below (or, if not listed, to the one folder holding src/*/X.cpp).
# An include "alphaledger/X.hpp" or <alphaledger/X.hpp> points at X's layer; "core/...",
# "store/...", ... at that folder's layer. Known exceptions are listed in scripts/check_layers.allow
# as "FILE INCLUDED" lines; only violations missing from that list fail.
# Usage: scripts/check_layers.sh [ROOT]   (ROOT defaults to this repository). Exit 0 clean, 1 not.
set -euo pipefail
root="${1:-$(cd "$(dirname "$0")/.." && pwd)}"
cd "$root"

layers=(core store harness service cli)
declare -A rank=()
for i in "${!layers[@]}"; do rank[${layers[$i]}]=$i; done
order="$(printf '%s < ' "${layers[@]}")"
order="${order% < }"

declare -A header_layer=(
  [result.hpp]=core [rules.hpp]=core [spending.hpp]=core [offline.hpp]=core [stats.hpp]=core
  [version.hpp]=core [text.hpp]=core
  [store.hpp]=store [ledger.hpp]=store
  [test_log.hpp]=harness [replay.hpp]=harness [simulate.hpp]=harness
  [service.hpp]=service
)

problems=0
complain() {
  echo "check_layers: $*" >&2
  problems=$((problems + 1))
}

# Sets $found_layer to the layer of a public header name (X.hpp); empty if unknown.
# (No command substitution here or below: forks are slow on a loaded machine.)
layer_of_header() {
  local name="$1" stem="${1%.hpp}" count=0 layer
  found_layer="${header_layer[$name]:-}"
  [[ -n "$found_layer" ]] && return
  for layer in "${layers[@]}"; do
    if [[ -e "src/$layer/$stem.cpp" ]]; then
      found_layer="$layer"
      count=$((count + 1))
    fi
  done
  ((count == 1)) || found_layer=""
}

# Files to check, each with its own layer.
declare -A file_layer=()
shopt -s nullglob globstar
for dir in src/*/; do
  layer="${dir#src/}"
  layer="${layer%/}"
  if [[ -z "${rank[$layer]:-}" ]]; then
    complain "src/$layer/ is not a known layer (known: ${layers[*]}); add it to scripts/check_layers.sh"
    continue
  fi
  for f in "$dir"**/*.cpp "$dir"**/*.hpp "$dir"**/*.h; do
    file_layer["$f"]="$layer"
  done
done
for f in include/alphaledger/*.hpp; do
  layer_of_header "${f##*/}"
  if [[ -z "$found_layer" ]]; then
    complain "$f: no layer known for this public header; add it to header_layer in scripts/check_layers.sh"
    continue
  fi
  file_layer["$f"]="$found_layer"
done

declare -A allowed=()
declare -A allowed_used=()
if [[ -f scripts/check_layers.allow ]]; then
  while read -r file included _; do
    [[ -z "$file" || "$file" == \#* ]] && continue
    allowed["$file $included"]=1
  done <scripts/check_layers.allow
fi

include_re='^[[:space:]]*#[[:space:]]*include[[:space:]]*["<]([^">]+)[">]'
if ((${#file_layer[@]} > 0)); then
  # One grep over every file: lines "FILE:LINE:TEXT".
  while IFS= read -r hit; do
    f="${hit%%:*}"
    rest="${hit#*:}"
    line_no="${rest%%:*}"
    line="${rest#*:}"
    [[ "$line" =~ $include_re ]] || continue
    included="${BASH_REMATCH[1]}"
    own="${file_layer[$f]}"
    case "$included" in
      alphaledger/*)
        layer_of_header "${included#alphaledger/}"
        target="$found_layer"
        if [[ -z "$target" ]]; then
          complain "$f:$line_no: includes $included, which has no known layer; add it to header_layer in scripts/check_layers.sh"
          continue
        fi
        ;;
      core/* | store/* | harness/* | service/* | cli/*) target="${included%%/*}" ;;
      *) continue ;;
    esac
    if ((rank[$target] > rank[$own])); then
      if [[ -n "${allowed["$f $included"]:-}" ]]; then
        allowed_used["$f $included"]=1
      else
        complain "$f:$line_no: a $own file includes $included, which belongs to the higher layer $target (order: $order)"
      fi
    fi
  done < <(grep -nHE '^[[:space:]]*#[[:space:]]*include' "${!file_layer[@]}" || true)
fi

for entry in "${!allowed[@]}"; do
  if [[ -z "${allowed_used[$entry]:-}" ]]; then
    echo "check_layers: note: allowed exception '$entry' no longer occurs; remove it from scripts/check_layers.allow" >&2
  fi
done

if ((problems > 0)); then
  echo "check_layers: $problems problem(s)" >&2
  exit 1
fi
echo "check_layers: ok (${#file_layer[@]} files, ${#allowed_used[@]} allowed exception(s))"
