#!/usr/bin/env bash
# A one-node Slurm cluster in a folder of its own, for the sweep's job-array test (Debian's
# slurm-wlm and munge; needs root). `start DIR` writes DIR/slurm.conf, starts munged,
# slurmctld and slurmd, records their PIDs in DIR/pids and waits until the node is idle;
# `stop DIR` stops exactly those PIDs. Use with SLURM_CONF=DIR/slurm.conf.
set -euo pipefail
cmd=${1:?start or stop}; dir=$(mkdir -p "${2:?folder}" && cd "$2" && pwd)
case "$cmd" in
start)
  for t in munged slurmctld slurmd sbatch; do
    command -v "$t" >/dev/null 2>&1 || { echo "slurm-one-node: $t not installed (apt-get install slurm-wlm munge)" >&2; exit 3; }
  done
  [ "$(id -u)" -eq 0 ] || { echo "slurm-one-node: needs root" >&2; exit 3; }
  host=$(hostname -s)
  mkdir -p "$dir/state" "$dir/spool" "$dir/log" "$dir/munge"
  key=/etc/munge/munge.key
  if [ ! -s "$key" ]; then
    mkdir -p /etc/munge
    dd if=/dev/urandom bs=1 count=1024 of="$key" 2>/dev/null
    chmod 400 "$key"
  fi
  cat > "$dir/slurm.conf" <<CONF
ClusterName=cwtest
SlurmctldHost=$host
SlurmUser=root
AuthType=auth/munge
ProctrackType=proctrack/linuxproc
TaskPlugin=task/none
SelectType=select/cons_tres
SelectTypeParameters=CR_Core
StateSaveLocation=$dir/state
SlurmdSpoolDir=$dir/spool
SlurmctldPidFile=$dir/slurmctld.pid
SlurmdPidFile=$dir/slurmd.pid
SlurmctldLogFile=$dir/log/slurmctld.log
SlurmdLogFile=$dir/log/slurmd.log
ReturnToService=2
NodeName=$host CPUs=$(nproc) State=UNKNOWN
PartitionName=main Nodes=$host Default=YES MaxTime=INFINITE State=UP
CONF
  : > "$dir/pids"
  mkdir -p /run/munge /var/log/munge /var/lib/munge
  munged --force --foreground >"$dir/log/munged.out" 2>&1 &
  echo $! >> "$dir/pids"
  sleep 1
  slurmctld -f "$dir/slurm.conf" -D >/dev/null 2>&1 &
  echo $! >> "$dir/pids"
  slurmd -f "$dir/slurm.conf" -D >/dev/null 2>&1 &
  echo $! >> "$dir/pids"
  export SLURM_CONF="$dir/slurm.conf"
  for _ in $(seq 1 60); do
    if sinfo -h -o %t 2>/dev/null | grep -q idle; then echo "slurm-one-node: up ($dir)"; exit 0; fi
    sleep 0.5
  done
  echo "slurm-one-node: the node did not come up; see $dir/log" >&2
  exit 4
  ;;
stop)
  if [ -f "$dir/pids" ]; then
    while read -r pid; do kill "$pid" 2>/dev/null || true; done < "$dir/pids"
    sleep 0.5
    while read -r pid; do kill -9 "$pid" 2>/dev/null || true; done < "$dir/pids"
    rm -f "$dir/pids"
  fi
  ;;
*) echo "usage: $0 start|stop DIR" >&2; exit 2 ;;
esac
