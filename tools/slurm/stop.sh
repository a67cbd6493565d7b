#!/usr/bin/env bash
# Stop the one-node Slurm cluster started by tools/slurm/start.sh.
#
# Cancels any jobs still queued or running, then stops slurmd, slurmctld and munged, each by
# the pid file start.sh left under $KT_SLURM_DIR (default /tmp/kicktrain-slurm). A daemon
# that this script did not start (no pid file of ours) is left alone. Never fails when
# nothing is running.
#
# Options:
#   --quiet   print nothing
#   --purge   also delete $KT_SLURM_DIR (state, spool, logs) and the slurm.conf that
#             start.sh wrote (only if it still carries start.sh's header)
set -euo pipefail

KT_SLURM_DIR="${KT_SLURM_DIR:-/tmp/kicktrain-slurm}"
CONF="${SLURM_CONF:-/etc/slurm/slurm.conf}"
RUN_DIR="$KT_SLURM_DIR/run"
MUNGE_PID="$KT_SLURM_DIR/munge/munged.pid"

quiet=0
purge=0
for arg in "$@"; do
  case "$arg" in
    --quiet) quiet=1 ;;
    --purge) purge=1 ;;
    *)
      echo "usage: $0 [--quiet] [--purge]" >&2
      exit 2
      ;;
  esac
done

say() { ((quiet)) || echo "slurm: $*"; }

# Print the pid from a pid file if that process is alive and has the given command name.
live_pid() {
  local pidfile="$1" name="$2" pid
  [[ -s "$pidfile" ]] || return 1
  pid="$(tr -dc '0-9' <"$pidfile")"
  [[ -n "$pid" && -r "/proc/$pid/comm" ]] || return 1
  [[ "$(cat "/proc/$pid/comm" 2>/dev/null)" == "$name" ]] || return 1
  echo "$pid"
}

# Send SIGTERM to the daemon named in a pid file, if it runs; remember it for wait_all.
declare -A stopping=()
signal_daemon() {
  local pidfile="$1" name="$2" pid
  if pid="$(live_pid "$pidfile" "$name")"; then
    kill -TERM "$pid" 2>/dev/null || true
    stopping[$pid]="$name"
  fi
  rm -f "$pidfile"
}

# Wait up to 15 s for the signalled daemons to exit; SIGKILL any that are still there.
wait_all() {
  local pid
  for _ in $(seq 1 75); do
    local left=0
    for pid in "${!stopping[@]}"; do
      [[ -d "/proc/$pid" ]] && left=1
    done
    ((left)) || break
    sleep 0.2
  done
  for pid in "${!stopping[@]}"; do
    if [[ -d "/proc/$pid" ]]; then
      kill -KILL "$pid" 2>/dev/null || true
      say "${stopping[$pid]} (pid $pid) did not stop on SIGTERM; killed"
    else
      say "stopped ${stopping[$pid]} (pid $pid)"
    fi
  done
}

# Cancel jobs first, while the controller still answers, so that no job steps are left
# running after slurmd is gone.
if live_pid "$RUN_DIR/slurmctld.pid" slurmctld >/dev/null && command -v squeue >/dev/null 2>&1; then
  export SLURM_CONF="$CONF"
  jobs="$(timeout 10 squeue -h -o '%A' 2>/dev/null || true)"
  if [[ -n "$jobs" ]]; then
    # shellcheck disable=SC2086  # one job id per word
    timeout 10 scancel $jobs 2>/dev/null || true
    for _ in $(seq 1 50); do
      [[ -z "$(timeout 10 squeue -h -o '%A' 2>/dev/null || true)" ]] && break
      sleep 0.2
    done
    say "cancelled jobs: ${jobs//$'\n'/ }"
  fi
fi

# Each daemon takes 1-2 s to shut down; stop them side by side. None needs the others
# while it shuts down (slurmctld saves its state to disk, slurmd just exits).
signal_daemon "$RUN_DIR/slurmd.pid" slurmd
signal_daemon "$RUN_DIR/slurmctld.pid" slurmctld
signal_daemon "$MUNGE_PID" munged
wait_all

if ((purge)); then
  if [[ -f "$CONF" ]] && head -n 1 "$CONF" | grep -q 'kicktrain tools/slurm/start.sh'; then
    rm -f "$CONF"
  fi
  rm -rf "$KT_SLURM_DIR"
  say "removed $KT_SLURM_DIR"
fi
exit 0
