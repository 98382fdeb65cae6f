r"""Exact for few on/off choices: every slate bounded at once by the Lagrangian, the best solved in turn.

With K ≤ ``ENUMERATE_UP_TO`` on/off choices there are 2^K slates S (one
choice array each).  For any λ ≥ 0 the Lagrangian with the choices fixed to S,

.. math::  L_S(\lambda) = \lambda^\top\mathrm{cap} + \text{fixed}(\lambda)
           + \sum_{j} \big[S_j\, \mathrm{on}_j(\lambda) + (1 - S_j)\, \mathrm{off}_j(\lambda)\big],

is an upper bound on slate S's optimum (weak duality), and it is affine in
S, so one matrix product bounds all 2^K slates.  Each slate's bound is the
least over the shadow prices of the slates solved so far (and exact once it
is solved); the open slate of highest bound is solved next, until no slate's
bound is above the best profit by more than the gap: then the best slate is
certified, and the largest bound left is the certificate.  On small plans this
takes one or two QPs.  It stops after ``ENUMERATE_QPS`` QPs (or at the
deadline) and hands its incumbent and its multipliers to the general search.
"""

from __future__ import annotations

import time
from dataclasses import dataclass, field
from functools import lru_cache

import numpy as np

from planner.engine.certificate import Certificate
from planner.engine.dual import DualPoint, evaluate
from planner.engine.problem import Problem
from planner.engine.settings import ENUMERATE_QPS


@lru_cache(maxsize=16)
def all_slates(k: int) -> np.ndarray:
    """(2^k × k) bool: every combination of k choices (row r has bit j of r in column j)."""
    rows = np.arange(2 ** k, dtype=np.int64)
    return ((rows[:, None] >> np.arange(k)) & 1).astype(bool)


@dataclass
class Enumerated:
    """What the enumeration settled: whether it certified, the valid bound, the multipliers it met."""

    certified: bool
    bound: float
    points: list[DualPoint] = field(default_factory=list)
    qps: int = 0


def enumerate_slates(p: Problem, evaluate_slate, rel_gap: float, cert: Certificate, first: np.ndarray | None,
                     deadline: float | None = None, max_qps: int = ENUMERATE_QPS) -> Enumerated:
    """Bound every slate and solve the best ones (see the module docstring).

    ``evaluate_slate(choice)`` solves one slate's QP and returns its result
    (status, objective, duals; cached by the caller); ``first``: the slate to
    solve first (default: the best response at λ = 0).
    """
    K = p.n_choices
    Y = all_slates(K)
    ub = np.full(len(Y), np.inf)
    solved = np.zeros(len(Y), dtype=bool)
    points: list[DualPoint] = []
    best = -np.inf
    if first is None:
        pt = evaluate(p, np.zeros(p.m))
        points.append(pt)
        first = pt.choice
        _tighten(ub, solved, Y, pt, p)
    weights = 1 << np.arange(K, dtype=np.int64)
    row = int(np.asarray(first, dtype=np.int64) @ weights)
    qps = 0
    while True:
        res = evaluate_slate(Y[row])
        qps += 1
        solved[row] = True
        ub[row] = res.objective if res.status == "optimal" else -np.inf
        if res.status == "optimal":
            best = max(best, res.objective)
            pt = evaluate(p, res.duals)
            points.append(pt)
            _tighten(ub, solved, Y, pt, p)
        floor = best + cert.slack(rel_gap, best) if np.isfinite(best) else -np.inf
        open_ = ~solved & (ub > floor)
        if not open_.any():
            return Enumerated(True, float(np.max(ub)), points, qps)
        if qps >= max_qps or (deadline is not None and time.perf_counter() >= deadline):
            return Enumerated(False, float(np.max(ub)), points, qps)
        row = int(np.argmax(np.where(open_, ub, -np.inf)))


def _tighten(ub: np.ndarray, solved: np.ndarray, Y: np.ndarray, pt: DualPoint, p: Problem) -> None:
    """Lower every unsolved slate's bound to L_S at the point's λ (in place).

    With product groups the point's separable values are used (exact for a
    slate that keeps every link y_i ≤ z_g) and slates that break a link are
    refused (bound −inf).
    """
    value, on, off = pt.sep if pt.sep is not None else (pt.value, pt.on, pt.off)
    bad = ~np.isfinite(on)  # a choice that cannot be on
    never = ~np.isfinite(off)  # a choice that cannot be off
    with np.errstate(invalid="ignore"):
        gain = on - off
    const = value - float(np.sum(np.maximum(on, off))) + float(np.sum(np.where(never, on, off)))
    bound_all = const + Y @ np.where(bad | never, 0.0, gain)
    if never.any():
        bound_all[(~Y[:, never]).any(axis=1)] = -np.inf
    if bad.any():
        bound_all[Y[:, bad].any(axis=1)] = -np.inf
    broken = p.breaks(Y)
    if broken is not None:
        bound_all[broken] = -np.inf
    np.minimum(ub, np.where(solved, ub, bound_all), out=ub)

