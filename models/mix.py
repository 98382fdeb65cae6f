r"""The product-mix model of record (Pyomo): validated data in, model out.

Sets: products P, resources R.  Variables: ``volume[i]`` D_i ≥ 0 (units),
``running[i]`` y_i ∈ {0, 1} for products with a real on/off choice (others
run: y_i = 1 as a constant).

.. math::

    \max \; & \sum_{i \in P} (a_i - v_i) D_i - b_i D_i^2 - F_i y_i \\
    \text{capacity}_r: \; & \sum_{i} h_{ri} D_i \le H_r \quad \forall r \in R \\
    \text{volume\_cap}_i: \; & D_i \le U_i y_i \\
    \text{run\_floor}_i: \; & D_i \ge \max(L_i, M_i) \, y_i

With capacity options o (none by default), ``option_scale[o]`` s_o adds
s_o·A_ro to capacity r for a cost c_o·s_o: s_o ∈ {0, 1} for an
all-or-nothing option, s_o ∈ [0, 1] for one usable in part:

.. math::

    \max \; \ldots - \sum_o c_o s_o, \qquad
    \text{capacity}_r: \; \sum_i h_{ri} D_i - \sum_o A_{ro} s_o \le H_r

With buy-in (products with Q_i > 0; none by default), ``bought[i]`` B_i
units of the sales D_i are bought in at β_i each and use no resource:

.. math::

    \max \; \ldots - \sum_i (\beta_i - v_i) B_i, \qquad
    \text{capacity}_r: \; \sum_i h_{ri} (D_i - B_i) - \ldots \le H_r, \qquad
    \text{bought\_in\_sales}_i: \; B_i \le D_i, \quad 0 \le B_i \le Q_i

(so D_i − B_i are the units made, and B_i = 0 when the product stops).

Product groups g (none by default) with fixed cost G_g: ``group_on[g]``
z_g ∈ {0, 1}, ``group_link[g, i]``: y_i ≤ z_g for each member i (a member
with no choice forces z_g = 1).  Resources with a fixed cost E_r: one that
cannot close pays E_r (a constant); a closable one has ``open[r]``
w_r ∈ {0, 1}, its capacity H_r·w_r and cost E_r·w_r:

.. math::
    \max \; \ldots - \sum_g G_g z_g - \sum_{r \text{ closable}} E_r w_r
          - \sum_{r \text{ not closable}} E_r, \qquad
    \text{capacity}_r: \; \sum_i h_{ri} D_i - \ldots \le H_r w_r

Revenue a·D − b·D² is the price–demand line p = a − b·D times volume; the
price follows from the volume.  With ``slate`` given, y is fixed data (the
model is then a convex QP with bounds only, no integer columns: HiGHS keeps a
fixed binary integer, so we never build one to fix it).  With
``integer=False`` the binaries are relaxed to [0, 1].

The objective has no constant: the plant-wide fixed cost is added by the
planner.  No I/O, no printing.
"""

from __future__ import annotations

from collections.abc import Sequence

import numpy as np
import pyomo.environ as pyo
from pyomo.core.expr.numeric_expr import LinearExpression

from models.data import MixData


def usage_by_resource(d: MixData) -> list[tuple[np.ndarray, np.ndarray]]:
    """For each resource r: (product indices, amounts per unit) with h_ri > 0."""
    order = np.argsort(d.use_res, kind="stable")
    res, prod, amt = d.use_res[order], d.use_prod[order], d.use_amt[order]
    bounds = np.searchsorted(res, np.arange(len(d.resources) + 1))
    out = []
    for r in range(len(d.resources)):
        sl = slice(bounds[r], bounds[r + 1])
        keep = amt[sl] != 0
        out.append((prod[sl][keep], amt[sl][keep]))
    return out


