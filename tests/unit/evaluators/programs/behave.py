#!/usr/bin/env python3
"""A test evaluator whose behaviour is chosen by argv[1].

good       score = sum of squares of the genes; metrics: episode, seed (low 32
           bits), requests answered; one stderr line per request
crash      a traceback on stderr, then exit status 3, at the first request
hang       never answers (sleeps); with argv[2] = a file, first starts a
           grandchild `sleep` and writes its pid there
garbage    prints a line that is not JSON
wrong_id   answers with id + 1
no_score   answers {"id": ...} only
error      answers with the error "cannot simulate"
once       answers one request correctly, then exits 0
flaky      like good, but a negative first gene makes it crash (traceback)
episode    score = episode number; metrics: seed
fds        score = how many descriptors besides 0, 1, 2 it holds
env        score = float($SKERRY_TEST_VALUE); error unless cwd == argv[2]
env_names  score 0; metrics: one entry (value 1) per environment variable
partial    writes half a line and exits
"""
import json
import os
import subprocess
import sys
import time

mode = sys.argv[1]
answered = 0


def reply(obj):
    sys.stdout.write(json.dumps(obj) + "\n")
    sys.stdout.flush()


for line in sys.stdin:
    req = json.loads(line)
    rid = req["id"]
    genes = req.get("genes", [])
    if mode in ("good", "once") or (mode == "flaky" and genes[0] >= 0):
        print("behave: request %s" % rid, file=sys.stderr, flush=True)
        answered += 1
        reply({"id": rid, "score": sum(g * g for g in genes),
               "metrics": {"episode": req.get("episode", 0),
                           "seed_low": int(req["seed"]) % (1 << 32),
                           "answered": answered}})
        if mode == "once":
            sys.exit(0)
    elif mode in ("crash", "flaky"):
        print("behave: about to fail on request %s" % rid, file=sys.stderr)
        raise RuntimeError("simulated crash in the model")  # exit status 1
    elif mode == "hang":
        # The stderr line comes first: once the pid file exists, it is in
        # the pipe.
        print("behave: hanging on request %s" % rid, file=sys.stderr, flush=True)
        if len(sys.argv) > 2:
            child = subprocess.Popen(["sleep", "1000"])
            with open(sys.argv[2] + ".tmp", "w") as f:
                f.write(str(child.pid))
            os.rename(sys.argv[2] + ".tmp", sys.argv[2])
        time.sleep(1000)
    elif mode == "garbage":
        print("behave: printing garbage", file=sys.stderr, flush=True)
        sys.stdout.write("hello, this is not json\n")
        sys.stdout.flush()
    elif mode == "wrong_id":
        reply({"id": str(int(rid) + 1), "score": 1.0})
    elif mode == "no_score":
        reply({"id": rid})
    elif mode == "error":
        reply({"id": rid, "error": "cannot simulate"})
    elif mode == "episode":
        reply({"id": rid, "score": float(req.get("episode", 0)),
               "metrics": {"seed_low": int(req["seed"]) % (1 << 32)}})
    elif mode == "fds":
        open_fds = []
        for f in os.listdir("/proc/self/fd"):
            try:  # listdir's own descriptor is closed again by now
                os.readlink("/proc/self/fd/" + f)
                if int(f) > 2:
                    open_fds.append(f)
            except OSError:
                pass
        reply({"id": rid, "score": float(len(open_fds))})
    elif mode == "env":
        if os.getcwd() != os.path.realpath(sys.argv[2]):
            reply({"id": rid, "error": "cwd is " + os.getcwd()})
        else:
            reply({"id": rid, "score": float(os.environ["SKERRY_TEST_VALUE"])})
    elif mode == "env_names":
        reply({"id": rid, "score": 0.0,
               "metrics": {name: 1 for name in os.environ}})
    elif mode == "partial":
        sys.stdout.write('{"id": ')
        sys.stdout.flush()
        sys.exit(0)
