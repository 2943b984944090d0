#!/usr/bin/env bash
# deploy/systemd/ogived.service, checked by systemd itself and run by hand.
#
#   systemd_unit_test.sh PATH/TO/ogived PATH/TO/ogived.service
#
# The references are outside the project: `systemd-analyze verify` (it fails on a unit systemd
# would refuse, and warns on an unknown or misspelt directive — any warning fails this test) and
# `systemd-analyze security --offline=yes`, whose exposure score must stay at or below 2.0. The
# directives asked of a hardened ogived are checked against systemd.exec(5) names (from memory).
# Then the unit's own ExecStart= command line runs, with the state directory and ports moved to
# temporary ones: ogived must start, answer on its metrics port, and stop on the unit's KillSignal
# within TimeoutStopSec. Skipped (exit 77) where systemd-analyze is missing.
set -euo pipefail

if [[ $# -ne 2 ]]; then
  echo "usage: $0 OGIVED UNIT" >&2
  exit 2
fi
OGIVED=$(realpath "$1")
UNIT=$(realpath "$2")
PY=/usr/bin/python3

if ! command -v systemd-analyze >/dev/null 2>&1; then
  echo "SKIP: systemd-analyze not found (Debian package systemd); the unit was not checked"
  exit 77
fi
TMP=$(mktemp -d "${TMPDIR:-/tmp}/ogive-systemd-test.XXXXXX")
PID=""
cleanup() {
  [[ -n "$PID" ]] && kill -KILL "$PID" 2>/dev/null || true
  rm -rf "$TMP"
}
trap cleanup EXIT
fail() {
  echo "FAIL: $*" >&2
  [[ -f "$TMP/ogived.log" ]] && tail -n 20 "$TMP/ogived.log" >&2
  exit 1
}
step() { echo "== $*"; }

# The unit as installed, but with the binary where the build put it (verify checks that it exists).
sed "s|/usr/local/bin/ogived|$OGIVED|g" "$UNIT" >"$TMP/ogived.service"

step "systemd-analyze verify: no error, no warning"
rc=0
(cd "$TMP" && systemd-analyze verify ./ogived.service) >"$TMP/verify.out" 2>&1 || rc=$?
[[ $rc -eq 0 ]] || fail "systemd-analyze verify exited $rc: $(cat "$TMP/verify.out")"
[[ ! -s "$TMP/verify.out" ]] || fail "systemd-analyze verify warns: $(cat "$TMP/verify.out")"

step "the hardening directives are there"
# The last assignment of a key wins in systemd; a key given twice here must be given the same way.
value() { grep -E "^$1=" "$TMP/ogived.service" | tail -n 1 | cut -d= -f2-; }
expect() {
  grep -qE "^$1=" "$TMP/ogived.service" || fail "$1= is missing"
  [[ "$(value "$1")" == "$2" ]] || fail "$1=$(value "$1"), expected $1=$2"
}
expect DynamicUser yes
expect StateDirectory ogive
expect ProtectSystem strict
expect ProtectHome yes
expect PrivateTmp yes
expect NoNewPrivileges yes
expect CapabilityBoundingSet ""
expect RestrictAddressFamilies "AF_INET AF_INET6 AF_UNIX"
grep -qx "SystemCallFilter=@system-service" "$TMP/ogived.service" || fail "SystemCallFilter=@system-service is missing"
expect MemoryDenyWriteExecute yes
expect LockPersonality yes
expect KillSignal SIGTERM
stop_s=$(value TimeoutStopSec)
[[ "$stop_s" =~ ^[0-9]+$ ]] || fail "TimeoutStopSec=$stop_s: expected whole seconds"
# ogived lets in-flight calls finish for 10 s, then commits what is queued.
(( stop_s >= 20 )) || fail "TimeoutStopSec=$stop_s is shorter than ogived's drain (10 s) plus its last commits"

step "every ogived flag in ExecStart= (the commented TLS line too) is one ogived --help lists"
"$OGIVED" --help >"$TMP/help.txt"
grep -E '^#?ExecStart=.+' "$TMP/ogived.service" | grep -oE -- '--[a-z-]+' | sort -u >"$TMP/flags"
[[ -s "$TMP/flags" ]] || fail "no flags found in ExecStart="
while read -r flag; do
  grep -qE -- "^ +$flag( |$)" "$TMP/help.txt" || fail "ExecStart= uses $flag, which ogived --help does not list"
done <"$TMP/flags"

if systemd-analyze --help 2>&1 | grep -q -- "--offline"; then
  step "systemd-analyze security --offline=yes: exposure at most 2.0"
  rc=0
  (cd "$TMP" && systemd-analyze security --offline=yes --threshold=20 ./ogived.service) >"$TMP/security.out" 2>&1 ||
    rc=$?
  score=$(grep -oE 'Overall exposure level for ogived.service: [0-9.]+' "$TMP/security.out" | grep -oE '[0-9.]+$' || true)
  [[ -n "$score" ]] || fail "no exposure score in: $(tail -n 5 "$TMP/security.out")"
  [[ $rc -eq 0 ]] || fail "exposure $score is above 2.0 (exit $rc)"
  echo "   exposure level $score"
else
  echo "   (this systemd-analyze has no --offline; security score not checked)"
fi

step "the unit's ExecStart= runs: ogived starts, serves metrics, stops on SIGTERM in time"
port() { "$PY" -c 'import socket; s = socket.socket(); s.bind(("127.0.0.1", 0)); print(s.getsockname()[1])'; }
GRPC_PORT=$(port)
METRICS_PORT=$(port)
mkdir -p "$TMP/state/ogive"
command=$(grep -E '^ExecStart=' "$TMP/ogived.service" | tail -n 1 | cut -d= -f2-)
command=${command//%S/$TMP/state}
command=${command//127.0.0.1:7075/127.0.0.1:$GRPC_PORT}
command=${command//127.0.0.1:7076/127.0.0.1:$METRICS_PORT}
[[ "$command" != *%* ]] || fail "ExecStart= has a specifier this test does not replace: $command"
read -r -a words <<<"$command"
(cd "$TMP/state/ogive" && exec "${words[@]}") >"$TMP/ogived.log" 2>&1 &
PID=$!
up=0
for _ in $(seq 100); do
  if "$PY" -c "import urllib.request,sys; urllib.request.urlopen('http://127.0.0.1:$METRICS_PORT/metrics', timeout=2)" \
      2>/dev/null; then
    up=1
    break
  fi
  kill -0 "$PID" 2>/dev/null || fail "ogived exited at start"
  sleep 0.1
done
[[ $up -eq 1 ]] || fail "ogived does not serve metrics on 127.0.0.1:$METRICS_PORT"
[[ -f "$TMP/state/ogive/ogive.db" ]] || fail "no database in the state directory"
kill -TERM "$PID"
start=$(date +%s)
timeout "$stop_s" tail --pid="$PID" -f /dev/null || fail "ogived did not stop within TimeoutStopSec=$stop_s"
rc=0
wait "$PID" || rc=$?
PID=""
[[ $rc -eq 0 ]] || fail "ogived exited $rc after SIGTERM"
echo "   stopped in $(( $(date +%s) - start )) s"
echo "systemd_unit_test: OK"
