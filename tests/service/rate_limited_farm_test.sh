#!/usr/bin/env bash
# A farm of 32 `ogive work` loops sharing one worker token whose request rate is set low (20 per
# second, bursts of 40), on one campaign with a budget of 64 trials: every worker finishes with
# status 0, every trial a worker printed as stored is stored once with that score, the campaign
# reaches its budget, and the refusals the limit caused are counted in the metrics
# (ogive_requests_total with code RESOURCE_EXHAUSTED). Loopback only; bounded by timeouts.
set -euo pipefail
source "$(dirname "$0")/../../tests/support/test_lib.sh" rate-limited-farm "$@"

DB="$TMP/farm.db"
"$OGIVED" token create --db "$DB" --role admin --label operator >"$TMP/admin.token" 2>"$TMP/token.log"
"$OGIVED" token create --db "$DB" --role worker --label farm >"$TMP/farm.token" 2>>"$TMP/token.log"
SERVER="127.0.0.1:$(free_port)"
METRICS="127.0.0.1:$(free_port)"
"$OGIVED" --db "$DB" --listen "$SERVER" --metrics-listen "$METRICS" --max-requests-per-second-per-token 20 \
  >"$TMP/ogived.log" 2>&1 &
OGIVED_PID=$!
og() { timeout 30 "$OGIVE" --server "$SERVER" --token-file "$TMP/admin.token" "$@"; }
for _ in $(seq 100); do og campaign list >/dev/null 2>&1 && break; sleep 0.1; done
og campaign list >/dev/null || fail "ogived does not answer"

step "one campaign with a budget of 64, 32 workers sharing one token limited to 20 requests a second"
cat >"$TMP/farm.txtpb" <<'DESIGN'
name: "shared-token"
parameters { name: "relaxation" real { low: 0.5 high: 1.9 } }
parameters { name: "mesh_level" integer { low: 1 high: 5 } }
objective { direction: DIRECTION_LOWER_IS_BETTER }
trial_budget: 64
seed: 11
DESIGN
og campaign create "$TMP/farm.txtpb" >/dev/null || fail "campaign create"
printf '%s\n' '#!/usr/bin/env bash' 'echo "$OGIVE_RELAXATION"' >"$TMP/solve.sh"
chmod +x "$TMP/solve.sh"
for w in $(seq 32); do
  timeout 120 "$OGIVE" --server "$SERVER" --token-file "$TMP/farm.token" work shared-token --worker "node-$w" \
    -- "$TMP/solve.sh" >"$TMP/w$w.out" 2>"$TMP/w$w.err" &
  PIDS+=($!)
done
failed=0
for pid in "${PIDS[@]}"; do wait "$pid" || failed=$((failed + 1)); done
PIDS=()
[[ "$failed" -eq 0 ]] || fail "$failed of 32 workers exited non-zero: $(grep -h "ogive work" "$TMP"/w*.err | sort | uniq -c | head)"

step "every reported score is stored once, the budget is reached, the refusals are counted"
grep -h "^trial [0-9]*: score" "$TMP"/w*.err | grep -v "NOT stored" >"$TMP/printed.txt" || true
og campaign trials shared-token --json >"$TMP/trials.json" || fail "campaign trials"
og campaign show shared-token --json >"$TMP/show.json" || fail "campaign show"
"$PY" - "$TMP/printed.txt" "$TMP/trials.json" "$TMP/show.json" "http://$METRICS/metrics" <<'PY' || fail "farm results"
import json, re, sys, urllib.request
printed = {}
for line in open(sys.argv[1]):
    m = re.match(r"trial (\d+): score (\S+)", line)
    assert m, line
    n = int(m.group(1))
    assert n not in printed, "trial %d printed twice" % n
    printed[n] = float(m.group(2))
trials = {t["trial"]: t for t in json.load(open(sys.argv[2]))}
for n, score in printed.items():
    t = trials[n]
    assert t["state"] == "reported" and abs(t["score"] - score) <= 1e-6 * max(1, abs(score)), (n, score, t)
view = json.load(open(sys.argv[3]))
assert view["status"]["phase"] == "CAMPAIGN_PHASE_DONE", view["status"]
assert int(view["status"]["reported"]) == 64, view["status"]
assert len(printed) == 64, "workers printed %d stored scores" % len(printed)
text = urllib.request.urlopen(sys.argv[4], timeout=10).read().decode()
refused = sum(float(v) for v in re.findall(r'^ogive_requests_total\{[^}]*code="RESOURCE_EXHAUSTED"[^}]*\} (\S+)$',
                                           text, re.M))
assert refused > 0, "no RESOURCE_EXHAUSTED counted: the limit never bit"
print("   64 trials stored by 32 workers; %d requests refused by the rate limit and retried" % refused)
PY
echo "PASS"
