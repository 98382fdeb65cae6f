"""The ``planner sweep`` command: profit, shadow price and mix along one resource's capacity."""

from __future__ import annotations

import csv
import json
import math
from pathlib import Path

import click
from rich.console import Console
from rich.markup import escape

from planner.output.text import table, money, qty
from planner.analysis.capacity.sweep import Sweep, run_sweep


#: Widest sweep: its high end at most this many times its scale (the larger of its low end, today's capacity and
#: what the commitments need).  Far wider ranges lose the low end in rounding (seen from about 2e9 times).
MAX_WIDTH = 1e8
#: Relative tolerance when each sweep point is checked against the limits at its capacity (as api.LIMIT_TOL).
POINT_TOL = 1e-7
#: Most steps of one sweep (each point is a re-solve of the mixed-integer plan).
MAX_STEPS = 100_000


def register(main: click.Group) -> None:
    """Add ``sweep`` to the command group."""
    from planner.cli.main import CAPACITY_MAX, FiniteFloat, WholeNumber, console, friendly

    capacity = FiniteFloat(0, CAPACITY_MAX, why="a capacity in the resource's unit; the scenario's numbers "
                                                "stop at 1e15 too (change units beyond)")

    @main.command("sweep")
    @click.argument("scenario", type=click.Path(path_type=Path))
    @click.option("--resource", required=True, help="Name of the resource whose capacity is swept.")
    @click.option("--from", "start", type=capacity, default=None,
                  help="Capacity to start from (default: the scenario's capacity), from 0 to 1e15; at least "
                       "what the commitments need of the resource.")
    @click.option("--to", "stop", type=capacity, required=True,
                  help="Capacity to sweep to, from 0 to 1e15. It may lie below --from: the same range is swept "
                       "and the points are listed in increasing capacity. It must differ from --from.")
    @click.option("--steps", type=WholeNumber(1, MAX_STEPS, why="points = steps + 1, each one a re-solve"),
                  default=20, show_default=True, help="Number of equal steps (points = steps + 1).")
    @click.option("--gap", "rel_gap", type=FiniteFloat(1e-12, 1e-2, why="a sweep compares neighbouring "
                                                       "points, so each needs a tight certificate"),
                  default=1e-7, show_default=True,
                  help="Certified relative gap of each re-solve, from 1e-12 to 0.01.")
    @click.option("--json", "json_path", type=click.Path(path_type=Path), default=None, help="Write the sweep as JSON.")
    @click.option("--csv", "csv_path", type=click.Path(path_type=Path), default=None, help="Write the sweep as CSV.")
    @click.option("--quiet", "-q", is_flag=True, help="Print nothing but errors.")
    @click.option("--debug", is_flag=True, help="Show the full traceback on errors.")
    @friendly
    def sweep_cmd(scenario: Path, resource: str, start: float | None, stop: float, steps: int, rel_gap: float,
                  json_path: Path | None, csv_path: Path | None, quiet: bool, debug: bool) -> None:
        """Sweep one resource's capacity of SCENARIO: profit, shadow price, volumes and slate at each
        point, and the exact capacities where the slate or the bottleneck changes."""
        from planner.scenario.loading import load_scenario
        from planner.files import write_text_atomic

        s, warns = load_scenario(scenario)
        from planner.scenario.periods import refuse_periods

        refuse_periods(s, "planner sweep (and sweep --period)")
        start = check_sweep(s, resource, start, stop)
        if start > stop and not quiet:
            console.print(f"[dim]the sweep runs from {_n(stop)} up to {_n(start)} (--to is below the start); "
                          "points are listed in increasing capacity[/]")
        sw = _run_with_progress(s, resource, start, stop, steps, rel_gap, console, quiet)
        check_points(s, sw)
        if json_path:
            write_text_atomic(json_path, json.dumps(sw.to_dict(), indent=2, allow_nan=False))
        if csv_path:
            write_csv(sw, csv_path)
        if not quiet:
            for w in warns:
                console.print(f"[yellow]warning:[/] {w}")
            print_sweep(sw, console)
            for path in (json_path, csv_path):
                if path:
                    console.print(f"[dim]sweep written to {path}[/]")


def _at_least(x: float) -> str:
    """x to six significant digits, rounded up (so the number printed is never below x)."""
    if x <= 0:
        return "0"
    text = f"{x:.6g}"
    if float(text) < x:
        step = 10.0 ** (math.floor(math.log10(x)) - 5)
        text = f"{math.ceil(x / step) * step:.6g}"
    v = float(text)
    return f"{v:,.0f}" if v.is_integer() and v < 1e15 else text


