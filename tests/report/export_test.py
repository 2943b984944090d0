#!/usr/bin/python3
"""`ogive campaign export` of a real campaign, read back with Python's csv and json modules and compared,
trial by trial and field by field, with ListTrials (called from a Python gRPC client, protobuf JSON).

    /usr/bin/python3 export_test.py --ogived PATH --ogive PATH

The campaign (campaign_fixture.py) has notes and worker names with commas, quotes, '<' and line breaks, a
unit with markup in a column header, a late report, voids, infeasible outcomes and a lapsed trial.
Checks that the CSV follows RFC 4180 (CRLF after every record, quoted fields where needed, the same
number of fields in every record), that `-o FILE` writes the bytes standard output gets, that both
formats hold every trial once in trial-number order with the values ListTrials has (reals bit for
bit, times as ISO 8601 UTC of the same millisecond), and that bad usage is refused with exit status 2.
"""

import argparse
import csv
import datetime
import io
import json
import os
import sys

sys.path.insert(0, os.path.dirname(os.path.abspath(__file__)))
import campaign_fixture as fx  # noqa: E402

PARAMETERS = [("x", "x (<b>mm</b>)", "real"), ("rate", "rate (1/s)", "real"), ("layers", "layers (coats)", "integer"),
              ("solver", "solver", "categorical"), ("warm", "warm", "flag")]
STATES = {"TRIAL_STATE_LEASED": "leased", "TRIAL_STATE_REPORTED": "reported", "TRIAL_STATE_LAPSED": "lapsed",
          "TRIAL_STATE_VOIDED": "voided"}
USES = {"OUTCOME_USE_UNSPECIFIED": "", "OUTCOME_USE_PENDING": "pending", "OUTCOME_USE_CONSUMED": "consumed",
        "OUTCOME_USE_TOO_STALE": "too_stale", "OUTCOME_USE_AWAITING_REPLICATES": "awaiting_replicates"}


def iso_millis(unix_ms):
    """ISO 8601 UTC with milliseconds, computed here independently of the exporter."""
    if unix_ms == 0:
        return ""
    t = datetime.datetime.fromtimestamp(unix_ms / 1000, tz=datetime.timezone.utc)
    return t.strftime("%Y-%m-%dT%H:%M:%S.") + "%03dZ" % (unix_ms % 1000)


def expected_record(trial):
    """What one exported trial must say, from its ListTrials JSON (protobuf names and encodings)."""
    outcome = trial.get("outcome", {})
    kind = next((k for k in ("score", "grade", "infeasible", "void") if k in outcome), "")
    values = {}
    for name, _, kind_of in PARAMETERS:
        v = trial["candidate"]["values"][name]
        values[name] = {"real": lambda: float(v["real"]), "integer": lambda: int(v["integer"]),
                        "categorical": lambda: v["categorical"], "flag": lambda: bool(v["flag"])}[kind_of]()
    consumed = trial["use"] == "OUTCOME_USE_CONSUMED"
    return {
        "trial": int(trial["number"]), "state": STATES[trial["state"]], "outcome": kind,
        "score": float(outcome["score"]) if kind == "score" else None,
        "grade": outcome.get("grade") if kind == "grade" else None, "note": outcome.get("note", ""),
        "values": values, "generation": int(trial["generation"]),
        "consumed_by": int(trial["consumedBy"]) if consumed else None, "use": USES[trial["use"]],
        "late": trial["late"], "worker": trial["worker"], "reported_by": trial["reportedBy"],
        "reported_at": iso_millis(int(trial["reportedAtUnixMs"])),
        "lease_deadline": iso_millis(int(trial["leaseDeadlineUnixMs"])),
        "replicate_of": int(trial.get("replicateOf", 0)) or None,
    }


