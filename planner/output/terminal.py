"""Terminal rendering of a Plan with rich: tables that stay readable at 80 columns."""

from __future__ import annotations

from rich.console import Console
from rich.markup import escape
from rich.table import Table

from planner.output.plan import LABOUR_NOTE, Plan, ProductPlan
from planner.output.text import add_column, display_copy, fit_table, money, price, qty, table
from planner.scenario.schema import Scenario


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


def sold_price(x: ProductPlan) -> float | None:
    """The price shown for a product: the rule for every output is "no sale, no price".

    A product that sells nothing (volume 0: shut down, or running at zero) charges no price, so
    none is shown ('—' here and in the report page; the JSON and the workbook should carry null /
    an empty cell).  The line's value at volume 0 is its ``price_intercept``, which the scenario
    already states: it is not a price the plan charges.
    """
    return x.sold_price


def run_label(x: ProductPlan, scenario: Scenario | None = None) -> str:
    """Why a product runs: 'must' (must_run: may not be shut down), 'committed' (its min_volume > 0, or a
    final_stock beyond its initial stock, makes it run), 'yes' (chosen to run) or 'off' (shut down)."""
    if x.must_run:
        return "committed" if x.forced in ("min_volume", "final_stock") else "must"
    return "yes" if x.running else "[red]off[/]"


def products_table(p: Plan, console: Console | None = None, scenario: Scenario | None = None,
                   title: str = "Products") -> Table:
    """Products in the plan; narrow consoles drop contribution, then revenue."""
    c = p.currency

    def build(drop: set[str], width: int | None) -> Table:
        t = table(title)
        cols = [x for x in ("product", "run", "volume", "price", "revenue", "contrib.", "fixed", "profit")
                if x not in drop]
        for col in cols:
            add_column(t, col, left=col in ("product", "run"), name=col == "product", name_width=width)
        for x in shown_products(p):
            sold = sold_price(x)
            cells = {"product": escape(x.name), "run": run_label(x, scenario), "volume": qty(x.volume),
                     "price": price(sold, c) if sold is not None else "—", "revenue": money(x.revenue, c),
                     "contrib.": money(x.contribution, c), "fixed": money(x.fixed_cost, c),
                     "profit": money(x.profit, c)}
            t.add_row(*(cells[k] for k in cols))
        return t

    return fit_table(build, console, ["contrib.", "revenue", "fixed"])


def resources_table(p: Plan, console: Console | None = None, title: str = "Resources") -> Table:
    """Resources with use, capacity, utilisation, shadow price (and its capacity range when known)."""
    c = p.currency
    has_range = any(getattr(r, "shadow_price_range", None) for r in p.resources)

    def build(drop: set[str], width: int | None) -> Table:
        t = table(title)
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


def label_note(p: Plan, scenario: Scenario | None) -> str:
    """The key to the 'run' labels and the '—' prices that appear in the products table ('' if none)."""
    labels = {run_label(x, scenario) for x in shown_products(p)}
    parts = []
    if "must" in labels:
        parts.append("must: must_run, may not be shut down")
    if "committed" in labels:
        why = {x.forced for x in shown_products(p) if run_label(x, scenario) == "committed"}
        parts.append("committed: its " + " or ".join(f for f in ("min_volume", "final_stock") if f in why)
                     + " makes it run")
    if any(sold_price(x) is None for x in shown_products(p)):
        parts.append("price —: nothing sold, so no price")
    return "; ".join(parts)


def chosen_options_table(pick: dict, chosen: Plan) -> Table:
    """The options picked together: share used, capacity added, cost."""
    c = chosen.currency
    units = {r.name: r.unit for r in chosen.resources}
    t = table("Options chosen together")
    for col in ("option", "used", "adds", "cost"):
        t.add_column(col, justify="left" if col in ("option", "adds") else "right", overflow="fold",
                     no_wrap=col not in ("option", "adds"))
    for x in pick["picked"]:
        adds = ", ".join(f"{escape(r)} +{qty(a)}{' ' + escape(units.get(r, '')) if units.get(r) else ''}"
                         for r, a in x["adds"].items())
        t.add_row(escape(x["name"]), f"{100 * x['used']:.4g}%", adds, money(x["cost"], c))
    return t


