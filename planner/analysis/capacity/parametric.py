r"""The fixed-slate QP as a parametric QP in one direction of capacity.

For a fixed slate the plan is the concave QP

.. math::  \max \sum_i c_i x_i - b_i x_i^2 - K \quad \text{s.t.} \quad
           H x \le H^0 + t\,u, \quad lo \le x \le hi

(c = a − v, K the slate's fixed costs, u the direction: e_r for resource r).
On an active set — binding rows A, products fixed at a bound, the rest free —
the KKT conditions are linear in (x, λ) and in t (see :mod:`planner.kkt`), so
volumes and duals are affine in t, the optimal profit is quadratic in t and
dProfit/dt = λ·u (the envelope theorem).  The active set holds until the first
*event*: a free volume reaches a bound, a slack row starts to bind, a binding
row's λ falls to 0, or a product held at a bound would move off it (its
reduced profit reaches 0).  Crossing an event the active set is pivoted and
the next piece computed; every piece is checked against the KKT conditions
and, failing that, rebuilt from a fresh HiGHS solve.

Units: t and u in resource units, λ in currency per resource unit, profit in
currency (products' profit for the slate, no plant-wide cost).
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from models.data import MixData

#: Relative tolerance for events falling at the same point.
TIE = 1e-9


@dataclass(frozen=True)
class SlateQP:
    """One slate's QP as arrays (products in data order)."""

    c: np.ndarray
    b: np.ndarray
    H: np.ndarray  # resources × products
    lo: np.ndarray
    hi: np.ndarray
    K: float  # fixed costs of the slate (currency)
    cap: np.ndarray  # market or contract caps (units; inf if none), to name what an upper bound is
    products: tuple[str, ...]
    resources: tuple[str, ...]

    @classmethod
    def of(cls, d: MixData, slate: np.ndarray) -> "SlateQP":
        slate = np.asarray(slate, dtype=bool)
        H = d.usage_dense() if len(d.resources) else np.zeros((0, d.n))
        # fixed costs of the slate: its products', its groups' (paid where a member is on) and every
        # resource's own (a plan's closed resources come with theirs at 0: MixData.with_closed)
        K = float(d.F[slate].sum()) + float(np.sum(d.res_fixed))
        if d.n_groups:
            K += float(d.grp_cost[(d.group_members() & slate).any(axis=1)].sum())
        return cls(d.margin, d.b, H, np.where(slate, d.run_floor, 0.0), np.where(slate, d.qp_upper, 0.0),
                   K, d.cap, d.products, d.resources)

    def profit(self, x: np.ndarray) -> float:
        return float(self.c @ x - self.b @ (x * x) - self.K)


@dataclass
class Piece:
    """One active set: x(t) = x0 + (t − t0)·dx, λ(t) = λ0 + (t − t0)·dλ on [t_lo, t_hi]."""

    t0: float
    x0: np.ndarray
    dx: np.ndarray
    lam0: np.ndarray
    dlam: np.ndarray
    t_lo: float
    t_hi: float
    why_lo: str
    why_hi: str
    active: np.ndarray  # binding rows (λ may be > 0)
    at_lo: np.ndarray
    at_hi: np.ndarray
    events_lo: list
    events_hi: list

    def x(self, t: float) -> np.ndarray:
        return self.x0 + (t - self.t0) * self.dx

    def lam(self, t: float) -> np.ndarray:
        return self.lam0 + (t - self.t0) * self.dlam

    def profit_coef(self, q: SlateQP) -> tuple[float, float, float]:
        """(α, β, γ) with profit(t) = α + β·(t − t0) + γ·(t − t0)² on this piece (currency)."""
        x, dx = self.x0, self.dx
        return (q.profit(x), float(q.c @ dx - 2 * q.b @ (x * dx)), float(-q.b @ (dx * dx)))

    def contains(self, t: float) -> bool:
        span = max(abs(self.t_hi - self.t_lo), 1.0) if np.isfinite(self.t_hi - self.t_lo) else 1.0
        return self.t_lo - TIE * span <= t <= self.t_hi + TIE * span


class Degenerate(Exception):
    """The active set does not determine the duals (a singular KKT system)."""


def classify(q: SlateQP, x: np.ndarray, lam: np.ndarray) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """(active rows, at lower bound, at upper bound) of a KKT point, as in :func:`planner.kkt.polish`."""
    scale = np.maximum(np.maximum(np.abs(x), np.where(np.isfinite(q.hi), np.abs(q.hi), 0.0)), 1.0)
    at_lo = x <= q.lo + 1e-7 * scale
    at_hi = ~at_lo & (x >= q.hi - 1e-7 * scale)
    lam_scale = max(float(np.max(np.abs(q.c), initial=1.0)), 1.0)
    return lam > 1e-9 * lam_scale, at_lo, at_hi


