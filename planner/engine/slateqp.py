"""The fixed-slate QP straight into highspy from numpy arrays (no Pyomo build).

The same model as :func:`models.mix.build_mix_model` with ``slate`` given
(the model of record; ``tests/test_fast.py`` checks the two agree): for the
running products S,

    max Σ_{i∈S} (a_i − v_i) D_i − b_i D_i² − F_i
    s.t. Σ_i h_ri D_i ≤ H_r  (capacity, dual λ_r ≥ 0, currency per resource unit)
         max(L_i, M_i) ≤ D_i ≤ min(C_i, peak_i)   (``MixData.qp_upper``).

Stopped products are left out (volume 0).  HiGHS minimises, so it gets the
negated objective with Hessian diag(2 b_i) (HiGHS's ½ xᵀQx convention).
Small slates use HiGHS's active-set QP; from ``FAST_IPM_FROM`` running products
its interior-point QP ('hipo', highspy-extras), which stays fast
with thousands of products strictly inside their bounds.  Either answer is
then polished on its active set by the closed-form KKT conditions
(:mod:`planner.kkt`), which makes it exact to rounding and is checked before
use.  A time of ~0.1 s at 10,000 products replaces seconds of Pyomo build.
"""

from __future__ import annotations

import time

import numpy as np

from models.data import MixData

from planner.engine.kkt import polish
from planner.engine.qp import QPResult, has_ipm

_INF = 1e30  # HiGHS's infinity (kHighsInf is inf; any value ≥ 1e20 counts as infinite)


def column_usage(d: MixData, cols: np.ndarray) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """Capacity rows restricted to the columns ``cols``, column-wise: (start, row index, value)."""
    pos = np.full(d.n, -1, dtype=np.int64)
    pos[cols] = np.arange(cols.size)
    keep = (pos[d.use_prod] >= 0) & (d.use_amt != 0)
    c, r, v = pos[d.use_prod[keep]], d.use_res[keep], d.use_amt[keep]
    order = np.lexsort((r, c))
    c, r, v = c[order], r[order], v[order]
    start = np.searchsorted(c, np.arange(cols.size + 1)).astype(np.int32)
    return start, r.astype(np.int32), v.astype(float)


#: Running products from which the fast route starts with the interior-point QP (measured:
#: the active-set QP took 2.5 s on 100 products with some fixed prices, 'hipo' 0.01 s).
FAST_IPM_FROM = 60
#: Largest slate on which the active-set QP is tried when the interior-point answer cannot be polished.
ASM_RETRY_UP_TO = 300


def solve_slate_fast(d: MixData, slate: np.ndarray, time_limit: float | None = None,
                     threads: int = 1, seed: int = 0, method: str | None = None) -> QPResult:
    """Fixed-slate QP via highspy; same result type and meaning as :func:`planner.qp.solve_slate_qp`.

    ``method``: None chooses (the active-set QP below ``FAST_IPM_FROM`` running
    products, 'hipo' from there where installed, and the other one as well if
    the first answer cannot be polished to an exact KKT point); 'highs-qp' or
    'hipo' forces one.
    """
    if method is not None:
        return _solve_once(d, slate, time_limit, threads, seed, method)
    on = int(np.count_nonzero(slate))
    first = "hipo" if on >= FAST_IPM_FROM and has_ipm() else "highs-qp"
    res = _solve_once(d, slate, time_limit, threads, seed, first)
    if res.method.endswith("+kkt"):
        return res
    other = "highs-qp" if first == "hipo" else ("hipo" if has_ipm() else None)
    if other is None or (other == "highs-qp" and on > ASM_RETRY_UP_TO):
        return res
    alt = _solve_once(d, slate, time_limit, threads, seed, other)
    if alt.status == "optimal" and (res.status != "optimal" or alt.method.endswith("+kkt")):
        return alt
    return res


