"""A real ogived on a temporary database and a free loopback port, and a short campaign run through the
`ogive` command line, for the report and export tests.

The campaign has every parameter kind and user text that markup, CSV and JSON would take for their own
(a unit with tags, a description with a script element, an option with '&', worker names and notes
with quotes, commas, '<' and a line break). Its history has every trial state that can remain: a
trial leased for one second that lapses, one reported after its lease lapsed (late), voids (the
objective crashes on every eleventh trial), infeasible outcomes, and outcomes from 4 workers running
at once, so consumed outcomes come with staleness. Everything is invented for the tests.

Processes are bounded in time and stopped by the fixture; nothing listens beyond 127.0.0.1.
"""

import json
import os
import signal
import sys
import subprocess
import tempfile
import time

sys.path.insert(0, os.path.join(os.path.dirname(os.path.abspath(__file__)), "..", "support"))
from ogive_testlib import TestFailure, check, free_port  # noqa: E402

CALL_TIMEOUT_S = 60
CAMPAIGN = "kiln-mix"
GRADED = "glaze-grade"

MIXED_DESIGN = r'''
name: "kiln-mix"
parameters {
  name: "x"
  unit: "<b>mm</b>"
  description: "Offset <script>alert('x')</script> & \"more\""
  real { low: -5 high: 5 }
}
parameters { name: "rate" unit: "1/s" description: "Ramp rate" real { low: 1e-4 high: 1 log: true } }
parameters { name: "layers" unit: "coats" integer { low: 1 high: 8 } }
parameters { name: "solver" categorical { options: "cg" options: "gmres & co" options: "<bicg>" } }
parameters { name: "warm" description: "Warm start, a flag" flag {} }
objective { direction: DIRECTION_LOWER_IS_BETTER }
expected_workers: 4
seed: 424242
lease_seconds: 60
trial_budget: 96
'''

GRADED_DESIGN = r'''
name: "glaze-grade"
parameters { name: "temp" unit: "degC" real { low: 1000 high: 1300 } }
parameters { name: "reduce" flag {} }
objective { grade_scale { labels: "cracked" labels: "poor" labels: "fair" labels: "good" } }
seed: 7
lease_seconds: 60
trial_budget: 80
'''

# An invented bowl over every parameter; trials far to the right are infeasible and every eleventh
# trial fails (the worker loop reports it void with a note).
MIXED_OBJECTIVE = r'''#!/bin/sh
if [ $((OGIVE_TRIAL % 11)) -eq 0 ]; then echo "simulated crash" >&2; exit 3; fi
exec awk -v x="$OGIVE_X" -v rate="$OGIVE_RATE" -v layers="$OGIVE_LAYERS" -v solver="$OGIVE_SOLVER" \
  -v warm="$OGIVE_WARM" 'BEGIN {
  if (x > 4) { print "infeasible"; exit }
  s = (x - 1) ^ 2 + (log(rate) / log(10) + 2) ^ 2 + (layers - 3) ^ 2
  s += (solver == "gmres & co") ? 0 : 1
  s += (warm == 1) ? 0 : 0.5
  printf "%.6f\n", s
}'
'''

# Grades from an invented rule: the nearer 1180 degC, the better; reduction helps.
GRADED_OBJECTIVE = r'''#!/bin/sh
exec awk -v t="$OGIVE_TEMP" -v r="$OGIVE_REDUCE" 'BEGIN {
  d = (t - 1180) / 40; if (d < 0) d = -d; if (r == 1) d -= 0.5
  if (d < 0.5) print "good"; else if (d < 1.5) print "FAIR"; else if (d < 3) print "poor"; else print "cracked"
}'
'''


