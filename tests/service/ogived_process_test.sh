#!/usr/bin/env bash
# The real ogived process: start, SIGTERM while clients are mid-way, restart.
#
#   ogived_process_test.sh PATH/TO/ogived PATH/TO/ogive
#
# Checks that ogived refuses an unknown option and a file that is not a database (status 2). Makes an
# admin token (`ogived token create`; every CLI call below sends it with --token-file), starts
# ogived on a temporary database and a free loopback port, creates a campaign with the CLI, asks
# and tells a few trials, and checks that the server's own sweeper lapses an expired lease. Then two
# workers run ask/tell loops (one tells at once, one "evaluates" for a while between ask and tell)
# and ogived gets SIGTERM right after the slow worker's ask. Checks: ogived exits 0; after a restart
# every acknowledged tell is in the database with its score (`ogive campaign trials --json`); a second
# restart shows the same generation, trial count, status and trial list; the trial that was leased
# when the server stopped can still be told; SIGINT stops it with status 0 too; the file passes
# PRAGMA integrity_check. Every step is bounded in time.
set -euo pipefail

source "$(dirname "$0")/../../tests/support/test_lib.sh" ogived-process-test "$@"
DB="$TMP/ogive.db"

TOKEN_FILE="$TMP/admin.token"
ogive() { timeout 30 "$OGIVE" --server "$SERVER" --timeout 5 --token-file "$TOKEN_FILE" "$@"; }

# Starts ogived on $DB and a port that was free at the first start (the same one on every restart,
# as an upgrade keeps its address, so that clients reconnect); waits until it answers.
start_server() {
  SERVER="${SERVER:-127.0.0.1:$(free_port)}"
  "$OGIVED" --db "$DB" --listen "$SERVER" --sweep-interval 0.2 >>"$TMP/ogived.log" 2>&1 &
  OGIVED_PID=$!
  for _ in $(seq 100); do
    if timeout 5 "$OGIVE" --server "$SERVER" --timeout 1 --token-file "$TOKEN_FILE" campaign list >/dev/null 2>&1; then
      return 0
    fi
    kill -0 "$OGIVED_PID" 2>/dev/null || fail "ogived exited at start"
    sleep 0.1
  done
  fail "ogived does not answer on $SERVER"
}

# Sends SIGTERM (or the signal named in $1) and checks that ogived exits with status 0 within 15 s.
stop_server() {
  kill "-${1:-TERM}" "$OGIVED_PID"
  for _ in $(seq 150); do
    kill -0 "$OGIVED_PID" 2>/dev/null || break
    sleep 0.1
  done
  if kill -0 "$OGIVED_PID" 2>/dev/null; then
    kill -KILL "$OGIVED_PID"
    fail "ogived did not exit within 15 s of SIGTERM"
  fi
  local rc=0
  wait "$OGIVED_PID" || rc=$?
  OGIVED_PID=""
  [[ "$rc" -eq 0 ]] || fail "ogived exited with status $rc after SIG${1:-TERM}"
}

# The trial number of the first trial in `ogive ask --json` output on stdin.
first_number() { "$PY" -c 'import json,sys; print(json.load(sys.stdin)[0]["trial"])'; }

# One worker: ask, wait $2 seconds, tell score "<trial>.25", and append "<trial> <score>" to
# $TMP/$1.acked once the tell was acknowledged. Writes the number of each trial it asked for to
# $TMP/$1.asked. Stops at the first failed call.
worker() {
  local name=$1 pause=$2 number score
  set +e
  for _ in $(seq 200); do
    number=$(ogive ask process --worker "$name" --json 2>>"$TMP/$name.log" |
      first_number 2>>"$TMP/$name.log") || break
    [[ -n "$number" ]] || break
    echo "$number" >>"$TMP/$name.asked"
    sleep "$pause"
    score="$number.25"
    ogive tell process "$number" --score "$score" --worker "$name" >>"$TMP/$name.log" 2>&1 || break
    echo "$number $score" >>"$TMP/$name.acked"
  done
}

lines() { if [[ -f "$1" ]]; then wc -l <"$1"; else echo 0; fi; }

