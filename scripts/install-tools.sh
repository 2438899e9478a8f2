#!/usr/bin/env bash
# Install the outside tools the test suite runs (Debian packages): ngspice, Icarus Verilog,
# Yosys, Verilator, rsvg-convert (librsvg2-bin, renders the pictures to PNG), Chromium (the
# sweep report's browser test), make, and Slurm with munge (the sweep's job-array test). Only
# what is missing is installed.
set -euo pipefail
need=()
for pair in ngspice:ngspice iverilog:iverilog vvp:iverilog yosys:yosys verilator:verilator rsvg-convert:librsvg2-bin chromium:chromium make:make sbatch:slurm-wlm slurmctld:slurm-wlm slurmd:slurm-wlm munged:munge; do
  cmd=${pair%%:*}; pkg=${pair##*:}
  if ! command -v "$cmd" >/dev/null 2>&1; then
    [[ " ${need[*]-} " == *" $pkg "* ]] || need+=("$pkg")
  fi
done
if [ ${#need[@]} -eq 0 ]; then
  echo "install-tools: ngspice, iverilog, yosys, verilator, rsvg-convert, chromium, make, slurm and munge are present"
  exit 0
fi
sudo=""
if [ "$(id -u)" -ne 0 ]; then
  command -v sudo >/dev/null 2>&1 || { echo "install-tools: need root or sudo to install ${need[*]}" >&2; exit 1; }
  sudo="sudo"
fi
echo "install-tools: installing ${need[*]}"
$sudo apt-get update -qq
DEBIAN_FRONTEND=noninteractive $sudo apt-get install -y -qq "${need[@]}" >/dev/null
for cmd in ngspice iverilog vvp yosys verilator rsvg-convert chromium make sbatch slurmctld slurmd munged; do
  command -v "$cmd" >/dev/null 2>&1 || { echo "install-tools: $cmd still missing" >&2; exit 1; }
done
echo "install-tools: done"
