#!/usr/bin/python3
"""A Python client of ogived, built at test time from our .proto files.

    /usr/bin/python3 interop_test.py --ogived PATH/TO/ogived --proto-dir REPO/proto

Generates the Python messages and stubs of ogive/v1/*.proto into a temporary directory, makes an
admin token with `ogived token create`, starts ogived on a temporary database and a free loopback
port, and with Debian's grpcio: checks the standard health service (without a token), that a call
without a token is refused with UNAUTHENTICATED, creates a campaign, asks, tells (a score and a void),
reads the status (GetCampaign) and the trial list (ListTrials, with the token's label as reported_by),
checks that a NaN score is refused naming the report, watches the campaign, and stops ogived with
SIGTERM while the Watch stream is open: it must exit 0 within a few seconds. Every call but the
health check carries `authorization: Bearer <token>`, added by a client interceptor.

The stubs come from protoc (Debian package protobuf-compiler) with grpc_python_plugin
(protobuf-compiler-grpc). grpc_tools.protoc from Debian's python3-grpc-tools is not used: it
bundles libprotoc 3.5.1, which refuses the proto3 `optional` fields of campaign.proto. A missing
package fails the test with the name of the package to install; nothing is skipped.
"""

import argparse
import importlib
import math
import os
import shutil
import signal
import subprocess
import sys
import tempfile
import time

sys.path.insert(0, os.path.join(os.path.dirname(os.path.abspath(__file__)), "..", "support"))
from ogive_testlib import TestFailure, check, free_port  # noqa: E402

CALL_TIMEOUT_S = 10


def require_packages(protoc, plugin):
    """Fails, naming the Debian package to install, when a tool or module is missing."""
    missing = []
    for module, package in (("grpc", "python3-grpcio"), ("google.protobuf", "python3-protobuf")):
        try:
            importlib.import_module(module)
        except ImportError:
            missing.append("%s (Python module '%s' for %s)" % (package, module, sys.executable))
    if not os.access(protoc, os.X_OK):
        missing.append("protobuf-compiler (%s)" % protoc)
    if not os.access(plugin, os.X_OK):
        missing.append("protobuf-compiler-grpc (%s)" % plugin)
    if missing:
        raise TestFailure("missing: %s; install with: apt-get install -y %s" % (
            ", ".join(missing), " ".join(m.split()[0] for m in missing)))


def generate_stubs(proto_dir, out_dir, protoc, plugin):
    protos = [os.path.join(proto_dir, "ogive", "v1", name)
              for name in ("campaign.proto", "service.proto")]
    command = [protoc, "-I", proto_dir, "--python_out", out_dir, "--grpc_python_out", out_dir,
               "--plugin=protoc-gen-grpc_python=%s" % plugin] + protos
    os.makedirs(out_dir)
    result = subprocess.run(command, capture_output=True, text=True, timeout=60)
    check(result.returncode == 0, "protoc failed: %s" % result.stderr.strip())
    sys.path.insert(0, out_dir)
    from ogive.v1 import service_pb2, service_pb2_grpc, campaign_pb2  # noqa: generated at run time
    return service_pb2, service_pb2_grpc, campaign_pb2


def bearer_interceptor(grpc, token):
    """A client interceptor that adds `authorization: Bearer <token>` to every call."""
    metadata = (("authorization", "Bearer " + token),)

    class Bearer(grpc.UnaryUnaryClientInterceptor, grpc.UnaryStreamClientInterceptor):
        def _details(self, details):
            return details._replace(metadata=tuple(details.metadata or ()) + metadata)

        def intercept_unary_unary(self, continuation, details, request):
            return continuation(self._details(details), request)

        def intercept_unary_stream(self, continuation, details, request):
            return continuation(self._details(details), request)

    return Bearer()


def make_token(ogived, db, label):
    """`ogived token create` on the database file before the server starts; returns the token."""
    result = subprocess.run([ogived, "token", "create", "--db", db, "--role", "admin", "--label", label],
                            capture_output=True, text=True, timeout=30)
    check(result.returncode == 0, "ogived token create failed: %s" % result.stderr.strip())
    token = result.stdout.strip()
    check(token.startswith("ogt_") and "\n" not in token, "token create printed %r" % result.stdout)
    return token


def health_status(channel):
    """grpc.health.v1 Check of the whole server: 1 = SERVING, 2 = NOT_SERVING.

    The messages are encoded by hand (Debian ships no Python health module): the request
    {service: ""} is empty; the response is field 1, a varint.
    """
    response = channel.unary_unary("/grpc.health.v1.Health/Check")(b"", timeout=CALL_TIMEOUT_S)
    if response == b"":
        return 0  # UNKNOWN: a zero enum is left off the wire
    check(response[0] == 0x08, "unexpected HealthCheckResponse %r" % response)
    return response[1]


def numbers(trials):
    return [t.number for t in trials]


