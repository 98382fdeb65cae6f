"""A headless Chromium driven over the DevTools protocol on a pipe (stdlib only, no network, no websocket).

Chromium's ``--remote-debugging-pipe`` reads JSON commands on file descriptor
3 and writes replies and events on descriptor 4, each message ended by a NUL
byte.  :func:`open_page` loads one local file and returns what a test needs:
console errors, uncaught exceptions, requests that left the file, results of
a few DOM queries, and PNG screenshots.
"""

from __future__ import annotations

import base64
import fcntl
import json
import os
import select
import shutil
import subprocess
import tempfile
import time
from dataclasses import dataclass, field
from pathlib import Path
from typing import Any

CANDIDATES = ("chromium", "chromium-browser", "google-chrome", "chrome", "headless_shell")

FLAGS = ["--headless", "--no-sandbox", "--disable-gpu", "--disable-quic", "--no-first-run",
         "--disable-background-networking", "--disable-component-update", "--disable-sync",
         "--disable-default-apps", "--disable-extensions", "--mute-audio", "--hide-scrollbars",
         "--remote-debugging-pipe"]


def find_chromium() -> str | None:
    """Path of a Chromium binary, or None."""
    for name in CANDIDATES:
        path = shutil.which(name)
        if path:
            return path
    return None


@dataclass
class PageResult:
    console_errors: list[str] = field(default_factory=list)
    exceptions: list[str] = field(default_factory=list)
    outside_requests: list[str] = field(default_factory=list)
    values: dict[str, Any] = field(default_factory=dict)
    viewport_png: bytes = b""
    full_png: bytes = b""


class _Pipe:
    def __init__(self, proc: subprocess.Popen, write_fd: int, read_fd: int) -> None:
        self.proc, self.w, self.r = proc, write_fd, read_fd
        self.buf = b""
        self.next_id = 0
        self.events: list[dict] = []

    def send(self, method: str, params: dict | None = None, session: str | None = None, timeout: float = 30.0):
        self.next_id += 1
        msg: dict[str, Any] = {"id": self.next_id, "method": method, "params": params or {}}
        if session:
            msg["sessionId"] = session
        os.write(self.w, json.dumps(msg).encode() + b"\0")
        want = self.next_id
        deadline = time.monotonic() + timeout
        while True:
            m = self._read(deadline)
            if m.get("id") == want:
                if "error" in m:
                    raise RuntimeError(f"{method}: {m['error']}")
                return m.get("result", {})
            self.events.append(m)

    def wait_event(self, method: str, timeout: float = 30.0) -> dict:
        for k, m in enumerate(self.events):
            if m.get("method") == method:
                return self.events.pop(k)
        deadline = time.monotonic() + timeout
        while True:
            m = self._read(deadline)
            if m.get("method") == method:
                return m
            self.events.append(m)

    def _read(self, deadline: float) -> dict:
        while b"\0" not in self.buf:
            left = deadline - time.monotonic()
            if left <= 0:
                raise TimeoutError("Chromium did not answer in time")
            ready, _, _ = select.select([self.r], [], [], left)
            if ready:
                chunk = os.read(self.r, 1 << 20)
                if not chunk:
                    raise RuntimeError(f"Chromium closed the pipe (exit code {self.proc.poll()})")
                self.buf += chunk
        raw, self.buf = self.buf.split(b"\0", 1)
        return json.loads(raw)


