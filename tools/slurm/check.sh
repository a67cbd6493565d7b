#!/usr/bin/env bash
# Smoke test for the cluster started by tools/slurm/start.sh.
#
# Submits a 4-task array job (each task writes its $SLURM_ARRAY_TASK_ID to a file) and a
# job that depends on it (afterok) and joins those files, waits for both, and checks the
# result. Prints "slurm ok (N s)" and exits 0 on success; otherwise prints the reason, the
# job records and the ends of the daemon logs to stderr and exits 1.
#
# Settings (environment):
#   KT_SLURM_DIR            where start.sh put the logs (default /tmp/kicktrain-slurm)
#   KT_SLURM_CHECK_TIMEOUT  seconds to wait for the jobs (default 120)
set -euo pipefail

KT_SLURM_DIR="${KT_SLURM_DIR:-/tmp/kicktrain-slurm}"
TIMEOUT="${KT_SLURM_CHECK_TIMEOUT:-120}"
t0=$SECONDS

array_id=""
join_id=""

# Print the reason and what Slurm knows, keep the work folder for a look, exit 1.
fail() {
  echo "check.sh: FAILED: $1" >&2
  {
    for id in $array_id $join_id; do
      echo "---- scontrol show job $id ----"
      timeout 10 scontrol show job "$id" 2>&1 || true
    done
    echo "---- squeue ----"
    timeout 10 squeue 2>&1 || true
    echo "---- sinfo ----"
    timeout 10 sinfo 2>&1 || true
    for log in "$KT_SLURM_DIR/log/slurmctld.log" "$KT_SLURM_DIR/log/slurmd.log"; do
      if [[ -s "$log" ]]; then
        echo "---- last 15 lines of $log ----"
        tail -n 15 "$log"
      fi
    done
    [[ -n "${work:-}" ]] && echo "---- work folder kept: $work ----"
  } >&2
  exit 1
}

command -v sbatch >/dev/null 2>&1 || fail "sbatch not found; run tools/slurm/start.sh first"
timeout 10 scontrol ping 2>/dev/null | grep -q 'is UP' \
  || fail "slurmctld does not answer; run tools/slurm/start.sh first"

# A work folder that every job can reach (the jobs run as the submitting user, on this machine).
work="$(mktemp -d "${TMPDIR:-/tmp}/kt-slurm-check.XXXXXX")"
chmod 0755 "$work"

# The array: task i writes "i" to out.i. Single quotes: the variable is expanded by the job.
# shellcheck disable=SC2016
array_id="$(sbatch --parsable --array=0-3 --job-name=kt-check-array --time=5 \
  --chdir="$work" --output="$work/array-%A_%a.log" \
  --wrap 'echo "$SLURM_ARRAY_TASK_ID" > "out.$SLURM_ARRAY_TASK_ID"')" \
  || fail "sbatch of the array job was refused"
array_id="${array_id%%;*}" # --parsable prints "id" or "id;cluster"

# The join: runs only once every array task has ended with exit code 0.
join_id="$(sbatch --parsable --dependency="afterok:$array_id" --job-name=kt-check-join --time=5 \
  --chdir="$work" --output="$work/join.log" \
  --wrap 'cat out.0 out.1 out.2 out.3 > joined.tmp && mv joined.tmp joined.txt')" \
  || fail "sbatch of the dependent job was refused"
join_id="${join_id%%;*}"

# Field "JobState=..." of a job, from scontrol (no accounting database needed).
job_state() {
  timeout 10 scontrol show job "$1" 2>/dev/null | grep -o 'JobState=[A-Z_]*' | head -n 1 | cut -d= -f2 || true
}

deadline=$((SECONDS + TIMEOUT))
state=""
while ((SECONDS < deadline)); do
  state="$(job_state "$join_id")"
  case "$state" in
    COMPLETED) break ;;
    FAILED | CANCELLED | TIMEOUT | NODE_FAIL | OUT_OF_MEMORY | BOOT_FAIL | DEADLINE | PREEMPTED)
      fail "dependent job $join_id ended $state"
      ;;
  esac
  # A dependency that can never be met leaves the job PENDING for ever; stop early then.
  if timeout 10 scontrol show job "$join_id" 2>/dev/null | grep -q 'Reason=DependencyNeverSatisfied'; then
    fail "dependent job $join_id will never run: an array task failed"
  fi
  sleep 0.5
done
[[ "$state" == COMPLETED ]] || fail "jobs not done after ${TIMEOUT} s (dependent job $join_id is '${state:-unknown}')"

expected="$(printf '%s\n' 0 1 2 3)"
[[ -f "$work/joined.txt" ]] || fail "dependent job completed but wrote no $work/joined.txt"
got="$(cat "$work/joined.txt")"
[[ "$got" == "$expected" ]] || fail "joined output is '${got//$'\n'/ }', expected '0 1 2 3'"

rm -rf "$work"
echo "slurm ok ($((SECONDS - t0)) s)"
