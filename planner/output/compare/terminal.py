"""``planner compare`` in the terminal: one table, a column per variant (the base first).

Rows: profit, change against the base, status and certified gap, products that start and stop,
the bottleneck and its shadow price.  Under it: what each variant changes, why a variant has no
plan, and the labour note where a variant takes an option or changes a work centre's hours.
Reads the comparison's JSON (``Comparison.to_dict()``), names shown with control and invisible
characters escaped.
"""

from __future__ import annotations

from typing import Any

from rich.console import Console
from rich.markup import escape

from planner.output.plan import LABOUR_NOTE
from planner.output.text import display_copy, money, price, table


def bottleneck(v: dict[str, Any]) -> dict[str, Any] | None:
    """The variant's bottleneck (its binding limit whose extra 1 % is worth most), or None."""
    return v["bottlenecks"][0] if v.get("bottlenecks") else None


def decisions(v: dict[str, Any]) -> tuple[list[str], list[str]]:
    """(products that start, products that stop) against the base."""
    starts = [c["product"] for c in v.get("changed_decisions", []) if c["running"]]
    stops = [c["product"] for c in v.get("changed_decisions", []) if not c["running"]]
    return starts, stops


def status_text(v: dict[str, Any]) -> str:
    """'optimal (gap 0.00 %)', 'time limit (gap 2.10 %)' or 'infeasible'."""
    if v.get("profit") is None:
        return v["status"]
    name = {"optimal": "optimal", "time_limit": "time limit"}.get(v["status"], v["status"])
    return f"{name} (gap {100 * v['gap']:.2f} %)"


def rows(data: dict[str, Any]) -> list[tuple[str, list[str]]]:
    """The table's rows: (label, one cell per column, base first)."""
    cur = data["currency"]
    cols = [data["base"]] + data["variants"]

    def cell(v: dict[str, Any], what: str) -> str:
        if v.get("profit") is None and what != "status":
            return "—"
        neck = bottleneck(v)
        starts, stops = decisions(v)
        if what == "profit":
            return money(v["profit"], cur)
        if what == "change":
            return "" if "profit_change" not in v else ("+" if v["profit_change"] > 0.5 else "") + \
                money(v["profit_change"], cur)
        if what == "status":
            return status_text(v)
        if what == "starts":
            return ", ".join(starts) or ("" if v is data["base"] else "none")
        if what == "stops":
            return ", ".join(stops) or ("" if v is data["base"] else "none")
        if what == "bottleneck":
            return neck["name"] if neck else "none binds"
        unit = f"/{neck['unit']}" if neck and neck["unit"] else ""
        return f"{price(neck['shadow_price'], cur)}{unit}" if neck else "—"

    labels = [("profit", f"profit per {data['period']}"), ("change", "change"), ("status", "status"),
              ("starts", "starts"), ("stops", "stops"), ("bottleneck", "bottleneck"), ("shadow", "its shadow price")]
    return [(label, [cell(v, key) for v in cols]) for key, label in labels]


def print_comparison(data: dict[str, Any], console: Console) -> None:
    """The comparison in the terminal (see the module docstring)."""
    data = display_copy(data)
    cols = [data["base"]] + data["variants"]
    run = data.get("run", {})
    console.print(f"[bold]{escape(data['base']['name'])}[/] — {len(data['variants'])} "
                  f"variant{'s' if len(data['variants']) != 1 else ''} beside the base "
                  f"({run.get('seconds', 0):.1f} s, {escape(str(run.get('scheduler', '')))})")
    t = table("Comparison")
    t.add_column("", justify="left", no_wrap=True)
    for k, v in enumerate(cols):
        t.add_column(("base: " if k == 0 and "file" not in v else "") + v["name"], justify="right", overflow="fold")
    for label, cells in rows(data):
        t.add_row(label, *cells)
    console.print(t)
    for v in data["variants"]:
        what = "; ".join(v.get("changes") or []) or v.get("file", "")
        desc = f" — {v['description']}" if v.get("description") else ""
        console.print(f"[bold]{escape(v['name'])}[/]{escape(desc)}: {escape(what)}", soft_wrap=True)
        if v.get("profit") is None:
            console.print(f"  [yellow]no plan:[/] {escape(v.get('message', ''))}", soft_wrap=True)
        for w in v.get("warnings", []):
            console.print(f"  [yellow]warning:[/] {escape(w)}", soft_wrap=True)
    if any(v.get("labour_note") for v in data["variants"]):
        console.print(f"[dim]{escape(LABOUR_NOTE)}[/]")
    console.print("[dim]Profits after the plant-wide fixed cost and the cost of any option a variant takes; "
                  "see --json for every product and resource.[/]")
