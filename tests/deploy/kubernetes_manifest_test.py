#!/usr/bin/python3
"""deploy/kubernetes/*.yaml: parsed, checked against the Kubernetes object fields they must carry, and
their command lines checked against the real binaries.

    /usr/bin/python3 kubernetes_manifest_test.py --ogived PATH --ogive PATH --dir deploy/kubernetes

There is no cluster here. The YAML is parsed with Debian's python3-yaml; the field names and their
meaning (StatefulSet, volumeClaimTemplates, grpc probes, Indexed Jobs, the downward API) are checked
from memory of the Kubernetes API reference. Checks: ogived runs as one replica of a StatefulSet
whose ReadWriteOnce claim is mounted where --db points; its liveness, readiness and startup probes
are grpc probes on the container's grpc port; the metrics port is the one --metrics-listen names;
the Services select the pod and reach both ports; every ogived flag is one `ogived --help` lists,
and ogived started with the manifest's arguments (moved to loopback and a temporary directory)
serves /metrics and stops on SIGTERM within the grace period; the worker Job is Indexed, its
command is `ogive ... work CAMPAIGN ... -- PROGRAM` with options the CLI knows, its token comes from a
Secret mounted where --token-file points, every $(VAR) is defined, and OGIVE_SERVER names the
Service and its gRPC port.
"""
import argparse
import os
import re
import signal
import socket
import subprocess
import sys
import tempfile
import time
import urllib.request

import yaml


class TestFailure(Exception):
    pass


def check(condition, message):
    if not condition:
        raise TestFailure(message)


def load(path):
    with open(path) as f:
        docs = [d for d in yaml.safe_load_all(f) if d is not None]
    for d in docs:
        check(isinstance(d, dict) and d.get("apiVersion") and d.get("kind") and d.get("metadata", {}).get("name"),
              "%s: a document without apiVersion, kind or metadata.name" % path)
    return docs


def by_kind(docs, kind):
    return [d for d in docs if d["kind"] == kind]


def flags_in_help(binary, *words):
    text = subprocess.run([binary, *words, "--help"], capture_output=True, text=True, timeout=20).stdout
    return set(re.findall(r"(?m)^\s+(--[a-z][a-z-]*)", text)) | set(re.findall(r"\[(--[a-z][a-z-]*)", text))


def free_port():
    with socket.socket() as s:
        s.bind(("127.0.0.1", 0))
        return s.getsockname()[1]


def port_of(address):
    return int(address.rsplit(":", 1)[1])


