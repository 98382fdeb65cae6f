r"""Products as blocks: one block per product, each with its own closed-form best response.

Product i (volume D_i, units) earns the concave contribution
g_i(D) = (a_i − v_i)·D − b_i·D² and, if it runs (y_i = 1), pays F_i; it uses
h_ri per unit of each shared row r.  Its feasible set is
max(L_i, M_i)·y_i ≤ D_i ≤ U_i·y_i, with y_i ≡ 1 where it has no real on/off
choice (it must run, or nothing is saved by stopping: ``MixData.can_stop``).

At multipliers λ its priced problem has a closed form: with
c_i = a_i − v_i − (Hᵀλ)_i, the running volume is clip(c_i / (2 b_i), floor, U)
(a fixed-price product goes to a bound), and it runs if that beats stopping.
Running, its priced value has gradient −h_i·D_i in λ and, strictly inside
its bounds with b_i > 0, Hessian h_i h_iᵀ / (2 b_i) (0 at a bound or for a
fixed price); the family's curvature is the sum over running products.

In the continuous QP a running product is a column with profit c·D − b·D²
over floor ≤ D ≤ ``MixData.qp_upper`` (a bound that never competes with a
capacity row for its dual); a stopped one is left out (volume 0).  In the
outer-approximation MILP it has columns D_i, t_i (the contribution estimate)
and y_i, the links D ≤ U·y and D ≥ floor·y, and the perspective tangent cuts

.. math::  t_i \le (c_i - 2 b_i \bar D)\, D_i + b_i \bar D^2\, y_i

at chosen points D̄, valid for y = 0 and y = 1 alike (Frangioni & Gentile
2006, Math. Programming 106).

Buy-in (``MixData.buy_max`` Q_i > 0): the product sells D_i and buys in
B_i of them, 0 ≤ B_i ≤ Q_i, B_i ≤ D_i, at β_i per unit; the made units
D_i − B_i use the shared rows.  Written in (D, B) the profit is

.. math::  g_i(D_i) - (\beta_i - v_i) B_i,\qquad \text{use } h_{ri}(D_i - B_i),

so the contribution g_i and its tangent cuts are unchanged; B_i is a linear
column (negative use of the shared rows: it replaces made units) with the
block's own row B_i − D_i ≤ 0.  The family's variables are D (n) then B (one
per product that may buy, in product order).  Priced at λ, the supply cost of
D is convex piecewise linear: the cheaper source first (β_i for up to Q_i
units, c_i = v_i + (Hᵀλ)_i for up to the made bound), so the best response is
the concave 1-D maximiser found on the first segment or, if it reaches that
segment's end, on the second, then clipped to the sales bounds — exact.
"""

from __future__ import annotations

import numpy as np

from models.data import MixData, peak_contribution
from planner.engine.blocks.base import Blocks, Columns, MilpBuilder, Response, Terms
from planner.engine.settings import CUT_VIOLATION, DENSE_USAGE_UP_TO
from planner.engine.highs import INF


def best_response(c: np.ndarray, b: np.ndarray, lo: np.ndarray, hi: np.ndarray) -> np.ndarray:
    """Volume maximising c·D − b·D² over lo ≤ D ≤ hi, per product (units; c in currency/unit).

    c/(2b) clipped to the bounds where b > 0; for a fixed price, hi if c > 0 else lo.
    """
    with np.errstate(divide="ignore", invalid="ignore"):
        return np.where(b > 0, np.clip(c / (2 * np.where(b > 0, b, 1.0)), lo, hi), np.where(c > 0, hi, lo))


def priced_usage(d: MixData, lam: np.ndarray) -> np.ndarray:
    """(Hᵀλ)_i: the cost of product i's use of the shared rows at prices λ (currency per unit)."""
    if not len(d.resources) or not d.use_amt.size:
        return np.zeros(d.n)
    return np.bincount(d.use_prod, weights=d.use_amt * lam[d.use_res], minlength=d.n)


