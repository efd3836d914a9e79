#!/usr/bin/env bash
# Cluster test: a real one-node Slurm (controller + node daemon + munge) on this machine; a sweep
# of 50 stage jobs submitted through Snakemake's Slurm executor plugin with job groups (the stage
# chain of a point in one group, several chains per Slurm job, profiles/slurm/config.yaml). It
# must run in at most a fifth as many Slurm jobs, counted from Slurm's own records (sacct, or the
# job-completion log Slurm writes when there is no accounting database), and its stage files
# must equal a local run's bit for bit. The same sweep then runs through profiles/slurm-batch
# (Snakemake's generic cluster executor with sbatch: the stage jobs of a Slurm job in one
# interpreter), with the same checks, and the machine's CPU time of both cluster runs (from
# /proc/stat: Slurm daemons and every job included) is compared per stage job. Prints
#   cluster-test: S stage jobs in J Slurm jobs            (once per profile)
#   cluster-test: CPU per stage job: slurm X s, slurm-batch Y s
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
"$py" -c "import snakemake_executor_plugin_slurm, snakemake_executor_plugin_cluster_generic" 2>/dev/null \
  || "$py" -m pip install --quiet -e "$repo[slurm]"

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

mkdir -p "$work/slurm" "$work/batch" "$work/local"
# CPU seconds of the whole machine so far (user + nice + system + irq + softirq, /proc/stat)
cpu_s() { awk -v hz="$(getconf CLK_TCK)" '/^cpu /{printf "%.2f", ($2+$3+$4+$7+$8)/hz}' /proc/stat; }
# Slurm jobs finished so far, from Slurm's own records: sacct where an accounting database
# exists, else the job completion log (one line per finished job, JobCompType above)
slurm_jobs() {
  if sacct -n -X -o JobID >/dev/null 2>&1; then
    sacct -n -X -o JobID | grep -c . || true
  else
    grep -c "JobId=" /var/log/slurm/jobcomp.log 2>/dev/null || true
  fi
}
batch=3  # minutes per Slurm job: several point chains per job, more than one job
(cd "$work/slurm" && "$repo/.venv/bin/eigensweep" plan --config "$cfg" --profile slurm \
   --batch-minutes $batch) > "$work/plan.log" 2>&1
grep -A3 "^scheduler jobs" "$work/plan.log" || { cat "$work/plan.log" >&2; exit 1; }
log "running the sweep through the Slurm executor in $work/slurm"
cpu0=$(cpu_s)
(cd "$work/slurm" && "$repo/.venv/bin/eigensweep" run --config "$cfg" --profile slurm \
   --batch-minutes $batch --cores "$cpus" -- \
   --slurm-no-account --slurm-status-command squeue --slurm-init-seconds-before-status-checks 2 \
   --jobs 4) > "$work/slurm.log" 2>&1 || true
cpu_slurm=$(awk -v a="$cpu0" -v b="$(cpu_s)" 'BEGIN{printf "%.1f", b-a}')
grep -E "scheduler job|has been submitted with SLURM jobid|steps \(|done in|Error" "$work/slurm.log" || true
[ -f "$work/slurm/results/cluster/summary.csv" ] || { echo "cluster test: no summary from the Slurm run" >&2; tail -60 "$work/slurm.log" >&2; exit 1; }

for _ in $(seq 1 30); do [ "$(slurm_jobs)" -gt 0 ] && break; sleep 1; done
n_slurm=$(slurm_jobs)
source=$(sacct -n -X -o JobID >/dev/null 2>&1 && echo sacct || echo "Slurm's job completion log")
n_stage=$(find "$work/slurm/results" -path "*/results/*/*.h5" | grep -vc "/\.damaged/" || true)
log "Slurm jobs counted from $source: $n_slurm"
echo "cluster-test: $n_stage stage jobs in $n_slurm Slurm jobs"
[ "$n_stage" -ge 40 ] || { echo "cluster test: only $n_stage stage jobs (need at least 40)" >&2; exit 1; }
[ "$n_slurm" -gt 0 ] && [ $((n_slurm * 5)) -le "$n_stage" ] || {
  echo "cluster test: $n_slurm Slurm jobs for $n_stage stage jobs is more than a fifth" >&2; exit 1; }

log "running the same sweep through profiles/slurm-batch in $work/batch"
before=$(slurm_jobs)
cpu0=$(cpu_s)
(cd "$work/batch" && "$repo/.venv/bin/eigensweep" run --config "$cfg" --profile slurm-batch \
   --batch-minutes $batch --cores "$cpus" -- --jobs 4) > "$work/batch.log" 2>&1 || true
cpu_batch=$(awk -v a="$cpu0" -v b="$(cpu_s)" 'BEGIN{printf "%.1f", b-a}')
grep -E "scheduler job|Submitted group job|done in|Error" "$work/batch.log" || true
[ -f "$work/batch/results/cluster/summary.csv" ] || { echo "cluster test: no summary from the slurm-batch run" >&2; tail -60 "$work/batch.log" >&2; exit 1; }
for _ in $(seq 1 30); do [ "$(slurm_jobs)" -gt "$before" ] && break; sleep 1; done
n_batch=$(( $(slurm_jobs) - before ))
n_stage_b=$(find "$work/batch/results" -path "*/results/*/*.h5" | grep -vc "/\.damaged/" || true)
echo "cluster-test: $n_stage_b stage jobs in $n_batch Slurm jobs (slurm-batch)"
[ "$n_stage_b" -eq "$n_stage" ] || { echo "cluster test: slurm-batch ran $n_stage_b stage jobs, slurm $n_stage" >&2; exit 1; }
[ "$n_batch" -gt 0 ] && [ $((n_batch * 5)) -le "$n_stage_b" ] || {
  echo "cluster test: $n_batch Slurm jobs for $n_stage_b stage jobs is more than a fifth" >&2; exit 1; }
echo "cluster-test: CPU per stage job: slurm $(awk -v c="$cpu_slurm" -v n="$n_stage" 'BEGIN{printf "%.2f", c/n}') s, slurm-batch $(awk -v c="$cpu_batch" -v n="$n_stage_b" 'BEGIN{printf "%.2f", c/n}') s (whole machine: $cpu_slurm s and $cpu_batch s for $n_stage stage jobs)"

log "running the same sweep locally in $work/local"
(cd "$work/local" && "$repo/.venv/bin/eigensweep" run --config "$cfg" --cores 2) > "$work/local.log" 2>&1

cat > "$work/compare.py" <<'PY'
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
PY
"$py" "$work/compare.py" "$work/slurm" "$work/local"
"$py" "$work/compare.py" "$work/batch" "$work/local"
echo "cluster-test: identical"
log "passed"
