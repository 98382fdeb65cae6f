r"""Products over the periods of a horizon as blocks: made, sold and stock per period, one run/stop choice.

The data and the model are those of :mod:`models.periods` (made m_t ≥ 0, sold
s_t, stock S_t = I + Σ_{k≤t}(m_k − s_k) ≥ 0, S_T ≥ E, fixed cost F if it makes
anything).  The shared rows are the pairs (resource r, period t).

**Priced best response.**  At multipliers λ ≥ 0 of the shared rows, a unit
made in t costs p_t = v_t + Σ_r h_r λ_rt, and a unit in stock at the end of
t costs c_t = k_t + Σ_r g_r λ_rt.  With C_s = Σ_{k<s} c_k (C_0 = 0, C_T the
whole horizon), every plan is a flow: a unit made in t and sold in s ≥ t
costs p_t + C_s − C_t, a unit of initial stock sold in s costs C_s, one held
to the end C_T.  With e_t = p_t − C_t, the cheapest making for a sale in s
costs P_s = min_{t≤s} e_t + C_s (a cumulative minimum; for the final stock,
P_T = min_t e_t + C_T).  The initial stock is a limited free supply: with a
multiplier μ ≥ −C_T on it, each period's sale is priced at
q_s = min(P_s, μ + C_s) and its volume clip((a_s − q_s)/(2 b_s), lo_s, hi_s),
so the block's value is

.. math::  g(\mu) = \mu I + \sum_s \max_{lo_s\le x\le hi_s}(a_s x - b_s x^2 - q_s x) - E\,\min(P_T, \mu + C_T),

convex in μ, and min_μ g(μ) is the block's best priced profit (LP duality of
the flow; every g(μ) is an upper bound).  μ is found by bisection on the
sign of g'(μ) = I − (sales and final stock supplied from stock); the bound
reported is g at the bisection's end (valid), the plan the one that
allocates the initial stock to the periods that value it most.  A stopped
product (it makes nothing, m = 0) has P = ∞: it can only sell its initial
stock, and is impossible where its commitments and final stock exceed it.

**Continuous QP.**  Columns m_t (0..∞) of running products and s_t
(lo..hi) of every product; the stock is eliminated: local rows
Σ_{k≤t}(s_k − m_k) ≤ I (t < T) and ≤ I − E (t = T); holding cost enters the
linear terms (m_t: −v_t − K_t, s_t: a_t + K_t, K_t = Σ_{k≥t} k_k) and the
constant (−I·K_0); stock usage enters the shared rows (g_r on m_k and −g_r on
s_k for every row (r, t ≥ k)) and their capacity (−g_r I).

**Cut MILP.**  Columns m, s, the revenue estimate w_t and y (runs); w_t ≤
(a_t − 2 b_t s̄) s_t + b_t s̄² at points s̄ (tangents of a concave function:
valid whatever y, because a stopped product may still sell its stock),
m_t ≤ U y, the stock rows as above.
"""

from __future__ import annotations

import numpy as np

from models.periods import PeriodData
from planner.engine.blocks.base import Blocks, Columns, MilpBuilder, Response
from planner.engine.highs import INF
from planner.engine.settings import CUT_VIOLATION

#: Bisection steps on the initial stock's multiplier (each halves its bracket).
STOCK_STEPS = 64


def _sell(a: np.ndarray, b: np.ndarray, q: np.ndarray, lo: np.ndarray, hi: np.ndarray) -> np.ndarray:
    """Sales maximising a·x − b·x² − q·x over lo ≤ x ≤ hi (elementwise)."""
    with np.errstate(divide="ignore", invalid="ignore"):
        x = np.where(b > 0, (a - q) / (2 * np.where(b > 0, b, 1.0)), np.where(a > q, hi, lo))
    return np.clip(np.where(np.isnan(x), lo, x), lo, hi)


