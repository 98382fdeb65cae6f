r"""Better slates by flipping marginal choices, ranked by a second-order estimate, priced by Newton steps.

At a slate S with QP multipliers λ_S (currency per resource unit) and profit
V(S), flipping a set T of choices gives a slate whose profit is at most

.. math::  V(S \triangle T) \le V(S) + \sum_{j \in T} a_j,\qquad
           a_j = \pm\big(\mathrm{on}_j(\lambda_S) - \mathrm{off}_j(\lambda_S)\big)

(+ for a choice switched on, − for one switched off: weak duality of the
fixed-choice dual at λ_S), so only flips with a_j > 0 can pay on their own.
What they really earn is less, because the capacity w_j a flip takes (or
frees) must be given up (or is taken up) by the rest of the plan.  Near S the
plan's value as a function of its capacity is quadratic with Hessian −K,
K = M_B⁻¹ over the binding rows B (M the curvature of the fixed-choice dual,
:meth:`planner.engine.blocks.Blocks.curvature`), which gives the estimate

.. math::  \Delta(T) \approx \sum_{j \in T} a_j - \tfrac12 \Big(\sum_{j\in T} w_j\Big)^{\!\top}
           K \Big(\sum_{j\in T} w_j\Big).

Single flips and pairs are ranked by Δ, the best few priced exactly by the
fixed-choice dual (:func:`planner.engine.slatedual.price_slate`, a few Newton
steps from λ_S), and the best that pays is taken; this repeats from the new
slate until no ranked move pays.  The slate reached is then solved by the
fixed-choice QP, which alone makes an incumbent.  This is a local search: it
finds good plans, the certificate comes from the bounds.
"""

from __future__ import annotations

import time

import numpy as np

from planner.engine.problem import Problem
from planner.engine.settings import FLIP_PAIRS_OF, FLIP_ROUNDS, FLIP_TRIES
from planner.engine.slatedual import price_slate


def improve(p: Problem, choice: np.ndarray, lam: np.ndarray, value: float, deadline: float | None = None,
            rounds: int = FLIP_ROUNDS) -> tuple[np.ndarray, float]:
    """(choice, estimated profit) after flipping marginal choices from ``choice`` (see the module docstring).

    ``lam``, ``value``: the slate's QP multipliers and profit (problem units).  The
    estimate is an upper bound met to Newton's tolerance; the caller solves the slate.
    """
    z = np.asarray(choice, dtype=bool).copy()
    everything = np.arange(p.n_choices)
    for _ in range(rounds):
        if deadline is not None and time.perf_counter() >= deadline:
            break
        moves = _ranked_moves(p, z, lam, everything)
        if not moves:
            break
        best = None
        for js in moves[:FLIP_TRIES]:
            trial = z.copy()
            trial[list(js)] = ~trial[list(js)]
            if not p.feasible(trial):
                continue
            fd = price_slate(p, trial, lam)
            if fd.converged and fd.value > value + 1e-12 * max(abs(value), 1.0) and \
                    (best is None or fd.value > best[1]):
                best = (trial, fd.value, fd.lam)
        if best is None:
            break
        z, value, lam = best
    return z, value


def _ranked_moves(p: Problem, z: np.ndarray, lam: np.ndarray, which: np.ndarray) -> list[tuple[int, ...]]:
    """Single flips and pairs, best estimate first (estimates that cannot pay left out)."""
    gain = np.zeros(which.size)
    w = np.zeros((which.size, p.m))
    for k, pos, local in p.family_of(which):
        t = p.families[k].choice_terms(lam, local)
        if t is None:
            return []
        gain[pos] = t.on
        w[pos] = t.use
    on = z[which]
    a = np.where(on, -gain, gain)  # first-order change of flipping each choice
    w = np.where(on[:, None], -w, w)  # capacity each flip takes (negative: frees)
    ok = np.isfinite(a)
    a = np.where(ok, a, -np.inf)
    binding = lam > 0
    if binding.any():
        M = p.curvature(lam, z)[np.ix_(binding, binding)]
        ridge = max(1e-9 * float(np.max(np.diag(M), initial=0.0)), 1e-300)
        try:
            K = np.linalg.inv(M + ridge * np.eye(M.shape[0]))
        except np.linalg.LinAlgError:
            return []
        if not np.all(np.isfinite(K)):
            return []
        wb = w[:, binding]
        Kw = wb @ K
    else:
        wb = Kw = np.zeros((which.size, 0))
    single = a - 0.5 * np.einsum("ij,ij->i", wb, Kw)
    single = np.where(ok, single, -np.inf)
    order = np.argsort(-single)
    top = order[:FLIP_PAIRS_OF]
    top = top[np.isfinite(single[top])]
    moves: list[tuple[float, tuple[int, ...]]] = [(float(single[j]), (int(which[j]),)) for j in top[:FLIP_TRIES]
                                                  if single[j] > 0]
    if top.size >= 2:
        pair = single[top][:, None] + single[top][None, :] - wb[top] @ Kw[top].T
        pair[np.tril_indices(top.size)] = -np.inf
        best = np.argsort(-pair, axis=None)[:FLIP_TRIES]
        for f in best:
            x, y = divmod(int(f), top.size)
            if pair[x, y] > 0:
                moves.append((float(pair[x, y]), (int(which[top[x]]), int(which[top[y]]))))
    moves.sort(key=lambda mv: -mv[0])
    return [js for _, js in moves]
