#!/usr/bin/env bash
# End-to-end check of `termwise slurm` on a real one-node Slurm cluster started on localhost: the job array
# and the report job must produce byte-identical evaluations.csv/term_contributions.csv to a local `termwise run` of the same
# experiment, and report.html. Needs root (installs Debian's slurm-wlm and munge with apt-get; skips with a
# message if they cannot be installed). Starts munged (unless one already answers on /run/munge), slurmctld
# and slurmd directly (no systemd), records their PIDs and stops only those at exit.
#
# Usage: bash tests/slurm/run_slurm_test.sh        (TERMWISE_BIN=/path/to/termwise to skip the cargo build;
#        SLURM_TEST_TIMEOUT=600 seconds to wait for the jobs; KEEP_SLURM_TEST_DIR=1 to keep the temp folder)
set -euo pipefail
cd "$(dirname "$0")/../.."
repo=$(pwd)
timeout_s=${SLURM_TEST_TIMEOUT:-600}

say() { echo "slurm-test: $*"; }

# --- packages -------------------------------------------------------------------------------------------
if ! command -v slurmctld >/dev/null || ! command -v slurmd >/dev/null || ! command -v munged >/dev/null || ! command -v sbatch >/dev/null; then
  if [ "$(id -u)" -ne 0 ] || ! command -v apt-get >/dev/null; then
    say "SKIPPED: slurm-wlm/munge are not installed and cannot be installed here (needs root and apt-get)"
    exit 0
  fi
  say "installing slurm-wlm and munge with apt-get"
  if ! { apt-get update -qq && DEBIAN_FRONTEND=noninteractive apt-get install -y -qq slurm-wlm munge >/dev/null; }; then
    say "SKIPPED: apt-get could not install slurm-wlm and munge"
    exit 0
  fi
fi
if [ "$(id -u)" -ne 0 ]; then
  say "SKIPPED: starting slurmctld/slurmd with SlurmUser=root needs root"
  exit 0
fi

# --- binary ---------------------------------------------------------------------------------------------
if [ -z "${TERMWISE_BIN:-}" ]; then
  cargo build --release --quiet
  TERMWISE_BIN="${CARGO_TARGET_DIR:-$repo/target}/release/termwise"
fi
TERMWISE_BIN=$(readlink -f "$TERMWISE_BIN")
[ -x "$TERMWISE_BIN" ] || { say "FAILED: no binary at $TERMWISE_BIN"; exit 1; }