def _solve_once(d: MixData, slate: np.ndarray, time_limit: float | None, threads: int, seed: int,
                method: str) -> QPResult:
    import highspy

    t0 = time.perf_counter()
    slate = np.asarray(slate, dtype=bool)
    m = len(d.resources)
    cols = np.flatnonzero(slate)
    lo = d.run_floor[cols]
    hi = d.qp_upper[cols]
    c = d.margin[cols]
    b = d.b[cols]
    start, index, value = column_usage(d, cols)
    h = highspy.Highs()
    h.setOptionValue("output_flag", False)
    h.setOptionValue("random_seed", int(seed))
    h.setOptionValue("threads", int(threads))
    if time_limit is not None:
        h.setOptionValue("time_limit", float(max(time_limit, 0.01)))
    if method == "hipo":
        h.setOptionValue("solver", "hipo")
    qcols = np.flatnonzero(b > 0)
    q_start = np.zeros(cols.size + 1, dtype=np.int32)
    q_start[1:] = np.cumsum(b > 0)
    fixed = float(np.sum(d.F[slate]))
    status = h.passModel(int(cols.size), m, int(index.size), int(qcols.size), 1, 1, 1, fixed,
                         -c, lo, np.where(np.isfinite(hi), hi, _INF),
                         np.full(m, -_INF), d.capacity.astype(float), start, index, value,
                         q_start, qcols.astype(np.int32), 2.0 * b[qcols], np.zeros(cols.size, dtype=np.int32))
    if status == highspy.HighsStatus.kError:
        return _failed(d, "error", t0, method, "HiGHS refused the fixed-slate QP's data")
    try:
        h.run()
    except Exception as e:  # the solver itself failed: report, do not guess
        return _failed(d, "error", t0, method, f"HiGHS failed on the fixed-slate QP: {e}")
    ms = h.getModelStatus()
    name = h.modelStatusToString(ms)
    if ms == highspy.HighsModelStatus.kInfeasible:
        return _failed(d, "infeasible", t0, method, "the fixed-slate QP is infeasible")
    if ms == highspy.HighsModelStatus.kTimeLimit:
        return _failed(d, "time_limit", t0, method, "time limit in the fixed-slate QP")
    if ms != highspy.HighsModelStatus.kOptimal:
        return _failed(d, "error", t0, method, f"HiGHS ended the fixed-slate QP with {name}")
    sol = h.getSolution()
    volume = np.zeros(d.n)
    volume[cols] = np.clip(np.asarray(sol.col_value, dtype=float), lo, hi)
    duals = np.maximum(-np.asarray(sol.row_dual, dtype=float), 0.0) if m else np.zeros(0)
    exact = polish(d, slate, _volumes_from_duals(d, slate, volume, duals), duals)
    if exact is None:
        exact = polish(d, slate, volume, duals)
    if exact is not None:
        volume, duals = exact
        method += "+kkt"
    objective = float(np.sum(d.contribution(volume)) - fixed)
    # A convex QP solved to optimality (and, after the polish, a checked KKT point): its value is its bound.
    return QPResult("optimal", volume, objective, objective, duals, time.perf_counter() - t0, method)


def _volumes_from_duals(d: MixData, slate: np.ndarray, volume: np.ndarray, duals: np.ndarray) -> np.ndarray:
    """Sloped products' volumes re-derived from the duals: clip((c − Hᵀλ)/(2b), lo, hi).

    An interior-point answer sits a little inside its bounds; the volumes the
    duals imply are exactly at a bound where they should be, which lets the
    KKT polish see the active set.
    """
    out = volume.copy()
    k = np.flatnonzero(slate & (d.b > 0))
    if k.size == 0:
        return out
    priced = np.bincount(d.use_prod, weights=d.use_amt * duals[d.use_res], minlength=d.n) if duals.size \
        else np.zeros(d.n)
    out[k] = np.clip((d.margin[k] - priced[k]) / (2.0 * d.b[k]), d.run_floor[k], d.qp_upper[k])
    lin = np.flatnonzero(slate & (d.b == 0))
    reduced = d.margin[lin] - priced[lin]  # a fixed-price product's profit per extra unit at these duals
    tol = 1e-6 * max(float(np.max(np.abs(d.margin), initial=1.0)), 1.0)
    out[lin] = np.where(reduced > tol, d.qp_upper[lin], np.where(reduced < -tol, d.run_floor[lin], out[lin]))
    return out


def _failed(d: MixData, status: str, t0: float, method: str, message: str) -> QPResult:
    return QPResult(status, np.zeros(d.n), float("nan"), float("nan"), np.zeros(len(d.resources)),
                    time.perf_counter() - t0, method, message)
