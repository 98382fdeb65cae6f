"""Exact re-solves of one mix model shape for many data sets, straight in highspy (no Pyomo).

A risk run solves the same scenario shape hundreds of times with other
intercepts, slopes, unit costs and capacities.  The structure (which products
may be shut down, their floors, the usage matrix) does not change between
samples, so :class:`SampleSolver` builds the cut MILP once and re-solves it
with new numbers, and solves small slate QPs beside it:

- the tangent-cut MILP of :mod:`models.cuts` (columns D_i, t_i and y_k for the
  products with a real on/off choice; capacity rows, links D_k ≤ U_k·y_k and
  D_k ≥ max(L_k, M_k)·y_k, then the perspective tangent cuts
  t_i ≤ (a_i − v_i − 2 b_i D̄)·D_i + b_i D̄²·y_i);
- the fixed-slate QP  max Σ (a_i − v_i) D_i − b_i D_i²  s.t. the capacity rows,
  lo_i ≤ D_i ≤ hi_i (the slate's bounds, as in :mod:`models.mix`), over the slate's
  running products only, whose answer is polished exactly by :func:`planner.kkt.polish`;
- before any MILP, a Lagrangian certificate (:meth:`SampleSolver.lagrangian`): pricing
  the capacities at the best slate's shadow prices bounds every slate at once, and
  often proves that slate optimal without a MILP.

The algorithm is the outer approximation of :mod:`planner.solve` (Duran &
Grossmann 1986; perspective cuts after Frangioni & Gentile 2006): the MILP's
dual bound is a proven upper bound, every slate it meets is solved exactly,
and it stops when (bound − best) / max(|best|, 1) ≤ ``rel_gap``.  Profit here
excludes the plant-wide fixed cost (currency per period).

Anything this route cannot certify (a QP whose polish fails, no convergence
within the round limit, a model too large for the active-set QP) returns
``None`` and the caller falls back to :func:`planner.solve.solve_mix`.
"""

from __future__ import annotations

from dataclasses import dataclass

import highspy
import numpy as np

from models.data import MixData, peak_contribution

from planner.engine.certificate import relative_gap
from planner.engine.kkt import polish
from planner.engine.lagrange import best_response

INF = highspy.kHighsInf
#: Largest number of products this route takes (beyond it the active-set QP is not reliable).
MAX_PRODUCTS = 1500
#: Up to this many on/off choices, slates are bounded all at once by the Lagrangian (2^k rows).
ENUMERATE_UP_TO = 12


@dataclass
class SampleSolution:
    """One sample's optimum: profit excludes the plant-wide fixed cost (currency)."""

    status: str  # "optimal" (certified to the gap) or "infeasible"
    objective: float
    bound: float
    running: np.ndarray  # bool, product order
    volume: np.ndarray  # units
    duals: np.ndarray  # shadow prices, currency per resource unit, ≥ 0
    rounds: int = 0


def _silent(h: highspy.Highs, seed: int, threads: int) -> None:
    h.setOptionValue("output_flag", False)
    h.setOptionValue("random_seed", seed)
    h.setOptionValue("threads", threads)


