#!/usr/bin/env bash
# End-to-end test of `ogive work` against a real server.
#
#   work_test.sh PATH/TO/ogived PATH/TO/ogive
#
# Makes an admin token (sent from $OGIVE_TOKEN), starts ogived on a temporary database and a free
# loopback port, creates a scored and a graded
# campaign (one real, one integer, one flag, one categorical parameter) from text-format designs, and
# runs the worker loop against programs that print a score, print a grade, print 'infeasible', print
# something unreadable, exit non-zero, kill themselves with SIGKILL, and run until the worker gets
# SIGTERM. Then it checks every trial's state and outcome through `ogive campaign trials --csv` and
# `--json`, and that ogived stops cleanly on SIGTERM. Every step is bounded in time.
set -euo pipefail

source "$(dirname "$0")/../../tests/support/test_lib.sh" ogive-work-test "$@"
FAIL_LOG_LINES=40

# ---- Start the server ----
PORT=$(free_port)
export OGIVE_SERVER="127.0.0.1:$PORT"
export TMPDIR="$TMP"  # candidate files go here, so the test can see that they are removed
# Every call of the CLI below sends this admin token, read from $OGIVE_TOKEN.
OGIVE_TOKEN=$(timeout 30 "$OGIVED" token create --db "$TMP/ogive.db" --role admin --label work-test \
  2>"$TMP/token.log") || fail "token create: $(cat "$TMP/token.log")"
export OGIVE_TOKEN
"$OGIVED" --db "$TMP/ogive.db" --listen "$OGIVE_SERVER" --sweep-interval 0.2 \
  >"$TMP/ogived.log" 2>&1 &
OGIVED_PID=$!
for _ in $(seq 100); do
  if timeout 5 "$OGIVE" campaign list --timeout 1 >/dev/null 2>&1; then break; fi
  kill -0 "$OGIVED_PID" 2>/dev/null || fail "ogived exited at start"
  sleep 0.1
done
timeout 5 "$OGIVE" campaign list >/dev/null 2>&1 || fail "ogived does not answer on $OGIVE_SERVER"

# ---- Designs and programs ----
PARAMETERS='
parameters { name: "temp" unit: "degC" real { low: 100 high: 200 } }
parameters { name: "passes" integer { low: 1 high: 5 } }
parameters { name: "vacuum" flag {} }
parameters {
  name: "carrier-gas"
  categorical { options: "argon" options: "nitrogen" options: "helium" }
}
seed: 7
lease_seconds: 30
'
cat >"$TMP/scored.txtpb" <<EOF
name: "e2e-scored"
objective { direction: DIRECTION_LOWER_IS_BETTER }
$PARAMETERS
EOF
cat >"$TMP/graded.txtpb" <<EOF
name: "e2e-graded"
objective { grade_scale { labels: "cracked" labels: "fair" labels: "good" } }
$PARAMETERS
EOF

