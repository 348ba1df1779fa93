#!/usr/bin/python3
"""Checks the deploy files against each other and against the binaries' flags.

    check_deploy_files.py PART --source DIR --coordinator BIN --worker BIN
                          [--deploy-dir DIR]

PART is one of kubernetes, container, slurm, units. Prints one line per
problem and exits 1 when there is any, 0 otherwise. Run by
tests/deploy/deploy_files_test.cc; --deploy-dir lets that test hand in a
broken copy to show that problems are found.
"""
import argparse
import os
import re
import shlex
import subprocess
import sys

import yaml

FLAG = re.compile(r"--[a-z][a-z-]*[a-z]")
problems = []


def problem(where, what):
    problems.append(f"{where}: {what}")


def help_flags(binary):
    out = subprocess.run([binary, "--help"], capture_output=True, text=True,
                         timeout=60, check=True).stdout
    return set(FLAG.findall(out))


def check_flags(where, args, known):
    for arg in args:
        flag = arg.split("=", 1)[0]
        if flag.startswith("--") and flag not in known:
            problem(where, f"{flag} is not a flag of the program (see --help)")


def flag_value(args, flag):
    for i, arg in enumerate(args):
        if arg == flag and i + 1 < len(args):
            return args[i + 1]
        if arg.startswith(flag + "="):
            return arg.split("=", 1)[1]
    return None


def port_of(address):
    return int(address.rsplit(":", 1)[1])


def load(path):
    with open(path, encoding="utf-8") as f:
        docs = [d for d in yaml.safe_load_all(f) if d is not None]
    return {(d["kind"], d["metadata"]["name"]): d for d in docs}


def only_container(where, deployment):
    containers = deployment["spec"]["template"]["spec"]["containers"]
    if len(containers) != 1:
        problem(where, f"expected one container, found {len(containers)}")
    return containers[0]


def check_kubernetes(deploy_dir, coordinator_flags, worker_flags):
    kdir = os.path.join(deploy_dir, "kubernetes")
    try:
        c = load(os.path.join(kdir, "coordinator.yaml"))
        w = load(os.path.join(kdir, "workers.yaml"))
    except (yaml.YAMLError, KeyError, TypeError, OSError) as e:
        problem("kubernetes", f"does not parse: {e}")
        return
    dep = c.get(("Deployment", "skerry-coordinator"))
    svc = c.get(("Service", "skerry-coordinator"))
    pvcs = [k[1] for k in c if k[0] == "PersistentVolumeClaim"]
    wdep = w.get(("Deployment", "skerry-worker"))
    if not dep or not svc or not pvcs or not wdep:
        problem("kubernetes", "expected Deployment and Service skerry-coordinator, "
                "a PersistentVolumeClaim and Deployment skerry-worker")
        return
    where = "coordinator.yaml"
    if dep["spec"].get("replicas") != 1:
        problem(where, "a database has one coordinator: replicas must be 1")
    if dep["spec"].get("strategy", {}).get("type") != "Recreate":
        problem(where, "strategy must be Recreate (never two coordinators)")
    pod = dep["spec"]["template"]
    box = only_container(where, dep)
    args = box.get("args", [])
    if not args or args[0] != "skerry-coordinator":
        problem(where, "args must start with skerry-coordinator")
    check_flags(where, args[1:], coordinator_flags)
    listen = flag_value(args, "--listen")
    ports = {p["name"]: p["containerPort"] for p in box.get("ports", [])}
    if listen is None or port_of(listen) not in ports.values():
        problem(where, f"--listen {listen} is not a containerPort {ports}")
    if listen is not None and not listen.startswith("0.0.0.0:"):
        problem(where, "--listen must take every interface in a pod")
    for sp in svc["spec"]["ports"]:
        target = sp.get("targetPort", sp["port"])
        target = ports.get(target, target)
        if listen is None or target != port_of(listen):
            problem(where, f"Service targetPort {sp.get('targetPort')} does not "
                    f"reach --listen {listen}")
    labels = pod["metadata"]["labels"]
    for k, v in svc["spec"]["selector"].items():
        if labels.get(k) != v:
            problem(where, f"Service selector {k}={v} does not match the pod")
    db = flag_value(args, "--db")
    mounts = {m["name"]: m["mountPath"] for m in box.get("volumeMounts", [])}
    claims = {v["name"]: v["persistentVolumeClaim"]["claimName"]
              for v in pod["spec"].get("volumes", [])
              if "persistentVolumeClaim" in v}
    on_volume = [n for n, path in mounts.items()
                 if db and os.path.dirname(db) == path and claims.get(n) in pvcs]
    if not on_volume:
        problem(where, f"--db {db} is not on the persistent volume claim {pvcs}")

    where = "workers.yaml"
    wpod = wdep["spec"]["template"]
    wbox = only_container(where, wdep)
    wargs = wbox.get("args", [])
    if not wargs or wargs[0] != "skerry-worker":
        problem(where, "args must start with skerry-worker")
    check_flags(where, wargs[1:], worker_flags)
    target = flag_value(wargs, "--coordinator") or ""
    service_ports = [p["port"] for p in svc["spec"]["ports"]]
    if target.rsplit(":", 1)[0] != svc["metadata"]["name"] or \
            port_of(target) not in service_ports:
        problem(where, f"--coordinator {target} is not the Service "
                f"{svc['metadata']['name']} on {service_ports}")
    threads = flag_value(wargs, "--threads")
    cpu = wbox.get("resources", {}).get("requests", {}).get("cpu")
    if threads is None or str(cpu) != threads:
        problem(where, f"--threads {threads} differs from the CPUs requested ({cpu})")
    if wpod["spec"].get("terminationGracePeriodSeconds", 30) < 30:
        problem(where, "terminationGracePeriodSeconds below 30: too short to "
                "report and hand back")
    token = flag_value(wargs, "--token-file")
    wmounts = {m["name"]: m["mountPath"] for m in wbox.get("volumeMounts", [])}
    secrets = {v["name"] for v in wpod["spec"].get("volumes", []) if "secret" in v}
    if not token or not any(os.path.dirname(token) == wmounts.get(s)
                            for s in secrets):
        problem(where, f"--token-file {token} is not in a mounted Secret")
    for name, d in (("coordinator.yaml", dep), ("workers.yaml", wdep)):
        uid = d["spec"]["template"]["spec"].get("securityContext", {}).get("runAsUser")
        if uid != 7431:
            problem(name, f"runAsUser {uid}: the image's user is 7431")


