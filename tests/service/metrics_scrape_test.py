#!/usr/bin/python3
"""Scrapes a real ogived's /metrics and reads it with Debian's python3-prometheus-client.

    /usr/bin/python3 metrics_scrape_test.py --ogived PATH/TO/ogived --ogive PATH/TO/ogive

The reference is outside the project: the Prometheus text exposition format 0.0.4 (Prometheus
documentation, "Exposition formats") as prometheus_client.parser.text_string_to_metric_families
reads it, plus the format's rules for histograms (cumulative buckets, the last one le="+Inf", _count
equal to it) and Prometheus's naming conventions (a counter's samples end in _total), checked here
from memory of that documentation.

Starts ogived on a temporary database with --metrics-listen on a free loopback port, creates a scored
and a graded campaign with the CLI, asks and tells (scores, grades, an infeasible, a void, a duplicate,
a call for an unknown campaign, a lease left to lapse), scrapes, and checks: every family's name and
type; that the counters equal what was done; the trial and lease gauges against `ogive campaign show`;
histogram buckets; that no label carries a trial number or a worker; then that counters only grow
between scrapes, that other paths are 404, that a non-loopback --metrics-listen is refused without
--allow-insecure-remote, and that SIGTERM stops ogived with status 0. Every step is bounded in time.
"""

import argparse
import json
import math
import os
import shutil
import signal
import subprocess
import sys
import tempfile
import time
import urllib.error
import urllib.request

from prometheus_client.parser import text_string_to_metric_families

sys.path.insert(0, os.path.join(os.path.dirname(os.path.abspath(__file__)), "..", "support"))
from ogive_testlib import TestFailure, check, free_port  # noqa: E402

CALL_TIMEOUT_S = 20

# name -> type. The parser drops _total from a counter family's name; these are the family names.
EXPECTED_TYPES = {
    "ogive_requests": "counter",
    "ogive_request_duration_seconds": "histogram",
    "ogive_tells": "counter",
    "ogive_lapses": "counter",
    "ogive_generations": "counter",
    "ogive_restarts": "counter",
    "ogive_store_commit_duration_seconds": "histogram",
    "ogive_store_writes_per_transaction": "histogram",
    "ogive_process_start_time_seconds": "gauge",
    "ogive_campaigns": "gauge",
    "ogive_open_leases": "gauge",
    "ogive_trials": "gauge",
    "ogive_campaign_generation": "gauge",
    "ogive_store_transactions": "counter",
    "ogive_store_writes": "counter",
    "ogive_store_failed_writes": "counter",
    "ogive_store_failed_transactions": "counter",
    "ogive_store_group_commit_waits": "counter",
    "ogive_store_isolated_batches": "counter",
    "ogive_store_queued_writes": "gauge",
    "ogive_store_size_bytes": "gauge",
}
ALLOWED_LABELS = {"method", "code", "kind", "campaign", "state", "phase", "le"}


class Run:
    def __init__(self, args, tmp):
        self.args = args
        self.tmp = tmp
        self.server = None
        self.calls = {}  # (method, code) -> calls made

    def ogive(self, *words, method=None, code="OK"):
        """Runs one CLI command that makes one call of `method` (if given), expected to end with `code`."""
        r = subprocess.run([self.args.ogive, "--server", self.server, "--timeout", "10", *words],
                           capture_output=True, text=True, timeout=CALL_TIMEOUT_S)
        if code == "OK":
            check(r.returncode == 0, "ogive %s: status %d: %s" % (" ".join(words), r.returncode, r.stderr))
        else:
            check(r.returncode != 0 and code in r.stderr, "ogive %s: expected %s, got status %d: %s"
                  % (" ".join(words), code, r.returncode, r.stderr))
        if method is not None:
            self.calls[(method, code)] = self.calls.get((method, code), 0) + 1
        return r

    def ask(self, campaign, lease=None):
        words = ["ask", campaign, "--json", "--worker", "metrics-test"]
        if lease is not None:
            words += ["--lease", str(lease)]
        # The CLI reads the campaign's design first, to print the trials as export records.
        self.calls[("GetCampaign", "OK")] = self.calls.get(("GetCampaign", "OK"), 0) + 1
        trials = json.loads(self.ogive(*words, method="Ask").stdout)
        check(len(trials) == 1, "ask returned %r" % trials)
        return int(trials[0]["trial"])

    def tell(self, campaign, trial, *outcome):
        if "--grade" in outcome:  # the CLI reads the campaign's scale first, to match the label
            self.calls[("GetCampaign", "OK")] = self.calls.get(("GetCampaign", "OK"), 0) + 1
        self.ogive("tell", campaign, str(trial), *outcome, "--worker", "metrics-test", method="Tell")


