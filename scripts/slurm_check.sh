#!/usr/bin/env bash
# Runs one tripass job through a real Slurm on this machine and checks that the union
# of its shards equals the whole run byte for byte.
#
# It installs Debian's slurm-wlm and munge if they are missing, starts munged,
# slurmctld and slurmd on this host with a minimal slurm.conf of its own (in a scratch
# folder, on ports of its own), builds tripass, makes a synthetic stack, submits the job
# as an N-task array with the recipe in scripts/cluster (sbatch --array ... --wait), then
# the join step as a dependent job, and compares OUT with a whole run: once with a
# multi-page TIFF output (part files joined) and once with a slice folder. It stops the
# daemons it started, by their process ids, however it ends.
#
#   scripts/slurm_check.sh            # N=4 tasks
#   N=7 scripts/slurm_check.sh
#
# Exit status: 0 the bytes are equal; 1 they differ, or tripass or the job failed (a
# tripass problem); 77 Slurm could not be installed or brought up here (a problem of
# the machine, not of tripass: .ci/run reports it and goes on).
set -euo pipefail
cd "$(dirname "$0")/.."
export PATH="$PATH:/usr/local/go/bin:/usr/sbin:/sbin"
N=${N:-4}
SKIP=77

say() { echo "slurm_check: $*"; }
skip() { say "SKIP: $*"; exit "$SKIP"; }

work=$(mktemp -d /tmp/tripass-slurm.XXXXXX)
chmod 755 "$work"
pids=()
cleanup() {
  local status=$?
  for pid in "${pids[@]}"; do
    kill "$pid" 2>/dev/null || true
  done
  for pid in "${pids[@]}"; do
    for _ in $(seq 50); do kill -0 "$pid" 2>/dev/null || break; sleep 0.1; done
    kill -9 "$pid" 2>/dev/null || true
  done
  if [ "$status" -ne 0 ] && [ "$status" -ne "$SKIP" ]; then
    say "logs kept in $work"
  else
    rm -rf "$work"
  fi
  exit "$status"
}
trap cleanup EXIT
trap 'exit 130' INT TERM

# 1. Packages.
if ! command -v sbatch >/dev/null || ! command -v slurmctld >/dev/null || ! command -v munged >/dev/null; then
  if [ "$(id -u)" -ne 0 ] || ! command -v apt-get >/dev/null; then
    skip "slurm-wlm and munge are not installed and cannot be installed (need root and apt-get)"
  fi
  say "installing slurm-wlm and munge"
  apt-get update -qq >"$work/apt.log" 2>&1 || skip "apt-get update failed (see $work/apt.log)"
  DEBIAN_FRONTEND=noninteractive apt-get install -y -qq slurm-wlm munge >>"$work/apt.log" 2>&1 ||
    skip "apt-get install slurm-wlm munge failed"
fi
[ "$(id -u)" -eq 0 ] || skip "the daemons need root (SlurmUser=root, munged as the munge user)"

# 2. munge: reuse a running munged, or start one as the munge user.
if munge -n 2>/dev/null | unmunge >/dev/null 2>&1; then
  say "using the munged already running"
else
  if [ ! -s /etc/munge/munge.key ]; then
    mungekey -c -k /etc/munge/munge.key >/dev/null 2>&1 || skip "mungekey could not create a key"
  fi
  chown munge:munge /etc/munge/munge.key && chmod 400 /etc/munge/munge.key
  install -d -o munge -g munge -m 755 /run/munge
  install -d -o munge -g munge -m 700 /var/lib/munge /var/log/munge
  setpriv --reuid=munge --regid=munge --init-groups /usr/sbin/munged --foreground >"$work/munged.log" 2>&1 &
  pids+=($!)
  for _ in $(seq 50); do
    munge -n 2>/dev/null | unmunge >/dev/null 2>&1 && break
    sleep 0.2
  done
  munge -n 2>/dev/null | unmunge >/dev/null 2>&1 || skip "munged did not start: $(tail -3 "$work/munged.log" | tr '\n' ' ')"
fi

# 3. slurm.conf for this host alone, then slurmctld and slurmd.
host=$(hostname -s)
cpus=$(nproc)
mem=$(( $(free -m | awk '/^Mem:/ {print $2}') * 9 / 10 ))
port=$(( 20000 + RANDOM % 20000 ))
mkdir -p "$work/state" "$work/spool" "$work/logs"
export SLURM_CONF="$work/slurm.conf"
cat >"$SLURM_CONF" <<CONF
# Written by scripts/slurm_check.sh for one check run on this host.
ClusterName=tripasscheck
SlurmctldHost=$host
SlurmctldPort=$port
SlurmdPort=$((port + 1))
SlurmUser=root
SlurmdUser=root
AuthType=auth/munge
CredType=cred/munge
ProctrackType=proctrack/linuxproc
TaskPlugin=task/none
JobAcctGatherType=jobacct_gather/none
AccountingStorageType=accounting_storage/none
JobCompType=jobcomp/none
MpiDefault=none
SelectType=select/cons_tres
SelectTypeParameters=CR_Core
SchedulerType=sched/backfill
ReturnToService=2
StateSaveLocation=$work/state
SlurmdSpoolDir=$work/spool
SlurmctldPidFile=$work/slurmctld.pid
SlurmdPidFile=$work/slurmd.pid
SlurmctldLogFile=$work/slurmctld.log
SlurmdLogFile=$work/slurmd.log
NodeName=$host CPUs=$cpus RealMemory=$mem State=UNKNOWN
PartitionName=check Nodes=$host Default=YES MaxTime=INFINITE State=UP
CONF
slurmctld -D -i -f "$SLURM_CONF" >"$work/slurmctld.out" 2>&1 &
pids+=($!)
slurmd -D -f "$SLURM_CONF" >"$work/slurmd.out" 2>&1 &
pids+=($!)
up=
for _ in $(seq 120); do
  state=$(sinfo -h -n "$host" -o %T 2>/dev/null || true)
  case "$state" in idle*|mixed*|allocated*) up=1; break ;; esac
  sleep 0.5