def _coalesce(rows: np.ndarray, cols: np.ndarray, vals: np.ndarray):
    """Triplets with entries of the same (row, column) summed (a made column uses a row for making and for
    stock alike; HiGHS must not be given an entry twice)."""
    if rows.size == 0:
        return rows, cols, vals
    key = rows * (int(cols.max()) + 1) + cols
    uniq, inv = np.unique(key, return_inverse=True)
    total = np.bincount(inv, weights=vals, minlength=uniq.size)
    width = int(cols.max()) + 1
    return (uniq // width).astype(np.int64), (uniq % width).astype(np.int64), total


class MonthBlocks(Blocks):
    """Every product of a :class:`PeriodData` as one block over the periods; choices: run/stop."""

    name = "months"

    def __init__(self, pd: PeriodData) -> None:
        self.pd = pd
        n, T = pd.n, pd.T
        self.hi = pd.sales_upper()
        self.alone = pd.can_stop_alone()
        self.free = np.flatnonzero(~pd.must_run & (pd.F > 0) & self.alone)
        self.can_stop = np.zeros(n, dtype=bool)
        self.can_stop[self.free] = True
        self.K = pd.carry_total  # (n × T)
        self.U = self.hi.sum(axis=1) + pd.final  # bound on any period's making
        self.ncols = n * T

    # --- indexing ----------------------------------------------------------------------
    @property
    def n_choices(self) -> int:
        return int(self.free.size)

    @property
    def n_vars(self) -> int:
        return 2 * self.ncols

    def split(self, x: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
        """(made, sold) as (n × T) arrays from the family's variables."""
        n, T = self.pd.n, self.pd.T
        return x[:self.ncols].reshape(n, T), x[self.ncols:].reshape(n, T)

    def running(self, choice: np.ndarray) -> np.ndarray:
        on = ~self.can_stop
        on[self.free] = np.asarray(choice, dtype=bool)
        return on

    def choice_of(self, running: np.ndarray) -> np.ndarray:
        return np.asarray(running, dtype=bool)[self.free]

    # --- the priced best response ------------------------------------------------------
    def prices(self, lam: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
        """(p, c): (n × T) priced cost of making in t and of holding a unit at the end of t."""
        pd = self.pd
        L = np.asarray(lam, dtype=float).reshape(pd.R, pd.T) if pd.R else np.zeros((0, pd.T))
        return pd.v + pd.usage @ L, pd.hold + pd.stock_usage @ L

    def _state(self, lam: np.ndarray, makes: bool):
        """Value, made and sold of every product at λ, making allowed or not (see the module docstring)."""
        pd = self.pd
        n, T = pd.n, pd.T
        p, c = self.prices(lam)
        C = np.concatenate([np.zeros((n, 1)), np.cumsum(c, axis=1)], axis=1)  # C_0..C_T
        e = p - C[:, :T]
        if makes:
            best = np.minimum.accumulate(e, axis=1)
            who = np.zeros((n, T), dtype=np.int64)
            for t in range(1, T):
                who[:, t] = np.where(e[:, t] < best[:, t - 1], t, who[:, t - 1])
            P = best + C[:, :T]
            PT = best[:, -1] + C[:, T]
        else:
            P = np.full((n, T), np.inf)
            PT = np.full(n, np.inf)
            who = np.zeros((n, T), dtype=np.int64)
        I, E, lo, hi = pd.initial, pd.final, pd.lo, self.hi

        def from_stock(mu, k=slice(None)):  # (the products k only: the bisection runs on those with stock)
            Ck = C[k]
            q = np.minimum(P[k], mu[:, None] + Ck[:, :T])
            x = _sell(pd.a[k], pd.b[k], q, lo[k], hi[k])
            take = (mu[:, None] + Ck[:, :T] < P[k])
            need = np.sum(np.where(take, x, 0.0), axis=1) + np.where(mu + Ck[:, T] < PT[k], E[k], 0.0)
            return q, x, need

        def g(mu):
            q, x, _ = from_stock(mu)
            qT = np.minimum(PT, mu + C[:, T])
            return mu * I + np.sum(pd.a * x - pd.b * x * x - q * x, axis=1) - E * qT

        low = -C[:, T]
        steep = np.where(pd.b > 0, 2 * pd.b * np.where(np.isfinite(hi), hi, 0.0), 0.0)
        top = np.max(np.where(np.isfinite(P), P, pd.a + steep) - C[:, :T], axis=1)
        top = np.maximum(np.maximum(top, np.where(np.isfinite(PT), PT - C[:, T], 0.0)), low) + 1.0
        has = np.flatnonzero(I > 0)
        lo_mu, hi_mu = low[has], top[has]
        for _ in range(STOCK_STEPS if has.size else 0):
            mid = 0.5 * (lo_mu + hi_mu)
            _, _, need = from_stock(mid, has)
            more = need > I[has]  # g' < 0: the stock is worth more
            lo_mu = np.where(more, mid, lo_mu)
            hi_mu = np.where(more, hi_mu, mid)
        mu = top.copy()
        mu[has] = hi_mu
        value = g(mu)  # an upper bound at any μ; within the bisection's bracket of the least
        q, sold, _ = from_stock(mu)
        made = self._made(P, PT, C, e, who, mu, sold, makes)
        if not makes:
            value = np.where(self.alone, value, -np.inf)
        return value, made, sold

    def _made(self, P, PT, C, e, who, mu, sold, makes) -> np.ndarray:
        """Making of each product for ``sold``: initial stock to the periods that value it most, the rest made
        in the period of cheapest supply (units, n × T)."""
        pd = self.pd
        n, T = pd.n, pd.T
        made = np.zeros((n, T))
        if not makes:
            return made
        gain = np.concatenate([P - C[:, :T], (PT - C[:, T])[:, None]], axis=1)  # worth of a stock unit in s
        want = np.concatenate([sold, pd.final[:, None]], axis=1)
        left = pd.initial.copy()
        rows = np.arange(n)
        for k in np.argsort(-gain, axis=1, kind="stable").T:
            use = np.minimum(left, want[rows, k])
            left -= use
            short = want[rows, k] - use
            src = np.where(k < T, who[rows, np.minimum(k, T - 1)], np.argmin(e, axis=1))
            np.add.at(made, (rows, src), short)
        return made

    def respond(self, lam: np.ndarray) -> Response:
        pd = self.pd
        v_on, m_on, s_on = self._state(lam, True)
        v_on = v_on - pd.F
        v_off, m_off, s_off = self._state(lam, False)
        run = ~self.can_stop
        run[self.free] = v_on[self.free] > v_off[self.free]
        made = np.where(run[:, None], m_on, m_off)
        sold = np.where(run[:, None], s_on, s_off)
        always = ~self.can_stop
        fixed = float(np.sum(v_on[always]))
        on, off = v_on[self.free], v_off[self.free]
        value = fixed + float(np.sum(np.maximum(on, off)))
        use = pd.used(made, sold).ravel()
        return Response(value, use, run[self.free], on, off, fixed, np.concatenate([made.ravel(), sold.ravel()]))

    # --- the continuous QP -------------------------------------------------------------
    def _shared(self, run: np.ndarray, made_pos: np.ndarray, sold_pos: np.ndarray):
        """(rows, cols, amounts) of the shared rows for made/sold column positions (−1: no column)."""
        pd = self.pd
        T = pd.T
        rows, cols, vals = [], [], []
        for r in range(pd.R):
            h, g = pd.usage[:, r], pd.stock_usage[:, r]
            for t in range(T):
                i = np.flatnonzero((h > 0) & (made_pos[:, t] >= 0))
                rows.append(np.full(i.size, pd.row(r, t))), cols.append(made_pos[i, t]), vals.append(h[i])
                for k in range(t + 1):  # stock at the end of t counts making and sales up to t
                    i = np.flatnonzero((g > 0) & (made_pos[:, k] >= 0))
                    rows.append(np.full(i.size, pd.row(r, t))), cols.append(made_pos[i, k]), vals.append(g[i])
                    i = np.flatnonzero((g > 0) & (sold_pos[:, k] >= 0))
                    rows.append(np.full(i.size, pd.row(r, t))), cols.append(sold_pos[i, k]), vals.append(-g[i])
        cat = (lambda xs, dt: np.concatenate(xs).astype(dt) if xs else np.zeros(0, dt))
        return _coalesce(cat(rows, np.int64), cat(cols, np.int64), cat(vals, float))

    def _local(self, made_pos: np.ndarray, sold_pos: np.ndarray, who: np.ndarray | None = None):
        """The stock rows Σ_{k≤t}(s_k − m_k) ≤ I (− E at t = T) of the products ``who`` (default all), in
        that order: (count, row_of, cols, amounts, upper)."""
        pd = self.pd
        T = pd.T
        who = np.arange(pd.n) if who is None else np.asarray(who, dtype=np.int64)
        slot = np.full(pd.n, -1, dtype=np.int64)
        slot[who] = np.arange(who.size)
        ro, co, va = [], [], []
        for t in range(T):
            for k in range(t + 1):
                i = np.flatnonzero((sold_pos[:, k] >= 0) & (slot >= 0))
                ro.append(slot[i] * T + t), co.append(sold_pos[i, k]), va.append(np.ones(i.size))
                i = np.flatnonzero((made_pos[:, k] >= 0) & (slot >= 0))
                ro.append(slot[i] * T + t), co.append(made_pos[i, k]), va.append(-np.ones(i.size))
        upper = np.repeat(pd.initial[who], T).reshape(who.size, T)
        upper[:, -1] -= pd.final[who]
        return who.size * T, np.concatenate(ro), np.concatenate(co), np.concatenate(va), upper.ravel()

    def continuous(self, choice: np.ndarray) -> Columns:
        pd = self.pd
        n, T = pd.n, pd.T
        run = self.running(choice)
        made_pos = np.full((n, T), -1, dtype=np.int64)
        on = np.flatnonzero(run)
        made_pos[on] = np.arange(on.size * T).reshape(on.size, T)
        # a stopped product with no stock sells nothing: no columns, no rows (its commitments are 0: feasible)
        sells = np.flatnonzero(run | (pd.initial > 0))
        sold_pos = np.full((n, T), -1, dtype=np.int64)
        sold_pos[sells] = on.size * T + np.arange(sells.size * T).reshape(sells.size, T)
        rows, cols, amounts = self._shared(run, made_pos, sold_pos)
        count, row_of, lcols, lamt, lup = self._local(made_pos, sold_pos, sells)
        c = np.r_[(-pd.v - self.K)[on].ravel(), (pd.a + self.K)[sells].ravel()]
        q = np.r_[np.zeros(on.size * T), pd.b[sells].ravel()]
        lo = np.r_[np.zeros(on.size * T), pd.lo[sells].ravel()]
        hi = np.r_[np.full(on.size * T, np.inf), self.hi[sells].ravel()]
        index = np.r_[(on[:, None] * T + np.arange(T)).ravel(),
                      self.ncols + (sells[:, None] * T + np.arange(T)).ravel()].astype(np.int64)
        cap = -(pd.stock_usage.T @ pd.initial)[:, None] * np.ones((1, T)) if pd.R else np.zeros((0, T))
        return Columns(c=c, q=q, lo=lo, hi=hi, rows=rows, cols=cols, amounts=amounts,
                       constant=-float(np.sum(pd.initial * self.K[:, 0])) - float(np.sum(pd.F[run])),
                       capacity=cap.ravel(), index=index,
                       local=(count, row_of, lcols, lamt, lup))

    def profit(self, x: np.ndarray, choice: np.ndarray) -> float:
        made, sold = self.split(np.asarray(x, dtype=float))
        return self.pd.profit(made, sold, self.running(choice))

    def feasible(self, choice: np.ndarray) -> bool:
        return bool(np.all(self.alone[~self.running(choice)]))

    # --- the outer-approximation MILP --------------------------------------------------
    def add_to_milp(self, milp: MilpBuilder) -> None:
        pd = self.pd
        n, T = pd.n, pd.T
        self.mcol = milp.columns((-pd.v - self.K).ravel(), np.zeros(n * T), np.repeat(self.U, T)).reshape(n, T)
        self.scol = milp.columns(self.K.ravel(), pd.lo.ravel(), self.hi.ravel()).reshape(n, T)
        with np.errstate(divide="ignore", invalid="ignore"):
            top = np.where(pd.b > 0, pd.a * pd.a / (4 * np.where(pd.b > 0, pd.b, 1.0)), pd.a * self.hi)
        self.wcol = milp.columns(np.ones(n * T), np.full(n * T, -INF), top.ravel() + 1.0).reshape(n, T)
        free = self.free
        self.ycol = np.full(n, -1, dtype=np.int64)
        self.ycol[free] = milp.columns(-pd.F[free], np.zeros(free.size), np.ones(free.size), integer=True)
        milp.offset -= float(np.sum(pd.F[~self.can_stop])) + float(np.sum(pd.initial * self.K[:, 0]))
        rows, cols, amounts = self._shared(np.ones(n, bool), self.mcol, self.scol)
        milp.use(rows, cols, amounts)
        if pd.R:
            milp.capacity = milp.capacity - np.repeat(pd.stock_usage.T @ pd.initial, T)
        count, row_of, lcols, lamt, lup = self._local(self.mcol, self.scol)
        milp.rows(count, row_of, lcols, lamt, np.full(count, -INF), lup)
        # making only where it runs: m_t − U y ≤ 0 (stopped-for-good products: m = 0)
        stop = np.flatnonzero(self.can_stop)
        k = stop.size * T
        if k:
            r = np.arange(k)
            milp.rows(k, np.r_[r, r], np.r_[self.mcol[stop].ravel(), np.repeat(self.ycol[stop], T)],
                      np.r_[np.ones(k), -np.repeat(self.U[stop], T)], np.full(k, -INF), np.zeros(k))
        self.scale = np.maximum(np.abs(pd.a) * np.where(np.isfinite(self.hi), self.hi, 1.0), 1.0)
        with np.errstate(divide="ignore", invalid="ignore"):
            peak = np.clip(np.where(pd.b > 0, pd.a / (2 * np.where(pd.b > 0, pd.b, 1.0)), self.hi), pd.lo, self.hi)
        pts = [peak, 0.5 * self.hi, self.hi, pd.lo]
        for pt in pts:
            ok = np.isfinite(pt)
            self._cuts(milp, np.flatnonzero(ok.ravel()), pt.ravel()[ok.ravel()])

    def _cuts(self, milp: MilpBuilder, cells: np.ndarray, points: np.ndarray) -> int:
        """Tangents w − (a − 2 b s̄) s ≤ b s̄² at the flat cells (i·T + t)."""
        if cells.size == 0:
            return 0
        pd = self.pd
        a, b = pd.a.ravel()[cells], pd.b.ravel()[cells]
        r = np.arange(cells.size)
        milp.rows(cells.size, np.r_[r, r], np.r_[self.wcol.ravel()[cells], self.scol.ravel()[cells]],
                  np.r_[np.ones(cells.size), -(a - 2 * b * points)], np.full(cells.size, -INF), b * points * points)
        return int(cells.size)

    def cuts(self, milp: MilpBuilder, x: np.ndarray) -> int:
        pd = self.pd
        s, w = x[self.scol.ravel()], x[self.wcol.ravel()]
        over = w - (pd.a.ravel() * s - pd.b.ravel() * s * s) > CUT_VIOLATION * self.scale.ravel()
        return self._cuts(milp, np.flatnonzero(over), s[over])

    def cuts_at(self, milp: MilpBuilder, values: np.ndarray, choice: np.ndarray) -> int:
        _, sold = self.split(np.asarray(values, dtype=float))
        cells = np.flatnonzero((self.pd.b.ravel() > 0) & (sold.ravel() > 0))
        return self._cuts(milp, cells, sold.ravel()[cells])

    def milp_choice(self, milp: MilpBuilder, x: np.ndarray) -> np.ndarray:
        return x[self.ycol[self.free]] > 0.5

    def milp_start(self, milp: MilpBuilder, values: np.ndarray, choice: np.ndarray) -> dict[int, float]:
        pd = self.pd
        made, sold = self.split(np.asarray(values, dtype=float))
        run = self.running(choice)
        made = np.where(run[:, None], made, 0.0)
        out = dict(zip(self.mcol.ravel().tolist(), made.ravel().tolist()))
        out.update(zip(self.scol.ravel().tolist(), sold.ravel().tolist()))
        out.update(zip(self.wcol.ravel().tolist(), (pd.a * sold - pd.b * sold * sold).ravel().tolist()))
        out.update(zip(self.ycol[self.free].tolist(), np.asarray(choice, dtype=float).tolist()))
        return out

    def milp_fix(self, milp: MilpBuilder, which: np.ndarray, on: np.ndarray) -> None:
        milp.fix(self.ycol[self.free[np.asarray(which, dtype=np.int64)]], np.asarray(on, dtype=float))
