"""Outside reference for capacity options: the mixed-integer QP with option variables written
straight into SCIP (pyscipopt) from the raw scenario numbers, independently of models/."""

from __future__ import annotations

from planner.schema import Scenario


def scip_plan_with_options(s: Scenario, gap: float = 1e-9, time_limit: float = 60.0) -> tuple[float, dict[str, float]]:
    """(optimal profit before plant-wide fixed cost and after option costs, option scales 0..1)."""
    from pyscipopt import Model, quicksum

    m = Model("reference-options")
    m.hideOutput()
    m.setParam("limits/gap", gap)
    m.setParam("limits/time", time_limit)
    D, y, t, z = {}, {}, {}, {}
    for p in s.products:
        cap = p.max_volume if p.max_volume is not None else 1e7
        lo = max(p.min_volume, p.min_run) if (p.must_run or p.min_volume > 0) else 0.0
        D[p.name] = m.addVar(f"D_{p.name}", lb=0.0, ub=cap)
        if (p.fixed_cost > 0 or p.min_run > 0) and not p.must_run and p.min_volume == 0:
            y[p.name] = m.addVar(f"y_{p.name}", vtype="B")
            m.addCons(D[p.name] <= cap * y[p.name])
            if p.min_run > 0:
                m.addCons(D[p.name] >= p.min_run * y[p.name])
        else:
            m.addCons(D[p.name] >= lo)
        t[p.name] = m.addVar(f"t_{p.name}", lb=None)
        m.addCons(t[p.name] <= (p.price_intercept - p.unit_cost) * D[p.name] - p.price_slope * D[p.name] * D[p.name])
    cost_terms = []
    for k, o in enumerate(s.options):
        whole = o.adds is not None
        z[o.name] = m.addVar(f"z_{k}", vtype="B" if whole else "C", lb=0.0, ub=1.0)
        per_scale = o.cost if whole else o.cost_per_unit * sum(o.adds_up_to.values())
        cost_terms.append(per_scale * z[o.name])
    for r in s.resources:
        terms = [amt * D[p.name] for p in s.products for res, amt in p.usage.items() if res == r.name]
        extra = [amt * z[o.name] for o in s.options for res, amt in (o.adds or o.adds_up_to).items()
                 if res == r.name]
        if terms:
            m.addCons(quicksum(terms) <= r.capacity + quicksum(extra))
    fixed_always = sum(p.fixed_cost for p in s.products if p.name not in y)
    m.setObjective(quicksum(t.values()) - quicksum(p.fixed_cost * y[p.name] for p in s.products if p.name in y)
                   - fixed_always - quicksum(cost_terms), sense="maximize")
    m.optimize()
    assert m.getStatus() == "optimal", m.getStatus()
    return m.getObjVal(), {k: m.getVal(v) for k, v in z.items()}
