#!/usr/bin/python3
"""An external evaluator for the deploy tests: the sphere function (sum of
squares of the genes), answered after sleeping argv[1] seconds, so that a run
lasts long enough to be disturbed (a partition, a time-limit signal) while its
results stay a pure function of the genes. One JSON object per line on stdin
and stdout (docs/evaluator-protocol.md)."""
import json
import sys
import time

delay = float(sys.argv[1]) if len(sys.argv) > 1 else 0.0
for line in sys.stdin:
    request = json.loads(line)
    time.sleep(delay)
    score = sum(g * g for g in request.get("genes", []))
    sys.stdout.write(json.dumps({"id": request["id"], "score": score}) + "\n")
    sys.stdout.flush()
