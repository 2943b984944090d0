#!/usr/bin/env bash
# One ogived per database file and per port.
#
#   ogived_single_instance_test.sh PATH/TO/ogived PATH/TO/ogive
#
# While one ogived serves a database file on a loopback port:
#  - a second ogived on the same file (another port) must refuse to start: two servers each keep
#    their own copy of a campaign in memory, hand out the same trial numbers and overwrite each other's
#    acknowledged reports in the shared file;
#  - a second ogived on the same port (another file) must refuse to start: otherwise the kernel
#    splits incoming connections between two servers with different databases.
# Both checks run; the test fails if either does. Every step is bounded in time.
set -euo pipefail

source "$(dirname "$0")/../../tests/support/test_lib.sh" ogived-single-instance-test "$@"

answers() { timeout 5 "$OGIVE" --server "$1" --timeout 1 campaign list >/dev/null 2>&1; }

# Starts ogived on database $1 and address $2 with its log in $3; sets STARTED_PID. Tokens are not
# what this test is about: --no-auth (loopback only).
start() {
  "$OGIVED" --db "$1" --listen "$2" --sweep-interval 0.2 --no-auth >"$3" 2>&1 &
  STARTED_PID=$!
  PIDS+=("$STARTED_PID")
}

# Waits up to 3 s for process $1 to exit; sets STATUS to its exit status, or to "running".
wait_exit() {
  STATUS=running
  for _ in $(seq 30); do
    if ! kill -0 "$1" 2>/dev/null; then
      STATUS=0
      wait "$1" || STATUS=$?
      return
    fi
    sleep 0.1
  done
}

stop() {
  kill -TERM "$1" 2>/dev/null || return 0
  wait_exit "$1"
}

failures=0
FIRST="127.0.0.1:$(free_port)"
start "$TMP/one.db" "$FIRST" "$TMP/first.log"
first_pid=$STARTED_PID
for _ in $(seq 100); do
  answers "$FIRST" && break
  kill -0 "$first_pid" 2>/dev/null || { echo "FAIL: the first ogived exited at start" >&2; exit 1; }
  sleep 0.1
done
answers "$FIRST" || { echo "FAIL: the first ogived does not answer on $FIRST" >&2; exit 1; }

echo "== a second ogived on the same database file"
SECOND="127.0.0.1:$(free_port)"
start "$TMP/one.db" "$SECOND" "$TMP/second.log"
second_pid=$STARTED_PID
wait_exit "$second_pid"
if [[ "$STATUS" == running ]]; then
  answers "$SECOND" && serving="and serves it on $SECOND" || serving="(not answering yet)"
  echo "FAIL: a second ogived opened $TMP/one.db while the first still serves it, $serving;" \
    "both hand out the same trial numbers and each overwrites the other's stored reports" >&2
  failures=$((failures + 1))
  stop "$second_pid"
elif [[ "$STATUS" == 0 ]]; then
  echo "FAIL: the second ogived exited 0 instead of refusing the database in use" >&2
  failures=$((failures + 1))
else
  if ! grep -q "one.db" "$TMP/second.log"; then
    echo "FAIL: the refusal does not name the database: $(cat "$TMP/second.log")" >&2
    failures=$((failures + 1))
  fi
  echo "   refused (status $STATUS): $(tail -n 1 "$TMP/second.log")"
fi

echo "== a second ogived on the same port"
start "$TMP/other.db" "$FIRST" "$TMP/third.log"
third_pid=$STARTED_PID
wait_exit "$third_pid"
if [[ "$STATUS" == running ]]; then
  echo "FAIL: a second ogived listens on $FIRST, already served by another ogived;" \
    "clients would be split between two databases" >&2
  failures=$((failures + 1))
  stop "$third_pid"
elif [[ "$STATUS" == 0 ]]; then
  echo "FAIL: the second ogived exited 0 instead of refusing the port in use" >&2
  failures=$((failures + 1))
else
  echo "   refused (status $STATUS): $(tail -n 1 "$TMP/third.log")"
fi

if ! answers "$FIRST"; then
  echo "FAIL: the first ogived stopped answering" >&2
  failures=$((failures + 1))
fi
kill -TERM "$first_pid"
wait_exit "$first_pid"
if [[ "$STATUS" != 0 ]]; then
  echo "FAIL: the first ogived ended with '$STATUS' after SIGTERM" >&2
  failures=$((failures + 1))
fi

if [[ "$failures" -gt 0 ]]; then
  exit 1
fi
echo "PASS"