def add_volumes(m: pyo.ConcreteModel, d: MixData, slate: Sequence[bool] | None, integer: bool) -> list:
    """Volume variables, running decisions and their links; returns y per product (var or 0/1)."""
    m.P = pyo.Set(initialize=list(d.products), ordered=True)
    m.R = pyo.Set(initialize=list(d.resources), ordered=True)
    upper = d.upper
    floor = d.run_floor
    if slate is not None:
        on = np.asarray(slate, dtype=bool)
        lo = np.where(on, floor, 0.0)
        hi = np.where(on, d.qp_upper, 0.0)  # resource rows, not bounds, carry the duals
        m.volume = pyo.Var(m.P, domain=pyo.NonNegativeReals,
                           bounds={p: (lo[k], hi[k]) for k, p in enumerate(d.products)})
        return [1 if on[k] else 0 for k in range(d.n)]
    fixed_lo = np.where(d.can_stop, 0.0, floor)
    m.volume = pyo.Var(m.P, domain=pyo.NonNegativeReals,
                       bounds={p: (fixed_lo[k], upper[k]) for k, p in enumerate(d.products)})
    choice = [p for k, p in enumerate(d.products) if d.can_stop[k]]
    m.C = pyo.Set(initialize=choice, ordered=True)
    m.running = pyo.Var(m.C, domain=pyo.Binary if integer else pyo.UnitInterval)
    idx = {p: k for k, p in enumerate(d.products)}
    m.volume_cap = pyo.Constraint(m.C, rule=lambda m, p: m.volume[p] <= upper[idx[p]] * m.running[p])
    m.run_floor = pyo.Constraint(
        [p for p in choice if floor[idx[p]] > 0],
        rule=lambda m, p: m.volume[p] >= floor[idx[p]] * m.running[p])
    return [m.running[p] if d.can_stop[k] else 1 for k, p in enumerate(d.products)]


def add_bought(m: pyo.ConcreteModel, d: MixData) -> None:
    """bought[i] ∈ [0, Q_i] with bought_in_sales[i]: B_i ≤ D_i, for products that may buy in (nothing if none)."""
    buyers = [p for k, p in enumerate(d.products) if d.buy_max[k] > 0]
    if not buyers:
        return
    idx = {p: k for k, p in enumerate(d.products)}
    m.B = pyo.Set(initialize=buyers, ordered=True)
    m.bought = pyo.Var(m.B, domain=pyo.NonNegativeReals, bounds=lambda m, p: (0.0, float(d.buy_max[idx[p]])))
    m.bought_in_sales = pyo.Constraint(m.B, rule=lambda m, p: m.bought[p] <= m.volume[p])


def read_bought(m: pyo.ConcreteModel, d: MixData) -> np.ndarray:
    """Units bought in per product (0 where none may be bought or unset)."""
    if not hasattr(m, "B"):
        return np.zeros(d.n)
    return np.array([(m.bought[p].value or 0.0) if p in m.B else 0.0 for p in d.products], dtype=float)


def add_options(m: pyo.ConcreteModel, d: MixData, slate: Sequence[bool] | None, integer: bool) -> None:
    """option_scale[o] ∈ {0, 1} (all or nothing) or [0, 1] (usable in part); nothing if no options."""
    if not d.n_options:
        return
    if slate is not None and d.opt_whole.any():
        raise ValueError("a fixed-slate model takes partial options only: decide the all-or-nothing "
                         "ones first (MixData.with_whole_taken)")
    m.O = pyo.Set(initialize=list(d.options), ordered=True)
    whole = {o: bool(w) for o, w in zip(d.options, d.opt_whole)}
    m.option_scale = pyo.Var(m.O, bounds=(0.0, 1.0),
                             domain=lambda m, o: pyo.Binary if (whole[o] and integer) else pyo.Reals)


def option_cost(m: pyo.ConcreteModel, d: MixData):
    """Σ_o c_o·s_o as a Pyomo expression (0 without options)."""
    if not d.n_options:
        return 0.0
    return pyo.quicksum(float(d.opt_cost[k]) * m.option_scale[o] for k, o in enumerate(d.options))


