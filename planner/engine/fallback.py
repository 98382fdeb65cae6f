"""A plan that is always feasible, for a search stopped before it solved any slate.

When the time limit ends the search before any slate has been solved, the
engine still returns a plan (status ``time_limit``) rather than nothing: it
solves, without a time limit, the first of these choices whose QP is feasible:

1. every product whose standalone best profit (shared limits ignored) beats
   its fixed cost, as long as their minimum runs fit together; no
   all-or-nothing option taken;
2. only the products without an on/off choice, no option taken (always
   feasible once the commitments fit, which the engine checks first).

Its bound is the Lagrangian's best value, which is valid at every λ ≥ 0
(at λ = 0 it is each block at its own best, the shared limits dropped).
"""

from __future__ import annotations

import numpy as np

from planner.engine.blocks import best_response
from planner.engine.problem import Problem


def fallback_choices(p: Problem) -> list[np.ndarray]:
    """Choices to try, in order, when the search found none (see the module docstring)."""
    d = p.d
    lo, hi = d.run_floor, np.maximum(d.upper, d.run_floor)
    D = best_response(d.margin, d.b, lo, hi)
    standalone = np.where(lo <= d.upper * (1 + 1e-12) + 1e-12, d.contribution(np.where(np.isfinite(D), D, 0.0)), -np.inf)
    keen = ~d.can_stop | (d.can_stop & (standalone - d.F > 0))
    none_taken = np.zeros(d.n_options, dtype=bool)
    out = []
    if np.all(d.used(np.where(keen, d.run_floor, 0.0)) <= d.capacity * (1 + 1e-9) + 1e-9):
        out.append(p.choice(keen, none_taken))
    out.append(p.choice(~d.can_stop, none_taken))
    return out
