r"""Branch-and-bound over the Lagrangian: each node's bound is the dual with some choices forced.

Where the Lagrangian leaves the gap open, many on/off choices are nearly
indifferent at the dual optimum λ* (their gain on_j − off_j is about 0), and
the bound is weak only because the relaxation may run a few of them in part
(by Shapley–Folkman at most m, the number of shared rows).  Here every block
whose off side is empty (products, options: :class:`planner.engine.blocks.Terms`)
takes part; amounts are in the problem's units (currency, resource units).

**Root fixing.**  With the incumbent's profit V and the target
V + rel_gap·max(|V|, 1), a choice whose opposite cannot reach the target at
some dual point (:func:`planner.engine.dual.choice_bounds`) is fixed for the
whole search; the others form the open set J (usually a few hundred).

**Node bound.**  A node forces some of J on (1) or off (0) and leaves the rest
open (−1).  For every λ ≥ 0

.. math::  \Phi(\lambda) = \lambda^\top\mathrm{cap} + \phi_F(\lambda)
           + \sum_{j\in J} \ell_j(\lambda),\qquad
           \ell_j = \mathrm{on}_j \;(1),\; 0 \;(0),\; \max(\mathrm{on}_j, 0) \;(-1),

bounds every plan of the node (weak duality); φ_F is the priced value of
everything outside J (its choices fixed).  Its minimum is the node's
perspective relaxation.  To find a good λ cheaply, φ_F is replaced near a
point λ_k by its quadratic model φ_F(λ_k) − v_k·(λ−λ_k) + ½(λ−λ_k)ᵀM_k(λ−λ_k)
(v_k its use of the rows, M_k its curvature), and each max(on_j, 0) by its
smoothing s_μ(θ) = 0, (θ + μ/2)²/2μ, θ for θ ≤ −μ/2, |θ| < μ/2, θ ≥ μ/2
(above max(θ, 0) by at most μ/8, and only in the band): the model is then
smooth and is minimised by projected Newton steps, μ shrinking tenfold from
``BRANCH_SMOOTH_FROM``·|V| to ``BRANCH_SMOOTH``·|V|.  Only J's terms are evaluated per step (O(|J|·m)).
The node's bound is Φ evaluated *exactly* at the λ reached (one pass over
every block): valid whatever the model's error; where the model is off by
more than ``BRANCH_MODEL_TOL``·|V| it is rebuilt at that λ.  The smoothed
derivative clip((on_j + μ/2)/μ, 0, 1) is the relaxation's run fraction y_j.

**Fixing at a node.**  Forcing an open choice against its side at λ lowers Φ
by |on_j|, so where Φ − |on_j| is below the target the choice is fixed in the
subtree.  **Branching** on the open choice with the largest
min(y_j, 1 − y_j)·λ·u_j (u_j its use of the rows when on: the capacity a
rounding must move, priced); measured on 1,000 products × 20 limits this
searched 147 nodes where the most fractional y_j took 815.  Nodes are taken
best bound first.  **Plans**: each node's rounding (y ≥ ½) is priced by the
fixed-choice dual (:mod:`planner.engine.slatedual`) where its Lagrangian
bound could beat the incumbent, and solved by the slate QP where it does;
a new incumbent is improved by flips (:mod:`planner.engine.flips`).
A node with no fractional choice is closed once its rounding is priced.

The search ends certified when no node is left above the target; the
bound reported is the largest bound of any node or fixing it discarded
(never the target itself).  At the deadline or after ``BRANCH_NODES`` nodes
it returns its valid bound (the largest over the open nodes too).
"""

from __future__ import annotations

import heapq
import time
from dataclasses import dataclass

import numpy as np

from planner.engine.certificate import Certificate
from planner.engine.dual import DualPoint, choice_bounds
from planner.engine.flips import improve
from planner.engine.problem import Problem
from planner.engine.settings import (BRANCH_MAX_ROWS, BRANCH_MODEL_TOL, BRANCH_NEWTON, BRANCH_NODES,
                                     BRANCH_OPEN_MAX, BRANCH_SMOOTH, BRANCH_SMOOTH_FROM)
from planner.engine.slatedual import newton_direction, price_slate, value_at


@dataclass
class Branched:
    """The branch-and-bound's outcome: a valid bound (problem units) and whether it certified the gap."""

    bound: float
    certified: bool
    nodes: int
    reason: str  # "certified", "time_limit", "node_limit", "open_limit", "not_applicable"


class _Model:
    """Quadratic model of the fixed part's priced value φ_F near λ_k."""

    def __init__(self, p: Problem, fixed: np.ndarray, lam: np.ndarray) -> None:
        self.lam = lam.copy()
        val, g = value_at(p, lam, fixed)
        self.val = val - float(lam @ p.capacity)  # φ_F(λ_k)
        self.use = p.capacity - g  # v_k
        self.M = p.curvature(lam, fixed)

    def at(self, lam: np.ndarray) -> tuple[float, np.ndarray, np.ndarray]:
        """(model value, gradient, Hessian) at λ."""
        dl = lam - self.lam
        Md = self.M @ dl
        return self.val - self.use @ dl + 0.5 * dl @ Md, Md - self.use, self.M


