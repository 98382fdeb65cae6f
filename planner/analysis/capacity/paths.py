"""One slate's optimal profit along a capacity direction, piece by exact piece.

A :class:`SlatePath` covers t (capacity H⁰ + t·u) with the pieces of
:mod:`.parametric`: it starts from a HiGHS solve (KKT-polished), pivots from
piece to piece, and goes back to HiGHS only where a pivot cannot be trusted
(a degenerate active set).  Below ``t_min`` the slate cannot meet its
minimum volumes: its profit there is −∞.
"""

from __future__ import annotations

import numpy as np

from models.data import MixData

from planner.engine import Engine
from planner.analysis.capacity.parametric import Degenerate, Piece, SlateQP, classify, is_kkt, piece_at, pivot


class SlatePath:
    """Profit, volumes and duals of one slate as exact functions of t along ``u``."""

    def __init__(self, engine: Engine, d: MixData, slate: np.ndarray, u: np.ndarray) -> None:
        self.engine = engine
        self.d = d
        self.slate = np.asarray(slate, dtype=bool).copy()
        self.u = np.asarray(u, dtype=float)
        self.cap0 = d.capacity.astype(float)
        self.q = SlateQP.of(d, self.slate)
        self.pieces: list[Piece] = []
        self.qp_solves = 0
        self.t_min = self._feasible_from()

    def _feasible_from(self) -> float:
        """Smallest t at which the slate's minimum volumes fit (−inf if always, inf if never)."""
        need = self.q.H @ self.q.lo
        short = need - self.cap0
        scale = np.maximum(np.abs(self.cap0), 1.0)
        t = -np.inf
        for j in range(need.size):
            if self.u[j] > 0:
                t = max(t, short[j] / self.u[j])
            elif self.u[j] < 0:
                return np.inf  # (directions are non-negative in this module)
            elif short[j] > 1e-9 * scale[j]:
                return np.inf
        nz = self.u > 0
        if nz.any():
            t = max(t, float(np.max(-self.cap0[nz] / self.u[nz])))  # capacity stays ≥ 0
        return t

    def feasible(self, t: float) -> bool:
        return t >= self.t_min - 1e-12 * max(abs(self.t_min), 1.0) if np.isfinite(self.t_min) else False

    def guess(self, t: float, active: np.ndarray) -> Piece | None:
        """The piece through t on a guessed active set (rows binding, every running volume free), if it is optimal."""
        at_lo = self.q.hi <= self.q.lo
        try:
            p = piece_at(self.q, self.cap0, self.u, t, np.asarray(active, dtype=bool), at_lo, np.zeros_like(at_lo))
        except Degenerate:
            return None
        if p.t_lo <= t <= p.t_hi and is_kkt(self.q, self.cap0 + t * self.u, p.x(t), p.lam(t)):
            p.t_lo = max(p.t_lo, self.t_min)
            self._keep(p)
            return p
        return None

    def fresh(self, t: float, hint: np.ndarray | None = None) -> Piece | None:
        """The piece through t (from a guessed active set ``hint``, else a HiGHS solve); None if infeasible."""
        if not self.feasible(t):
            return None
        if hint is not None:
            p = self.guess(t, hint)
            if p is not None:
                return p
        for shift in (0.0, 1e-7, -1e-7, 1e-5):
            tt = t + shift * max(abs(t), 1.0)
            if not self.feasible(tt):
                continue
            res = self.engine.slate(self.slate, capacity=self.cap0 + tt * self.u)
            self.qp_solves += 1
            if res.status != "optimal":
                continue
            active, at_lo, at_hi = classify(self.q, res.volume, res.duals)
            try:
                p = piece_at(self.q, self.cap0, self.u, tt, active, at_lo, at_hi)
            except Degenerate:
                continue
            if p.contains(t) and is_kkt(self.q, self.cap0 + t * self.u, p.x(t), p.lam(t)):
                p.t_lo = max(p.t_lo, self.t_min)
                self._keep(p)
                return p
        return None

    def _keep(self, p: Piece) -> None:
        self.pieces.append(p)
        self.pieces.sort(key=lambda x: x.t_lo)

    def at(self, t: float, hint: np.ndarray | None = None) -> Piece | None:
        """The piece containing t (computed if needed); None where the slate is infeasible."""
        for p in self.pieces:
            if p.contains(t):
                return p
        return self.fresh(t, hint)

    def cover(self, t_a: float, t_b: float) -> list[Piece]:
        """Pieces covering [max(t_a, t_min), t_b] in order (empty if infeasible throughout)."""
        start = max(t_a, self.t_min)
        if start > t_b:
            return []
        p = self.at(start)
        if p is None:
            p = self.fresh(start + 1e-9 * max(abs(start), 1.0))
            if p is None:
                return []
        out = [p]
        while p.t_hi < t_b:
            nxt = next((x for x in self.pieces if x is not p and x.contains(p.t_hi) and x.t_hi > p.t_hi), None)
            if nxt is None:
                try:
                    nxt = pivot(self.q, self.cap0, self.u, p, forward=True)
                    self._keep(nxt)
                except Degenerate:
                    nxt = self.fresh(p.t_hi + 1e-7 * max(abs(p.t_hi), 1.0))
                    if nxt is None or nxt.t_hi <= p.t_hi:
                        break
            out.append(nxt)
            p = nxt
        return out

    def profit(self, t: float) -> float:
        """The slate's optimal profit at t (currency; −inf where infeasible)."""
        p = self.at(t)
        if p is None:
            return -np.inf
        return self.q.profit(p.x(t))