# ---- Refusals at start ----
step "ogived refuses an unknown option and a file that is not a database (status 2)"
rc=0
timeout 10 "$OGIVED" --no-such-option >"$TMP/usage.out" 2>&1 || rc=$?
[[ "$rc" -eq 2 ]] || fail "unknown option: status $rc"
grep -q -- "--no-such-option" "$TMP/usage.out" || fail "unknown option: $(cat "$TMP/usage.out")"
grep -q "unknown option" "$TMP/usage.out" || fail "unknown option: $(cat "$TMP/usage.out")"
rc=0
timeout 10 "$OGIVED" --bogus >"$TMP/bogus.out" 2>&1 || rc=$?
[[ "$rc" -eq 2 ]] && grep -q "unknown option '--bogus'" "$TMP/bogus.out" || fail "--bogus: $(cat "$TMP/bogus.out")"
rc=0
timeout 10 "$OGIVED" --sweep-interval 5x >"$TMP/interval.out" 2>&1 || rc=$?
[[ "$rc" -eq 2 ]] && grep -q "90s, 15m, 2h, 2d" "$TMP/interval.out" || fail "--sweep-interval 5x: $(cat "$TMP/interval.out")"
"$OGIVED" --version | grep -Eq "^ogived [0-9]+\.[0-9]+\.[0-9]+ \(database schema version [0-9]+\)$" \
  || fail "ogived --version: $("$OGIVED" --version 2>&1)"
"$OGIVE" --version | grep -Eq "^ogive [0-9]+\.[0-9]+\.[0-9]+$" || fail "ogive --version: $("$OGIVE" --version 2>&1)"
head -c 4096 /dev/zero | tr '\0' 'x' >"$TMP/garbage.db"
rc=0
timeout 10 "$OGIVED" --db "$TMP/garbage.db" --listen "127.0.0.1:$(free_port)" >"$TMP/garbage.out" \
  2>&1 || rc=$?
[[ "$rc" -eq 2 ]] || fail "garbage database: status $rc"
grep -q "garbage.db" "$TMP/garbage.out" || fail "garbage database: $(cat "$TMP/garbage.out")"

# ---- Start, create, a few trials ----
step "make an admin token and start ogived"
timeout 30 "$OGIVED" token create --db "$DB" --role admin --label process-test >"$TOKEN_FILE" \
  2>"$TMP/token.log" || fail "token create: $(cat "$TMP/token.log")"
start_server
cat >"$TMP/design.txtpb" <<'EOF'
name: "process"
parameters { name: "pressure" unit: "bar" real { low: 1 high: 10 } }
parameters { name: "ratio" real { low: 0.001 high: 1 log: true } }
parameters { name: "stages" integer { low: 1 high: 6 } }
objective { direction: DIRECTION_LOWER_IS_BETTER }
population_size: 4
seed: 99
lease_seconds: 30
EOF
ogive campaign create "$TMP/design.txtpb" >"$TMP/create.out" 2>&1 ||
  fail "campaign create: $(cat "$TMP/create.out")"
grep -q "created campaign process" "$TMP/create.out" ||
  fail "campaign create printed: $(cat "$TMP/create.out")"

step "ask and tell 6 trials"
for _ in $(seq 6); do
  number=$(ogive ask process --worker seq --json | first_number)
  ogive tell process "$number" --score "$number.25" --worker seq >/dev/null
  echo "$number $number.25" >>"$TMP/seq.acked"
done

step "the server's sweeper lapses an expired lease with no request in between"
lapsing=$(ogive ask process --worker lapse --lease 1 --json | first_number)
sleep 1.6
ogive campaign trials process --state lapsed --json >"$TMP/lapsed.json"
"$PY" - "$TMP/lapsed.json" "$lapsing" <<'EOF' || fail "trial $lapsing did not lapse"
import json, sys
trials = json.load(open(sys.argv[1]))
assert [str(t["trial"]) for t in trials] == [sys.argv[2]], trials
assert trials[0]["state"] == "lapsed", trials[0]
EOF

# ---- SIGTERM while workers are mid-way ----
step "two workers; SIGTERM right after the slow worker's ask"
worker fast 0 &
PIDS+=($!)
worker slow 0.5 &
PIDS+=($!)
for _ in $(seq 200); do
  [[ $(lines "$TMP/slow.acked") -ge 2 && $(lines "$TMP/fast.acked") -ge 5 ]] && break
  sleep 0.05
done
[[ $(lines "$TMP/slow.acked") -ge 2 ]] || fail "the slow worker made no progress"
asked=$(lines "$TMP/slow.asked")
for _ in $(seq 200); do
  [[ $(lines "$TMP/slow.asked") -gt "$asked" ]] && break
  sleep 0.01
done
[[ $(lines "$TMP/slow.asked") -gt "$asked" ]] || fail "the slow worker asked no more"
stop_server
for pid in "${PIDS[@]}"; do
  for _ in $(seq 300); do
    kill -0 "$pid" 2>/dev/null || break
    sleep 0.1
  done
  kill -0 "$pid" 2>/dev/null && fail "a worker did not stop within 30 s of the server"
  wait "$pid" || true
done
PIDS=()
held=$(tail -n 1 "$TMP/slow.asked")
if grep -q "^$held " "$TMP/slow.acked"; then
  fail "the slow worker's last trial $held was told although the server had stopped"
