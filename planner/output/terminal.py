"""Terminal rendering of a Plan with rich: tables that stay readable at 80 columns."""

from __future__ import annotations

from rich.console import Console
from rich.markup import escape
from rich.table import Table

from planner.output.plan import LABOUR_NOTE, Plan
from planner.output.text import add_column, display_copy, fit_table, money, price, qty, table


def status_line(p: Plan) -> str:
    """Two short lines: the scenario and its status, then profit, bound and gap."""
    state = {"optimal": "[green]optimal[/]", "time_limit": "[yellow]time limit reached[/]"}.get(
        p.status, f"[red]{escape(p.status)}[/]")
    return (f"[bold]{escape(p.scenario)}[/] — {state}\n"
            f"profit [bold]{money(p.profit, p.currency)}[/] per {escape(p.period)} · "
            f"bound {money(p.bound, p.currency)} · gap {p.gap:.2e}")


#: Most product rows printed in the terminal; larger plans show the most profitable (all are in --json).
MAX_ROWS = 40


def shown_products(p: Plan) -> list:
    """The products printed: all of them, or the MAX_ROWS most profitable of a large plan, in plan order."""
    if len(p.products) <= MAX_ROWS:
        return list(p.products)
    keep = set(sorted(range(len(p.products)), key=lambda k: -p.products[k].profit)[:MAX_ROWS])
    return [x for k, x in enumerate(p.products) if k in keep]


def products_table(p: Plan, console: Console | None = None) -> Table:
    """Products in the plan; narrow consoles drop contribution, then revenue."""
    c = p.currency

    def build(drop: set[str], width: int | None) -> Table:
        t = table("Products")
        cols = [x for x in ("product", "run", "volume", "price", "revenue", "contrib.", "fixed", "profit")
                if x not in drop]
        for col in cols:
            add_column(t, col, left=col in ("product", "run"), name=col == "product", name_width=width)
        for x in shown_products(p):
            run = "must" if x.must_run else ("yes" if x.running else "[red]off[/]")
            cells = {"product": escape(x.name), "run": run, "volume": qty(x.volume),
                     "price": price(x.price, c) if x.volume > 0 else "—", "revenue": money(x.revenue, c),
                     "contrib.": money(x.contribution, c), "fixed": money(x.fixed_cost, c),
                     "profit": money(x.profit, c)}
            t.add_row(*(cells[k] for k in cols))
        return t

    return fit_table(build, console, ["contrib.", "revenue", "fixed"])


def resources_table(p: Plan, console: Console | None = None) -> Table:
    """Resources with use, capacity, utilisation, shadow price (and its capacity range when known)."""
    c = p.currency
    has_range = any(getattr(r, "shadow_price_range", None) for r in p.resources)

    def build(drop: set[str], width: int | None) -> Table:
        t = table("Resources")
        cols = [x for x in ("resource", "used", "capacity", "util.", "shadow price", "holds for")
                if x not in drop and (x != "holds for" or has_range)]
        for col in cols:
            add_column(t, col, left=col == "resource", name=col == "resource", name_width=width)
        for r in p.resources:
            unit = f" {escape(r.unit)}" if r.unit else ""
            mark = " [bold red]◆[/]" if r.binding else ""
            sp = f"{money(r.shadow_price, c, 2)}/{escape(r.unit or 'unit')}" if r.shadow_price > 0 else "0"
            rng = getattr(r, "shadow_price_range", None)
            held = (f"{qty(rng[0])}–{qty(rng[1]) if rng[1] is not None else '∞'}" if rng else "—")
            cells = {"resource": escape(r.name) + mark, "used": qty(r.used) + unit, "capacity": qty(r.capacity) + unit,
                     "util.": f"{100 * r.utilisation:.0f}%", "shadow price": sp, "holds for": held}
            t.add_row(*(cells[k] for k in cols))
        return t

    return fit_table(build, console, ["holds for"])


def standalone_table(p: Plan, console: Console | None = None) -> Table:
    """Each product's standalone economics (no shared limits)."""
    c = p.currency

    def build(drop: set[str], width: int | None) -> Table:
        t = table("Standalone economics (no shared limits)")
        cols = [x for x in ("product", "best vol.", "price", "best profit", "max-rev vol.", "break-even")
                if x not in drop]
        for col in cols:
            add_column(t, col, left=col in ("product", "break-even"), name=col == "product", name_width=width)
        for x in shown_products(p):
            s = x.standalone
            be = " – ".join(qty(v) if v is not None else "∞" for v in s.break_even) if s.break_even else "never"
            cells = {"product": escape(x.name), "best vol.": qty(s.optimal_volume),
                     "price": price(s.optimal_price, c) if s.optimal_price is not None else "—",
                     "best profit": money(s.max_profit, c) if s.max_profit is not None else "—",
                     "max-rev vol.": qty(s.max_revenue_volume), "break-even": be}
            t.add_row(*(cells[k] for k in cols))
        return t

    return fit_table(build, console, ["max-rev vol.", "price"])


def print_plan(p: Plan, console: Console | None = None, standalone: bool = True) -> None:
    """Print the whole plan: status, products, resources, standalone economics, notes.

    Names and texts are shown with control and invisible characters escaped (a name cannot move the
    cursor or retitle the window); narrow terminals wrap names, then leave columns out and say so."""
    con = console or Console()
    p = display_copy(p)
    con.print(status_line(p))
    con.print()
    con.print(products_table(p, con))
    if len(p.products) > MAX_ROWS:
        running = sum(x.running for x in p.products)
        con.print(f"[dim]… the {MAX_ROWS} most profitable of {len(p.products):,} products shown "
                  f"({running:,} running, {len(p.products) - running:,} shut down); every product is in --json "
                  "and the report.[/]")
    if p.plant_fixed_cost:
        con.print(f"Plant-wide fixed cost: {money(p.plant_fixed_cost, p.currency)}")
    con.print()
    if p.resources:
        con.print(resources_table(p, con))
        binding = p.bottlenecks
        if binding:
            top = binding[0]
            con.print(f"Bottleneck: [bold]{escape(top.name)}[/] — one more {escape(top.unit or 'unit')} is worth "
                      f"{money(top.shadow_price, p.currency, 2)} of profit (for a small change; re-solve for a shift).")
        con.print()
    if any(getattr(r, "shadow_price_range", None) is not None for r in p.resources) or p.extras.get("options"):
        from planner.output.capacity import print_capacity

        print_capacity(p, con)
    if standalone:
        con.print(standalone_table(p, con))
        con.print()
    for w in p.warnings:
        con.print(f"[yellow]warning:[/] {escape(w)}")  # warnings name products[x]: not markup
    if p.status != "optimal":  # how the search ended matters then; otherwise it is in --json
        for m in p.solver.get("messages", []):
            con.print(f"[yellow]note:[/] {escape(m)}")
    con.print(f"[dim]{LABOUR_NOTE}[/]")