class _Open:
    """The open choices J and their terms (:class:`planner.engine.blocks.Terms`) at any λ."""

    def __init__(self, p: Problem, J: np.ndarray) -> None:
        self.p, self.J = p, J
        self.parts = p.family_of(J)

    def terms(self, lam: np.ndarray):
        k = self.J.size
        on, w = np.zeros(k), np.zeros(k)
        use, g = np.zeros((k, self.p.m)), np.zeros((k, self.p.m))
        for f, pos, local in self.parts:
            t = self.p.families[f].choice_terms(lam, local)
            on[pos], use[pos], w[pos], g[pos] = t.on, t.use, t.weight, t.direction
        return on, use, w, g


def applicable(p: Problem, J: np.ndarray) -> bool:
    """True if every open choice's family gives its terms and the rows are few enough for dense steps."""
    if p.m > BRANCH_MAX_ROWS or p.m == 0 or not p.forced:
        return False
    lam = np.zeros(p.m)
    return all(p.families[f].choice_terms(lam, local[:1]) is not None for f, _, local in p.family_of(J))


def branch_and_bound(p: Problem, slates, points: list[DualPoint], rel_gap: float, cert: Certificate,
                     deadline: float | None = None, max_nodes: int = BRANCH_NODES) -> Branched:
    """Search the choices the Lagrangian leaves open (see the module docstring).

    ``slates``: the search's :class:`planner.engine.search.Slates` (incumbent and
    cache; every improvement goes through its QP).  ``points``: dual points met so far.
    """
    scale = lambda: max(abs(slates.value - cert.offset), 1.0 / cert.money)  # noqa: E731
    target = lambda: slates.value + (1.0 - 1e-3) * rel_gap * scale()  # noqa: E731
    K = p.n_choices
    stop_b, run_b = choice_bounds(points, K)
    both = (stop_b < target()) & (run_b < target())
    if both.any():  # a choice neither side of which reaches the target: every plan is below it
        j = int(np.flatnonzero(both)[0])
        return Branched(max(stop_b[j], run_b[j], slates.value), True, 0, "certified")
    fix_on, fix_off = stop_b < target(), run_b < target()
    fixed_bound = float(np.max(np.r_[stop_b[fix_on], run_b[fix_off], -np.inf]))
    J = np.flatnonzero(~fix_on & ~fix_off)
    if J.size == 0:
        return Branched(max(fixed_bound, slates.value), True, 0, "certified")
    if not applicable(p, J):
        return Branched(np.inf, False, 0, "not_applicable")
    base = fix_on.copy()  # the fixed part's choice, J off
    lam0 = min(points, key=lambda q: q.value).lam
    opened = _Open(p, J)
    closed = fixed_bound  # largest bound of anything discarded
    heap: list = [(-np.inf, 0, np.full(J.size, -1, dtype=np.int8), lam0, _Model(p, base, lam0))]
    seen: set[bytes] = set()
    count, nodes = 1, 0
    while heap:
        if deadline is not None and time.perf_counter() >= deadline:
            return Branched(max(closed, -heap[0][0], slates.value), False, nodes, "time_limit")
        if nodes >= max_nodes:
            return Branched(max(closed, -heap[0][0], slates.value), False, nodes, "node_limit")
        if len(heap) > BRANCH_OPEN_MAX:
            return Branched(max(closed, -heap[0][0], slates.value), False, nodes, "open_limit")
        neg, _, state, lam, model = heapq.heappop(heap)
        if -neg <= target():
            closed = max(closed, -neg)
            continue
        nodes += 1
        lam, model, bound, on, priced_use = _node_bound(p, base, opened, state, lam, model, scale())
        bound = min(bound, -neg)
        if bound <= target():
            closed = max(closed, bound)
            continue
        state = state.copy()
        free = state == -1
        room = bound - target()
        to_on, to_off = free & (on > room), free & (-on > room)
        if to_on.any() or to_off.any():
            closed = max(closed, bound - float(np.min(np.abs(on[to_on | to_off]))))
            state[to_on], state[to_off] = 1, 0
            free = state == -1
        y = _fractions(on, free, scale())
        rounded = base.copy()
        rounded[J] = (state == 1) | (free & (y >= 0.5))
        key = Problem.key(rounded)
        priced = None
        against = np.where(rounded[J], np.maximum(-on, 0.0), np.maximum(on, 0.0))
        if key not in seen and bound - float(np.sum(against[free])) > slates.value:
            seen.add(key)
            priced = price_slate(p, rounded, lam)
            if priced.value > slates.value * (1 + 1e-12) + 1e-12:
                before = slates.value
                res = slates.evaluate(rounded)
                if slates.value > before and res.status == "optimal":  # a new incumbent: flip from it too
                    z, _ = improve(p, res.choice, res.duals, res.objective, deadline)
                    slates.evaluate(z)
        frac = free & (y > 1e-6) & (y < 1 - 1e-6)
        if not frac.any():
            if priced is not None and priced.converged and priced.value >= bound - BRANCH_MODEL_TOL * scale():
                closed = max(closed, min(priced.value, bound))  # the rounding is this node's optimum
                continue
            if not free.any():
                leaf = priced if priced is not None else price_slate(p, rounded, lam)
                closed = max(closed, min(leaf.value, bound))
                continue
            cand = np.flatnonzero(free)
            j = int(cand[np.argmin(np.abs(on[cand]))])
        else:
            cand = np.flatnonzero(frac)
            j = int(cand[np.argmax(np.minimum(y[cand], 1 - y[cand]) * priced_use[cand])])
        for side in (0, 1):
            child = state.copy()
            child[j] = side
            heapq.heappush(heap, (-bound, count, child, lam, model))
            count += 1
    return Branched(max(closed, slates.value), True, nodes, "certified")