def buy_response(a: np.ndarray, b: np.ndarray, make: np.ndarray, make_hi: np.ndarray, buy: np.ndarray,
                 buy_hi: np.ndarray, lo: np.ndarray, hi: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """(sales, bought) maximising a·D − b·D² − make·M − buy·B over M + B = D, 0 ≤ M ≤ make_hi,
    0 ≤ B ≤ buy_hi, lo ≤ D ≤ hi (per product; currency per unit, units).

    The supply cost of D is convex piecewise linear (the cheaper source first), so
    the objective is concave in D: its maximiser on the first segment, or on the
    second if it reaches the first segment's end, clipped to [lo, hi].
    """
    buy_first = buy <= make
    c1, k1 = np.where(buy_first, buy, make), np.where(buy_first, buy_hi, make_hi)
    c2, k2 = np.where(buy_first, make, buy), np.where(buy_first, make_hi, buy_hi)
    top = k1 + k2
    D1 = best_response(a - c1, b, np.zeros_like(a), k1)
    D2 = best_response(a - c2, b, k1, top)
    D = np.where(D1 >= k1, D2, D1)
    D = np.clip(D, lo, np.minimum(hi, top))
    first = np.minimum(D, k1)
    bought = np.where(buy_first, first, D - first)
    return D, bought


class ProductBlocks(Blocks):
    """Every product of ``d`` as a block; its choices are the products with a real on/off choice."""

    name = "products"
    forced = True

    def __init__(self, d: MixData) -> None:
        self.d = d
        self.free = np.flatnonzero(d.can_stop)  # product of each choice
        self.floor = d.run_floor
        self.reachable = self.floor <= d.upper * (1 + 1e-12) + 1e-12
        self.hi = np.maximum(d.upper, self.floor)
        self.buyers = np.flatnonzero(d.buy_max > 0)  # products that may buy in, product order
        self.forced = self.buyers.size == 0  # choice_terms and curvature know nothing of buying in
        self.buy_pos = np.full(d.n, -1, dtype=np.int64)
        self.buy_pos[self.buyers] = np.arange(self.buyers.size)
        self.reachable &= self.floor <= (d.make_upper + d.buy_max) * (1 + 1e-12) + 1e-12

    @property
    def n_choices(self) -> int:
        return int(self.free.size)

    @property
    def n_vars(self) -> int:
        return self.d.n + int(self.buyers.size)

    def bought(self, x: np.ndarray) -> np.ndarray:
        """(n,) units bought in, from the family's variables ``x`` (0 where nothing may be bought)."""
        out = np.zeros(self.d.n)
        out[self.buyers] = np.asarray(x, dtype=float)[self.d.n:]
        return out

    def made(self, x: np.ndarray) -> np.ndarray:
        """(n,) units made: sales less units bought in."""
        return np.asarray(x, dtype=float)[:self.d.n] - self.bought(x)

    def running(self, choice: np.ndarray) -> np.ndarray:
        """(n,) bool: the products that run under ``choice`` (those without a choice always do)."""
        on = ~self.d.can_stop
        on[self.free] = np.asarray(choice, dtype=bool)
        return on

    def choice_of(self, running: np.ndarray) -> np.ndarray:
        """The choice vector of a (n,) running mask."""
        return np.asarray(running, dtype=bool)[self.free]

    def respond(self, lam: np.ndarray, choice: np.ndarray | None = None) -> Response:
        d = self.d
        priced = priced_usage(d, lam)
        c = d.margin - priced
        D = best_response(c, d.b, self.floor, self.hi)
        run_value = c * D - d.b * D * D - d.F
        B = np.zeros(d.n)
        k = self.buyers
        if k.size:
            Dk, B[k] = buy_response(d.a[k], d.b[k], d.v[k] + priced[k], d.make_upper[k], d.buy_cost[k],
                                    d.buy_max[k], self.floor[k], self.hi[k])
            D[k] = Dk
            run_value[k] = c[k] * Dk - d.b[k] * Dk * Dk + (d.a[k] - d.buy_cost[k] - c[k]) * B[k] - d.F[k]
        on = np.where(self.reachable, run_value, -np.inf)[self.free]
        off = np.zeros(self.free.size)
        run = np.ones(d.n, dtype=bool)
        run[self.free] = on > off if choice is None else np.asarray(choice, dtype=bool)
        always = ~d.can_stop
        fixed = float(np.sum(run_value[always]))
        D = np.where(run, D, 0.0)
        B = np.where(run, B, 0.0)
        value = fixed + float(np.sum(np.maximum(on, off) if choice is None else np.where(run[self.free], on, off)))
        return Response(value, d.used(D - B), run[self.free], on, off, fixed, np.r_[D, B[k]])

    def dense_usage(self) -> np.ndarray | None:
        """(n × m) usage h_ri by product, or None beyond ``DENSE_USAGE_UP_TO`` entries."""
        if not hasattr(self, "_dense"):
            d, m = self.d, len(self.d.resources)
            self._dense = None
            if d.n * m <= DENSE_USAGE_UP_TO:
                flat = np.bincount(d.use_prod * m + d.use_res, weights=d.use_amt, minlength=d.n * m)
                self._dense = flat.astype(float).reshape(d.n, m)
        return self._dense

    def _weights(self, c: np.ndarray, D: np.ndarray, b: np.ndarray, lo: np.ndarray,
                 hi: np.ndarray) -> np.ndarray:
        """1/(2b) where a product's volume is strictly inside its bounds and b > 0, else 0."""
        inside = (b > 0) & (D > lo) & (D < hi)
        return np.where(inside, 1.0 / (2.0 * np.where(b > 0, b, 1.0)), 0.0)

    def curvature(self, lam: np.ndarray, choice: np.ndarray) -> np.ndarray:
        d, m = self.d, len(self.d.resources)
        HT = self.dense_usage()
        if HT is None:
            return np.zeros((m, m))
        run = self.running(choice)
        c = d.margin - HT @ lam
        D = best_response(c, d.b, self.floor, self.hi)
        w = np.where(run, self._weights(c, D, d.b, self.floor, self.hi), 0.0)
        k = np.flatnonzero(w)
        return (HT[k].T * w[k]) @ HT[k]

    def choice_terms(self, lam: np.ndarray, which: np.ndarray) -> Terms | None:
        HT = self.dense_usage()
        if HT is None:
            return None
        d = self.d
        which = np.asarray(which, dtype=np.int64)
        got = getattr(self, "_subset", None)  # the branch-and-bound asks for the same choices many times
        if got is None or got[0].shape != which.shape or not np.array_equal(got[0], which):
            i = self.free[which]
            got = (which.copy(), HT[i], d.margin[i], self.floor[i], self.hi[i], d.b[i], d.F[i],
                   self.reachable[i])
            self._subset = got
        _, g, margin, lo, hi, b, F, reach = got
        c = margin - g @ lam
        D = best_response(c, b, lo, hi)
        on = np.where(reach, c * D - b * D * D - F, -np.inf)
        return Terms(on, g * D[:, None], self._weights(c, D, b, lo, hi), g)

    def continuous(self, choice: np.ndarray) -> Columns:
        d = self.d
        run = self.running(choice)
        cols = np.flatnonzero(run)
        pos = np.full(d.n, -1, dtype=np.int64)
        pos[cols] = np.arange(cols.size)
        keep = (pos[d.use_prod] >= 0) & (d.use_amt != 0)
        rows, where, amounts = d.use_res[keep], pos[d.use_prod[keep]], d.use_amt[keep]
        k = self.buyers[run[self.buyers]]
        if not k.size:
            return Columns(c=d.margin[cols], q=d.b[cols], lo=self.floor[cols], hi=d.qp_upper[cols],
                           rows=rows, cols=where, amounts=amounts, constant=-float(np.sum(d.F[run])), index=cols)
        bpos = np.full(d.n, -1, dtype=np.int64)
        bpos[k] = cols.size + np.arange(k.size)
        bk = (bpos[d.use_prod] >= 0) & (d.use_amt != 0)
        j = np.arange(k.size)
        return Columns(c=np.r_[d.margin[cols], d.v[k] - d.buy_cost[k]], q=np.r_[d.b[cols], np.zeros(k.size)],
                       lo=np.r_[self.floor[cols], np.zeros(k.size)], hi=np.r_[d.qp_upper[cols], d.buy_max[k]],
                       rows=np.r_[rows, d.use_res[bk]], cols=np.r_[where, bpos[d.use_prod[bk]]],
                       amounts=np.r_[amounts, -d.use_amt[bk]], constant=-float(np.sum(d.F[run])),
                       index=np.r_[cols, d.n + self.buy_pos[k]],
                       local=(k.size, np.r_[j, j], np.r_[bpos[k], pos[k]], np.r_[np.ones(k.size), -np.ones(k.size)],
                              np.zeros(k.size)))

    def profit(self, x: np.ndarray, choice: np.ndarray) -> float:
        d = self.d
        run = self.running(choice)
        B = np.where(run, self.bought(x), 0.0)
        return float(np.sum(d.contribution(np.where(run, x[:d.n], 0.0))) - np.sum(d.F[run])
                     - np.sum((d.buy_cost - d.v) * B))

    def feasible(self, choice: np.ndarray) -> bool:
        return bool(np.all(self.reachable[self.running(choice)]))

    # --- the outer-approximation MILP -------------------------------------------------
    def add_to_milp(self, milp: MilpBuilder) -> None:
        d, n, free = self.d, self.d.n, self.free
        lo_D = np.where(d.can_stop, 0.0, self.floor)
        self.Dcol = milp.columns(np.zeros(n), lo_D, d.upper)
        top_t = np.maximum(peak_contribution(d), 0.0) + 1.0
        self.tcol = milp.columns(np.ones(n), np.full(n, -INF), top_t)
        self.ycol = np.full(n, -1, dtype=np.int64)
        self.ycol[free] = milp.columns(-d.F[free], np.zeros(free.size), np.ones(free.size), integer=True)
        milp.offset -= float(np.sum(d.F[~d.can_stop]))
        keep = d.use_amt != 0
        milp.use(d.use_res[keep], self.Dcol[d.use_prod[keep]], d.use_amt[keep])
        k = free.size
        # D_i − U_i y_i ≤ 0
        milp.rows(k, np.r_[np.arange(k), np.arange(k)], np.r_[self.Dcol[free], self.ycol[free]],
                  np.r_[np.ones(k), -d.upper[free]], np.full(k, -INF), np.zeros(k))
        # D_i − floor_i y_i ≥ 0 where the floor is positive
        g = free[self.floor[free] > 0]
        milp.rows(g.size, np.r_[np.arange(g.size), np.arange(g.size)], np.r_[self.Dcol[g], self.ycol[g]],
                  np.r_[np.ones(g.size), -self.floor[g]], np.zeros(g.size), np.full(g.size, INF))
        # buy-in: B_i in [0, Q_i] at (β − v) per unit beyond making, frees h_ri per unit; B_i − D_i ≤ 0
        kb = self.buyers
        self.Bcol = milp.columns(d.v[kb] - d.buy_cost[kb], np.zeros(kb.size), d.buy_max[kb])
        if kb.size:
            bu = (self.buy_pos[d.use_prod] >= 0) & keep
            milp.use(d.use_res[bu], self.Bcol[self.buy_pos[d.use_prod[bu]]], -d.use_amt[bu])
            j = np.arange(kb.size)
            milp.rows(kb.size, np.r_[j, j], np.r_[self.Bcol, self.Dcol[kb]], np.r_[np.ones(kb.size), -np.ones(kb.size)],
                      np.full(kb.size, -INF), np.zeros(kb.size))
        self.scale = np.maximum(np.abs(d.margin) * np.where(np.isfinite(d.upper), d.upper, 1.0), 1.0)
        self.ncuts = 0
        self._add_cuts(milp, *self.initial_points())

    def initial_points(self) -> tuple[np.ndarray, np.ndarray]:
        """Cut points per product: its standalone peak, half its bound and its bound."""
        d = self.d
        U = d.upper
        with np.errstate(divide="ignore", invalid="ignore"):
            peak = np.where(d.b > 0, d.margin / (2 * np.where(d.b > 0, d.b, 1.0)), U)
        peak = np.clip(peak, 0.0, U)
        curved = np.flatnonzero(d.b > 0)
        return np.concatenate([np.arange(d.n), curved, curved]), np.concatenate([peak, 0.5 * U[curved], U[curved]])

    def _add_cuts(self, milp: MilpBuilder, products: np.ndarray, points: np.ndarray) -> int:
        """Tangent cuts t_k − (c_k − 2 b_k D̄) D_k − b_k D̄² y_k ≤ 0 (y_k ≡ 1: on the right-hand side)."""
        d = self.d
        k = np.asarray(products, dtype=np.int64)
        pt = np.asarray(points, dtype=float)
        if k.size == 0:
            return 0
        slope = d.margin[k] - 2.0 * d.b[k] * pt
        height = d.b[k] * pt * pt
        has_y = self.ycol[k] >= 0
        r = np.arange(k.size)
        ry = r[has_y]
        row_of = np.r_[r, r, ry]
        cols = np.r_[self.tcol[k], self.Dcol[k], self.ycol[k[has_y]]]
        vals = np.r_[np.ones(k.size), -slope, -height[has_y]]
        milp.rows(k.size, row_of, cols, vals, np.full(k.size, -INF), np.where(has_y, 0.0, height))
        self.ncuts += int(k.size)
        return int(k.size)

    def milp_values(self, x: np.ndarray) -> np.ndarray:
        """The family's variables (sales, then units bought in) of a MILP solution."""
        return np.r_[x[self.Dcol], x[self.Bcol]]

    def cuts(self, milp: MilpBuilder, x: np.ndarray) -> int:
        vol, t = x[self.Dcol], x[self.tcol]
        over = t - self.d.contribution(vol) > CUT_VIOLATION * self.scale
        return self._add_cuts(milp, np.flatnonzero(over), vol[over])

    def cuts_at(self, milp: MilpBuilder, values: np.ndarray, choice: np.ndarray) -> int:
        d = self.d
        run = self.running(choice)
        x = np.asarray(values, dtype=float)[:d.n]
        # (a flat tangent at a product's peak is already among the first cuts)
        at = np.flatnonzero(run & (d.b > 0) & (x > 0) & (np.abs(d.margin - 2 * d.b * x) > 1e-9 * np.abs(d.margin)))
        return self._add_cuts(milp, at, x[at])

    def milp_choice(self, milp: MilpBuilder, x: np.ndarray) -> np.ndarray:
        return x[self.ycol[self.free]] > 0.5

    def milp_volumes(self, x: np.ndarray) -> np.ndarray:
        """The volumes D of a MILP solution (units)."""
        return x[self.Dcol]

    def milp_start(self, milp: MilpBuilder, values: np.ndarray, choice: np.ndarray) -> dict[int, float]:
        run = self.running(choice)
        values = np.asarray(values, dtype=float)
        D = np.where(run, values[:self.d.n], 0.0)
        out = dict(zip(self.Dcol.tolist(), D.tolist()))
        out.update(zip(self.Bcol.tolist(), np.where(run, self.bought(values), 0.0)[self.buyers].tolist()))
        out.update(zip(self.tcol.tolist(), self.d.contribution(D).tolist()))
        out.update(zip(self.ycol[self.free].tolist(), np.asarray(choice, dtype=float).tolist()))
        return out

    def milp_fix(self, milp: MilpBuilder, which: np.ndarray, on: np.ndarray) -> None:
        milp.fix(self.ycol[self.free[np.asarray(which, dtype=np.int64)]], np.asarray(on, dtype=float))
