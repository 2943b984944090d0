#!/usr/bin/env bash
# Tokens and roles on the real ogived process, administered with `ogived token`.
#
#   ogived_auth_test.sh PATH/TO/ogived PATH/TO/ogive
#
# Offline: `ogived token create|list|revoke` on a database file (usage errors, a bad role, the token
# printed once and never listed). Then ogived (tokens required) on a free loopback port: a call
# without a token is UNAUTHENTICATED, a worker may not create a campaign (PERMISSION_DENIED), a
# campaign-limited token lists only its campaign, `ogive campaign trials` shows who reported each trial
# (table, --csv, --json), the phase change's event carries the admin's label; while the server runs,
# a token made through its admin socket (mode 0600) works at once and a revoked one is refused at
# once, without a restart. The database files hold the SHA-256 digests of the tokens (checked with
# Python's hashlib) but never a token. The health service answers without a token; reflection only
# with --reflection; the per-token rate limit answers RESOURCE_EXHAUSTED; --no-auth is refused off
# loopback and lets calls through on it. Every step is bounded in time.
set -euo pipefail

source "$(dirname "$0")/../../tests/support/test_lib.sh" ogived-auth-test "$@"
DB="$TMP/auth.db"

token() { timeout 30 "$OGIVED" token "$@"; }
# `as_token FILE args...`: the CLI with the token in FILE ("" for none).
as_token() {
  local file=$1
  shift
  if [[ -n "$file" ]]; then
    timeout 30 "$OGIVE" --server "$SERVER" --timeout 5 --token-file "$file" "$@"
  else
    env -u OGIVE_TOKEN timeout 30 "$OGIVE" --server "$SERVER" --timeout 5 "$@"
  fi
}
# `expect_refused CODE TEXT FILE args...`: the call fails, naming CODE and TEXT.
expect_refused() {
  local code=$1 text=$2 rc=0
  shift 2
  as_token "$@" >"$TMP/refused.out" 2>&1 || rc=$?
  [[ "$rc" -ne 0 ]] || fail "'${*:2}' with ${1:-no token} was accepted: $(cat "$TMP/refused.out")"
  grep -q "$code" "$TMP/refused.out" || fail "'${*:2}': expected $code, got: $(cat "$TMP/refused.out")"
  grep -q -- "$text" "$TMP/refused.out" || fail "'${*:2}': expected '$text' in: $(cat "$TMP/refused.out")"
}

# Starts ogived on $DB and a free port with extra flags "$@"; waits until its health service answers.
start_server() {
  SERVER="127.0.0.1:$(free_port)"
  "$OGIVED" --db "$DB" --listen "$SERVER" "$@" >>"$TMP/ogived.log" 2>&1 &
  OGIVED_PID=$!
  for _ in $(seq 100); do
    if health >/dev/null 2>&1; then return 0; fi
    kill -0 "$OGIVED_PID" 2>/dev/null || fail "ogived exited at start"
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
  [[ "$rc" -eq 0 ]] || fail "ogived exited with status $rc"
}

# The grpc.health.v1 status of the whole server, without a token (1 = SERVING). The messages are
# encoded by hand: the request is empty, the response's field 1 a varint.
health() {
  "$PY" - "$SERVER" <<'PYEOF'
import sys, grpc
channel = grpc.insecure_channel(sys.argv[1])
response = channel.unary_unary("/grpc.health.v1.Health/Check")(b"", timeout=5)
status = response[1] if response[:1] == b"\x08" else 0
print(status)
sys.exit(0 if status == 1 else 1)
PYEOF
}

# Server reflection's answer to list_services (ServerReflectionRequest field 7, an empty string):
# prints the service names found in the response, or the gRPC code when the call fails.
reflection() {
  "$PY" - "$SERVER" <<'PYEOF'
import sys, grpc
channel = grpc.insecure_channel(sys.argv[1])
call = channel.stream_stream("/grpc.reflection.v1alpha.ServerReflection/ServerReflectionInfo")
try:
    for response in call(iter([b"\x3a\x00"]), timeout=5):
        print("ogive.v1.Ogive" if b"ogive.v1.Ogive" in response else "other")
        break
except grpc.RpcError as e:
    print(e.code().name)
PYEOF
}

