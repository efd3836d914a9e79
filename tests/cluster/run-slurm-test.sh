#!/usr/bin/env bash
# Cluster test: a real one-node Slurm (controller + node daemon + munge) on this machine, a small
# sweep submitted through Snakemake's Slurm executor plugin, its summary compared with a local
# run of the same sweep (energies must be identical). Needs root and Debian's packages.
# Every daemon started here is stopped on exit.
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
"$py" -m pip install --quiet -e "$repo[slurm]"

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
MinJobAge=300
SlurmctldLogFile=/var/log/slurm/slurmctld.log
SlurmdLogFile=/var/log/slurm/slurmd.log
NodeName=$host CPUs=$cpus RealMemory=$mem State=UNKNOWN
PartitionName=main Nodes=$host Default=YES MaxTime=INFINITE State=UP
CONF

trap cleanup EXIT
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
log "running the sweep through the Slurm executor in $work/slurm"
(cd "$work/slurm" && "$repo/.venv/bin/eigensweep" run --config "$cfg" --profile slurm -- \
   --slurm-no-account --slurm-status-command squeue --slurm-init-seconds-before-status-checks 2 \
   --jobs 4 --default-resources mem_mb=500 runtime=10) > "$work/slurm.log" 2>&1 || true
grep -E "has been submitted with SLURM jobid|steps \(|done in|Error" "$work/slurm.log" || true
n_sub=$(grep -c "has been submitted with SLURM jobid" "$work/slurm.log" || true)
log "$n_sub stage jobs were submitted through Slurm"
[ "$n_sub" -gt 0 ] || { echo "cluster test: no Slurm submission seen" >&2; tail -40 "$work/slurm.log" >&2; exit 1; }
[ -f "$work/slurm/results/cluster/summary.csv" ] || { echo "cluster test: no summary from the Slurm run" >&2; tail -40 "$work/slurm.log" >&2; exit 1; }

log "running the same sweep locally in $work/local"
(cd "$work/local" && "$repo/.venv/bin/eigensweep" run --config "$cfg" --cores 2) > "$work/local.log" 2>&1

"$py" - "$work/slurm/results/cluster/summary.csv" "$work/local/results/cluster/summary.csv" <<'PY'
import csv, sys
a = {r["key"]: r for r in csv.DictReader(open(sys.argv[1]))}
b = {r["key"]: r for r in csv.DictReader(open(sys.argv[2]))}
assert a.keys() == b.keys(), "different stage keys"
for k in a:
    assert a[k]["energy_eh"] == b[k]["energy_eh"], (k, a[k]["energy_eh"], b[k]["energy_eh"])
print(f"[cluster-test] {len(a)} optimize results identical between Slurm and local runs")
PY
log "passed"