def check_ogived(docs, text, ogived):
    [sts] = by_kind(docs, "StatefulSet")
    spec = sts["spec"]
    check(spec.get("replicas") == 1, "StatefulSet replicas must be 1, got %r" % spec.get("replicas"))
    pod = spec["template"]["spec"]
    labels = spec["template"]["metadata"]["labels"]
    check(all(labels.get(k) == v for k, v in spec["selector"]["matchLabels"].items()), "selector does not match the pod")
    [container] = pod["containers"]
    args = container["args"]
    ports = {p["name"]: p["containerPort"] for p in container["ports"]}
    check(set(ports) >= {"grpc", "metrics"}, "container ports: %s" % ports)

    claims = {c["metadata"]["name"]: c for c in spec["volumeClaimTemplates"]}
    mounts = {m["name"]: m["mountPath"] for m in container["volumeMounts"]}
    check(len(claims) == 1, "one volume claim expected, got %s" % list(claims))
    [(claim_name, claim)] = claims.items()
    check(claim["spec"]["accessModes"] == ["ReadWriteOnce"], "access modes %s" % claim["spec"]["accessModes"])
    check(claim["spec"]["resources"]["requests"]["storage"], "no storage request")
    check(claim_name in mounts, "the claim %s is not mounted" % claim_name)
    db = args[args.index("--db") + 1]
    check(db.startswith(mounts[claim_name].rstrip("/") + "/"), "--db %s is not on the volume %s" % (db, mounts[claim_name]))
    check(re.search(r"network file system", text, re.I), "the comment about SQLite and network file systems is missing")

    for probe in ("livenessProbe", "readinessProbe", "startupProbe"):
        p = container.get(probe)
        check(p is not None and "grpc" in p, "%s is not a grpc probe" % probe)
        check(p["grpc"]["port"] == ports["grpc"], "%s probes port %s, gRPC is %s" % (probe, p["grpc"]["port"], ports["grpc"]))
        check("service" not in p["grpc"] or p["grpc"]["service"] == "", "%s asks for a named service" % probe)
    check(port_of(args[args.index("--listen") + 1]) == ports["grpc"], "--listen is not the grpc port")
    check(port_of(args[args.index("--metrics-listen") + 1]) == ports["metrics"], "--metrics-listen is not the metrics port")
    grace = pod.get("terminationGracePeriodSeconds", 30)
    check(grace >= 20, "terminationGracePeriodSeconds %s is shorter than ogived's drain" % grace)

    services = {s["metadata"]["name"]: s for s in by_kind(docs, "Service")}
    check(spec["serviceName"] in services, "serviceName %s is not a Service here" % spec["serviceName"])
    check(services[spec["serviceName"]]["spec"].get("clusterIP") == "None", "the governing Service is not headless")
    for name, svc in services.items():
        check(all(labels.get(k) == v for k, v in svc["spec"]["selector"].items()), "Service %s does not select ogived" % name)
        for p in svc["spec"]["ports"]:
            target = p.get("targetPort", p["port"])
            check(target in ports or target in ports.values(), "Service %s targets %r, not a container port" % (name, target))
    main_ports = {p["name"]: p["port"] for p in services["ogived"]["spec"]["ports"]}
    check(set(main_ports) >= {"grpc", "metrics"}, "Service ogived ports: %s" % main_ports)

    known = flags_in_help(ogived)
    for a in args:
        if a.startswith("--"):
            check(a in known, "ogived argument %s is not in ogived --help" % a)
    run_ogived(ogived, container["command"], args, grace)
    return services, main_ports


def run_ogived(ogived, command, args, grace):
    """ogived with the manifest's arguments, on loopback and in a temporary directory."""
    check(command[0].endswith("/ogived"), "the container command is %s" % command)
    tmp = tempfile.mkdtemp(prefix="ogive-k8s-test.")
    metrics_port = free_port()
    moved = []
    for a in args:
        if a.startswith("/var/lib/ogive/"):
            a = os.path.join(tmp, os.path.basename(a))
        elif a == "0.0.0.0:7075":
            a = "127.0.0.1:%d" % free_port()
        elif a == "0.0.0.0:7076":
            a = "127.0.0.1:%d" % metrics_port
        check("0.0.0.0" not in a, "an address this test does not move to loopback: %s" % a)
        moved.append(a)
    log = open(os.path.join(tmp, "ogived.log"), "w")
    proc = subprocess.Popen([ogived, *moved], stdout=log, stderr=log)
    try:
        deadline = time.time() + 20
        while True:
            check(proc.poll() is None, "ogived with the manifest's arguments exited: %s" % open(log.name).read())
            try:
                urllib.request.urlopen("http://127.0.0.1:%d/metrics" % metrics_port, timeout=2)
                break
            except OSError:
                check(time.time() < deadline, "ogived does not serve metrics")
                time.sleep(0.1)
        proc.send_signal(signal.SIGTERM)
        check(proc.wait(timeout=grace) == 0, "ogived exited non-zero after SIGTERM")
    finally:
        if proc.poll() is None:
            proc.kill()
            proc.wait()
        log.close()
        subprocess.run(["rm", "-rf", tmp], check=False)