class Ogived:
    """ogived on a temporary database; `with Ogived(...) as server:` stops it with SIGTERM."""

    def __init__(self, ogived, ogive, workdir):
        self.ogived, self.ogive_path, self.workdir = ogived, ogive, workdir
        self.target = "127.0.0.1:%d" % free_port()
        self.process = None

    def __enter__(self):
        self.log = open(os.path.join(self.workdir, "ogived.log"), "w")
        self.process = subprocess.Popen(
            [self.ogived, "--db", os.path.join(self.workdir, "test.db"), "--listen", self.target, "--no-auth",
             "--sweep-interval", "0.2"], stdout=self.log, stderr=self.log)
        deadline = time.monotonic() + 20
        while time.monotonic() < deadline:
            if self.process.poll() is not None:
                raise TestFailure("ogived exited at start with status %d; see %s" % (
                    self.process.returncode, self.log.name))
            if self.run("campaign", "list", check_status=False).returncode == 0:
                return self
            time.sleep(0.1)
        raise TestFailure("ogived did not answer within 20 s")

    def __exit__(self, *unused):
        if self.process is not None and self.process.poll() is None:
            self.process.send_signal(signal.SIGTERM)
            try:
                self.process.wait(timeout=15)
            except subprocess.TimeoutExpired:
                self.process.kill()
                self.process.wait()
        self.log.close()

    def run(self, *args, check_status=True, timeout=CALL_TIMEOUT_S):
        """Runs `ogive --server TARGET ARGS...`; returns the CompletedProcess (bytes kept exact)."""
        command = [self.ogive_path, "--server", self.target] + list(args)
        result = subprocess.run(command, capture_output=True, timeout=timeout)
        if check_status and result.returncode != 0:
            raise TestFailure("%s exited %d: %s" % (" ".join(args[:3]), result.returncode,
                                                    result.stderr.decode(errors="replace").strip()))
        return result

    def trials(self, campaign):
        """Every trial through ListTrials itself, from a Python gRPC client (Debian's grpcio, stubs made
        from our protos by Debian's protoc), as protobuf's JSON mapping (lowerCamelCase names, enums by
        name, int64 as strings): a source independent of the `ogive` command whose output is checked."""
        import grpc
        from google.protobuf import json_format
        service_pb2, service_pb2_grpc = grpc_stubs(self.workdir)
        stub = service_pb2_grpc.OgiveStub(grpc.insecure_channel(self.target))
        out, token = [], ""
        while True:
            page = stub.ListTrials(service_pb2.ListTrialsRequest(campaign=campaign, page_size=1000, page_token=token),
                                   timeout=CALL_TIMEOUT_S)
            out += [json_format.MessageToDict(t, including_default_value_fields=True) for t in page.trials]
            token = page.next_page_token
            if not token:
                return out


_STUBS = {}


def grpc_stubs(workdir):
    """service_pb2 and service_pb2_grpc, generated once per process from proto/ into `workdir`."""
    if "service" not in _STUBS:
        proto_dir = os.path.join(os.path.dirname(os.path.abspath(__file__)), "..", "..", "proto")
        out = os.path.join(workdir, "gen")
        os.makedirs(out, exist_ok=True)
        protos = [os.path.join(proto_dir, "ogive", "v1", n) for n in ("campaign.proto", "service.proto")]
        result = subprocess.run(["/usr/bin/protoc", "-I", proto_dir, "--python_out", out, "--grpc_python_out", out,
                                 "--plugin=protoc-gen-grpc_python=/usr/bin/grpc_python_plugin"] + protos,
                                capture_output=True, text=True, timeout=60)
        check(result.returncode == 0, "protoc failed (packages protobuf-compiler, protobuf-compiler-grpc): %s" %
              result.stderr.strip())
        sys.path.insert(0, out)
        from ogive.v1 import service_pb2, service_pb2_grpc  # noqa: generated at run time
        _STUBS["service"] = (service_pb2, service_pb2_grpc)
    return _STUBS["service"]


def write(path, text, mode=0o644):
    with open(path, "w") as f:
        f.write(text)
    os.chmod(path, mode)
    return path


def run_mixed_campaign(server, workdir):
    """Creates and runs the mixed campaign to its budget; returns the odd note of the late report."""
    server.run("campaign", "create", write(os.path.join(workdir, "mixed.txtpb"), MIXED_DESIGN))
    # Two trials leased for a second by a bench worker: both lapse; one is reported late.
    server.run("ask", CAMPAIGN, "-n", "2", "--lease", "1", "--worker", 'bench <&> "1"')
    deadline = time.monotonic() + 15
    while len([t for t in server.trials(CAMPAIGN) if t["state"] == "TRIAL_STATE_LAPSED"]) < 2:
        check(time.monotonic() < deadline, "the 1 s leases did not lapse within 15 s")
        time.sleep(0.2)
    note = 'measured by hand, "twice"; 3 < 4 & 5 > 4,\nsee <script>alert(1)</script>'
    told = server.run("tell", CAMPAIGN, "1", "--score", "-1", "--note", note, "--worker", 'bench <&> "1"')
    check(b"stored (late)" in told.stdout, "the report after the lapse was not late: %r" % told.stdout)
    objective = write(os.path.join(workdir, "objective.sh"), MIXED_OBJECTIVE, 0o755)
    worker = server.run("work", CAMPAIGN, "--parallel", "4", "--worker", "node, \"a\"", "--", objective,
                        timeout=240)
    check(worker.returncode == 0, "ogive work failed")
    view = json.loads(server.run("--json", "campaign", "show", CAMPAIGN).stdout)
    check(view["status"]["phase"] == "CAMPAIGN_PHASE_DONE", "the campaign did not finish: %s" % view["status"])
    return note


def run_graded_campaign(server, workdir):
    server.run("campaign", "create", write(os.path.join(workdir, "graded.txtpb"), GRADED_DESIGN))
    objective = write(os.path.join(workdir, "grade.sh"), GRADED_OBJECTIVE, 0o755)
    server.run("work", GRADED, "--parallel", "2", "--worker", "glazer", "--", objective, timeout=240)


def temporary_directory():
    return tempfile.TemporaryDirectory(prefix="ogive-report-test-")
