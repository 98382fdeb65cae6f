r"""Lagrangian bound of the shared rows, minimised by a level bundle method.

Price every capacity row with a multiplier λ_r ≥ 0 (currency per resource
unit).  The problem then separates into its blocks (:mod:`planner.engine.blocks`):

.. math::

    L(\lambda) = \lambda^\top \mathrm{cap} + \sum_{\text{families}} \sum_{\text{blocks}}
                 \max_{x \in X_k} \big[f_k(x) - \lambda^\top u_k(x)\big]

Each block answers exactly (a product in closed form, an option by the sign of
its priced gain).  For every λ ≥ 0, L(λ) is a valid upper bound on the best
profit (weak duality), and min L equals the perspective relaxation's value.

L is convex and piecewise smooth, with kinks where a block switches, so it is
minimised by the level method (Lemaréchal, Nemirovskii & Nesterov 1995,
Math. Programming 69): a cutting-plane model from the subgradients
cap − Σ u(λ), its minimum over a box (an LP) as a certified lower estimate
of min L, and the next λ the projection of the best point onto a level set of
the model (a small QP).  The box λ_r ≤ max_i c_i / h_ri holds the minimum:
beyond it no product using r makes more than its commitment, and options only
add value as λ grows, so L does not fall any further in λ_r.
"""

from __future__ import annotations

import time
from dataclasses import dataclass, field

import numpy as np

from planner.engine import highs
from planner.engine.certificate import Certificate
from planner.engine.problem import Problem
from planner.engine.settings import BUNDLE_SIZE, DUAL_STEPS, PROJECT_SECONDS


@dataclass
class DualPoint:
    """L at one λ: the bound, its subgradient, and each block's own choice there."""

    lam: np.ndarray  # currency per resource unit, ≥ 0
    value: float  # currency, L(λ) ≥ best profit
    grad: np.ndarray  # resource units, cap − use(λ)
    choice: np.ndarray  # bool, every on/off choice at its best at λ
    on: np.ndarray  # per choice: L's terms with the choice forced on
    off: np.ndarray  # ... forced off
    values: list[np.ndarray] = field(default_factory=list)  # each family's variables at λ
    sep: tuple | None = None  # (value, on, off) affine in the choice, exact for slates that keep every link

    @property
    def gains(self) -> np.ndarray:
        """Per choice: how much L would rise if the choice were on rather than off (currency)."""
        return self.on - self.off


@dataclass
class DualResult:
    """Best bound found, the point giving it, and the bundle's own lower estimate of min L."""

    best: DualPoint
    lower: float  # currency: no λ in the box gives L below this
    steps: int
    seconds: float
    points: list[DualPoint] = field(default_factory=list)  # every point evaluated, in order


def evaluate(p: Problem, lam: np.ndarray) -> DualPoint:
    """L(λ), its subgradient and every block's best response."""
    lam = np.maximum(np.asarray(lam, dtype=float), 0.0)
    resp = p.respond(lam)
    use = np.sum([r.use for r in resp], axis=0) if resp else np.zeros(p.m)
    value = float(lam @ p.capacity + sum(r.value for r in resp))
    sep = None
    if any(r.sep is not None for r in resp):
        parts = [r.sep if r.sep is not None else (r.value, r.on, r.off) for r in resp]
        sep = (float(lam @ p.capacity + sum(s[0] for s in parts)), np.concatenate([s[1] for s in parts]),
               np.concatenate([s[2] for s in parts]))
    return DualPoint(lam, value, p.capacity - use, np.concatenate([r.choice for r in resp]),
                     np.concatenate([r.on for r in resp]), np.concatenate([r.off for r in resp]),
                     [r.x for r in resp], sep)


def choice_bounds(points: list[DualPoint], n: int) -> tuple[np.ndarray, np.ndarray]:
    """(bound with choice j off, bound with it on) per choice: min over the points (currency).

    At a point λ, forcing choice j against its best there lowers L(λ) by
    exactly the difference of its two sides (the other blocks' problems are
    unchanged), so each is a valid upper bound on every plan with that choice
    (Lagrangian variable fixing).
    """
    stop = np.full(n, np.inf)
    run = np.full(n, np.inf)
    for pt in points:
        top = np.maximum(pt.on, pt.off)
        with np.errstate(invalid="ignore"):
            stop = np.minimum(stop, pt.value - top + pt.off)
            run = np.minimum(run, pt.value - top + pt.on)
    return np.where(np.isnan(stop), -np.inf, stop), np.where(np.isnan(run), -np.inf, run)


