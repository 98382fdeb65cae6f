r"""The continuous QP of one fixed choice, straight into highspy from the families' columns.

With every on/off choice fixed, each family of blocks contributes columns
(:meth:`planner.engine.blocks.Blocks.continuous`); together they make the
convex QP

.. math::

    \max \sum_j c_j x_j - q_j x_j^2 + K \quad\text{s.t.}\quad
    \sum_j h_{rj} x_j \le H_r + \Delta_r \;(\text{dual } \lambda_r \ge 0),\qquad lo_j \le x_j \le hi_j

plus each family's own rows (``Columns.local``, e.g. units bought in ≤ units
sold), laid after the shared rows; their duals are not reported

(for products: x the running volumes, q the price slopes, K minus the fixed
costs; for options usable in part: x the scale, c minus the cost, h minus the
amounts; Δ the amounts of the all-or-nothing options taken).  Columns of
blocks that are off are left out (value 0).  HiGHS minimises, so it gets the
negated objective with Hessian diag(2q) (HiGHS's ½ xᵀQx convention).

Small QPs use HiGHS's active-set method; from ``IPM_FROM`` columns its
interior-point QP ('hipo', highspy-extras), which stays fast with thousands
of columns strictly inside their bounds.  Either answer is then polished on
its active set by the closed-form KKT conditions (:mod:`planner.engine.kkt`),
which makes it exact to rounding and is checked before use; if it cannot be
polished the other method is tried, and an unpolished answer is kept only
as HiGHS's own optimum.  An interior-point run that stalls ("no progress")
with feasible primal and dual solutions within ``IPM_STALL_ACCEPT`` of each
other is used as 'hipo-stalled' (polished where it can be): its value is a
feasible plan's, so any certificate built on it stays valid.
"""

from __future__ import annotations

import time
from dataclasses import dataclass, field

import numpy as np

from planner.engine import highs
from planner.engine.kkt import polish
from planner.engine.problem import Problem
from planner.engine.settings import ASM_RETRY_UP_TO, IPM_FROM, IPM_STALL_ACCEPT, SLACK_ROW

#: Largest rows × columns of a fixed-choice QP polished on its dense matrix (only QPs with a family's own
#: rows reach it: the shared rows are few).
POLISH_DENSE_UP_TO = 40_000_000


@dataclass
class SlateResult:
    """Outcome of one fixed-choice QP (amounts in the problem's units)."""

    status: str  # "optimal", "time_limit", "infeasible", "error"
    values: list[np.ndarray]  # per family: its variables (0 where off)
    objective: float  # currency: the families' profit under this choice
    duals: np.ndarray  # currency per resource unit, ≥ 0, shared-row order
    seconds: float
    method: str  # "highs-qp" or "hipo", "+kkt" where the polish made it exact
    message: str = ""
    choice: np.ndarray = field(default_factory=lambda: np.zeros(0, dtype=bool))


@dataclass
class _QP:
    c: np.ndarray
    q: np.ndarray
    lo: np.ndarray
    hi: np.ndarray
    rows: np.ndarray
    cols: np.ndarray
    amounts: np.ndarray
    cap: np.ndarray
    constant: float
    parts: list  # per family: (start column, Columns)

    @property
    def ncol(self) -> int:
        return int(self.c.size)

    def dense(self) -> np.ndarray:
        m = self.cap.size
        flat = np.bincount(self.rows * self.ncol + self.cols, weights=self.amounts, minlength=m * self.ncol)
        return flat.astype(float).reshape(m, self.ncol)


def assemble(p: Problem, choice: np.ndarray) -> _QP:
    """The QP of ``choice``: every family's columns laid end to end."""
    parts, at = [], 0
    cs, qs, los, his, rs, ks, vs = [], [], [], [], [], [], []
    cap = p.capacity.astype(float).copy()
    constant = 0.0
    local_rows, local_cap = [], []
    for f, z in zip(p.families, p.split(choice)):
        col = f.continuous(z)
        parts.append((at, col))
        cs.append(col.c), qs.append(col.q), los.append(col.lo), his.append(col.hi)
        rs.append(col.rows), ks.append(col.cols + at), vs.append(col.amounts)
        constant += col.constant
        if col.capacity is not None:
            cap += col.capacity
        if col.local is not None:  # a family's own rows, after the shared ones (not priced by λ)
            count, row_of, lcols, lamt, upper = col.local
            local_rows.append((row_of, lcols + at, lamt))
            local_cap.append((count, upper))
        at += col.size
    next_row = p.m
    for (row_of, lcols, lamt), (count, upper) in zip(local_rows, local_cap):
        rs.append(np.asarray(row_of, np.int64) + next_row), ks.append(lcols), vs.append(lamt)
        cap = np.r_[cap, np.asarray(upper, float)]
        next_row += count
    cat = np.concatenate
    return _QP(cat(cs), cat(qs), cat(los), cat(his), cat(rs).astype(np.int64), cat(ks).astype(np.int64),
               cat(vs).astype(float), cap, constant, parts)