def check_csv(raw, expected):
    text = raw.decode("utf-8")
    fx.check(text.endswith("\r\n"), "the CSV does not end with CRLF")
    # Every record ends in CRLF; a bare LF appears only inside a quoted field (the notes).
    rows = list(csv.reader(io.StringIO(text, newline=""), strict=True))
    header = rows[0]
    want = ["trial", "state", "outcome", "score", "grade", "note"] + [h for _, h, _ in PARAMETERS] + [
        "generation", "consumed_by", "use", "late", "worker", "reported_by", "reported_at", "lease_deadline",
        "replicate_of"]
    fx.check(header == want, "CSV header %r, expected %r" % (header, want))
    fx.check(all(len(r) == len(header) for r in rows), "CSV records of different lengths")
    # Outside quoted fields, line breaks are exactly the CRLFs that end records.
    in_quotes, terminators = False, 0
    for i, c in enumerate(text):
        if c == '"':
            in_quotes = not in_quotes
        elif not in_quotes and c == "\n":
            fx.check(i > 0 and text[i - 1] == "\r", "a record ends in LF without CR at byte %d" % i)
            terminators += 1
        elif not in_quotes and c == "\r":
            fx.check(text[i + 1:i + 2] == "\n", "a CR outside quotes is not followed by LF at byte %d" % i)
    fx.check(terminators == len(rows), "%d CRLF record ends for %d records" % (terminators, len(rows)))
    fx.check('"measured by hand, ""twice""; 3 < 4 & 5 > 4,\nsee <script>alert(1)</script>"' in text,
             "the note is not quoted with doubled inner quotes")
    fx.check('"node, ""a"""' in text, "the worker name with a comma and quotes is not quoted")
    got = rows[1:]
    fx.check(len(got) == len(expected), "CSV has %d trials, ListTrials %d" % (len(got), len(expected)))
    for row, e in zip(got, expected):
        r = dict(zip(header, row))
        where = "CSV trial %s" % r["trial"]
        fx.check(int(r["trial"]) == e["trial"], "%s: out of order (expected %d)" % (where, e["trial"]))
        for key in ("state", "outcome", "note", "use", "worker", "reported_by", "reported_at", "lease_deadline"):
            fx.check(r[key] == e[key], "%s: %s is %r, ListTrials says %r" % (where, key, r[key], e[key]))
        fx.check((float(r["score"]) if r["score"] else None) == e["score"], "%s: score %r" % (where, r["score"]))
        fx.check((r["grade"] or None) == e["grade"], "%s: grade %r" % (where, r["grade"]))
        fx.check(int(r["generation"]) == e["generation"], "%s: generation" % where)
        fx.check((int(r["consumed_by"]) if r["consumed_by"] else None) == e["consumed_by"], "%s: consumed_by" % where)
        fx.check(r["late"] == ("true" if e["late"] else "false"), "%s: late %r" % (where, r["late"]))
        fx.check((int(r["replicate_of"]) if r["replicate_of"] else None) == e["replicate_of"],
                 "%s: replicate_of %r" % (where, r["replicate_of"]))
        for name, column, kind in PARAMETERS:
            value = {"real": float, "integer": int, "categorical": str,
                     "flag": lambda s: {"true": True, "false": False}[s]}[kind](r[column])
            fx.check(value == e["values"][name], "%s: %s is %r, ListTrials says %r" % (
                where, column, value, e["values"][name]))


def check_json(raw, expected):
    got = json.loads(raw)
    fx.check(isinstance(got, list), "the JSON export is not an array")
    fx.check(len(got) == len(expected), "JSON has %d trials, ListTrials %d" % (len(got), len(expected)))
    for g, e in zip(got, expected):
        want = dict(e)
        for key in ("outcome", "use", "reported_at", "lease_deadline"):
            want[key] = want[key] or None
        fx.check(g == want, "JSON trial %s differs from ListTrials:\n  got      %r\n  expected %r" % (
            g.get("trial"), g, want))


def main():
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--ogived", required=True)
    parser.add_argument("--ogive", required=True)
    args = parser.parse_args()
    with fx.temporary_directory() as workdir, fx.Ogived(args.ogived, args.ogive, workdir) as server:
        note = fx.run_mixed_campaign(server, workdir)
        trials = server.trials(fx.CAMPAIGN)
        expected = [expected_record(t) for t in trials]
        fx.check([e["trial"] for e in expected] == list(range(1, len(expected) + 1)), "ListTrials skipped a number")
        states = {e["state"] for e in expected}
        fx.check({"reported", "lapsed", "voided"} <= states, "the campaign lacks a state: %s" % states)
        fx.check(any(e["late"] for e in expected) and any(e["outcome"] == "infeasible" for e in expected),
                 "the campaign lacks a late report or an infeasible outcome")
        fx.check(expected[0]["note"] == note, "trial 1 does not carry the late report's note")

        exported = server.run("campaign", "export", fx.CAMPAIGN, "--csv").stdout
        check_csv(exported, expected)
        path = os.path.join(workdir, "trials.csv")
        server.run("campaign", "export", fx.CAMPAIGN, "--csv", "-o", path)
        with open(path, "rb") as f:
            fx.check(f.read() == exported, "-o FILE wrote other bytes than standard output got")

        check_json(server.run("--json", "campaign", "export", fx.CAMPAIGN).stdout, expected)

        for bad, message in ((["campaign", "export", fx.CAMPAIGN], b"--csv or --json"),
                             (["--json", "campaign", "export", fx.CAMPAIGN, "--csv"], b"choose one"),
                             (["campaign", "export", fx.CAMPAIGN, "--csv", "-o", "/nonexistent/t.csv"], b"/nonexistent")):
            result = server.run(*bad, check_status=False)
            fx.check(result.returncode == 2 and message in result.stderr,
                     "%s: exit %d, %r" % (" ".join(bad), result.returncode, result.stderr))
        missing = server.run("campaign", "export", "no-such-campaign", "--csv", check_status=False)
        fx.check(missing.returncode == 1 and b"NOT_FOUND" in missing.stderr, "unknown campaign: %r" % missing.stderr)
    print("PASS: %d trials exported as CSV and JSON match ListTrials" % len(expected))
    return 0


if __name__ == "__main__":
    try:
        sys.exit(main())
    except fx.TestFailure as e:
        print("FAIL: %s" % e)
        sys.exit(1)