def print_chosen(pick: dict, chosen: Plan, con: Console, scenario: Scenario | None = None) -> None:
    """The plan with the options chosen together (--choose-options): the options, then its products and
    resources with the options' capacity added.  ``chosen`` is that plan (profit before the options' cost)."""
    chosen = display_copy(chosen)
    c = chosen.currency
    if not pick["picked"]:
        con.print("No set of capacity options pays: the plan above stands.")
        con.print()
        return
    con.print(f"[bold]The plan with the options chosen together[/] (their capacity added): profit "
              f"{money(chosen.profit, c)} before their cost, certified gap {chosen.gap:.2e}")
    con.print()
    con.print(chosen_options_table(pick, chosen))
    con.print()
    con.print(products_table(chosen, con, scenario, title="Products, with the options"))
    note = label_note(chosen, scenario)
    if note:
        con.print(f"[dim]{note}[/]")
    con.print()
    if chosen.resources:
        con.print(resources_table(chosen, con, title="Resources, with the options' capacity added"))
        con.print()


def shared_cost_lines(p: Plan) -> list[str]:
    """The answer on shared fixed costs: which product groups run, which resources close (escaped text)."""
    out = []
    if p.groups:
        parts = [f"{escape(g.name)} {'runs' if g.running else 'stopped'} ({money(g.fixed_cost, p.currency)}"
                 f"{'' if g.running else ' saved'})" for g in p.groups]
        out.append("Product groups: " + " · ".join(parts))
    closed = [r for r in p.resources if not r.open]
    if closed:
        out.append("Closed: " + " · ".join(f"[bold]{escape(r.name)}[/] (saves {money(r.fixed_cost, p.currency)}; "
                                            "nothing that needs it is made)" for r in closed))
    paid = sum(r.fixed_cost for r in p.resources if r.open)
    if paid:
        out.append(f"Resource fixed costs paid: {money(paid, p.currency)}")
    return out


def print_plan(p: Plan, console: Console | None = None, standalone: bool = True, scenario: Scenario | None = None,
               chosen: Plan | None = None) -> None:
    """Print the whole plan: status, products, resources, capacity analysis, the plan with the options
    chosen (``chosen``, from --choose-options), standalone economics, notes.

    ``scenario`` (optional) tells the 'run' labels apart: must (must_run) or committed (min_volume).
    Names and texts are shown with control and invisible characters escaped (a name cannot move the
    cursor or retitle the window); narrow terminals wrap names, then leave columns out and say so.
    """
    con = console or Console()
    p = display_copy(p)
    con.print(status_line(p))
    for line in shared_cost_lines(p):
        con.print(line)
    con.print()
    con.print(products_table(p, con, scenario))
    note = label_note(p, scenario)
    if note:
        con.print(f"[dim]{note}[/]")
    if len(p.products) > MAX_ROWS:
        running = sum(x.running for x in p.products)
        con.print(f"[dim]… the {MAX_ROWS} most profitable of {len(p.products):,} products shown "
                  f"({running:,} running, {len(p.products) - running:,} shut down); every product is in --json "
                  "and the report.[/]")
    if "periods" in p.extras:  # a plan over several periods: the months, compactly
        from planner.output.periods import months_tables

        standalone = False  # (the standalone economics are one period's view: in --json only)
        for t in months_tables(p, con):
            con.print()
            con.print(t)
    if p.plant_fixed_cost:
        con.print(f"Plant-wide fixed cost: {money(p.plant_fixed_cost, p.currency)}")
    con.print()
    if p.resources:
        con.print(resources_table(p, con))
        binding = p.bottlenecks
        if binding:
            top = binding[0]
            con.print(f"Bottleneck: [bold]{escape(top.name)}[/] — one more {escape(top.unit or 'unit')} is worth "
                      f"{money(top.shadow_price, p.currency, 2)} of profit, 1 % more capacity about "
                      f"{money(top.value_of_one_percent, p.currency)} (for a small change; re-solve for a shift). "
                      "[dim]The bottleneck is the binding limit whose extra 1 % is worth most, whatever its unit.[/]")
        con.print()
    if any(getattr(r, "shadow_price_range", None) is not None for r in p.resources) or p.extras.get("options"):
        from planner.output.capacity import print_capacity

        print_capacity(p, con)
    from planner.output.decisions import print_decisions

    print_decisions(p, con)
    if chosen is not None and p.extras.get("option_pick") is not None:
        print_chosen(p.extras["option_pick"], chosen, con, scenario)
    if standalone:
        con.print(standalone_table(p, con))
        con.print()
    for w in p.warnings:
        con.print(f"[yellow]warning:[/] {escape(w)}")  # warnings name products[x]: not markup
    if p.status != "optimal":  # how the search ended matters then; otherwise it is in --json
        for m in p.solver.get("messages", []):
            con.print(f"[yellow]note:[/] {escape(m)}")
    con.print(f"[dim]{LABOUR_NOTE}[/]")
