#!/usr/bin/env bash
# Start a real one-node Slurm cluster on this machine, for CI and integration tests.
#
# What it does:
#   1. installs Slurm (slurmctld, slurmd, slurm-client) and munge from the Debian packages,
#      only if they are missing;
#   2. makes sure munged is running (creates the munge key if there is none);
#   3. writes slurm.conf to the place where the installed Slurm looks for it
#      (/etc/slurm/slurm.conf on Debian), with all state, spool, log and pid files
#      under $KT_SLURM_DIR (default /tmp/kicktrain-slurm);
#   4. starts slurmctld and slurmd as daemons and waits until the node is idle.
#
# Running it again while the cluster answers does nothing and exits 0.
# Needs: root, apt-get (only for the first install). Stop with tools/slurm/stop.sh.
#
# Settings (environment):
#   KT_SLURM_DIR      where state, spool, logs and pid files go (default /tmp/kicktrain-slurm)
#   KT_SLURM_TIMEOUT  seconds to wait for the node to become idle (default 60)
set -euo pipefail

KT_SLURM_DIR="${KT_SLURM_DIR:-/tmp/kicktrain-slurm}"
TIMEOUT="${KT_SLURM_TIMEOUT:-60}"
HERE="$(cd "$(dirname "${BASH_SOURCE[0]}")" && pwd)"

# The Debian build of Slurm reads /etc/slurm/slurm.conf unless SLURM_CONF says otherwise.
# We write there so that callers need no environment. If the caller already exports
# SLURM_CONF, we honour it and write the file there instead.
CONF="${SLURM_CONF:-/etc/slurm/slurm.conf}"

PACKAGES=(slurmctld slurmd slurm-client munge)
NODE="$(hostname -s)"

LOG_DIR="$KT_SLURM_DIR/log"
RUN_DIR="$KT_SLURM_DIR/run"
MUNGE_DIR="$KT_SLURM_DIR/munge"
CTLD_LOG="$LOG_DIR/slurmctld.log"
SLURMD_LOG="$LOG_DIR/slurmd.log"
MUNGE_LOG="$MUNGE_DIR/munged.log"
APT_LOG="$KT_SLURM_DIR/apt.log"

t0=$SECONDS

say() { echo "slurm: $*"; }

# Print a one-line reason and the end of a log file (if given) to stderr, stop what this
# script started, and exit non-zero.
die() {
  echo "start.sh: ERROR: $1" >&2
  local log="${2:-}"
  if [[ -n "$log" && -s "$log" ]]; then
    echo "---- last 25 lines of $log ----" >&2
    tail -n 25 "$log" >&2
    echo "----" >&2
  fi
  bash "$HERE/stop.sh" --quiet >/dev/null 2>&1 || true
  exit 1
}

if [[ $EUID -ne 0 ]]; then
  echo "start.sh: ERROR: must run as root (it installs packages and starts daemons)" >&2
  exit 1
fi

# True if the process in the given pid file is alive and has the given command name.
pid_alive() {
  local pidfile="$1" name="$2" pid
  [[ -s "$pidfile" ]] || return 1
  pid="$(tr -dc '0-9' <"$pidfile")"
  [[ -n "$pid" && -r "/proc/$pid/comm" ]] || return 1
  [[ "$(cat "/proc/$pid/comm" 2>/dev/null)" == "$name" ]]
}

# State of our node as sinfo reports it ("idle", "mixed", "down*", ...), or nothing.
node_state() {
  timeout 15 sinfo -h -N -n "$NODE" -o '%T' 2>/dev/null | head -n 1 || true
}

# True if munge can encode and decode a credential (munged is up and the key works).
munge_works() {
  munge -n 2>/dev/null | unmunge >/dev/null 2>&1
}

# ---------------------------------------------------------------------------------------------
# 0. Already running? Then there is nothing to do.
# ---------------------------------------------------------------------------------------------
if command -v sinfo >/dev/null 2>&1 && [[ -f "$CONF" ]] \
  && timeout 10 scontrol ping 2>/dev/null | grep -q 'is UP'; then
  state="$(node_state)"
  case "$state" in
    idle | mixed | allocated | completing)
      say "cluster already running (node $NODE is $state, config $CONF); nothing to do"
      [[ "$CONF" == /etc/slurm/slurm.conf ]] || echo "export SLURM_CONF=$CONF"
      exit 0
      ;;
  esac
fi

mkdir -p "$KT_SLURM_DIR"

# ---------------------------------------------------------------------------------------------
# 1. Install the packages if they are missing.
# ---------------------------------------------------------------------------------------------
missing=()
for p in "${PACKAGES[@]}"; do
  if [[ "$(dpkg-query -W -f='${Status}' "$p" 2>/dev/null || true)" != "install ok installed" ]]; then
    missing+=("$p")
  fi
done

