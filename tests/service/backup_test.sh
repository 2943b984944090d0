#!/usr/bin/env bash
# `ogived backup` on a live database, and a restore from its copy.
#
#   backup_test.sh PATH/TO/ogived PATH/TO/ogive
#
# Starts ogived on a temporary database and a free loopback port, creates a campaign, asks and tells a
# few trials, and backs the database up while the server runs. Checks the refusals (an existing
# destination, a missing database, a file that is not a database, missing options) and that they
# leave no file behind. Then takes a second backup while a worker keeps asking and telling. Stops
# the server, and "restores": ogived started on a copy of the first backup shows the same campaign and
# the same trials as the live server did when the backup was taken (compared as data); the backups
# are single files (journal_mode delete) that pass PRAGMA integrity_check, and the one taken under
# load serves too. Every step is bounded in time.
set -euo pipefail

source "$(dirname "$0")/../../tests/support/test_lib.sh" ogive-backup-test "$@"
FAIL_LOG_LINES=20
ogive() { timeout 30 "$OGIVE" --server "$SERVER" --timeout 5 "$@"; }
first_number() { "$PY" -c 'import json,sys; print(json.load(sys.stdin)[0]["trial"])'; }

start_server() {  # DB
  SERVER="127.0.0.1:$(free_port)"
  "$OGIVED" --db "$1" --listen "$SERVER" --no-auth >>"$TMP/ogived.log" 2>&1 &
  OGIVED_PID=$!
  for _ in $(seq 100); do
    timeout 5 "$OGIVE" --server "$SERVER" --timeout 1 campaign list >/dev/null 2>&1 && return 0
    kill -0 "$OGIVED_PID" 2>/dev/null || fail "ogived exited at start on $1"
    sleep 0.1
  done
  fail "ogived does not answer on $SERVER"
}
stop_server() {
  kill -TERM "$OGIVED_PID"
  local rc=0
  timeout 20 tail --pid="$OGIVED_PID" -f /dev/null || fail "ogived did not stop within 20 s"
  wait "$OGIVED_PID" || rc=$?
  OGIVED_PID=""
  [[ "$rc" -eq 0 ]] || fail "ogived exited with $rc"
}
backup() { timeout 60 "$OGIVED" backup "$@"; }

step "start ogived, create a campaign, ask and tell"
start_server "$TMP/live.db"
cat >"$TMP/design.txtpb" <<'EOF2'
name: "kept"
parameters { name: "flow" unit: "l/min" real { low: 1 high: 9 } }
parameters { name: "stages" integer { low: 1 high: 4 } }
parameters { name: "coat" categorical { options: "none" options: "thin" options: "thick" } }
objective { direction: DIRECTION_LOWER_IS_BETTER }
population_size: 4
seed: 21
EOF2
ogive campaign create "$TMP/design.txtpb" >/dev/null
for i in $(seq 9); do
  n=$(ogive ask kept --worker w --json | first_number)
  ogive tell kept "$n" --score "$i.5" >/dev/null
done
held=$(ogive ask kept --worker w --json | first_number)  # left leased

step "ogived backup while the server runs"
backup --db "$TMP/live.db" --to "$TMP/first.db" >"$TMP/backup.out" 2>&1 || fail "backup: $(cat "$TMP/backup.out")"
grep -q "copied '$TMP/live.db' to '$TMP/first.db'" "$TMP/backup.out" || fail "backup printed: $(cat "$TMP/backup.out")"
ogive campaign show kept --json >"$TMP/show.json"
ogive campaign trials kept --json >"$TMP/trials.json"

step "refusals: existing destination, missing database, not a database, usage; nothing left behind"
rc=0; backup --db "$TMP/live.db" --to "$TMP/first.db" >"$TMP/r.out" 2>&1 || rc=$?
[[ $rc -eq 1 ]] && grep -q ALREADY_EXISTS "$TMP/r.out" || fail "existing destination: $rc $(cat "$TMP/r.out")"
rc=0; backup --db "$TMP/none.db" --to "$TMP/x.db" >"$TMP/r.out" 2>&1 || rc=$?
[[ $rc -eq 1 ]] && grep -q NOT_FOUND "$TMP/r.out" || fail "missing database: $rc $(cat "$TMP/r.out")"
head -c 8192 /dev/zero | tr '\0' 'x' >"$TMP/garbage.db"
rc=0; backup --db "$TMP/garbage.db" --to "$TMP/x.db" >"$TMP/r.out" 2>&1 || rc=$?
[[ $rc -eq 1 ]] && grep -q DATA_LOSS "$TMP/r.out" || fail "not a database: $rc $(cat "$TMP/r.out")"
rc=0; backup --db "$TMP/live.db" >"$TMP/r.out" 2>&1 || rc=$?
[[ $rc -eq 2 ]] && grep -q -- "--to" "$TMP/r.out" || fail "missing --to: $rc $(cat "$TMP/r.out")"
rc=0; backup --db "$TMP/live.db" --to "$TMP/live.db" >"$TMP/r.out" 2>&1 || rc=$?
[[ $rc -eq 1 ]] || fail "backup onto itself: $rc $(cat "$TMP/r.out")"
leftovers=$(find "$TMP" -name 'x.db*' -o -name '*.partial-*' | wc -l)
[[ "$leftovers" -eq 0 ]] || fail "refused backups left files: $(find "$TMP" -name 'x.db*' -o -name '*.partial-*')"