def _n(x: float) -> str:
    """A capacity to six significant digits with thousands separators: 4,160 or 6e10."""
    return f"{x:,.6g}".replace("e+", "e")


def check_sweep(s, resource: str, start: float | None, stop: float) -> float:
    """Check a sweep's range before any solve; returns the start capacity.

    - an unknown resource: exit 2 with a "did you mean";
    - commitments that overload another resource: exit 3 with the same diagnosis as ``plan``
      (planner.engine.infeasible.explain), since no capacity of the swept one can fix that;
    - --from equal to --to (a sweep needs two capacities): exit 2;
    - a low end below what the commitments need of the swept resource: exit 2 with the smallest
      valid value.
    """
    from models.data import committed_made

    from planner.engine.infeasible import conflicts, explain
    from planner.errors import InfeasibleError, Problem, ScenarioError
    from planner.scenario.arrays import mix_data
    from planner.scenario.names import did_you_mean

    names = [r.name for r in s.resources]
    if resource not in names:
        hint = did_you_mean(resource, names) or f"choose one of: {', '.join(names) or '(no resources)'}"
        raise ScenarioError([Problem(f"--resource {resource}", "is not a resource of the scenario", hint)])
    d = mix_data(s)
    r = names.index(resource)
    unit = f" {s.resources[r].unit}" if s.resources[r].unit else ""
    need = float(d.used(committed_made(d))[r])
    others = d.capacity.copy()
    others[r] = max(float(others[r]), need)  # the swept resource can always be given enough
    try:
        explain(s, d.with_capacity(others))
    except InfeasibleError as e:
        raise InfeasibleError(e.conflicts + [f"this holds at every capacity of {resource}, so no sweep of it can "
                                             "help: fix the limits above first (planner check shows them)"]) from None
    today = float(d.capacity[r])
    begin = today if start is None else float(start)
    source = f"--from {_n(begin)}{unit}" if start is not None else \
        f"the scenario's capacity of {resource} ({_n(begin)}{unit}, where the sweep starts without --from)"
    if begin == stop:
        raise click.BadParameter(f"--to {_n(stop)}{unit} is the same as {source}: a sweep needs two different "
                                 "capacities (give --from and --to apart; for the plan at one capacity use "
                                 "planner plan)", param_hint="'--to'")
    low = min(begin, stop)
    if low < need - 1e-9 * max(need, 1.0):
        which = "--to" if stop < begin else "--from"
        what = f"--to {_n(stop)}{unit}" if which == "--to" else source
        at_low = d.capacity.copy()
        at_low[r] = low
        why = "; ".join(conflicts(s, d.with_capacity(at_low))) or \
            f"the commitments need {_n(need)}{unit} of {resource}"
        raise click.BadParameter(f"the sweep's low end, {what}, cannot hold the commitments: {why}. Start the "
                                 f"sweep at {which} {_at_least(need)} or higher", param_hint=f"'{which}'")
    high = max(begin, stop)
    scale = max(low, today, need)
    if scale > 0 and high > MAX_WIDTH * scale:
        which = "--to" if stop >= begin else "--from"
        raise click.BadParameter(f"the sweep reaches {_n(high)}{unit}, more than {MAX_WIDTH:,.0f} times its scale "
                                 f"({_n(scale)}{unit}: the largest of its low end, today's capacity and what the "
                                 f"commitments need): so wide a range loses its low end in rounding. Sweep to "
                                 f"{which} {_n(MAX_WIDTH * scale)} or less (or sweep the far end on its own)",
                                 param_hint=f"'{which}'")
    return begin


def check_points(s, sw: Sweep) -> None:
    """Check every point of a finished sweep against every limit at its own capacity (SolverError if broken).

    Each point is a plan; like ``plan``, a point whose volumes break a limit beyond POINT_TOL
    (relative) is an error, never output.
    """
    import numpy as np

    from planner.errors import SolverError
    from planner.scenario.arrays import mix_data

    d = mix_data(s)
    r = d.resources.index(sw.resource)
    for p in sw.points:
        cap = d.capacity.copy()
        cap[r] = p.capacity
        used = d.used(np.array([p.volumes[n] for n in d.products], dtype=float))
        over = np.flatnonzero(used > cap + POINT_TOL * np.maximum(np.abs(cap), 1.0))
        if over.size:
            k = int(over[0])
            unit = f" {s.resources[k].unit}" if s.resources[k].unit else ""
            raise SolverError(f"the sweep's point at {_n(p.capacity)} of {sw.resource} uses {_n(used[k])}{unit} "
                              f"of {d.resources[k]} but it has {_n(cap[k])}{unit}: the re-solve there broke a "
                              "limit, so no sweep is reported (sweep a narrower range, or plan that capacity "
                              "on its own with planner plan)")


