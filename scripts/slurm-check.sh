#!/usr/bin/env bash
# Runs an example ensemble plan as a Slurm job array on a one-node cluster started here
# (munge, slurmctld, slurmd from the distribution's packages), collects it, and checks
# that the member data are identical to a local run of the same plan. Needs root (it
# installs the packages if missing and starts the daemons); stops what it started.
# Prints "slurm: N passed, M failed" and exits non-zero on failure.
set -euo pipefail
cd "$(dirname "$0")/.."
BIN="${DEEPDRY_BIN:-target/release/deepdry}"
if [ "$(id -u)" -ne 0 ]; then
    echo "slurm: skipped (needs root to start a cluster)"
    exit 0
fi
if ! command -v slurmctld >/dev/null 2>&1 || ! command -v munged >/dev/null 2>&1; then
    echo "installing slurm-wlm and munge ..."
    export DEBIAN_FRONTEND=noninteractive
    apt-get update -qq
    apt-get install -y -qq --no-install-recommends slurm-wlm munge >/dev/null
fi
WORK="$(mktemp -d /tmp/deepdry-slurm-XXXXXX)"
PIDS=()
cleanup() {
    for p in "${PIDS[@]:-}"; do [ -n "$p" ] && kill "$p" 2>/dev/null || true; done
    sleep 1
    for p in "${PIDS[@]:-}"; do [ -n "$p" ] && kill -9 "$p" 2>/dev/null || true; done
    rm -rf "$WORK"
}
trap cleanup EXIT

# munge: a fresh key, the daemon on its own socket.
mkdir -p "$WORK/munge"
dd if=/dev/urandom of="$WORK/munge/munge.key" bs=1 count=1024 status=none
chmod 600 "$WORK/munge/munge.key"
SOCKET="$WORK/munge/munge.socket"
munged --force --key-file="$WORK/munge/munge.key" --socket="$SOCKET" \
    --pid-file="$WORK/munge/munged.pid" --log-file="$WORK/munge/munged.log" \
    --seed-file="$WORK/munge/munged.seed"
PIDS+=("$(cat "$WORK/munge/munged.pid")")

HOST="$(hostname -s)"
CPUS="$(nproc)"
mkdir -p "$WORK/state" "$WORK/spool" "$WORK/log"
cat > "$WORK/slurm.conf" <<EOF
ClusterName=deepdry-ci
SlurmctldHost=$HOST
SlurmUser=root
SlurmdUser=root
AuthType=auth/munge
AuthInfo=socket=$SOCKET
CryptoType=crypto/munge
StateSaveLocation=$WORK/state
SlurmdSpoolDir=$WORK/spool
SlurmctldPidFile=$WORK/slurmctld.pid
SlurmdPidFile=$WORK/slurmd.pid
SlurmctldLogFile=$WORK/log/slurmctld.log
SlurmdLogFile=$WORK/log/slurmd.log
SlurmctldPort=16817
SlurmdPort=16818
ProctrackType=proctrack/linuxproc
TaskPlugin=task/none
SelectType=select/cons_tres
SelectTypeParameters=CR_CPU
JobAcctGatherType=jobacct_gather/none
AccountingStorageType=accounting_storage/none
MpiDefault=none
ReturnToService=2
SchedulerType=sched/backfill
NodeName=$HOST CPUs=$CPUS State=UNKNOWN
PartitionName=ci Nodes=$HOST Default=YES MaxTime=INFINITE State=UP
EOF
export SLURM_CONF="$WORK/slurm.conf"
slurmctld -f "$SLURM_CONF"
for _ in $(seq 50); do [ -s "$WORK/slurmctld.pid" ] && break; sleep 0.2; done
PIDS+=("$(cat "$WORK/slurmctld.pid")")
slurmd -f "$SLURM_CONF"
for _ in $(seq 50); do [ -s "$WORK/slurmd.pid" ] && break; sleep 0.2; done
PIDS+=("$(cat "$WORK/slurmd.pid")")
for _ in $(seq 100); do
    if sinfo -h -o %t 2>/dev/null | grep -qE '^(idle|mix|alloc)'; then break; fi
    sleep 0.2
done
sinfo -h -o "%P %t %D" || true

# The plan: a small ensemble of the quickstart column (6 members, 20 years).
sed -e 's/end_year = 1000.0/end_year = 20.0/' -e 's/times_year = \[1.0, 10.0, 100.0\]/times_year = [1.0, 10.0]/' \
    cases/quickstart.toml > "$WORK/case.toml"
cat > "$WORK/plan.toml" <<'EOF'
[ensemble]
case = "case.toml"
members = 6
seed = 11
sampling = "latin-hypercube"
series = ["surface_water_flux", "drying_front_depth"]
times_year = [1.0, 5.0, 20.0]

[[ensemble.parameters]]
key = "soils.sandy_loam.van_genuchten.n"
distribution = "uniform"
min = 1.6
max = 2.2
EOF
BIN_ABS="$(cd "$(dirname "$BIN")" && pwd)/$(basename "$BIN")"
cat > "$WORK/task.sh" <<EOF
#!/bin/bash
exec "$BIN_ABS" ensemble run "$WORK/plan.toml" --out "$WORK/cluster" --jobs 1 --quiet \
    --shard "\$SLURM_ARRAY_TASK_ID/\$SLURM_ARRAY_TASK_COUNT"
EOF
chmod +x "$WORK/task.sh"
passed=0
failed=0
if timeout 300 sbatch --wait --array=0-2 --output="$WORK/log/task-%a.out" "$WORK/task.sh" >/dev/null; then
    "$BIN" ensemble collect "$WORK/cluster"
    "$BIN" ensemble run "$WORK/plan.toml" --out "$WORK/local" --jobs 2 --quiet >/dev/null
    "$BIN" ensemble collect "$WORK/local" >/dev/null
    if diff -r "$WORK/cluster/members" "$WORK/local/members" >/dev/null \
        && "$BIN" ensemble status "$WORK/cluster" | grep -q "6 members: 6 done, 0 failed, 0 missing"; then
        passed=1
    else
        echo "slurm: the job array's members differ from the local run's" >&2
        failed=1
    fi
else
    echo "slurm: the job array failed" >&2
    for f in "$WORK"/log/*; do echo "== $f" >&2; tail -8 "$f" >&2; done
    failed=1
fi
echo "slurm: $passed passed, $failed failed"
[ "$failed" -eq 0 ]