def check_workers(docs, ogive, services, main_ports):
    [job] = by_kind(docs, "Job")
    spec = job["spec"]
    check(spec.get("completionMode") == "Indexed", "completionMode is %r" % spec.get("completionMode"))
    check(spec.get("completions", 0) >= 1 and spec.get("parallelism", 0) >= 1, "completions and parallelism")
    pod = spec["template"]["spec"]
    check(pod.get("restartPolicy") in ("OnFailure", "Never"), "restartPolicy %r" % pod.get("restartPolicy"))
    check(spec["template"]["metadata"]["labels"].get("app.kubernetes.io/part-of") == "ogive",
          "worker pods lack the label ogived's NetworkPolicy admits")
    [container] = pod["containers"]
    command = container["command"] + container.get("args", [])
    check(command[0].endswith("/ogive"), "the worker runs %s" % command[0])
    check("work" in command and "--" in command, "not `ogive ... work ... -- PROGRAM`: %s" % command)
    w, dash = command.index("work"), command.index("--")
    check(w < dash < len(command) - 1, "no PROGRAM after --")
    global_flags = flags_in_help(ogive)
    work_flags = flags_in_help(ogive, "work")
    for a in command[1:w]:
        if a.startswith("--"):
            check(a in global_flags, "ogive global option %s is not in ogive --help" % a)
    for a in command[w + 2:dash]:
        if a.startswith("--"):
            check(a in work_flags, "ogive work option %s is not in ogive work --help" % a)
    env = {e["name"]: e for e in container.get("env", [])}
    for ref in re.findall(r"\$\(([A-Za-z_][A-Za-z0-9_]*)\)", " ".join(command)):
        check(ref in env, "$(%s) is used but not defined in env" % ref)
    for e in env.values():
        if "valueFrom" in e and "fieldRef" in e["valueFrom"]:
            check(e["valueFrom"]["fieldRef"]["fieldPath"].startswith("metadata."), "fieldRef %s" % e)
    server = env["OGIVE_SERVER"]["value"]
    host, port = server.rsplit(":", 1)
    check(host.split(".")[0] in services and int(port) == main_ports["grpc"],
          "OGIVE_SERVER=%s is not the ogived Service's gRPC port" % server)

    token = command[command.index("--token-file") + 1]
    volumes = {v["name"]: v for v in pod["volumes"]}
    mounts = [m for m in container["volumeMounts"] if token.startswith(m["mountPath"].rstrip("/") + "/")]
    check(len(mounts) == 1, "--token-file %s is on no mounted volume" % token)
    check("secret" in volumes[mounts[0]["name"]], "the token is not from a Secret")
    check(mounts[0].get("readOnly") is True, "the token volume is not read-only")
    grace = pod.get("terminationGracePeriodSeconds", 30)
    check(grace >= 30, "terminationGracePeriodSeconds %s leaves too little time for the void reports" % grace)
    sc = container.get("securityContext", {})
    if sc.get("readOnlyRootFilesystem"):
        tmpdir = env.get("TMPDIR", {}).get("value", "/tmp")
        check(any(m["mountPath"] == tmpdir for m in container["volumeMounts"]),
              "read-only root, but TMPDIR %s (candidate files) is not a volume" % tmpdir)


def main():
    parser = argparse.ArgumentParser()
    parser.add_argument("--ogived", required=True)
    parser.add_argument("--ogive", required=True)
    parser.add_argument("--dir", required=True)
    a = parser.parse_args()
    try:
        server_path = os.path.join(a.dir, "ogived.yaml")
        server_docs = load(server_path)
        worker_docs = load(os.path.join(a.dir, "workers-job.yaml"))
        services, main_ports = check_ogived(server_docs, open(server_path).read(), a.ogived)
        check_workers(worker_docs, a.ogive, services, main_ports)
    except TestFailure as e:
        print("FAIL: %s" % e, file=sys.stderr)
        return 1
    print("kubernetes_manifest_test: OK (%d + %d objects)" % (len(server_docs), len(worker_docs)))
    return 0


if __name__ == "__main__":
    sys.exit(main())
