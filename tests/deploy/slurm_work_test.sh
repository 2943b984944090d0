#!/usr/bin/env bash
# deploy/slurm/ogive-work.sbatch without Slurm: the script body runs with the environment a job
# array task sees (SLURM_ARRAY_JOB_ID, SLURM_ARRAY_TASK_ID, SLURM_CPUS_PER_TASK), against a real
# ogived on loopback.
#
#   slurm_work_test.sh PATH/TO/ogived PATH/TO/ogive PATH/TO/ogive-work.sbatch
#
# Checks: the #SBATCH header asks for an array and for SIGTERM to the batch shell before the time
# limit; a task with OGIVE_MAX_TRIALS reports that many trials under its worker name and exits 0;
# a task whose programs are still running when it gets SIGTERM (what --signal=B:TERM@60 sends)
# exits 0 within seconds, its running trials are void with a note naming the signal, and their
# programs are gone; a missing token file, a missing OGIVE_SERVER and missing arguments are
# refused. Every step is bounded in time.
set -euo pipefail

if [[ $# -ne 3 ]]; then
  echo "usage: $0 OGIVED OGIVE SCRIPT" >&2
  exit 2
fi
OGIVED=$(realpath "$1")
OGIVE=$(realpath "$2")
SCRIPT=$(realpath "$3")
PY=/usr/bin/python3

TMP=$(mktemp -d "${TMPDIR:-/tmp}/ogive-slurm-test.XXXXXX")
OGIVED_PID=""
TASK_PID=""
cleanup() {
  [[ -n "$TASK_PID" ]] && kill -KILL "$TASK_PID" 2>/dev/null || true
  if [[ -f "$TMP/slow.log" ]]; then
    while read -r _ _ pid _; do kill -KILL "$pid" 2>/dev/null || true; done <"$TMP/slow.log"
  fi
  if [[ -n "$OGIVED_PID" ]] && kill -0 "$OGIVED_PID" 2>/dev/null; then kill -KILL "$OGIVED_PID" 2>/dev/null || true; fi
  rm -rf "$TMP"
}
trap cleanup EXIT
fail() {
  echo "FAIL: $*" >&2
  for log in "$TMP"/*.log; do
    [[ -f "$log" ]] || continue
    echo "---- $log" >&2
    tail -n 20 "$log" >&2
  done
  exit 1
}
step() { echo "== $*"; }

step "the #SBATCH header: an array, SIGTERM to the batch shell ahead of the time limit; bash -n"
grep -qE '^#SBATCH --array=' "$SCRIPT" || fail "no #SBATCH --array"
grep -qE '^#SBATCH --signal=B:TERM@[0-9]+$' "$SCRIPT" || fail "no #SBATCH --signal=B:TERM@SECONDS"
grep -qE '^#SBATCH --time=' "$SCRIPT" || fail "no #SBATCH --time"
bash -n "$SCRIPT" || fail "bash -n"

step "start ogived and create a campaign"
PORT=$("$PY" -c 'import socket; s = socket.socket(); s.bind(("127.0.0.1", 0)); print(s.getsockname()[1])')
export OGIVE_SERVER="127.0.0.1:$PORT"
"$OGIVED" --db "$TMP/ogive.db" --listen "$OGIVE_SERVER" --no-auth >"$TMP/ogived.log" 2>&1 &
OGIVED_PID=$!
for _ in $(seq 100); do
  timeout 5 "$OGIVE" --timeout 1 campaign list >/dev/null 2>&1 && break
  kill -0 "$OGIVED_PID" 2>/dev/null || fail "ogived exited at start"
  sleep 0.1
done
cat >"$TMP/design.txtpb" <<'EOF2'
name: "array"
parameters { name: "x" real { low: -2 high: 2 } }
parameters { name: "y" real { low: -2 high: 2 } }
objective { direction: DIRECTION_LOWER_IS_BETTER }
population_size: 4
seed: 8
EOF2
timeout 30 "$OGIVE" campaign create "$TMP/design.txtpb" >/dev/null || fail "campaign create"

# The programs a task runs for its trials: one scores at once, one runs until it is stopped.
cat >"$TMP/quick-program" <<'EOF2'
#!/bin/sh
echo "$OGIVE_X $OGIVE_Y" | awk '{ print $1 * $1 + $2 * $2 }'
EOF2
cat >"$TMP/slow-program" <<'EOF2'
#!/bin/sh
echo "trial $OGIVE_TRIAL pid $$ started" >>"$SLOW_LOG"
exec sleep 300  # the same process id
EOF2
chmod +x "$TMP/quick-program" "$TMP/slow-program"
echo "not-a-real-token" >"$TMP/token"
chmod 600 "$TMP/token"

trials_json() { timeout 30 "$OGIVE" campaign trials array --json; }
# "worker state note" for every trial of a worker.
trials_of() {
  trials_json | "$PY" -c '
import json, sys
for t in json.load(sys.stdin):
    if t.get("worker") == sys.argv[1]:
        print(t["state"], t.get("note", "").replace(" ", "_") or "-")
' "$1"
}
HOST=$(hostname -s 2>/dev/null || hostname)

step "task 3 of job 77 with OGIVE_MAX_TRIALS=4 and 2 CPUs: 4 trials reported, exit 0"
rc=0
env SLURM_ARRAY_JOB_ID=77 SLURM_ARRAY_TASK_ID=3 SLURM_JOB_ID=78 SLURM_CPUS_PER_TASK=2 \
  OGIVE="$OGIVE" OGIVE_TOKEN_FILE="$TMP/token" OGIVE_MAX_TRIALS=4 \
  timeout 60 bash "$SCRIPT" array -- "$TMP/quick-program" >"$TMP/task3.log" 2>&1 || rc=$?
[[ $rc -eq 0 ]] || fail "task 3 exited $rc"
reported=$(trials_of "slurm-77_3@$HOST" | grep -c "^reported" || true)
[[ "$reported" -eq 4 ]] || fail "task 3 reported $reported trials as slurm-77_3@$HOST: $(trials_of "slurm-77_3@$HOST")"

step "task 4 gets SIGTERM (the time limit) while 2 programs run: exit 0, both trials void, programs gone"
export SLOW_LOG="$TMP/slow.log"
env SLURM_ARRAY_JOB_ID=77 SLURM_ARRAY_TASK_ID=4 SLURM_CPUS_PER_TASK=2 \
  OGIVE="$OGIVE" OGIVE_TOKEN_FILE="$TMP/token" \
  bash "$SCRIPT" array -- "$TMP/slow-program" >"$TMP/task4.log" 2>&1 &
TASK_PID=$!
for _ in $(seq 200); do
  [[ -f "$SLOW_LOG" && $(wc -l <"$SLOW_LOG") -ge 2 ]] && break
  kill -0 "$TASK_PID" 2>/dev/null || fail "task 4 exited early"
  sleep 0.05
done
[[ $(wc -l <"$SLOW_LOG") -ge 2 ]] || fail "task 4 did not start 2 programs"
kill -TERM "$TASK_PID"
timeout 20 tail --pid="$TASK_PID" -f /dev/null || fail "task 4 did not stop within 20 s of SIGTERM"
rc=0
wait "$TASK_PID" || rc=$?
TASK_PID=""
[[ $rc -eq 0 ]] || fail "task 4 exited $rc after SIGTERM (expected 0)"
grep -q "stopped by SIGTERM" "$TMP/task4.log" || fail "task 4 did not say why it stopped"
states=$(trials_of "slurm-77_4@$HOST")
[[ $(grep -c . <<<"$states") -eq 2 ]] || fail "task 4 trials: $states"
while read -r state note; do
  [[ "$state" == voided ]] || fail "a running trial of task 4 is $state, not voided"
  [[ "$note" == *SIGTERM* ]] || fail "a void report of task 4 has the note '$note'"
done <<<"$states"
while read -r _ trial _ pid _; do
  ! kill -0 "$pid" 2>/dev/null || fail "the program of trial $trial (process $pid) still runs"
done <"$SLOW_LOG"

step "refusals: no token file (1), no OGIVE_SERVER (2), no program (2)"
rc=0
env OGIVE="$OGIVE" OGIVE_TOKEN_FILE="$TMP/missing" timeout 20 bash "$SCRIPT" array -- /bin/true \
  >"$TMP/r.log" 2>&1 || rc=$?
[[ $rc -eq 1 ]] && grep -q "token file" "$TMP/r.log" || fail "missing token file: $rc $(cat "$TMP/r.log")"
rc=0
env -u OGIVE_SERVER OGIVE="$OGIVE" OGIVE_TOKEN_FILE="$TMP/token" timeout 20 bash "$SCRIPT" array -- /bin/true \
  >"$TMP/r.log" 2>&1 || rc=$?
[[ $rc -eq 2 ]] && grep -q OGIVE_SERVER "$TMP/r.log" || fail "missing OGIVE_SERVER: $rc $(cat "$TMP/r.log")"
rc=0
env OGIVE="$OGIVE" OGIVE_TOKEN_FILE="$TMP/token" timeout 20 bash "$SCRIPT" array >"$TMP/r.log" 2>&1 || rc=$?
[[ $rc -eq 2 ]] && grep -q usage "$TMP/r.log" || fail "missing program: $rc $(cat "$TMP/r.log")"

kill -TERM "$OGIVED_PID"
wait "$OGIVED_PID" || fail "ogived exited non-zero"
OGIVED_PID=""
echo "slurm_work_test: OK"