def run(args, tmp):
    require_packages(args.protoc, args.grpc_python_plugin)
    import grpc
    service_pb2, service_pb2_grpc, campaign_pb2 = generate_stubs(
        args.proto_dir, os.path.join(tmp, "gen"), args.protoc, args.grpc_python_plugin)
    timeout = CALL_TIMEOUT_S

    target = "127.0.0.1:%d" % free_port()
    db = os.path.join(tmp, "interop.db")
    token = make_token(args.ogived, db, "interop")
    log = open(os.path.join(tmp, "ogived.log"), "w")
    server = subprocess.Popen(
        [args.ogived, "--db", db, "--listen", target,
         "--sweep-interval", "0.2"],
        stdout=log, stderr=subprocess.STDOUT)
    try:
        channel = grpc.insecure_channel(target)
        try:
            grpc.channel_ready_future(channel).result(timeout=10)
        except grpc.FutureTimeoutError:
            raise TestFailure("ogived does not answer on %s" % target)
        for _ in range(50):  # the health status is set right after the server starts
            if health_status(channel) == 1:
                break
            time.sleep(0.1)
        check(health_status(channel) == 1, "health service does not answer SERVING")
        try:
            service_pb2_grpc.OgiveStub(channel).ListCampaigns(service_pb2.ListCampaignsRequest(),
                                                            timeout=timeout)
            raise TestFailure("a call without a token was accepted")
        except grpc.RpcError as e:
            check(e.code() == grpc.StatusCode.UNAUTHENTICATED, "no token: %s" % e.code())
            check("Bearer" in e.details(), "no token message: %s" % e.details())
        stub = service_pb2_grpc.OgiveStub(
            grpc.intercept_channel(channel, bearer_interceptor(grpc, token)))

        # CreateCampaign: every parameter kind.
        design = campaign_pb2.CampaignDesign(name="interop", seed=5, population_size=4,
                                       lease_seconds=60)
        design.parameters.add(name="temp", unit="degC", real=campaign_pb2.RealRange(low=20, high=80))
        design.parameters.add(name="rate", real=campaign_pb2.RealRange(low=1e-3, high=1, log=True))
        design.parameters.add(name="passes", integer=campaign_pb2.IntegerRange(low=1, high=4))
        design.parameters.add(name="gas", categorical=campaign_pb2.Categorical(options=["ar", "n2"]))
        design.parameters.add(name="vacuum", flag=campaign_pb2.Flag())
        design.objective.direction = campaign_pb2.DIRECTION_LOWER_IS_BETTER
        view = stub.CreateCampaign(
            service_pb2.CreateCampaignRequest(design=design, request_id="py-create"), timeout=timeout)
        check(view.name == "interop", "CreateCampaign returned %r" % view.name)
        check(view.status.phase == campaign_pb2.CAMPAIGN_PHASE_OPEN, "phase %d" % view.status.phase)
        check(view.status.population_size == 4, "population %d" % view.status.population_size)
        check(len(view.design.parameters) == 5, "design not returned")

        # Ask: three trials inside the bounds; a retry with the same request id, the same trials.
        ask = service_pb2.AskRequest(campaign="interop", count=3, worker="py", request_id="py-ask")
        asked = stub.Ask(ask, timeout=timeout)
        check(numbers(asked.trials) == [1, 2, 3], "trial numbers %s" % numbers(asked.trials))
        for t in asked.trials:
            v = t.candidate.values
            check(set(v) == {"temp", "rate", "passes", "gas", "vacuum"},
                  "candidate %s" % t.candidate)
            check(20 <= v["temp"].real <= 80, "temp %r" % v["temp"].real)
            check(1e-3 <= v["rate"].real <= 1, "rate %r" % v["rate"].real)
            check(1 <= v["passes"].integer <= 4, "passes %r" % v["passes"].integer)
            check(v["gas"].categorical in ("ar", "n2"), "gas %r" % v["gas"].categorical)
            check(v["vacuum"].WhichOneof("kind") == "flag", "vacuum %s" % v["vacuum"])
            check(t.state == campaign_pb2.TRIAL_STATE_LEASED and t.worker == "py", "trial %s" % t)
        retried = stub.Ask(ask, timeout=timeout)
        check(numbers(retried.trials) == [1, 2, 3], "a retried Ask gave other trials")

        # Tell: a score and a void.
        reports = [
            service_pb2.Report(trial=1, outcome=campaign_pb2.Outcome(score=4.5, note="from python")),
            service_pb2.Report(trial=2,
                               outcome=campaign_pb2.Outcome(void=campaign_pb2.Void(), note="no run")),
        ]
        told = stub.Tell(service_pb2.TellRequest(campaign="interop", reports=reports, worker="py"),
                         timeout=timeout)
        check([(r.trial, r.code) for r in told.results] == [(1, 0), (2, 0)],
              "tell results %s" % told)
        check(told.generation == 0 and told.phase == campaign_pb2.CAMPAIGN_PHASE_OPEN,
              "tell response %s" % told)

        # A NaN score is refused, naming the report; nothing is stored.
        nan_report = service_pb2.Report(trial=3, outcome=campaign_pb2.Outcome(score=math.nan))
        try:
            stub.Tell(service_pb2.TellRequest(campaign="interop", reports=[nan_report], worker="py"),
                      timeout=timeout)
            raise TestFailure("a NaN score was accepted")
        except grpc.RpcError as e:
            check(e.code() == grpc.StatusCode.INVALID_ARGUMENT, "NaN score: %s" % e.code())
            check("reports[0]" in e.details(), "NaN score message: %s" % e.details())

        # GetCampaign: the status counts.
        status = stub.GetCampaign(service_pb2.GetCampaignRequest(campaign="interop"),
                               timeout=timeout).status
        counts = (status.leased, status.reported, status.voided, status.lapsed, status.pending,
                  status.generation)
        check(counts == (1, 1, 1, 0, 1, 0),
              "status (leased, reported, voided, lapsed, pending, generation) = %s" % (counts,))
        check(status.best.number == 1 and status.best.outcome.score == 4.5,
              "best %s" % status.best)

        # ListTrials: states, outcomes, notes, two pages.
        page = stub.ListTrials(service_pb2.ListTrialsRequest(campaign="interop", page_size=2),
                               timeout=timeout)
        check(numbers(page.trials) == [1, 2] and page.next_page_token, "first page %s" % page)
        rest = stub.ListTrials(
            service_pb2.ListTrialsRequest(campaign="interop", page_size=2,
                                          page_token=page.next_page_token),
            timeout=timeout)
        check(numbers(rest.trials) == [3] and not rest.next_page_token, "second page %s" % rest)
        t1, t2, t3 = list(page.trials) + list(rest.trials)
        check(t1.state == campaign_pb2.TRIAL_STATE_REPORTED and t1.outcome.score == 4.5
              and t1.outcome.note == "from python"
              and t1.use == campaign_pb2.OUTCOME_USE_PENDING
              and t1.reported_by == "interop", "trial 1 %s" % t1)
        check(t2.state == campaign_pb2.TRIAL_STATE_VOIDED and t2.outcome.WhichOneof("kind") == "void"
              and t2.outcome.note == "no run", "trial 2 %s" % t2)
        check(t3.state == campaign_pb2.TRIAL_STATE_LEASED and not t3.HasField("outcome"),
              "trial 3 %s" % t3)

        # Watch: the current view first, then one after a report.
        watch = stub.Watch(service_pb2.WatchRequest(campaign="interop"), timeout=30)
        first = next(watch)
        check(first.name == "interop" and first.status.reported == 1, "first view %s" % first)
        stub.Tell(service_pb2.TellRequest(campaign="interop", worker="py", reports=[
            service_pb2.Report(trial=3, outcome=campaign_pb2.Outcome(score=3.5))]), timeout=timeout)
        second = next(watch)
        check(second.status.reported == 2, "view after a report %s" % second.status)

        # SIGTERM with the stream open: the server ends it, drains and exits 0, promptly.
        stopped_at = time.monotonic()
        server.send_signal(signal.SIGTERM)
        try:
            code = server.wait(timeout=15)
        except subprocess.TimeoutExpired:
            raise TestFailure("ogived did not exit within 15 s of SIGTERM")
        check(code == 0, "ogived exited with status %d after SIGTERM" % code)
        elapsed = time.monotonic() - stopped_at
        check(elapsed < 5, "ogived took %.1f s to stop with a Watch open" % elapsed)
        try:
            for _ in watch:
                pass
        except grpc.RpcError as e:  # the stream may end with UNAVAILABLE as the server goes
            check(e.code() in (grpc.StatusCode.UNAVAILABLE, grpc.StatusCode.CANCELLED),
                  "Watch ended with %s" % e.code())
        channel.close()
    finally:
        if server.poll() is None:
            server.kill()
            server.wait()
        log.close()


def main():
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--ogived", required=True, help="the ogived binary")
    parser.add_argument("--proto-dir", required=True, help="the directory holding ogive/v1/*.proto")
    parser.add_argument("--protoc", default="/usr/bin/protoc")
    parser.add_argument("--grpc-python-plugin", default="/usr/bin/grpc_python_plugin")
    args = parser.parse_args()
    tmp = tempfile.mkdtemp(prefix="ogive-interop-")
    try:
        run(args, tmp)
    except TestFailure as e:
        print("FAIL: %s" % e, file=sys.stderr)
        log = os.path.join(tmp, "ogived.log")
        if os.path.exists(log):
            print("---- ogived.log (last lines)", file=sys.stderr)
            with open(log) as f:
                sys.stderr.writelines(f.readlines()[-20:])
        return 1
    finally:
        shutil.rmtree(tmp, ignore_errors=True)
    print("PASS")
    return 0


if __name__ == "__main__":
    sys.exit(main())