def solve_choice(p: Problem, choice: np.ndarray, time_limit: float | None = None, threads: int = 1,
                 seed: int = 0, method: str | None = None) -> SlateResult:
    """The fixed-choice QP (see the module docstring); ``method`` forces 'highs-qp' or 'hipo'."""
    t0 = time.perf_counter()
    choice = np.asarray(choice, dtype=bool)
    if not p.feasible(choice):
        return _failed(p, "infeasible", t0, "none", "a running block cannot reach its minimum", choice)
    qp = assemble(p, choice)
    if qp.ncol == 0:
        if np.any(qp.cap < 0):
            return _failed(p, "infeasible", t0, "none", "a capacity is negative", choice)
        return _result(p, qp, np.zeros(0), np.zeros(p.m), "optimal", t0, "none+kkt", choice)
    if method is not None:
        return _solve_once(p, qp, choice, time_limit, threads, seed, method, t0)
    first = "hipo" if qp.ncol >= IPM_FROM and highs.has_ipm() else "highs-qp"
    res = _solve_once(p, qp, choice, time_limit, threads, seed, first, t0)
    if res.method.endswith("+kkt"):
        return res
    other = "highs-qp" if first == "hipo" else ("hipo" if highs.has_ipm() else None)
    if other is None or (other == "highs-qp" and qp.ncol > ASM_RETRY_UP_TO):
        return res
    alt = _solve_once(p, qp, choice, time_limit, threads, seed, other, t0)
    if alt.status == "optimal" and (res.status != "optimal" or alt.method.endswith("+kkt")):
        return alt
    return res


def _solve_once(p: Problem, qp: _QP, choice: np.ndarray, time_limit: float | None, threads: int, seed: int,
                method: str, t0: float) -> SlateResult:
    m, n = qp.cap.size, qp.ncol
    h, got = _run(qp, qp.cap, time_limit, threads, seed, method)
    if h is None:
        return _failed(p, "error", t0, method, f"HiGHS refused the fixed-choice QP ({got})", choice)
    if got == highs.Outcome.ERROR and method == "hipo" and highs.stalled_but_solved(h, IPM_STALL_ACCEPT):
        # HiGHS's own residuals can be optimistic: the rows are checked here, and a point over a row is
        # re-solved once with every row tightened by twice the excess, which puts it inside the rows.
        method = "hipo-stalled"
        excess = _excess(qp, np.asarray(h.getSolution().col_value, dtype=float))
        if excess > 0:
            h, got = _run(qp, qp.cap - 2.0 * excess, time_limit, threads, seed, "hipo")
            if h is None or not (got == highs.Outcome.OPTIMAL or highs.stalled_but_solved(h, IPM_STALL_ACCEPT)) \
                    or _excess(qp, np.asarray(h.getSolution().col_value, dtype=float)) > 0:
                return _failed(p, "error", t0, method, "HiGHS's interior-point QP stalled outside the rows",
                               choice)
        got = highs.Outcome.OPTIMAL
    if got == highs.Outcome.INFEASIBLE:
        return _failed(p, "infeasible", t0, method, "the fixed-choice QP is infeasible", choice)
    if got == highs.Outcome.TIME_LIMIT:
        return _failed(p, "time_limit", t0, method, "time limit in the fixed-choice QP", choice)
    if got != highs.Outcome.OPTIMAL:
        return _failed(p, "error", t0, method, f"HiGHS ended the fixed-choice QP with "
                       f"{h.modelStatusToString(h.getModelStatus())}", choice)
    sol = h.getSolution()
    x = np.clip(np.asarray(sol.col_value, dtype=float), qp.lo, qp.hi)
    duals = np.maximum(-np.asarray(sol.row_dual, dtype=float), 0.0) if m else np.zeros(0)
    if m * n > POLISH_DENSE_UP_TO:  # the polish works on the dense matrix: HiGHS's own answer beyond this
        return _result(p, qp, x, duals, "optimal", t0, method, choice)
    H = qp.dense()
    exact = polish(qp.c, qp.q, H, qp.cap, qp.lo, qp.hi, _from_duals(qp, H, x, duals), duals)
    if exact is None:
        exact = polish(qp.c, qp.q, H, qp.cap, qp.lo, qp.hi, x, duals)
    if exact is not None:
        x, duals = exact
        method += "+kkt"
    return _result(p, qp, x, duals, "optimal", t0, method, choice)


