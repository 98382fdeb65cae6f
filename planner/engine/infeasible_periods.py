r"""Commitments over several periods that cannot fit, named by resource and month (exit 3).

The commitments are the sales each period must reach (``min_volume``) and the
final stock.  The least capacity they need is an LP: sales lo ≤ s_it ≤ hi
(selling more can free space a stock would take), making m_it ≥ 0 and stock
S_it = I + Σ_{k≤t}(m − s) ≥ 0, S_iT ≥ E, with a shortfall z_rt ≥ 0 added to
every (resource, period) capacity; minimise Σ z / max(H_rt, 1).  Where the least shortfall is
positive, no plan exists, and each (resource, month) with a shortfall is named
with the amount missing.
"""

from __future__ import annotations

import numpy as np

from models.data import MixData
from planner.engine import highs
from planner.errors import InfeasibleError


def explain_periods(s, d: MixData) -> None:
    """Raise InfeasibleError naming each resource and month the commitments overfill (see the module docstring)."""
    pd = d.periods
    n, T, R = pd.n, pd.T, pd.R
    if not (pd.lo.any() or pd.final.any()) or R == 0:
        return
    # columns: made (n·T), stock (n·T), shortfall (R·T), sold (n·T)
    nm, ns = n * T, n * T
    sc = nm + ns + R * T
    ncol = sc + n * T
    cost = np.r_[np.zeros(nm + ns), 1.0 / np.maximum(pd.capacity.ravel(), 1.0), np.zeros(n * T)]
    lo = np.zeros(ncol)
    hi = np.full(ncol, highs.INF)
    lo[nm:nm + ns] = np.c_[np.zeros((n, T - 1)), pd.final[:, None]].ravel()
    lo[sc:] = pd.lo.ravel()
    hi[sc:] = np.where(np.isfinite(pd.hi), pd.hi, highs.INF).ravel()
    rows, cols, vals, rlo, rhi = [], [], [], [], []
    k = 0
    for i in range(n):  # S_t − S_{t−1} − m_t + s_t = 0 (S_0 = I: I on the right at t = 0)
        for t in range(T):
            rows += [k, k, k]
            cols += [nm + i * T + t, i * T + t, sc + i * T + t]
            vals += [1.0, -1.0, 1.0]
            if t > 0:
                rows.append(k), cols.append(nm + i * T + t - 1), vals.append(-1.0)
            rhs = pd.initial[i] if t == 0 else 0.0
            rlo.append(rhs), rhi.append(rhs)
            k += 1
    for r in range(R):  # Σ h m_t + g S_t − z_rt ≤ H_rt
        for t in range(T):
            for i in np.flatnonzero(pd.usage[:, r] > 0):
                rows.append(k), cols.append(i * T + t), vals.append(pd.usage[i, r])
            for i in np.flatnonzero(pd.stock_usage[:, r] > 0):
                rows.append(k), cols.append(nm + i * T + t), vals.append(pd.stock_usage[i, r])
            rows.append(k), cols.append(nm + ns + r * T + t), vals.append(-1.0)
            rlo.append(-highs.INF), rhi.append(pd.capacity[r, t])
            k += 1
    h = highs.new(1, 0)
    start, index, value = highs.csc(ncol, np.asarray(rows), np.asarray(cols), np.asarray(vals, dtype=float))
    h.passModel(ncol, k, int(index.size), 1, 1, 0.0, cost, lo, hi, np.asarray(rlo, float), np.asarray(rhi, float),
                start, index, value, np.zeros(ncol, dtype=np.int32))
    if highs.run(h) != highs.Outcome.OPTIMAL:
        return  # the engine reports what it finds
    z = np.asarray(h.getSolution().col_value, dtype=float)[nm + ns:sc].reshape(R, T)
    short = z > 1e-7 * np.maximum(pd.capacity, 1.0)
    if not short.any():
        return
    units = {r.name: r.unit for r in s.resources}
    lines = [f"{pd.resources[r]} in {pd.periods[t]}: the committed sales and final stock need "
             f"{z[r, t]:,.6g} {units.get(pd.resources[r]) or 'units'} more than its capacity {pd.capacity[r, t]:,.6g} "
             "(lower min_volume or final_stock, or raise the capacity of this or an earlier month)"
             for r, t in zip(*np.nonzero(short))]
    raise InfeasibleError(lines)