fi
cat "$TMP"/*.acked >"$TMP/all.acked"
echo "   $(lines "$TMP/all.acked") acknowledged tells; trial $held leased when the server stopped"

# ---- Restart: every acknowledged tell is there ----
step "restart: every acknowledged tell is stored"
start_server
ogive campaign trials process --json >"$TMP/trials1.json"
ogive campaign show process --json >"$TMP/show1.json"
"$PY" - "$TMP/trials1.json" "$TMP/all.acked" "$held" "$lapsing" <<'EOF' || fail "stored trials"
import json, sys
trials = {int(t["trial"]): t for t in json.load(open(sys.argv[1]))}
acked = [line.split() for line in open(sys.argv[2]) if line.strip()]
assert acked, "no acknowledged tells"
for number, score in acked:
    t = trials.get(int(number))
    assert t is not None, "acknowledged trial %s is missing" % number
    assert t["state"] == "reported", t
    assert t["score"] == float(score), (t, score)
held, lapsing = int(sys.argv[3]), int(sys.argv[4])
assert trials[held]["state"] == "leased", trials[held]
assert trials[lapsing]["state"] == "lapsed", trials[lapsing]
assert sorted(trials) == list(range(1, len(trials) + 1)), sorted(trials)
EOF

step "restart again (a watch reconnects and says so): generation, trial count, status and trials unchanged"
timeout 60 "$OGIVE" --server "$SERVER" --timeout 5 --token-file "$TOKEN_FILE" campaign watch process \
  >"$TMP/watch.out" 2>"$TMP/watch.err" &
WATCH_PID=$!
for _ in $(seq 100); do [[ -s "$TMP/watch.out" ]] && break; sleep 0.1; done
[[ -s "$TMP/watch.out" ]] || fail "campaign watch printed nothing: $(cat "$TMP/watch.err")"
stop_server
start_server
ogive campaign trials process --json >"$TMP/trials2.json"
ogive campaign show process --json >"$TMP/show2.json"
"$PY" - "$TMP/show1.json" "$TMP/show2.json" "$TMP/trials1.json" "$TMP/trials2.json" <<'EOF' ||
import json, sys
show1, show2, trials1, trials2 = (json.load(open(p)) for p in sys.argv[1:5])
s1, s2 = show1["status"], show2["status"]
for s in (s1, s2):  # recent activity is dated by the clock and asks are not stored
    for key in ("as_of_unix_ms", "workers", "reports_last_hour"):
        s.pop(key, None)
assert int(s1["generation"]) >= 2, s1
assert s1["generation"] == s2["generation"], (s1["generation"], s2["generation"])
count = lambda s: sum(int(s[k]) for k in ("leased", "reported", "lapsed", "voided"))
assert count(s1) == count(s2) == len(trials1) == len(trials2), (count(s1), count(s2), len(trials1))
assert show1 == show2, "campaign show differs"
assert trials1 == trials2, "trial lists differ"  # compared as data: the CLI's JSON orders map keys
                                                # differently from one run to the next
print("   generation %s, %d trials" % (s2["generation"], len(trials2)))
EOF
  fail "state changed across a restart"

step "the trial leased before the stop can be told after the restart"
ogive tell process "$held" --score "$held.25" --worker slow >"$TMP/held.out" 2>&1 ||
  fail "tell $held: $(cat "$TMP/held.out")"
grep -qx "trial $held: stored" "$TMP/held.out" || fail "tell $held printed: $(cat "$TMP/held.out")"
ogive campaign trials process --state reported --json >"$TMP/reported.json"
"$PY" - "$TMP/reported.json" "$held" <<'EOF' || fail "trial $held not reported"
import json, sys
t = [t for t in json.load(open(sys.argv[1])) if str(t["trial"]) == sys.argv[2]]
assert len(t) == 1 and t[0]["score"] == float(sys.argv[2]) + 0.25, t
EOF

step "the watch went on across the restart and ends when the campaign is done"
ogive campaign finish process >/dev/null || fail "campaign finish"
rc=0
timeout 30 tail --pid="$WATCH_PID" -f /dev/null || fail "campaign watch did not end after finish"
wait "$WATCH_PID" || rc=$?
[[ "$rc" -eq 0 ]] || fail "campaign watch exited $rc: $(cat "$TMP/watch.err")"
grep -q "watching again" "$TMP/watch.err" || fail "campaign watch did not say it reconnected: $(cat "$TMP/watch.err")"
grep -q "done" "$TMP/watch.out" || fail "campaign watch did not show the done campaign: $(tail -3 "$TMP/watch.out")"

step "SIGINT stops ogived cleanly too; the file passes PRAGMA integrity_check"
stop_server INT
"$PY" - "$DB" <<'EOF' || fail "integrity check"
import sqlite3, sys
db = sqlite3.connect("file:%s?mode=ro" % sys.argv[1], uri=True)
assert db.execute("PRAGMA integrity_check").fetchone()[0] == "ok"
EOF
echo "PASS"
