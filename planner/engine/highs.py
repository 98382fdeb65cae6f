"""The one HiGHS adapter: instances with the engine's options, outcomes as named states, one infinity.

Every HiGHS model of the planner is made by :func:`new` (silent, seeded, a
fixed number of threads, so runs repeat) and read back through
:func:`outcome`, which maps HiGHS's model status to :class:`Outcome`.  Options
set on a persistent instance stay set across runs, so callers set every
option they rely on before each run (:func:`set_options`).
"""

from __future__ import annotations

from enum import StrEnum
from functools import lru_cache

import numpy as np

from planner.engine.settings import highs_base
from planner.errors import SolverError

#: HiGHS's infinity (any bound at or beyond 1e20 counts as infinite).
INF = float("inf")


class Outcome(StrEnum):
    """How one HiGHS run ended."""

    OPTIMAL = "optimal"
    TIME_LIMIT = "time_limit"
    INFEASIBLE = "infeasible"
    UNBOUNDED = "unbounded"
    ERROR = "error"


class Status(StrEnum):
    """How a solve of the engine ended (the ``status`` of a plan)."""

    OPTIMAL = "optimal"  # certified within the gap asked for
    TIME_LIMIT = "time_limit"  # the time limit ended it: best plan found, valid bound
    INFEASIBLE = "infeasible"
    ERROR = "error"  # the solver failed or could not certify the gap; never a silent "optimal"


def new(threads: int = 1, seed: int = 0, **options):
    """A silent, seeded HiGHS instance with ``options`` set."""
    try:
        import highspy
    except ImportError:
        raise SolverError("HiGHS is not available: pip install 'highspy==1.15.1'") from None

    h = highspy.Highs()
    set_options(h, {**highs_base(threads, seed), **options})
    return h


def set_options(h, options: dict) -> None:
    """Set each option on ``h`` (values as HiGHS expects: bool, int, float or str)."""
    for name, value in options.items():
        if isinstance(value, bool):
            h.setOptionValue(name, value)
        elif isinstance(value, (int, np.integer)):
            h.setOptionValue(name, int(value))
        elif isinstance(value, (float, np.floating)):
            h.setOptionValue(name, float(value))
        else:
            h.setOptionValue(name, value)


def time_option(seconds: float | None) -> float:
    """The value of HiGHS's time_limit option for ``seconds`` left (None: no limit)."""
    return INF if seconds is None else float(max(seconds, 0.01))


def run(h) -> Outcome:
    """Run ``h``; its outcome.  A failure of the library itself is solver trouble (SolverError)."""
    try:
        h.run()
    except Exception as e:  # the solver library itself failed: say so, do not guess
        raise SolverError(f"HiGHS failed: {e} (reinstall highspy: pip install 'highspy==1.15.1')") from None
    return outcome(h)


def outcome(h) -> Outcome:
    """The outcome of the last run of ``h``."""
    import highspy

    S = highspy.HighsModelStatus
    ms = h.getModelStatus()
    if ms == S.kOptimal:
        return Outcome.OPTIMAL
    if ms == S.kTimeLimit:
        return Outcome.TIME_LIMIT
    if ms == S.kInfeasible:
        return Outcome.INFEASIBLE
    if ms in (S.kUnbounded, S.kUnboundedOrInfeasible):
        return Outcome.UNBOUNDED
    return Outcome.ERROR


def stalled_but_solved(h, gap: float) -> bool:
    """True where ``h`` ended without a status (e.g. interior point "no progress") but HiGHS calls its
    primal and dual solutions feasible and their relative objective gap is at most ``gap``."""
    info = h.getInfo()
    feasible = 2  # HiGHS's kSolutionStatusFeasible
    return (int(info.primal_solution_status) == feasible and int(info.dual_solution_status) == feasible
            and float(info.primal_dual_objective_error) <= gap)


@lru_cache(maxsize=1)
def has_ipm() -> bool:
    """True if HiGHS's interior-point QP ('hipo', from highspy-extras) is installed."""
    try:
        import highspy_extras  # noqa: F401
    except ImportError:
        return False
    return True


def csc(ncol: int, rows: np.ndarray, cols: np.ndarray, vals: np.ndarray) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """Triplets as HiGHS's column-wise arrays (start, row index, value); zeros dropped."""
    keep = vals != 0
    rows, cols, vals = rows[keep], cols[keep], vals[keep]
    order = np.lexsort((rows, cols))
    rows, cols, vals = rows[order], cols[order], vals[order]
    start = np.searchsorted(cols, np.arange(ncol + 1)).astype(np.int32)
    return start, rows.astype(np.int32), vals.astype(float)


def csr(nrow: int, rows: np.ndarray, cols: np.ndarray, vals: np.ndarray) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """Triplets as HiGHS's row-wise arrays (start, column index, value)."""
    order = np.lexsort((cols, rows))
    rows, cols, vals = rows[order], cols[order], vals[order]
    start = np.searchsorted(rows, np.arange(nrow + 1)).astype(np.int32)
    return start, cols.astype(np.int32), vals.astype(float)
