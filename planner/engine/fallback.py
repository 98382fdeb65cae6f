"""Safety nets for a search stopped early: a plan that is always feasible, and a bound that is always valid.

When the time limit ends the outer approximation before any slate has been
solved, the planner still returns a plan (status ``time_limit``) rather than
nothing: it solves, without a time limit, the first of these slates whose QP
is feasible:

1. every product whose standalone best profit (shared limits ignored) beats
   its fixed cost, as long as their minimum runs fit together;
2. only the products without an on/off choice (always feasible once the
   commitments fit, which the planner checks first).

The bound that goes with it, when the MILP gave none, is the sum of each
product's standalone best over its own feasible volumes: a valid upper bound
because dropping the shared limits can only raise profit.
"""

from __future__ import annotations

import numpy as np

from models.data import MixData


def _standalone_best(d: MixData, lo: np.ndarray, hi: np.ndarray) -> np.ndarray:
    """max over D in [lo, hi] of (a − v)·D − b·D² per product (currency); −inf where lo > hi."""
    with np.errstate(divide="ignore", invalid="ignore"):
        peak = np.where(d.b > 0, d.margin / (2 * np.where(d.b > 0, d.b, 1.0)), np.where(d.margin > 0, hi, lo))
    D = np.clip(peak, lo, hi)
    best = d.contribution(np.where(np.isfinite(D), D, 0.0))
    return np.where(lo <= hi * (1 + 1e-12) + 1e-12, best, -np.inf)


def standalone_bound(d: MixData) -> float:
    """An upper bound on the products' profit (currency): each product at its own best, limits shared by none."""
    U = d.upper
    on = _standalone_best(d, d.run_floor, U) - d.F
    fixed_lo = np.where(d.must_run, d.run_floor, 0.0)
    forced = _standalone_best(d, fixed_lo, U) - d.F  # products without a choice run (F then unavoidable)
    best = np.where(d.can_stop, np.maximum(on, 0.0), forced)
    return float(np.sum(best))


def fallback_slates(d: MixData) -> list[np.ndarray]:
    """Slates to try, in order, when the search found none (see the module docstring)."""
    base = ~d.can_stop
    standalone = _standalone_best(d, d.run_floor, d.upper) - d.F
    keen = base | (d.can_stop & (standalone > 0))
    out = []
    if np.all(d.used(np.where(keen, d.run_floor, 0.0)) <= d.capacity * (1 + 1e-9) + 1e-9):
        out.append(keen)
    out.append(base)
    return out
