#!/usr/bin/python3
"""Writes the schema-3 fixture that tests/migration/migration_test.py opens with today's ogived.

    /usr/bin/python3 make_schema3_fixture.py --ogived OLD/ogived --proto-dir OLD/proto --out DIR

This script is part of the fixture: it drives the binaries and protos of the last build before the
resource was renamed (commit ff81d1b, storage schema version 3, whose resource noun was "study"),
and is kept only to show how the fixture was made. It cannot run against today's binaries.

It writes into DIR:
  schema3.db        a database made through the old service: four studies covering every parameter
                    kind (real, log-real, integer, categorical, flag), both directions and a grade
                    scale, every outcome kind (score, grade, infeasible, void, notes), lapsed and
                    late trials, duplicate reports, ask request ids, a paused study, a study done on
                    its target, and four tokens (admin, a worker scoped to two studies, a reader, a
                    revoked one);
  tokens.txt        the four tokens, one per line as label=token (test tokens of this fixture only);
  expected/*.pb     what the old ogived served from a copy of schema3.db: ListStudies, each
                    GetStudy, every trial and generation of each study (serialized responses), and
                    then the next Ask of each open study (count 2, request id "fixture-next"), as
                    serialized protobuf messages. Field numbers did not change with the rename, so
                    today's messages parse these bytes.
"""

import argparse
import os
import shutil
import signal
import subprocess
import sys
import tempfile
import time

sys.path.insert(0, os.path.join(os.path.dirname(os.path.abspath(__file__)), "..", "support"))
from ogive_testlib import check, free_port  # noqa: E402

T = 10


def stubs(proto_dir, out):
    os.makedirs(out)
    protos = [os.path.join(proto_dir, "ogive", "v1", n) for n in ("study.proto", "service.proto")]
    subprocess.run(["/usr/bin/protoc", "-I", proto_dir, "--python_out", out, "--grpc_python_out", out,
                    "--plugin=protoc-gen-grpc_python=/usr/bin/grpc_python_plugin"] + protos, check=True)
    sys.path.insert(0, out)
    from ogive.v1 import service_pb2, service_pb2_grpc, study_pb2  # noqa
    return service_pb2, service_pb2_grpc, study_pb2


def token(ogived, db, role, label, scope=None):
    cmd = [ogived, "token", "create", "--db", db, "--role", role, "--label", label]
    for name in scope or ():
        cmd += ["--study", name]
    return subprocess.run(cmd, capture_output=True, text=True, check=True).stdout.strip()


class Server:
    def __init__(self, ogived, db, log):
        self.target = "127.0.0.1:%d" % free_port()
        self.proc = subprocess.Popen([ogived, "--db", db, "--listen", self.target,
                                      "--sweep-interval-seconds", "0.2"],
                                     stdout=log, stderr=subprocess.STDOUT)

    def stop(self):
        self.proc.send_signal(signal.SIGTERM)
        check(self.proc.wait(timeout=20) == 0, "ogived did not stop cleanly")


def client(grpc, service_pb2_grpc, target, tok):
    channel = grpc.intercept_channel(grpc.insecure_channel(target), Bearer(grpc, tok))
    grpc.channel_ready_future(grpc.insecure_channel(target)).result(timeout=10)
    return service_pb2_grpc.OgiveStub(channel)


def Bearer(grpc, tok):
    md = (("authorization", "Bearer " + tok),)

    class B(grpc.UnaryUnaryClientInterceptor, grpc.UnaryStreamClientInterceptor):
        def _d(self, d):
            return d._replace(metadata=tuple(d.metadata or ()) + md)

        def intercept_unary_unary(self, c, d, r):
            return c(self._d(d), r)

        def intercept_unary_stream(self, c, d, r):
            return c(self._d(d), r)
    return B()


