#!/usr/bin/env bash
# A private one-node Slurm for the tests.
#
#   provision.sh start DIR   installs slurm-wlm and munge when missing (root and
#                            apt-get only), writes DIR/slurm.conf, starts munged,
#                            slurmctld and slurmd on private ports and sockets,
#                            waits for the node, and writes DIR/env (SLURM_CONF).
#   provision.sh stop DIR    stops the three daemons by the pids in DIR.
#
# Exit 0 when the cluster is up; exit 77 (skip) when it cannot be: not root, no
# packages and no way to install them. Nothing outside DIR is touched except
# the distribution packages.
set -euo pipefail
cmd=${1:?start|stop}; dir=${2:?DIR}
mkdir -p "$dir"; dir=$(cd "$dir" && pwd)

stop() {
  for p in slurmd slurmctld munged; do
    f="$dir/$p.pid"
    if [ -s "$f" ]; then
      pid=$(cat "$f")
      kill "$pid" 2>/dev/null || true
      for _ in $(seq 50); do kill -0 "$pid" 2>/dev/null || break; sleep 0.1; done
      kill -9 "$pid" 2>/dev/null || true
      rm -f "$f"
    fi
  done
}
if [ "$cmd" = stop ]; then stop; exit 0; fi

if ! command -v slurmctld >/dev/null || ! command -v munged >/dev/null; then
  if [ "$(id -u)" != 0 ] || ! command -v apt-get >/dev/null; then
    echo "SKIPPED: slurm-wlm/munge missing and cannot install them (need root and apt-get)" >&2; exit 77
  fi
  export DEBIAN_FRONTEND=noninteractive
  for _ in $(seq 120); do fuser /var/lib/dpkg/lock-frontend >/dev/null 2>&1 || break; sleep 2; done
  { apt-get update -qq && apt-get install -y -qq --no-install-recommends slurm-wlm munge >/dev/null; } ||
    { echo "SKIPPED: could not install slurm-wlm and munge" >&2; exit 77; }
fi
if [ "$(id -u)" != 0 ]; then
  echo "SKIPPED: the private Slurm runs its daemons as root; not root" >&2; exit 77
fi

host=$(hostname -s)
# More CPUs than the machine has (config_overrides): the test's windows are
# light, and a hanging one must not hold the others back.
cpus=8
mem=$(awk '/MemTotal/ {print int($2/1024) - 512}' /proc/meminfo)
# Ports from the directory name's hash, so two test runs do not collide.
base=$(( 20000 + $(echo "$dir" | cksum | cut -d' ' -f1) % 20000 ))
mkdir -p "$dir/state" "$dir/spool" "$dir/log" "$dir/munge"
chmod 700 "$dir/munge"
dd if=/dev/urandom of="$dir/munge/munge.key" bs=1024 count=1 status=none
chmod 400 "$dir/munge/munge.key"
munged --force --key-file="$dir/munge/munge.key" --socket="$dir/munge/munge.socket" \
  --pid-file="$dir/munged.pid" --log-file="$dir/log/munged.log" --seed-file="$dir/munge/seed"

cat > "$dir/slurm.conf" <<CONF
# Private one-node test cluster (written by tests/slurm/provision.sh).
ClusterName=legworktest
SlurmctldHost=$host
SlurmctldPort=$base
SlurmdPort=$((base + 1))
AuthType=auth/munge
AuthInfo=socket=$dir/munge/munge.socket
CredType=cred/munge
SlurmUser=root
SlurmdUser=root
StateSaveLocation=$dir/state
SlurmdSpoolDir=$dir/spool/slurmd-%n
SlurmctldPidFile=$dir/slurmctld.pid
SlurmdPidFile=$dir/slurmd.pid
SlurmctldLogFile=$dir/log/slurmctld.log
SlurmdLogFile=$dir/log/slurmd.log
ProctrackType=proctrack/linuxproc
TaskPlugin=task/none
JobAcctGatherType=jobacct_gather/none
AccountingStorageType=accounting_storage/none
JobCompType=jobcomp/none
SchedulerType=sched/backfill
SelectType=select/cons_tres
SelectTypeParameters=CR_Core
MpiDefault=none
SlurmdParameters=config_overrides
ReturnToService=2
SchedulerParameters=batch_sched_delay=0,sched_min_interval=100000
MinJobAge=600
KillWait=5
OverTimeLimit=0
InactiveLimit=0
MessageTimeout=20
NodeName=$host CPUs=$cpus RealMemory=$mem State=UNKNOWN
PartitionName=test Nodes=$host Default=YES MaxTime=INFINITE State=UP
CONF
echo "export SLURM_CONF=$dir/slurm.conf" > "$dir/env"
export SLURM_CONF="$dir/slurm.conf"
slurmctld
slurmd
for _ in $(seq 100); do
  if sinfo -h -o %T 2>/dev/null | grep -qE '^(idle|mixed|allocated)'; then
    echo "slurm up: SLURM_CONF=$SLURM_CONF"; exit 0
  fi
  sleep 0.3
done
echo "!! the private Slurm did not come up; logs in $dir/log" >&2
sinfo >&2 || true
tail -n 20 "$dir/log/slurmctld.log" "$dir/log/slurmd.log" >&2 || true
stop
exit 1
