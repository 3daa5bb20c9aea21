#!/bin/bash
# A one-node Slurm cluster on this machine for the job-array test of issue 4 (run by
# tests/slurm.rs): installs slurm-wlm and munge with apt-get when root and missing, starts a
# private munged (as user munge) and slurmctld and slurmd (as root) with a minimal slurm.conf in
# WORKDIR, submits the ensemble CONFIG as `sbatch --wait --array=0-(N-1)` through
# configs/slurm/ensemble-array.sh, merges the shards into WORKDIR/merged.nc, runs the same
# ensemble on this machine into WORKDIR/single.nc, and stops the daemons it started, also on
# failure or interruption. Exit 0 done, 77 skipped (the reason on stdout), anything else failed.
#
# Usage: tests/slurm_cluster.sh ICEFOLD_BIN CONFIG WORKDIR N
set -uo pipefail

bin=$1
config=$2
work=$3
shards=$4
here=$(cd "$(dirname "$0")/.." && pwd)
array_script=$here/configs/slurm/ensemble-array.sh

log() { echo "slurm-test: $*"; }
skip() { echo "SKIP: $*"; exit 77; }
fail() {
    echo "slurm-test: FAILED: $*"
    for f in "$work"/cluster/*.log "$work"/task-*.log; do
        [ -f "$f" ] && { echo "--- $f (last lines)"; tail -n 25 "$f"; }
    done
    exit 1
}

tools=(munged slurmctld slurmd sbatch sinfo scancel)
have_tools() {
    local t
    for t in "${tools[@]}"; do command -v "$t" >/dev/null 2>&1 || return 1; done
}

if ! have_tools; then
    [ "$(id -u)" = 0 ] || skip "Slurm is not installed (Debian: sudo apt-get install slurm-wlm munge); installing it needs root"
    command -v apt-get >/dev/null 2>&1 || skip "Slurm is not installed and this is not a Debian-like system (no apt-get)"
    log "installing slurm-wlm and munge with apt-get"
    export DEBIAN_FRONTEND=noninteractive
    if ! timeout 600 apt-get install -y -qq slurm-wlm munge >"$work/apt.log" 2>&1; then
        timeout 300 apt-get update -qq >>"$work/apt.log" 2>&1
        timeout 600 apt-get install -y -qq slurm-wlm munge >>"$work/apt.log" 2>&1 || fail "apt-get install slurm-wlm munge failed: $(tail -n 5 "$work/apt.log")"
    fi
    have_tools || fail "slurm-wlm and munge installed but ${tools[*]} not all found"
fi
[ "$(id -u)" = 0 ] || skip "slurmctld and slurmd must run as root for this test (run it as root, as CI does)"
id munge >/dev/null 2>&1 || fail "there is no user munge (the munge package creates it)"

cluster=$work/cluster
mkdir -p "$cluster/state" "$cluster/spool" "$cluster/munge" "$work/shards"
chmod 755 "$work" "$cluster"
chown munge:munge "$cluster/munge"
chmod 700 "$cluster/munge"
dd if=/dev/urandom of="$cluster/munge/munge.key" bs=1024 count=1 status=none
chown munge:munge "$cluster/munge/munge.key"
chmod 400 "$cluster/munge/munge.key"
socket=$cluster/munge/munge.socket

pids=()
helpers=()
# Run a command in the background and wait for it, so that a signal reaches the trap at once
# and the cleanup can stop the command too.
run() {
    "$@" &
    local p=$!
    helpers+=("$p")
    wait "$p"
    local s=$?
    helpers=("${helpers[@]/$p/}")
    return "$s"
}
cleanup() {
    local status=$?
    trap - EXIT INT TERM
    if [ -n "${SLURM_CONF:-}" ] && [ -f "$SLURM_CONF" ] && [ ${#pids[@]} -gt 1 ]; then
        timeout 10 scancel --quiet --user=root >/dev/null 2>&1
        for _ in $(seq 20); do
            [ -z "$(timeout 5 squeue -h -o %i 2>/dev/null)" ] && break
            sleep 0.5
        done
    fi
    local i pid
    for pid in ${helpers[@]+"${helpers[@]}"}; do
        [ -n "$pid" ] && kill -TERM "$pid" 2>/dev/null && wait "$pid" 2>/dev/null
    done
    for ((i = ${#pids[@]} - 1; i >= 0; i--)); do
        pid=${pids[i]}
        kill -TERM "$pid" 2>/dev/null || continue
        for _ in $(seq 50); do kill -0 "$pid" 2>/dev/null || break; sleep 0.2; done
        kill -KILL "$pid" 2>/dev/null
        wait "$pid" 2>/dev/null
    done
    # Job-step daemons (slurmstepd) that our slurmd started outlive it; they are ours if they
    # hold files of this cluster's directory.
    local comm f steps=()
    for d in /proc/[0-9]*; do
        read -r comm <"$d/comm" 2>/dev/null || continue
        [ "$comm" = slurmstepd ] || continue
        for f in "$d"/fd/*; do
            case $(readlink "$f" 2>/dev/null) in "$cluster"/*) steps+=("${d#/proc/}"); break ;; esac
        done
    done
    for pid in ${steps[@]+"${steps[@]}"}; do kill -TERM "$pid" 2>/dev/null; done
    [ ${#steps[@]} -gt 0 ] && sleep 1
    for pid in ${steps[@]+"${steps[@]}"}; do kill -KILL "$pid" 2>/dev/null; done
    [ ${#pids[@]} -gt 0 ] && log "stopped the ${#pids[@]} daemons started (pids ${pids[*]})${steps[0]:+ and ${#steps[@]} job steps}"
    exit "$status"
}
trap cleanup EXIT
trap 'exit 130' INT
trap 'exit 143' TERM

# Two free TCP ports for slurmctld and slurmd.
port_free() { ! ss -Hltn "sport = :$1" 2>/dev/null | grep -q .; }
port=$((20000 + $$ % 20000))
while ! port_free "$port" || ! port_free $((port + 1)); do port=$((port + 2)); done

host=$(hostname -s)
cpus=$(nproc)
export SLURM_CONF=$cluster/slurm.conf
cat >"$SLURM_CONF" <<EOF
# Minimal one-node cluster for icefold's job-array test (written by tests/slurm_cluster.sh).
ClusterName=icefoldtest
SlurmctldHost=$host(127.0.0.1)
SlurmctldPort=$port
SlurmdPort=$((port + 1))
SlurmUser=root
SlurmdUser=root
AuthType=auth/munge
AuthInfo=socket=$socket
CredType=cred/munge
ProctrackType=proctrack/linuxproc
TaskPlugin=task/none
SelectType=select/cons_tres
SelectTypeParameters=CR_Core
SchedulerType=sched/builtin
MpiDefault=none
JobCompType=jobcomp/none
JobAcctGatherType=jobacct_gather/none
AccountingStorageType=accounting_storage/none
StateSaveLocation=$cluster/state
SlurmdSpoolDir=$cluster/spool
SlurmctldPidFile=$cluster/slurmctld.pid
SlurmdPidFile=$cluster/slurmd.pid
SlurmctldLogFile=$cluster/slurmctld.log
SlurmdLogFile=$cluster/slurmd.log
ReturnToService=2
SlurmdTimeout=60
InactiveLimit=0
KillWait=5
NodeName=$host NodeAddr=127.0.0.1 CPUs=$cpus State=UNKNOWN
PartitionName=icefold Nodes=$host Default=YES MaxTime=INFINITE State=UP
EOF

log "starting munged (user munge), slurmctld and slurmd (root) on $host, ports $port and $((port + 1))"
setpriv --reuid=munge --regid=munge --clear-groups \
    munged --foreground --force --socket="$socket" --key-file="$cluster/munge/munge.key" \
    --pid-file="$cluster/munge/munged.pid" --log-file="$cluster/munge/munged.log" \
    --seed-file="$cluster/munge/munged.seed" >"$cluster/munged.log" 2>&1 &
pids+=($!)
for _ in $(seq 100); do [ -S "$socket" ] && break; sleep 0.1; done
[ -S "$socket" ] || fail "munged did not create its socket"
munge -n -S "$socket" | unmunge -S "$socket" >/dev/null 2>&1 || fail "munge credentials do not round-trip through the private munged"

slurmctld -D -i -f "$SLURM_CONF" >"$cluster/slurmctld.out" 2>&1 &
pids+=($!)
slurmd -D -N "$host" -f "$SLURM_CONF" >"$cluster/slurmd.out" 2>&1 &
pids+=($!)
state=
for _ in $(seq 120); do
    state=$(timeout 5 sinfo -h -n "$host" -o %T 2>/dev/null | head -n 1)
    [ "$state" = idle ] && break
    sleep 0.5
done
[ "$state" = idle ] || fail "node $host did not become idle within 60 s (state: '${state:-none}')"
log "node $host is idle with $cpus CPUs"

log "sbatch --wait --array=0-$((shards - 1)) $array_script"
run timeout 300 sbatch --wait --quiet --array=0-$((shards - 1)) --cpus-per-task=1 \
    --chdir="$work" --output="$work/task-%A_%a.log" \
    --export=ALL,ICEFOLD_BIN="$bin",RAYON_NUM_THREADS=1 \
    "$array_script" "$config" "$work/shards" || fail "the job array failed (sbatch --wait exit $?)"
count=$(find "$work/shards" -name 'shard-*.nc' | wc -l)
[ "$count" = "$shards" ] || fail "$count shard files written, expected $shards"
log "job array done: $count shard files"

run "$bin" merge "$work"/shards/shard-*.nc -o "$work/merged.nc" || fail "icefold merge failed"
run "$bin" ensemble "$config" -o "$work/single.nc" || fail "the single-machine ensemble failed"
log "merged $count shards; single-machine run written"
