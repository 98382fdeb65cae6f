"""Validated numbers for the product-mix model, as numpy arrays (no I/O).

Notation (per product i, per resource r; one planning period):

==========  =====================================================  =================
symbol      meaning                                                unit
==========  =====================================================  =================
a_i         price intercept (price at which demand falls to zero)  currency / unit
b_i         price slope (price drop per extra unit), ≥ 0          currency / unit²
v_i         variable cost                                          currency / unit
F_i         fixed cost avoided by shutting down, ≥ 0               currency
L_i         committed volume (forces the product to run)           units
M_i         minimum run when running                               units
C_i         market or contract cap (inf if none)                   units
h_ri        usage of resource r per unit of product i, ≥ 0        resource unit / unit
H_r         capacity of resource r                                 resource unit
A_ro        amount option o adds to resource r at full scale      resource unit
c_o         cost of option o at full scale                         currency
β_i         unit cost of a unit bought in (buy-in), ≥ 0           currency / unit
Q_i         most units that may be bought in (0: none)             units
==========  =====================================================  =================

Buy-in (optional; Q_i = 0 by default): product i sells D_i = made + bought,
0 ≤ bought_i ≤ Q_i ≤ D_i; bought units cost β_i each and use no resource.
Every volume limit (L_i, M_i, C_i) and the fixed cost F_i belong to the
product's sales D_i: buying needs the product to run, and its fixed cost is
paid whenever anything is sold.  The tight bound on sales counts the units
that may be bought beyond what the resources allow to be made.

Capacity options (optional; none by default): option o adds s_o·A_ro to each
capacity for a cost c_o·s_o, with s_o ∈ {0, 1} for an all-or-nothing option
(a shift) and s_o ∈ [0, 1] for one usable in part (overtime, premium material).

Product groups (optional; none by default): group g with fixed cost G_g is
paid if any member runs (z_g ≥ y_i for each member i; a product may be in
several groups).  Resources may carry their own fixed cost E_r; a closable
resource is open (w_r = 1: capacity H_r, cost E_r) or closed (w_r = 0:
capacity 0, nothing paid); a resource that cannot close always pays E_r.
Members of a group with G_g > 0 get an on/off choice.

Derived here, because they are part of the formulation: the upper bound U_i,
as tight as every limit allows (for the on/off links of the MILP), a looser
bound for the continuous QP that never competes with a capacity row for its
dual, and which products have a real on/off choice.
"""

from __future__ import annotations

from dataclasses import dataclass, field, replace
from typing import TYPE_CHECKING

import numpy as np

if TYPE_CHECKING:
    from models.periods import PeriodData