class SampleSolver:
    """Build the cut MILP for ``shape`` once; ``solve(d)`` for any data of that shape (same products,
    resources, usage, commitments and fixed costs; other a, b, v and capacities)."""

    def __init__(self, shape: MixData, rel_gap: float = 1e-4, seed: int = 0, threads: int = 1,
                 extra_points: np.ndarray | None = None, max_rounds: int = 200,
                 enumerate_up_to: int = ENUMERATE_UP_TO) -> None:
        self.shape, self.rel_gap, self.max_rounds = shape, rel_gap, max_rounds
        self.extra_points = extra_points  # volumes per product also used as initial cut points
        n, m = shape.n, len(shape.resources)
        self.n, self.m = n, m
        self.free = np.flatnonzero(shape.can_stop)
        self.floor = shape.run_floor
        self.dense = shape.usage_dense() if m else np.zeros((0, n))
        self.seed, self.threads = seed, threads
        k = self.free.size
        self.slates = None
        if 0 < k <= enumerate_up_to:  # every on/off pattern of the free products, one row each
            self.slates = ((np.arange(2 ** k)[:, None] >> np.arange(k)[None, :]) & 1).astype(bool)
        self.milp = self._build_milp(seed, threads) if k and self.slates is None else None

    # --- building (once) -------------------------------------------------------------------------
    def _capacity_rows(self, h: highspy.Highs, cols: np.ndarray) -> None:
        for r in range(self.m):
            nz = np.flatnonzero(self.dense[r])
            h.addRow(-INF, float(self.shape.capacity[r]), nz.size, cols[nz].astype(np.int32), self.dense[r, nz])

    def _build_milp(self, seed: int, threads: int) -> highspy.Highs:
        d, n, k = self.shape, self.n, self.free.size
        h = highspy.Highs()
        _silent(h, seed, threads)
        h.setOptionValue("mip_rel_gap", self.rel_gap / 10)
        h.setOptionValue("mip_abs_gap", 1e-9)
        # Primal heuristics, restarts and symmetry detection cost a fixed 10-30 ms per run on these
        # tiny MILPs (measured on a demo-sized cut MILP: 37 ms per run with them, 11 ms without, the
        # same bound); the incumbent comes from the slate QPs anyway, and none of them affects the bound.
        for option, value in (("mip_heuristic_run_feasibility_jump", False), ("mip_heuristic_effort", 0.0),
                              ("mip_heuristic_run_rins", False), ("mip_heuristic_run_rens", False),
                              ("mip_heuristic_run_root_reduced_cost", False), ("mip_allow_restart", False),
                              ("mip_detect_symmetry", False)):
            h.setOptionValue(option, value)
        # columns: D (0..n-1), t (n..2n-1), y (2n..2n+k-1)
        h.addCols(n, np.zeros(n), np.zeros(n), np.full(n, INF), 0, [], [], [])
        h.addCols(n, np.ones(n), np.full(n, -INF), np.full(n, INF), 0, [], [], [])
        h.addCols(k, -d.F[self.free], np.zeros(k), np.ones(k), 0, [], [], [])
        h.changeColsIntegrality(k, np.arange(2 * n, 2 * n + k, dtype=np.int32),
                                np.full(k, highspy.HighsVarType.kInteger))
        h.changeObjectiveSense(highspy.ObjSense.kMaximize)
        fixed = ~d.can_stop
        h.changeObjectiveOffset(-float(np.sum(d.F[fixed])))
        self._capacity_rows(h, np.arange(n))
        self.link_rows = []
        for j, kk in enumerate(self.free):
            self.link_rows.append(h.getNumRow())
            h.addRow(-INF, 0.0, 2, np.array([kk, 2 * n + j], dtype=np.int32), np.array([1.0, -1.0]))
            if self.floor[kk] > 0:
                h.addRow(0.0, INF, 2, np.array([kk, 2 * n + j], dtype=np.int32),
                         np.array([1.0, -float(self.floor[kk])]))
        self.base_rows = h.getNumRow()
        return h

    def _load_milp(self, d: MixData) -> None:
        n = self.n
        idx_n = np.arange(n, dtype=np.int32)
        rows = np.arange(self.m, dtype=np.int32)
        h = self.milp
        h.clearSolver()
        extra = h.getNumRow() - self.base_rows
        if extra:
            h.deleteRows(extra, np.arange(self.base_rows, self.base_rows + extra, dtype=np.int32))
        lo = np.where(d.can_stop, 0.0, self.floor)
        h.changeColsBounds(n, idx_n, lo, d.upper)
        top = np.maximum(peak_contribution(d), 0.0) + 1.0
        h.changeColsBounds(n, idx_n + n, np.full(n, -INF), top)
        if self.m:
            h.changeRowsBounds(self.m, rows, np.full(self.m, -INF), d.capacity)
        for j, kk in enumerate(self.free):
            h.changeCoeff(self.link_rows[j], 2 * n + j, -float(d.upper[kk]))
        self._add_cuts(d, *self._initial_points(d))

    def _initial_points(self, d: MixData) -> tuple[np.ndarray, np.ndarray]:
        U = d.upper
        with np.errstate(divide="ignore", invalid="ignore"):
            peak = np.where(d.b > 0, d.margin / (2 * np.where(d.b > 0, d.b, 1.0)), U)
        peak = np.clip(peak, 0.0, U)
        curved = np.flatnonzero(d.b > 0)
        ks, pts = [np.arange(d.n), curved, curved], [peak, 0.5 * U[curved], U[curved]]
        if self.extra_points is not None:
            keep = np.flatnonzero((self.extra_points > 0) & (d.b > 0))
            ks.append(keep)
            pts.append(np.minimum(self.extra_points[keep], U[keep]))
        return np.concatenate(ks), np.concatenate(pts)

    def _add_cuts(self, d: MixData, products: np.ndarray, points: np.ndarray) -> None:
        """t_k − (a_k − v_k − 2 b_k D̄)·D_k − b_k D̄²·y_k ≤ 0 (y_k the constant 1 if it cannot stop)."""
        n = self.n
        ycol = {int(kk): 2 * n + j for j, kk in enumerate(self.free)}
        for kk, pt in zip(products.tolist(), points.tolist()):
            slope = float(d.margin[kk] - 2.0 * d.b[kk] * pt)
            height = float(d.b[kk] * pt * pt)
            if kk in ycol:
                self.milp.addRow(-INF, 0.0, 3, np.array([n + kk, kk, ycol[kk]], dtype=np.int32),
                                 np.array([1.0, -slope, -height]))
            else:
                self.milp.addRow(-INF, height, 2, np.array([n + kk, kk], dtype=np.int32), np.array([1.0, -slope]))

    def _slate_qp(self, d: MixData, slate: np.ndarray) -> tuple[str, float, np.ndarray, np.ndarray]:
        """(status, objective, volume, duals) of the fixed-slate QP; status "optimal" (exact by the
        KKT polish), "infeasible" (the slate's floors do not fit) or "unsure".

        The QP holds only the slate's columns: HiGHS 1.15's active-set QP was seen to answer
        "unbounded" or "non-convex" on this convex QP when the stopped products were kept as
        columns fixed at 0, and once "optimal" at a point that fails the KKT check.  If it
        fails, or its answer does not pass the polish, the interior-point QP (highspy-extras)
        is tried; only an answer that passes the KKT check is used.
        """
        lo = np.where(slate, d.run_floor, 0.0)
        hi = np.where(slate, d.qp_upper, 0.0)
        on = np.flatnonzero(slate)
        k = on.size
        if k == 0:  # nothing runs: nothing to solve (capacities are ≥ 0)
            return "optimal", 0.0, np.zeros(self.n), np.zeros(self.m)
        h = highspy.Highs()
        _silent(h, self.seed, self.threads)
        h.addCols(k, -d.margin[on], lo[on], hi[on], 0, [], [], [])
        H = self.dense[:, on]
        for r in range(self.m):
            nz = np.flatnonzero(H[r])
            h.addRow(-INF, float(d.capacity[r]), nz.size, nz.astype(np.int32), H[r, nz])
        quad = np.flatnonzero(d.b[on] > 0)
        if quad.size:
            start = np.searchsorted(quad, np.arange(k + 1)).astype(np.int32)
            h.passHessian(k, quad.size, highspy.HessianFormat.kTriangular, start, quad.astype(np.int32),
                          2.0 * d.b[on][quad])
        methods = ["choose", "hipo"] if quad.size and _has_ipm() else ["choose"]
        for method in methods:
            h.setOptionValue("solver", method)
            h.clearSolver()
            h.run()
            status = h.getModelStatus()
            if status == highspy.HighsModelStatus.kInfeasible:
                return "infeasible", -np.inf, lo, np.zeros(self.m)
            if status != highspy.HighsModelStatus.kOptimal:
                continue
            sol = h.getSolution()
            volume = np.zeros(self.n)
            volume[on] = np.array(sol.col_value)
            volume = np.clip(volume, lo, hi)
            duals = np.maximum(-np.array(sol.row_dual), 0.0) if self.m else np.zeros(0)
            slack = d.used(volume) < d.capacity - 1e-7 * np.maximum(np.abs(d.capacity), 1.0)
            duals[slack] = 0.0  # an interior-point answer leaves ~1e-7 on slack rows
            exact = polish(d, slate, volume, duals)
            if exact is not None:
                volume, duals = exact
                return "optimal", float(np.sum(d.contribution(volume)) - np.sum(d.F[slate])), volume, duals
        return "unsure", -np.inf, lo, np.zeros(self.m)

    def lagrangian(self, d: MixData, lam: np.ndarray) -> tuple[float, np.ndarray]:
        """Upper bound L(λ) on the optimum for shadow prices λ ≥ 0, and the slate it suggests.

        Pricing the capacity rows at λ decouples the products (Lagrangian relaxation):
        L(λ) = Σ_r λ_r H_r + Σ_i max over the product's own choices of
        (a_i − v_i − Σ_r h_ri λ_r)·D_i − b_i D_i² − F_i y_i, with D_i ∈ [max(L_i, M_i)·y_i, U_i·y_i]
        (y_i = 1 if it cannot stop).  Weak duality makes it ≥ the optimum for every λ ≥ 0;
        U_i is the bound of :func:`models.data.tight_upper`, which some optimal plan respects.
        """
        c = d.margin - (self.dense.T @ lam if self.m else 0.0)
        lo, hi = self.floor, d.upper
        D = np.clip(best_response(c, d.b, lo, hi), lo, hi)
        D = np.where(np.isfinite(D), D, lo)
        value = c * D - d.b * D * D - d.F
        on = np.ones(self.n, dtype=bool)
        stop = d.can_stop & ((value < 0) | (hi < lo))
        on[stop] = False
        value = np.where(stop, 0.0, value)
        return float(lam @ d.capacity + np.sum(value)) if self.m else float(np.sum(value)), on

    def solve(self, d: MixData, start: np.ndarray | None = None, tries: int = 4) -> SampleSolution | None:
        """The certified optimum of ``d`` (same shape as the one built), or None if not certified here.

        First a few slates proposed by the Lagrangian at the best slate's shadow prices (starting
        from ``start``): when L(λ) is within the gap of the best slate, that slate is certified
        optimal.  Otherwise the outer approximation closes the gap.  The answer depends only on
        ``d`` and ``start``, never on earlier calls.
        """
        if d.n > MAX_PRODUCTS:
            return None
        n = self.n
        if not self.free.size:
            status, obj, vol, lam = self._slate_qp(d, np.ones(n, dtype=bool))
            if status != "optimal":
                return None
            return SampleSolution("optimal", obj, obj, np.ones(n, dtype=bool), vol, lam)
        if self.slates is not None:
            return self._bound_all_slates(d, start)
        seen: dict[bytes, str] = {}
        met: list[np.ndarray] = []  # volumes of the slates solved, used as cut points below
        best: list = []  # [objective, volume, duals, slate]
        bound = np.inf
        slate = self.lagrangian(d, np.zeros(self.m))[1] if start is None else np.asarray(start, dtype=bool)
        for _ in range(tries):
            key = np.packbits(slate).tobytes()
            if key in seen:
                break
            status, obj, vol, lam = self._slate_qp(d, slate)
            seen[key] = status
            if status == "unsure":
                return None
            if status == "optimal":
                met.append(vol)
                if not best or obj > best[0]:
                    best = [obj, vol, lam, slate.copy()]
            if not best:
                break
            bound_l, slate = self.lagrangian(d, best[2])
            bound = min(bound, bound_l)
            if relative_gap(bound, best[0]) <= self.rel_gap:
                return SampleSolution("optimal", best[0], max(bound, best[0]), best[3], best[1], best[2], 0)
        return self._outer(d, best, bound, seen, met)

    def _bound_all_slates(self, d: MixData, start: np.ndarray | None) -> SampleSolution | None:
        """Exact by bounding every slate: for k ≤ ``enumerate_up_to`` on/off choices.

        Each slate S has an upper bound: its QP value once solved, else the least
        Lagrangian bound L_S(λ) over the shadow prices λ of the slates solved so far
        (L_S(λ) = λ·H + Σ_i∈S max over D_i of (a_i − v_i − h_iᵀλ)·D_i − b_i D_i² − F_i is
        separable, so one matrix product bounds all 2^k slates).  The open slate of
        highest bound is solved next, until no slate's bound is above the gap:
        then the best slate is certified.  On the demo this takes 1.6 QPs per sample.
        """
        Y, free = self.slates, self.free
        always = ~d.can_stop
        ub = np.full(len(Y), np.inf)
        solved = np.zeros(len(Y), dtype=bool)
        best: list = []  # [objective, volume, duals, slate]
        on = self.lagrangian(d, np.zeros(self.m))[1] if start is None else np.asarray(start, dtype=bool)
        row = int(np.sum(on[free].astype(np.int64) << np.arange(free.size)))
        while True:
            slate = always.copy()
            slate[free] = Y[row]
            status, obj, vol, lam = self._slate_qp(d, slate)
            if status == "unsure":
                return None
            solved[row] = True
            ub[row] = obj if status == "optimal" else -np.inf
            if status == "optimal":
                if not best or obj > best[0]:
                    best = [obj, vol, lam, slate]
                const, gain = self._slate_terms(d, lam)
                bad = ~np.isfinite(gain)  # a product that cannot run within its own bounds
                bound_all = const + Y @ np.where(bad, 0.0, gain)
                bound_all[Y[:, bad].any(axis=1)] = -np.inf
                ub = np.where(solved, ub, np.minimum(ub, bound_all))
            top = best[0] if best else -np.inf
            scale = max(abs(top), 1.0) if best else 1.0
            open_ = ~solved & (ub > top + self.rel_gap * scale)
            if not open_.any():
                break
            row = int(np.argmax(np.where(open_, ub, -np.inf)))
        if not best:
            return None  # no slate fits: the caller's exact route names the conflict
        bound = float(np.max(ub))
        return SampleSolution("optimal", best[0], max(bound, best[0]), best[3], best[1], best[2], 0)

    def _slate_terms(self, d: MixData, lam: np.ndarray) -> tuple[float, np.ndarray]:
        """L_S(λ) = const + Σ_{free i ∈ S} gain_i: (const, gain) for shadow prices λ (currency)."""
        c = d.margin - (self.dense.T @ lam if self.m else 0.0)
        lo, hi = self.floor, d.upper
        D = np.clip(best_response(c, d.b, lo, hi), lo, hi)
        D = np.where(np.isfinite(D), D, lo)
        value = np.where(hi < lo, -np.inf, c * D - d.b * D * D - d.F)
        always = ~d.can_stop
        const = float(lam @ d.capacity if self.m else 0.0) + float(np.sum(value[always]))
        return const, value[self.free]

    def _outer(self, d: MixData, best: list, bound: float, seen: dict[bytes, str],
               met: list[np.ndarray]) -> SampleSolution | None:
        """Outer approximation from the slates met so far (see the module docstring)."""
        self._load_milp(d)
        for vol in met:
            keep = np.flatnonzero((vol > 0) & (d.b > 0))
            self._add_cuts(d, keep, vol[keep])
        h, n = self.milp, self.n
        scale = np.maximum(np.abs(d.margin) * d.upper, 1.0)
        for rounds in range(1, self.max_rounds + 1):
            h.run()
            if h.getModelStatus() != highspy.HighsModelStatus.kOptimal:
                return None  # infeasible or trouble: the caller's exact route names it
            bound = min(bound, float(h.getInfo().mip_dual_bound))
            x = np.array(h.getSolution().col_value)
            vol, t = x[:n], x[n:2 * n]
            slate = np.ones(n, dtype=bool)
            slate[self.free] = x[2 * n:] > 0.5
            key = np.packbits(slate).tobytes()
            if key not in seen:
                status, obj, v2, lam = self._slate_qp(d, slate)
                seen[key] = status
                if status != "optimal":
                    return None
                if not best or obj > best[0]:
                    best = [obj, v2, lam, slate.copy()]
            if best and relative_gap(bound, best[0]) <= self.rel_gap:
                return SampleSolution("optimal", best[0], max(bound, best[0]), best[3], best[1], best[2], rounds)
            over = t - d.contribution(vol) > 1e-9 * scale
            if not over.any():
                return None
            self._add_cuts(d, np.flatnonzero(over), vol[over])
        return None


def _has_ipm() -> bool:
    from planner.engine.qp import has_ipm

    return has_ipm()


