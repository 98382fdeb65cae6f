"""The ``planner sweep`` command: profit, shadow price and mix along one resource's capacity."""

from __future__ import annotations

import csv
import json
from pathlib import Path

import click
from rich.console import Console
from rich.markup import escape

from planner.output.text import table, money, qty
from planner.analysis.capacity.sweep import Sweep, run_sweep


def register(main: click.Group) -> None:
    """Add ``sweep`` to the command group."""
    from planner.cli.main import console, friendly

    @main.command("sweep")
    @click.argument("scenario", type=click.Path(path_type=Path))
    @click.option("--resource", required=True, help="Name of the resource whose capacity is swept.")
    @click.option("--from", "start", type=click.FloatRange(min=0), default=None,
                  help="Capacity to start from (default: the scenario's capacity).")
    @click.option("--to", "stop", type=click.FloatRange(min=0), required=True, help="Capacity to sweep to.")
    @click.option("--steps", type=click.IntRange(min=1, max=100000), default=20, show_default=True,
                  help="Number of equal steps (points = steps + 1).")
    @click.option("--gap", "rel_gap", type=click.FloatRange(min=1e-12, max=1e-2), default=1e-7, show_default=True,
                  help="Certified relative gap of each re-solve.")
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
        sw = _run_with_progress(s, resource, start, stop, steps, rel_gap, console, quiet)
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
    """The points and the change points as two tables."""
    from planner.output.plan import LABOUR_NOTE

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
        t.add_row(qty(p.capacity) + unit, money(p.profit, c), f"{c}{p.shadow_price:,.2f}", p.bottleneck or "—",
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
                  f"{c}{x.shadow_price_below:,.2f} → {c}{x.shadow_price_above:,.2f}", x.change)
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
