#!/usr/bin/env bash
# Performance figures for carrywright (measured, not asserted):
#   1-3. `cargo bench --bench generate`: in-process generation of a 64-bit Manchester adder,
#        bit-parallel check and evaluator throughput, and the same vectors in Icarus Verilog;
#   4.   peak resident memory of `carrywright generate` on 128-bit designs (/usr/bin/time -v).
# Run from the repository root: bash scripts/bench.sh
set -euo pipefail

if [[ ! -f Cargo.toml ]] || ! grep -q '^name = "carrywright"' Cargo.toml; then
    echo "bench.sh: run this from the carrywright repository root" >&2
    exit 2
fi

work=$(mktemp -d "${TMPDIR:-/tmp}/carrywright-bench.XXXXXX")
trap 'rm -rf "$work"' EXIT

echo "== 1-3: cargo bench --bench generate"
cargo bench --bench generate | tee "$work/bench.out"

echo
echo "== 4: peak memory of 'carrywright generate', 128-bit designs"
cargo build --release --quiet
bin=target/release/carrywright

cat > "$work/m128.yaml" <<'SPEC'
name: m128
width: 128
architecture: manchester
style: static
block: 4
buffers: {every: 8}
SPEC
cat > "$work/r128.yaml" <<'SPEC'
name: r128
width: 128
architecture: ripple
SPEC

mem_rows=()
target_kb=$((50 * 1024))
for name in m128 r128; do
    if [[ ! -x /usr/bin/time ]]; then
        echo "  $name: SKIPPED: /usr/bin/time not found (GNU time is needed for -v)"
        mem_rows+=("generate $name peak RSS|skipped|< 50 MB|no /usr/bin/time")
        continue
    fi
    /usr/bin/time -v "$bin" generate "$work/$name.yaml" -o "$work/out-$name" \
        > "$work/$name.stdout" 2> "$work/$name.time"
    sed 's/^/  /' "$work/$name.stdout" | head -2
    rss_line=$(grep 'Maximum resident set size' "$work/$name.time")
    wall=$(grep 'Elapsed (wall clock)' "$work/$name.time" | sed 's/.*: //')
    kb=$(echo "$rss_line" | sed 's/.*: *//')
    echo "  $name: $(echo "$rss_line" | sed 's/^[[:space:]]*//'), wall clock $wall"
    mb=$(awk -v k="$kb" 'BEGIN { printf "%.1f MB", k / 1024 }')
    verdict=met
    (( kb < target_kb )) || verdict=MISSED
    mem_rows+=("generate $name peak RSS|$mb ($kb kB)|< 50 MB|$verdict")
done

echo
echo "== figures"
fmt='%-32s %-20s %-12s %s\n'
# shellcheck disable=SC2059
printf "$fmt" "figure" "measured" "target" "verdict"
# shellcheck disable=SC2059
printf "$fmt" "------" "--------" "------" "-------"
while IFS=$'\t' read -r _ label value target verdict; do
    # shellcheck disable=SC2059
    printf "$fmt" "$label" "$value" "$target" "$verdict"
done < <(grep '^FIGURE' "$work/bench.out")
for row in "${mem_rows[@]}"; do
    IFS='|' read -r label value target verdict <<< "$row"
    # shellcheck disable=SC2059
    printf "$fmt" "$label" "$value" "$target" "$verdict"
done
