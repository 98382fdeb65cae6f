"""Terminal tables of the capacity analysis (ranges, options, the joint pick)."""

from __future__ import annotations

from rich.console import Console
from rich.markup import escape
from rich.table import Table

from planner.output.plan import Plan
from planner.output.text import add_column, fit_table, money, qty, table


def _cap(x: float | None, unit: str) -> str:
    return "no end" if x is None else f"{qty(x)}{' ' + unit if unit else ''}"


def ranges_table(p: Plan) -> Table:
    """Shadow price, its rate of change and the capacity range of each binding resource."""
    c = p.currency
    t = table("Shadow prices and their ranges")
    for col in ("resource", "shadow price", "change per unit", "holds from", "to"):
        t.add_column(col, justify="left" if col == "resource" else "right", no_wrap=col != "resource")
    for r in p.resources:
        if r.shadow_price_range is None or r.shadow_price <= 0:
            continue
        lo, hi = r.shadow_price_range
        slope = f"{r.shadow_price_slope:+,.4g}" if r.shadow_price_slope else "0"
        t.add_row(escape(r.name), f"{money(r.shadow_price, c, 2)}/{escape(r.unit or 'unit')}", slope, _cap(lo, r.unit), _cap(hi, r.unit))
    return t


def range_notes(p: Plan) -> list[str]:
    """Why each binding resource's range ends, and the slack resources in one line."""
    out = []
    for r in p.resources:
        if r.shadow_price_range is None or r.shadow_price <= 0:
            continue
        lo, hi = r.shadow_price_range
        parts = []
        if lo is not None and r.range_low_reason:
            parts.append(f"below {_cap(lo, r.unit)}: {r.range_low_reason}")
        if hi is not None and r.range_high_reason:
            parts.append(f"above {_cap(hi, r.unit)}: {r.range_high_reason}")
        if parts:
            out.append(f"{r.name} — " + "; ".join(parts))
    slack = [f"{r.name} (down to {_cap(r.shadow_price_range[0], r.unit)})" for r in p.resources
             if r.shadow_price_range is not None and r.shadow_price <= 0]
    if slack:
        out.append("Worth nothing extra (shadow price 0, until cut to the amount shown): " + ", ".join(slack))
    return out


def _unit_of(p: Plan, o: dict) -> str:
    units = {r.name: r.unit for r in p.resources}
    found = {units.get(k, "") for k in (o.get("adds") or {})}
    return found.pop() if len(found) == 1 else ""


def option_rate(o: dict) -> float | None:
    """Cost per unit of an option usable in part: its ``cost_per_unit`` where given (see
    :func:`add_option_rates`), else its cost over the amount used; None if neither is known."""
    if o.get("kind") != "part":
        return None
    if o.get("cost_per_unit") is not None:
        return float(o["cost_per_unit"])
    amount = sum((o.get("adds") or {}).values()) * (o.get("used") or 0.0)
    return o["cost"] / amount if amount > 0 and o.get("cost") is not None else None


def add_option_rates(p: Plan, scenario) -> None:
    """Give each part-usable option in ``p.extras['options']`` its ``cost_per_unit`` from the scenario
    (currency per resource unit), where the analysis has not."""
    rates = {o.name: o.cost_per_unit for o in scenario.options if o.adds_up_to is not None}
    for o in p.extras.get("options", []):
        if o.get("kind") == "part" and o.get("cost_per_unit") is None and rates.get(o.get("name")) is not None:
            o["cost_per_unit"] = rates[o["name"]]


def options_table(p: Plan, console: Console | None = None) -> Table:
    """Each option valued on its own by re-solving, beside the shadow-price estimate.

    An option usable in part shows its rate (cost per unit) and its break-even rate (the cost per unit at
    which all of it just pays); an all-or-nothing one its cost and the cost at which it just pays."""
    c = p.currency

    def build(drop: set[str], width: int | None) -> Table:
        t = table("Capacity options, each on its own (re-solved)")
        cols = [x for x in ("option", "rate", "cost", "gain", "net gain", "break-even", "λ×amount") if x not in drop]
        for col in cols:
            add_column(t, col, left=col == "option", name=col == "option", name_width=width)
        for o in p.extras.get("options", []):
            name = escape(o["name"])
            unit = escape(_unit_of(p, o) or "unit")
            rate = option_rate(o)
            if o["kind"] == "part":
                name += f" ({100 * o['used']:.3g}% used)"
                be_rate = o.get("break_even_cost_per_unit")
                be = f"{money(be_rate, c, 2)}/{unit}" if be_rate is not None else money(o["break_even_cost"], c)
                rate_text = f"{money(rate, c, 2)}/{unit}" if rate is not None else "—"
            else:
                be, rate_text = money(o["break_even_cost"], c), "one price"
            net = money(o["net_gain"], c)
            net = f"[green]{net}[/]" if o["pays"] else f"[red]{net}[/]" if o["net_gain"] < 0 else net
            cells = {"option": name, "rate": rate_text, "cost": money(o["cost"], c), "gain": money(o["gain"], c),
                     "net gain": net, "break-even": be, "λ×amount": money(o["estimate"], c)}
            t.add_row(*(cells[k] for k in cols))
        return t

    return fit_table(build, console, ["λ×amount", "gain"])


def print_capacity(p: Plan, console: Console) -> None:
    """Print the ranges, the options and the joint pick (if any); print_plan adds the labour caution."""
    if any(r.shadow_price_range is not None for r in p.resources):
        if any(r.shadow_price > 0 for r in p.resources):
            console.print(ranges_table(p))
        for line in range_notes(p):
            console.print(escape(line))
        console.print()
    if p.extras.get("options"):
        console.print(options_table(p, console))
        for o in p.extras["options"]:
            if o["slate_change"]:
                console.print(escape(f"{o['name']} changes the slate: {o['slate_change']}"))
        console.print("[dim]rate: cost per unit of an option usable in part; gain: profit with the option less "
                      "profit without, before its cost; break-even: the cost at which all of it just pays (per "
                      "unit, for an option usable in part); λ×amount: shadow price × amount, the small-change "
                      "estimate.[/]")
        if not any(o["pays"] for o in p.extras["options"]):
            console.print("No capacity option pays: none adds more profit than it costs.")
        pick = p.extras.get("option_pick")
        if pick is not None:
            c = p.currency
            names = ", ".join(f"{x['name']} ({100 * x['used']:.4g}%)" for x in pick["picked"]) or "none"
            console.print(f"Best set of options chosen together: [bold]{names}[/] — profit "
                          f"{money(pick['profit'], c)} after their cost {money(pick['cost'], c)}, "
                          f"net gain {money(pick['net_gain'], c)}"
                          + (f"; slate: {pick['slate_change']}" if pick["slate_change"] else ""))
        console.print()
