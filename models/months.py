"""The formulation of record of a plan over several periods, as a Pyomo model (no I/O, no printing).

The math is in :mod:`models.periods` (made, sold, stock per product and period; the stock balance;
the fixed cost for the horizon paid if the product makes anything; each (resource, period) capacity).
Names follow the trade: ``made``, ``sold``, ``stock``, ``running``, ``stock_balance``,
``capacity``.  The objective is the horizon's profit (maximise).
"""

from __future__ import annotations

import numpy as np
import pyomo.environ as pyo

from models.periods import PeriodData


def build_period_model(pd: PeriodData, products: tuple[str, ...], integer: bool = True) -> pyo.ConcreteModel:
    """The mixed-integer QP over periods (``integer=False``: running relaxed to 0..1)."""
    m = pyo.ConcreteModel(name="plan over periods")
    n, T = pd.n, pd.T
    m.P = pyo.Set(initialize=list(range(n)), ordered=True)
    m.T = pyo.Set(initialize=list(range(T)), ordered=True)
    hi = pd.sales_upper()
    big = hi.sum(axis=1) + pd.final
    m.made = pyo.Var(m.P, m.T, domain=pyo.NonNegativeReals)
    m.sold = pyo.Var(m.P, m.T, bounds=lambda m, i, t: (pd.lo[i, t], hi[i, t]))
    m.stock = pyo.Var(m.P, m.T, domain=pyo.NonNegativeReals)
    m.running = pyo.Var(m.P, domain=pyo.Binary if integer else pyo.UnitInterval,
                        bounds=lambda m, i: (1.0 if pd.must_run[i] else 0.0, 1.0))
    m.stock_balance = pyo.Constraint(m.P, m.T, rule=lambda m, i, t: m.stock[i, t] == (
        pd.initial[i] if t == 0 else m.stock[i, t - 1]) + m.made[i, t] - m.sold[i, t])
    m.final_stock = pyo.Constraint(m.P, rule=lambda m, i: m.stock[i, T - 1] >= pd.final[i])
    m.makes_only_if_running = pyo.Constraint(m.P, m.T, rule=lambda m, i, t: m.made[i, t] <= big[i] * m.running[i])

    def capacity(m, r, t):
        users = [i for i in range(n) if pd.usage[i, r] > 0 or pd.stock_usage[i, r] > 0]
        if not users:
            return pyo.Constraint.Skip
        return sum(pd.usage[i, r] * m.made[i, t] + pd.stock_usage[i, r] * m.stock[i, t] for i in users) \
            <= pd.capacity[r, t]

    m.R = pyo.Set(initialize=list(range(pd.R)), ordered=True)
    m.capacity = pyo.Constraint(m.R, m.T, rule=capacity)
    m.profit = pyo.Objective(expr=sum(
        pd.a[i, t] * m.sold[i, t] - pd.b[i, t] * m.sold[i, t] ** 2 - pd.v[i, t] * m.made[i, t]
        - pd.hold[i, t] * m.stock[i, t] for i in range(n) for t in range(T))
        - sum(pd.F[i] * m.running[i] for i in range(n)), sense=pyo.maximize)
    m.product_names = list(products)
    return m


def values(m: pyo.ConcreteModel, pd: PeriodData) -> tuple[np.ndarray, np.ndarray]:
    """(made, sold) of a solved model as (n × T) arrays."""
    get = (lambda v: np.array([[pyo.value(v[i, t]) for t in range(pd.T)] for i in range(pd.n)]))
    return get(m.made), get(m.sold)
