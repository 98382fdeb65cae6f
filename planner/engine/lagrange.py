r"""Lagrangian bound of the shared limits, minimised by a level bundle method.

Price every capacity row with a multiplier λ_r ≥ 0 (currency per resource
unit).  The mix problem then separates into one small problem per product:

.. math::

    L(\lambda) = \sum_i \max_{y_i, D_i} \big[(c_i - (H^\top\lambda)_i) D_i - b_i D_i^2 - F_i y_i\big]
                 + \lambda^\top \mathrm{cap},
    \qquad \max(L_i, M_i)\, y_i \le D_i \le U_i\, y_i

with c = a − v and U the tight bound of :func:`models.data.tight_upper`
(every optimal plan respects it).  Each product's problem has a closed form:
when running, D = clip((c − Hᵀλ)/(2b), floor, U) (a fixed-price product goes
to a bound); it runs if that beats shutting down.  For every λ ≥ 0, L(λ) is a
valid upper bound on the best profit (weak duality), and min L equals the
perspective relaxation's value (the convex hull of each product's set).

L is convex and piecewise smooth, with kinks where a product switches on or
off, so it is minimised by the level method (Lemaréchal, Nemirovskii &
Nesterov 1995, Math. Programming 69): a cutting-plane model from the
subgradients cap − H·D(λ), its minimum over a box (an LP) as a certified
lower estimate of min L, and the next λ the projection of the best point onto
a level set of the model (a small QP).  The box λ_r ≤ max_i c_i / h_ri holds
the minimum: beyond it no product using r makes more than its commitment,
so L does not fall any further in λ_r.

Amounts exclude the plant-wide fixed cost, as in :mod:`planner.solve`.
"""

from __future__ import annotations

import time
from dataclasses import dataclass, field

import numpy as np

from models.data import MixData

_INF = 1e30
#: Most recent points kept in the cutting-plane model (with the best one): bounds the LP and QP size.
BUNDLE_SIZE = 80


@dataclass
class DualPoint:
    """L at one λ: the bound, its subgradient, and each product's own choice there."""

    lam: np.ndarray  # currency per resource unit, ≥ 0
    value: float  # currency, L(λ) ≥ best profit
    grad: np.ndarray  # resource units, cap − H·D(λ)
    volume: np.ndarray  # units, D(λ)
    slate: np.ndarray  # bool, products running at λ


@dataclass
class DualResult:
    """Best bound found, the point giving it, and the bundle's own lower estimate of min L."""

    best: DualPoint
    lower: float  # currency: no λ in the box gives L below this
    steps: int
    seconds: float
    points: list[DualPoint] = field(default_factory=list)  # every point evaluated, in order


def priced_usage(d: MixData, lam: np.ndarray) -> np.ndarray:
    """(Hᵀλ)_i: the cost of product i's resource use at prices λ (currency per unit)."""
    if not len(d.resources):
        return np.zeros(d.n)
    return np.bincount(d.use_prod, weights=d.use_amt * lam[d.use_res], minlength=d.n)


def best_response(c: np.ndarray, b: np.ndarray, lo: np.ndarray, hi: np.ndarray) -> np.ndarray:
    """Volume maximising c·D − b·D² over lo ≤ D ≤ hi, per product (units; c in currency/unit).

    c/(2b) clipped to the bounds where b > 0; for a fixed price, hi if c > 0 else lo.
    """
    with np.errstate(divide="ignore", invalid="ignore"):
        return np.where(b > 0, np.clip(c / (2 * np.where(b > 0, b, 1.0)), lo, hi), np.where(c > 0, hi, lo))


def evaluate(d: MixData, lam: np.ndarray) -> DualPoint:
    """L(λ), its subgradient and each product's best response (closed form, O(nnz))."""
    lam = np.maximum(np.asarray(lam, dtype=float), 0.0)
    c = d.margin - priced_usage(d, lam)
    lo, U, b = d.run_floor, d.upper, d.b
    reachable = lo <= U * (1 + 1e-12) + 1e-12
    hi = np.maximum(U, lo)
    D = best_response(c, b, lo, hi)
    run_value = c * D - b * D * D - d.F
    run = np.where(d.can_stop, (run_value > 0) & reachable, True)
    g = np.where(run, run_value, 0.0)
    D = np.where(run, D, 0.0)
    used = d.used(D)
    value = float(np.sum(g) + lam @ d.capacity)
    return DualPoint(lam, value, d.capacity - used, D, run)


def choice_bounds(d: MixData, points: list[DualPoint]) -> tuple[np.ndarray, np.ndarray]:
    """(bound if product i is shut down, bound if it runs) per product: min over the points (currency).

    At a point λ, forcing product i's choice against its own best choice there
    lowers L(λ) by exactly the difference of its two options (the other
    products' problems are unchanged), so each is a valid upper bound on every
    plan with that choice (Lagrangian variable fixing).
    """
    stop = np.full(d.n, np.inf)
    run = np.full(d.n, np.inf)
    lo, U, b = d.run_floor, d.upper, d.b
    reachable = lo <= U * (1 + 1e-12) + 1e-12
    hi = np.maximum(U, lo)
    for p in points:
        c = d.margin - priced_usage(d, p.lam)
        D = best_response(c, b, lo, hi)
        rv = np.where(reachable, c * D - b * D * D - d.F, -np.inf)
        stop = np.minimum(stop, p.value - np.maximum(rv, 0.0))
        run = np.minimum(run, p.value - np.maximum(-rv, 0.0))
    return stop, run