def open_page(path: Path | str, queries: dict[str, str], width: int = 1280, height: int = 900,
              binary: str | None = None, timeout: float = 60.0, allowed: tuple[str, ...] = ()) -> PageResult:
    """Load ``path`` (a file, or an ``http://`` URL) in headless Chromium; evaluate each JS expression in
    ``queries`` after load (a promise is awaited).  Requests to URLs starting with one of ``allowed``
    (a local server's own address) are not counted as leaving the page."""
    binary = binary or find_chromium()
    if binary is None:
        raise FileNotFoundError("no Chromium binary found")
    profile = tempfile.mkdtemp(prefix="planner-chromium-")
    cmd_r, cmd_w = os.pipe()
    out_r, out_w = os.pipe()
    # Move the child's ends out of the way first, so dup2 onto 3 and 4 cannot clobber them.
    child_in = fcntl.fcntl(cmd_r, fcntl.F_DUPFD, 10)
    child_out = fcntl.fcntl(out_w, fcntl.F_DUPFD, 10)

    def wire() -> None:  # runs in the child before exec
        os.dup2(child_in, 3)
        os.dup2(child_out, 4)

    proc = subprocess.Popen([binary, *FLAGS, f"--user-data-dir={profile}", f"--window-size={width},{height}",
                             "about:blank"], stdin=subprocess.DEVNULL, stdout=subprocess.DEVNULL,
                            stderr=subprocess.DEVNULL, pass_fds=(3, 4), preexec_fn=wire)
    for fd in (cmd_r, out_w, child_in, child_out):
        os.close(fd)
    pipe = _Pipe(proc, cmd_w, out_r)
    result = PageResult()
    try:
        target = pipe.send("Target.createTarget", {"url": "about:blank"}, timeout=timeout)["targetId"]
        session = pipe.send("Target.attachToTarget", {"targetId": target, "flatten": True})["sessionId"]
        for method in ("Runtime.enable", "Log.enable", "Page.enable", "Network.enable"):
            pipe.send(method, session=session)
        pipe.send("Emulation.setDeviceMetricsOverride",
                  {"width": width, "height": height, "deviceScaleFactor": 1, "mobile": False}, session=session)
        url = path if isinstance(path, str) else path.resolve().as_uri()
        pipe.send("Page.navigate", {"url": url}, session=session)
        pipe.wait_event("Page.loadEventFired", timeout=timeout)
        for name, expr in queries.items():
            r = pipe.send("Runtime.evaluate", {"expression": expr, "returnByValue": True, "awaitPromise": True},
                          session=session, timeout=timeout)
            if "exceptionDetails" in r:
                raise RuntimeError(f"query {name!r} failed: {r['exceptionDetails'].get('text')}")
            result.values[name] = r["result"].get("value")
        shot = pipe.send("Page.captureScreenshot", {"format": "png"}, session=session)
        result.viewport_png = base64.b64decode(shot["data"])
        size = pipe.send("Page.getLayoutMetrics", session=session)["cssContentSize"]
        clip = {"x": 0, "y": 0, "width": size["width"], "height": min(size["height"], 16000), "scale": 1}
        shot = pipe.send("Page.captureScreenshot", {"format": "png", "clip": clip, "captureBeyondViewport": True},
                         session=session)
        result.full_png = base64.b64decode(shot["data"])
        for m in pipe.events:
            method, params = m.get("method"), m.get("params", {})
            if method == "Runtime.exceptionThrown":
                d = params.get("exceptionDetails", {})
                result.exceptions.append(d.get("text", "") + " " + str(d.get("exception", {}).get("description", "")))
            elif method == "Runtime.consoleAPICalled" and params.get("type") in ("error", "assert"):
                result.console_errors.append(" ".join(str(a.get("value", a.get("description", "")))
                                                      for a in params.get("args", [])))
            elif method == "Log.entryAdded" and params.get("entry", {}).get("level") == "error":
                result.console_errors.append(params["entry"].get("text", ""))
            elif method == "Network.requestWillBeSent":
                url = params.get("request", {}).get("url", "")
                if not url.startswith(("file:", "data:", "about:") + tuple(allowed)):
                    result.outside_requests.append(url)
        try:
            pipe.send("Browser.close", timeout=5)
        except (RuntimeError, TimeoutError):
            pass
    finally:
        os.close(cmd_w)
        os.close(out_r)
        try:
            proc.wait(timeout=10)
        except subprocess.TimeoutExpired:
            proc.kill()
            proc.wait(timeout=10)
        shutil.rmtree(profile, ignore_errors=True)
    return result