def _run(qp: _QP, cap: np.ndarray, time_limit: float | None, threads: int, seed: int, method: str):
    """(HiGHS instance, its outcome) of the QP with row upper bounds ``cap``; (None, error) if refused."""
    n = qp.ncol
    h = highs.new(threads, seed, time_limit=highs.time_option(time_limit))
    if method == "hipo":
        h.setOptionValue("solver", "hipo")
    start, index, value = highs.csc(n, qp.rows, qp.cols, qp.amounts)
    quad = np.flatnonzero(qp.q > 0)
    q_start = np.searchsorted(quad, np.arange(n + 1)).astype(np.int32)
    hi = np.where(np.isfinite(qp.hi), qp.hi, highs.INF)
    try:
        h.passModel(n, cap.size, int(index.size), int(quad.size), 1, 1, 1, 0.0, -qp.c, qp.lo, hi,
                    np.full(cap.size, -highs.INF), cap, start, index, value,
                    q_start, quad.astype(np.int32), 2.0 * qp.q[quad], np.zeros(n, dtype=np.int32))
    except Exception as e:  # HiGHS refused the data: report, do not guess
        return None, e
    return h, highs.run(h)


def _excess(qp: _QP, x: np.ndarray) -> float:
    """Largest amount by which ``x`` (clipped to its bounds) exceeds a row by more than a tenth of ``SLACK_ROW`` of the
    row's scale (max(|capacity|, 1)); 0 if it is inside every row to that tolerance."""
    if qp.cap.size == 0:
        return 0.0
    x = np.clip(x, qp.lo, qp.hi)
    act = np.bincount(qp.rows, weights=qp.amounts * x[qp.cols], minlength=qp.cap.size)
    over = act - qp.cap
    return float(np.max(over, initial=0.0)) if np.any(over > 0.1 * SLACK_ROW * np.maximum(np.abs(qp.cap), 1.0)) else 0.0


def _from_duals(qp: _QP, H: np.ndarray, x: np.ndarray, duals: np.ndarray) -> np.ndarray:
    """Sloped columns re-derived from the duals, clip((c − Hᵀλ)/(2q), lo, hi); linear ones at a bound by sign.

    An interior-point answer sits a little inside its bounds; the values the
    duals imply are exactly at a bound where they should be, which lets the
    KKT polish see the active set.
    """
    out = x.copy()
    reduced = qp.c - (H.T @ duals if duals.size else 0.0)
    k = qp.q > 0
    out[k] = np.clip(reduced[k] / (2.0 * qp.q[k]), qp.lo[k], qp.hi[k])
    tol = 1e-6 * max(float(np.max(np.abs(qp.c), initial=1.0)), 1.0)
    lin = ~k
    out[lin] = np.where(reduced[lin] > tol, qp.hi[lin], np.where(reduced[lin] < -tol, qp.lo[lin], out[lin]))
    return np.where(np.isfinite(out), out, x)


def _result(p: Problem, qp: _QP, x: np.ndarray, duals: np.ndarray, status: str, t0: float, method: str,
            choice: np.ndarray) -> SlateResult:
    values = []
    for (at, col), f in zip(qp.parts, p.families):
        v = np.zeros(f.n_vars)
        v[col.index] = x[at:at + col.size]
        values.append(v)
    objective = float(qp.c @ x - qp.q @ (x * x) + qp.constant) if x.size else float(qp.constant)
    return SlateResult(status, values, objective, np.asarray(duals, dtype=float)[:p.m], time.perf_counter() - t0,
                       method, choice=choice)


def _failed(p: Problem, status: str, t0: float, method: str, message: str, choice: np.ndarray) -> SlateResult:
    return SlateResult(status, [np.zeros(f.n_vars) for f in p.families], float("nan"), np.zeros(p.m),
                       time.perf_counter() - t0, method, message, choice)