def designs(pb):
    S = pb
    kiln = S.StudyDesign(name="kiln-glaze", seed=11, expected_workers=2, lease_seconds=3600,
                         target_grade="excellent")
    kiln.objective.grade_scale.labels.extend(["cracked", "poor", "fair", "good", "excellent"])
    p = kiln.parameters.add(name="peak_temp", unit="degC", description="peak kiln temperature")
    p.real.low, p.real.high = 1100, 1300
    p = kiln.parameters.add(name="soak_minutes", unit="min", description="hold at peak")
    p.integer.low, p.integer.high = 0, 60
    p = kiln.parameters.add(name="glaze", description="glaze recipe")
    p.categorical.options.extend(["celadon", "tenmoku", "shino"])
    p = kiln.parameters.add(name="reduction", description="reduction atmosphere")
    p.flag.SetInParent()

    farm = S.StudyDesign(name="solver-farm", seed=7, trial_budget=500, lease_seconds=600,
                         staleness_limit=3)
    farm.objective.direction = S.LOWER_IS_BETTER
    p = farm.parameters.add(name="relaxation", description="SOR factor")
    p.real.low, p.real.high = 0.5, 1.9
    p = farm.parameters.add(name="tolerance", description="linear solver tolerance")
    p.real.low, p.real.high, p.real.log = 1e-8, 1e-3, True
    p = farm.parameters.add(name="mesh_level", description="refinements")
    p.integer.low, p.integer.high = 1, 5
    p = farm.parameters.add(name="preconditioner")
    p.categorical.options.extend(["jacobi", "ilu", "amg"])
    p = farm.parameters.add(name="reorder")
    p.flag.SetInParent()
    farm.start.values["relaxation"].real = 1.2

    screen = S.StudyDesign(name="flag-screen", seed=3, population_size=6)
    screen.objective.direction = S.HIGHER_IS_BETTER
    for i in range(5):
        screen.parameters.add(name="option_%d" % i).flag.SetInParent()
    p = screen.parameters.add(name="mode")
    p.categorical.options.extend(["fast", "safe", "balanced", "exact"])

    anneal = S.StudyDesign(name="anneal-done", seed=5, target=0.5, gaussian_model=S.GAUSSIAN_MODEL_DIAGONAL)
    anneal.objective.direction = S.LOWER_IS_BETTER
    for name in ("x", "y"):
        p = anneal.parameters.add(name=name, unit="mm")
        p.real.low, p.real.high = -5, 5
    return [kiln, farm, screen, anneal]


def value(trial, name):
    v = trial.candidate.values[name]
    return getattr(v, v.WhichOneof("kind"))