def check_container(deploy_dir, coordinator_flags):
    where = "Containerfile"
    with open(os.path.join(deploy_dir, "container", "Containerfile"),
              encoding="utf-8") as f:
        lines = [l.strip() for l in f if l.strip() and not l.startswith("#")]
    froms = [l.split()[1] for l in lines if l.startswith("FROM ")]
    if len(froms) < 2:
        problem(where, "expected a multi-stage build (two FROM lines)")
    for base in froms:
        if not re.search(r"debian:12(-slim)?$", base):
            problem(where, f"base {base} is not Debian 12")
    expose = [int(l.split()[1]) for l in lines if l.startswith("EXPOSE ")]
    cmd = [l for l in lines if l.startswith("CMD ")]
    if len(cmd) != 1:
        problem(where, "expected one CMD")
        return
    args = yaml.safe_load(cmd[0][4:])  # the JSON form is YAML too
    if args[0] != "skerry-coordinator":
        problem(where, "CMD must run skerry-coordinator")
    check_flags(where, args[1:], coordinator_flags)
    listen = flag_value(args, "--listen")
    if listen is None or [port_of(listen)] != expose:
        problem(where, f"EXPOSE {expose} differs from --listen {listen}")
    volume = [l.split()[1] for l in lines if l.startswith("VOLUME ")]
    db = flag_value(args, "--db")
    if not db or [os.path.dirname(db)] != volume:
        problem(where, f"--db {db} is not on the VOLUME {volume}")
    if "USER 7431:7431" not in lines:
        problem(where, "expected USER 7431:7431 (the manifests' runAsUser)")


def check_slurm(deploy_dir, worker_flags):
    where = "skerry-workers.sbatch"
    path = os.path.join(deploy_dir, "slurm", "skerry-workers.sbatch")
    r = subprocess.run(["bash", "-n", path], capture_output=True, text=True)
    if r.returncode != 0:
        problem(where, f"bash -n: {r.stderr.strip()}")
    with open(path, encoding="utf-8") as f:
        text = f.read()
    code = "\n".join(l for l in text.splitlines()
                     if not l.lstrip().startswith("#"))
    built = re.findall(r"args\+?=\(([^)]*)\)", code)
    used = set(FLAG.findall(" ".join(built)))
    check_flags(where, sorted(used), worker_flags)
    for needed in ("--exit-when-idle", "--threads", "--coordinator"):
        if needed not in used:
            problem(where, f"the worker is not given {needed}")
    if "#SBATCH --signal=B:TERM@" not in text:
        problem(where, "no #SBATCH --signal=B:TERM@N: the worker would not "
                "hear of the time limit before it is killed")
    if not re.search(r"^exec ", code, re.M):
        problem(where, "the worker must be exec'd, so the scheduler's "
                "signal reaches it")


def check_units(deploy_dir, coordinator_flags, worker_flags):
    for unit, known in (("skerry-coordinator.service", coordinator_flags),
                        ("skerry-worker@.service", worker_flags)):
        with open(os.path.join(deploy_dir, "systemd", unit), encoding="utf-8") as f:
            starts = [l for l in f if l.startswith("ExecStart=")]
        if len(starts) != 1:
            problem(unit, "expected one ExecStart")
            continue
        check_flags(unit, shlex.split(starts[0][len("ExecStart="):])[1:], known)


def main():
    parser = argparse.ArgumentParser()
    parser.add_argument("part", choices=["kubernetes", "container", "slurm", "units"])
    parser.add_argument("--source", required=True)
    parser.add_argument("--coordinator", required=True)
    parser.add_argument("--worker", required=True)
    parser.add_argument("--deploy-dir")
    a = parser.parse_args()
    deploy_dir = a.deploy_dir or os.path.join(a.source, "deploy")
    coordinator_flags = help_flags(a.coordinator)
    worker_flags = help_flags(a.worker)
    if a.part == "kubernetes":
        check_kubernetes(deploy_dir, coordinator_flags, worker_flags)
    elif a.part == "container":
        check_container(deploy_dir, coordinator_flags)
    elif a.part == "slurm":
        check_slurm(deploy_dir, worker_flags)
    else:
        check_units(deploy_dir, coordinator_flags, worker_flags)
    for p in problems:
        print(p)
    print(f"{a.part}: {len(problems)} problem(s)")
    return 1 if problems else 0


if __name__ == "__main__":
    sys.exit(main())
