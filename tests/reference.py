"""Outside references for the planner's answers, built from the raw scenario numbers.

- ``scip_plan``: the mixed-integer QP written straight into SCIP through
  pyscipopt (not through the project's Pyomo model), so a formulation error
  in models/ cannot hide in both sides.
- ``enumerate_slates``: every on/off slate of the products with a real
  choice, each solved as a continuous QP; exact for up to about a dozen.
"""

from __future__ import annotations

import itertools

import numpy as np

from planner.scenario.schema import Scenario


def scip_plan(s: Scenario, gap: float = 1e-9, time_limit: float = 60.0) -> tuple[float, dict[str, float]]:
    """(optimal profit before plant-wide fixed cost, volumes) from SCIP."""
    m, D, _ = _scip_model(s, gap, time_limit)
    m.optimize()
    assert m.getStatus() == "optimal", m.getStatus()
    return m.getObjVal(), {k: m.getVal(v) for k, v in D.items()}


def scip_race(s: Scenario, gap: float, time_limit: float) -> dict:
    """SCIP to a relative gap within a time limit: seconds, whether it got there, its profit and bound.

    The gap is measured as the planner measures it, (bound − profit) / max(|profit|, 1).
    """
    import time

    m, _, _ = _scip_model(s, gap, time_limit)
    t0 = time.perf_counter()
    m.optimize()
    secs = time.perf_counter() - t0
    primal = m.getObjVal() if m.getNSols() > 0 else float("-inf")
    dual = m.getDualbound()
    g = max(0.0, (dual - primal) / max(abs(primal), 1.0)) if m.getNSols() > 0 else float("inf")
    return {"seconds": secs, "reached": bool(g <= gap * (1 + 1e-9)), "gap": g, "profit": primal, "bound": dual,
            "status": m.getStatus()}


def _scip_model(s: Scenario, gap: float, time_limit: float, with_options: bool = False):
    """The mixed-integer QP in SCIP, built from the raw scenario numbers: (model, volumes, option scales).

    With ``with_options`` each capacity option gets a scale z ∈ [0, 1] (binary for
    all-or-nothing options) that adds its amounts to the resources for its cost.
    """
    from pyscipopt import Model, quicksum

    m = Model("reference")
    m.hideOutput()
    m.setParam("limits/gap", gap)
    m.setParam("limits/time", time_limit)
    m.setParam("randomization/randomseedshift", 0)
    D, y, t, z = {}, {}, {}, {}
    for p in s.products:
        cap = p.max_volume if p.max_volume is not None else 1e7
        lo = max(p.min_volume, p.min_run) if (p.must_run or p.min_volume > 0) else 0.0
        D[p.name] = m.addVar(f"D_{p.name}", lb=0.0, ub=cap)
        choice = (p.fixed_cost > 0 or p.min_run > 0) and not p.must_run and p.min_volume == 0
        if choice:
            y[p.name] = m.addVar(f"y_{p.name}", vtype="B")
            m.addCons(D[p.name] <= cap * y[p.name])
            if p.min_run > 0:
                m.addCons(D[p.name] >= p.min_run * y[p.name])
        else:
            m.addCons(D[p.name] >= lo)
        t[p.name] = m.addVar(f"t_{p.name}", lb=None)
        m.addCons(t[p.name] <= (p.price_intercept - p.unit_cost) * D[p.name] - p.price_slope * D[p.name] * D[p.name])
    cost_terms = []
    for k, o in enumerate(s.options if with_options else []):
        whole = o.adds is not None
        z[o.name] = m.addVar(f"z_{k}", vtype="B" if whole else "C", lb=0.0, ub=1.0)
        per_scale = o.cost if whole else o.cost_per_unit * sum(o.adds_up_to.values())
        cost_terms.append(per_scale * z[o.name])
    for r in s.resources:
        terms = [amt * D[p.name] for p in s.products for res, amt in p.usage.items() if res == r.name]
        extra = [amt * z[o.name] for o in (s.options if with_options else [])
                 for res, amt in (o.adds or o.adds_up_to).items() if res == r.name]
        if terms:
            m.addCons(quicksum(terms) <= r.capacity + quicksum(extra))
    fixed_always = sum(p.fixed_cost for p in s.products if p.name not in y)
    m.setObjective(quicksum(t.values()) - quicksum(p.fixed_cost * y[p.name] for p in s.products if p.name in y)
                   - fixed_always - quicksum(cost_terms), sense="maximize")
    return m, D, z


def enumerate_slates(s: Scenario) -> float:
    """Best profit (before plant-wide fixed cost) over every slate, each a continuous QP."""
    from models.data import MixData  # noqa: F401  (documentation of what is enumerated)
    from planner.scenario.arrays import mix_data
    from planner.engine import Engine

    d = mix_data(s)
    free = np.flatnonzero(d.can_stop)
    assert free.size <= 12, "enumeration is for small cases only"
    best = -np.inf
    for bits in itertools.product([False, True], repeat=free.size):
        slate = np.ones(d.n, dtype=bool)
        slate[free] = bits
        if np.any(slate & (d.run_floor > d.upper + 1e-12)):
            continue  # a product that cannot reach its minimum run
        qp = Engine(d).slate(slate)
        if qp.status == "optimal":
            best = max(best, qp.objective)
    return best