@dataclass(frozen=True)
class MixData:
    """The product-mix data; usage is sparse (COO triplets)."""

    products: tuple[str, ...]
    resources: tuple[str, ...]
    a: np.ndarray
    b: np.ndarray
    v: np.ndarray
    F: np.ndarray
    committed: np.ndarray
    min_run: np.ndarray
    cap: np.ndarray
    must_run: np.ndarray
    use_res: np.ndarray
    use_prod: np.ndarray
    use_amt: np.ndarray
    capacity: np.ndarray
    options: tuple[str, ...] = ()
    opt_amount: np.ndarray | None = None  # (options × resources), resource units at full scale
    opt_cost: np.ndarray | None = None  # currency at full scale
    opt_whole: np.ndarray | None = None  # True: all or nothing; False: usable in part
    buy_cost: np.ndarray | None = None  # β_i, currency per unit bought in (0 where none may be bought)
    buy_max: np.ndarray | None = None  # Q_i, units (0: nothing may be bought)
    periods: "PeriodData | None" = None  # several periods (models.periods): the rows are (resource, period) pairs
    groups: tuple[str, ...] = ()  # product groups sharing a fixed cost
    grp_cost: np.ndarray | None = None  # (groups,) currency, paid if any member runs
    grp_idx: np.ndarray | None = None  # membership (COO): group of each entry
    grp_prod: np.ndarray | None = None  # membership (COO): product of each entry
    res_fixed: np.ndarray | None = None  # (resources,) currency: the resource's own fixed cost
    res_closable: np.ndarray | None = None  # (resources,) bool: closing saves res_fixed, capacity then 0
    upper: np.ndarray = field(init=False)
    make_upper: np.ndarray = field(init=False)
    qp_upper: np.ndarray = field(init=False)
    can_stop: np.ndarray = field(init=False)

    def __post_init__(self) -> None:
        k = len(self.options)
        if self.opt_amount is None:
            object.__setattr__(self, "opt_amount", np.zeros((k, len(self.resources))))
        if self.opt_cost is None:
            object.__setattr__(self, "opt_cost", np.zeros(k))
        if self.opt_whole is None:
            object.__setattr__(self, "opt_whole", np.ones(k, dtype=bool))
        if self.buy_max is None:
            object.__setattr__(self, "buy_max", np.zeros(len(self.products)))
        if self.buy_cost is None:
            object.__setattr__(self, "buy_cost", np.zeros(len(self.products)))
        g, m = len(self.groups), len(self.resources)
        for name, default in (("grp_cost", np.zeros(g)), ("grp_idx", np.zeros(0, dtype=np.int64)),
                              ("grp_prod", np.zeros(0, dtype=np.int64)), ("res_fixed", np.zeros(m)),
                              ("res_closable", np.zeros(m, dtype=bool))):
            if getattr(self, name) is None:
                object.__setattr__(self, name, default)
        peak = peak_bound(self)
        object.__setattr__(self, "make_upper", tight_upper(self, peak_bound(self, selling=False)))
        object.__setattr__(self, "upper", sell_upper(self, self.make_upper, peak))
        object.__setattr__(self, "qp_upper", np.minimum(self.cap, peak))
        stop = ~self.must_run & ((self.F > 0) | (self.min_run > 0) | self.in_costly_group)
        object.__setattr__(self, "can_stop", stop)

    @property
    def in_costly_group(self) -> np.ndarray:
        """(n,) bool: products in a group with a positive fixed cost (they get an on/off choice)."""
        out = np.zeros(len(self.products), dtype=bool)
        costly = self.grp_cost[self.grp_idx] > 0
        out[self.grp_prod[costly]] = True
        return out

    @property
    def n_groups(self) -> int:
        return len(self.groups)

    def group_members(self) -> np.ndarray:
        """(groups × products) bool membership (dense; groups are few)."""
        M = np.zeros((len(self.groups), len(self.products)), dtype=bool)
        M[self.grp_idx, self.grp_prod] = True
        return M

    @property
    def n(self) -> int:
        return len(self.products)

    @property
    def margin(self) -> np.ndarray:
        """Unit margin at zero volume, a − v (currency/unit)."""
        return self.a - self.v

    @property
    def run_floor(self) -> np.ndarray:
        """Smallest volume when running: max(L_i, M_i) (units)."""
        return np.maximum(self.committed, self.min_run)

    def usage_dense(self) -> np.ndarray:
        """Usage as a dense (resources × products) array; for small models and tests."""
        m = len(self.resources)
        flat = np.bincount(self.use_res * self.n + self.use_prod, weights=self.use_amt, minlength=m * self.n)
        return flat.astype(float).reshape(m, self.n)

    def used(self, volume: np.ndarray) -> np.ndarray:
        """Amount of each resource used by the volumes Σ_i h_ri·D_i (resource units)."""
        return np.bincount(self.use_res, weights=self.use_amt * volume[self.use_prod],
                           minlength=len(self.resources)).astype(float)

    def contribution(self, volume: np.ndarray) -> np.ndarray:
        """Contribution (a − v)·D − b·D² of each product (currency), before fixed cost."""
        return self.margin * volume - self.b * volume * volume

    @property
    def n_options(self) -> int:
        return len(self.options)

    @property
    def capacity_reach(self) -> np.ndarray:
        """Capacity with every option taken in full, H_r + Σ_o A_ro (resource units)."""
        return self.capacity + self.opt_amount.sum(axis=0)

    def with_capacity(self, capacity: np.ndarray) -> "MixData":
        """The same data with other capacities (the bounds are recomputed)."""
        return replace(self, capacity=np.asarray(capacity, dtype=float))

    def with_closed(self, opened: np.ndarray | None) -> "MixData":
        """The same data with the resources not ``opened`` (m,) closed for good: capacity 0, no longer
        closable, their own fixed cost saved (0).  None or all open: the data itself.

        Analyses of a plan re-solve this data, so no re-solve reopens a resource the plan closed.
        """
        if opened is None or np.all(opened):
            return self
        shut = ~np.asarray(opened, dtype=bool)
        return replace(self, capacity=np.where(shut, 0.0, self.capacity),
                       res_closable=np.asarray(self.res_closable, dtype=bool) & ~shut,
                       res_fixed=np.where(shut, 0.0, self.res_fixed))

    def with_options(self, keep: np.ndarray) -> "MixData":
        """The same data offering only the options where ``keep`` is True."""
        keep = np.asarray(keep, dtype=bool)
        return replace(self, options=tuple(o for o, k in zip(self.options, keep) if k),
                       opt_amount=self.opt_amount[keep], opt_cost=self.opt_cost[keep],
                       opt_whole=self.opt_whole[keep])  # every other field kept

    def with_whole_taken(self, taken: np.ndarray) -> "MixData":
        """All-or-nothing options decided: taken ones added to capacity, all of them removed.

        ``taken`` is one flag per option (flags of partial options are ignored);
        the partial options stay on offer.  Their fixed cost is not in the data:
        the caller accounts for it (``whole_cost``).
        """
        taken = np.asarray(taken, dtype=bool) & self.opt_whole
        cap = self.capacity + self.opt_amount[taken].sum(axis=0)
        return self.with_capacity(cap).with_options(~self.opt_whole)

    def whole_cost(self, taken: np.ndarray) -> float:
        """Cost of the all-or-nothing options taken (currency)."""
        taken = np.asarray(taken, dtype=bool) & self.opt_whole
        return float(self.opt_cost[taken].sum())


