#!/usr/bin/env bash
# End-to-end test of the bench technician's commands against a real server, on the kiln firing
# example of docs/examples: `ask --card`, `tell --grade` in any case and with a typo, and `import`
# of a CSV file (a file with a bad row imports nothing; --skip-bad imports the rest; importing the
# same file again changes nothing).
#
#   technician_test.sh PATH/TO/ogived PATH/TO/ogive PATH/TO/kiln-firing.txtpb
set -euo pipefail

source "$(dirname "$0")/../../tests/support/test_lib.sh" ogive-technician-test "$@"
DESIGN=$(realpath "$3")
FAIL_LOG_LINES=20
og() { timeout 20 "$OGIVE" "$@"; }

PORT=$(free_port)
export OGIVE_SERVER="127.0.0.1:$PORT"
"$OGIVED" --db "$TMP/ogive.db" --listen "$OGIVE_SERVER" --no-auth >"$TMP/ogived.log" 2>&1 &
OGIVED_PID=$!
for _ in $(seq 100); do
  if og campaign list --timeout 1 >/dev/null 2>&1; then break; fi
  kill -0 "$OGIVED_PID" 2>/dev/null || fail "ogived exited at start"
  sleep 0.1
done
og campaign create "$DESIGN" >/dev/null || fail "campaign create"
CAMPAIGN=kiln-glaze

step "ask --card prints a card per trial"
og ask "$CAMPAIGN" -n 6 --card >"$TMP/cards.txt" || fail "ask --card"
[[ $(grep -c $'\f' "$TMP/cards.txt") -eq 6 ]] || fail "expected 6 cards, one form feed each"
grep -q "peak_temp = .* degC" "$TMP/cards.txt" || fail "card lacks the value with its unit"
grep -q "Peak temperature of the firing" "$TMP/cards.txt" || fail "card lacks the description"
grep -q "ogive tell $CAMPAIGN 1 --grade LABEL" "$TMP/cards.txt" || fail "card lacks how to report"

step "tell: grades in any case, typos refused with a suggestion"
og tell "$CAMPAIGN" 1 --grade GOOD | grep -q "stored" || fail "tell --grade GOOD"
if og tell "$CAMPAIGN" 2 --grade exellent 2>"$TMP/typo.err"; then fail "a typo was accepted"; fi
grep -q "did you mean 'excellent'" "$TMP/typo.err" || fail "no suggestion: $(cat "$TMP/typo.err")"

step "import: a bad row imports nothing"
printf 'trial,outcome,note\n2,fair,slight pinholing\n3,Dull,\n4,brilliant,\n99,good,\n' >"$TMP/bad.csv"
if og import "$CAMPAIGN" "$TMP/bad.csv" 2>"$TMP/bad.err"; then fail "a file with bad rows was imported"; fi
grep -q "bad.csv:4: trial 4: outcome: 'brilliant' is not a grade" "$TMP/bad.err" || fail "line 4 not named: $(cat "$TMP/bad.err")"
grep -q "bad.csv:5: trial 99: no such trial" "$TMP/bad.err" || fail "line 5 not named: $(cat "$TMP/bad.err")"
grep -q "nothing imported" "$TMP/bad.err" || fail "no 'nothing imported'"
[[ $(og campaign trials "$CAMPAIGN" --state reported --json | "$PY" -c 'import json,sys; print(len(json.load(sys.stdin)))') -eq 1 ]] \
  || fail "the refused import stored something"

step "import --skip-bad imports the good rows"
og import "$CAMPAIGN" "$TMP/bad.csv" --skip-bad >"$TMP/skip.out" 2>"$TMP/skip.err" || fail "import --skip-bad"
grep -q "imported 2 outcomes; 0 already stored; 2 bad rows skipped" "$TMP/skip.out" || fail "$(cat "$TMP/skip.out")"

step "importing a good file twice changes nothing the second time"
printf '5,excellent,glassy\r\n6,cracked,"dunted, on cooling"\r\n1,good,\r\n' >"$TMP/good.csv"
og import "$CAMPAIGN" "$TMP/good.csv" >"$TMP/good1.out" || fail "import good.csv"
grep -q "imported 2 outcomes; 1 already stored" "$TMP/good1.out" || fail "$(cat "$TMP/good1.out")"
og campaign trials "$CAMPAIGN" --csv >"$TMP/before.csv"
og import "$CAMPAIGN" "$TMP/good.csv" >"$TMP/good2.out" || fail "import good.csv again"
grep -q "imported 0 outcomes; 3 already stored" "$TMP/good2.out" || fail "$(cat "$TMP/good2.out")"
og campaign trials "$CAMPAIGN" --csv >"$TMP/after.csv"
cmp -s "$TMP/before.csv" "$TMP/after.csv" || fail "re-importing changed the stored trials"

