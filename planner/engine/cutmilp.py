r"""The tangent-cut MILP of :mod:`models.cuts` straight into one persistent highspy instance.

Same formulation as :func:`models.cuts.build_cut_model` (the Pyomo model of
record; ``tests/test_fast.py`` checks both give the same bound on seeded
cases): columns D (volumes), t (contribution estimates), y (running, for
products with a real on/off choice);

.. math::

    \max \sum_i t_i - \sum_i F_i y_i \quad\text{s.t.}\quad
    H D \le \mathrm{cap},\;
    \max(L_i, M_i)\, y_i \le D_i \le U_i\, y_i,\;
    t_i \le (c_i - 2 b_i \bar D) D_i + b_i \bar D^2 y_i \text{ at each cut point } \bar D,

with y_i ≡ 1 (a constant) for products that must run or have no on/off
choice.  Cuts are added as rows to the same instance (no rebuild), and the
best slate known so far is passed in as a MIP start before every solve.
"""

from __future__ import annotations

import numpy as np

from models.data import MixData, peak_contribution

_INF = 1e30

#: HiGHS MIP options for these small, cut-heavy MILPs.  Measured on a 50-product case with
#: fixed costs near contributions (2 cores): one MILP took 2.4–3.2 s with the defaults, almost all of
#: it in root heuristics and restarts over 5 nodes, and 0.5 s with these (21 nodes, same bound).
LEAN_MIP = {"presolve": "off", "mip_allow_restart": False, "mip_heuristic_run_root_reduced_cost": False,
            "mip_heuristic_run_feasibility_jump": False, "mip_heuristic_run_rins": False,
            "mip_heuristic_run_rens": False}


