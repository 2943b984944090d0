#!/usr/bin/python3
"""Today's ogived opens a database written by the last release before the rename, and serves it as that
release did.

    /usr/bin/python3 migration_test.py --ogived PATH/TO/ogived --proto-dir REPO/proto

schema3/schema3.db was made by the binaries of an earlier commit (make_schema3_fixture.py says which
and how), and schema3/expected/ holds what that ogived served from it. This test copies the file,
starts today's ogived on the copy (which migrates it to the current schema version), and checks with
Debian's grpcio:

- the campaign list, each campaign's view, every trial (paged) and every generation equal what the
  old server served, message for message; only the fields that depend on the reading's own clock
  (as_of_unix_ms, and the last hour's worker activity) are left out of the comparison;
- the next Ask of each open campaign (count 2, the same request id) hands out the same trial numbers,
  generations and candidates, value for value;
- the four stored tokens keep their roles and scopes: the worker token limited to two campaigns
  reads those and is refused another, the reader may not ask, the revoked token is refused;
- the file is at the current schema version, passes integrity_check, and has no table, column or
  index left under the old names.

Field numbers did not change with the rename, so today's messages parse the old bytes; the stubs
come from Debian's protoc with grpc_python_plugin (grpc_tools.protoc cannot read proto3 optional).
"""

import argparse
import os
import shutil
import signal
import sqlite3
import subprocess
import sys
import tempfile

sys.path.insert(0, os.path.join(os.path.dirname(os.path.abspath(__file__)), "..", "support"))
from ogive_testlib import TestFailure, check, free_port  # noqa: E402

T = 10
HERE = os.path.dirname(os.path.abspath(__file__))
FIXTURE = os.path.join(HERE, "schema3")
NAMES = ["kiln-glaze", "solver-farm", "flag-screen", "anneal-done"]
OPEN_NAMES = ["kiln-glaze", "solver-farm"]


def generate_stubs(proto_dir, out):
    os.makedirs(out)
    protos = [os.path.join(proto_dir, "ogive", "v1", n) for n in ("campaign.proto", "service.proto")]
    result = subprocess.run(["/usr/bin/protoc", "-I", proto_dir, "--python_out", out, "--grpc_python_out", out,
                             "--plugin=protoc-gen-grpc_python=/usr/bin/grpc_python_plugin"] + protos,
                            capture_output=True, text=True, timeout=60)
    check(result.returncode == 0, "protoc failed: %s" % result.stderr.strip())
    sys.path.insert(0, out)
    from ogive.v1 import campaign_pb2, service_pb2, service_pb2_grpc  # noqa: generated at run time
    return campaign_pb2, service_pb2, service_pb2_grpc


def bearer(grpc, token):
    metadata = (("authorization", "Bearer " + token),)

    class Bearer(grpc.UnaryUnaryClientInterceptor):
        def intercept_unary_unary(self, continuation, details, request):
            return continuation(details._replace(metadata=tuple(details.metadata or ()) + metadata), request)
    return Bearer()


def expected(message_type, name):
    with open(os.path.join(FIXTURE, "expected", name + ".pb"), "rb") as f:
        message = message_type()
        message.ParseFromString(f.read())
    return message


def without_clock(view):
    """A copy of a CampaignView without the fields that depend on when it was read."""
    copy = type(view)()
    copy.CopyFrom(view)
    copy.status.ClearField("as_of_unix_ms")
    copy.status.ClearField("workers")
    copy.status.ClearField("reports_last_hour")
    return copy


def same(actual, wanted, what):
    if actual != wanted:
        raise TestFailure("%s differs after the migration:\n--- served before\n%s\n--- served now\n%s" % (
            what, wanted, actual))


def all_pages(method, request, into, field):
    """Every row of a paged listing: `method` called with `request` until next_page_token is empty, the
    rows of `field` gathered into the response `into`."""
    while True:
        page = method(request, timeout=T)
        getattr(into, field).extend(getattr(page, field))
        if not page.next_page_token:
            return into
        request.page_token = page.next_page_token


def code_of(grpc, call):
    try:
        call()
    except grpc.RpcError as error:
        return error.code()
    return grpc.StatusCode.OK


