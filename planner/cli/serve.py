"""``planner serve``: the local what-if page (registered on the main CLI); the app is :mod:`planner.serve`."""

from __future__ import annotations

import ipaddress
import socket
from pathlib import Path

import click

from planner.errors import EXIT_BAD_INPUT, PlannerError

#: Longest time one re-plan may take by default (seconds); the plan then says time_limit with its gap.
REPLAN_SECONDS = 30.0
#: Highest port number.
MAX_PORT = 65535


class ServeError(PlannerError):
    """The server cannot start where asked (a port in use, an address not on this machine): bad input."""

    exit_code = EXIT_BAD_INPUT


def copy_path(source: Path) -> Path:
    """Where "save as variant" writes: beside the scenario, ``NAME-what-if`` with its suffix, the first free name."""
    stem, suffix = (source.name, "") if source.is_dir() else (source.stem, source.suffix)
    for k in range(1, 1000):
        candidate = source.with_name(f"{stem}-what-if{'' if k == 1 else f'-{k}'}{suffix}")
        if not candidate.exists() and not candidate.is_symlink():
            return candidate
    raise ServeError(f"{source.parent}: no free name for the copy of the scenario; give --save-to")


def allowed_hosts(host: str) -> list[str]:
    """Host headers the server answers: the loopback names when bound there, the host itself otherwise."""
    try:
        ip = ipaddress.ip_address(host.strip("[]"))
    except ValueError:
        return [host, "localhost", "127.0.0.1"]
    if ip.is_unspecified:
        return ["*"]
    if ip.is_loopback:
        return ["127.0.0.1", "localhost", "::1"]
    return [str(ip), "localhost", "127.0.0.1"]


def bind(host: str, port: int) -> socket.socket:
    """A listening socket on host:port (port 0: any free one); ServeError with the fix if it cannot be had."""
    try:
        infos = socket.getaddrinfo(host.strip("[]"), port, type=socket.SOCK_STREAM)
    except socket.gaierror as e:
        raise ServeError(f"--host {host}: not an address of this machine ({e.strerror}); the default 127.0.0.1 "
                         "serves this computer only") from None
    family, _, _, _, address = infos[0]
    sock = socket.socket(family, socket.SOCK_STREAM)
    sock.setsockopt(socket.SOL_SOCKET, socket.SO_REUSEADDR, 1)
    try:
        sock.bind(address)
        sock.listen(64)
    except OSError as e:
        sock.close()
        why = "is in use by another program" if e.errno in (98, 48, 10048) else f"cannot be used ({e.strerror})"
        raise ServeError(f"{host}:{port} {why}; give another --port (or --port 0 for any free one)") from None
    return sock


def register(main: click.Group) -> None:
    """Add the ``serve`` command to ``main``."""
    from planner.cli.main import FiniteFloat, TIME_LIMIT_MAX, WholeNumber, console, err_console, friendly, gap_option

    @main.command("serve")
    @click.argument("scenario", type=click.Path(path_type=Path))
    @click.option("--port", type=WholeNumber(0, MAX_PORT, why="0 takes any free port"), default=8000,
                  show_default=True, help=f"Port of the page, 0 to {MAX_PORT:,} (0: any free port).")
    @click.option("--host", default="127.0.0.1", show_default=True,
                  help="Address to serve on; the default serves this computer only.")
    @click.option("--save-to", type=click.Path(path_type=Path), default=None, metavar="PATH",
                  help="Where 'save as variant' writes its copy of the scenario (a new path; default: "
                       "NAME-what-if beside the scenario, in its form).")
    @gap_option(what="Certified relative gap of every re-plan")
    @click.option("--time-limit", type=FiniteFloat(0, TIME_LIMIT_MAX, min_open=True), default=REPLAN_SECONDS,
                  show_default=True, metavar="SECONDS",
                  help=f"Longest one re-plan may take (seconds, above 0, at most {TIME_LIMIT_MAX:,.0f}); a plan "
                       "stopped by it says so with its certified gap.")
    @click.option("--quiet", "-q", is_flag=True, help="Print nothing but errors.")
    @click.option("--debug", is_flag=True, help="Show the full traceback on errors.")
    @friendly
    def serve_cmd(scenario: Path, port: int, host: str, save_to: Path | None, rel_gap: float, time_limit: float,
                  quiet: bool, debug: bool) -> None:
        """Serve a what-if page for SCENARIO: move a capacity, a price or a cost and see the plan change.

        The page re-plans on every change (POST /api/plan with {"changes": [...]}, the change objects of a
        variant); 'save as variant' adds the changes to a copy of the scenario, never to the file itself.
        Ctrl-C stops it.
        """
        import uvicorn

        from planner.errors import InfeasibleError
        from planner.files import check_folder, check_target
        from planner.output.plan import LABOUR_NOTE
        from planner.scenario.loading import load_scenario, read_raw
        from planner.serve.app import WhatIf, make_app

        s, warns = load_scenario(scenario)
        from planner.scenario.periods import refuse_periods

        refuse_periods(s, "planner serve")
        raw = read_raw(scenario)
        target = save_to if save_to is not None else copy_path(scenario)
        if target.exists() or target.is_symlink():
            raise ServeError(f"{target}: exists; 'save as variant' writes a new copy of the scenario and never "
                             "replaces a file: give --save-to a new path")
        from planner.scenario.forms.writers import form_of

        try:
            form = form_of(target)
        except ValueError as e:
            raise ServeError(f"--save-to {target}: {e}") from None
        check_folder(target, "the copy of the scenario (--save-to)") if form == "csv" else check_target(target)
        state = WhatIf(s, scenario, target, raw, rel_gap, time_limit)
        try:
            state.planner.plan([])  # the engine warmed before the first visit; commitments checked
        except InfeasibleError as e:
            err_console.print(f"warning: the scenario as written cannot be planned ({e}); the page shows why "
                              "until a change makes it fit", markup=False, highlight=False)
        sock = bind(host, port)
        shown = sock.getsockname()
        url_host = f"[{shown[0]}]" if ":" in shown[0] else shown[0]
        if not quiet:
            for w in warns:
                err_console.print(f"warning: {w}", markup=False, highlight=False)
            console.print(f"what-if page for {s.name}: http://{url_host}:{shown[1]}/  (Ctrl-C to stop)",
                          markup=False, highlight=False)
            console.print(f"'save as variant' writes {target} (a copy; {scenario} is never changed)",
                          markup=False, highlight=False)
            if allowed_hosts(host) == ["*"] or not ipaddress.ip_address(shown[0]).is_loopback:
                err_console.print(f"warning: serving on {host}: any machine that reaches this port can use the "
                                  "page and its API, which has no password", markup=False, highlight=False)
            console.print(LABOUR_NOTE, markup=False, highlight=False, style="dim")
        config = uvicorn.Config(make_app(state, allowed_hosts(host)), log_level="warning", access_log=False,
                                server_header=False, lifespan="off", timeout_graceful_shutdown=2)
        try:
            uvicorn.Server(config).run(sockets=[sock])
        finally:
            sock.close()
