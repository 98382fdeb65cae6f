"""``planner risk``: Monte Carlo risk of the point-estimate plan (registered on the main CLI)."""

from __future__ import annotations

import json
import re
from pathlib import Path

import click
import numpy as np
from rich.console import Console
from rich.markup import escape

from planner.errors import EXIT_BAD_INPUT, PlannerError
from planner.output.text import table
from planner.analysis.risk.run import STATUS, RiskResult, run_risk

#: Most Monte Carlo samples of one run (every sample is a re-solve; 1,000 give the mean to about 3 % of its sd).
MAX_SAMPLES = 1_000_000
#: Largest seed (2**32 − 1, the range numpy's and most tools' seeds share).
MAX_SEED = 2**32 - 1
#: Most local worker processes.
MAX_WORKERS = 256
#: Address schemes a Dask scheduler listens on that another process can reach.
SCHEMES = ("tcp", "tls", "ws", "wss", "ucx")
#: An example of a valid --scheduler address, shown in every message about one.
ADDRESS_EXAMPLE = "tcp://10.0.0.5:8786"
_HOST_PORT = re.compile(r"(\[[0-9A-Fa-f:.]+\]|[A-Za-z0-9](?:[A-Za-z0-9._-]*[A-Za-z0-9])?):([0-9]{1,5})")


class SchedulerError(PlannerError):
    """A --scheduler address that is malformed or cannot be reached: bad input, fixed by the address."""

    exit_code = EXIT_BAD_INPUT


def address_problem(address: str) -> str | None:
    """What is wrong with a Dask scheduler address, or None if it has the form SCHEME://HOST:PORT.

    Accepted: tcp, tls, ws, wss or ucx with a host name, IPv4 address or [IPv6] address and a port
    1..65535; a bare HOST:PORT means tcp:// (as Dask reads it).  inproc:// is refused: it names a
    scheduler inside one Python process, which this command (its own process) cannot reach.
    """
    text = address.strip()
    if not text:
        return "is empty"
    scheme, rest = text.split("://", 1) if "://" in text else ("tcp", text)
    if scheme.lower() == "inproc":
        return ("is an inproc:// address, which names a scheduler inside one Python process: this command "
                "runs in a process of its own and cannot reach it")
    if scheme.lower() not in SCHEMES:
        return f"has the scheme '{scheme}://', which no Dask scheduler listens on (use {', '.join(SCHEMES)})"
    m = _HOST_PORT.fullmatch(rest)
    if m is None:
        if rest and ":" not in rest.strip("[]") and "/" not in rest:
            return "has no port (the scheduler's port is usually 8786)"
        return "is not of the form HOST:PORT after the scheme"
    if not 1 <= int(m.group(2)) <= 65535:
        return f"has port {int(m.group(2))}, outside 1..65535"
    return None


def check_address(ctx, param, value: str | None) -> str | None:
    """Click callback for --scheduler: refuse a malformed address up front (exit 2, with an example)."""
    if value is None:
        return None
    problem = address_problem(value)
    if problem:
        raise click.BadParameter(f"{value!r} {problem}; give the scheduler's address as SCHEME://HOST:PORT, e.g. "
                                 f"{ADDRESS_EXAMPLE} (the address `dask scheduler` prints; a bare HOST:PORT "
                                 "means tcp://)", ctx=ctx, param=param)
    return value.strip()


def connect(address: str):
    """A distributed.Client on ``address``; any failure to reach it is SchedulerError (exit 2) with the fix."""
    from distributed import Client

    from planner.analysis.risk import run as risk_run

    try:
        return Client(address, timeout=risk_run.CONNECT_TIMEOUT)
    except Exception as e:  # unreachable, refused, wrong protocol, missing TLS settings: all fixed by the address
        reason = str(e) or type(e).__name__
        raise SchedulerError(f"cannot reach the Dask scheduler at {address}: {reason} (check that a scheduler is "
                             "running there and that this machine may reach its port — `dask scheduler` prints "
                             "its address, e.g. " + ADDRESS_EXAMPLE + " — or leave --scheduler out for a local "
                             "cluster)") from None

console = Console()
err_console = Console(stderr=True)


def register(main: click.Group) -> None:
    """Add the ``risk`` command to ``main`` (using the console and error wrapper of main's module)."""
    import sys

    cli = sys.modules[main.callback.__module__]  # planner.cli, or __main__ under python -m planner.cli
    global console, err_console
    console, err_console = cli.console, cli.err_console
    main.add_command(_command(cli.friendly))


def _command(friendly):
    return click.command("risk")(_options(friendly(risk_cmd)))


