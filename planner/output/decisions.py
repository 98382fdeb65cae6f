"""The terminal's product-range table: each product's decision, ranked by what reversing it would cost.

Reads the ``decision`` entries the decision analysis (planner.analysis.decisions) put on the
Plan's products.  A decision is flagged *marginal* where reversing it costs less than
``marginal_share`` of the plan's profit (1 %) or no more than the certified gap: either way the
plan's numbers do not settle it, and a planner should weigh it on other grounds.
"""

from __future__ import annotations

from rich.console import Console
from rich.markup import escape
from rich.table import Table

from planner.output.plan import Plan
from planner.output.text import add_column, fit_table, money, price, table


def marginal(p: Plan, cost: float | None) -> bool:
    """Is a decision whose reversal costs ``cost`` (currency) worth little? (None: not known, not flagged.)"""
    if cost is None:
        return False
    info = p.extras.get("decisions", {})
    return cost < info.get("marginal_share", 0.01) * abs(p.profit) or cost <= info.get("gap", 0.0)


def ranked(p: Plan) -> list:
    """Products with a decision entry, the cheapest reversal first (those without a value last)."""
    xs = [x for x in p.products if x.decision is not None]
    return sorted(xs, key=lambda x: (x.decision.get("cost_of_reversal") is None,
                                     x.decision.get("cost_of_reversal") or 0.0))


def decisions_table(p: Plan, console: Console | None = None, title: str = "Product decisions") -> Table:
    """Run or stop, the cost of reversing it, the intercept where it flips, contribution per bottleneck unit."""
    c = p.currency
    neck = p.extras.get("decisions", {}).get("bottleneck")

    def build(drop: set[str], width: int | None) -> Table:
        t = table(title)
        cols = [x for x in ("product", "decision", "reversal costs", "flips at intercept", "per bottleneck unit",
                            "note") if x not in drop]
        for col in cols:
            add_column(t, col, left=col in ("product", "decision", "note"), name=col == "product", name_width=width)
        for x in ranked(p):
            e = x.decision
            cost = e.get("cost_of_reversal")
            flag = marginal(p, cost)
            sw, per = e.get("switch_intercept"), e.get("contribution_per_bottleneck_unit")
            note = "[bold yellow]marginal[/]" if flag else ""
            if not e.get("decision_checked", True):
                note = "not analysed"
            elif cost is None and e.get("decision_note"):
                note = escape(e["decision_note"])
            cells = {"product": escape(x.name), "decision": "run" if x.running else "stop",
                     "reversal costs": money(cost, c) if cost is not None else "—",
                     "flips at intercept": price(sw, c) if sw is not None else "—",
                     "per bottleneck unit": money(per, c, 2) if per is not None else "—", "note": note}
            t.add_row(*(cells[k] for k in cols))
        return t

    t = fit_table(build, console, ["note", "per bottleneck unit", "flips at intercept"])
    if neck and any(str(c.header) == "per bottleneck unit" for c in t.columns):  # the key, under the column shown
        key = f"per bottleneck unit: (price − unit cost) per unit of {escape(neck)}"
        t.caption = f"{t.caption}\n{key}" if t.caption else key
    return t


def print_decisions(p: Plan, con: Console) -> None:
    """The table and a line naming the marginal decisions (nothing if the analysis was not run)."""
    if not any(x.decision is not None and x.decision.get("decision_checked") for x in p.products):
        return
    con.print(decisions_table(p, con))
    few = [x.name for x in ranked(p) if marginal(p, x.decision.get("cost_of_reversal"))]
    if few:
        con.print(f"Decisions worth little (reversal costs under 1 % of profit or within the gap): "
                  f"{escape(', '.join(few[:8]))}{' …' if len(few) > 8 else ''}")
    con.print()