# --- temp dir, cleanup of exactly the daemons started here -------------------------------------------------
tmp=$(mktemp -d /tmp/termwise-slurm-test.XXXXXX)
pids=()
cleanup() {
  local rc=$?
  for ((i = ${#pids[@]} - 1; i >= 0; i--)); do
    kill "${pids[$i]}" 2>/dev/null || true
  done
  for p in "${pids[@]}"; do
    for _ in $(seq 50); do kill -0 "$p" 2>/dev/null || break; sleep 0.1; done
    kill -9 "$p" 2>/dev/null || true
  done
  if [ "$rc" -ne 0 ]; then
    for f in "$tmp"/*.log "$tmp"/slurm-results/slurm/logs/*; do
      [ -f "$f" ] && { echo "----- $f (tail)"; tail -n 30 "$f"; }
    done
  fi
  if [ -z "${KEEP_SLURM_TEST_DIR:-}" ]; then rm -rf "$tmp"; else say "kept $tmp"; fi
  exit "$rc"
}
trap cleanup EXIT
trap 'exit 130' INT TERM

# --- munge ----------------------------------------------------------------------------------------------
mkdir -p /run/munge
chmod 0755 /run/munge
if munge -n 2>/dev/null | unmunge >/dev/null 2>&1; then
  say "using the munged already answering on /run/munge"
else
  dd if=/dev/urandom of="$tmp/munge.key" bs=1024 count=1 status=none
  chmod 0400 "$tmp/munge.key"
  munged --foreground --force --key-file="$tmp/munge.key" --socket=/run/munge/munge.socket.2 \
    --pid-file="$tmp/munged.pid" --seed-file="$tmp/munged.seed" --log-file="$tmp/munged.log" >"$tmp/munged.out" 2>&1 &
  pids+=($!)
  for _ in $(seq 50); do munge -n 2>/dev/null | unmunge >/dev/null 2>&1 && break; sleep 0.2; done
  munge -n | unmunge >/dev/null || { say "FAILED: munged does not answer"; exit 1; }
  say "munged started (pid ${pids[-1]})"
fi

# --- slurm.conf for one node on localhost ----------------------------------------------------------------
node=$(hostname -s)
mem_mb=$(( $(awk '/MemTotal/ {print $2}' /proc/meminfo) / 1024 * 8 / 10 ))
port=$(( 20000 + RANDOM % 20000 ))
mkdir -p "$tmp/state" "$tmp/spool"
export SLURM_CONF="$tmp/slurm.conf"
cat > "$SLURM_CONF" <<CONF
ClusterName=termwisetest
SlurmctldHost=$node(127.0.0.1)
SlurmctldPort=$port
SlurmdPort=$((port + 1))
SlurmUser=root
SlurmdUser=root
AuthType=auth/munge
StateSaveLocation=$tmp/state
SlurmdSpoolDir=$tmp/spool
SlurmctldPidFile=$tmp/slurmctld.pid
SlurmdPidFile=$tmp/slurmd.pid
SlurmctldLogFile=$tmp/slurmctld.log
SlurmdLogFile=$tmp/slurmd.log
ProctrackType=proctrack/linuxproc
TaskPlugin=task/none
SelectType=select/cons_tres
SelectTypeParameters=CR_Core
AccountingStorageType=accounting_storage/none
JobAcctGatherType=jobacct_gather/none
JobCompType=jobcomp/none
MailProg=/bin/true
MpiDefault=none
ReturnToService=2
MinJobAge=600
NodeName=$node NodeAddr=127.0.0.1 CPUs=2 RealMemory=$mem_mb State=UNKNOWN
PartitionName=local Nodes=$node Default=YES MaxTime=INFINITE State=UP
CONF

slurmctld -D -c -f "$SLURM_CONF" >"$tmp/slurmctld.out" 2>&1 &
pids+=($!)
slurmd -D -f "$SLURM_CONF" >"$tmp/slurmd.out" 2>&1 &
pids+=($!)
say "slurmctld (pid ${pids[-2]}) and slurmd (pid ${pids[-1]}) on port $port, node $node"
ready=
for _ in $(seq 60); do
  if sinfo -h -o '%t' 2>/dev/null | grep -Eq '^(idle|mix|alloc)'; then ready=1; break; fi
  sleep 1
done
[ -n "$ready" ] || { say "FAILED: node $node never became idle"; sinfo || true; exit 1; }

# --- a tiny experiment: 2 variants x 2 seeds ----------------------------------------------------------------
cat > "$tmp/tiny.toml" <<TOML
[study]
name = "slurm-check"
seeds = 2
budget = 4096
eval_every = 2048
eval_episodes = 5
reference = "goal-time-acc"

[scenario]
file = "$repo/experiments/scenarios/reach-2link.toml"

[reward.goal]
bonus = 5.0
[reward.time]
cost = 0.01
[reward.acceleration]
weight = 1.0

[curriculum]
kind = "uniform"

[learner]
num_envs = 8
rollout_steps = 64

[[variant]]
name = "goal-time-acc"

[[variant]]
name = "no-acceleration-term"
[variant.reward.acceleration]
weight = 0.0
TOML

# --- on the cluster -------------------------------------------------------------------------------------------
cd "$tmp"
"$TERMWISE_BIN" slurm tiny.toml --out slurm-results --time 00:10:00 --mem 500M --max-parallel 2
grep -q -- '--array=0-3%2' slurm-results/slurm/cells.sbatch || { say "FAILED: unexpected --array line"; exit 1; }
bash slurm-results/slurm/submit.sh
cells=$(awk '$1 == "cells" {print $2}' slurm-results/slurm/job-ids)
report=$(awk '$1 == "report" {print $2}' slurm-results/slurm/job-ids)
say "waiting up to ${timeout_s} s for job array $cells and report job $report"
start=$(date +%s)
while [ -n "$(squeue -h -j "$cells,$report" 2>/dev/null)" ]; do
  if [ $(( $(date +%s) - start )) -gt "$timeout_s" ]; then
    say "FAILED: jobs still queued after ${timeout_s} s"; squeue; exit 1
  fi
  sleep 3
done
say "jobs left the queue after $(( $(date +%s) - start )) s"
scontrol show job "$report" 2>/dev/null | grep -o 'JobState=[A-Z]*' || true
"$TERMWISE_BIN" status slurm-results | tee status.txt
grep -q '4 done, 0 running, 0 stale, 0 diverged, 0 interrupted, 0 missing' status.txt \
  || { say "FAILED: not every run is done"; exit 1; }
[ -s slurm-results/report.html ] || { say "FAILED: no report.html from the report job"; exit 1; }

# --- the same experiment locally, compared byte for byte -------------------------------------------------------
"$TERMWISE_BIN" run tiny.toml --out local-results --jobs 2 --no-report
fail=0
n=0
for f in $(cd local-results && find . -name evaluations.csv -o -name term_contributions.csv | sort); do
  n=$((n + 1))
  if ! cmp -s "local-results/$f" "slurm-results/$f"; then
    say "DIFFERS: $f"; fail=1
  fi
done
[ "$n" -eq 8 ] || { say "FAILED: expected 8 csv files (4 runs x progress/terms), found $n"; exit 1; }
[ "$fail" -eq 0 ] || { say "FAILED: Slurm and local results differ"; exit 1; }
say "PASSED: $n evaluations.csv/term_contributions.csv files byte-identical between Slurm and local runs; report.html present"

# --- a raced study: a job array per stage, the rung decision between them, the report after the last ---------
sed -e 's/^name = "slurm-check"/name = "slurm-raced"/' -e 's/^seeds = 2/seeds = 5/' \
  -e 's/^reference = "goal-time-acc"/reference = "goal-time-acc"\n[study.racing]\nrungs = [0.8]\nmax_seeds = 5/' \
  tiny.toml > raced.toml
"$TERMWISE_BIN" slurm raced.toml --out slurm-raced --time 00:10:00 --mem 500M --max-parallel 2
grep -q -- '--array=0-7%2' slurm-raced/slurm/cells-stage-0.sbatch || { say "FAILED: unexpected stage-0 --array line"; exit 1; }
grep -q -- '--array=8-9%2' slurm-raced/slurm/cells-stage-1.sbatch || { say "FAILED: unexpected stage-1 --array line"; exit 1; }
bash slurm-raced/slurm/submit.sh
ids=$(awk '{print $2}' slurm-raced/slurm/job-ids | paste -sd, -)
say "waiting up to ${timeout_s} s for the raced study's jobs $ids"
start=$(date +%s)
while [ -n "$(squeue -h -j "$ids" 2>/dev/null)" ]; do
  if [ $(( $(date +%s) - start )) -gt "$timeout_s" ]; then
    say "FAILED: raced jobs still queued after ${timeout_s} s"; squeue; exit 1
  fi
  sleep 3
done
"$TERMWISE_BIN" status slurm-raced | tee status-raced.txt
grep -q ' 0 missing' status-raced.txt || { say "FAILED: the raced study has missing runs"; exit 1; }
[ -s slurm-raced/report.html ] && [ -s slurm-raced/racing.json ] || { say "FAILED: no report.html or racing.json"; exit 1; }
"$TERMWISE_BIN" run raced.toml --out local-raced --jobs 2 --no-report
cmp -s local-raced/racing.json slurm-raced/racing.json || { say "FAILED: racing decisions differ"; exit 1; }
fail=0
n=0
for f in $(cd local-raced && find . -name evaluations.csv | sort); do
  n=$((n + 1))
  cmp -s "local-raced/$f" "slurm-raced/$f" || { say "DIFFERS: $f"; fail=1; }
done
[ "$n" -ge 8 ] && [ "$fail" -eq 0 ] || { say "FAILED: raced Slurm and local results differ ($n files)"; exit 1; }
say "PASSED: raced study: racing.json and $n evaluations.csv files byte-identical between Slurm (stage arrays + decision job) and local runs"
