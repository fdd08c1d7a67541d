#!/bin/bash
# Sets up a single-node Slurm on this machine for the cluster test: Debian 12's slurm-wlm and
# munge, the controller and the node daemon both here, no accounting, no cgroups. Needs root.
# Idempotent: daemons already running are left alone.
set -euo pipefail

if [ "$(id -u)" -ne 0 ]; then
  echo "tests/cluster/slurm-up.sh: error: needs root (it installs and starts slurmctld, slurmd, munged)" >&2
  exit 2
fi
if ! command -v slurmctld >/dev/null || ! command -v munged >/dev/null; then
  for i in $(seq 1 60); do
    fuser /var/lib/dpkg/lock-frontend >/dev/null 2>&1 || break
    sleep 5
  done
  apt-get update -q >/dev/null
  DEBIAN_FRONTEND=noninteractive apt-get install -y -q slurm-wlm munge >/dev/null
fi

host=$(hostname -s)
cpus=$(nproc)
# Memory Slurm may hand out: three quarters of the machine, in MiB.
mem=$(awk '/MemTotal/ {printf "%d", $2 / 1024 * 3 / 4}' /proc/meminfo)

# munge: one key, the daemon running as user munge.
install -d -o munge -g munge -m 0700 /etc/munge /var/lib/munge /var/log/munge
install -d -o munge -g munge -m 0755 /run/munge
[ -s /etc/munge/munge.key ] || mungekey --create --keyfile=/etc/munge/munge.key
chown munge:munge /etc/munge/munge.key
chmod 0400 /etc/munge/munge.key
if ! pgrep -x munged >/dev/null; then
  runuser -u munge -- /usr/sbin/munged
fi

install -d /etc/slurm /var/spool/slurmctld /var/spool/slurmd /var/log/slurm
cat > /etc/slurm/slurm.conf <<CONF
# Single-node Slurm for stance-toolbox's cluster test (tests/cluster/slurm-up.sh).
ClusterName=stance-test
SlurmctldHost=$host
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
JobAcctGatherType=jobacct_gather/none
AccountingStorageType=accounting_storage/none
SchedulerType=sched/backfill
SelectType=select/cons_tres
SelectTypeParameters=CR_Core_Memory
ReturnToService=2
MpiDefault=none
NodeName=$host CPUs=$cpus RealMemory=$mem State=UNKNOWN
PartitionName=main Nodes=$host Default=YES MaxTime=INFINITE State=UP
CONF

if ! pgrep -x slurmctld >/dev/null; then
  slurmctld
fi
if ! pgrep -x slurmd >/dev/null; then
  slurmd
fi
for i in $(seq 1 60); do
  state=$(sinfo -h -n "$host" -o %t 2>/dev/null || true)
  case "$state" in
    idle*|mix*|alloc*) echo "slurm up: node $host ($cpus CPUs, $mem MiB), partition main"; exit 0 ;;
    down*|drain*) scontrol update nodename="$host" state=resume 2>/dev/null || true ;;
  esac
  sleep 1
done
echo "tests/cluster/slurm-up.sh: error: node $host did not become idle (state '${state:-none}'); see /var/log/slurm/" >&2
exit 1
