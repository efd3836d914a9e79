#!/usr/bin/env bash
# Cluster test: a real one-node Slurm (controller + node daemon + munge) on this machine; a sweep
# of 50 stage jobs submitted through Snakemake's Slurm executor plugin with job groups (the stage
# chain of a point in one group, several chains per Slurm job, profiles/slurm/config.yaml). It
# must run in at most a fifth as many Slurm jobs, counted from Slurm's own records (sacct, or the
# job-completion log Slurm writes when there is no accounting database), and its stage files
# must equal a local run's bit for bit. Prints
#   cluster-test: S stage jobs in J Slurm jobs
#   cluster-test: identical
# Needs root and Debian's packages. Every daemon started here is stopped on exit.
set -euo pipefail
repo=$(cd "$(dirname "$0")/../.." && pwd)
py="$repo/.venv/bin/python"
cfg="$repo/tests/configs/cluster.yaml"
work=$(mktemp -d /tmp/eigensweep-slurm.XXXXXX)
started=()

log() { echo "[cluster-test $(date +%H:%M:%S)] $*"; }

cleanup() {
  for pidfile in /run/slurmd.pid /run/slurmctld.pid /run/munge/munged.pid; do
    if [ -f "$pidfile" ]; then
      kill "$(cat "$pidfile")" 2>/dev/null || true
      sleep 1
      rm -f "$pidfile"
    fi
  done
  log "daemons stopped"
}

if [ "$(id -u)" -ne 0 ]; then
  echo "cluster test: needs root (installs and starts Slurm); skipped" >&2
  exit 0
fi

if ! command -v slurmctld >/dev/null 2>&1; then
  log "installing slurm-wlm and munge from the distribution"
  apt-get update -qq >/dev/null
  DEBIAN_FRONTEND=noninteractive apt-get install -y -qq --no-install-recommends slurm-wlm munge >/dev/null
fi
"$py" -c "import snakemake_executor_plugin_slurm" 2>/dev/null || "$py" -m pip install --quiet -e "$repo[slurm]"

host=$(hostname -s)
cpus=$(nproc)
mem=$(slurmd -C | sed -n 's/.*RealMemory=\([0-9]*\).*/\1/p')
mem=$((mem * 9 / 10))
install -d /etc/slurm /var/lib/slurm/slurmctld /var/lib/slurm/slurmd /var/log/slurm
chown -R slurm:slurm /var/lib/slurm /var/log/slurm 2>/dev/null || true
if [ -f /etc/slurm/slurm.conf ] && [ ! -f /etc/slurm/slurm.conf.before-eigensweep ]; then
  cp /etc/slurm/slurm.conf /etc/slurm/slurm.conf.before-eigensweep
fi
cat > /etc/slurm/slurm.conf <<CONF
ClusterName=eigensweep-test
SlurmctldHost=$host
SlurmUser=slurm
AuthType=auth/munge
StateSaveLocation=/var/lib/slurm/slurmctld
SlurmdSpoolDir=/var/lib/slurm/slurmd
SlurmctldPidFile=/run/slurmctld.pid
SlurmdPidFile=/run/slurmd.pid
SelectType=select/cons_tres
SelectTypeParameters=CR_Core_Memory
ProctrackType=proctrack/linuxproc
TaskPlugin=task/none
AccountingStorageType=accounting_storage/none
JobAcctGatherType=jobacct_gather/none
MpiDefault=none
ReturnToService=2
MinJobAge=3600
JobCompType=jobcomp/filetxt
JobCompLoc=/var/log/slurm/jobcomp.log
SlurmctldLogFile=/var/log/slurm/slurmctld.log
SlurmdLogFile=/var/log/slurm/slurmd.log
NodeName=$host CPUs=$cpus RealMemory=$mem State=UNKNOWN
PartitionName=main Nodes=$host Default=YES MaxTime=INFINITE State=UP
CONF

trap cleanup EXIT
rm -f /var/log/slurm/jobcomp.log
install -d -o munge -g munge /run/munge
runuser -u munge -- /usr/sbin/munged
/usr/sbin/slurmctld
/usr/sbin/slurmd
for _ in $(seq 1 60); do
  state=$(sinfo -h -o %T 2>/dev/null | head -n1 || true)
  [ "$state" = "idle" ] && break
  sleep 1
