"""Turn a validated Scenario into the model's arrays (:class:`models.data.MixData`)."""

from __future__ import annotations

import numpy as np

from models.data import MixData
from models.periods import PeriodData

from planner.scenario.periods import per_period
from planner.scenario.schema import Scenario


def mix_data(s: Scenario, extra_capacity: dict[str, float] | None = None) -> MixData:
    """Arrays in product and resource order; ``extra_capacity`` adds to named resources."""
    if s.periods is not None:
        if extra_capacity:
            raise ValueError("extra capacity is not supported with periods")
        return period_mix_data(period_data(s), tuple(p.name for p in s.products))
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
        buy_cost=np.array([p.buy_cost or 0.0 for p in P], dtype=float), buy_max=arr("buy_max"),
        groups=tuple(g.name for g in s.product_groups),
        grp_cost=np.array([g.fixed_cost for g in s.product_groups], dtype=float),
        grp_idx=np.array([g for g, _ in members], dtype=np.int64),
        grp_prod=np.array([i for _, i in members], dtype=np.int64),
        res_fixed=np.array([r.fixed_cost for r in s.resources], dtype=float),
        res_closable=np.array([r.closable for r in s.resources], dtype=bool),
    )


def period_data(s: Scenario) -> PeriodData:
    """The per-period arrays of a scenario with ``periods`` (a number given once repeats in every period)."""
    T = len(s.periods)
    P, Rs = s.products, s.resources
    res_index = {r.name: k for k, r in enumerate(Rs)}

    def each(field: str, none: float = 0.0) -> np.ndarray:
        out = np.zeros((len(P), T))
        for i, p in enumerate(P):
            v = getattr(p, field)
            out[i] = none if v is None else per_period(v, T)
        return out

    def dense(field: str) -> np.ndarray:
        out = np.zeros((len(P), len(Rs)))
        for i, p in enumerate(P):
            for res, amt in getattr(p, field).items():
                out[i, res_index[res]] = float(amt)
        return out

    return PeriodData(
        periods=tuple(s.periods), resources=tuple(r.name for r in Rs),
        a=each("price_intercept"), b=each("price_slope"), v=each("unit_cost"), lo=each("min_volume"),
        hi=each("max_volume", np.inf), hold=each("holding_cost"),
        F=np.array([p.fixed_cost for p in P], dtype=float),
        initial=np.array([p.initial_stock for p in P], dtype=float),
        final=np.array([p.final_stock for p in P], dtype=float),
        must_run=np.array([p.must_run for p in P], dtype=bool),
        usage=dense("usage"), stock_usage=dense("stock_usage"),
        capacity=np.array([per_period(r.capacity, T) for r in Rs], dtype=float).reshape(len(Rs), T))


def period_mix_data(pd: PeriodData, products: tuple[str, ...]) -> MixData:
    """The MixData the engine carries for a scenario over periods: its rows are the (resource, period) pairs.

    Its per-product arrays only bound the multipliers and the fallback's choice (the block family reads
    ``periods``): price a = the highest intercept (no unit of any row is worth more than that over its use),
    unit cost 0, no slope, cap the horizon's sales bound; a product whose commitments and final stock
    its initial stock cannot cover must run.
    """
    n, T = pd.n, pd.T
    rows, cols, vals = [], [], []
    for r in range(pd.R):
        for i in range(n):
            amt = max(pd.usage[i, r], pd.stock_usage[i, r])
            if amt > 0:
                rows += [pd.row(r, t) for t in range(T)]
                cols += [i] * T
                vals += [float(amt)] * T
    hi = pd.sales_upper().sum(axis=1) + pd.final
    return MixData(
        products=tuple(products),
        resources=tuple(f"{r} ({t})" for r in pd.resources for t in pd.periods),
        a=pd.a.max(axis=1), b=np.zeros(n), v=np.zeros(n), F=pd.F.copy(), committed=np.zeros(n),
        min_run=np.zeros(n), cap=hi, must_run=pd.must_run | ~pd.can_stop_alone(),
        use_res=np.array(rows, dtype=np.int64), use_prod=np.array(cols, dtype=np.int64),
        use_amt=np.array(vals, dtype=float), capacity=pd.capacity.ravel().astype(float), periods=pd)