if ((${#missing[@]} > 0)); then
  say "installing ${missing[*]} with apt-get"
  command -v apt-get >/dev/null 2>&1 || die "apt-get not found; install ${missing[*]} by hand"
  export DEBIAN_FRONTEND=noninteractive
  # Keep the package scripts from starting munge or Slurm with their own settings (no init
  # system here anyway); we start the daemons ourselves below. Only add the policy file if
  # there is none, and remove it again afterwards.
  policy_added=0
  if [[ ! -e /usr/sbin/policy-rc.d ]]; then
    printf '#!/bin/sh\nexit 101\n' >/usr/sbin/policy-rc.d
    chmod 755 /usr/sbin/policy-rc.d
    policy_added=1
  fi
  t_update=$SECONDS
  apt_ok=1
  apt-get update -q >"$APT_LOG" 2>&1 || apt_ok=0
  t_install=$SECONDS
  if ((apt_ok)); then
    apt-get install -y -q --no-install-recommends "${missing[@]}" >>"$APT_LOG" 2>&1 || apt_ok=0
  fi
  if ((policy_added)); then rm -f /usr/sbin/policy-rc.d; fi
  ((apt_ok)) || die "apt-get could not install ${missing[*]}" "$APT_LOG"
  say "packages installed in $((SECONDS - t_update)) s (apt-get update $((t_install - t_update)) s, install $((SECONDS - t_install)) s; log $APT_LOG)"
fi

for cmd in slurmctld slurmd sinfo scontrol munged munge unmunge; do
  command -v "$cmd" >/dev/null 2>&1 || die "command $cmd not found after installing ${PACKAGES[*]}"
done
version="$(slurmctld -V 2>/dev/null || true)"

# ---------------------------------------------------------------------------------------------
# 2. Clean up anything half-started by an earlier run (only our own pid files are used).
# ---------------------------------------------------------------------------------------------
bash "$HERE/stop.sh" --quiet || true

mkdir -p "$LOG_DIR" "$RUN_DIR" "$MUNGE_DIR"
# Start from an empty job state every time: tests should not see jobs of an earlier run.
rm -rf "$KT_SLURM_DIR/state" "$KT_SLURM_DIR/spool"
mkdir -p "$KT_SLURM_DIR/state" "$KT_SLURM_DIR/spool"
: >"$CTLD_LOG"
: >"$SLURMD_LOG"

# ---------------------------------------------------------------------------------------------
# 3. munge: key and daemon.
# ---------------------------------------------------------------------------------------------
KEY=/etc/munge/munge.key
if [[ ! -s "$KEY" ]]; then
  say "creating munge key $KEY"
  mkdir -p /etc/munge
  if command -v mungekey >/dev/null 2>&1; then
    mungekey --create --keyfile="$KEY" --force
  else
    dd if=/dev/urandom of="$KEY" bs=1 count=1024 status=none
  fi
fi
# munged refuses to run with a key that others can read, or that it does not own.
chown munge:munge "$KEY"
chmod 0400 "$KEY"

if munge_works; then
  say "munged already running; using it"
else
  # munged runs as the unprivileged "munge" user, as the package intends. Its socket stays in
  # the standard place (/run/munge), where Slurm's auth/munge plugin looks for it; its pid
  # file and log go to $KT_SLURM_DIR/munge.
  install -d -o munge -g munge -m 0755 /run/munge
  install -d -o munge -g munge -m 0700 /var/lib/munge
  chown munge:munge "$MUNGE_DIR"
  chmod 0700 "$MUNGE_DIR"
  rm -f "$MUNGE_DIR/munged.pid"
  : >"$MUNGE_LOG"
  chown munge:munge "$MUNGE_LOG"
  if ! runuser -u munge -- munged \
    --pid-file="$MUNGE_DIR/munged.pid" --log-file="$MUNGE_LOG" \
    </dev/null >>"$MUNGE_LOG" 2>&1; then
    die "munged did not start" "$MUNGE_LOG"
  fi
  for _ in $(seq 1 50); do
    munge_works && break
    sleep 0.2
  done
  munge_works || die "munged started but munge/unmunge do not work" "$MUNGE_LOG"
fi

# ---------------------------------------------------------------------------------------------
# 4. slurm.conf
# ---------------------------------------------------------------------------------------------
cpus="$(nproc)"
mem_total_mb=$(($(awk '/^MemTotal:/ {print $2}' /proc/meminfo) / 1024))
# Declare a bit less memory than the machine has (95 %, and at least 128 MB less): a node
# that declares more than slurmd finds is set DRAIN with "Low RealMemory".
real_mem=$((mem_total_mb * 95 / 100))
((mem_total_mb - real_mem >= 128)) || real_mem=$((mem_total_mb - 128))
((real_mem > 0)) || die "cannot work out the memory of this machine from /proc/meminfo"
# Without a default, a job that asks for no memory would take the whole node and jobs
# could not share it; give each CPU an equal share instead.
def_mem_per_cpu=$((real_mem / cpus))

mkdir -p "$(dirname "$CONF")"
cat >"$CONF" <<EOF
# Written by kicktrain tools/slurm/start.sh: a one-node test cluster. Do not edit;
# it is rewritten on every cold start.
ClusterName=kicktrain-test
SlurmctldHost=$NODE(127.0.0.1)
SlurmUser=root
SlurmdUser=root
AuthType=auth/munge
CredType=cred/munge
MpiDefault=none
ProctrackType=proctrack/linuxproc
TaskPlugin=task/none
JobAcctGatherType=jobacct_gather/none
AccountingStorageType=accounting_storage/none
JobCompType=jobcomp/none
SchedulerType=sched/backfill
# Schedule newly submitted batch jobs at once instead of batching them for up to 3 s
# (halves the time of tools/slurm/check.sh).
SchedulerParameters=batch_sched_delay=0
SelectType=select/cons_tres
SelectTypeParameters=CR_Core_Memory
DefMemPerCPU=$def_mem_per_cpu
ReturnToService=2
MailProg=/bin/true
StateSaveLocation=$KT_SLURM_DIR/state
SlurmdSpoolDir=$KT_SLURM_DIR/spool
SlurmctldPidFile=$RUN_DIR/slurmctld.pid
SlurmdPidFile=$RUN_DIR/slurmd.pid
SlurmctldLogFile=$CTLD_LOG
SlurmdLogFile=$SLURMD_LOG
SlurmctldDebug=info
SlurmdDebug=info
NodeName=$NODE NodeAddr=127.0.0.1 CPUs=$cpus RealMemory=$real_mem State=UNKNOWN
PartitionName=debug Nodes=$NODE Default=YES MaxTime=INFINITE State=UP
EOF
chmod 0644 "$CONF"

# Slurm 22.05 (Debian 12) touches no cgroups with the plugins above, and needs no
# cgroup.conf. From 24.05 on, slurmd sets up cgroups unless told not to, and cgroups are
# often unusable in containers; "CgroupPlugin=disabled" exists from 24.05 on. (Untested
# here: this machine has 22.05.)
CGROUP_CONF="$(dirname "$CONF")/cgroup.conf"
read -r major minor < <(echo "$version" | grep -oE '[0-9]+\.[0-9]+' | head -n 1 | tr . ' ') || true
if ((10#${major:-0} * 100 + 10#${minor:-0} >= 2405)); then
  if [[ ! -e "$CGROUP_CONF" ]] || grep -q 'kicktrain tools/slurm/start.sh' "$CGROUP_CONF"; then
    printf '# Written by kicktrain tools/slurm/start.sh\nCgroupPlugin=disabled\n' >"$CGROUP_CONF"
  fi
fi

# ---------------------------------------------------------------------------------------------
# 5. Start slurmctld and slurmd (each forks into the background and writes its pid file).
# ---------------------------------------------------------------------------------------------
export SLURM_CONF="$CONF"

slurmctld </dev/null >>"$CTLD_LOG" 2>&1 || die "slurmctld did not start" "$CTLD_LOG"
# The daemon writes its pid file a moment after the command returns, so only call it dead
# if there is still no live process after 3 s.
ctld_up=0
for i in $(seq 1 100); do
  if timeout 5 scontrol ping 2>/dev/null | grep -q 'is UP'; then
    ctld_up=1
    break
  fi
  if ((i > 15)) && ! pid_alive "$RUN_DIR/slurmctld.pid" slurmctld; then
    die "slurmctld exited right after start" "$CTLD_LOG"
  fi
  sleep 0.2
done
((ctld_up)) || die "slurmctld does not answer scontrol ping after 20 s" "$CTLD_LOG"

slurmd </dev/null >>"$SLURMD_LOG" 2>&1 || die "slurmd did not start" "$SLURMD_LOG"

# ---------------------------------------------------------------------------------------------
# 6. Wait until the node is idle.
# ---------------------------------------------------------------------------------------------
t_slurmd=$SECONDS
deadline=$((SECONDS + TIMEOUT))
state=""
while ((SECONDS < deadline)); do
  state="$(node_state)"
  [[ "$state" == idle ]] && break
  pid_alive "$RUN_DIR/slurmctld.pid" slurmctld || die "slurmctld stopped while waiting for the node" "$CTLD_LOG"
  if ((SECONDS - t_slurmd >= 3)) && ! pid_alive "$RUN_DIR/slurmd.pid" slurmd; then
    die "slurmd stopped while waiting for the node" "$SLURMD_LOG"
  fi
  sleep 0.5
done
if [[ "$state" != idle ]]; then
  reason="$(timeout 10 sinfo -h -R -o '%E' 2>/dev/null | head -n 1 || true)"
  tail -n 15 "$CTLD_LOG" >&2 || true
  die "node $NODE is not idle after ${TIMEOUT} s (state '${state:-none}', reason '${reason:-none}')" "$SLURMD_LOG"
fi

say "cluster up in $((SECONDS - t0)) s: ${version:-slurm}, node $NODE idle ($cpus CPUs, ${real_mem} MB), partition debug, dir $KT_SLURM_DIR"
if [[ "$CONF" != /etc/slurm/slurm.conf ]]; then
  echo "export SLURM_CONF=$CONF"
fi