# Checks the candidate it is handed (environment and JSON file agree and lie in the bounds), then
# prints some chatter and, last, a score.
cat >"$TMP/score.sh" <<'EOF'
#!/usr/bin/env bash
set -euo pipefail
echo "$OGIVE_CANDIDATE_FILE" >>"$TMPDIR/candidate_files.txt"
/usr/bin/python3 - <<'PY'
import json, math, os, sys
env = os.environ
c = json.load(open(env["OGIVE_CANDIDATE_FILE"]))
assert env["OGIVE_CAMPAIGN"] == "e2e-scored", env["OGIVE_CAMPAIGN"]
assert int(env["OGIVE_TRIAL"]) >= 1
assert set(c) == {"temp", "passes", "vacuum", "carrier-gas"}, c
assert 100 <= float(env["OGIVE_TEMP"]) <= 200 and float(env["OGIVE_TEMP"]) == c["temp"], c
assert isinstance(c["temp"], float)
assert 1 <= int(env["OGIVE_PASSES"]) <= 5 and int(env["OGIVE_PASSES"]) == c["passes"], c
assert env["OGIVE_VACUUM"] in ("0", "1") and (env["OGIVE_VACUUM"] == "1") == c["vacuum"], c
assert env["OGIVE_CARRIER_GAS"] in ("argon", "nitrogen", "helium"), env["OGIVE_CARRIER_GAS"]
assert env["OGIVE_CARRIER_GAS"] == c["carrier-gas"], c
PY
echo "heating to $OGIVE_TEMP degC"
echo
/usr/bin/python3 - <<'PY'
import os
t, n = float(os.environ["OGIVE_TEMP"]), int(os.environ["OGIVE_PASSES"])
print("  %.6e  " % ((t - 150) ** 2 / 100 + n))
PY
echo "   "
EOF
cat >"$TMP/grade.sh" <<'EOF'
#!/usr/bin/env bash
echo "looked at it"
echo "Good"
EOF
cat >"$TMP/infeasible.sh" <<'EOF'
#!/usr/bin/env bash
echo infeasible
EOF
cat >"$TMP/unreadable.sh" <<'EOF'
#!/usr/bin/env bash
echo "3.5 mm, roughly"
EOF
cat >"$TMP/fail.sh" <<'EOF'
#!/usr/bin/env bash
echo 1.25
echo "the furnace is cold" >&2
exit 3
EOF
cat >"$TMP/kill.sh" <<'EOF'
#!/usr/bin/env bash
echo 1.25
kill -KILL $$
EOF
# Runs "forever" in a child process, so the test sees that SIGTERM reaches the whole process group.
cat >"$TMP/long.sh" <<'EOF'
#!/usr/bin/env bash
sleep 300 &
echo $! >"$TMPDIR/long_child.pid"
wait
EOF
chmod +x "$TMP"/*.sh

work() {  # work CAMPAIGN LOG ARGS... ; sets RC
  local campaign=$1 log=$2
  shift 2
  RC=0
  timeout 90 "$OGIVE" work "$campaign" "$@" >"$TMP/$log.out" 2>"$TMP/$log.log" || RC=$?
}
expect_rc() {  # expect_rc WANT WHAT
  [[ "$RC" -eq "$1" ]] || fail "$2: exit status $RC, expected $1"
}
expect_log() {  # expect_log LOG TEXT
  grep -qF -- "$2" "$TMP/$1.log" || fail "$1: no line with '$2' in its log"
}

step "create the campaigns"
timeout 10 "$OGIVE" campaign create "$TMP/scored.txtpb" >"$TMP/create.out" || fail "campaign create"
grep -q "created campaign e2e-scored (population" "$TMP/create.out" ||
  fail "create: $(cat "$TMP/create.out")"
timeout 10 "$OGIVE" campaign create "$TMP/graded.txtpb" >/dev/null || fail "campaign create graded"

step "(a) programs that print a score, two at a time"
work e2e-scored a --max-trials 4 --parallel 2 -- "$TMP/score.sh"
expect_rc 0 "(a)"
[[ $(grep -cE '^trial [0-9]+: score [-+0-9.e]+ \([0-9.]+ s\)$' "$TMP/a.log") -eq 4 ]] ||
  fail "(a): expected 4 'trial N: score X (T s)' lines"
expect_log a "--max-trials 4"
grep -q "heating to" "$TMP/a.out" || fail "(a): the program's output is not copied through"
while read -r f; do
  [[ ! -e "$f" ]] || fail "(a): candidate file $f was not removed"
done <"$TMP/candidate_files.txt"
[[ $(wc -l <"$TMP/candidate_files.txt") -eq 4 ]] || fail "(a): expected 4 candidate files"

step "(b) a program that prints a grade, on the graded campaign"
work e2e-graded b --max-trials 2 -- "$TMP/grade.sh"
expect_rc 0 "(b)"
[[ $(grep -c ': grade good (' "$TMP/b.log") -eq 2 ]] || fail "(b): expected 2 'grade good' lines"

step "infeasible and unreadable output"
work e2e-scored infeasible --max-trials 1 -- "$TMP/infeasible.sh"
expect_rc 0 "infeasible"
expect_log infeasible ": infeasible ("
work e2e-scored unreadable --max-trials 1 -- "$TMP/unreadable.sh"
expect_rc 0 "unreadable"
expect_log unreadable 'not a number nor '"'"'infeasible'"'"': "3.5 mm, roughly"'

step "(c) a program that exits with status 3"
work e2e-scored c --max-trials 1 -- "$TMP/fail.sh"
expect_rc 0 "(c)"
expect_log c "the program exited with status 3"
expect_log c "the furnace is cold"  # its stderr passes through
expect_log c 'its standard error ended with: "the furnace is cold"'  # ...and ends the void note

step "(d) a program killed by SIGKILL"
work e2e-scored d --max-trials 1 -- "$TMP/kill.sh"
expect_rc 0 "(d)"
expect_log d "the program was killed by signal 9 (SIGKILL)"

# Waits for background process $1 for at most $2 seconds (then kills it and fails); sets RC.
wait_bounded() {
  local pid=$1 seconds=$2
  for _ in $(seq $((seconds * 20))); do
    kill -0 "$pid" 2>/dev/null || break
    sleep 0.05
  done
  if kill -0 "$pid" 2>/dev/null; then
    kill -KILL "$pid"
    fail "process $pid still runs after $seconds s"
  fi
  RC=0
  wait "$pid" || RC=$?
}

step "(e) SIGTERM to the worker while a long program runs"
# Started directly (not under `timeout`, which would pass the signal on to its whole process group),
# so that the signal goes to the `ogive work` process alone; wait_bounded bounds it instead.
"$OGIVE" work e2e-scored --max-trials 1 -- "$TMP/long.sh" >"$TMP/e.out" 2>"$TMP/e.log" &
WORK_PID=$!
for _ in $(seq 200); do
  [[ -s "$TMP/long_child.pid" ]] && break
  sleep 0.05
done
[[ -s "$TMP/long_child.pid" ]] || fail "(e): the long program did not start"
kill -TERM "$WORK_PID"
wait_bounded "$WORK_PID" 30
expect_rc 143 "(e)"
expect_log e "worker stopped by SIGTERM"
LONG_CHILD=$(cat "$TMP/long_child.pid")
for _ in $(seq 100); do
  kill -0 "$LONG_CHILD" 2>/dev/null || break
  sleep 0.05
done
if kill -0 "$LONG_CHILD" 2>/dev/null; then
  kill -KILL "$LONG_CHILD"
  fail "(e): the program's child survived the worker's SIGTERM"
fi

step "a paused campaign: the worker waits, and goes on when it is resumed"
timeout 10 "$OGIVE" campaign pause e2e-graded >/dev/null
"$OGIVE" work e2e-graded --max-trials 1 -- "$TMP/grade.sh" >"$TMP/paused.out" 2>"$TMP/paused.log" &
WORK_PID=$!
for _ in $(seq 200); do
  grep -qs "is paused" "$TMP/paused.log" && break
  sleep 0.05
done
grep -q "is paused" "$TMP/paused.log" || fail "paused: the worker did not say the campaign is paused"
timeout 10 "$OGIVE" campaign resume e2e-graded >/dev/null
wait_bounded "$WORK_PID" 30
expect_rc 0 "paused"
expect_log paused ": grade good ("

step "a done campaign: the worker says so and exits 0"
timeout 10 "$OGIVE" campaign finish e2e-graded >/dev/null
work e2e-graded done -- "$TMP/grade.sh"
expect_rc 0 "done"
expect_log done "campaign e2e-graded is done (stopped)"

step "check the trials (CSV and JSON)"
timeout 10 "$OGIVE" campaign trials e2e-scored --csv >"$TMP/scored.csv" || fail "campaign trials --csv"
timeout 10 "$OGIVE" campaign trials e2e-graded --json >"$TMP/graded.json" || fail "campaign trials --json"
timeout 10 "$OGIVE" campaign trials e2e-scored --state voided >"$TMP/voided.txt" || fail "--state"
"$PY" - "$TMP/scored.csv" "$TMP/graded.json" <<'PY' || fail "trial states and outcomes"
import csv, json, math, sys
rows = list(csv.DictReader(open(sys.argv[1], newline="")))
assert [int(r["trial"]) for r in rows] == list(range(1, 10)), [r["trial"] for r in rows]
by_kind = {}
for r in rows:
    by_kind.setdefault(r["outcome"], []).append(r)
    assert r["worker"], r
    assert 100 <= float(r["temp (degC)"]) <= 200 and r["vacuum"] in ("true", "false"), r
    assert r["carrier-gas"] in ("argon", "nitrogen", "helium"), r
scores = by_kind.get("score", [])
assert len(scores) == 4, rows
for r in scores:
    assert r["state"] == "reported" and math.isfinite(float(r["score"])), r
    expected = (float(r["temp (degC)"]) - 150) ** 2 / 100 + int(r["passes"])
    assert abs(float(r["score"]) - expected) <= 1e-6 * max(1, abs(expected)), (r, expected)
assert [r["state"] for r in by_kind["infeasible"]] == ["reported"], by_kind["infeasible"]
voids = by_kind["void"]
assert all(r["state"] == "voided" for r in voids), voids
notes = sorted(r["note"] for r in voids)
expected_notes = [
    "exited with status 3",
    "killed by signal 9 (SIGKILL)",
    "\"3.5 mm, roughly\"",
    "worker stopped by SIGTERM",
]
assert len(voids) == 4, notes
for want in expected_notes:
    assert any(want in n for n in notes), (want, notes)
assert not any(r["state"] == "leased" for r in rows), rows

graded = json.load(open(sys.argv[2]))
assert len(graded) == 3, graded
for t in graded:
    assert t["state"] == "reported" and t["outcome"] == "grade", t
    assert t["grade"] == "good", t  # "Good" matched the scale's label, spelled as there
print("trials ok: %d scored-campaign trials, %d graded-campaign trials" % (len(rows), len(graded)))
PY
[[ $(grep -c voided "$TMP/voided.txt") -eq 4 ]] || fail "--state voided: $(cat "$TMP/voided.txt")"

step "a program that always fails: the worker backs off and stops after --max-consecutive-failures"
sed -e 's/name: "e2e-scored"/name: "e2e-broken"/' "$TMP/scored.txtpb" >"$TMP/broken.txtpb"
timeout 10 "$OGIVE" campaign create "$TMP/broken.txtpb" >/dev/null || fail "campaign create broken"
work e2e-broken broken --max-consecutive-failures 3 -- "$TMP/fail.sh"
expect_rc 1 "always failing"
expect_log broken "the program failed 3 times in a row (--max-consecutive-failures 3"
expect_log broken "2 failures in a row; the next trial starts in 1s"
voided=$(timeout 10 "$OGIVE" campaign trials e2e-broken --state voided --json | "$PY" -c 'import json,sys; print(len(json.load(sys.stdin)))')
[[ "$voided" -eq 3 ]] || fail "always failing: $voided trials voided, expected exactly the limit of 3"
leased=$(timeout 10 "$OGIVE" campaign trials e2e-broken --state leased --json | "$PY" -c 'import json,sys; print(len(json.load(sys.stdin)))')
[[ "$leased" -eq 0 ]] || fail "always failing: $leased trials left leased"

step "a program that hangs: --trial-timeout stops it, reports void with the reason, and goes on"
printf '%s\n' '#!/usr/bin/env bash' 'echo 2.5' 'sleep 300' >"$TMP/hang.sh"
chmod +x "$TMP/hang.sh"
work e2e-broken hang --trial-timeout 1s --max-trials 2 -- "$TMP/hang.sh"
expect_rc 0 "hanging program with --trial-timeout"
[[ $(grep -c "the program ran longer than --trial-timeout 1s and was stopped" "$TMP/hang.log") -eq 2 ]] ||
  fail "hang: expected 2 trials stopped by --trial-timeout: $(cat "$TMP/hang.log")"
notes=$(timeout 10 "$OGIVE" campaign trials e2e-broken --state voided --json |
  "$PY" -c 'import json,sys; print(sum("--trial-timeout" in t["note"] for t in json.load(sys.stdin)))')
[[ "$notes" -eq 2 ]] || fail "hang: $notes void notes name --trial-timeout, expected 2"

step "stop ogived with SIGTERM"
kill -TERM "$OGIVED_PID"
RC=0
timeout 30 tail --pid="$OGIVED_PID" -f /dev/null || fail "ogived did not stop within 30 s"
wait "$OGIVED_PID" || RC=$?
OGIVED_PID=""
expect_rc 0 "ogived after SIGTERM"
echo "PASS"