def _options(f):
    """The command's arguments and options."""
    from planner.cli.main import WholeNumber, gap_option

    f = click.option("--debug", is_flag=True, help="Show the full traceback on errors.")(f)
    f = click.option("--quiet", "-q", is_flag=True, help="Print nothing but errors.")(f)
    f = click.option("--no-robust", is_flag=True, help="Leave out the sample-based robust choice of slate.")(f)
    f = gap_option(what="Certified relative gap of every re-optimisation")(f)
    f = click.option("--workers", type=WholeNumber(0, MAX_WORKERS, why="0 solves in this process without Dask"),
                     default=None,
                     help=f"Worker processes of the local cluster, 0 to {MAX_WORKERS} (default: all cores; 0: no "
                          "Dask, solve in this process).")(f)
    f = click.option("--scheduler", default=None, metavar="ADDRESS", callback=check_address,
                     help=f"Run on an existing Dask cluster at SCHEME://HOST:PORT (e.g. {ADDRESS_EXAMPLE}; "
                          f"scheme {', '.join(SCHEMES)}; a bare HOST:PORT means tcp://); default a local "
                          "cluster.")(f)
    f = click.option("--charts", "charts_dir", type=click.Path(path_type=Path), default=None, metavar="DIR",
                     help="Write histogram and fan charts (PNG) to this folder.")(f)
    f = click.option("--json", "json_path", type=click.Path(path_type=Path), default=None,
                     help="Write the risk summary as JSON to this file.")(f)
    f = click.option("--seed", type=WholeNumber(0, MAX_SEED), default=0, show_default=True,
                     help=f"Seed of the random draws, 0 to {MAX_SEED:,} (same seed, same results on any "
                          "cluster).")(f)
    f = click.option("--samples", type=WholeNumber(1, MAX_SAMPLES, why="each sample is a re-solve"), default=1000,
                     show_default=True, help=f"Number of Monte Carlo samples, 1 to {MAX_SAMPLES:,}.")(f)
    f = click.argument("scenario", type=click.Path(path_type=Path))(f)
    return f


def risk_cmd(scenario: Path, samples: int, seed: int, json_path: Path | None, charts_dir: Path | None,
             scheduler: str | None, workers: int | None, rel_gap: float, no_robust: bool, quiet: bool,
             debug: bool) -> None:
    """Risk of SCENARIO's plan under its uncertainty: chance of a loss, fragile products, bottleneck value."""
    from rich.progress import BarColumn, MofNCompleteColumn, Progress, TimeElapsedColumn

    from planner.files import write_text_atomic
    from planner.analysis.risk.sampling import coverage_warnings
    from planner.scenario.loading import load_scenario

    bar = None
    task = None

    def progress(done: int, total: int) -> None:
        nonlocal bar, task
        if quiet:
            return
        if bar is None:
            bar = Progress("[progress.description]{task.description}", BarColumn(), MofNCompleteColumn(),
                           "chunks", TimeElapsedColumn(), console=err_console, transient=True)
            bar.start()
            task = bar.add_task("re-optimising samples", total=total)
        bar.update(task, completed=done)

    s, warns = load_scenario(scenario)
    from planner.scenario.periods import refuse_periods

    refuse_periods(s, "planner risk")
    warns = list(warns) + coverage_warnings(s)
    if not quiet:
        for w in warns:
            err_console.print(f"[yellow]warning:[/] {escape(w)}")
        first = f"connecting to the Dask scheduler at {scheduler}, then " if scheduler else ""
        then = ("re-optimising on its workers" if scheduler else "solving in this process" if workers == 0 else
                f"starting {workers} worker{'s' if workers != 1 else ''}" if workers else "starting a worker per core")
        err_console.print(f"[dim]{samples:,} samples, seed {seed}: {escape(first)}planning the point estimate, "
                          f"drawing samples, {then} ...[/]")
    if charts_dir is not None:  # before any solve: an output that cannot be written fails at once
        from planner.files import check_folder

        check_folder(charts_dir, "the risk charts (--charts)")
    if json_path is not None:
        from planner.files import check_target

        check_target(json_path)
    client = connect(scheduler) if scheduler else None  # before any solve: a wrong address fails at once
    try:
        result = run_risk(s, samples=samples, seed=seed, rel_gap=rel_gap, scheduler=scheduler, client=client,
                          workers=workers, progress=progress, robust=not no_robust)
    finally:
        if bar is not None:
            bar.stop()
        if client is not None:
            client.close()
    summary = result.to_dict()
    summary["warnings"] = warns
    if charts_dir is not None:
        from planner.output.risk_charts import write_charts

        summary["charts"] = [str(p) for p in write_charts(result, charts_dir)]
    if json_path:
        write_text_atomic(json_path, json.dumps(summary, indent=2, allow_nan=False, default=_plain))
    if not quiet:
        print_risk(result, summary)
        for path in [json_path] + summary.get("charts", []):
            if path:
                console.print(f"[dim]written: {path}[/]")


