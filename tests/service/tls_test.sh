#!/usr/bin/env bash
# TLS between ogived and its clients, with throwaway certificates made by the openssl command line.
#
#   tls_test.sh PATH/TO/ogived PATH/TO/ogive
#
# Makes, in a temporary directory: a CA; a server certificate for 127.0.0.1 and localhost
# (subjectAltName) signed by it; a client certificate signed by it; a second, unrelated CA with a
# client certificate of its own; and a stray key. Checks, against real ogived processes on free
# loopback ports:
#  - ogived refuses to start (status 2, naming the flag and the path) on a missing certificate file,
#    a file without a certificate, a key that is not the certificate's, a certificate without a key,
#    --tls-client-ca without TLS; and without TLS on a non-loopback --listen unless
#    --allow-insecure-remote (the refusal comes before anything binds). Without TLS it logs that it
#    is insecure and loopback only;
#  - with --tls-cert/--tls-key: the CLI creates a campaign, asks, tells and reads it back over TLS
#    (--tls-ca, or $OGIVE_TLS_CA), by IP and by name, and `ogive work` runs trials over TLS; a
#    plaintext client, a client trusting only the system's roots or another CA, and a client that
#    expects another server name (--tls-server-name) are refused;
#  - with --tls-client-ca: a client without a certificate and one with a certificate of the other
#    CA are refused; one with the CA's client certificate works; and Debian's Python grpcio
#    (grpc.ssl_channel_credentials) gets through with the client certificate and is refused without.
# Every step is bounded in time; openssl needs the Debian package `openssl`.
set -euo pipefail

source "$(dirname "$0")/../../tests/support/test_lib.sh" ogive-tls-test "$@"
command -v openssl >/dev/null || { echo "FAIL: openssl not found; apt-get install -y openssl" >&2; exit 1; }
PKI="$TMP/pki"

# ---- Certificates (P-256 keys: quick to make) ----
step "make a CA, a server and a client certificate with openssl"
mkdir -p "$PKI"
ossl() { timeout 30 openssl "$@" 2>>"$TMP/openssl.log" >/dev/null || fail "openssl $*"; }
new_key() { ossl genpkey -algorithm EC -pkeyopt ec_paramgen_curve:P-256 -out "$1"; }
# new_ca NAME: NAME.key, NAME.pem (self-signed, CA:TRUE)
new_ca() {
  new_key "$PKI/$1.key"
  ossl req -x509 -new -key "$PKI/$1.key" -out "$PKI/$1.pem" -days 2 -subj "/CN=$1" \
    -addext "basicConstraints=critical,CA:TRUE" -addext "keyUsage=critical,keyCertSign,cRLSign"
}
# new_leaf NAME CA EXTENSIONS: NAME.key, NAME.pem signed by CA
new_leaf() {
  new_key "$PKI/$1.key"
  ossl req -new -key "$PKI/$1.key" -out "$PKI/$1.csr" -subj "/CN=$1"
  printf '%s\n' "basicConstraints=CA:FALSE" "$3" >"$PKI/$1.ext"
  ossl x509 -req -in "$PKI/$1.csr" -CA "$PKI/$2.pem" -CAkey "$PKI/$2.key" -CAcreateserial \
    -out "$PKI/$1.pem" -days 2 -extfile "$PKI/$1.ext"
}
new_ca ca
new_ca other-ca
new_leaf server ca "subjectAltName=IP:127.0.0.1,DNS:localhost
extendedKeyUsage=serverAuth"
new_leaf client ca "extendedKeyUsage=clientAuth"
new_leaf stranger other-ca "extendedKeyUsage=clientAuth"
new_key "$PKI/stray.key"
openssl verify -CAfile "$PKI/ca.pem" "$PKI/server.pem" "$PKI/client.pem" >/dev/null ||
  fail "openssl does not verify the certificates it made"

