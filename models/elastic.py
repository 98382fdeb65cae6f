r"""The elastic commitment model: the smallest cuts to commitments that make a scenario feasible.

Every plan must make at least the committed floor B_i of each product that
must run (``committed_floor``: max(L_i, M_i) for products that must run).
When those floors alone overload a resource, the scenario has no plan.  The
elastic model lets each floor give way by a shortfall s_i (units) and asks for
the smallest total shortfall, each measured as a fraction of its floor so that
a product committed in thousands and one committed in tens weigh alike:

.. math::

    \min \; & \sum_{i: B_i > 0} s_i / B_i \\
    \text{capacity}_r: \; & \sum_i h_{ri} D_i \le H_r \quad \forall r \\
    \text{floor}_i: \; & D_i + s_i \ge B_i, \quad 0 \le s_i \le B_i, \quad 0 \le D_i \le C_i

It is always feasible (s = B, D = 0 uses nothing, and H ≥ 0).  The
shortfalls say by how much each commitment must come down; a zero
shortfall leaves a commitment as it is.  Linear: any LP solver.  No I/O.
"""

from __future__ import annotations

import numpy as np
import pyomo.environ as pyo

from models.data import MixData, committed_floor
from models.mix import add_capacity


def build_elastic_model(d: MixData) -> pyo.ConcreteModel:
    """The elastic LP above; ``m.shortfall[p]`` is the cut to product p's floor (units)."""
    m = pyo.ConcreteModel(name="elastic_commitments")
    floor = committed_floor(d)
    m.P = pyo.Set(initialize=list(d.products), ordered=True)
    m.R = pyo.Set(initialize=list(d.resources), ordered=True)
    cap = np.where(np.isfinite(d.cap), d.cap, None)
    m.volume = pyo.Var(m.P, domain=pyo.NonNegativeReals,
                       bounds={p: (0.0, None if cap[k] is None else float(cap[k])) for k, p in enumerate(d.products)})
    held = [p for k, p in enumerate(d.products) if floor[k] > 0]
    idx = {p: k for k, p in enumerate(d.products)}
    m.C = pyo.Set(initialize=held, ordered=True)
    m.shortfall = pyo.Var(m.C, bounds={p: (0.0, float(floor[idx[p]])) for p in held})
    m.floor = pyo.Constraint(m.C, rule=lambda m, p: m.volume[p] + m.shortfall[p] >= float(floor[idx[p]]))
    add_capacity(m, d)
    m.cut = pyo.Objective(expr=pyo.quicksum(m.shortfall[p] / float(floor[idx[p]]) for p in held)
                          if held else 0.0, sense=pyo.minimize)
    return m
