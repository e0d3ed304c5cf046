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
  [version.hpp]=core
  [store.hpp]=store [ledger.hpp]=store
  [test_log.hpp]=harness [replay.hpp]=harness [simulate.hpp]=harness
  [service.hpp]=service
)

problems=0
complain() {
  echo "check_layers: $*" >&2
  problems=$((problems + 1))
}

# Layer of a public header name (X.hpp); empty if unknown.
layer_of_header() {
  local name="$1"
  if [[ -n "${header_layer[$name]:-}" ]]; then
    echo "${header_layer[$name]}"
    return
  fi
  local stem="${name%.hpp}" found=()
  for layer in "${layers[@]}"; do
    [[ -e "src/$layer/$stem.cpp" ]] && found+=("$layer")
  done
  if [[ ${#found[@]} -eq 1 ]]; then echo "${found[0]}"; fi
}

# Files to check, each with its own layer.
files=()
file_layers=()
for dir in src/*/; do
  layer="$(basename "$dir")"
  if [[ -z "${rank[$layer]:-}" ]]; then
    complain "src/$layer/ is not a known layer (known: ${layers[*]}); add it to scripts/check_layers.sh"
    continue
  fi
  while IFS= read -r f; do
    files+=("$f")
    file_layers+=("$layer")
  done < <(find "$dir" -type f \( -name '*.cpp' -o -name '*.hpp' -o -name '*.h' \) | sed 's|^\./||; s|//|/|' | sort)
done
for f in include/alphaledger/*.hpp; do
  [[ -e "$f" ]] || continue
  layer="$(layer_of_header "$(basename "$f")")"
  if [[ -z "$layer" ]]; then
    complain "$f: no layer known for this public header; add it to header_layer in scripts/check_layers.sh"
    continue
  fi
  files+=("$f")
  file_layers+=("$layer")
done

declare -A allowed=()
declare -A allowed_used=()
if [[ -f scripts/check_layers.allow ]]; then
  while read -r file included _; do
    [[ -z "$file" || "$file" == \#* ]] && continue
    allowed["$file $included"]=1
  done <scripts/check_layers.allow
fi

for i in "${!files[@]}"; do
  f="${files[$i]}"
  own="${file_layers[$i]}"
  line_no=0
  while IFS= read -r line; do
    line_no=$((line_no + 1))
    [[ "$line" =~ ^[[:space:]]*#[[:space:]]*include[[:space:]]*[\"\<]([^\"\>]+)[\"\>] ]] || continue
    included="${BASH_REMATCH[1]}"
    target=""
    case "$included" in
      alphaledger/*)
        target="$(layer_of_header "${included#alphaledger/}")"
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
  done <"$f"
done

for entry in "${!allowed[@]}"; do
  if [[ -z "${allowed_used[$entry]:-}" ]]; then
    echo "check_layers: note: allowed exception '$entry' no longer occurs; remove it from scripts/check_layers.allow" >&2
  fi
done

if ((problems > 0)); then
  echo "check_layers: $problems problem(s)" >&2
  exit 1
fi
echo "check_layers: ok (${#files[@]} files, ${#allowed_used[@]} allowed exception(s))"
