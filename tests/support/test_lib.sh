# The preamble of the shell tests that drive a real ogived and the ogive CLI. Sourced as
#   source "$(dirname "$0")/../../tests/support/test_lib.sh" NAME "$@"
# with the test's own arguments OGIVED OGIVE. Sets OGIVED and OGIVE (absolute paths), PY (Debian's
# Python, by its full name) and TMP (a fresh directory named after NAME, removed at exit), and
# defines:
#   fail MESSAGE   prints FAIL: MESSAGE and the tail of every $TMP/*.log, then exits 1;
#   step TEXT      prints a step heading;
#   free_port      prints a loopback TCP port that is free right now.
# At exit every process in the array PIDS and the process $OGIVED_PID (when set) is killed, then the
# function test_cleanup runs if the test defines one, then $TMP is removed.
if [[ $# -lt 3 ]]; then
  echo "usage: $0 OGIVED OGIVE [MORE...]" >&2
  exit 2
fi
OGIVED=$(realpath "$2")
OGIVE=$(realpath "$3")
PY=/usr/bin/python3
TMP=$(mktemp -d "${TMPDIR:-/tmp}/$1.XXXXXX")
PIDS=()
OGIVED_PID=""
FAIL_LOG_LINES=${FAIL_LOG_LINES:-30}

test_lib_cleanup() {
  local pid
  for pid in "${PIDS[@]}" ${OGIVED_PID:+"$OGIVED_PID"}; do
    kill -KILL "$pid" 2>/dev/null || true
  done
  if declare -F test_cleanup >/dev/null; then test_cleanup || true; fi
  rm -rf "$TMP"
}
trap test_lib_cleanup EXIT

fail() {
  echo "FAIL: $*" >&2
  local log
  for log in "$TMP"/*.log; do
    [[ -f "$log" ]] || continue
    echo "---- $log" >&2
    tail -n "$FAIL_LOG_LINES" "$log" >&2
  done
  exit 1
}

step() { echo "== $*"; }

free_port() {
  "$PY" -c 'import socket; s = socket.socket(); s.bind(("127.0.0.1", 0)); print(s.getsockname()[1])'
}