def scrape(url):
    with urllib.request.urlopen(url, timeout=10) as r:
        check(r.status == 200, "GET %s: %d" % (url, r.status))
        content_type = r.headers.get("Content-Type", "")
        check(content_type.startswith("text/plain; version=0.0.4"), "Content-Type is %r" % content_type)
        text = r.read().decode("utf-8")
    check(text.endswith("\n"), "the exposition does not end with a newline")
    return text, {f.name: f for f in text_string_to_metric_families(text)}


def value(families, name, suffix="", **labels):
    """The value of the one sample of family `name` with exactly these labels (0 when absent)."""
    found = [s.value for s in families[name].samples
             if s.name == name + suffix and s.labels == labels]
    check(len(found) <= 1, "%s%s%r appears %d times" % (name, suffix, labels, len(found)))
    return found[0] if found else 0


def check_families(text, families, campaign_names):
    check(set(families) == set(EXPECTED_TYPES),
          "families: missing %s, unexpected %s" % (sorted(set(EXPECTED_TYPES) - set(families)),
                                                   sorted(set(families) - set(EXPECTED_TYPES))))
    for name, family in families.items():
        check(family.type == EXPECTED_TYPES[name], "%s is a %s, expected %s" % (name, family.type, EXPECTED_TYPES[name]))
        check(family.documentation, "%s has no help text" % name)
        for s in family.samples:
            check(s.name.startswith("ogive_"), "sample %s lacks the ogive_ prefix" % s.name)
            if family.type == "counter":
                check(s.name.endswith("_total"), "counter sample %s does not end in _total" % s.name)
            check(set(s.labels) <= ALLOWED_LABELS, "%s has labels %s" % (s.name, sorted(s.labels)))
            for label, v in s.labels.items():
                if label == "campaign":
                    check(v in campaign_names, "%s{campaign=%r}: not a campaign" % (s.name, v))
                elif label != "le":
                    # A trial number as a label value would make one series per trial.
                    check(not v.isdigit(), "%s{%s=%r}: a number as a label value" % (s.name, label, v))
            check(not math.isnan(s.value), "%s is NaN" % s.name)
    # TYPE lines come before their samples, once per family (read from the text itself).
    typed = [line.split()[2] for line in text.splitlines() if line.startswith("# TYPE ")]
    check(len(typed) == len(set(typed)), "a family is typed twice: %s" % typed)


def check_histograms(families):
    for name, family in families.items():
        if family.type != "histogram":
            continue
        series = {}
        for s in family.samples:
            key = tuple(sorted((k, v) for k, v in s.labels.items() if k != "le"))
            series.setdefault(key, {"buckets": [], "count": None, "sum": None})
            if s.name == name + "_bucket":
                series[key]["buckets"].append((s.labels["le"], s.value))
            elif s.name == name + "_count":
                series[key]["count"] = s.value
            elif s.name == name + "_sum":
                series[key]["sum"] = s.value
            else:
                raise TestFailure("unexpected sample %s in histogram %s" % (s.name, name))
        check(series, "histogram %s has no series" % name)
        for key, h in series.items():
            bounds = [float(le) for le, _ in h["buckets"]]
            counts = [c for _, c in h["buckets"]]
            check(h["buckets"] and h["buckets"][-1][0] == "+Inf", "%s%s: the last bucket is not +Inf" % (name, key))
            check(bounds == sorted(bounds) and len(set(bounds)) == len(bounds), "%s%s: bounds out of order" % (name, key))
            check(all(a <= b for a, b in zip(counts, counts[1:])), "%s%s: buckets not cumulative: %s" % (name, key, counts))
            check(h["count"] == counts[-1], "%s%s: _count %s != +Inf bucket %s" % (name, key, h["count"], counts[-1]))
            check(h["sum"] is not None and h["sum"] >= 0, "%s%s: no _sum" % (name, key))


