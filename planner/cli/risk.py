"""``planner risk``: Monte Carlo risk of the point-estimate plan (registered on the main CLI)."""

from __future__ import annotations

import json
from pathlib import Path

import click
import numpy as np
from rich.console import Console

from planner.output.text import table
from planner.analysis.risk.run import STATUS, RiskResult, run_risk

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
    f = click.option("--debug", is_flag=True, help="Show the full traceback on errors.")(f)
    f = click.option("--quiet", "-q", is_flag=True, help="Print nothing but errors.")(f)
    f = click.option("--no-robust", is_flag=True, help="Leave out the sample-based robust choice of slate.")(f)
    f = click.option("--gap", "rel_gap", type=click.FloatRange(min=0), default=1e-4, show_default=True,
                     help="Certified relative gap of every re-optimisation.")(f)
    f = click.option("--workers", type=click.IntRange(min=0), default=None,
                     help="Worker processes of the local cluster (default: all cores; 0: no Dask, this process).")(f)
    f = click.option("--scheduler", default=None, metavar="ADDRESS",
                     help="Run on an existing Dask cluster (e.g. tcp://10.0.0.5:8786); default a local cluster.")(f)
    f = click.option("--charts", "charts_dir", type=click.Path(path_type=Path), default=None, metavar="DIR",
                     help="Write histogram and fan charts (PNG) to this folder.")(f)
    f = click.option("--json", "json_path", type=click.Path(path_type=Path), default=None,
                     help="Write the risk summary as JSON to this file.")(f)
    f = click.option("--seed", type=click.IntRange(min=0), default=0, show_default=True,
                     help="Seed of the random draws (same seed, same results on any cluster).")(f)
    f = click.option("--samples", type=click.IntRange(min=1), default=1000, show_default=True,
                     help="Number of Monte Carlo samples.")(f)
    f = click.argument("scenario", type=click.Path(path_type=Path))(f)
    return f


def risk_cmd(scenario: Path, samples: int, seed: int, json_path: Path | None, charts_dir: Path | None,
             scheduler: str | None, workers: int | None, rel_gap: float, no_robust: bool, quiet: bool,
             debug: bool) -> None:
    """Risk of SCENARIO's plan under its uncertainty: chance of a loss, fragile products, bottleneck value."""
    from rich.progress import BarColumn, MofNCompleteColumn, Progress, TimeElapsedColumn

    from planner.files import write_text_atomic

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

    if not quiet:
        err_console.print(f"[dim]{samples:,} samples, seed {seed}: planning the point estimate, "
                          "drawing samples, starting workers ...[/]")
    try:
        result = run_risk(scenario, samples=samples, seed=seed, rel_gap=rel_gap, scheduler=scheduler,
                          workers=workers, progress=progress, robust=not no_robust)
    finally:
        if bar is not None:
            bar.stop()
    summary = result.to_dict()
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
    """The risk summary in the terminal."""
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
                  f"(± {_money(cur, 1.96 * pp['se'])} Monte Carlo), P5 {_money(cur, pp['p5'])}, "
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