# ---- Flags ----
step "ogived --help names the auth flags; --no-auth is refused off loopback"
timeout 10 "$OGIVED" --help >"$TMP/help.out"
for flag in --max-requests-per-second-per-token --no-auth --reflection "ogived token"; do
  grep -q -- "$flag" "$TMP/help.out" || fail "--help does not mention $flag"
done
rc=0
timeout 10 "$OGIVED" --db "$TMP/never.db" --listen "0.0.0.0:$(free_port)" --allow-insecure-remote --no-auth \
  >"$TMP/noauth.out" 2>&1 || rc=$?
[[ "$rc" -eq 2 ]] || fail "--no-auth off loopback: status $rc"
grep -q -- "--no-auth: allowed only on a loopback address" "$TMP/noauth.out" ||
  fail "--no-auth off loopback said: $(cat "$TMP/noauth.out")"

# ---- Offline administration ----
step "ogived token: usage errors and refused fields"
rc=0
token create --db "$DB" --role admin >"$TMP/usage.out" 2>&1 || rc=$?
[[ "$rc" -eq 2 ]] && grep -q -- "--label: required" "$TMP/usage.out" || fail "no --label: $rc $(cat "$TMP/usage.out")"
rc=0
token create --db "$DB" --role operator --label x >"$TMP/role.out" 2>&1 || rc=$?
[[ "$rc" -eq 1 ]] && grep -q "role: must be reader, worker or admin, got 'operator'" "$TMP/role.out" ||
  fail "bad role: $rc $(cat "$TMP/role.out")"
rc=0
token list --db "$TMP/missing.db" >"$TMP/missing.out" 2>&1 || rc=$?
[[ "$rc" -eq 1 ]] && grep -q "no database file" "$TMP/missing.out" || fail "list of no file: $(cat "$TMP/missing.out")"
[[ ! -e "$TMP/missing.db" ]] || fail "token list created a database file"
rc=0
token list --db "$DB" --bogus >"$TMP/bogus.out" 2>&1 || rc=$?
[[ "$rc" -eq 2 ]] && grep -q "unknown option '--bogus'" "$TMP/bogus.out" || fail "--bogus: $rc $(cat "$TMP/bogus.out")"

step "ogived token create prints the token once; list never shows it"
token create --db "$DB" --role admin --label alice >"$TMP/alice.token" 2>"$TMP/create.log"
token create --db "$DB" --role worker --label farm-a --campaign process >"$TMP/farm.token" 2>>"$TMP/create.log"
token create --db "$DB" --role reader --label viewer >"$TMP/viewer.token" 2>>"$TMP/create.log"
for f in alice farm viewer; do
  [[ $(wc -l <"$TMP/$f.token") -eq 1 ]] && grep -Eqx 'ogt_[a-z2-7]{32}' "$TMP/$f.token" ||
    fail "$f.token holds: $(cat "$TMP/$f.token")"
done
grep -q "shown only this once" "$TMP/create.log" || fail "create does not say the token is shown once"
rc=0
token create --db "$DB" --role reader --label alice >"$TMP/dup.out" 2>&1 || rc=$?
[[ "$rc" -eq 1 ]] && grep -q "ALREADY_EXISTS" "$TMP/dup.out" || fail "a taken label: $(cat "$TMP/dup.out")"
token list --db "$DB" >"$TMP/list.out"
grep -Eq '^alice +admin +\* ' "$TMP/list.out" || fail "list: $(cat "$TMP/list.out")"
grep -Eq '^farm-a +worker +process ' "$TMP/list.out" || fail "list: $(cat "$TMP/list.out")"
for f in alice farm viewer; do
  grep -qF "$(cat "$TMP/$f.token")" "$TMP/list.out" "$TMP/create.log" && fail "a token was printed by list or to stderr"
done

# ---- The server requires tokens ----
step "start ogived; the health service answers without a token"
start_server --sweep-interval 0.2
[[ "$(health)" == 1 ]] || fail "health is not SERVING"
grep -q "event=auth mode=tokens valid_tokens=3" "$TMP/ogived.log" || fail "the start log does not count the tokens"

