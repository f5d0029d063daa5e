#!/usr/bin/env bash
# Shard a sweep over a real batch engine: start a one-node Slurm cluster on
# this machine, submit the sweep as a job array, wait, merge the shards and
# compare the result with the same sweep run in one process.
#
# Exits 0 only if the merged shards equal the single-process sweep, field by
# field apart from the wall-clock fields. Needs root (it installs Debian's
# slurm-wlm and munge when missing and runs the daemons as root). Safe to run
# again: it works in a fresh temporary folder and stops every daemon it
# started, by pid, on exit.
#
#   bash tests/cluster/slurm-demo.sh [path/to/halfwire]
set -euo pipefail
cd "$(dirname "$0")/../.."
ROOT=$PWD
HALFWIRE=${1:-$ROOT/target/release/halfwire}
SHARDS=3

if [ "$(id -u)" != 0 ]; then
    if command -v sudo >/dev/null; then
        exec sudo -E bash "$0" "$HALFWIRE"
    fi
    echo "slurm-demo: needs root (to install and run slurm and munge)" >&2
    exit 1
fi
if ! command -v slurmctld >/dev/null || ! command -v munged >/dev/null; then
    echo "== installing slurm-wlm and munge (Debian packages)"
    apt-get update -qq
    DEBIAN_FRONTEND=noninteractive apt-get install -y -qq --no-install-recommends slurm-wlm munge >/dev/null
fi
[ -x "$HALFWIRE" ] || cargo build --release --quiet
# The array tasks run in another folder: name the binary absolutely.
HALFWIRE=$(realpath "$HALFWIRE")
slurmctld -V

WORK=$(mktemp -d /tmp/halfwire-slurm.XXXXXX)
STARTED=()
cleanup() {
    for pid in "${STARTED[@]}"; do
        kill "$pid" 2>/dev/null || true
    done
    for pid in "${STARTED[@]}"; do
        for _ in $(seq 50); do kill -0 "$pid" 2>/dev/null || break; sleep 0.1; done
        kill -9 "$pid" 2>/dev/null || true
    done
}
trap cleanup EXIT

# munge: the authentication service Slurm's daemons and clients share.
mkdir -p /run/munge /var/lib/munge /var/log/munge
if [ ! -s /etc/munge/munge.key ]; then
    dd if=/dev/urandom of=/etc/munge/munge.key bs=1 count=1024 status=none
fi
# munged runs as root here (--force), so its folders are root's.
chown -R root:root /etc/munge /run/munge /var/lib/munge /var/log/munge
chmod 0400 /etc/munge/munge.key
if munge -n </dev/null >/dev/null 2>&1; then
    echo "== munged already running: using it"
else
    rm -f /run/munge/munged.pid
    munged --force
    for _ in $(seq 50); do [ -s /run/munge/munged.pid ] && break; sleep 0.1; done
    STARTED+=("$(cat /run/munge/munged.pid)")
    munge -n </dev/null >/dev/null
    echo "== munged started (pid ${STARTED[-1]})"
fi

HOST=$(hostname -s)
mkdir -p "$WORK/state" "$WORK/spool"
export SLURM_CONF=$WORK/slurm.conf
cat >"$SLURM_CONF" <<CONF
ClusterName=halfwire-demo
SlurmctldHost=$HOST
SlurmUser=root
SlurmdUser=root
AuthType=auth/munge
ProctrackType=proctrack/linuxproc
TaskPlugin=task/none
SelectType=select/cons_tres
SelectTypeParameters=CR_Core
SchedulerType=sched/backfill
MpiDefault=none
ReturnToService=2
StateSaveLocation=$WORK/state
SlurmdSpoolDir=$WORK/spool
SlurmctldPidFile=$WORK/slurmctld.pid
SlurmdPidFile=$WORK/slurmd.pid
SlurmctldLogFile=$WORK/slurmctld.log
SlurmdLogFile=$WORK/slurmd.log
JobCompType=jobcomp/none
AccountingStorageType=accounting_storage/none
NodeName=$HOST CPUs=$(nproc) State=UNKNOWN
PartitionName=demo Nodes=ALL Default=YES MaxTime=INFINITE State=UP
CONF

slurmctld -D -f "$SLURM_CONF" >"$WORK/slurmctld.out" 2>&1 &
STARTED+=("$!")
slurmd -D -f "$SLURM_CONF" >"$WORK/slurmd.out" 2>&1 &
STARTED+=("$!")
echo "== slurmctld (pid ${STARTED[-2]}) and slurmd (pid ${STARTED[-1]}) started; waiting for the node"
for i in $(seq 120); do
    state=$(sinfo -h -o %T 2>/dev/null || true)
    case "$state" in idle*|mixed*|allocated*) break ;; esac
    if [ "$i" = 120 ]; then
        echo "slurm-demo: the node never became idle (state: '$state')" >&2
        tail -20 "$WORK/slurmctld.log" "$WORK/slurmd.log" >&2 || true
        exit 1
    fi
    sleep 0.5
done
sinfo

# The sweep: a token-passing door bus, 3 bus sizes × 4 turnarounds × 2 replications.
SWEEP=(sweep "$ROOT/scenarios/railcar-doors.toml" --vary "nodes.count=4,6,8"
       --vary "access.turnaround=1us..4us step 1us" --replications 2)
cat >"$WORK/shard.sh" <<JOB
#!/usr/bin/env bash
# One array task: halfwire reads its share from SLURM_ARRAY_TASK_ID/MIN/MAX.
exec "$HALFWIRE" $(printf '%q ' "${SWEEP[@]}") --jobs 1 --out "$WORK/shard-\$SLURM_ARRAY_TASK_ID.jsonl"
JOB
chmod +x "$WORK/shard.sh"
echo "== sbatch --array=0-$((SHARDS - 1)) --wait"
start=$SECONDS
if ! sbatch --array=0-$((SHARDS - 1)) --wait --output="$WORK/task-%a.log" --chdir="$WORK" "$WORK/shard.sh"; then
    echo "slurm-demo: the job array failed; its tasks' logs:" >&2
    cat "$WORK"/task-*.log >&2 || true
    exit 1
fi
echo "   job array done in $((SECONDS - start)) s"
for i in $(seq 0 $((SHARDS - 1))); do
    echo "   task $i: $(grep -h 'shard' "$WORK/task-$i.log" | head -1) ($(wc -l <"$WORK/shard-$i.jsonl") rows)"
done

echo "== merge the shards, and the same sweep in one process"
"$HALFWIRE" merge "$WORK"/shard-*.jsonl --out "$WORK/merged-shards.jsonl"
"$HALFWIRE" "${SWEEP[@]}" --out "$WORK/single.jsonl" 2>/dev/null
"$HALFWIRE" merge "$WORK/single.jsonl" --out "$WORK/merged-single.jsonl"
echo "   files in $WORK"

python3 - "$WORK/merged-shards.jsonl" "$WORK/merged-single.jsonl" <<'PY'
import json, sys
def load(path):
    rows = []
    for line in open(path):
        r = json.loads(line)
        r.pop("wall_s")
        r["report"].pop("run")
        rows.append(r)
    return rows
a, b = load(sys.argv[1]), load(sys.argv[2])
if a != b:
    print(f"slurm-demo: MISMATCH: {len(a)} merged-shard rows differ from {len(b)} single-process rows")
    sys.exit(1)
print(f"slurm-demo: MATCH: {len(a)} points, {sum(len(r['replications']) for r in a)} runs; "
      "merged shards equal the single-process sweep field by field (wall-clock fields aside)")
PY