def price_box(d: MixData) -> np.ndarray:
    """Upper end of each multiplier's range that holds a minimiser of L (currency per resource unit)."""
    top = np.zeros(len(d.resources))
    pos = d.use_amt > 0
    np.maximum.at(top, d.use_res[pos], np.maximum(d.margin[d.use_prod[pos]], 0.0) / d.use_amt[pos])
    return top * 1.001 + 1e-9


def minimise_dual(d: MixData, rel_tol: float = 1e-6, max_steps: int = 300, start: list[np.ndarray] | None = None,
                  deadline: float | None = None, target: float = -np.inf, level: float = 0.3,
                  bundle: list[DualPoint] | None = None) -> DualResult:
    """Minimise L over λ ≥ 0 until (best − lower) ≤ rel_tol·max(|best|, 1), L ≤ target, or the limits.

    ``start``: multipliers to evaluate first (for example the shadow prices of
    a previous plan: a warm start).  ``bundle``: points already evaluated (to
    resume a previous minimisation).
    """
    t0 = time.perf_counter()
    m = len(d.resources)
    points = list(bundle or []) + [evaluate(d, s) for s in (start or [])]
    if not points:
        points = [evaluate(d, np.zeros(m))]
    best = min(points, key=lambda p: p.value)
    if m == 0:
        return DualResult(best, best.value, 0, time.perf_counter() - t0, points)
    box = price_box(d)
    lower, steps = -np.inf, 0
    while steps < max_steps:
        if best.value <= target or (deadline is not None and time.perf_counter() > deadline):
            break
        steps += 1
        model = points[-BUNDLE_SIZE:]
        if not any(p is best for p in model):
            model = model + [best]
        G = np.array([p.grad for p in model])
        f0 = np.array([p.value - p.grad @ p.lam for p in model])  # model: f0_j + G_j·λ
        low = _model_min(G, f0, box)
        if low is None:
            break
        lower = max(lower, low)
        if best.value - lower <= rel_tol * max(abs(best.value), 1.0):
            break
        lev = lower + level * (best.value - lower)
        nxt = _project(G, f0, box, best.lam, lev)
        if nxt is None:
            break
        p = evaluate(d, nxt)
        points.append(p)
        if p.value < best.value:
            best = p
    return DualResult(best, lower, steps, time.perf_counter() - t0, points)


def _model_min(G: np.ndarray, f0: np.ndarray, box: np.ndarray) -> float | None:
    """min over 0 ≤ λ ≤ box of max_j (f0_j + G_j·λ), an LP in (λ, z)."""
    import highspy

    k, m = G.shape
    h = highspy.Highs()
    h.setOptionValue("output_flag", False)
    # columns λ_1..λ_m, z; rows: G_j·λ − z ≤ −f0_j
    A = np.hstack([G, -np.ones((k, 1))])
    _pass_rows(h, m + 1, np.r_[np.zeros(m), 1.0], np.r_[np.zeros(m), -_INF], np.r_[box, _INF],
               A, np.full(k, -_INF), -f0)
    h.run()
    if h.getModelStatus() != highspy.HighsModelStatus.kOptimal:
        return None
    return float(h.getInfo().objective_function_value)


def _project(G: np.ndarray, f0: np.ndarray, box: np.ndarray, centre: np.ndarray, lev: float) -> np.ndarray | None:
    """argmin ‖λ − centre‖² over 0 ≤ λ ≤ box with f0_j + G_j·λ ≤ lev for every j (a small QP)."""
    import highspy

    k, m = G.shape
    scale = np.maximum(box, 1e-9)  # solve in λ/box: every variable in [0, 1]
    for solver in ("hipo", "qpasm"):
        h = highspy.Highs()
        h.setOptionValue("output_flag", False)
        h.setOptionValue("solver", solver)
        _pass_rows(h, m, -centre / scale, np.zeros(m), np.ones(m), G * scale, np.full(k, -_INF), lev - f0)
        h.passHessian(m, m, 1, np.arange(m + 1, dtype=np.int32), np.arange(m, dtype=np.int32), np.ones(m))
        h.run()
        if h.getModelStatus() == highspy.HighsModelStatus.kOptimal:
            return np.clip(np.asarray(h.getSolution().col_value, dtype=float) * scale, 0.0, box)
    return None


def _pass_rows(h, ncol: int, cost: np.ndarray, lower: np.ndarray, upper: np.ndarray, A: np.ndarray,
               row_lo: np.ndarray, row_hi: np.ndarray) -> None:
    """Pass a dense-row LP (minimise) to a Highs instance."""
    k = A.shape[0]
    Ac = np.asarray(A, dtype=float).T  # column-wise storage of a dense matrix
    start = np.arange(0, (ncol + 1) * k, k, dtype=np.int32)
    index = np.tile(np.arange(k, dtype=np.int32), ncol)
    h.passModel(ncol, k, ncol * k, 1, 1, 0.0, np.asarray(cost, float), np.asarray(lower, float),
                np.asarray(upper, float), np.asarray(row_lo, float), np.asarray(row_hi, float),
                start, index, Ac.ravel().copy(), np.zeros(ncol, dtype=np.int32))
