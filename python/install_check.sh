#!/usr/bin/env bash
# Checks the documented offline install of the Python package (docs/python.md "Installing"): from a
# clean copy of the tree (the files git knows, no build folders), pip installs the package with
# --no-build-isolation --no-index, so nothing can be fetched, (1) into a folder with --target and
# (2) into a fresh virtual environment made with --system-site-packages; each time the package is
# imported from another folder and decides one test.
#
# Usage: python/install_check.sh SOURCE_DIR [PREBUILT_MODULE]
#   PREBUILT_MODULE: a built alphaledger/_native*.so to copy instead of compiling the extension
#   (setup.py's ALPHALEDGER_PREBUILT_MODULE); without it pip builds the extension with CMake, which
#   takes minutes. PYTHON overrides the interpreter (default /usr/bin/python3, Debian's).
# Exit status 0 when both installs work; anything else prints what failed.
set -euo pipefail
src="$(cd "${1:?usage: install_check.sh SOURCE_DIR [PREBUILT_MODULE]}" && pwd)"
prebuilt="${2:-}"
python="${PYTHON:-/usr/bin/python3}"
work="$(mktemp -d "${TMPDIR:-/tmp}/alphaledger-install.XXXXXX")"
trap 'rm -rf "$work"' EXIT

# A clean copy: tracked and new (not ignored) files only, so no build folder or cache comes along.
mkdir -p "$work/tree"
if git -C "$src" rev-parse --is-inside-work-tree >/dev/null 2>&1; then
  (cd "$src" && git ls-files -z --cached --others --exclude-standard |
    while IFS= read -r -d '' f; do [[ -e "$f" ]] && printf '%s\0' "$f"; done |
    xargs -0 cp --parents -t "$work/tree")
else
  tar -C "$src" --exclude='./build*' --exclude='./.git' -cf - . | tar -C "$work/tree" -xf -
fi

if [[ -n "$prebuilt" ]]; then
  export ALPHALEDGER_PREBUILT_MODULE="$(cd "$(dirname "$prebuilt")" && pwd)/$(basename "$prebuilt")"
fi
unset PYTHONPATH
export PIP_NO_INDEX=1 PIP_DISABLE_PIP_VERSION_CHECK=1 PIP_NO_CACHE_DIR=1 PIP_ROOT_USER_ACTION=ignore

check_import() {  # $1: the python to run, $2: where the package must come from, $3: a new ledger folder
  (cd "$work" && "$1" - "$2" "$3" <<'EOF'
import sys
import alphaledger as al
where = sys.argv[1]
assert al.__file__.startswith(where), f"imported from {al.__file__}, expected under {where}"
out = al.Rule("lord++").record(0.0004)
# docs/methods.md 14.3, t = 1: level 0.001370386057, rejected.
assert abs(out.level / 0.001370386057 - 1) < 1e-9 and out.rejected, out
# The store and the log reader work too: a ledger round trip and a replay of rows in memory.
ledger_dir = sys.argv[2]
with al.Ledger(ledger_dir) as ledger:
    ledger.create_stream("s", rule="lord++")
    d = ledger.decide("s", id="t1", p_value=0.0004)
    assert d["level"] == out.level and d["rejected"], d
    assert [r["id"] for r in ledger.history("s", as_frame=False)] == ["t1"]
rows = al.replay([{"id": "t1", "p_value": 0.0004}, {"id": "t2", "p_value": 0.5}], rules=["lord++"], as_frame=False)
assert [r["rejected"] for r in rows] == [1, 0] and rows[0]["level"] == out.level, rows
print("imported", al.__file__, out)
EOF
  )
}

echo "== pip install --target"
(cd "$work/tree" && "$python" -m pip install --no-build-isolation --no-index --no-deps --quiet \
   --target "$work/site" .)
PYTHONPATH="$work/site" check_import "$python" "$work/site" "$work/ledger-target"

echo "== pip install into a venv with --system-site-packages"
"$python" -m venv --system-site-packages --without-pip "$work/venv"
(cd "$work/tree" && "$work/venv/bin/python" -m pip install --no-build-isolation --no-index --no-deps --quiet .)
check_import "$work/venv/bin/python" "$work/venv" "$work/ledger-venv"
"$work/venv/bin/python" -m pip uninstall --yes --quiet alphaledger
left="$(cd "$work" && "$work/venv/bin/python" -c 'import alphaledger; print(alphaledger.__file__)' 2>/dev/null || true)"
if [[ "$left" == "$work/venv"* ]]; then
  echo "install_check: alphaledger still in the venv after pip uninstall: $left" >&2
  exit 1
fi
echo "install_check: ok"