def main():
    parser = argparse.ArgumentParser()
    parser.add_argument("--ogived", required=True)
    parser.add_argument("--ogive", required=True)
    args = parser.parse_args()
    tmp = tempfile.mkdtemp(prefix="ogive-metrics-test.")
    run = Run(args, tmp)
    log = open(os.path.join(tmp, "ogived.log"), "w")
    proc = None
    try:
        # ---- A non-loopback metrics address is refused without --allow-insecure-remote ----
        r = subprocess.run([args.ogived, "--db", os.path.join(tmp, "refused.db"), "--listen",
                            "127.0.0.1:%d" % free_port(), "--metrics-listen", "0.0.0.0:%d" % free_port()],
                           capture_output=True, text=True, timeout=CALL_TIMEOUT_S)
        check(r.returncode == 2 and "--allow-insecure-remote" in r.stderr,
              "non-loopback --metrics-listen: status %d: %s" % (r.returncode, r.stderr))
        check(not os.path.exists(os.path.join(tmp, "refused.db")), "the refused server created its database")

        # ---- Start ----
        started = time.time()
        run.server = "127.0.0.1:%d" % free_port()
        url = "http://127.0.0.1:%d/metrics" % free_port()
        proc = subprocess.Popen([args.ogived, "--db", os.path.join(tmp, "ogive.db"), "--listen", run.server, "--no-auth",
                                 "--metrics-listen", url[len("http://"):-len("/metrics")],
                                 "--sweep-interval", "0.2"], stdout=log, stderr=log)
        deadline = time.time() + 20
        while True:
            check(proc.poll() is None, "ogived exited at start")
            try:
                scrape(url)
                if subprocess.run([args.ogive, "--server", run.server, "--timeout", "1", "campaign", "list"],
                                  capture_output=True, timeout=CALL_TIMEOUT_S).returncode == 0:
                    break
            except (urllib.error.URLError, ConnectionError):
                pass
            check(time.time() < deadline, "ogived does not answer")
            time.sleep(0.1)
        run.calls.clear()  # the readiness probe's ListCampaigns calls are not what this test counts

        with open(os.path.join(tmp, "scored.txtpb"), "w") as f:
            f.write('name: "scored"\n'
                    'parameters { name: "x" real { low: 0 high: 1 } }\n'
                    'parameters { name: "y" real { low: 0 high: 1 } }\n'
                    'objective { direction: DIRECTION_LOWER_IS_BETTER }\npopulation_size: 4\nseed: 3\n')
        with open(os.path.join(tmp, "graded.txtpb"), "w") as f:
            f.write('name: "graded"\n'
                    'parameters { name: "heat" unit: "degC" real { low: 100 high: 200 } }\n'
                    'objective { grade_scale { labels: "cracked" labels: "fair" labels: "good" } }\n'
                    'population_size: 3\nseed: 4\n')
        run.ogive("campaign", "create", os.path.join(tmp, "scored.txtpb"), method="CreateCampaign")
        run.ogive("campaign", "create", os.path.join(tmp, "graded.txtpb"), method="CreateCampaign")

        # ---- Asks and tells ----
        told = {"score": 0, "grade": 0, "infeasible": 0, "void": 0}
        for i in range(9):  # two updates of the scored campaign (λ = 4; the void is not informative)
            n = run.ask("scored")
            if i == 4:
                run.tell("scored", n, "--infeasible")
                told["infeasible"] += 1
            elif i == 6:
                run.tell("scored", n, "--void")
                told["void"] += 1
            else:
                run.tell("scored", n, "--score", "%g" % (0.5 + i))
                told["score"] += 1
        run.tell("scored", n, "--score", "%g" % (0.5 + 8))  # the same report again: a duplicate
        for label in ("fair", "good", "cracked", "fair"):
            run.tell("graded", run.ask("graded"), "--grade", label)
            told["grade"] += 1
        run.ogive("ask", "no-such-campaign", "--json", method="GetCampaign", code="NOT_FOUND")  # the design first
        lapsing = run.ask("scored", lease=1)
        # The sweeper (every 0.2 s) lapses it a little after 1 s.
        deadline = time.time() + 10
        while True:
            run.calls[("GetCampaign", "OK")] = run.calls.get(("GetCampaign", "OK"), 0) + 1  # the design first
            trials = json.loads(run.ogive("campaign", "trials", "scored", "--state", "lapsed", "--json",
                                          method="ListTrials").stdout)
            if [int(t["trial"]) for t in trials] == [lapsing]:
                break
            check(time.time() < deadline, "trial %d did not lapse" % lapsing)
            time.sleep(0.2)
        # The lapse shows in the campaign as soon as the sweep applied it; the counter counts it once
        # the sweep's write committed, which can come a moment later on a loaded machine.
        while value(scrape(url)[1], "ogive_lapses", "_total") < 1:
            check(time.time() < deadline, "ogive_lapses_total did not count the lapse of trial %d" % lapsing)
            time.sleep(0.1)
        views = {name: json.loads(run.ogive("campaign", "show", name, "--json", method="GetCampaign").stdout)
                 for name in ("scored", "graded")}

        # ---- Scrape ----
        text, families = scrape(url)
        check_families(text, families, set(views))
        check_histograms(families)

        for (method, code), n in run.calls.items():
            got = value(families, "ogive_requests", "_total", method=method, code=code)
            check(got == n, "ogive_requests_total{method=%s,code=%s} = %s, made %d" % (method, code, got, n))
        for method in {m for m, _ in run.calls}:
            made = sum(n for (m, _), n in run.calls.items() if m == method)
            got = value(families, "ogive_request_duration_seconds", "_count", method=method)
            check(got == made, "ogive_request_duration_seconds_count{method=%s} = %s, made %d" % (method, got, made))
        for kind, n in told.items():
            got = value(families, "ogive_tells", "_total", kind=kind)
            check(got == n, "ogive_tells_total{kind=%s} = %s, told %d" % (kind, got, n))
        check(value(families, "ogive_lapses", "_total") == 1, "ogive_lapses_total != 1")
        check(value(families, "ogive_restarts", "_total") == 0, "ogive_restarts_total != 0")
        generations = sum(int(v["status"].get("generation", 0)) for v in views.values())
        check(generations >= 3, "expected at least 3 updates, the campaigns show %d" % generations)
        check(value(families, "ogive_generations", "_total") == generations,
              "ogive_generations_total = %s, the campaigns show %d" % (value(families, "ogive_generations", "_total"),
                                                                       generations))
        for name, view in views.items():
            status = view["status"]
            for state in ("leased", "reported", "lapsed", "voided"):
                got = value(families, "ogive_trials", campaign=name, state=state)
                check(got == int(status.get(state, 0)), "ogive_trials{campaign=%s,state=%s} = %s, show says %s"
                      % (name, state, got, status.get(state, 0)))
            check(value(families, "ogive_open_leases", campaign=name) == int(status.get("leased", 0)),
                  "ogive_open_leases{campaign=%s}" % name)
            check(value(families, "ogive_campaign_generation", campaign=name) == int(status.get("generation", 0)),
                  "ogive_campaign_generation{campaign=%s}" % name)
        check(value(families, "ogive_trials", campaign="scored", state="lapsed") == 1, "the lapse is not in ogive_trials")
        check(value(families, "ogive_trials", campaign="scored", state="voided") == 1, "the void is not in ogive_trials")
        check(value(families, "ogive_campaigns", phase="open") == 2, "ogive_campaigns{phase=open} != 2")
        transactions = value(families, "ogive_store_transactions", "_total")
        writes = value(families, "ogive_store_writes", "_total")
        check(transactions >= 1 and writes >= transactions, "store: %s writes in %s transactions" % (writes, transactions))
        check(value(families, "ogive_store_writes_per_transaction", "_count") == transactions,
              "writes_per_transaction count != transactions")
        check(value(families, "ogive_store_writes_per_transaction", "_sum") == writes,
              "writes_per_transaction sum != writes")
        check(value(families, "ogive_store_commit_duration_seconds", "_count") == transactions,
              "commit_duration count != transactions")
        check(value(families, "ogive_store_failed_writes", "_total") == 0, "failed writes")
        check(value(families, "ogive_store_size_bytes") >= 4096, "store size")
        start = value(families, "ogive_process_start_time_seconds")
        check(started - 1 <= start <= time.time(), "process start time %s, test started %s" % (start, started))

        # ---- Counters only grow; other paths are 404 ----
        run.tell("scored", run.ask("scored"), "--score", "0.25")
        _, again = scrape(url)
        check(value(again, "ogive_tells", "_total", kind="score") == told["score"] + 1, "the next tell is not counted")
        for name, family in families.items():
            if family.type != "counter":
                continue
            for s in family.samples:
                later = [t.value for t in again[name].samples if t.name == s.name and t.labels == s.labels]
                check(later and later[0] >= s.value, "%s%r went down" % (s.name, s.labels))
        try:
            urllib.request.urlopen(url[:-len("/metrics")] + "/other", timeout=10)
            raise TestFailure("GET /other did not fail")
        except urllib.error.HTTPError as e:
            check(e.code == 404, "GET /other: %d" % e.code)

        # ---- SIGTERM ----
        proc.send_signal(signal.SIGTERM)
        try:
            rc = proc.wait(timeout=20)
        except subprocess.TimeoutExpired:
            raise TestFailure("ogived did not stop within 20 s of SIGTERM")
        proc = None
        check(rc == 0, "ogived exited with %d after SIGTERM" % rc)
        print("metrics_scrape_test: OK (%d families, %d transactions, %d writes)"
              % (len(families), transactions, writes))
        return 0
    except TestFailure as e:
        print("FAIL: %s" % e, file=sys.stderr)
        log.flush()
        with open(os.path.join(tmp, "ogived.log")) as f:
            sys.stderr.write("---- ogived.log (tail)\n" + "".join(f.readlines()[-30:]))
        return 1
    finally:
        if proc is not None and proc.poll() is None:
            proc.kill()
            proc.wait(timeout=10)
        log.close()
        shutil.rmtree(tmp, ignore_errors=True)


if __name__ == "__main__":
    sys.exit(main())
