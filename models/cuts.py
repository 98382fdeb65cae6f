r"""Outer approximation of the mix model: a MILP with perspective tangent cuts.

Each product's concave contribution g_i(D) = (a_i − v_i)·D − b_i·D² is
replaced by a variable t_i (currency) bounded above by tangent planes of its
perspective y·g(D/y), which are valid for y = 0 and y = 1 alike:

.. math::

    t_i \le (a_i - v_i - 2 b_i \bar D)\, D_i + b_i \bar D^2\, y_i
    \qquad \text{for chosen points } \bar D

    \max \; \sum_i t_i - F_i y_i \quad \text{s.t. the constraints of the mix model.}

Because every cut over-estimates g_i, the MILP's optimum (and its dual bound)
is an upper bound on the true profit; cuts added at the MILP's own volumes
close the gap (Duran & Grossmann 1986, Math. Programming 36; the perspective
form after Frangioni & Gentile 2006, Math. Programming 106).  Capacity
options, product groups and closable resources enter as in :mod:`models.mix` (their cost and capacity terms are
linear already).  The model is
linear, so a persistent LP/MILP interface can take new cuts without a rebuild.
"""

from __future__ import annotations

import numpy as np
import pyomo.environ as pyo

from models.data import MixData, peak_contribution
from models.mix import add_capacity, add_groups_and_closing, add_options, add_volumes, option_cost


def build_cut_model(d: MixData, integer: bool = True) -> pyo.ConcreteModel:
    """The cut MILP with no cuts yet but the peak cut t_i ≤ max contribution·y_i."""
    m = pyo.ConcreteModel(name="product_mix_cuts")
    y = add_volumes(m, d, None, integer)
    add_options(m, d, None, integer)
    shared = add_groups_and_closing(m, d, y, integer)
    add_capacity(m, d)
    m.running_of = y  # per product: Pyomo var or the constant 1
    peak = peak_contribution(d)
    m.contribution = pyo.Var(m.P, bounds={p: (None, max(peak[k], 0.0) + 1.0) for k, p in enumerate(d.products)})
    m.cuts = pyo.ConstraintList()
    F = d.F
    m.profit = pyo.Objective(
        expr=pyo.quicksum(m.contribution[p] for p in d.products)
        - pyo.quicksum(float(F[k]) * y[k] for k in range(d.n) if F[k] > 0 and not isinstance(y[k], int))
        - float(sum(F[k] for k in range(d.n) if isinstance(y[k], int)))
        - option_cost(m, d)
        - shared,
        sense=pyo.maximize)
    return m


def add_cuts(m: pyo.ConcreteModel, d: MixData, products: np.ndarray, points: np.ndarray) -> int:
    """Add the tangent cut of product k at volume D̄ for each (k, D̄); returns how many."""
    names = d.products
    margin, b = d.margin, d.b
    for k, pt in zip(products.tolist(), points.tolist()):
        p = names[k]
        slope = float(margin[k] - 2.0 * b[k] * pt)
        height = float(b[k] * pt * pt)
        y = m.running_of[k]
        m.cuts.add(m.contribution[p] <= slope * m.volume[p] + height * y)
    return len(products)
