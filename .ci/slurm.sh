#!/usr/bin/env bash
# A private single-node Slurm cluster on 127.0.0.1 for the tests of
# 'strata slurm'. Source this file, call slurm_up (exports SLURM_CONF and
# STRATA_SLURM_TEST=1 on success) and slurm_down (stops every daemon it
# started, by PID). Ports: STRATA_SLURM_PORTS="ctld slurmd" (default 16817 16818).

slurm_install() {
  command -v sbatch >/dev/null 2>&1 && command -v slurmctld >/dev/null 2>&1 && command -v munged >/dev/null 2>&1 && return 0
  local made_policy=0
  if [ ! -e /usr/sbin/policy-rc.d ]; then
    printf '#!/bin/sh\nexit 101\n' > /usr/sbin/policy-rc.d && chmod +x /usr/sbin/policy-rc.d && made_policy=1
  fi
  (apt-get update && DEBIAN_FRONTEND=noninteractive apt-get install -y --no-install-recommends slurmctld slurmd slurm-client munge) \
    >/tmp/strata-ci-slurm-apt.log 2>&1
  local rc=$?
  [ "$made_policy" = 1 ] && rm -f /usr/sbin/policy-rc.d
  return $rc
}

slurm_up() {
  slurm_install || { echo "slurm could not be installed; the Slurm tests will skip"; return 1; }
  local ports=(${STRATA_SLURM_PORTS:-16817 16818})
  SLURM_DIR=$(mktemp -d /tmp/strata-slurm.XXXXXX)
  chmod 755 "$SLURM_DIR"
  mkdir -p "$SLURM_DIR"/{munge,state,spool,log,run}
  chmod 700 "$SLURM_DIR/munge"
  mkdir -p "$SLURM_DIR/msock" && chmod 755 "$SLURM_DIR/msock"
  mungekey --create --keyfile="$SLURM_DIR/munge/munge.key" >/dev/null 2>&1 || return 1
  munged --socket="$SLURM_DIR/msock/munge.sock" --key-file="$SLURM_DIR/munge/munge.key" \
    --pid-file="$SLURM_DIR/run/munged.pid" --log-file="$SLURM_DIR/log/munged.log" \
    --seed-file="$SLURM_DIR/munge/munge.seed" || return 1
  export SLURM_CONF="$SLURM_DIR/slurm.conf"
  cat > "$SLURM_CONF" <<CONF
ClusterName=strata-ci
SlurmctldHost=localhost(127.0.0.1)
SlurmctldPort=${ports[0]}
SlurmdPort=${ports[1]}
AuthType=auth/munge
AuthInfo=socket=$SLURM_DIR/msock/munge.sock
CredType=cred/munge
CommunicationParameters=NoInAddrAny,NoCtldInAddrAny
SlurmUser=root
SlurmdUser=root
ProctrackType=proctrack/linuxproc
TaskPlugin=task/none
JobAcctGatherType=jobacct_gather/none
AccountingStorageType=accounting_storage/none
SelectType=select/cons_tres
SelectTypeParameters=CR_Core
MpiDefault=none
ReturnToService=2
SchedulerType=sched/builtin
SchedulerParameters=sched_min_interval=0,batch_sched_delay=0
MinJobAge=3600
StateSaveLocation=$SLURM_DIR/state
SlurmdSpoolDir=$SLURM_DIR/spool
SlurmctldPidFile=$SLURM_DIR/run/slurmctld.pid
SlurmdPidFile=$SLURM_DIR/run/slurmd.pid
SlurmctldLogFile=$SLURM_DIR/log/slurmctld.log
SlurmdLogFile=$SLURM_DIR/log/slurmd.log
NodeName=localhost NodeAddr=127.0.0.1 NodeHostname=localhost CPUs=$(nproc) RealMemory=1024
PartitionName=debug Nodes=localhost Default=YES State=UP MaxTime=INFINITE
CONF
  slurmctld -f "$SLURM_CONF" || return 1
  slurmd -f "$SLURM_CONF" -N localhost || return 1
  for _ in $(seq 1 60); do
    if sinfo -h -o %T 2>/dev/null | grep -q idle; then
      export STRATA_SLURM_TEST=1
      echo "slurm is up ($SLURM_CONF)"
      return 0
    fi
    sleep 0.5
  done
  echo "slurm did not come up; see $SLURM_DIR/log"
  return 1
}

slurm_down() {
  [ -n "${SLURM_DIR:-}" ] || return 0
  local pids=()
  for f in slurmd slurmctld munged; do
    [ -f "$SLURM_DIR/run/$f.pid" ] && pids+=("$(cat "$SLURM_DIR/run/$f.pid")")
  done
  for p in "${pids[@]}"; do kill -TERM "$p" 2>/dev/null || true; done
  for _ in $(seq 1 20); do
    local alive=0
    for p in "${pids[@]}"; do kill -0 "$p" 2>/dev/null && alive=1; done
    [ "$alive" = 0 ] && break
    sleep 0.5
  done
  for p in "${pids[@]}"; do kill -KILL "$p" 2>/dev/null || true; done
  rm -rf "$SLURM_DIR"
  SLURM_DIR=
  return 0
}
