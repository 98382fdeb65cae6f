"""Turn a validated Scenario into the model's arrays (:class:`models.data.MixData`)."""

from __future__ import annotations

import numpy as np

from models.data import MixData

from planner.scenario.schema import Scenario


def mix_data(s: Scenario, extra_capacity: dict[str, float] | None = None) -> MixData:
    """Arrays in product and resource order; ``extra_capacity`` adds to named resources."""
    res_index = {r.name: k for k, r in enumerate(s.resources)}
    P = s.products
    rows, cols, vals = [], [], []
    for i, p in enumerate(P):
        for res, amt in p.usage.items():
            if amt != 0:
                rows.append(res_index[res])
                cols.append(i)
                vals.append(float(amt))
    capacity = np.array([r.capacity for r in s.resources], dtype=float)
    for name, amount in (extra_capacity or {}).items():
        capacity[res_index[name]] += amount

    def arr(field: str) -> np.ndarray:
        return np.fromiter((getattr(p, field) for p in P), dtype=float, count=len(P))

    committed = arr("min_volume")
    prod_index = {p.name: i for i, p in enumerate(P)}
    members = [(g, prod_index[n]) for g, grp in enumerate(s.product_groups) for n in dict.fromkeys(grp.products)]
    return MixData(
        products=tuple(p.name for p in P),
        resources=tuple(r.name for r in s.resources),
        a=arr("price_intercept"), b=arr("price_slope"), v=arr("unit_cost"), F=arr("fixed_cost"),
        committed=committed, min_run=arr("min_run"),
        cap=np.array([np.inf if p.max_volume is None else p.max_volume for p in P], dtype=float),
        must_run=np.array([p.must_run for p in P], dtype=bool) | (committed > 0),
        use_res=np.array(rows, dtype=np.int64), use_prod=np.array(cols, dtype=np.int64),
        use_amt=np.array(vals, dtype=float), capacity=capacity,
        groups=tuple(g.name for g in s.product_groups),
        grp_cost=np.array([g.fixed_cost for g in s.product_groups], dtype=float),
        grp_idx=np.array([g for g, _ in members], dtype=np.int64),
        grp_prod=np.array([i for _, i in members], dtype=np.int64),
        res_fixed=np.array([r.fixed_cost for r in s.resources], dtype=float),
        res_closable=np.array([r.closable for r in s.resources], dtype=bool),
    )
