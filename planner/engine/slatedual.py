r"""The dual of one fixed-choice QP, minimised by projected Newton steps: a fast way to price a slate.

With every on/off choice fixed to a slate S, the shared rows priced by
λ ≥ 0 (currency per resource unit) give

.. math::  \phi_S(\lambda) = \lambda^\top \mathrm{cap} + \sum_{\text{blocks}} \max_{x}
           \big[f_k(x) - \lambda^\top u_k(x)\big] \quad(\text{choices forced to } S),

an upper bound on the slate's best profit V(S) for every λ ≥ 0, equal to it
at the minimiser (the slate's QP is convex, so there is no duality gap).
φ_S is convex with gradient cap − use(λ) and, where products with a sloped
price line are strictly inside their bounds, Hessian
Σ h_i h_iᵀ / (2 b_i) (:meth:`planner.engine.blocks.Blocks.curvature`): it is
piecewise quadratic, so Newton's method from the multipliers of a
neighbouring slate ends in a few steps.  Steps are projected on λ ≥ 0
(Bertsekas 1982, SIAM J. Control Optim. 20): rows at λ_r = 0 whose gradient
points outwards are held, the rest take the Newton step, with an Armijo
line search.

Used to *screen* slates (flips, the branch-and-bound's roundings): its value
is an upper bound, never a plan.  A slate worth keeping is solved by the
fixed-choice QP (:mod:`planner.engine.slateqp`) before it becomes the incumbent.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from planner.engine.problem import Problem
from planner.engine.settings import NEWTON_STEPS, NEWTON_TOL


@dataclass
class FixedDual:
    """φ_S at the last multipliers reached (an upper bound on the slate's profit; problem units)."""

    lam: np.ndarray
    value: float
    steps: int
    converged: bool  # Newton decrement below NEWTON_TOL of the value: value ≈ V(S)


def newton_direction(M: np.ndarray, g: np.ndarray, lam: np.ndarray, move: np.ndarray) -> np.ndarray:
    """−(M + diag ρ)⁻¹ g on the rows that ``move`` (0 elsewhere).

    ρ is 1e-9 of the largest curvature; a row with (almost) no curvature of its own (no running
    product strictly inside its bounds uses it) also gets ‖g‖∞ / (0.1·(max λ + 1)), so it moves
    by at most a tenth of the multipliers' size and the line search takes it from there.
    """
    d = np.zeros_like(lam)
    if not move.any():
        return d
    A = M[np.ix_(move, move)]
    gm = g[move]
    diag = np.diag(A)
    top = float(np.max(diag, initial=0.0))
    floor = float(np.max(np.abs(gm), initial=0.0)) / (0.1 * (float(np.max(lam, initial=0.0)) + 1.0))
    ridge = np.maximum(1e-9 * top, 1e-300) + np.where(diag <= 1e-9 * top, max(floor, 1e-300), 0.0)
    try:
        step = -np.linalg.solve(A + np.diag(ridge), gm)
    except np.linalg.LinAlgError:
        step = -gm / ridge
    d[move] = np.where(np.isfinite(step), step, 0.0)
    return d


def value_at(p: Problem, lam: np.ndarray, choice: np.ndarray) -> tuple[float, np.ndarray]:
    """(φ_S(λ), its gradient cap − use) at λ with ``choice`` forced."""
    resp = p.respond(lam, choice)
    use = np.sum([r.use for r in resp], axis=0) if resp else np.zeros(p.m)
    return float(lam @ p.capacity + sum(r.value for r in resp)), p.capacity - use


def price_slate(p: Problem, choice: np.ndarray, lam0: np.ndarray, max_steps: int = NEWTON_STEPS,
                tol: float = NEWTON_TOL) -> FixedDual:
    """Minimise φ_S over λ ≥ 0 from ``lam0`` (see the module docstring)."""
    lam = np.maximum(np.asarray(lam0, dtype=float), 0.0).copy()
    val, g = value_at(p, lam, choice)
    scale = max(abs(val), 1e-9)
    for step in range(1, max_steps + 1):
        M = p.curvature(lam, choice)
        held = (lam <= 0.0) & (g > 0.0)
        move = ~held
        d = newton_direction(M, g, lam, move)
        decrement = -float(g @ d)
        if decrement <= tol * scale:
            return FixedDual(lam, val, step, True)
        t = 1.0
        while True:
            nxt = np.maximum(lam + t * d, 0.0)
            v2, g2 = value_at(p, nxt, choice)
            if v2 <= val + 1e-4 * float(g @ (nxt - lam)) or t < 1e-6:
                break
            t *= 0.5
        if v2 > val:  # no descent along the step: as far as Newton gets here
            return FixedDual(lam, val, step, False)
        drop = val - v2
        lam, val, g = nxt, v2, g2
        if drop <= tol * scale and t == 1.0:
            return FixedDual(lam, val, step, True)
    return FixedDual(lam, val, max_steps, False)
