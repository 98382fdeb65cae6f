"""Terminal tables of the capacity analysis (ranges, options, the joint pick)."""

from __future__ import annotations

from rich.console import Console
from rich.markup import escape
from rich.table import Table

from planner.output.plan import Plan
from planner.output.text import table, money, qty


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


def options_table(p: Plan) -> Table:
    """Each option valued on its own by re-solving, beside the shadow-price estimate."""
    c = p.currency
    t = table("Capacity options, each on its own (re-solved)")
    for col in ("option", "cost", "gain", "net gain", "break-even", "λ×amount"):
        t.add_column(col, justify="left" if col == "option" else "right", overflow="fold",
                     no_wrap=col != "option")
    for o in p.extras.get("options", []):
        name = escape(o["name"])
        if o["kind"] == "part":
            name += f" ({100 * o['used']:.3g}% used)"
        be = money(o["break_even_cost"], c)
        net = money(o["net_gain"], c)
        net = f"[green]{net}[/]" if o["pays"] else f"[red]{net}[/]" if o["net_gain"] < 0 else net
        t.add_row(name, money(o["cost"], c), money(o["gain"], c), net, be, money(o["estimate"], c))
    return t


def print_capacity(p: Plan, console: Console) -> None:
    """Print the ranges, the options and the joint pick (if any); print_plan adds the labour caution."""
    if any(r.shadow_price_range is not None for r in p.resources):
        if any(r.shadow_price > 0 for r in p.resources):
            console.print(ranges_table(p))
        for line in range_notes(p):
            console.print(escape(line))
        console.print()
    if p.extras.get("options"):
        console.print(options_table(p))
        for o in p.extras["options"]:
            if o["slate_change"]:
                console.print(escape(f"{o['name']} changes the slate: {o['slate_change']}"))
        console.print("[dim]gain: profit with the option less profit without, before its cost; break-even: "
                      "the cost at which all of it just pays; λ×amount: shadow price × amount, the "
                      "small-change estimate.[/]")
        pick = p.extras.get("option_pick")
        if pick is not None:
            c = p.currency
            names = ", ".join(f"{x['name']} ({100 * x['used']:.4g}%)" for x in pick["picked"]) or "none"
            console.print(f"Best set of options chosen together: [bold]{names}[/] — profit "
                          f"{money(pick['profit'], c)} after their cost {money(pick['cost'], c)}, "
                          f"net gain {money(pick['net_gain'], c)}"
                          + (f"; slate: {pick['slate_change']}" if pick["slate_change"] else ""))
        console.print()
