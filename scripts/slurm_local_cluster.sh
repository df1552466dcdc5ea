#!/usr/bin/env bash
# A single-node Slurm cluster on this machine, for tests/slurm.rs: munged,
# slurmctld and slurmd with a minimal configuration, all state in DIR.
# Needs root and the Debian packages slurm-wlm and munge
# (apt-get install slurm-wlm munge).
#
# Usage: scripts/slurm_local_cluster.sh start DIR   (prints SLURM_CONF=...)
#        scripts/slurm_local_cluster.sh stop DIR
#        scripts/slurm_local_cluster.sh logs DIR
# Ports: SLURM_TEST_PORT (slurmctld) and the next one (slurmd) [default 6917].
set -euo pipefail
cmd=$1 dir=$(realpath -m "$2")
conf="$dir/slurm.conf"
case "$cmd" in
start)
  mkdir -p "$dir/state" "$dir/spool" "$dir/munge"
  chmod 700 "$dir/munge"
  host=$(hostname -s)
  port=${SLURM_TEST_PORT:-6917}
  cpus=$(nproc)
  if [ ! -s /etc/munge/munge.key ]; then
    dd if=/dev/urandom of="$dir/munge/munge.key" bs=1024 count=1 status=none
  else
    cp /etc/munge/munge.key "$dir/munge/munge.key"
  fi
  chmod 400 "$dir/munge/munge.key"
  munged --force --socket="$dir/munge/munge.sock" --key-file="$dir/munge/munge.key" \
    --pid-file="$dir/munge/munged.pid" --log-file="$dir/munge/munged.log" \
    --seed-file="$dir/munge/munged.seed"
  cat > "$conf" <<CONF
ClusterName=plumbline-test
SlurmctldHost=$host
SlurmUser=root
SlurmdUser=root
AuthType=auth/munge
AuthInfo=socket=$dir/munge/munge.sock
CredType=cred/munge
SlurmctldPort=$port
SlurmdPort=$((port + 1))
StateSaveLocation=$dir/state
SlurmdSpoolDir=$dir/spool
SlurmctldPidFile=$dir/slurmctld.pid
SlurmdPidFile=$dir/slurmd.pid
SlurmctldLogFile=$dir/slurmctld.log
SlurmdLogFile=$dir/slurmd.log
SlurmctldDebug=info
SlurmdDebug=info
ProctrackType=proctrack/linuxproc
TaskPlugin=task/none
MpiDefault=none
SwitchType=switch/none
SelectType=select/cons_tres
SelectTypeParameters=CR_CPU
SchedulerType=sched/backfill
ReturnToService=2
JobAcctGatherType=jobacct_gather/none
AccountingStorageType=accounting_storage/none
JobCompType=jobcomp/none
MaxJobCount=1000
NodeName=$host CPUs=$cpus State=UNKNOWN
PartitionName=local Nodes=$host Default=YES MaxTime=INFINITE State=UP
CONF
  export SLURM_CONF="$conf"
  slurmctld -f "$conf"
  slurmd -f "$conf"
  echo "SLURM_CONF=$conf"
  ;;
stop)
  for p in slurmd slurmctld; do
    [ -f "$dir/$p.pid" ] && kill "$(cat "$dir/$p.pid")" 2>/dev/null || true
  done
  [ -f "$dir/munge/munged.pid" ] && kill "$(cat "$dir/munge/munged.pid")" 2>/dev/null || true
  ;;
logs)
  for f in "$dir/slurmctld.log" "$dir/slurmd.log" "$dir/munge/munged.log"; do
    echo "===== $f"
    cat "$f" 2>/dev/null || echo "(none)"
  done
  ;;
*)
  echo "usage: $0 start|stop|logs DIR" >&2
  exit 2
  ;;
esac