step "ogived --help names the TLS flags and every limit with its default"
timeout 10 "$OGIVED" --help >"$TMP/help.out" 2>&1 || fail "ogived --help failed"
for flag in --tls-cert --tls-key --tls-client-ca --allow-insecure-remote --max-message-bytes \
  --max-ask-count --max-reports-per-tell --max-parameters --max-options --max-name-bytes \
  --max-request-id-bytes --max-note-bytes --max-description-bytes --max-campaigns --max-page-size \
  --max-lease; do
  grep -q -- "^  $flag " "$TMP/help.out" || fail "ogived --help does not list $flag"
done
[[ $(grep -c -- "^  --max-.*(default [0-9]*s\{0,1\})$" "$TMP/help.out") -eq 12 ]] ||
  fail "ogived --help: not every limit shows its default: $(cat "$TMP/help.out")"

# ---- Refusals at start ----
# refused EXPECTED_TEXT ARGS...: ogived must exit 2 within 10 s and print EXPECTED_TEXT.
refused() {
  local expected=$1 rc=0
  shift
  timeout 10 "$OGIVED" --db "$TMP/refused.db" "$@" >"$TMP/refused.out" 2>&1 || rc=$?
  [[ "$rc" -eq 2 ]] || fail "ogived $*: status $rc, expected 2: $(cat "$TMP/refused.out")"
  grep -qF -- "$expected" "$TMP/refused.out" ||
    fail "ogived $*: expected '$expected' in: $(cat "$TMP/refused.out")"
}
LOOP="127.0.0.1:$(free_port)"
step "ogived refuses unusable certificate files, naming the flag and the path"
refused "--tls-cert '$PKI/missing.pem': cannot read" --listen "$LOOP" \
  --tls-cert "$PKI/missing.pem" --tls-key "$PKI/server.key"
refused "--tls-key '$PKI/missing.key': cannot read" --listen "$LOOP" \
  --tls-cert "$PKI/server.pem" --tls-key "$PKI/missing.key"
refused "--tls-cert '$PKI/server.key': holds no PEM certificate" --listen "$LOOP" \
  --tls-cert "$PKI/server.key" --tls-key "$PKI/server.key"
refused "--tls-key '$PKI/server.pem': holds no unencrypted PEM private key" --listen "$LOOP" \
  --tls-cert "$PKI/server.pem" --tls-key "$PKI/server.pem"
refused "--tls-key '$PKI/stray.key': is not the private key of the certificate in --tls-cert '$PKI/server.pem'" \
  --listen "$LOOP" --tls-cert "$PKI/server.pem" --tls-key "$PKI/stray.key"
refused "--tls-cert: needs --tls-key" --listen "$LOOP" --tls-cert "$PKI/server.pem"
refused "--tls-client-ca: client certificates need TLS" --listen "$LOOP" --tls-client-ca "$PKI/ca.pem"
refused "--tls-client-ca '$PKI/missing.pem': cannot read" --listen "$LOOP" \
  --tls-cert "$PKI/server.pem" --tls-key "$PKI/server.key" --tls-client-ca "$PKI/missing.pem"

step "without TLS ogived refuses a non-loopback --listen unless --allow-insecure-remote"
for address in "0.0.0.0:$(free_port)" "[::]:$(free_port)" ":$(free_port)" "127.example.com:7075"; do
  refused "--allow-insecure-remote" --listen "$address"
done
[[ ! -e "$TMP/refused.db" ]] || fail "a refused start created the database file"

# ---- Servers ----
# start NAME ARGS...: starts ogived on its own database and a free loopback port; sets ADDR_<NAME>.
start() {
  local name=$1 port
  shift
  port=$(free_port)
  "$OGIVED" --db "$TMP/$name.db" --listen "127.0.0.1:$port" --no-auth "$@" >"$TMP/$name.log" 2>&1 &
  PIDS+=($!)
  printf -v "ADDR_$name" '%s' "127.0.0.1:$port"
  for _ in $(seq 100); do
    grep -q "event=listening" "$TMP/$name.log" 2>/dev/null && return 0
    kill -0 "${PIDS[-1]}" 2>/dev/null || fail "ogived $name exited at start"
    sleep 0.1
  done
  fail "ogived $name does not listen"
}
start plain
start tls --tls-cert "$PKI/server.pem" --tls-key "$PKI/server.key"
start mtls --tls-cert "$PKI/server.pem" --tls-key "$PKI/server.key" --tls-client-ca "$PKI/ca.pem"

