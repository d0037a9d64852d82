#!/usr/bin/env bash
# Start a one-node SLURM (munge + slurmctld + slurmd) on this machine, for the
# opt-in cluster test tests/workflow/test_slurm.py.  Needs root, Debian/Ubuntu.
#
# Idempotent: packages are installed only when missing, the munge key and
# slurm.conf are written only when absent (or when slurm.conf was written by
# this script for another host/CPU count), and daemons are started only when
# they are not already running.  Safe to run twice.
#
# The configuration has no cgroups, no accounting database and no sacct, so the
# Snakemake SLURM executor must poll with `--slurm-status-command squeue` and
# submit with `--slurm-no-account` (see config/profiles/slurm/profile.yaml).
set -euo pipefail

if [ "$(id -u)" -ne 0 ]; then
    echo "start_slurm.sh: must run as root (installs packages, starts daemons)" >&2
    exit 1
fi

export DEBIAN_FRONTEND=noninteractive
if ! command -v slurmctld >/dev/null 2>&1 || ! command -v munged >/dev/null 2>&1; then
    apt-get update -q
    apt-get install -y -q slurm-wlm munge
fi

# --- munge: key owned by the munge user, daemon run as that user -------------
install -d -o munge -g munge -m 0700 /etc/munge
install -d -o munge -g munge -m 0711 /run/munge
install -d -o munge -g munge -m 0700 /var/lib/munge /var/log/munge
if [ ! -s /etc/munge/munge.key ]; then
    dd if=/dev/urandom of=/etc/munge/munge.key bs=1024 count=1 status=none
fi
chown munge:munge /etc/munge/munge.key
chmod 0400 /etc/munge/munge.key
if ! pgrep -u munge -x munged >/dev/null 2>&1; then
    runuser -u munge -- /usr/sbin/munged
fi
for _ in $(seq 1 20); do munge -n >/dev/null 2>&1 && break; sleep 0.5; done
munge -n | unmunge >/dev/null

# --- slurm.conf: one node, one default partition ------------------------------
host=$(hostname -s)
cpus=$(nproc)
# RealMemory a little below the free memory, so slurmd does not drain the node.
mem_mb=$(awk '/MemAvailable/ {printf "%d", $2 / 1024 * 0.8}' /proc/meminfo)
marker="# written by knudsweep .ci/start_slurm.sh for ${host} cpus=${cpus}"
conf=/etc/slurm/slurm.conf
mkdir -p /etc/slurm /var/spool/slurmctld /var/spool/slurmd /var/log/slurm
if [ ! -f "$conf" ] || ! grep -qxF "$marker" "$conf"; then
    if [ -f "$conf" ] && ! grep -q "written by knudsweep" "$conf"; then
        echo "start_slurm.sh: $conf exists and was not written by this script; leaving it alone" >&2
    else
        cat > "$conf" <<EOF
$marker
ClusterName=knudsweep-ci
SlurmctldHost=${host}
SlurmUser=root
AuthType=auth/munge
StateSaveLocation=/var/spool/slurmctld
SlurmdSpoolDir=/var/spool/slurmd
SlurmctldPidFile=/run/slurmctld.pid
SlurmdPidFile=/run/slurmd.pid
SlurmctldLogFile=/var/log/slurm/slurmctld.log
SlurmdLogFile=/var/log/slurm/slurmd.log
ProctrackType=proctrack/linuxproc
TaskPlugin=task/none
SelectType=select/cons_tres
SelectTypeParameters=CR_Core_Memory
JobAcctGatherType=jobacct_gather/none
AccountingStorageType=accounting_storage/none
ReturnToService=2
SchedulerType=sched/backfill
MpiDefault=none
NodeName=${host} CPUs=${cpus} RealMemory=${mem_mb} State=UNKNOWN
PartitionName=debug Nodes=${host} Default=YES MaxTime=INFINITE State=UP
EOF
    fi
fi

if ! pgrep -x slurmctld >/dev/null 2>&1; then
    slurmctld
fi
if ! pgrep -x slurmd >/dev/null 2>&1; then
    slurmd
fi

# Wait until the node is usable (idle or mixed), then bring it back if drained.
for _ in $(seq 1 30); do
    state=$(sinfo -h -N -o "%T" 2>/dev/null | head -n1 || true)
    case "$state" in
        idle*|mixed*|allocated*) break ;;
        drain*|down*) scontrol update NodeName="$host" State=RESUME >/dev/null 2>&1 || true ;;
    esac
    sleep 1
done
sinfo
state=$(sinfo -h -N -o "%T" | head -n1)
case "$state" in
    idle*|mixed*|allocated*) echo "start_slurm.sh: SLURM ready on ${host} (${cpus} CPUs, ${mem_mb} MB)" ;;
    *) echo "start_slurm.sh: node state is '${state}', not usable" >&2; exit 1 ;;
esac
