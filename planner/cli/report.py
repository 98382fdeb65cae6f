"""`planner report`: plan a scenario and write the HTML report, the workbook and the charts into a folder."""

from __future__ import annotations

import json
from pathlib import Path

import click
from rich.markup import escape

from planner.errors import Problem, ScenarioError


def load_sweep_file(path: Path) -> dict:
    """A sweep JSON file (``points`` [{capacity, profit, shadow_price, ...}], ``breakpoints``), checked."""
    if path.exists() and not path.is_file():  # a pipe would block the read; a folder has no text
        raise ScenarioError([Problem(str(path), "is not a regular file", "give the path of a sweep JSON file")])
    try:
        data = json.loads(path.read_text(encoding="utf-8"))
    except OSError as e:
        raise ScenarioError([Problem(str(path), f"cannot be read: {e.strerror or e}")]) from None
    except json.JSONDecodeError as e:
        raise ScenarioError([Problem(f"{path}, line {e.lineno}", f"is not valid JSON: {e.msg}")]) from None
    points = data.get("points") if isinstance(data, dict) else None
    if not isinstance(points, list) or not all(isinstance(p, dict) and "capacity" in p and "profit" in p
                                               for p in points):
        raise ScenarioError([Problem(str(path), "is not a sweep: it needs 'points', a list of "
                                     "{capacity, profit, shadow_price}", "write one with `planner sweep --json`")])
    data.setdefault("breakpoints", [])
    return data


def register(main: click.Group) -> None:
    from planner.cli.main import WholeNumber, console, friendly, solve_options
    from planner.cli.risk import MAX_SAMPLES, MAX_SEED, MAX_WORKERS

    @main.command("report")
    @click.argument("scenario", type=click.Path(path_type=Path))
    @click.option("--out", "out_dir", type=click.Path(path_type=Path), default=Path("report"), show_default=True,
                  help="Folder for report.html, plan.xlsx, plan.json and charts/.")
    @click.option("--sweep", "sweep_resource", default=None, metavar="RESOURCE",
                  help="Also sweep this resource's capacity (50 % to 150 % of today's, re-solving at each point).")
    @click.option("--sweep-json", "sweep_file", type=click.Path(path_type=Path), default=None, metavar="FILE",
                  help="Show a sweep already computed (JSON with 'points' and 'breakpoints').")
    @click.option("--sweep-steps", type=WholeNumber(2, 200), default=11, show_default=True,
                  help="Points in a --sweep.")
    @click.option("--no-options", is_flag=True, help="Do not value the scenario's capacity options.")
    @click.option("--risk", "risk_samples", type=WholeNumber(1, MAX_SAMPLES), default=None, metavar="N",
                  help="Also show the plan's risk over N Monte Carlo samples (chance of a loss, P5/P50/P95, "
                       "the robust choice), as `planner risk` does.  Default: no risk part.")
    @click.option("--seed", type=WholeNumber(0, MAX_SEED), default=0, show_default=True,
                  help="Seed of the --risk samples.")
    @click.option("--risk-workers", type=WholeNumber(0, MAX_WORKERS), default=0, show_default=True,
                  help="Worker processes for --risk (0: this process, no Dask cluster).")
    @solve_options
    @friendly
    def report_cmd(scenario: Path, out_dir: Path, sweep_resource: str | None, sweep_file: Path | None,
                   sweep_steps: int, no_options: bool, rel_gap: float, time_limit: float | None,
                   solver: str | None, quiet: bool, debug: bool, risk_samples: int | None = None, seed: int = 0,
                   risk_workers: int = 0) -> None:
        """Plan SCENARIO and write a report a manager can read: HTML page, Excel workbook, charts."""
        from planner.api import plan
        from planner.files import check_folder
        from planner.scenario.loading import load_scenario
        from planner.analysis.replan import report_context, sweep_for_report
        from planner.output.capacity import add_option_rates
        from planner.output.report import write_report

        check_folder(out_dir, "the report (--out)")  # before any solving: a wrong --out is found at once
        sweep = load_sweep_file(sweep_file) if sweep_file is not None else None
        import time

        t0 = time.perf_counter()
        deadline = None if time_limit is None else t0 + time_limit  # the plan and its analysis
        s, warnings = load_scenario(scenario)
        from planner.scenario.periods import refuse_periods

        refuse_periods(s, "planner report")
        solve = {"rel_gap": rel_gap, "time_limit": time_limit, "solver": solver}
        p = plan(s, **{**solve, "time_limit": None if deadline is None else max(deadline - time.perf_counter(), 0.01)})
        p.warnings[:0] = [w for w in warnings if w not in p.warnings]
        if sweep_resource is not None:
            if not quiet:
                console.print(f"[dim]sweeping {sweep_resource} at {sweep_steps} capacities ...[/]")
            sweep = sweep_for_report(s, sweep_resource, steps=sweep_steps, base=p, **solve)
        if not quiet and s.options and not no_options and not p.extras.get("options"):
            console.print(f"[dim]valuing {len(s.options)} capacity options by re-solving ...[/]")
        ctx = report_context(p, s, source=scenario, sweep=sweep, with_options=not no_options, deadline=deadline,
                             **solve)
        add_option_rates(p, s)  # the terminal shows a part-usable option's rate
        if risk_samples is not None:
            from planner.analysis.risk.run import run_risk

            if not quiet:
                console.print(f"[dim]risk: {risk_samples:,} samples, seed {seed} ...[/]")
            result = run_risk(s, samples=risk_samples, seed=seed, workers=risk_workers)
            ctx.risk, ctx.risk_result = result.to_dict(), result
        paths = write_report(p, s, out_dir, context=ctx)
        if not quiet:
            from planner.output.terminal import print_plan

            print_plan(p, console, standalone=False)
            charts = sum(1 for k in paths if k.startswith("chart:")) // 2
            console.print(f"\nreport written to [bold]{escape(str(paths['html']))}[/]\n"
                          f"  workbook {escape(str(paths['xlsx']))}, JSON {escape(str(paths['json']))}, "
                          f"{charts} charts (PNG and SVG) in {escape(str(out_dir / 'charts'))}")