step "no token, a wrong token, a worker creating a campaign: refused"
cat >"$TMP/process.txtpb" <<'DESIGN'
name: "process"
parameters { name: "pressure" unit: "bar" real { low: 1 high: 10 } }
objective { direction: DIRECTION_LOWER_IS_BETTER }
population_size: 4
seed: 7
lease_seconds: 60
DESIGN
sed 's/name: "process"/name: "other"/' "$TMP/process.txtpb" >"$TMP/other.txtpb"
expect_refused UNAUTHENTICATED "needs a token" "" campaign list
echo "ogt_aaaaaaaaaaaaaaaaaaaaaaaaaaaaaaaa" >"$TMP/wrong.token"
expect_refused UNAUTHENTICATED "knows no such token" "$TMP/wrong.token" campaign list
expect_refused PERMISSION_DENIED "CreateCampaign needs role admin; token 'farm-a' has role worker" \
  "$TMP/farm.token" campaign create "$TMP/process.txtpb"
as_token "$TMP/alice.token" campaign create "$TMP/process.txtpb" >/dev/null
as_token "$TMP/alice.token" campaign create "$TMP/other.txtpb" >/dev/null

step "a campaign-limited worker sees its campaign only; it asks and tells"
as_token "$TMP/farm.token" campaign list >"$TMP/farm-list.out"
grep -q "process" "$TMP/farm-list.out" && ! grep -q "other" "$TMP/farm-list.out" ||
  fail "the limited token lists: $(cat "$TMP/farm-list.out")"
expect_refused PERMISSION_DENIED "limited to the campaigns process" "$TMP/farm.token" campaign show other
number=$(as_token "$TMP/farm.token" ask process --worker node-1 --json |
  "$PY" -c 'import json,sys; print(json.load(sys.stdin)[0]["trial"])')
as_token "$TMP/farm.token" tell process "$number" --score 2.5 --worker node-1 >/dev/null
expect_refused PERMISSION_DENIED "Ask needs role worker or admin" "$TMP/viewer.token" ask process

step "ogive campaign trials shows who reported each trial (table, --csv, --json)"
as_token "$TMP/viewer.token" campaign trials process >"$TMP/trials.txt"
grep -q "REPORTED BY" "$TMP/trials.txt" && grep -q "farm-a" "$TMP/trials.txt" || fail "table: $(cat "$TMP/trials.txt")"
as_token "$TMP/viewer.token" campaign trials process --csv >"$TMP/trials.csv"
"$PY" - "$TMP/trials.csv" "$number" <<'PYEOF' || fail "csv: $(cat "$TMP/trials.csv")"
import csv, sys
rows = {r["trial"]: r for r in csv.DictReader(open(sys.argv[1]))}
assert rows[sys.argv[2]]["reported_by"] == "farm-a", rows
PYEOF
as_token "$TMP/viewer.token" campaign trials process --json >"$TMP/trials.json"
"$PY" - "$TMP/trials.json" "$number" <<'PYEOF' || fail "json: $(cat "$TMP/trials.json")"
import json, sys
t = [t for t in json.load(open(sys.argv[1])) if str(t["trial"]) == sys.argv[2]]
assert len(t) == 1 and t[0]["reported_by"] == "farm-a", t
PYEOF

step "a phase change records the admin's label in the event log"
as_token "$TMP/alice.token" campaign pause process >/dev/null
as_token "$TMP/alice.token" campaign resume process >/dev/null
"$PY" - "$DB" <<'PYEOF' || fail "events"
import sqlite3, sys
db = sqlite3.connect("file:%s?mode=ro" % sys.argv[1], uri=True)
rows = db.execute("SELECT kind, token_label FROM events ORDER BY id").fetchall()
phases = [label for kind, label in rows if kind == "phase"]
assert phases == ["alice", "alice"], rows
assert ("tell", "farm-a") in rows, rows
PYEOF

