#!/usr/bin/python3
"""Drives a headless Chromium over the DevTools protocol on a pipe, for tests.

Loads one URL in a fresh profile, waits (bounded) until a JavaScript condition
holds, optionally waits until a value on the page changes, evaluates an
expression, optionally saves a screenshot, and prints one JSON object:

  {"ready": bool, "value": <expression's value>, "changed": bool,
   "before": ..., "after": ..., "errors": [...], "requests": [...]}

"errors" holds uncaught exceptions, console.error messages and log entries of
level error (a refused fetch, say); "requests" every URL the page requested
other than the page itself and data: URLs. Every wait is bounded by --timeout;
Chromium is killed on the way out whatever happens.

The DevTools protocol over --remote-debugging-pipe: Chromium reads commands on
file descriptor 3 and writes answers and events on descriptor 4, each message
one JSON text ended by a NUL byte (chromedevtools.github.io/devtools-protocol).
"""
import argparse
import base64
import json
import os
import select
import shutil
import subprocess
import sys
import tempfile
import time

FLAGS = ["--headless", "--no-sandbox", "--disable-gpu", "--disable-quic",
         "--no-first-run", "--disable-background-networking",
         "--disable-component-update", "--disable-sync",
         "--disable-dev-shm-usage", "--remote-debugging-pipe"]


class Browser:
    def __init__(self, chromium, width, height):
        self.profile = tempfile.mkdtemp(prefix="skerry-chromium-")
        to_child_r, self.to_child = os.pipe()
        self.from_child, from_child_w = os.pipe()

        def fds():
            # os.dup2 makes inheritable copies; the pipes' own descriptors
            # are not inheritable (PEP 446), so Chromium gets only 3 and 4.
            # Copies above 10 first, so that neither pipe end is overwritten
            # when it already sits on 3 or 4.
            r = os.dup2(to_child_r, 10)
            w = os.dup2(from_child_w, 11)
            os.dup2(r, 3)
            os.dup2(w, 4)
            os.set_inheritable(3, True)
            os.set_inheritable(4, True)

        self.proc = subprocess.Popen(
            [chromium] + FLAGS + ["--user-data-dir=" + self.profile,
                                  "--window-size=%d,%d" % (width, height),
                                  "about:blank"],
            preexec_fn=fds, close_fds=False,
            stdin=subprocess.DEVNULL, stdout=subprocess.DEVNULL,
            stderr=subprocess.DEVNULL)
        os.close(to_child_r)
        os.close(from_child_w)
        self.buffer = b""
        self.next_id = 0
        self.events = []

    def close(self):
        try:
            self.proc.kill()
            self.proc.wait(timeout=10)
        except Exception:
            pass
        shutil.rmtree(self.profile, ignore_errors=True)

    def _read(self, deadline):
        while b"\0" not in self.buffer:
            left = deadline - time.monotonic()
            if left <= 0:
                raise TimeoutError("no answer from Chromium")
            ready, _, _ = select.select([self.from_child], [], [], left)
            if ready:
                chunk = os.read(self.from_child, 1 << 20)
                if not chunk:
                    raise RuntimeError("Chromium closed its DevTools pipe")
                self.buffer += chunk
        text, self.buffer = self.buffer.split(b"\0", 1)
        return json.loads(text)

    def call(self, method, params=None, session=None, timeout=30):
        self.next_id += 1
        message = {"id": self.next_id, "method": method, "params": params or {}}
        if session:
            message["sessionId"] = session
        os.write(self.to_child, json.dumps(message).encode() + b"\0")
        deadline = time.monotonic() + timeout
        while True:
            m = self._read(deadline)
            if m.get("id") == self.next_id:
                if "error" in m:
                    raise RuntimeError("%s: %s" % (method, m["error"]))
                return m.get("result", {})
            self.events.append(m)

    def pump(self, seconds):
        """Takes the events that arrive within `seconds`."""
        deadline = time.monotonic() + seconds
        try:
            while True:
                self.events.append(self._read(deadline))
        except TimeoutError:
            pass