def piece_at(q: SlateQP, cap0: np.ndarray, u: np.ndarray, t0: float, active: np.ndarray,
             at_lo: np.ndarray, at_hi: np.ndarray) -> Piece:
    """The piece of the given active set through capacity cap0 + t0·u, with its two ending events."""
    cap = cap0 + t0 * u
    free = ~at_lo & ~at_hi
    fixed_val = np.where(at_lo, q.lo, np.where(at_hi, q.hi, 0.0))
    A = np.flatnonzero(active)
    fq = np.flatnonzero(free & (q.b > 0))
    fl = np.flatnonzero(free & (q.b == 0))
    k, m = A.size, fl.size
    R = q.H.shape[0]
    lam, dlam = np.zeros(R), np.zeros(R)
    x, dx = fixed_val.copy(), np.zeros(q.c.size)
    inv2b = 1.0 / (2.0 * q.b[fq])
    if k + m:
        HA = q.H[A]
        M = np.zeros((k + m, k + m))
        M[:k, :k] = -(HA[:, fq] * inv2b) @ HA[:, fq].T
        M[:k, k:] = HA[:, fl]
        M[k:, :k] = HA[:, fl].T
        rhs = np.zeros((k + m, 2))
        fixed = ~free
        rhs[:k, 0] = cap[A] - HA[:, fixed] @ fixed_val[fixed] - HA[:, fq] @ (q.c[fq] * inv2b)
        rhs[k:, 0] = q.c[fl]
        rhs[:k, 1] = u[A]
        try:
            if np.linalg.cond(M) > 1e12:
                raise np.linalg.LinAlgError
            sol = np.linalg.solve(M, rhs)
        except np.linalg.LinAlgError:
            raise Degenerate("singular KKT system") from None
        lam[A], dlam[A] = sol[:k, 0], sol[:k, 1]
        x[fl], dx[fl] = sol[k:, 0], sol[k:, 1]
    x[fq] = (q.c[fq] - q.H[:, fq].T @ lam) * inv2b
    dx[fq] = -(q.H[:, fq].T @ dlam) * inv2b
    # Each condition g(t) = g0 + g1·(t − t0) ≥ 0 with its event text.
    red = q.c - 2 * q.b * x - q.H.T @ lam
    dred = -q.H.T @ dlam - 2 * q.b * dx
    movable = q.hi > q.lo
    conds: list[tuple[np.ndarray, np.ndarray, list[tuple[str, str, int]]]] = []
    idx_f = np.flatnonzero(free)
    conds.append((x[idx_f] - q.lo[idx_f], dx[idx_f], [("to_lo", q.products[i], i) for i in idx_f]))
    fin = idx_f[np.isfinite(q.hi[idx_f])]
    conds.append((q.hi[fin] - x[fin], -dx[fin], [("to_hi", q.products[i], i) for i in fin]))
    slack = np.flatnonzero(~active)
    used = q.H @ x
    conds.append((cap[slack] - used[slack], u[slack] - q.H[slack] @ dx,
                  [("binds", q.resources[j], j) for j in slack]))
    conds.append((lam[A], dlam[A], [("unbinds", q.resources[j], j) for j in A]))
    il = np.flatnonzero(at_lo & movable)
    conds.append((-red[il], -dred[il], [("leaves_lo", q.products[i], i) for i in il]))
    ih = np.flatnonzero(at_hi & movable)
    conds.append((red[ih], dred[ih], [("leaves_hi", q.products[i], i) for i in ih]))
    nz = np.flatnonzero(u != 0)
    conds.append((cap[nz], u[nz], [("zero", q.resources[j], j) for j in nz]))
    t_hi, ev_hi = _first_event(conds, +1, x, lam, cap)
    t_lo, ev_lo = _first_event(conds, -1, x, lam, cap)
    return Piece(t0, x, dx, lam, dlam, t0 - t_lo, t0 + t_hi, describe(ev_lo, q), describe(ev_hi, q),
                 active.copy(), at_lo.copy(), at_hi.copy(), ev_lo, ev_hi)


def _first_event(conds, sign: int, x, lam, cap) -> tuple[float, list]:
    """Distance to the first condition reaching 0 in direction ``sign`` and the events there."""
    best, events = np.inf, []
    found = []
    for g0, g1, labels in conds:
        if len(labels) == 0:
            continue
        rate = sign * np.asarray(g1, dtype=float)
        g = np.maximum(np.asarray(g0, dtype=float), 0.0)
        scale = np.maximum(np.abs(g0), 1.0)
        hit = rate < -1e-12 * scale
        for j in np.flatnonzero(hit):
            found.append((g[j] / -rate[j], labels[j]))
    if not found:
        return np.inf, []
    best = min(f[0] for f in found)
    tie = TIE * max(best, 1.0)
    events = [lab for dist, lab in found if dist <= best + tie]
    return best, events