step "the stored outcomes are the file's"
"$PY" - "$TMP/after.csv" <<'PY' || fail "stored outcomes differ"
import csv, sys
rows = {int(r["trial"]): r for r in csv.DictReader(open(sys.argv[1], newline=""))}
expect = {1: ("good", ""), 2: ("fair", "slight pinholing"), 3: ("dull", ""), 5: ("excellent", "glassy"),
          6: ("cracked", "dunted, on cooling")}
for n, (grade, note) in expect.items():
    assert rows[n]["grade"] == grade and rows[n]["note"] == note, (n, rows[n])
assert rows[4]["state"] == "leased", rows[4]
PY

step "an export imported into its own campaign changes nothing, as CSV and as saved by a spreadsheet"
og campaign export "$CAMPAIGN" --csv -o "$TMP/export.csv" || fail "export"
og import "$CAMPAIGN" "$TMP/export.csv" >"$TMP/reimport.out" || fail "import of the export: $(cat "$TMP/reimport.out")"
grep -q "imported 0 outcomes; 5 already stored; 1 without an outcome" "$TMP/reimport.out" || fail "$(cat "$TMP/reimport.out")"
# The same records as a spreadsheet program saves them where ';' separates fields: a byte-order
# mark, every field quoted, CRLF.
"$PY" - "$TMP/export.csv" "$TMP/export-semicolons.csv" <<'PY' || fail "rewrite the export"
import csv, sys
rows = list(csv.reader(open(sys.argv[1], newline="", encoding="utf-8")))
with open(sys.argv[2], "w", newline="", encoding="utf-8-sig") as out:
    csv.writer(out, delimiter=";", quoting=csv.QUOTE_ALL, lineterminator="\r\n").writerows(rows)
PY
og import "$CAMPAIGN" "$TMP/export-semicolons.csv" >"$TMP/reimport2.out" || fail "import ;: $(cat "$TMP/reimport2.out")"
grep -q "imported 0 outcomes; 5 already stored" "$TMP/reimport2.out" || fail "$(cat "$TMP/reimport2.out")"
og campaign trials "$CAMPAIGN" --csv >"$TMP/after2.csv"
cmp -s "$TMP/after.csv" "$TMP/after2.csv" || fail "re-importing the export changed the stored trials"
og campaign trials "$CAMPAIGN" --json >"$TMP/trials.json"
og campaign export "$CAMPAIGN" --json -o "$TMP/export.json"
cmp -s "$TMP/trials.json" "$TMP/export.json" || fail "campaign trials --json and campaign export --json differ"

step "campaign watch prints a line per change and stops when the campaign is done"
sed -e 's/name: "kiln-glaze"/name: "kiln-watch"/' -e '/target_grade/d' "$DESIGN" >"$TMP/watch.txtpb"
og campaign create "$TMP/watch.txtpb" >/dev/null || fail "create kiln-watch"
og ask kiln-watch -n 2 >/dev/null || fail "ask kiln-watch"
timeout 20 "$OGIVE" campaign watch kiln-watch >"$TMP/watch.out" 2>"$TMP/watch.err" &
WATCH_PID=$!
sleep 0.5
og tell kiln-watch 1 --grade fair >/dev/null || fail "tell kiln-watch 1"
sleep 0.3
og campaign finish kiln-watch >/dev/null || fail "campaign finish"
wait "$WATCH_PID" || fail "campaign watch did not end cleanly: $(cat "$TMP/watch.err")"
[[ $(wc -l <"$TMP/watch.out") -ge 3 ]] || fail "expected the first view and two changes: $(cat "$TMP/watch.out")"
head -n 1 "$TMP/watch.out" | grep -q "leased 2 reported 0 .*budget 0/120" || fail "first line: $(head -n 1 "$TMP/watch.out")"
grep -q "reported 1 .*budget 1/120" "$TMP/watch.out" || fail "no line for the report: $(cat "$TMP/watch.out")"
tail -n 1 "$TMP/watch.out" | grep -q "done (stopped)" || fail "last line is not the done view: $(tail -n 1 "$TMP/watch.out")"
og campaign show kiln-watch | grep -q "1 report in the last hour" || fail "campaign show lacks the activity line"

kill -TERM "$OGIVED_PID"
wait "$OGIVED_PID" || fail "ogived did not stop cleanly"
OGIVED_PID=""
echo "PASS"