class CutMilp:
    """The cut MILP on one highspy instance; ``add_cuts`` appends rows, ``solve`` re-runs it."""

    def __init__(self, d: MixData, threads: int = 1, seed: int = 0, mip_rel_gap: float = 1e-5) -> None:
        import highspy

        self.d = d
        n = d.n
        self.free = np.flatnonzero(d.can_stop)
        self.ycol = np.full(n, -1, dtype=np.int64)
        self.ycol[self.free] = 2 * n + np.arange(self.free.size)
        ncol = 2 * n + self.free.size
        floor = d.run_floor
        lo_D = np.where(d.can_stop, 0.0, floor)
        top_t = np.maximum(peak_contribution(d), 0.0) + 1.0
        cost = np.r_[np.zeros(n), np.ones(n), -d.F[self.free]]
        lower = np.r_[lo_D, np.full(n, -_INF), np.zeros(self.free.size)]
        upper = np.r_[d.upper, top_t, np.ones(self.free.size)]
        integrality = np.r_[np.zeros(2 * n, dtype=np.int32), np.ones(self.free.size, dtype=np.int32)]
        rows, cols, vals, rlo, rhi = [], [], [], [], []
        m = len(d.resources)
        keep = d.use_amt != 0
        rows.append(d.use_res[keep])
        cols.append(d.use_prod[keep])
        vals.append(d.use_amt[keep])
        rlo.append(np.full(m, -_INF))
        rhi.append(d.capacity.astype(float))
        f = self.free
        k = f.size
        # D_i − U_i y_i ≤ 0
        r0 = m
        rows += [r0 + np.arange(k), r0 + np.arange(k)]
        cols += [f, self.ycol[f]]
        vals += [np.ones(k), -d.upper[f]]
        rlo.append(np.full(k, -_INF))
        rhi.append(np.zeros(k))
        # D_i − floor_i y_i ≥ 0 where the floor is positive
        g = f[floor[f] > 0]
        r1 = m + k
        rows += [r1 + np.arange(g.size), r1 + np.arange(g.size)]
        cols += [g, self.ycol[g]]
        vals += [np.ones(g.size), -floor[g]]
        rlo.append(np.zeros(g.size))
        rhi.append(np.full(g.size, _INF))
        nrow = m + k + g.size
        R, C, V = np.concatenate(rows), np.concatenate(cols), np.concatenate(vals)
        start, index, value = _csr(nrow, R, C, V)
        h = highspy.Highs()
        h.setOptionValue("output_flag", False)
        h.setOptionValue("threads", int(threads))
        h.setOptionValue("random_seed", int(seed))
        h.setOptionValue("mip_rel_gap", float(mip_rel_gap))
        h.setOptionValue("mip_abs_gap", 1e-9)
        for name, val in LEAN_MIP.items():
            h.setOptionValue(name, val)
        offset = -float(np.sum(d.F[~d.can_stop]))
        h.passModel(ncol, nrow, int(index.size), 2, -1, offset, cost, lower, upper,
                    np.concatenate(rlo), np.concatenate(rhi), start, index, value, integrality)
        self.h = h
        self.ncuts = 0

    def add_cuts(self, products: np.ndarray, points: np.ndarray) -> int:
        """Tangent cuts t_k − (c_k − 2 b_k D̄) D_k − b_k D̄² y_k ≤ 0 (y_k ≡ 1: on the right-hand side)."""
        d, n = self.d, self.d.n
        k = np.asarray(products, dtype=np.int64)
        pt = np.asarray(points, dtype=float)
        if k.size == 0:
            return 0
        slope = d.margin[k] - 2.0 * d.b[k] * pt
        height = d.b[k] * pt * pt
        has_y = self.ycol[k] >= 0
        nnz_per = np.where(has_y, 3, 2)
        start = np.r_[0, np.cumsum(nnz_per)[:-1]].astype(np.int32)
        index = np.empty(int(nnz_per.sum()), dtype=np.int32)
        value = np.empty(index.size)
        index[start], value[start] = n + k, 1.0
        index[start + 1], value[start + 1] = k, -slope
        ys = start[has_y] + 2
        index[ys], value[ys] = self.ycol[k[has_y]], -height[has_y]
        rhs = np.where(has_y, 0.0, height)
        self.h.addRows(int(k.size), np.full(k.size, -_INF), rhs, int(index.size), start, index, value)
        self.ncuts += int(k.size)
        return int(k.size)

    def fix_running(self, products: np.ndarray, values: np.ndarray) -> None:
        """Fix y_k to 0 or 1 for the given products (bounds only; the column stays in the model)."""
        k = np.asarray(products, dtype=np.int64)
        if k.size == 0:
            return
        cols = self.ycol[k].astype(np.int32)
        v = np.asarray(values, dtype=float)
        self.h.changeColsBounds(int(k.size), cols, v, v)

    def start_from(self, volume: np.ndarray, slate: np.ndarray) -> None:
        """A MIP start: the given plan, with t at its true contribution (every cut holds there)."""
        import highspy

        d = self.d
        D = np.where(slate, volume, 0.0)
        x = np.r_[D, d.contribution(D), slate[self.free].astype(float)]
        sol = highspy.HighsSolution()
        sol.col_value = x.tolist()
        sol.value_valid = True
        self.h.setSolution(sol)

    def solve(self, time_limit: float | None) -> dict:
        """Run the MILP; returns status, bound (upper), value, volumes, t and slate."""
        import highspy

        h, d, n = self.h, self.d, self.d.n
        h.setOptionValue("time_limit", float(max(time_limit, 0.01)) if time_limit is not None else _INF)
        h.run()
        ms = h.getModelStatus()
        info = h.getInfo()
        out = {"status": h.modelStatusToString(ms), "optimal": ms == highspy.HighsModelStatus.kOptimal,
               "time_limit": ms == highspy.HighsModelStatus.kTimeLimit,
               "infeasible": ms == highspy.HighsModelStatus.kInfeasible,
               "bound": float(info.mip_dual_bound) if np.isfinite(info.mip_dual_bound) else np.inf,
               "has_solution": info.primal_solution_status == 2}
        if out["has_solution"]:
            x = np.asarray(h.getSolution().col_value, dtype=float)
            slate = np.ones(n, dtype=bool)
            slate[self.free] = x[2 * n:] > 0.5
            out.update(volume=x[:n], t=x[n:2 * n], slate=slate)
        return out


def _csr(nrow: int, R: np.ndarray, C: np.ndarray, V: np.ndarray) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    order = np.lexsort((C, R))
    R, C, V = R[order], C[order], V[order]
    start = np.searchsorted(R, np.arange(nrow + 1)).astype(np.int32)
    return start, C.astype(np.int32), V.astype(float)
