#!/usr/bin/env bash
# A campaign sharded over a real batch scheduler merges to the one-machine campaign.
#
# Installs Slurm from Debian's packages (slurm-wlm, munge) when missing, configures this
# machine as a one-node cluster (a slurm.conf of its own in a temporary folder, on ports
# of its own), starts munged, slurmctld and slurmd, submits the README's array job (4
# tasks over 24 scenario runs) with `sbatch --wait`, merges the partials and checks the
# merged report, HTML and table equal the campaign on one machine byte for byte. Stops the
# daemons it started and leaves nothing running; bounded by timeouts (a few minutes).
set -euo pipefail
cd "$(dirname "$0")/.."
bin=$(realpath "${BIN:-target/debug/plumbline}")
root=$(pwd)

if ! command -v slurmctld >/dev/null || ! command -v munged >/dev/null; then
  (apt-get update -qq && DEBIAN_FRONTEND=noninteractive timeout 600 apt-get install -y -qq slurm-wlm munge >/dev/null) \
    || { echo "slurm-check: slurm-wlm could not be installed: FAILED"; exit 1; }
fi

w=$(mktemp -d /tmp/plumbline-slurm.XXXXXX)
chmod 755 "$w"
pids=()
started_munge=0
cleanup() {
  set +e
  [ -n "${SLURM_CONF:-}" ] && scancel --quiet -u "$(id -un)" 2>/dev/null
  for p in "${pids[@]}"; do kill "$p" 2>/dev/null; done
  for p in "${pids[@]}"; do
    for _ in $(seq 50); do kill -0 "$p" 2>/dev/null || break; sleep 0.1; done
    kill -9 "$p" 2>/dev/null
  done
  if [ "$started_munge" = 1 ] && [ -f "$w/munged.pid" ]; then
    kill "$(cat "$w/munged.pid")" 2>/dev/null
  fi
  rm -rf "$w"
}
trap cleanup EXIT

free_port() { python3 -c 'import socket; s=socket.socket(); s.bind(("127.0.0.1",0)); print(s.getsockname()[1])'; }

# munge: a key and a daemon of our own (its socket in the temporary folder).
mkdir -p "$w/munge"
dd if=/dev/urandom of="$w/munge/munge.key" bs=1024 count=1 status=none
chmod 700 "$w/munge"; chmod 400 "$w/munge/munge.key"
munged --force --key-file="$w/munge/munge.key" --socket="$w/munge/socket" \
  --pid-file="$w/munged.pid" --log-file="$w/munged.log" --seed-file="$w/munge/seed"
started_munge=1

host=$(hostname -s)
cpus=$(nproc)
mkdir -p "$w/state" "$w/spool" "$w/parts"
cat >"$w/slurm.conf" <<CONF
ClusterName=plumbline-check
SlurmctldHost=$host(127.0.0.1)
SlurmUser=$(id -un)
SlurmdUser=root
AuthType=auth/munge
AuthInfo=socket=$w/munge/socket
CredType=cred/munge
SlurmctldPort=$(free_port)
SlurmdPort=$(free_port)
StateSaveLocation=$w/state
SlurmdSpoolDir=$w/spool
SlurmctldPidFile=$w/slurmctld.pid
SlurmdPidFile=$w/slurmd.pid
SlurmctldLogFile=$w/slurmctld.log
SlurmdLogFile=$w/slurmd.log
ProctrackType=proctrack/linuxproc
TaskPlugin=task/none
JobAcctGatherType=jobacct_gather/none
AccountingStorageType=accounting_storage/none
SelectType=select/cons_tres
SelectTypeParameters=CR_CPU
SchedulerType=sched/backfill
MpiDefault=none
ReturnToService=2
NodeName=$host NodeAddr=127.0.0.1 CPUs=$cpus State=UNKNOWN
PartitionName=check Nodes=$host Default=YES MaxTime=30 State=UP
CONF
export SLURM_CONF="$w/slurm.conf"

slurmctld -D -i -f "$SLURM_CONF" >"$w/slurmctld.out" 2>&1 &
pids+=($!)
slurmd -D -f "$SLURM_CONF" >"$w/slurmd.out" 2>&1 &
pids+=($!)
up=0
for _ in $(seq 60); do
  if sinfo -h -N -o '%T' 2>/dev/null | grep -qE '^(idle|mixed|allocated)'; then up=1; break; fi
  sleep 1
done
if [ "$up" != 1 ]; then
  echo "slurm-check: the one-node cluster did not come up: FAILED"
  tail -n 20 "$w/slurmctld.log" "$w/slurmd.log" "$w/slurmctld.out" "$w/slurmd.out" 2>/dev/null || true
  exit 1
fi

# 24 runs, the one-machine campaign, then the array job of the README.
"$bin" scenario --out "$w/runs" --runs 24 --duration 10 --seed 11 >/dev/null
cd "$root"
set +e
"$bin" --config config/rig.toml campaign "$w/runs" --jobs 2 --report "$w/one.json" --html "$w/one.html" >"$w/one.txt"
one=$?
set -e
cat >"$w/campaign.sbatch" <<JOB
#!/bin/bash
#SBATCH --job-name=plumbline-campaign
#SBATCH --array=0-3
#SBATCH --output=$w/parts/%A_%a.log
#SBATCH --chdir=$root
"$bin" --config config/rig.toml campaign "$w/runs" --jobs 1 \\
  --shard slurm --partial "$w/parts/part-\${SLURM_ARRAY_TASK_ID}.json"
JOB
if ! timeout 300 sbatch --wait --quiet "$w/campaign.sbatch"; then
  echo "slurm-check: the array job failed: FAILED"
  cat "$w"/parts/*.log 2>/dev/null | tail -n 20 || true
  exit 1
fi
n=$(ls "$w"/parts/part-*.json | wc -l)
set +e
"$bin" --config config/rig.toml campaign --merge "$w/parts" --report "$w/merged.json" --html "$w/merged.html" >"$w/merged.txt"
merged=$?
set -e
if [ "$n" = 4 ] && [ "$one" = "$merged" ] && cmp -s "$w/one.json" "$w/merged.json" \
  && cmp -s "$w/one.html" "$w/merged.html" && cmp -s "$w/one.txt" "$w/merged.txt"; then
  echo "slurm-check: sbatch --array=0-3 over 24 runs, $n partials merged: report, HTML and table equal the one-machine campaign (exit $one): ok"
else
  echo "slurm-check: $n partials; exits $one vs $merged; the merge differs from the one-machine campaign: FAILED"
  diff "$w/one.txt" "$w/merged.txt" | head -n 20 || true
  exit 1
fi