def _quad(piece: Piece, q: SlateQP, at: float) -> np.ndarray:
    """Coefficients (c0, c1, c2) of the piece's profit in s = t − at."""
    a, b, g = piece.profit_coef(q)
    dl = at - piece.t0
    return np.array([a + b * dl + g * dl * dl, b + 2 * g * dl, g])


def overtakes(a: SlatePath, b: SlatePath, t_from: float, t_to: float) -> float | None:
    """Nearest t to ``t_from`` (towards ``t_to``) past which slate b's profit exceeds slate a's.

    Both profits are exact piecewise quadratics, so the point is a root of
    their difference on one sub-interval (found in closed form); None if b
    never gets ahead on the interval.  Where b is infeasible it never leads.
    """
    lo, hi = min(t_from, t_to), max(t_from, t_to)
    pa, pb = a.cover(lo, hi), b.cover(lo, hi)
    if not pb:
        return None
    cuts = {lo, hi}
    for p in pa + pb:
        for t in (p.t_lo, p.t_hi):
            if lo < t < hi:
                cuts.add(t)
    if np.isfinite(b.t_min):
        cuts.add(max(lo, min(hi, b.t_min)))
    edges = sorted(cuts)
    spans = list(zip(edges[:-1], edges[1:]))
    if t_from > t_to:
        spans = spans[::-1]
    for l, r in spans:
        if r <= l:
            continue
        mid = 0.5 * (l + r)
        ka = next((p for p in pa if p.contains(mid)), None)
        kb = next((p for p in pb if p.contains(mid)), None)
        if kb is None or not b.feasible(mid):
            continue
        if ka is None:
            return l if t_from <= t_to else r  # a infeasible, b feasible: b leads
        f = _quad(kb, b.q, l) - _quad(ka, a.q, l)
        w = r - l
        roots = [0.0, w]
        if abs(f[2]) > 1e-300:
            disc = f[1] ** 2 - 4 * f[2] * f[0]
            if disc >= 0:
                sq = np.sqrt(disc)
                qq = -0.5 * (f[1] + np.copysign(sq, f[1]))
                cand = [qq / f[2], f[0] / qq if qq != 0 else np.nan]
                roots += [x for x in cand if np.isfinite(x) and 0 < x < w]
        elif abs(f[1]) > 0:
            x = -f[0] / f[1]
            if 0 < x < w:
                roots.append(x)
        roots = sorted(set(roots))
        tol = 1e-9 * max(abs(a.q.profit(ka.x(l))), 1.0)
        sub = list(zip(roots[:-1], roots[1:]))
        if t_from > t_to:
            sub = sub[::-1]
        for s0, s1 in sub:
            sm = 0.5 * (s0 + s1)
            if f[0] + f[1] * sm + f[2] * sm * sm > tol:
                return l + (s0 if t_from <= t_to else s1)
    return None