def _run_with_progress(s, resource, start, stop, steps, rel_gap, console: Console, quiet: bool) -> Sweep:
    if quiet or not console.is_terminal or steps < 10:
        return run_sweep(s, resource, start, stop, steps, rel_gap)
    from rich.progress import BarColumn, MofNCompleteColumn, Progress, TextColumn, TimeElapsedColumn

    with Progress(TextColumn("sweeping {task.fields[res]}"), BarColumn(), MofNCompleteColumn(),
                  TimeElapsedColumn(), console=console, transient=True) as bar:
        task = bar.add_task("sweep", total=steps + 1, res=resource)
        return run_sweep(s, resource, start, stop, steps, rel_gap,
                         progress=lambda done, total: bar.update(task, completed=done))


def write_csv(sw: Sweep, path: Path) -> Path:
    """One row per point and per breakpoint, in order of capacity; a column per product's volume."""
    from planner.files import write_atomic

    products = list(sw.points[0].volumes) if sw.points else []
    rows = [("point", p.capacity, p.profit, p.shadow_price, p.bottleneck or "", " + ".join(p.slate), "",
             [p.volumes[n] for n in products]) for p in sw.points]
    rows += [("breakpoint", b.capacity, b.profit, b.shadow_price_above, "", "", b.change, [""] * len(products))
             for b in sw.breakpoints]
    rows.sort(key=lambda r: (r[1], r[0] == "point"))

    def write(tmp: Path) -> None:
        with open(tmp, "w", newline="", encoding="utf-8") as f:
            w = csv.writer(f)
            w.writerow(["kind", "capacity", "profit", "shadow_price", "bottleneck", "slate", "change"]
                       + [f"volume: {n}" for n in products])
            for kind, cap, profit, sp, bn, slate, change, vols in rows:
                w.writerow([kind, repr(float(cap)), repr(float(profit)), repr(float(sp)), bn, slate, change]
                           + [repr(float(v)) if v != "" else "" for v in vols])

    return write_atomic(path, write)


def print_sweep(sw: Sweep, console: Console) -> None:
    """The points and the change points as two tables (names with control and invisible characters escaped)."""
    from planner.output.plan import LABOUR_NOTE
    from planner.output.text import display_copy

    sw = display_copy(sw)
    c, unit = sw.currency, f" {sw.unit}" if sw.unit else ""
    t = table(f"Sweep of {escape(sw.resource)}")
    for col in ("capacity", "profit", "shadow price", "bottleneck", "running"):
        t.add_column(col, justify="right" if col in ("capacity", "profit", "shadow price") else "left")
    prev = None
    for p in sw.points:
        running = f"{len(p.slate)}"
        if prev is not None and p.slate != prev:
            running += " [yellow]*[/]"
        prev = p.slate
        t.add_row(qty(p.capacity) + unit, money(p.profit, c), f"{c}{p.shadow_price:,.2f}", escape(p.bottleneck or "—"),
                  running)
    console.print(t)
    console.print("[dim]running: how many products run (* the slate changed since the row above)[/]")
    console.print()
    b = table("Where things change (exact)")
    for col in ("capacity", "profit", "shadow price below → above", "change"):
        b.add_column(col, justify="left" if col == "change" else "right", overflow="fold")
    for x in sw.breakpoints:
        profit = money(x.profit, c) + (f" → {money(x.profit_above, c)}" if x.profit_above is not None else "")
        b.add_row(f"{x.capacity:,.4f}{unit}", profit,
                  f"{c}{x.shadow_price_below:,.2f} → {c}{x.shadow_price_above:,.2f}", escape(x.change))
    if sw.breakpoints:
        console.print(b)
    else:
        console.print("No change of slate, binding limits or bottleneck on this range.")
    st = sw.stats
    resolves = st.get("fast_solves", 0) + st["milp_solves"]

    def count(k: int, what: str) -> str:
        return f"{k} {what}{'' if k == 1 else 's'}"

    console.print(f"[dim]{len(sw.points)} points in {st['seconds']:.2f} s ({count(resolves, 're-solve')} of the "
                  f"mixed-integer plan, {count(st.get('dual_checks', 0), 'change point')} settled by the dual bound, "
                  f"{count(st['qp_solves'], 'QP solve')}, {count(st['slates'], 'slate')}).[/]")
    console.print(f"[dim]{LABOUR_NOTE}[/]")
