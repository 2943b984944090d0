#!/usr/bin/env bash
# Rolling restarts under load: 16 `ogive work` loops (four of them with --parallel 2) on one campaign
# while ogived is stopped with SIGTERM and started again on the same file and port 10 times, at
# random moments (seeded). No worker may exit non-zero, every score a worker printed as stored must be
# stored exactly once with that value, and the campaign must reach its budget. Loopback only; every
# wait is bounded.
set -euo pipefail
source "$(dirname "$0")/../../tests/support/test_lib.sh" rolling-restart "$@"

DB="$TMP/rolling.db"
SERVER="127.0.0.1:$(free_port)"
start_server() {
  "$OGIVED" --db "$DB" --listen "$SERVER" --no-auth --sweep-interval 0.5s >>"$TMP/ogived.log" 2>&1 &
  OGIVED_PID=$!
  for _ in $(seq 200); do
    timeout 5 "$OGIVE" --server "$SERVER" --timeout 1s campaign list >/dev/null 2>&1 && return 0
    kill -0 "$OGIVED_PID" 2>/dev/null || fail "ogived exited at start"
    sleep 0.05
  done
  fail "ogived does not answer on $SERVER"
}
stop_server() {
  kill -TERM "$OGIVED_PID"
  local rc=0
  timeout 30 tail --pid="$OGIVED_PID" -f /dev/null || fail "ogived did not stop within 30 s of SIGTERM"
  wait "$OGIVED_PID" || rc=$?
  OGIVED_PID=""
  [[ "$rc" -eq 0 ]] || fail "ogived exited $rc after SIGTERM"
}

start_server
cat >"$TMP/design.txtpb" <<'DESIGN'
name: "rolling"
parameters { name: "x" real { low: -5 high: 5 } }
parameters { name: "y" real { low: -5 high: 5 } }
objective { direction: DIRECTION_LOWER_IS_BETTER }
trial_budget: 600
restarts: true  # the sphere converges well before 600 outcomes; restarts keep the load on to the budget
seed: 5
lease_seconds: 60
DESIGN
timeout 10 "$OGIVE" --server "$SERVER" campaign create "$TMP/design.txtpb" >/dev/null || fail "campaign create"
printf '%s\n' '#!/usr/bin/env bash' 'sleep 0.0$((RANDOM % 5))' \
  "$PY"' -c "import os; x, y = float(os.environ[\"OGIVE_X\"]), float(os.environ[\"OGIVE_Y\"]); print((x - 1) ** 2 + (y + 2) ** 2)"' \
  >"$TMP/objective.sh"
chmod +x "$TMP/objective.sh"

step "16 workers; ogived restarted with SIGTERM 10 times while they work"
for w in $(seq 16); do
  parallel=1
  [[ $((w % 4)) -eq 0 ]] && parallel=2
  timeout 240 "$OGIVE" --server "$SERVER" work rolling --worker "node-$w" --parallel "$parallel" \
    -- "$TMP/objective.sh" >"$TMP/w$w.out" 2>"$TMP/w$w.err" &
  PIDS+=($!)
done
RANDOM=42  # the moments of the restarts are the same in every run
for restart in $(seq 10); do
  sleep "0.$((3 + RANDOM % 7))"
  stop_server
  start_server
done
failed=0
for pid in "${PIDS[@]}"; do wait "$pid" || failed=$((failed + 1)); done
PIDS=()
[[ "$failed" -eq 0 ]] || fail "$failed of 16 workers exited non-zero: $(grep -h "ogive work\|NOT stored" "$TMP"/w*.err | sort | uniq -c | head)"

step "every score printed as stored is stored once; the campaign reached its budget"
grep -h "NOT stored" "$TMP"/w*.err && fail "a worker printed a report as not stored"
grep -h "^trial [0-9]*: score" "$TMP"/w*.err >"$TMP/printed.txt" || true
timeout 30 "$OGIVE" --server "$SERVER" campaign trials rolling --json >"$TMP/trials.json" || fail "campaign trials"
timeout 30 "$OGIVE" --server "$SERVER" campaign show rolling --json >"$TMP/show.json" || fail "campaign show"
"$PY" - "$TMP/printed.txt" "$TMP/trials.json" "$TMP/show.json" "$(grep -c "event=draining" "$TMP/ogived.log")" <<'PY' ||
import json, re, sys
printed = {}
for line in open(sys.argv[1]):
    m = re.match(r"trial (\d+): score (\S+)", line)
    n = int(m.group(1))
    assert n not in printed, "trial %d printed twice" % n
    printed[n] = float(m.group(2))
trials = {t["trial"]: t for t in json.load(open(sys.argv[2]))}
for n, score in printed.items():
    t = trials[n]
    assert t["state"] == "reported" and abs(t["score"] - score) <= 1e-6 * max(1, abs(score)), (n, score, t)
status = json.load(open(sys.argv[3]))["status"]
assert status["phase"] == "CAMPAIGN_PHASE_DONE" and status["reason"] == "DONE_REASON_BUDGET", status
assert int(status["reported"]) == 600, status
assert len(printed) == 600, "workers printed %d stored scores, the campaign holds 600" % len(printed)
assert int(sys.argv[4]) >= 10, "ogived drained %s times" % sys.argv[4]
print("   600 scores stored once each across %s restarts" % sys.argv[4])
PY
  fail "stored trials differ from what the workers printed"
stop_server
echo "PASS"
