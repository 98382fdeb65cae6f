"""Exact polish of a fixed-slate QP solution from its active set (closed-form KKT).

For the separable concave QP  max Σ c_i D_i − b_i D_i²  s.t.  H D ≤ cap,
lo ≤ D ≤ hi, the KKT conditions at an optimum with active rows A and free
products (strictly inside their bounds) read

- free product with b_i > 0:  D_i = (c_i − (H_Aᵀ λ)_i) / (2 b_i);
- free product with b_i = 0:  (H_Aᵀ λ)_i = c_i  (its reduced cost is zero);
- active row r:               Σ_i h_ri D_i = cap_r.

Given the active set a solver found, these are a square linear system in λ_A
and the free linear volumes.  Solving it removes the solver's tolerance (the
result is exact to rounding) and is then checked: primal feasibility, λ ≥ 0
and the sign of every bound's reduced cost.  If any check fails the solver's
own answer is kept, so the polish can never make a plan worse.
"""

from __future__ import annotations

import numpy as np

from planner.engine.settings import (ACTIVE_DUAL, AT_BOUND, KKT_MAX_SYSTEM, KKT_PRIMAL, KKT_REDUCED, KKT_REPAIRS,
                                     SLACK_ROW)


def polish(c: np.ndarray, b: np.ndarray, H: np.ndarray, cap: np.ndarray, lo: np.ndarray,
           hi: np.ndarray, volume: np.ndarray, duals: np.ndarray,
           max_system: int = KKT_MAX_SYSTEM) -> tuple[np.ndarray, np.ndarray] | None:
    """(x, λ) solving the KKT system of max Σ c·x − b·x² s.t. H x ≤ cap, lo ≤ x ≤ hi on the active set
    that ``volume`` and ``duals`` show, or None where no exact KKT point is found near it.

    The active set read off a solver's answer can be a few columns or rows off (an interior-point
    answer sits a little inside its bounds).  Where the solved point breaks a bound or gives a
    binding row a negative price, the active set is corrected and the system solved again — at most
    ``KKT_REPAIRS`` times (a primal-dual active-set step: a column past its bound is fixed there, a
    row with a negative price is released, a column held at a bound whose reduced profit points
    inwards is freed, a slack row with a price is released, a row the point overfills binds).
    Columns may be other than products (e.g. capacity options, with c the negative cost and H the
    negative amounts added).
    """
    scale = np.maximum(np.maximum(np.abs(volume), np.where(np.isfinite(hi), np.abs(hi), 0.0)), 1.0)
    at_lo = volume <= lo + AT_BOUND * scale
    at_hi = ~at_lo & (volume >= hi - AT_BOUND * scale)
    lam_scale = max(float(np.max(np.abs(c), initial=1.0)), 1.0)
    active = duals > ACTIVE_DUAL * lam_scale
    seen: set[bytes] = set()
    for _ in range(KKT_REPAIRS + 1):
        key = np.packbits(np.r_[at_lo, at_hi, active]).tobytes()
        if key in seen:
            return None  # the corrections cycle: no exact point on this path
        seen.add(key)
        got = _solve_on(c, b, H, cap, lo, hi, at_lo, at_hi, active, max_system)
        if got is None:
            return None
        D, lam = got
        free = ~at_lo & ~at_hi
        if _is_kkt(c, b, cap, H, D, lam, lo, hi, at_lo, at_hi, free, scale, lam_scale):
            return D, lam
        tol_x, tol_r = KKT_PRIMAL * scale, KKT_REDUCED * lam_scale
        used = H @ D
        reduced = c - 2.0 * b * D - H.T @ lam
        below, above = free & (D < lo - tol_x), free & (D > hi + tol_x)
        at_lo, at_hi = at_lo | below, at_hi | above
        movable = hi > lo
        at_lo &= ~(movable & (reduced > tol_r) & ~below)  # held at its floor, but more would pay: free it
        at_hi &= ~(movable & (reduced < -tol_r) & ~above)
        over = used > cap + KKT_PRIMAL * np.maximum(np.abs(cap), 1.0)
        slack = used < cap - SLACK_ROW * np.maximum(np.abs(cap), 1.0)
        active = (active & ~(lam < -KKT_PRIMAL * lam_scale) & ~(slack & (lam > ACTIVE_DUAL * lam_scale))) | over
    return None


def _solve_on(c, b, H, cap, lo, hi, at_lo, at_hi, active_rows, max_system):
    """(x, λ) of the KKT equations on one active set (columns at_lo / at_hi fixed, rows active bind)."""
    free = ~at_lo & ~at_hi
    fixed_val = np.where(at_lo, lo, np.where(at_hi, hi, 0.0))
    active = np.flatnonzero(active_rows)
    fq = np.flatnonzero(free & (b > 0))
    fl = np.flatnonzero(free & (b == 0))
    k, m = active.size, fl.size
    if k + m > max_system:
        return None
    HA = H[active]
    lam = np.zeros(H.shape[0])
    D = fixed_val.copy()
    if k + m:
        M = np.zeros((k + m, k + m))
        rhs = np.zeros(k + m)
        inv2b = 1.0 / (2.0 * b[fq])
        M[:k, :k] = -(HA[:, fq] * inv2b) @ HA[:, fq].T
        M[:k, k:] = HA[:, fl]
        fixed = ~free
        rhs[:k] = cap[active] - HA[:, fixed] @ fixed_val[fixed] - HA[:, fq] @ (c[fq] * inv2b)
        M[k:, :k] = HA[:, fl].T
        rhs[k:] = c[fl]
        try:
            x = np.linalg.solve(M, rhs)
        except np.linalg.LinAlgError:
            return None
        if not np.all(np.isfinite(x)):
            return None
        lam[active] = x[:k]
        D[fl] = x[k:]
    D[fq] = (c[fq] - H[:, fq].T @ lam) / (2.0 * b[fq])
    return D, lam


def _is_kkt(c, b, cap, H, D, lam, lo, hi, at_lo, at_hi, free, scale, lam_scale) -> bool:
    tol_x = KKT_PRIMAL * scale
    if np.any(D < lo - tol_x) or np.any(D > hi + tol_x):
        return False
    if np.any(lam < -KKT_PRIMAL * lam_scale):
        return False
    used = H @ D
    if np.any(used > cap + KKT_PRIMAL * np.maximum(np.abs(cap), 1.0)):
        return False
    reduced = c - 2.0 * b * D - H.T @ lam  # marginal profit of one more unit
    tol_r = KKT_REDUCED * lam_scale
    if np.any(reduced[at_lo & (hi > lo)] > tol_r) or np.any(reduced[at_hi & (hi > lo)] < -tol_r):
        return False
    if np.any(np.abs(reduced[free]) > tol_r):
        return False
    slack_rows = used < cap - SLACK_ROW * np.maximum(np.abs(cap), 1.0)
    return not np.any(lam[slack_rows] > ACTIVE_DUAL * lam_scale)