def price_box(p: Problem) -> np.ndarray:
    """Upper end of each multiplier's range that holds a minimiser of L (currency per resource unit)."""
    d = p.d
    top = np.zeros(p.m)
    pos = d.use_amt > 0
    np.maximum.at(top, d.use_res[pos], np.maximum(d.margin[d.use_prod[pos]], 0.0) / d.use_amt[pos])
    return top * 1.001 + 1e-9


def minimise(p: Problem, rel_tol: float = 1e-6, max_steps: int = DUAL_STEPS, start: list[np.ndarray] | None = None,
             deadline: float | None = None, target: float = -np.inf, level: float = 0.3,
             bundle: list[DualPoint] | None = None, threads: int = 1, seed: int = 0,
             cert: Certificate = Certificate()) -> DualResult:
    """Minimise L over λ ≥ 0 until (best − lower) ≤ rel_tol·max(|best − offset|, 1), L ≤ target, or the limits.

    ``start``: multipliers to evaluate first (a warm start); ``bundle``: points
    already evaluated (to resume); ``cert``: the money scale and the plant-wide
    offset the gap is measured with.
    """
    t0 = time.perf_counter()
    points = list(bundle or []) + [evaluate(p, s) for s in (start or [])]
    if not points:
        points = [evaluate(p, np.zeros(p.m))]
    best = min(points, key=lambda q: q.value)
    if p.m == 0:
        return DualResult(best, best.value, 0, time.perf_counter() - t0, points)
    box = price_box(p)
    lower, steps = -np.inf, 0
    while steps < max_steps:
        if best.value <= target or (deadline is not None and time.perf_counter() > deadline):
            break
        steps += 1
        model = points[-BUNDLE_SIZE:]
        if not any(q is best for q in model):
            model = model + [best]
        G = np.array([q.grad for q in model])
        f0 = np.array([q.value - q.grad @ q.lam for q in model])  # model: f0_j + G_j·λ
        got = _model_min(G, f0, box, threads, seed)
        if got is None:
            break
        low, kelley = got
        lower = max(lower, low)
        if best.value - lower <= cert.slack(rel_tol, best.value):
            break
        nxt = _project(G, f0, box, best.lam, lower + level * (best.value - lower), threads, seed)
        if nxt is None:  # HiGHS could not project (seen on near-degenerate bundles): a cutting-plane step
            nxt = kelley
        q = evaluate(p, nxt)
        points.append(q)
        if q.value < best.value:
            best = q
    return DualResult(best, lower, steps, time.perf_counter() - t0, points)


def _model_min(G: np.ndarray, f0: np.ndarray, box: np.ndarray, threads: int,
               seed: int) -> tuple[float, np.ndarray] | None:
    """(min, argmin) over 0 ≤ λ ≤ box of max_j (f0_j + G_j·λ), an LP in (λ, z)."""
    k, m = G.shape
    h = highs.new(threads, seed)
    # columns λ_1..λ_m, z; rows: G_j·λ − z ≤ −f0_j
    A = np.hstack([G, -np.ones((k, 1))])
    _pass_rows(h, m + 1, np.r_[np.zeros(m), 1.0], np.r_[np.zeros(m), -highs.INF], np.r_[box, highs.INF],
               A, np.full(k, -highs.INF), -f0)
    if highs.run(h) != highs.Outcome.OPTIMAL:
        return None
    x = np.asarray(h.getSolution().col_value, dtype=float)
    return float(h.getInfo().objective_function_value), np.clip(x[:m], 0.0, box)


def _project(G: np.ndarray, f0: np.ndarray, box: np.ndarray, centre: np.ndarray, lev: float,
             threads: int, seed: int) -> np.ndarray | None:
    """argmin ‖λ − centre‖² over 0 ≤ λ ≤ box with f0_j + G_j·λ ≤ lev for every j (a small QP)."""
    k, m = G.shape
    scale = np.maximum(box, 1e-9)  # solve in λ/box: every variable in [0, 1]
    for solver in (("hipo", "qpasm") if highs.has_ipm() else ("qpasm",)):
        h = highs.new(threads, seed, solver=solver, time_limit=PROJECT_SECONDS)
        _pass_rows(h, m, -centre / scale, np.zeros(m), np.ones(m), G * scale, np.full(k, -highs.INF), lev - f0)
        h.passHessian(m, m, 1, np.arange(m + 1, dtype=np.int32), np.arange(m, dtype=np.int32), np.ones(m))
        if highs.run(h) == highs.Outcome.OPTIMAL:
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