def _plain(x):
    if isinstance(x, np.generic):
        return x.item()
    raise TypeError(type(x).__name__)


def _money(cur: str, x: float | None) -> str:
    if x is None:
        return "—"
    return f"-{cur}{-x:,.0f}" if x < 0 else f"{cur}{x:,.0f}"


def print_risk(result: RiskResult, summary: dict) -> None:
    """The risk summary in the terminal (names with control and invisible characters escaped)."""
    from planner.output.text import display_copy

    result, summary = display_copy(result), display_copy(summary)
    cur, per = result.plan.currency, result.plan.period
    n = result.samples
    pp, bp = summary["plan_profit"], summary["best_profit"]
    run = summary["run"]
    loss = summary["probability_of_loss"]
    console.print(f"[bold]{result.plan.scenario}[/] — risk over {n:,} samples (seed {result.seed}), "
                  f"{run['seconds']:.1f} s on {run['workers']} worker{'s' if run['workers'] != 1 else ''} "
                  f"({run['scheduler']})")
    console.print(f"Point-estimate plan: profit {_money(cur, result.plan.profit)} per {per}.")
    if not result.info.get("uncertain_numbers"):
        console.print("[yellow]The scenario has no 'uncertainty' entries: every sample is the point estimate.[/]")
    console.print(f"Under the uncertainty, with its prices kept: expected profit {_money(cur, pp['mean'])} "
                  f"(95 % interval ± {_money(cur, 1.96 * pp['se'])}: the Monte Carlo error of the mean), "
                  f"P5 {_money(cur, pp['p5'])}, "
                  f"P50 {_money(cur, pp['p50'])}, P95 {_money(cur, pp['p95'])}.")
    losses = int(round(loss * n))
    console.print(f"[bold]Chance of a loss: {100 * loss:.1f} %[/] ({losses:,} of {n:,} samples lose money).")
    vpi = summary["value_of_perfect_information"]
    console.print(f"Re-optimised for each sample: expected best profit {_money(cur, bp['mean'])} "
                  f"(P5 {_money(cur, bp['p5'])}, P95 {_money(cur, bp['p95'])}); value of perfect "
                  f"information {_money(cur, vpi)} per {per}.")
    bad = {s: int(np.sum(result.status == i)) for i, s in enumerate(STATUS) if i}
    if any(bad.values()):
        console.print(f"[yellow]Left out of the re-optimised figures:[/] {bad['infeasible']} infeasible samples "
                      f"(commitments do not fit the sampled capacity), {bad['failed']} not certified.")
    rc = summary.get("robust_choice") or {}
    if rc.get("best") and rc.get("point_plan"):
        best, pt = rc["best"], rc["point_plan"]
        if best["is_point_plan"]:
            console.print(f"Robust choice (sample average over {len(rc['candidates'])} candidate slates): the "
                          f"point plan's slate is also the best on average.")
        else:
            console.print(f"Robust choice (sample average over {len(rc['candidates'])} candidate slates): running "
                          f"{', '.join(best['running'])} averages {_money(cur, best['expected_profit'])} against the "
                          f"point plan's {_money(cur, pt['expected_profit'])}; on independent check samples "
                          f"{_money(cur, best['expected_profit_check'])} against "
                          f"{_money(cur, pt['expected_profit_check'])}.")
    t = table("Products")
    for col in ("product", "planned", "P(running)", "plan sells P5–P95"):
        t.add_column(col, justify="left" if col == "product" else "right")
    for p in summary["products"]:
        prob = p["probability_running"]
        fragile = prob is not None and (0.1 < prob < 0.9 or (p["planned_running"] != (prob >= 0.5)))
        sold = p["plan_sold"]
        t.add_row(p["name"] + (" ◆" if fragile else ""), "runs" if p["planned_running"] else "off",
                  "—" if prob is None else f"{100 * prob:.0f} %",
                  f"{sold['p5']:,.0f}–{sold['p95']:,.0f}" if p["planned_running"] else "—")
    console.print(t)
    r = table("Shadow prices when re-optimised")
    for col in ("resource", "planned", "mean", "P5", "P95", "P(binding)"):
        r.add_column(col, justify="left" if col == "resource" else "right")
    for res in summary["resources"]:
        sp = res["shadow_price"]
        unit = f"/{res['unit']}" if res["unit"] else ""
        fmt = (lambda x: "—" if x is None else f"{cur}{x:,.2f}{unit}")
        prob = res["probability_binding"]
        r.add_row(res["name"], fmt(res["planned_shadow_price"]), fmt(sp["mean"]), fmt(sp["p5"]), fmt(sp["p95"]),
                  "—" if prob is None else f"{100 * prob:.0f} %")
    console.print(r)
    console.print("[dim]◆ fragile: its run/stop decision changes in many samples. Profits include every fixed "
                  "cost; see --json for the economics used.[/]")