def run(args, tmp):
    import grpc
    campaign_pb2, service_pb2, service_pb2_grpc = generate_stubs(args.proto_dir, os.path.join(tmp, "gen"))
    db = os.path.join(tmp, "migrated.db")
    shutil.copyfile(os.path.join(FIXTURE, "schema3.db"), db)
    tokens = dict(line.strip().split("=", 1) for line in open(os.path.join(FIXTURE, "tokens.txt")) if line.strip())
    target = "127.0.0.1:%d" % free_port()
    log_path = os.path.join(tmp, "ogived.log")
    log = open(log_path, "w")
    server = subprocess.Popen([args.ogived, "--db", db, "--listen", target], stdout=log, stderr=subprocess.STDOUT)
    try:
        channel = grpc.insecure_channel(target)
        try:
            grpc.channel_ready_future(channel).result(timeout=15)
        except grpc.FutureTimeoutError:
            raise TestFailure("ogived does not answer on %s; its log:\n%s" % (target, open(log_path).read()))

        def stub(label):
            return service_pb2_grpc.OgiveStub(grpc.intercept_channel(channel, bearer(grpc, tokens[label])))
        admin = stub("fixture-admin")

        # The list, page by page (the old server had no pages: one response held every campaign).
        listed = all_pages(admin.ListCampaigns, service_pb2.ListCampaignsRequest(page_size=3),
                           service_pb2.ListCampaignsResponse(), "campaigns")
        old_list = expected(service_pb2.ListCampaignsResponse, "list")
        check(len(old_list.campaigns) == len(NAMES), "the fixture lists %d campaigns" % len(old_list.campaigns))
        same([without_clock(v) for v in listed.campaigns], [without_clock(v) for v in old_list.campaigns],
             "the campaign list")

        for name in NAMES:
            view = admin.GetCampaign(service_pb2.GetCampaignRequest(campaign=name), timeout=T)
            same(without_clock(view), without_clock(expected(service_pb2.CampaignView, "get-" + name)),
                 "GetCampaign(%s)" % name)
            trials = all_pages(admin.ListTrials, service_pb2.ListTrialsRequest(campaign=name, page_size=5),
                               service_pb2.ListTrialsResponse(), "trials")
            old_trials = expected(service_pb2.ListTrialsResponse, "trials-" + name)
            check(len(old_trials.trials) > 10, "the fixture's %s has only %d trials" % (name, len(old_trials.trials)))
            same(trials, old_trials, "the trials of %s" % name)
            generations = all_pages(admin.ListGenerations, service_pb2.ListGenerationsRequest(campaign=name),
                                    service_pb2.ListGenerationsResponse(), "generations")
            same(generations, expected(service_pb2.ListGenerationsResponse, "generations-" + name),
                 "the generations of %s" % name)

        # Every kind of state the fixture holds survived: outcomes of each kind, lapses, late reports.
        kinds = set()
        states = set()
        late = 0
        for name in NAMES:
            for t in expected(service_pb2.ListTrialsResponse, "trials-" + name).trials:
                states.add(t.state)
                late += t.late
                if t.HasField("outcome"):
                    kinds.add(t.outcome.WhichOneof("kind"))
        check(kinds == {"score", "grade", "infeasible", "void"}, "the fixture's outcome kinds: %s" % kinds)
        check(campaign_pb2.TRIAL_STATE_LAPSED in states and late >= 1, "the fixture has no lapse or no late report")

        for name in OPEN_NAMES:
            asked = admin.Ask(service_pb2.AskRequest(campaign=name, count=2, worker="fixture-probe",
                                                     request_id="fixture-next"), timeout=T)
            old = expected(service_pb2.AskResponse, "next-" + name)
            check(len(asked.trials) == len(old.trials) == 2, "%s: asked for 2 trials, got %d (before: %d)" % (
                name, len(asked.trials), len(old.trials)))
            for now, before in zip(asked.trials, old.trials):
                same((now.number, now.generation, now.state, now.worker), (before.number, before.generation,
                                                                           before.state, before.worker),
                     "%s: the next trial" % name)
                same(now.candidate, before.candidate, "%s: the candidate of trial %d" % (name, now.number))

        # Tokens: roles and scopes as stored.
        worker = stub("fixture-worker")
        check(code_of(grpc, lambda: worker.GetCampaign(service_pb2.GetCampaignRequest(campaign="kiln-glaze"),
                                                       timeout=T)) == grpc.StatusCode.OK,
              "the scoped worker token cannot read kiln-glaze")
        check(code_of(grpc, lambda: worker.GetCampaign(service_pb2.GetCampaignRequest(campaign="flag-screen"),
                                                       timeout=T)) == grpc.StatusCode.PERMISSION_DENIED,
              "the worker token limited to two campaigns reads a third")
        reader = stub("fixture-reader")
        check(code_of(grpc, lambda: reader.Ask(service_pb2.AskRequest(campaign="kiln-glaze", count=1, worker="r"),
                                               timeout=T)) == grpc.StatusCode.PERMISSION_DENIED,
              "the reader token may ask")
        revoked = stub("fixture-revoked")
        check(code_of(grpc, lambda: revoked.GetCampaign(service_pb2.GetCampaignRequest(campaign="kiln-glaze"),
                                                        timeout=T)) == grpc.StatusCode.UNAUTHENTICATED,
              "the revoked token is accepted")
    finally:
        server.send_signal(signal.SIGTERM)
        try:
            code = server.wait(timeout=20)
        except subprocess.TimeoutExpired:
            server.kill()
            raise TestFailure("ogived did not stop within 20 s of SIGTERM")
        log.close()
    check(code == 0, "ogived exited %d; its log:\n%s" % (code, open(log_path).read()))

    connection = sqlite3.connect(db)
    try:
        version = connection.execute("PRAGMA user_version").fetchone()[0]
        check(version >= 4, "the migrated file is at schema version %d" % version)
        check(connection.execute("PRAGMA integrity_check").fetchone()[0] == "ok", "integrity_check fails")
        old_names = connection.execute(
            "SELECT name FROM sqlite_master WHERE name LIKE '%stud%' OR sql LIKE '%stud%'").fetchall()
        check(not old_names, "old names left in the schema: %s" % old_names)
        rows = connection.execute("SELECT count(*) FROM trials").fetchone()[0]
        check(rows == 97 + 4, "the migrated file holds %d trials (97 stored, 4 asked now)" % rows)
    finally:
        connection.close()


def main():
    parser = argparse.ArgumentParser()
    parser.add_argument("--ogived", required=True)
    parser.add_argument("--proto-dir", required=True)
    args = parser.parse_args()
    tmp = tempfile.mkdtemp(prefix="ogive-migration-")
    try:
        run(args, tmp)
    except TestFailure as failure:
        print("FAILED:", failure)
        sys.exit(1)
    finally:
        shutil.rmtree(tmp, ignore_errors=True)
    print("migration_test: passed")


if __name__ == "__main__":
    main()
