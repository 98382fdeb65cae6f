"""An outside reference for plans over several periods: the mixed-integer QP written straight into SCIP.

Built from a raw scenario dict (the YAML's own keys and numbers), importing
nothing from planner/ or models/.  The economics (issue contract): per
product and period, price = a_t − b_t·sold_t; made_t ≥ 0 costs unit_cost_t;
stock_t = stock_{t−1} + made_t − sold_t ≥ 0 with stock_0 = initial_stock,
stock at the end of the last period ≥ final_stock, each unit in stock at a
period's end costs holding_cost_t and uses stock_usage per resource;
min_volume_t ≤ sold_t ≤ max_volume_t; the fixed cost is paid for the horizon
if the product makes anything (it must if must_run); per resource and period,
Σ usage·made_t + Σ stock_usage·stock_t ≤ capacity_t.
"""

from __future__ import annotations

from typing import Any


def _each(x: Any, T: int) -> list[float]:
    if x is None:
        return [float("inf")] * T
    return [float(v) for v in x] if isinstance(x, list) else [float(x)] * T


def scip_periods(raw: dict, gap: float = 1e-9, time_limit: float = 60.0, prices: dict | None = None):
    """(profit, {product: (made list, sold list)}, status) from SCIP on the raw scenario.

    ``prices``: {(resource, period index): price} — the capacity rows are then left out and their use is
    charged at these prices instead (the priced problem a Lagrangian relaxation solves), and the profit
    returned adds Σ price × capacity (the Lagrangian dual function's value).
    """
    import pyscipopt

    T = len(raw["periods"])
    m = pyscipopt.Model()
    m.hideOutput()
    m.setParam("limits/gap", gap)
    m.setParam("limits/time", time_limit)
    m.setParam("numerics/feastol", 1e-9)
    use: dict[tuple[str, int], list] = {}
    obj_terms = []
    vars_of = {}
    for p in raw["products"]:
        a, b = _each(p["price_intercept"], T), _each(p.get("price_slope", 0), T)
        v, hold = _each(p["unit_cost"], T), _each(p.get("holding_cost", 0), T)
        lo, hi = _each(p.get("min_volume", 0), T), _each(p.get("max_volume"), T)
        I0, E, F = float(p.get("initial_stock", 0)), float(p.get("final_stock", 0)), float(p.get("fixed_cost", 0))
        y = m.addVar(vtype="B", lb=1 if p.get("must_run") else 0)
        made = [m.addVar(lb=0) for _ in range(T)]
        sold = [m.addVar(lb=lo[t], ub=None if hi[t] == float("inf") else hi[t]) for t in range(T)]
        stock = [m.addVar(lb=0) for _ in range(T)]
        big = sum(h for h in hi if h != float("inf")) + E + I0 + 1e5
        for t in range(T):
            prev = I0 if t == 0 else stock[t - 1]
            m.addCons(stock[t] == prev + made[t] - sold[t])
            m.addCons(made[t] <= big * y)
        m.addCons(stock[-1] >= E)
        for res, h in (p.get("usage") or {}).items():
            for t in range(T):
                use.setdefault((res, t), []).append(float(h) * made[t])
        for res, g in (p.get("stock_usage") or {}).items():
            for t in range(T):
                use.setdefault((res, t), []).append(float(g) * stock[t])
        obj_terms.append(pyscipopt.quicksum(a[t] * sold[t] - b[t] * sold[t] * sold[t] - v[t] * made[t]
                                            - hold[t] * stock[t] for t in range(T)) - F * y)
        vars_of[p["name"]] = (made, sold)
    const = 0.0
    for r in raw.get("resources", []):
        cap = _each(r["capacity"], T)
        for t in range(T):
            if prices is not None:
                lam = float(prices.get((r["name"], t), 0.0))
                const += lam * cap[t]
                if (r["name"], t) in use:
                    obj_terms.append(-lam * pyscipopt.quicksum(use[(r["name"], t)]))
            elif (r["name"], t) in use:
                m.addCons(pyscipopt.quicksum(use[(r["name"], t)]) <= cap[t])
    # SCIP wants a linear objective: maximise z with z ≤ the concave profit
    z = m.addVar(lb=None, ub=None)
    m.addCons(z <= pyscipopt.quicksum(obj_terms))
    m.setObjective(z, "maximize")
    m.optimize()
    status = m.getStatus()
    sol = {k: ([m.getVal(x) for x in mk], [m.getVal(x) for x in sd]) for k, (mk, sd) in vars_of.items()}
    return m.getObjVal() + const, sol, status
