#!/usr/bin/env bash
# Brings up a single-node Slurm cluster on this machine (munge, slurmctld and slurmd from
# Debian's packages) for the job-array test, and waits until its node takes jobs. Safe to run
# again: installs only what is missing and restarts the daemons with a fresh configuration.
# Needs root, or sudo without a password. Exits non-zero, saying why, when anything fails.
set -euo pipefail

SUDO=""
if [ "$(id -u)" -ne 0 ]; then
    if ! sudo -n true 2>/dev/null; then
        echo "slurm-single-node: needs root or password-less sudo to install and start Slurm" >&2
        exit 1
    fi
    SUDO="sudo -n"
fi

if ! command -v sbatch >/dev/null || ! command -v slurmd >/dev/null \
    || ! command -v slurmctld >/dev/null || ! command -v munged >/dev/null; then
    echo "== installing slurmctld, slurmd, slurm-client and munge (Debian packages)" >&2
    $SUDO apt-get update -q >&2
    DEBIAN_FRONTEND=noninteractive $SUDO apt-get install -y -q --no-install-recommends \
        slurmctld slurmd slurm-client munge >&2
fi

host=$(hostname -s)
cpus=$(nproc)
# Memory the node offers: most of what the machine has, in MB.
mem=$(awk '/MemTotal/ { printf "%d", $2 / 1024 * 0.8 }' /proc/meminfo)

# Stop daemons of an earlier bring-up.
$SUDO pkill -x slurmd 2>/dev/null || true
$SUDO pkill -x slurmctld 2>/dev/null || true
sleep 1

$SUDO mkdir -p /etc/slurm /var/spool/slurmctld /var/spool/slurmd /var/log/slurm /run/munge
$SUDO tee /etc/slurm/slurm.conf >/dev/null <<EOF
# Written by agarium's scripts/slurm-single-node.sh: one node, the daemons and jobs run as root,
# no cgroups (processes tracked through /proc), so it works inside containers too.
ClusterName=agarium-test
SlurmctldHost=$host
SlurmUser=root
SlurmdUser=root
AuthType=auth/munge
ProctrackType=proctrack/linuxproc
TaskPlugin=task/none
JobAcctGatherType=jobacct_gather/none
SchedulerType=sched/backfill
SelectType=select/cons_tres
SelectTypeParameters=CR_CPU
MpiDefault=none
ReturnToService=2
StateSaveLocation=/var/spool/slurmctld
SlurmdSpoolDir=/var/spool/slurmd
SlurmctldPidFile=/run/slurmctld.pid
SlurmdPidFile=/run/slurmd.pid
SlurmctldLogFile=/var/log/slurm/slurmctld.log
SlurmdLogFile=/var/log/slurm/slurmd.log
NodeName=$host CPUs=$cpus RealMemory=$mem State=UNKNOWN
PartitionName=main Nodes=$host Default=YES MaxTime=INFINITE State=UP
EOF
# cgroup.conf is read by some plugins even when unused; an empty one keeps them quiet.
$SUDO touch /etc/slurm/cgroup.conf

if [ ! -s /etc/munge/munge.key ]; then
    $SUDO mungekey --create --force 2>/dev/null || $SUDO create-munge-key -f
fi
$SUDO chown -R munge:munge /etc/munge /run/munge /var/lib/munge /var/log/munge 2>/dev/null || true
$SUDO chmod 0700 /etc/munge
$SUDO chmod 0400 /etc/munge/munge.key
if ! munge -n </dev/null >/dev/null 2>&1; then
    $SUDO runuser -u munge -- /usr/sbin/munged
    sleep 1
fi
if ! munge -n </dev/null | unmunge >/dev/null; then
    echo "slurm-single-node: munge does not work" >&2
    exit 1
fi

$SUDO slurmctld
$SUDO slurmd

# Wait until the node is idle (at most 60 s).
for _ in $(seq 120); do
    state=$(sinfo -h -n "$host" -o %T 2>/dev/null || true)
    case $state in
        idle*) echo "slurm-single-node: node $host idle with $cpus CPUs" >&2; exit 0 ;;
        down* | drain*) scontrol update nodename="$host" state=resume 2>/dev/null || true ;;
    esac
    sleep 0.5
done
echo "slurm-single-node: the node did not become idle (state '${state:-none}'); logs:" >&2
$SUDO tail -n 20 /var/log/slurm/slurmctld.log /var/log/slurm/slurmd.log >&2 || true
exit 1