_TEXT = {
    "to_lo": "{} falls to its lower bound",
    "to_hi": "{} reaches its upper bound",
    "binds": "{} starts to bind",
    "unbinds": "{} stops binding",
    "leaves_lo": "{} would rise off its lower bound",
    "leaves_hi": "{} would fall from its upper bound",
    "zero": "capacity of {} reaches 0",
}


def describe(events: list, q: SlateQP) -> str:
    """Event texts in the trade's words ('' if none: the piece never ends that way).

    When a limit stops binding, the products it held reach their best volumes
    at the same point; only the limit is named then.
    """
    unbinding = any(kind == "unbinds" for kind, _, _ in events)
    out = []
    for kind, name, i in events:
        at_cap = q.hi[i] >= q.cap[i] * (1 - 1e-12) if kind == "to_hi" else False
        if kind == "to_lo" and q.lo[i] == 0:
            out.append(f"{name} falls to zero")
        elif kind == "to_lo":
            out.append(f"{name} falls to its minimum ({q.lo[i]:,.6g})")
        elif kind == "to_hi" and at_cap:
            out.append(f"{name} reaches its cap ({q.hi[i]:,.6g})")
        elif kind == "to_hi" and not unbinding:
            out.append(f"{name} reaches its most profitable volume ({q.hi[i]:,.6g})")
        elif kind == "to_hi":
            continue
        elif kind == "leaves_lo" and q.lo[i] == 0:
            out.append(f"{name} starts to be made")
        elif kind == "leaves_lo":
            out.append(f"{name} rises above its minimum ({q.lo[i]:,.6g})")
        elif kind == "leaves_hi" and q.hi[i] >= q.cap[i] * (1 - 1e-12):
            out.append(f"{name} falls below its cap ({q.hi[i]:,.6g})")
        elif kind == "leaves_hi":
            out.append(f"{name} falls below its most profitable volume ({q.hi[i]:,.6g})")
        else:
            out.append(_TEXT[kind].format(name))
    return "; ".join(out)


def pivot(q: SlateQP, cap0: np.ndarray, u: np.ndarray, p: Piece, forward: bool) -> Piece:
    """The next piece past p's end in the given direction (active set pivoted, then checked)."""
    t = p.t_hi if forward else p.t_lo
    events = p.events_hi if forward else p.events_lo
    active, at_lo, at_hi = p.active.copy(), p.at_lo.copy(), p.at_hi.copy()
    for kind, _name, i in events:
        if kind == "to_lo":
            at_lo[i] = True
        elif kind == "to_hi":
            at_hi[i] = True
        elif kind == "binds":
            active[i] = True
        elif kind == "unbinds":
            active[i] = False
        elif kind in ("leaves_lo", "leaves_hi"):
            at_lo[i] = at_hi[i] = False
    nxt = piece_at(q, cap0, u, t, active, at_lo, at_hi)
    length = (nxt.t_hi - t) if forward else (t - nxt.t_lo)
    if not length > 0:
        raise Degenerate("pivot gave an empty piece")
    probe = t + (1 if forward else -1) * min(length / 2, max(abs(t), 1.0) * 1e-3)
    if not is_kkt(q, cap0 + probe * u, nxt.x(probe), nxt.lam(probe)):
        raise Degenerate("pivot gave a non-optimal piece")
    return nxt


def is_kkt(q: SlateQP, cap: np.ndarray, x: np.ndarray, lam: np.ndarray) -> bool:
    """Primal and dual feasibility and complementarity, to 1e-7 relative."""
    sx = np.maximum(np.abs(x), 1.0)
    if np.any(x < q.lo - 1e-7 * sx) or np.any(x > q.hi + 1e-7 * sx):
        return False
    ls = max(float(np.max(np.abs(q.c), initial=1.0)), 1.0)
    if np.any(lam < -1e-8 * ls):
        return False
    used = q.H @ x
    sc = np.maximum(np.abs(cap), 1.0)
    if np.any(used > cap + 1e-7 * sc) or np.any(lam[used < cap - 1e-6 * sc] > 1e-8 * ls):
        return False
    red = q.c - 2 * q.b * x - q.H.T @ lam
    lo_gap = x - q.lo > 1e-7 * sx
    hi_gap = q.hi - x > 1e-7 * sx
    tol = 1e-6 * ls
    return not (np.any(red[lo_gap] < -tol) or np.any(red[hi_gap] > tol))
