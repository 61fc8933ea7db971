# Sourced by ci-test.sh and scaling.sh: a private single-node Slurm on this
# host. `start_local_slurm STATE_DIR` installs Debian's slurm-wlm and munge
# if missing, writes STATE_DIR/slurm.conf (this host, 2 CPUs;
# proctrack/linuxproc and task/none, which need no cgroups; no accounting
# database), exports SLURM_CONF, starts munged (unless one runs), slurmctld
# and slurmd, and waits until sinfo shows the node idle. `stop_local_slurm`
# stops what it started, by process id. Needs root and the functions
# `say` and `fail` of the caller.

local_slurm_pids=()

start_local_slurm() {
  local state=$1 host mem_mb i
  [ "$(id -u)" = 0 ] || fail "must run as root (installs packages, starts slurmctld/slurmd as SlurmUser=root)"
  if ! command -v slurmctld >/dev/null || ! command -v munged >/dev/null; then
    say "installing slurm-wlm and munge from Debian's packages"
    apt-get update -qq
    DEBIAN_FRONTEND=noninteractive apt-get install -y -qq slurm-wlm munge >/dev/null
  fi
  say "$(slurmctld -V), munge $(munged --version 2>&1 | awk '{print $2; exit}')"
  mkdir -p "$state/ctld" "$state/d"
  host=$(hostname -s)
  mem_mb=$(awk '/MemTotal/ {print int($2 / 1024) - 512}' /proc/meminfo)
  export SLURM_CONF="$state/slurm.conf"
  cat >"$SLURM_CONF" <<CONF
ClusterName=quarryci
SlurmctldHost=$host
SlurmUser=root
AuthType=auth/munge
StateSaveLocation=$state/ctld
SlurmdSpoolDir=$state/d
SlurmctldPidFile=$state/slurmctld.pid
SlurmdPidFile=$state/slurmd.pid
SlurmctldLogFile=$state/slurmctld.log
SlurmdLogFile=$state/slurmd.log
ProctrackType=proctrack/linuxproc
TaskPlugin=task/none
JobAcctGatherType=jobacct_gather/none
AccountingStorageType=accounting_storage/none
SelectType=select/cons_tres
SelectTypeParameters=CR_Core
MpiDefault=none
ReturnToService=2
SchedulerType=sched/backfill
NodeName=$host CPUs=2 RealMemory=$mem_mb State=UNKNOWN
PartitionName=ci Nodes=$host Default=YES MaxTime=INFINITE State=UP
CONF
  mkdir -p /run/munge
  chown munge:munge /run/munge
  if ! pgrep -x munged >/dev/null; then
    su -s /bin/sh munge -c munged
    for _ in $(seq 50); do [ -s /run/munge/munged.pid ] && break; sleep 0.1; done
    local_slurm_pids+=("$(cat /run/munge/munged.pid)")
    say "munged started (pid ${local_slurm_pids[-1]})"
  fi
  slurmctld -f "$SLURM_CONF"
  for _ in $(seq 100); do [ -s "$state/slurmctld.pid" ] && break; sleep 0.1; done
  local_slurm_pids+=("$(cat "$state/slurmctld.pid")")
  slurmd -f "$SLURM_CONF"
  for _ in $(seq 100); do [ -s "$state/slurmd.pid" ] && break; sleep 0.1; done
  local_slurm_pids+=("$(cat "$state/slurmd.pid")")
  say "slurmctld (pid ${local_slurm_pids[-2]}) and slurmd (pid ${local_slurm_pids[-1]}) started"
  for i in $(seq 120); do
    [ "$(sinfo -h -n "$host" -o %t 2>/dev/null)" = idle ] && break
    [ "$i" = 120 ] && fail "node $host not idle after 60 s: $(sinfo 2>&1)"
    sleep 0.5
  done
  say "sinfo: $(sinfo -h -o '%P %D %t %c')"
}

stop_local_slurm() {
  local pid
  for pid in "${local_slurm_pids[@]}"; do
    kill "$pid" 2>/dev/null || true
  done
  for pid in "${local_slurm_pids[@]}"; do
    for _ in $(seq 50); do kill -0 "$pid" 2>/dev/null || break; sleep 0.1; done
  done
  local_slurm_pids=()
}