step "ogived logs its transport: insecure on loopback, tls, mtls"
grep -q "event=listening .*tls=plaintext-loopback" "$TMP/plain.log" || fail "plain: no tls=plaintext-loopback"
grep -q "event=insecure .*loopback only" "$TMP/plain.log" || fail "plain: no insecure line"
grep -q "event=listening .*tls=tls" "$TMP/tls.log" || fail "tls: no tls=tls"
grep -q "event=listening .*tls=mtls" "$TMP/mtls.log" || fail "mtls: no tls=mtls"
if grep -q "event=insecure" "$TMP/tls.log" "$TMP/mtls.log"; then fail "a TLS server logged insecure"; fi

# ok NAME ARGS...: `ogive ARGS` must succeed; its output goes to $TMP/NAME.out.
ok() {
  local name=$1
  shift
  timeout 30 "$OGIVE" --timeout 5 "$@" >"$TMP/$name.out" 2>"$TMP/$name.err" ||
    fail "ogive $*: $(cat "$TMP/$name.err")"
}
# no NAME ARGS...: `ogive ARGS` must fail with status 1, UNAVAILABLE (the handshake failed).
no() {
  local name=$1 rc=0
  shift
  timeout 30 "$OGIVE" --timeout 3 "$@" >"$TMP/$name.out" 2>"$TMP/$name.err" || rc=$?
  [[ "$rc" -eq 1 ]] || fail "ogive $*: status $rc, expected 1 (refused): $(cat "$TMP/$name.err")"
  grep -q "UNAVAILABLE" "$TMP/$name.err" || fail "ogive $*: expected UNAVAILABLE: $(cat "$TMP/$name.err")"
}

cat >"$TMP/design.txtpb" <<'EOF'
name: "sealed"
parameters { name: "temp" unit: "degC" real { low: 20 high: 80 } }
parameters { name: "passes" integer { low: 1 high: 5 } }
objective { direction: DIRECTION_LOWER_IS_BETTER }
population_size: 4
seed: 5
EOF
first_number() { "$PY" -c 'import json,sys; print(json.load(sys.stdin)[0]["trial"])' <"$1"; }

step "TLS: create, ask, tell and read back through the CLI with --tls-ca"
T=(--server "$ADDR_tls" --tls-ca "$PKI/ca.pem")
ok create "${T[@]}" campaign create "$TMP/design.txtpb"
grep -q "created campaign sealed" "$TMP/create.out" || fail "create printed: $(cat "$TMP/create.out")"
ok ask "${T[@]}" ask sealed --worker tls-test --json
trial=$(first_number "$TMP/ask.out")
ok tell "${T[@]}" tell sealed "$trial" --score 2.5 --worker tls-test
ok trials "${T[@]}" campaign trials sealed --json
"$PY" - "$TMP/trials.out" "$trial" <<'EOF' || fail "the told score is not stored: $(cat "$TMP/trials.out")"
import json, sys
trials = {str(t["trial"]): t for t in json.load(open(sys.argv[1]))}
assert trials[sys.argv[2]]["score"] == 2.5, trials
EOF

step "TLS: by host name, with \$OGIVE_TLS_CA, and with --tls-server-name"
ok byname --server "localhost:${ADDR_tls##*:}" --tls-ca "$PKI/ca.pem" campaign show sealed
OGIVE_TLS_CA="$PKI/ca.pem" ok env --server "$ADDR_tls" campaign list
grep -q "sealed" "$TMP/env.out" || fail "campaign list over TLS: $(cat "$TMP/env.out")"
ok override "${T[@]}" --tls-server-name localhost campaign list

step "TLS: ogive work runs trials over TLS"
printf '%s\n' '#!/bin/sh' 'echo "$OGIVE_TEMP"' >"$TMP/score.sh"
chmod +x "$TMP/score.sh"
ok work "${T[@]}" work sealed --max-trials 3 --worker tls-worker -- "$TMP/score.sh"
ok after "${T[@]}" campaign trials sealed --json
"$PY" - "$TMP/after.out" <<'EOF' || fail "ogive work did not store 3 scores: $(cat "$TMP/after.out")"
import json, sys
trials = json.load(open(sys.argv[1]))
worked = [t for t in trials if t.get("worker") == "tls-worker" and t.get("outcome") == "score"]
assert len(worked) == 3, trials
for t in worked:
    assert abs(t["score"] - t["values"]["temp"]) < 1e-9, t