def run(args, tmp):
    import grpc
    service_pb2, service_pb2_grpc, S = stubs(args.proto_dir, os.path.join(tmp, "gen"))
    os.makedirs(args.out, exist_ok=True)
    db = os.path.join(tmp, "schema3.db")
    toks = {
        "fixture-admin": token(args.ogived, db, "admin", "fixture-admin"),
        "fixture-worker": token(args.ogived, db, "worker", "fixture-worker", ("kiln-glaze", "solver-farm")),
        "fixture-reader": token(args.ogived, db, "reader", "fixture-reader"),
        "fixture-revoked": token(args.ogived, db, "worker", "fixture-revoked"),
    }
    subprocess.run([args.ogived, "token", "revoke", "--db", db, "fixture-revoked"], check=True,
                   capture_output=True)
    log = open(os.path.join(tmp, "ogived.log"), "w")
    server = Server(args.ogived, db, log)
    try:
        admin = client(grpc, service_pb2_grpc, server.target, toks["fixture-admin"])
        worker = client(grpc, service_pb2_grpc, server.target, toks["fixture-worker"])
        for i, d in enumerate(designs(S)):
            admin.CreateStudy(service_pb2.CreateStudyRequest(design=d, request_id="create-%d" % i), timeout=T)

        # kiln-glaze: grades, an infeasible firing, voids, notes, a lapsed and a late report.
        grades = ["cracked", "poor", "fair", "good"]
        for round_ in range(3):
            trials = worker.Ask(service_pb2.AskRequest(study="kiln-glaze", count=4, worker="bench-%d" % round_,
                                                       request_id="kiln-ask-%d" % round_), timeout=T).trials
            reports = []
            for k, t in enumerate(trials):
                o = S.Outcome(note="firing %d" % t.number)
                if k == 3 and round_ == 1:
                    o.infeasible.SetInParent()
                elif k == 3 and round_ == 2:
                    o.void.SetInParent()
                else:
                    temp = value(t, "peak_temp")
                    o.grade = grades[min(3, int(abs(temp - 1100) / 60))]
                reports.append(service_pb2.Report(trial=t.number, outcome=o))
            worker.Tell(service_pb2.TellRequest(study="kiln-glaze", reports=reports, worker="bench"), timeout=T)
        short = worker.Ask(service_pb2.AskRequest(study="kiln-glaze", count=2, worker="bench-late",
                                                  lease_seconds=0.5), timeout=T).trials
        time.sleep(1.5)  # both lapse; one is reported late
        o = S.Outcome(grade="fair", note="entered the next morning")
        worker.Tell(service_pb2.TellRequest(study="kiln-glaze", worker="bench-late",
                                            reports=[service_pb2.Report(trial=short[0].number, outcome=o)]),
                    timeout=T)
        # a duplicate of a stored report: accepted once
        worker.Tell(service_pb2.TellRequest(study="kiln-glaze", worker="bench-late",
                                            reports=[service_pb2.Report(trial=short[0].number, outcome=o)]),
                    timeout=T)

        # solver-farm: scores over several generations, infeasible, void, a lapse, workers in parallel.
        for round_ in range(8):
            trials = worker.Ask(service_pb2.AskRequest(study="solver-farm", count=5, worker="node-%d" % (round_ % 3),
                                                       request_id="farm-ask-%d" % round_), timeout=T).trials
            reports = []
            for k, t in enumerate(trials):
                o = S.Outcome()
                if (t.number % 11) == 0:
                    o.infeasible.SetInParent()
                    o.note = "diverged"
                elif (t.number % 13) == 0:
                    o.void.SetInParent()
                    o.note = "node lost"
                else:
                    r = value(t, "relaxation")
                    tol = value(t, "tolerance")
                    o.score = 30 + 20 * (r - 1.3) ** 2 + 0.5 * value(t, "mesh_level") - 0.3 * (tol < 1e-6)
                reports.append(service_pb2.Report(trial=t.number, outcome=o))
            worker.Tell(service_pb2.TellRequest(study="solver-farm", reports=reports, worker="farm"), timeout=T)
        worker.Ask(service_pb2.AskRequest(study="solver-farm", count=1, worker="node-vanished",
                                          lease_seconds=0.5), timeout=T)
        time.sleep(1.5)

        # flag-screen: flags and options only; then paused.
        for round_ in range(3):
            trials = admin.Ask(service_pb2.AskRequest(study="flag-screen", count=6, worker="screen"), timeout=T).trials
            reports = []
            for t in trials:
                s = sum(value(t, "option_%d" % i) for i in range(5)) + (value(t, "mode") == "exact")
                reports.append(service_pb2.Report(trial=t.number, outcome=S.Outcome(score=float(s))))
            admin.Tell(service_pb2.TellRequest(study="flag-screen", reports=reports, worker="screen"), timeout=T)
        admin.SetPhase(service_pb2.SetPhaseRequest(study="flag-screen", command=service_pb2.PHASE_COMMAND_PAUSE,
                                                   request_id="pause-1"), timeout=T)

        # anneal-done: ends on its target.
        done = False
        for round_ in range(40):
            trials = admin.Ask(service_pb2.AskRequest(study="anneal-done", count=6, worker="anneal"), timeout=T).trials
            reports = [service_pb2.Report(trial=t.number, outcome=S.Outcome(
                score=(value(t, "x") - 1) ** 2 + (value(t, "y") + 2) ** 2)) for t in trials]
            r = admin.Tell(service_pb2.TellRequest(study="anneal-done", reports=reports, worker="anneal"), timeout=T)
            if r.phase == S.STUDY_PHASE_DONE:
                done = True
                break
        check(done, "anneal-done did not reach its target")
    finally:
        server.stop()
        log.close()
    subprocess.run(["sqlite3", db, "PRAGMA wal_checkpoint(TRUNCATE);"], check=True, capture_output=True)
    shutil.copyfile(db, os.path.join(args.out, "schema3.db"))
    with open(os.path.join(args.out, "tokens.txt"), "w") as f:
        for label, tok in toks.items():
            f.write("%s=%s\n" % (label, tok))

    # What the old server serves from a copy of the fixture, and its next candidates.
    served = os.path.join(tmp, "served.db")
    shutil.copyfile(db, served)
    expected = os.path.join(args.out, "expected")
    os.makedirs(expected, exist_ok=True)

    def save(name, message):
        with open(os.path.join(expected, name + ".pb"), "wb") as f:
            f.write(message.SerializeToString(deterministic=True))

    log = open(os.path.join(tmp, "ogived2.log"), "w")
    server = Server(args.ogived, served, log)
    try:
        reader = client(grpc, service_pb2_grpc, server.target, toks["fixture-admin"])
        save("list", reader.ListStudies(service_pb2.ListStudiesRequest(), timeout=T))
        names = [d.name for d in designs(S)]
        for name in names:
            save("get-" + name, reader.GetStudy(service_pb2.GetStudyRequest(study=name), timeout=T))
            all_trials = service_pb2.ListTrialsResponse()
            token_ = ""
            while True:
                page = reader.ListTrials(service_pb2.ListTrialsRequest(study=name, page_size=7, page_token=token_),
                                         timeout=T)
                all_trials.trials.extend(page.trials)
                token_ = page.next_page_token
                if not token_:
                    break
            save("trials-" + name, all_trials)
            gens = service_pb2.ListGenerationsResponse()
            token_ = ""
            while True:
                page = reader.ListGenerations(service_pb2.ListGenerationsRequest(study=name, page_token=token_),
                                              timeout=T)
                gens.generations.extend(page.generations)
                token_ = page.next_page_token
                if not token_:
                    break
            save("generations-" + name, gens)
        for name in ("kiln-glaze", "solver-farm"):
            save("next-" + name, reader.Ask(service_pb2.AskRequest(study=name, count=2, worker="fixture-probe",
                                                                   request_id="fixture-next"), timeout=T))
    finally:
        server.stop()
        log.close()


def main():
    parser = argparse.ArgumentParser()
    parser.add_argument("--ogived", required=True)
    parser.add_argument("--proto-dir", required=True)
    parser.add_argument("--out", required=True)
    args = parser.parse_args()
    tmp = tempfile.mkdtemp(prefix="ogive-fixture-")
    try:
        run(args, tmp)
    finally:
        shutil.rmtree(tmp, ignore_errors=True)
    print("fixture written to", args.out)


if __name__ == "__main__":
    main()
