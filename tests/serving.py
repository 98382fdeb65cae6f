"""A real ``planner serve`` server in a background thread of the test process (uvicorn on 127.0.0.1, a free
port), and a tiny HTTP client (urllib, standard library only) for its API."""

from __future__ import annotations

import json
import threading
import time
import urllib.error
import urllib.request
from contextlib import contextmanager
from pathlib import Path

import uvicorn

from planner.cli.serve import allowed_hosts, bind
from planner.scenario.loading import load_scenario, read_raw
from planner.serve.app import WhatIf, make_app


@contextmanager
def running(scenario: Path, save_to: Path, rel_gap: float = 1e-4, time_limit: float = 30.0):
    """(base URL, WhatIf state) of a server on a free loopback port; stopped on leaving."""
    s, _ = load_scenario(scenario)
    state = WhatIf(s, scenario, save_to, read_raw(scenario), rel_gap, time_limit)
    sock = bind("127.0.0.1", 0)
    server = uvicorn.Server(uvicorn.Config(make_app(state, allowed_hosts("127.0.0.1")), log_level="warning",
                                           access_log=False, lifespan="off"))
    thread = threading.Thread(target=server.run, kwargs={"sockets": [sock]}, daemon=True)
    thread.start()
    deadline = time.monotonic() + 20
    while not server.started and time.monotonic() < deadline:
        time.sleep(0.02)
    assert server.started, "the server did not start"
    try:
        yield f"http://127.0.0.1:{sock.getsockname()[1]}", state
    finally:
        server.should_exit = True
        thread.join(timeout=10)
        sock.close()


def call(url: str, body: bytes | str | dict | list | None = None, content_type: str = "application/json",
         method: str | None = None, headers: dict[str, str] | None = None) -> tuple[int, dict | str, dict]:
    """(status, JSON answer or text, headers) of one request; 4xx and 5xx answers are returned, not raised."""
    data = body if isinstance(body, bytes) else (body.encode() if isinstance(body, str) else
                                                 None if body is None else json.dumps(body).encode())
    req = urllib.request.Request(url, data=data, method=method or ("POST" if data is not None else "GET"))
    if data is not None:
        req.add_header("Content-Type", content_type)
    for k, v in (headers or {}).items():
        req.add_header(k, v)
    try:
        with urllib.request.urlopen(req, timeout=60) as res:
            status, raw, hdrs = res.status, res.read(), {k.lower(): v for k, v in res.headers.items()}
    except urllib.error.HTTPError as e:
        status, raw, hdrs = e.code, e.read(), {k.lower(): v for k, v in e.headers.items()}
    text = raw.decode("utf-8")
    try:
        return status, json.loads(text), hdrs
    except json.JSONDecodeError:
        return status, text, hdrs