def add_groups_and_closing(m: pyo.ConcreteModel, d: MixData, y: list, integer: bool):
    """group_on[g] with its links y_i ≤ z_g, open[r] for closable resources; returns their cost (expression)."""
    cost = float(np.sum(d.res_fixed[~d.res_closable]))
    terms = []
    if d.n_groups:
        m.G = pyo.Set(initialize=list(d.groups), ordered=True)
        m.group_on = pyo.Var(m.G, domain=pyo.Binary if integer else pyo.UnitInterval)
        pairs = list(zip(d.grp_idx.tolist(), d.grp_prod.tolist()))
        links = [(d.groups[g], d.products[i]) for g, i in pairs if not isinstance(y[i], int)]
        pos = {p: k for k, p in enumerate(d.products)}
        m.group_link = pyo.Constraint(links, rule=lambda m, g, p: y[pos[p]] <= m.group_on[g])
        for g, i in pairs:
            if isinstance(y[i], int):  # a member that always runs: the group is paid
                m.group_on[d.groups[g]].setlb(1)
        terms += [float(d.grp_cost[k]) * m.group_on[g] for k, g in enumerate(d.groups)]
    closable = [r for k, r in enumerate(d.resources) if d.res_closable[k]]
    if closable:
        m.RC = pyo.Set(initialize=closable, ordered=True)
        m.open = pyo.Var(m.RC, domain=pyo.Binary if integer else pyo.UnitInterval)
        terms += [float(d.res_fixed[k]) * m.open[r] for k, r in enumerate(d.resources) if d.res_closable[k]]
    return cost + pyo.quicksum(terms) if terms else cost


def add_capacity(m: pyo.ConcreteModel, d: MixData) -> None:
    """capacity[r]: Σ_i h_ri·D_i − Σ_o A_ro·s_o ≤ H_r (resource units); ≤ H_r·w_r where r is closable."""
    cols = usage_by_resource(d)
    vol = [m.volume[p] for p in d.products]
    exprs = {}
    for r, name in enumerate(d.resources):
        prods, amts = cols[r]
        coefs, varlist = [float(x) for x in amts], [vol[k] for k in prods]
        for k, h in zip(prods, amts):
            if d.buy_max[k] > 0:
                coefs.append(-float(h))
                varlist.append(m.bought[d.products[k]])
        for k, o in enumerate(d.options):
            if d.opt_amount[k, r] != 0:
                coefs.append(-float(d.opt_amount[k, r]))
                varlist.append(m.option_scale[o])
        exprs[name] = LinearExpression(constant=0.0, linear_coefs=coefs, linear_vars=varlist)
    index = {r: k for k, r in enumerate(d.resources)}

    def row(m, r):
        k = index[r]
        if d.res_closable[k]:
            return exprs[r] - float(d.capacity[k]) * m.open[r] <= 0.0
        return (None, exprs[r], float(d.capacity[k]))

    m.capacity = pyo.Constraint(m.R, rule=row)


def build_mix_model(d: MixData, slate: Sequence[bool] | None = None, integer: bool = True) -> pyo.ConcreteModel:
    """The mixed-integer QP (or, with ``slate``, the fixed-slate QP) as a Pyomo model."""
    m = pyo.ConcreteModel(name="product_mix")
    if slate is not None and (d.n_groups or d.res_closable.any()):
        raise ValueError("a fixed-slate model takes no product groups or closable resources")
    y = add_volumes(m, d, slate, integer)
    add_bought(m, d)
    add_options(m, d, slate, integer)
    shared = add_groups_and_closing(m, d, y, integer)
    add_capacity(m, d)
    margin, b, F = d.margin, d.b, d.F
    terms = []
    for k, p in enumerate(d.products):
        D = m.volume[p]
        terms.append(float(margin[k]) * D)
        if b[k] > 0:
            terms.append(-float(b[k]) * D * D)
        if F[k] > 0 and not isinstance(y[k], int):
            terms.append(-float(F[k]) * y[k])
    const = float(sum(F[k] for k in range(d.n) if isinstance(y[k], int) and y[k] == 1))
    m.fixed_in_slate = pyo.Param(initialize=const, mutable=False)
    if d.n_options:
        terms.append(-option_cost(m, d))
    for p in (m.B if hasattr(m, "B") else ()):
        k = d.products.index(p)
        terms.append(-float(d.buy_cost[k] - d.v[k]) * m.bought[p])
    m.profit = pyo.Objective(expr=pyo.quicksum(terms) - const - shared, sense=pyo.maximize)
    return m


def read_option_scale(m: pyo.ConcreteModel, d: MixData) -> np.ndarray:
    """The model's option scales s_o in option order (0..1); unset counts as 0."""
    if not d.n_options:
        return np.zeros(0)
    return np.array([m.option_scale[o].value or 0.0 for o in d.options], dtype=float)


def read_volumes(m: pyo.ConcreteModel, d: MixData) -> np.ndarray:
    """The model's volume values as an array in product order (units); unset counts as 0."""
    return np.array([m.volume[p].value or 0.0 for p in d.products], dtype=float)