EOF

step "TLS: refused for a plaintext client, untrusted CAs and another server name"
no plaintext --server "$ADDR_tls" campaign list
no sysroots --server "$ADDR_tls" --tls campaign list
no otherca --server "$ADDR_tls" --tls-ca "$PKI/other-ca.pem" campaign list
no wrongname "${T[@]}" --tls-server-name db.example.org campaign list
# And a TLS client of a plaintext server fails too, rather than falling back to plain text.
no tls-to-plain --server "$ADDR_plain" --tls-ca "$PKI/ca.pem" campaign list

step "TLS client options that cannot be used are usage errors naming the option"
rc=0
timeout 10 "$OGIVE" "${T[@]}" --tls-cert "$PKI/client.pem" campaign list >/dev/null 2>"$TMP/usage.err" || rc=$?
[[ "$rc" -eq 2 ]] && grep -q -- "--tls-cert: needs --tls-key" "$TMP/usage.err" ||
  fail "cert without key: status $rc: $(cat "$TMP/usage.err")"
rc=0
timeout 10 "$OGIVE" --server "$ADDR_tls" --tls-ca "$PKI/missing.pem" campaign list >/dev/null 2>"$TMP/usage.err" || rc=$?
[[ "$rc" -eq 2 ]] && grep -qF -- "--tls-ca '$PKI/missing.pem': cannot read" "$TMP/usage.err" ||
  fail "missing CA file: status $rc: $(cat "$TMP/usage.err")"

step "mTLS: a client needs a certificate signed by --tls-client-ca"
M=(--server "$ADDR_mtls" --tls-ca "$PKI/ca.pem")
no nocert "${M[@]}" campaign list
no strangercert "${M[@]}" --tls-cert "$PKI/stranger.pem" --tls-key "$PKI/stranger.key" campaign list
C=("${M[@]}" --tls-cert "$PKI/client.pem" --tls-key "$PKI/client.key")
ok mcreate "${C[@]}" campaign create "$TMP/design.txtpb"
ok mask "${C[@]}" ask sealed --json
trial=$(first_number "$TMP/mask.out")
OGIVE_TLS_CERT="$PKI/client.pem" OGIVE_TLS_KEY="$PKI/client.key" \
  ok mtell "${M[@]}" tell sealed "$trial" --void --note "from the environment's certificate"
ok mshow "${C[@]}" campaign trials sealed --json
grep -q '"state":"voided"' "$TMP/mshow.out" || fail "mTLS tell not stored: $(cat "$TMP/mshow.out")"

step "mTLS: Python grpcio with grpc.ssl_channel_credentials"
timeout 60 "$PY" - "$ADDR_mtls" "$PKI" <<'EOF' || fail "Python TLS interop"
import sys
import grpc

address, pki = sys.argv[1], sys.argv[2]
read = lambda name: open("%s/%s" % (pki, name), "rb").read()

def list_campaigns(credentials):
    # ListCampaignsRequest has no fields: its encoding is empty. The reply is only searched for a name.
    with grpc.secure_channel(address, credentials) as channel:
        call = channel.unary_unary("/ogive.v1.Ogive/ListCampaigns",
                                   request_serializer=lambda _: b"",
                                   response_deserializer=lambda data: data)
        return call(None, timeout=5)

reply = list_campaigns(grpc.ssl_channel_credentials(
    root_certificates=read("ca.pem"), private_key=read("client.key"),
    certificate_chain=read("client.pem")))
assert b"sealed" in reply, reply
try:
    list_campaigns(grpc.ssl_channel_credentials(root_certificates=read("ca.pem")))
except grpc.RpcError as e:
    assert e.code() == grpc.StatusCode.UNAVAILABLE, e
else:
    raise AssertionError("a client without a certificate got through")
print("python: ok")
EOF

echo "PASS"