def _fractions(on: np.ndarray, free: np.ndarray, scale: float) -> np.ndarray:
    """Run fractions y_j = clip((on_j + μ/2) / μ, 0, 1) of the open choices at the final smoothing."""
    mu = BRANCH_SMOOTH * scale
    return np.where(free, np.clip((on + 0.5 * mu) / mu, 0.0, 1.0), 0.0)


def _node_bound(p: Problem, base: np.ndarray, opened: _Open, state: np.ndarray, lam: np.ndarray,
                model: _Model, scale: float):
    """(λ, model, exact bound Φ(λ), on_j at λ) of one node (see the module docstring)."""
    for _ in range(3):
        lam = _minimise_model(p, opened, state, lam, model, scale)
        val, g = value_at(p, lam, base)
        on, use = opened.terms(lam)[:2]
        ell = np.where(state == 1, on, np.where(state == 0, 0.0, np.maximum(on, 0.0)))
        exact = val + float(np.sum(ell))
        approx = model.at(lam)[0] + float(lam @ p.capacity)
        if abs(val - approx) <= BRANCH_MODEL_TOL * scale:
            break
        model = _Model(p, base, lam)
    return lam, model, exact, on, use @ lam


def _minimise_model(p: Problem, opened: _Open, state: np.ndarray, lam: np.ndarray, model: _Model,
                    scale: float) -> np.ndarray:
    """Minimise the smoothed model of Φ over λ ≥ 0 by projected Newton steps, μ shrinking tenfold."""
    lam = np.maximum(lam, 0.0).copy()
    mu = BRANCH_SMOOTH_FROM * scale
    end = BRANCH_SMOOTH * scale
    while True:
        lam = _newton(p, opened, state, lam, model, mu)
        if mu <= end:
            return lam
        mu = max(mu / 10.0, end)


def _smoothed(p: Problem, opened: _Open, state: np.ndarray, lam: np.ndarray, model: _Model, mu: float,
              hessian: bool):
    val, grad, H = model.at(lam)
    val += float(lam @ p.capacity)
    grad = grad + p.capacity
    on, use, w, g = opened.terms(lam)
    ok = np.isfinite(on)
    th = np.where(ok, on, -1.0)
    free, run = state == -1, (state == 1) & ok
    half = 0.5 * mu
    slope = np.where(run, 1.0, np.where(free & ok, np.clip((th + half) / mu, 0.0, 1.0), 0.0))
    hub = np.where(th <= -half, 0.0, np.where(th < half, (th + half) ** 2 / (2 * mu), th))
    val += float(np.sum(np.where(run, th, 0.0)) + np.sum(np.where(free & ok, hub, 0.0)))
    grad = grad - slope @ use
    if not hessian:
        return val, grad, None
    band = free & ok & (th > -half) & (th < half)
    c2 = np.where(band, 1.0 / mu, 0.0)
    H = H + (g.T * (slope * w)) @ g + (use.T * c2) @ use
    return val, grad, H


def _newton(p: Problem, opened: _Open, state: np.ndarray, lam: np.ndarray, model: _Model,
            mu: float) -> np.ndarray:
    val, g, H = _smoothed(p, opened, state, lam, model, mu, True)
    first = 1.0  # the step tried first: twice the last one taken (kinks crossed shorten Newton steps)
    for _ in range(BRANCH_NEWTON):
        d = newton_direction(H, g, lam, ~((lam <= 0.0) & (g > 0.0)))
        if -float(g @ d) <= 1e-11 * max(abs(val), 1.0):
            break
        t = first
        while True:
            nxt = np.maximum(lam + t * d, 0.0)
            v2, g2, _ = _smoothed(p, opened, state, nxt, model, mu, False)
            if v2 <= val + 1e-4 * float(g @ (nxt - lam)) or t < 1e-8:
                break
            t *= 0.25
        if v2 > val:
            break
        first = min(1.0, 4.0 * t)
        lam = nxt
        val, g, H = _smoothed(p, opened, state, lam, model, mu, True)
    return lam