# ---- Administration while the server runs ----
step "while ogived runs: a token made through its admin socket works at once"
[[ "$(stat -c %a "$DB.admin.sock")" == 600 ]] || fail "admin socket mode $(stat -c %a "$DB.admin.sock")"
token create --db "$DB" --role reader --label late >"$TMP/late.token" 2>"$TMP/late.log"
grep -q "admin socket\|asking it through" "$TMP/late.log" || fail "create did not go through the server: $(cat "$TMP/late.log")"
as_token "$TMP/late.token" campaign list >/dev/null || fail "the new token is refused"
token list --db "$DB" >"$TMP/list2.out"
grep -q "^late " "$TMP/list2.out" || fail "list through the socket: $(cat "$TMP/list2.out")"

step "while ogived runs: a revoked token is refused at once, without a restart"
pid_before=$OGIVED_PID
token revoke --db "$DB" farm-a >"$TMP/revoke.out" 2>&1 || fail "revoke: $(cat "$TMP/revoke.out")"
grep -q "revoked token 'farm-a'" "$TMP/revoke.out" || fail "revoke said: $(cat "$TMP/revoke.out")"
expect_refused UNAUTHENTICATED "the token 'farm-a' was revoked" "$TMP/farm.token" ask process
kill -0 "$pid_before" 2>/dev/null || fail "ogived is not the same process"
token revoke --db "$DB" farm-a >"$TMP/revoke2.out" 2>&1
grep -q "had been revoked already" "$TMP/revoke2.out" || fail "second revoke: $(cat "$TMP/revoke2.out")"
rc=0
token revoke --db "$DB" nobody >"$TMP/revoke3.out" 2>&1 || rc=$?
[[ "$rc" -eq 1 ]] && grep -q "NOT_FOUND" "$TMP/revoke3.out" || fail "revoke nobody: $(cat "$TMP/revoke3.out")"

step "reflection is off without --reflection"
[[ "$(reflection)" == UNIMPLEMENTED ]] || fail "reflection answered without --reflection"
stop_server
[[ ! -e "$DB.admin.sock" ]] || fail "the admin socket is left behind"

step "the database files hold the tokens' SHA-256 digests, never a token"
"$PY" - "$DB" "$TMP"/alice.token "$TMP"/farm.token "$TMP"/viewer.token "$TMP"/late.token <<'PYEOF' ||
import hashlib, os, sys
db = sys.argv[1]
data = b"".join(open(p, "rb").read() for p in (db, db + "-wal") if os.path.exists(p))
assert len(data) > 0
for path in sys.argv[2:]:
    token = open(path).read().strip()
    assert token.encode() not in data, "the token of %s is in the database" % path
    assert token[4:].encode() not in data, "the random part of %s is in the database" % path
    assert hashlib.sha256(token.encode()).digest() in data, "the digest of %s is not" % path
PYEOF
  fail "token bytes"

# ---- Other modes ----
step "with --reflection and a low rate limit: reflection answers; the limit is RESOURCE_EXHAUSTED"
start_server --reflection --max-requests-per-second-per-token 0.1
[[ "$(reflection)" == ogive.v1.Ogive ]] || fail "reflection with --reflection: $(reflection)"
as_token "$TMP/viewer.token" campaign list >/dev/null || fail "first call within the limit refused"
expect_refused "RESOURCE_EXHAUSTED (RATE_LIMITED)" "max-requests-per-second-per-token" "$TMP/viewer.token" campaign list
as_token "$TMP/alice.token" campaign list >/dev/null || fail "another token was held to viewer's limit"
stop_server

step "--no-auth on loopback: calls pass without a token"
start_server --no-auth
as_token "" campaign list >"$TMP/open.out" || fail "--no-auth refused a call: $(cat "$TMP/open.out")"
grep -q "process" "$TMP/open.out" || fail "--no-auth list: $(cat "$TMP/open.out")"
stop_server

token list --db "$DB" >"$TMP/list3.out"
grep -Eq '^farm-a +worker +process +[0-9T:Z-]+ +[0-9T:Z-]+$' "$TMP/list3.out" ||
  fail "offline list after revoke: $(cat "$TMP/list3.out")"
echo "PASS"