def peak_bound(d: MixData, selling: bool = True) -> np.ndarray:
    """max(L_i, M_i, (a_i − w_i)/(2 b_i)) for b_i > 0; 0 if a fixed price never pays; else inf (units).

    w_i is the cheapest unit cost of supply: v_i, or min(v_i, β_i) for sales
    where units may be bought in (``selling``; with ``selling=False`` the bound
    on the units made, w_i = v_i).  No optimal plan sells (makes) more: beyond
    the peak a product loses money on each extra unit and uses more of every
    resource.  Unlike the resource-derived bounds, this bound never takes a
    capacity's dual.
    """
    floor = np.maximum(d.committed, d.min_run)
    margin = d.a - np.where(d.buy_max > 0, np.minimum(d.v, d.buy_cost), d.v) if selling else d.margin
    with np.errstate(divide="ignore", invalid="ignore"):
        peak = np.where(d.b > 0, margin / (2 * np.where(d.b > 0, d.b, 1.0)), np.inf)
    peak = np.where((d.b == 0) & (margin <= 0), 0.0, peak)
    return np.maximum(floor, np.maximum(peak, 0.0))


def committed_floor(d: MixData) -> np.ndarray:
    """Volume every plan must sell: max(L_i, M_i) for products that must run, else 0 (units)."""
    return np.where(d.must_run, np.maximum(d.committed, d.min_run), 0.0)


def committed_made(d: MixData) -> np.ndarray:
    """Volume every plan must make: the committed floor less what may be bought in, ≥ 0 (units)."""
    return np.maximum(committed_floor(d) - d.buy_max, 0.0)


def sell_upper(d: MixData, make_upper: np.ndarray, peak: np.ndarray) -> np.ndarray:
    """Upper bound on sales: min(C_i, peak of sales, U_i made + Q_i) (units); the made bound where Q_i = 0."""
    out = np.minimum(np.minimum(d.cap, peak), make_upper + d.buy_max)
    return np.where(d.buy_max > 0, np.maximum(out, 0.0), make_upper)


def tight_upper(d: MixData, peak: np.ndarray | None = None) -> np.ndarray:
    """Upper bound U_i on each volume made that no optimal plan exceeds (units).

    U_i = min( C_i,
               min over r with h_ri > 0 of (H_r − Σ_{j≠i} h_rj·B_j) / h_ri,
               max(L_i, M_i, (a_i − v_i)/(2 b_i)) if b_i > 0 ).
    where H_r counts every capacity option taken in full, and B_j is the volume product j must make
    (see ``committed_made``: its committed floor less what it may buy in).
    The last term holds because beyond the peak of the contribution, more
    volume lowers profit and uses more of every resource.  If (a − v) ≤ 0 and
    nothing is committed the bound is 0: the product never pays.
    The result may be inf only for a fixed-price product with no cap and no
    resource use, which validation refuses.
    """
    n = d.n
    upper = d.cap.astype(float).copy()
    base = committed_made(d)
    committed_use = d.used(base)
    pos = d.use_amt > 0
    r, i, h = d.use_res[pos], d.use_prod[pos], d.use_amt[pos]
    room = (d.capacity_reach[r] - committed_use[r] + h * base[i]) / h
    res_bound = np.full(n, np.inf)
    np.minimum.at(res_bound, i, room)
    upper = np.minimum(upper, res_bound)
    upper = np.minimum(upper, peak_bound(d, selling=False) if peak is None else peak)
    return np.maximum(upper, 0.0)


def peak_contribution(d: MixData) -> np.ndarray:
    """max over 0 ≤ D ≤ U of (a − v)·D − b·D² per product (currency)."""
    with np.errstate(divide="ignore", invalid="ignore"):
        top = np.where(d.b > 0, d.margin / (2 * np.where(d.b > 0, d.b, 1.0)), d.upper)
    D = np.clip(top, 0.0, d.upper)
    return d.contribution(D)
