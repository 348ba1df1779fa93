#!/usr/bin/env python3
"""An external evaluator that never answers. At each request it starts a
grandchild (a sleeping python3) and writes the file
argv[1]/started-<worker pid>-<pid>-<grandchild pid>, then sleeps for good.
Tests read the files to learn which worker runs it (the parent of its parent,
the guardian of its process group: worker/child_process.h), and the processes
that must be gone once the worker has stopped. Every process it makes has
argv[1] in its command line, so a test can also look for them in /proc
(in a sandbox, where the folder is read-only and no file is written).
"""
import os
import subprocess
import sys
import time

folder = sys.argv[1]


def worker_pid():
    guardian = os.getppid()
    try:
        with open("/proc/%d/stat" % guardian) as f:
            stat = f.read()
        return int(stat[stat.rfind(")") + 2:].split()[1])
    except (OSError, ValueError, IndexError):
        return guardian


for line in sys.stdin:
    child = subprocess.Popen(
        [sys.executable, "-c", "import time; time.sleep(100000)", folder])
    name = "started-%d-%d-%d" % (worker_pid(), os.getpid(), child.pid)
    try:  # in a sandbox the folder is read-only
        with open(os.path.join(folder, name + ".tmp"), "w") as f:
            f.write("x")
        os.rename(os.path.join(folder, name + ".tmp"),
                  os.path.join(folder, name))
    except OSError:
        pass
    time.sleep(100000)