def evaluate(browser, session, expression):
    r = browser.call("Runtime.evaluate",
                     {"expression": expression, "returnByValue": True,
                      "awaitPromise": True}, session)
    if "exceptionDetails" in r:
        return None
    return r.get("result", {}).get("value")


def main():
    p = argparse.ArgumentParser(description=__doc__.split("\n")[0])
    p.add_argument("--chromium", default="chromium")
    p.add_argument("--url", required=True)
    p.add_argument("--wait", default="document.readyState === 'complete'",
                   help="JavaScript condition to wait for")
    p.add_argument("--changes", help="JavaScript value to see change")
    p.add_argument("--eval", default="null", help="JavaScript to evaluate")
    p.add_argument("--screenshot", help="PNG file to write")
    p.add_argument("--timeout", type=float, default=60)
    p.add_argument("--width", type=int, default=1200)
    p.add_argument("--height", type=int, default=900)
    a = p.parse_args()

    end = time.monotonic() + a.timeout
    out = {"ready": False, "value": None, "changed": False, "errors": [],
           "requests": []}
    browser = Browser(a.chromium, a.width, a.height)
    try:
        target = browser.call("Target.createTarget", {"url": "about:blank"})
        session = browser.call("Target.attachToTarget",
                               {"targetId": target["targetId"],
                                "flatten": True})["sessionId"]
        for domain in ("Runtime", "Log", "Network", "Page"):
            browser.call(domain + ".enable", {}, session)
        browser.call("Page.navigate", {"url": a.url}, session)
        while time.monotonic() < end:
            if evaluate(browser, session, "Boolean(%s)" % a.wait):
                out["ready"] = True
                break
            browser.pump(0.2)
        if out["ready"] and a.changes:
            before = evaluate(browser, session, a.changes)
            out["before"] = before
            while time.monotonic() < end:
                browser.pump(0.5)
                after = evaluate(browser, session, a.changes)
                if after != before:
                    out["changed"] = True
                    out["after"] = after
                    break
        out["value"] = evaluate(browser, session, a.eval)
        if a.screenshot:
            metrics = browser.call("Page.getLayoutMetrics", {}, session)
            size = metrics.get("cssContentSize") or metrics["contentSize"]
            shot = browser.call("Page.captureScreenshot",
                                {"format": "png", "captureBeyondViewport": True,
                                 "clip": {"x": 0, "y": 0,
                                          "width": size["width"],
                                          "height": size["height"],
                                          "scale": 1}}, session)
            with open(a.screenshot, "wb") as f:
                f.write(base64.b64decode(shot["data"]))
        browser.pump(0.2)
    except Exception as e:  # reported, never hidden
        out["errors"].append("driver: %s" % e)
    finally:
        browser.close()

    page = a.url.split("#")[0]
    for m in browser.events:
        method, params = m.get("method"), m.get("params", {})
        if method == "Runtime.exceptionThrown":
            d = params.get("exceptionDetails", {})
            out["errors"].append("exception: %s" % (
                d.get("exception", {}).get("description") or d.get("text")))
        elif method == "Runtime.consoleAPICalled" and params.get("type") == "error":
            out["errors"].append("console: %s" % " ".join(
                str(x.get("value", x.get("description", "")))
                for x in params.get("args", [])))
        elif method == "Log.entryAdded":
            entry = params.get("entry", {})
            if entry.get("level") == "error":
                out["errors"].append("log: %s" % entry.get("text"))
        elif method == "Network.requestWillBeSent":
            url = params.get("request", {}).get("url", "")
            if url.split("#")[0] != page and not url.startswith("data:"):
                out["requests"].append(url)
    print(json.dumps(out))
    return 0


if __name__ == "__main__":
    sys.exit(main())
