#!/usr/bin/env bash
# A private single-node Slurm in a directory of its own, for tests and for
# trying configs/cluster/ on one machine. No systemd is needed: the three
# daemons (munged, slurmctld, slurmd) run in the foreground, detached, and
# their process ids are kept under the directory so that `stop` ends exactly
# those processes.
#
#   scripts/slurm-local.sh install        apt-get install the Debian packages when missing
#   scripts/slurm-local.sh start DIR      install, write DIR/slurm.conf, start, wait for an idle node
#   scripts/slurm-local.sh stop DIR       stop the daemons started for DIR
#   scripts/slurm-local.sh status DIR     print sinfo for DIR's cluster
#   scripts/slurm-local.sh logs DIR       print the daemons' logs
#
# After `start`, point the Slurm commands at the private cluster with
#   export SLURM_CONF=DIR/slurm.conf
# (DIR/env holds that line). `start` is idempotent: on a DIR whose daemons are
# running it only waits for the node. The daemons run as the calling user
# (SlurmUser and SlurmdUser are that user); the tests run it as root, the
# usual case in a CI container, and jobs then run as root.
set -euo pipefail

die() { echo "slurm-local: $*" >&2; exit 1; }

install_packages() {
  local need=()
  command -v munged >/dev/null 2>&1 || [ -x /usr/sbin/munged ] || need+=(munge)
  command -v slurmctld >/dev/null 2>&1 || [ -x /usr/sbin/slurmctld ] || need+=(slurmctld)
  command -v slurmd >/dev/null 2>&1 || [ -x /usr/sbin/slurmd ] || need+=(slurmd)
  command -v sbatch >/dev/null 2>&1 || need+=(slurm-client)
  if [ ${#need[@]} -gt 0 ]; then
    echo "slurm-local: installing ${need[*]}" >&2
    local sudo=
    [ "$(id -u)" = 0 ] || sudo=sudo
    $sudo apt-get update -qq
    DEBIAN_FRONTEND=noninteractive $sudo apt-get install -y -qq --no-install-recommends "${need[@]}" >/dev/null
  fi
  # The package may leave the paths of the daemons under /usr/sbin, which is
  # not on every PATH.
  command -v slurmctld >/dev/null 2>&1 || [ -x /usr/sbin/slurmctld ] || die "slurmctld not found after install"
}

# alive PIDFILE: the process recorded in PIDFILE is running.
alive() { [ -s "$1" ] && kill -0 "$(cat "$1")" 2>/dev/null; }

# free_port: a TCP port nothing on 127.0.0.1 listens to, searched from a
# place derived from the directory so that two private clusters on one
# machine do not both take Slurm's usual 6817.
free_port() {
  local p=$1
  while (exec 3<>"/dev/tcp/127.0.0.1/$p") 2>/dev/null; do p=$((p + 1)); done
  echo "$p"
}

write_conf() {
  local dir=$1 user cpus mem base ctld_port slurmd_port
  user=$(id -un)
  cpus=$(nproc)
  # RealMemory in MB; leave a quarter for the system.
  mem=$(awk '/^MemTotal:/ {printf "%d", $2 / 1024 * 3 / 4}' /proc/meminfo)
  base=$((20000 + $(printf '%s' "$dir" | cksum | cut -d' ' -f1) % 20000))
  ctld_port=$(free_port "$base")
  slurmd_port=$(free_port $((ctld_port + 1)))
  mkdir -p "$dir/state" "$dir/spool" "$dir/log" "$dir/run" "$dir/munge"
  chmod 700 "$dir/munge"
  cat >"$dir/slurm.conf" <<EOF
# Written by scripts/slurm-local.sh for a private single-node cluster.
ClusterName=winnowlocal
SlurmctldHost=localhost
SlurmctldPort=$ctld_port
SlurmdPort=$slurmd_port
SlurmUser=$user
SlurmdUser=$user
AuthType=auth/munge
CredType=cred/munge
AuthInfo=socket=$dir/munge/munge.socket
StateSaveLocation=$dir/state
SlurmdSpoolDir=$dir/spool
SlurmctldPidFile=$dir/run/slurmctld.pid
SlurmdPidFile=$dir/run/slurmd.pid
SlurmctldLogFile=$dir/log/slurmctld.log
SlurmdLogFile=$dir/log/slurmd.log
SlurmctldDebug=info
SlurmdDebug=info
ProctrackType=proctrack/linuxproc
TaskPlugin=task/none
JobAcctGatherType=jobacct_gather/none
AccountingStorageType=accounting_storage/none
JobCompType=jobcomp/none
SelectType=select/cons_tres
SelectTypeParameters=CR_CPU
SchedulerType=sched/backfill
MpiDefault=none
ReturnToService=2
SlurmdParameters=config_overrides
# Keep finished jobs visible to scontrol for an hour: without an accounting
# database this is where their exit states are read from.
MinJobAge=3600
SlurmdTimeout=60
SlurmctldTimeout=60
InactiveLimit=0
KillWait=5
NodeName=localhost CPUs=$cpus RealMemory=$mem State=UNKNOWN
PartitionName=main Nodes=localhost Default=YES MaxTime=INFINITE State=UP
EOF
  echo "export SLURM_CONF=$dir/slurm.conf" >"$dir/env"
}

# start_daemon NAME CMD...: run CMD detached, record its pid in run/NAME.fg.pid.
start_daemon() {
  local dir=$1 name=$2
  shift 2
  if alive "$dir/run/$name.fg.pid"; then return 0; fi
  setsid "$@" >>"$dir/log/$name.out" 2>&1 </dev/null &
  echo $! >"$dir/run/$name.fg.pid"
}

logs() {
  local dir=$1 f
  for f in "$dir"/log/*; do
    [ -f "$f" ] || continue
    echo "==== $f (last 60 lines)"
    tail -n 60 "$f"
  done
}

start() {
  local dir=$1
  install_packages
  export PATH="$PATH:/usr/sbin:/sbin"
  mkdir -p "$dir"
  dir=$(cd "$dir" && pwd)
  [ -f "$dir/slurm.conf" ] || write_conf "$dir"
  export SLURM_CONF="$dir/slurm.conf"

  if [ ! -s "$dir/munge/munge.key" ]; then
    dd if=/dev/urandom of="$dir/munge/munge.key" bs=1024 count=1 status=none
    chmod 400 "$dir/munge/munge.key"
  fi
  start_daemon "$dir" munged munged --foreground --force \
    --socket="$dir/munge/munge.socket" --key-file="$dir/munge/munge.key" \
    --pid-file="$dir/munge/munged.pid" --log-file="$dir/log/munged.log" \
    --seed-file="$dir/munge/munged.seed"

  for _ in $(seq 1 100); do
    [ -S "$dir/munge/munge.socket" ] && break
    alive "$dir/run/munged.fg.pid" || { logs "$dir" >&2; die "munged exited"; }
    sleep 0.1
  done
  [ -S "$dir/munge/munge.socket" ] || { logs "$dir" >&2; die "munged did not open its socket"; }

  start_daemon "$dir" slurmctld slurmctld -D -i
  start_daemon "$dir" slurmd slurmd -D -N localhost
  for _ in $(seq 1 300); do
    alive "$dir/run/slurmctld.fg.pid" || { logs "$dir" >&2; die "slurmctld exited"; }
    alive "$dir/run/slurmd.fg.pid" || { logs "$dir" >&2; die "slurmd exited"; }
    if [ "$(sinfo -h -n localhost -o '%t' 2>/dev/null)" = idle ]; then
      return 0
    fi
    sleep 0.2
  done
  sinfo -N -l >&2 || true
  logs "$dir" >&2
  die "node did not become idle within 60 s"
}

stop() {
  local dir=$1 name pid
  for name in slurmd slurmctld munged; do
    [ -s "$dir/run/$name.fg.pid" ] || continue
    pid=$(cat "$dir/run/$name.fg.pid")
    if kill -0 "$pid" 2>/dev/null; then
      kill -TERM "$pid" 2>/dev/null || true
      for _ in $(seq 1 50); do
        kill -0 "$pid" 2>/dev/null || break
        sleep 0.1
      done
      kill -KILL "$pid" 2>/dev/null || true
    fi
    rm -f "$dir/run/$name.fg.pid"
  done
}

cmd=${1:-}
case "$cmd" in
  install) install_packages ;;
  start) [ $# -eq 2 ] || die "usage: $0 start DIR"; start "$2" ;;
  stop) [ $# -eq 2 ] || die "usage: $0 stop DIR"; stop "$2" ;;
  status) [ $# -eq 2 ] || die "usage: $0 status DIR"; SLURM_CONF="$2/slurm.conf" sinfo -N -l ;;
  logs) [ $# -eq 2 ] || die "usage: $0 logs DIR"; logs "$2" ;;
  *) die "usage: $0 install|start DIR|stop DIR|status DIR|logs DIR" ;;
esac
