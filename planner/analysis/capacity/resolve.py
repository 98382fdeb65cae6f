"""The mixed-integer plan re-solved at other capacities: one call to the engine, warm.

Every re-solve of the capacity analysis goes through the scenario's one
:class:`planner.engine.Engine`: warm-started from the multipliers of the
capacity it solved before and with the slates already known as incumbents,
under the analysis's gap and deadline.  A solve the deadline cuts short raises
TimeoutError, so a caller can flag what it could not check.
"""

from __future__ import annotations

import time

import numpy as np

from planner.engine import Engine, Solution
from planner.errors import SolverError


def slate_key(slate: np.ndarray) -> bytes:
    """A hashable key of a (n,) running mask."""
    return np.packbits(np.asarray(slate, dtype=bool)).tobytes()


def resolve(engine: Engine, capacity: np.ndarray, rel_gap: float, known: list[np.ndarray] = (),
            deadline: float | None = None) -> Solution:
    """The optimal plan at ``capacity`` (resource units), certified to ``rel_gap``.

    Raises TimeoutError if ``deadline`` (a ``time.perf_counter()`` value) passes first.
    """
    if deadline is not None and time.perf_counter() >= deadline:
        raise TimeoutError("the time budget is spent")
    sol = engine.solve(rel_gap=rel_gap, deadline=deadline, known=list(known), warm=True,
                       capacity=np.asarray(capacity, dtype=float))
    if sol.status == "time_limit":
        raise TimeoutError("the time budget is spent")
    if sol.status != "optimal":
        raise SolverError("re-solving at other capacities could not certify a plan: " + "; ".join(sol.messages))
    return sol