step "a second backup while a worker asks and tells"
(
  set +e
  for i in $(seq 200); do
    n=$(ogive ask kept --worker load --json 2>/dev/null | first_number 2>/dev/null) || break
    ogive tell kept "$n" --score "0.$i" >/dev/null 2>&1 || break
    echo "$n" >>"$TMP/load.told"
  done
) &
PIDS+=($!)
WORKER_PID=$!
for _ in $(seq 200); do
  [[ -f "$TMP/load.told" && $(wc -l <"$TMP/load.told") -ge 3 ]] && break
  sleep 0.05
done
[[ $(wc -l <"$TMP/load.told") -ge 3 ]] || fail "the worker made no progress"
backup --db "$TMP/live.db" --to "$TMP/loaded.db" >"$TMP/backup2.out" 2>&1 || fail "backup under load: $(cat "$TMP/backup2.out")"
sleep 0.3
kill -TERM "$WORKER_PID" 2>/dev/null || true
wait "$WORKER_PID" 2>/dev/null || true
WORKER_PID=""
stop_server

step "the backups are single files that pass PRAGMA integrity_check"
"$PY" - "$TMP/first.db" "$TMP/loaded.db" <<'EOF2' || fail "backup files"
import os, sqlite3, sys
for path in sys.argv[1:]:
    db = sqlite3.connect("file:%s?mode=ro" % path, uri=True)
    assert db.execute("PRAGMA integrity_check").fetchone()[0] == "ok", path
    assert db.execute("PRAGMA journal_mode").fetchone()[0] == "delete", path
    assert db.execute("PRAGMA user_version").fetchone()[0] >= 1, path
    db.close()
    assert not os.path.exists(path + "-wal"), path
EOF2

step "restore: ogived on a copy of the first backup shows what the live server showed"
mkdir "$TMP/restore"
cp "$TMP/first.db" "$TMP/restore/ogive.db"  # the backup is not live: a file copy of it is fine
start_server "$TMP/restore/ogive.db"
ogive campaign show kept --json >"$TMP/show.restored.json"
ogive campaign trials kept --json >"$TMP/trials.restored.json"
"$PY" - "$TMP" "$held" <<'EOF2' || fail "restored state differs"
import json, sys
d, held = sys.argv[1], sys.argv[2]
load = lambda name: json.load(open("%s/%s" % (d, name)))
show, restored = load("show.json"), load("show.restored.json")
trials, restored_trials = load("trials.json"), load("trials.restored.json")
for view in (show, restored):  # recent activity is dated by the clock and asks are not stored
    for key in ("as_of_unix_ms", "workers", "reports_last_hour"):
        view["status"].pop(key, None)
assert show == restored, "campaign show differs"
assert trials == restored_trials, "trials differ"
assert len(trials) == 10 and str(trials[-1]["trial"]) == held and trials[-1]["state"] == "leased", trials[-1]
print("   %d trials, generation %s" % (len(trials), show["status"]["generation"]))
EOF2
ogive tell kept "$held" --score 0.125 >"$TMP/held.out" 2>&1 || fail "tell after restore: $(cat "$TMP/held.out")"
stop_server

step "the backup taken under load serves too"
mkdir "$TMP/restore2"
cp "$TMP/loaded.db" "$TMP/restore2/ogive.db"
start_server "$TMP/restore2/ogive.db"
count=$(ogive campaign trials kept --json | "$PY" -c 'import json,sys; print(len(json.load(sys.stdin)))')
[[ "$count" -ge 13 ]] || fail "the backup under load holds $count trials (3 or more told before it began)"
echo "   $count trials"
stop_server
echo "backup_test: OK"