done
if [ -z "$up" ]; then
  say "slurmctld log:"; tail -5 "$work/slurmctld.log" 2>/dev/null || true
  say "slurmd log:"; tail -5 "$work/slurmd.log" 2>/dev/null || true
  skip "the Slurm node did not come up (state '${state:-none}')"
fi
say "Slurm $(sinfo -V | awk '{print $2}') up on $host: $cpus CPUs, ${mem} MB"

# 4. tripass and a synthetic stack (a porous rock core of our own), as float32.
go build -buildvcs=false -o "$work/tripass" ./cmd/tripass
export TRIPASS="$work/tripass"
"$TRIPASS" demo "$work/demo" --size 96,80,37 -q >"$work/demo.log" 2>&1 || { cat "$work/demo.log"; exit 1; }
in="$work/core.tif"
"$TRIPASS" convert "$work/demo/rock-core.tif" "$in" --type float32 -q

# 5. For each output kind: the whole run, the array, the join, the comparison.
# submit runs sbatch --wait with a time limit. A job that never started within it is
# Slurm's problem here (exit 77); one that started and failed or hung is tripass's.
submit() {
  local what=$1; shift
  local status=0
  (cd "$work" && timeout 600 sbatch --wait --export=ALL "$@") >/dev/null 2>"$work/sbatch.err" || status=$?
  [ "$status" -eq 0 ] && return 0
  if [ -z "$(ls -A "$work/logs")" ]; then
    squeue 2>/dev/null || true
    skip "the $what never ran under Slurm (sbatch status $status: $(tr '\n' ' ' <"$work/sbatch.err"))"
  fi
  say "the $what failed (sbatch status $status):"
  cat "$work/sbatch.err" "$work"/logs/* >&2 || true
  return 1
}
check() {
  local out=$1; shift
  local whole=$1; shift
  "$TRIPASS" "$@" "$in" "$whole" -q
  rm -rf "$work/logs" && mkdir "$work/logs"
  submit "array job" --array=1-"$N" --output="$work/logs/%A_%a.out" \
    scripts_cluster/tripass-array.sbatch "$1" "$in" "$out" "${@:2}" -q
  parts=$(ls "$work/logs" | wc -l)
  submit "join job" --output="$work/logs/join-%j.out" scripts_cluster/tripass-join.sbatch "$out"
  if [ -d "$whole" ]; then
    diff -r "$whole" "$out" >/dev/null || { say "FAIL: $out differs from the whole run $whole"; return 1; }
  else
    cmp "$whole" "$out" || { say "FAIL: $out differs from the whole run $whole"; return 1; }
  fi
  say "ok: $* in $parts Slurm tasks + join = the whole run, byte for byte ($(du -sk "$out" | cut -f1) KiB)"
}
# check_chain does the same through scripts/cluster/submit-slurm.sh, the way a user
# submits: the array, and the join as a job that depends on it; then waits for the join.
check_chain() {
  local out=$1; shift
  local whole=$1; shift
  "$TRIPASS" "$@" "$in" "$whole" -q
  local ids join state=
  ids=$(cd "$work" && N=$N scripts_cluster/submit-slurm.sh "$1" "$in" "$out" "${@:2}" -q)
  join=$(echo "$ids" | sed -n 's/.*join job \([0-9][0-9]*\).*/\1/p')
  [ -n "$join" ] || { say "submit-slurm.sh printed no join job id: $ids"; return 1; }
  for _ in $(seq 600); do
    state=$(scontrol show job -o "$join" 2>/dev/null | sed -n 's/.*JobState=\([A-Z_]*\).*/\1/p')
    case "$state" in
      COMPLETED) break ;;
      FAILED|CANCELLED|TIMEOUT|NODE_FAIL|OUT_OF_MEMORY|BOOT_FAIL|DEADLINE)
        say "the join job ended $state:"; cat "$work"/tripass-*.out >&2 || true; return 1 ;;
    esac
    sleep 1
  done
  [ "$state" = COMPLETED ] || skip "the join job did not finish in 10 minutes (state '${state:-unknown}')"
  cmp "$whole" "$out" || { say "FAIL: $out differs from the whole run $whole"; return 1; }
  say "ok: $* in $N Slurm tasks + dependent join job (submit-slurm.sh) = the whole run, byte for byte"
}
cp -r scripts/cluster "$work/scripts_cluster"
check "$work/smooth.tif" "$work/smooth-whole.tif" smooth --sigma 1.5 --edge reflect --compress lzw
check "$work/grad/" "$work/grad-whole/" gradient --operator gaussian --sigma 1 --edge periodic
check_chain "$work/log.nii.gz" "$work/log-whole.nii.gz" laplace --sigma 1 --edge constant --fill 3
say "PASS"
