"""The what-if page's ASGI app (Starlette): the page, its script, and the API that re-plans.

Routes:

- ``GET /`` — the page (controls for every capacity, price intercept, unit and fixed cost and
  option; the plan beside them), ``GET /app.js`` and ``GET /app.css`` (no inline code, so the page
  runs under a strict Content-Security-Policy);
- ``POST /api/plan`` with ``{"changes": [...]}`` (the change objects of a variant) — the plan JSON,
  the same keys as ``planner plan --json``, re-solved on the scenario's warm engine;
- ``POST /api/save`` with ``{"name": ..., "description": ..., "changes": [...]}`` — the changes added
  as a variant to a *copy* of the scenario, at the path fixed when the server started (never a path
  from the client, never the scenario itself).

Every answer is JSON or the page; a bad change is 422 with the message naming what is wrong
(``changes[2].set: ...``), an infeasible one 422 naming the limits; a body that is not JSON 400,
too large 413, not sent as ``application/json`` 415.  Errors never carry a traceback: anything
unexpected is a 500 with one line.  Requests are served one solve at a time (the engine is warm
between them); hosts other than the one bound are refused (a web page elsewhere cannot reach the
API through a renamed host).
"""

from __future__ import annotations

import json
import sys
import threading
from pathlib import Path
from typing import Any

from starlette.applications import Starlette
from starlette.concurrency import run_in_threadpool
from starlette.middleware import Middleware
from starlette.middleware.trustedhost import TrustedHostMiddleware
from starlette.requests import Request
from starlette.responses import JSONResponse, Response
from starlette.routing import Route

from planner.analysis.warm import WarmPlanner
from planner.errors import InfeasibleError, PlannerError, Problem, ScenarioError
from planner.scenario.schema import Scenario
from planner.scenario.variants import read_changes
from planner.serve.page import page_css, page_html, page_js

#: Largest request body accepted (bytes): thousands of changes fit; anything larger is refused (413).
MAX_BODY = 1 << 20
#: Headers every answer carries: no outside code, no framing, no sniffing.
SECURITY = {"Content-Security-Policy": "default-src 'none'; script-src 'self'; style-src 'self'; "
                                       "connect-src 'self'; img-src 'self' data:; base-uri 'none'; "
                                       "form-action 'none'; frame-ancestors 'none'",
            "X-Content-Type-Options": "nosniff", "Referrer-Policy": "no-referrer", "Cache-Control": "no-store",
            "X-Frame-Options": "DENY"}


class BadRequest(Exception):
    """A request the API refuses: its status code and message."""

    def __init__(self, status: int, message: str, problems: list[Problem] | None = None) -> None:
        super().__init__(message)
        self.status, self.message, self.problems = status, message, problems or []


def _json(data: Any, code: int = 200) -> Response:
    body = json.dumps(data, allow_nan=False, ensure_ascii=False).encode("utf-8", "backslashreplace")
    return Response(body, status_code=code, media_type="application/json", headers=SECURITY)


def _error(code: int, message: str, problems: list[Problem] | None = None, **extra: Any) -> Response:
    out: dict[str, Any] = {"error": message, **extra}
    if problems:
        out["problems"] = [{"where": p.where, "message": p.message, "fix": p.fix} for p in problems]
    return _json(out, code)


async def read_json(request: Request) -> Any:
    """The request's JSON body, at most MAX_BODY bytes (BadRequest otherwise)."""
    kind = request.headers.get("content-type", "").split(";")[0].strip().lower()
    if kind != "application/json":
        raise BadRequest(415, f"send the body as application/json (got {kind or 'no content type'!r})")
    length = request.headers.get("content-length")
    if length is not None and (not length.isdigit() or int(length) > MAX_BODY):
        raise BadRequest(413, f"the request body is larger than {MAX_BODY:,} bytes; send fewer changes")
    body = bytearray()
    async for chunk in request.stream():
        body += chunk
        if len(body) > MAX_BODY:
            raise BadRequest(413, f"the request body is larger than {MAX_BODY:,} bytes; send fewer changes")
    try:
        return json.loads(bytes(body).decode("utf-8"), parse_constant=_no_constant)
    except UnicodeDecodeError:
        raise BadRequest(400, "the request body is not UTF-8 text") from None
    except (json.JSONDecodeError, ValueError) as e:
        raise BadRequest(400, f"the request body is not valid JSON ({e})") from None
    except RecursionError:
        raise BadRequest(400, "the request body is nested too deeply") from None


def _no_constant(name: str) -> Any:
    raise ValueError(f"{name} is not a JSON number; write an ordinary number")


def _changes_of(body: Any) -> Any:
    if not isinstance(body, dict):
        raise BadRequest(400, 'the body must be a JSON object: {"changes": [...]}')
    unknown = sorted(set(body) - {"changes", "name", "description"})
    if unknown:
        raise BadRequest(400, f"unknown key{'s' if len(unknown) > 1 else ''} in the body: "
                              f"{', '.join(repr(k) for k in unknown)} (send 'changes', and for a save 'name' and "
                              "'description')")
    return body.get("changes", [])


