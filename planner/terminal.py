"""Terminal rendering of a Plan with rich: tables that stay readable at 80 columns."""

from __future__ import annotations

from rich.console import Console
from rich.markup import escape
from rich.table import Table

from .plan import LABOUR_NOTE, Plan


def money(x: float, currency: str = "$", decimals: int = 0) -> str:
    """'$12,345' style, with a minus sign before the currency for losses."""
    sign = "-" if x < 0 and round(abs(x), decimals) != 0 else ""
    return f"{sign}{currency}{abs(x):,.{decimals}f}"


def qty(x: float | None, decimals: int = 1) -> str:
    """Thousands separators; '—' for a missing value."""
    if x is None:
        return "—"
    if abs(x) >= 1000 or decimals == 0:
        return f"{x:,.0f}"
    return f"{x:,.{decimals}f}"


def price(x: float, currency: str) -> str:
    return f"{currency}{x:,.2f}"


def status_line(p: Plan) -> str:
    state = {"optimal": "[green]optimal[/]", "time_limit": "[yellow]time limit reached[/]"}.get(
        p.status, f"[red]{p.status}[/]")
    return (f"[bold]{p.scenario}[/] — {state}; profit [bold]{money(p.profit, p.currency)}[/] per {p.period}, "
            f"bound {money(p.bound, p.currency)}, gap {p.gap:.2e}")


def products_table(p: Plan) -> Table:
    c = p.currency
    t = Table(title="Products", title_justify="left", show_edge=False, pad_edge=False, header_style="bold")
    for col in ("product", "run", "volume", "price", "revenue", "contrib.", "fixed", "profit"):
        t.add_column(col, justify="left" if col in ("product", "run") else "right", no_wrap=col != "product",
                     overflow="fold")
    for x in p.products:
        run = "yes" if x.running else "[red]off[/]"
        if x.must_run:
            run = "must"
        t.add_row(x.name, run, qty(x.volume), price(x.price, c) if x.volume > 0 else "—",
                  money(x.revenue, c), money(x.contribution, c), money(x.fixed_cost, c), money(x.profit, c))
    return t


def resources_table(p: Plan) -> Table:
    c = p.currency
    t = Table(title="Resources", title_justify="left", show_edge=False, pad_edge=False, header_style="bold")
    for col in ("resource", "used", "capacity", "util.", "shadow price"):
        t.add_column(col, justify="left" if col == "resource" else "right", no_wrap=col != "resource")
    for r in p.resources:
        unit = f" {r.unit}" if r.unit else ""
        mark = " [bold red]◆[/]" if r.binding else ""
        sp = f"{c}{r.shadow_price:,.2f}/{r.unit or 'unit'}" if r.shadow_price > 0 else "0"
        t.add_row(r.name + mark, qty(r.used) + unit, qty(r.capacity) + unit, f"{100 * r.utilisation:.0f}%", sp)
    return t


def standalone_table(p: Plan) -> Table:
    c = p.currency
    t = Table(title="Standalone economics (no shared limits)", title_justify="left", show_edge=False,
              pad_edge=False, header_style="bold")
    for col in ("product", "best vol.", "price", "best profit", "max-rev vol.", "break-even vols"):
        t.add_column(col, justify="left" if col in ("product", "break-even vols") else "right")
    for x in p.products:
        s = x.standalone
        be = " – ".join(qty(v) if v is not None else "∞" for v in s.break_even) if s.break_even else "never"
        t.add_row(x.name, qty(s.optimal_volume), price(s.optimal_price, c) if s.optimal_price is not None else "—",
                  money(s.max_profit, c) if s.max_profit is not None else "—", qty(s.max_revenue_volume), be)
    return t


def print_plan(p: Plan, console: Console | None = None, standalone: bool = True) -> None:
    """Print the whole plan: status, products, resources, standalone economics, notes."""
    con = console or Console()
    con.print(status_line(p))
    con.print()
    con.print(products_table(p))
    if p.plant_fixed_cost:
        con.print(f"Plant-wide fixed cost: {money(p.plant_fixed_cost, p.currency)}")
    con.print()
    if p.resources:
        con.print(resources_table(p))
        binding = p.bottlenecks
        if binding:
            top = binding[0]
            con.print(f"Bottleneck: [bold]{top.name}[/] — one more {top.unit or 'unit'} is worth "
                      f"{p.currency}{top.shadow_price:,.2f} of profit (for a small change; re-solve for a shift).")
        con.print()
    if standalone:
        con.print(standalone_table(p))
        con.print()
    for w in p.warnings:
        con.print(f"[yellow]warning:[/] {escape(w)}")  # warnings name products[x]: not markup
    for m in p.solver.get("messages", []):
        con.print(f"[yellow]note:[/] {m}")
    con.print(f"[dim]{LABOUR_NOTE}[/]")
