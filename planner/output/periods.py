"""The Plan of a scenario over several periods: horizon totals in the usual fields, the months beside them.

Each product's usual fields are the horizon's: ``volume`` the units sold over
every period, ``revenue`` Σ price_t·sold_t, ``variable_cost`` making and
holding (Σ unit_cost_t·made_t + Σ holding_cost_t·stock_t), ``price`` the
average price of what was sold; ``standalone`` is the economics of the
product's average line over the periods (one period's view; see the rows for
each month).  Each resource's ``capacity`` and ``used`` are horizon totals,
``shadow_price`` the largest over its periods (one more unit where it is worth
most), ``value_of_one_percent`` that of 1 % more in every period.

The months are kept in ``Plan.extras["periods"]`` and laid out by
:func:`planner.output.period_json.period_json`: top-level ``periods`` (names), each product's
``periods: [{period, made, sold, stock, price}]`` (price: none where nothing is
sold) and ``holding_cost``, each resource's
``periods: [{period, capacity, used, shadow_price}]``.
"""

from __future__ import annotations

from typing import Any

import numpy as np

from models.data import MixData
from models.economics import standalone
from planner.engine import relative_gap
from planner.output.plan import Plan, ProductPlan, ResourcePlan


def period_plan(s, d: MixData, sol, info: dict[str, Any], warnings: list[str]) -> Plan:
    """The Plan of a solved scenario over periods (``sol`` carries made and sold per period)."""
    pd = d.periods
    made, sold = np.asarray(sol.made, dtype=float), np.asarray(sol.sold, dtype=float)
    stock = pd.stock(made, sold)
    stock[np.abs(stock) <= 1e-9 * np.maximum(np.abs(stock).max(axis=1, initial=1.0), 1.0)[:, None]] = 0.0
    price = pd.a - pd.b * sold
    econ = standalone(pd.a.mean(axis=1), pd.b.mean(axis=1), pd.v.mean(axis=1), pd.F,
                      pd.hi.min(axis=1))
    products, prod_rows = [], {}
    for i, p in enumerate(s.products):
        running = bool(sol.running[i]) if d.can_stop[i] else bool(d.must_run[i]) or made[i].sum() > 0
        revenue = float(np.sum(price[i] * sold[i]))
        holding = float(np.sum(pd.hold[i] * stock[i]))
        var_cost = float(np.sum(pd.v[i] * made[i])) + holding
        fixed = float(pd.F[i]) if running else 0.0
        volume = float(sold[i].sum())
        products.append(ProductPlan(
            name=p.name, running=running, volume=volume, price=revenue / volume if volume > 0 else float(pd.a[i, 0]),
            revenue=revenue, variable_cost=var_cost, contribution=revenue - var_cost, fixed_cost=fixed,
            profit=revenue - var_cost - fixed, unit=p.unit, standalone=econ[i], must_run=bool(d.must_run[i]),
            forced="must_run" if p.must_run else ("min_volume" if pd.lo[i].sum() > 0 else
                                                   ("final_stock" if d.must_run[i] else ""))))
        prod_rows[p.name] = {"holding_cost": holding, "rows": [
            {"period": name, "made": float(made[i, t]), "sold": float(sold[i, t]), "stock": float(stock[i, t]),
             "price": float(price[i, t]) if sold[i, t] > 0 else None} for t, name in enumerate(pd.periods)]}
    used = pd.used(made, sold)
    lam = np.asarray(sol.duals, dtype=float).reshape(pd.R, pd.T) if pd.R else np.zeros((0, pd.T))
    resources, res_rows = [], {}
    for r, res in enumerate(s.resources):
        cap = pd.capacity[r]
        tight = used[r] >= cap - 1e-6 * np.maximum(np.abs(cap), 1.0)
        shown = np.where(tight | (lam[r] > 1e-9), lam[r], 0.0)
        total = float(cap.sum())
        resources.append(ResourcePlan(
            name=res.name, capacity=total, used=float(used[r].sum()),
            utilisation=float(used[r].sum() / total) if total > 0 else 0.0, shadow_price=float(shown.max(initial=0.0)),
            binding=bool(tight.any()), unit=res.unit, value_of_one_percent=float(np.sum(shown * cap) / 100.0)))
        res_rows[res.name] = [{"period": name, "capacity": float(cap[t]), "used": float(used[r, t]),
                               "shadow_price": float(shown[t])} for t, name in enumerate(pd.periods)]
    product_profit = sum(p.profit for p in products)
    profit = product_profit - s.plant_fixed_cost
    bound = max(float(sol.bound), product_profit) - s.plant_fixed_cost
    out = Plan(scenario=s.name, status=sol.status, profit=profit, bound=bound, gap=relative_gap(bound, profit),
               products=products, resources=resources, currency=s.currency, period=s.period,
               plant_fixed_cost=s.plant_fixed_cost, solver=info, warnings=list(warnings))
    out.extras["periods"] = {"names": list(pd.periods), "products": {k: v["rows"] for k, v in prod_rows.items()},
                             "holding": {k: v["holding_cost"] for k, v in prod_rows.items()}, "resources": res_rows}
    return out


def months_tables(p: Plan, console=None) -> list:
    """The terminal's compact per-period tables: made / sold / stock per product, used / capacity and shadow
    price per resource (from the plan's ``periods`` extras, already escaped by ``display_copy``)."""
    from rich.markup import escape

    from planner.output.text import add_column, fit_table, money, qty, table

    months = p.extras["periods"]
    names = months["names"]

    def products(drop: set[str], width: int | None):
        t = table("Per period: made / sold / stock")
        add_column(t, "product", left=True, name=True, name_width=width)
        for n in names:
            add_column(t, escape(n))
        for name, rows in list(months["products"].items())[:40]:
            t.add_row(escape(name), *(f"{qty(r['made'], 0)} / {qty(r['sold'], 0)} / {qty(r['stock'], 0)}"
                                      for r in rows))
        return t

    def resources(drop: set[str], width: int | None):
        t = table("Per period: used of capacity · shadow price")
        add_column(t, "resource", left=True, name=True, name_width=width)
        for n in names:
            add_column(t, escape(n))
        for name, rows in months["resources"].items():
            t.add_row(escape(name), *(f"{qty(r['used'], 0)}/{qty(r['capacity'], 0)} · "
                                      f"{money(r['shadow_price'], p.currency, 2) if r['shadow_price'] > 0 else '0'}"
                                      for r in rows))
        return t

    return [fit_table(products, console, []), fit_table(resources, console, [])]