class WhatIf:
    """The server's state: the scenario, its warm planner (one solve at a time) and where saves go."""

    def __init__(self, scenario: Scenario, source: Path, save_to: Path, raw: dict[str, Any],
                 rel_gap: float = 1e-4, time_limit: float | None = 30.0) -> None:
        self.scenario, self.source, self.save_to, self.raw = scenario, source, save_to, raw
        self.planner = WarmPlanner(scenario, rel_gap, time_limit)
        self.lock = threading.Lock()
        self.saved: list[dict[str, Any]] = []

    def plan(self, items: Any) -> dict[str, Any]:
        changes = read_changes(self.scenario, items)
        with self.lock:
            return self.planner.plan(changes).to_dict()

    def save(self, body: dict[str, Any]) -> dict[str, Any]:
        """Add the changes as a variant to the copy (validated as a whole scenario first)."""
        from planner.scenario.forms.writers import write_scenario
        from planner.scenario.validate import validate_scenario

        name, description = body.get("name"), body.get("description", "")
        if not isinstance(name, str) or not name.strip():
            raise BadRequest(422, "give the variant a name ('name': text)")
        if not isinstance(description, str):
            raise BadRequest(422, "the description must be text")
        changes = read_changes(self.scenario, _changes_of(body))
        if not changes:
            raise BadRequest(422, "there are no changes to save: change a number first")
        entry = {"name": name.strip(), **({"description": description.strip()} if description.strip() else {}),
                 "changes": [c.model_dump(exclude_none=True) for c in changes]}
        with self.lock:
            raw = dict(self.raw)
            raw["variants"] = list(raw.get("variants") or []) + self.saved + [entry]
            validate_scenario(raw, source=str(self.save_to), base_dir=self.source.absolute().parent)
            write_scenario(raw, self.save_to)
            self.saved.append(entry)
        return {"saved": entry["name"], "file": str(self.save_to), "variants": [v["name"] for v in raw["variants"]]}


def refusal(e: Exception) -> Response:
    """The answer to a request that raised ``e``: 4xx with the message for what the client can fix, 500 else."""
    if isinstance(e, BadRequest):
        return _error(e.status, e.message, e.problems)
    if isinstance(e, ScenarioError):
        return _error(422, "; ".join(str(p) for p in e.problems) or str(e), e.problems)
    if isinstance(e, InfeasibleError):
        return _error(422, str(e), status="infeasible", conflicts=e.conflicts)
    if isinstance(e, PlannerError):
        return _error(500 if e.exit_code == 4 else 422, str(e))
    print(f"planner serve: internal error ({type(e).__name__}: {e}); please report it", file=sys.stderr)
    return _error(500, f"internal error ({type(e).__name__}); the server keeps serving — please report it")


_LAST_RESORT = b'{"error": "internal error; the server keeps serving"}'


def _guarded(handler):
    """Run a handler: every exception becomes an answer (:func:`refusal`), never a traceback."""
    async def endpoint(request: Request) -> Response:
        try:
            return await handler(request)
        except Exception as e:
            try:
                return refusal(e)
            except Exception:  # even the message could not be made: still no traceback
                return Response(_LAST_RESORT, status_code=500, media_type="application/json")
    return endpoint


def make_app(state: WhatIf, allowed_hosts: list[str] | None = None) -> Starlette:
    """The ASGI app over ``state`` (``allowed_hosts``: Host headers accepted; None: the loopback names)."""
    html, js, css = page_html(state.scenario), page_js(), page_css()

    async def index(request: Request) -> Response:
        return Response(html, media_type="text/html; charset=utf-8", headers=SECURITY)

    async def script(request: Request) -> Response:
        return Response(js, media_type="text/javascript; charset=utf-8", headers=SECURITY)

    async def style(request: Request) -> Response:
        return Response(css, media_type="text/css; charset=utf-8", headers=SECURITY)

    async def api_plan(request: Request) -> Response:
        items = _changes_of(await read_json(request))
        return _json(await run_in_threadpool(state.plan, items))

    async def api_save(request: Request) -> Response:
        body = await read_json(request)
        _changes_of(body)
        return _json(await run_in_threadpool(state.save, body))

    async def not_found(request: Request, exc: Exception) -> Response:
        status = getattr(exc, "status_code", 404)
        return _error(status, "not found: the page is at / and the API at POST /api/plan" if status == 404
                      else "method not allowed: the API takes POST" if status == 405 else "refused")

    routes = [Route("/", _guarded(index)), Route("/app.js", _guarded(script)), Route("/app.css", _guarded(style)),
              Route("/api/plan", _guarded(api_plan), methods=["POST"]),
              Route("/api/save", _guarded(api_save), methods=["POST"])]
    hosts = allowed_hosts or ["127.0.0.1", "localhost", "::1", "[::1]"]
    return Starlette(routes=routes, middleware=[Middleware(TrustedHostMiddleware, allowed_hosts=hosts,
                                                           www_redirect=False)],
                     exception_handlers={404: not_found, 405: not_found})