done
log "slurm node state: ${state:-unknown}"
[ "$state" = "idle" ] || { echo "cluster test: Slurm did not come up (see /var/log/slurm)" >&2; exit 1; }

mkdir -p "$work/slurm" "$work/local"
batch=3  # minutes per Slurm job: several point chains per job, more than one job
(cd "$work/slurm" && "$repo/.venv/bin/eigensweep" plan --config "$cfg" --profile slurm \
   --batch-minutes $batch) > "$work/plan.log" 2>&1
grep -A3 "^scheduler jobs" "$work/plan.log" || { cat "$work/plan.log" >&2; exit 1; }
log "running the sweep through the Slurm executor in $work/slurm"
(cd "$work/slurm" && "$repo/.venv/bin/eigensweep" run --config "$cfg" --profile slurm \
   --batch-minutes $batch --cores "$cpus" -- \
   --slurm-no-account --slurm-status-command squeue --slurm-init-seconds-before-status-checks 2 \
   --jobs 4) > "$work/slurm.log" 2>&1 || true
grep -E "scheduler job|has been submitted with SLURM jobid|steps \(|done in|Error" "$work/slurm.log" || true
[ -f "$work/slurm/results/cluster/summary.csv" ] || { echo "cluster test: no summary from the Slurm run" >&2; tail -60 "$work/slurm.log" >&2; exit 1; }

# J from Slurm's own records: sacct where an accounting database exists, else the job
# completion log (one line per finished job, JobCompType=jobcomp/filetxt above)
if sacct -n -X -o JobID >/dev/null 2>&1; then
  n_slurm=$(sacct -n -X -o JobID | grep -c . || true)
  source="sacct"
else
  for _ in $(seq 1 30); do [ -s /var/log/slurm/jobcomp.log ] && break; sleep 1; done
  n_slurm=$(grep -c "JobId=" /var/log/slurm/jobcomp.log || true)
  source="Slurm's job completion log"
fi
n_stage=$(find "$work/slurm/results" -path "*/results/*/*.h5" | grep -vc "/\.damaged/" || true)
log "Slurm jobs counted from $source: $n_slurm"
echo "cluster-test: $n_stage stage jobs in $n_slurm Slurm jobs"
[ "$n_stage" -ge 40 ] || { echo "cluster test: only $n_stage stage jobs (need at least 40)" >&2; exit 1; }
[ "$n_slurm" -gt 0 ] && [ $((n_slurm * 5)) -le "$n_stage" ] || {
  echo "cluster test: $n_slurm Slurm jobs for $n_stage stage jobs is more than a fifth" >&2; exit 1; }

log "running the same sweep locally in $work/local"
(cd "$work/local" && "$repo/.venv/bin/eigensweep" run --config "$cfg" --cores 2) > "$work/local.log" 2>&1

"$py" - "$work/slurm" "$work/local" <<'PY'
import csv, sys
from pathlib import Path
import numpy as np
from eigensweep.store import read_stage

a, b = (Path(p) for p in sys.argv[1:3])
fa = sorted(p.relative_to(a) for p in (a / "results").glob("*/*.h5"))
fb = sorted(p.relative_to(b) for p in (b / "results").glob("*/*.h5"))
assert fa == fb, "different stage files"
for rel in fa:
    x, y = read_stage(a / rel), read_stage(b / rel)
    assert x.arrays.keys() == y.arrays.keys(), rel
    for k in x.arrays:
        xa, ya = np.asarray(x.arrays[k]), np.asarray(y.arrays[k])
        assert xa.dtype == ya.dtype and xa.shape == ya.shape and xa.tobytes() == ya.tobytes(), (rel, k)
    assert x.attrs.get("content_sha256") == y.attrs.get("content_sha256"), rel
sa = {r["key"]: r for r in csv.DictReader(open(a / "results/cluster/summary.csv"))}
sb = {r["key"]: r for r in csv.DictReader(open(b / "results/cluster/summary.csv"))}
assert sa.keys() == sb.keys(), "different optimize keys"
for k in sa:
    assert sa[k]["energy_eh"] == sb[k]["energy_eh"], (k, sa[k]["energy_eh"], sb[k]["energy_eh"])
print(f"[cluster-test] {len(fa)} stage files bit-identical in their datasets and content hashes")
print("cluster-test: identical")
PY
log "passed"
