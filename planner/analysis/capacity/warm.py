"""The mixed-integer plan re-solved at other capacities, reusing the work already done.

Each capacity is first solved by the fast route (:mod:`planner.fastroute`:
Lagrangian bound and slate, cut MILP only where the gap is open), warm-started
from the multipliers of the capacity solved before; where it declines (capacity
options in the data, or no certificate), the persistent cut MILP below does it.

The tangent cuts of the outer approximation (:mod:`models.cuts`) bound each
product's contribution and do not depend on any capacity, so one persistent
cut MILP serves every capacity: only the right-hand sides of the capacity rows
change, and the cuts found at one capacity stay valid at the next.  Its
volume bounds are computed at the largest capacities that will be asked for
(``reach``), which keeps them valid (if a little looser) at every smaller one.
Each solve stops when (MILP bound − best slate's profit) / max(|profit|, 1) is
at most ``rel_gap``; slates are evaluated by a caller-supplied function (exact
parametric paths in the sweep, a fixed-slate QP by default).  As in Duran &
Grossmann's outer approximation, cuts are added at each evaluated slate's own
optimal volumes as well as at the MILP's, which closes the gap in few rounds.
"""

from __future__ import annotations

import time
from collections.abc import Callable
from dataclasses import dataclass

import numpy as np

from models.data import MixData, tight_upper

from planner.errors import SolverError
from planner.engine.slateqp import solve_slate_fast
from planner.engine.fastroute import applies, solve_fast
from planner.engine.lagrange import minimise_dual
from planner.engine.solve import _initial_points, relative_gap


@dataclass
class WarmResult:
    """The best slate at one capacity, its profit (products only) and the certified bound."""

    slate: np.ndarray
    profit: float
    bound: float
    rounds: int

    @property
    def gap(self) -> float:
        return relative_gap(self.bound, self.profit)


def slate_key(slate: np.ndarray) -> bytes:
    return np.packbits(np.asarray(slate, dtype=bool)).tobytes()


class WarmMix:
    """A persistent cut MILP for one scenario at varying capacities (no capacity options)."""

    def __init__(self, d: MixData, reach: np.ndarray, rel_gap: float = 1e-8, max_rounds: int = 200) -> None:
        self.d = d
        self.rel_gap = rel_gap
        self.max_rounds = max_rounds
        self.reach = np.maximum(np.asarray(reach, dtype=float), d.capacity)
        self.milp_solves = 0
        self.qp_solves = 0
        self.fast_solves = 0
        self.fast = applies(d)  # the fast route first; this MILP only where it declines
        self._start: list[np.ndarray] | None = None  # multipliers of the last fast solve
        self._built = False

    def no_better_slate(self, cap: np.ndarray, profit: float) -> bool:
        """True if no slate beats ``profit`` (products only) at ``cap`` by more than the gap.

        A Lagrangian certificate (the dual bound of the shared limits, warm-started
        from the last multipliers): cheap where it holds; False where it cannot
        show it, and the caller then solves.
        """
        if not self.fast:
            return False
        target = profit + self.rel_gap * max(abs(profit), 1.0)
        res = minimise_dual(self.d.with_capacity(cap), rel_tol=self.rel_gap / 4, start=self._start,
                            target=target, max_steps=60)
        if res.best.value <= target:
            self._start = [p.lam for p in res.points[-10:]]
            return True
        return False

    def _solve_fast(self, cap: np.ndarray, known: list[np.ndarray],
                    deadline: float | None = None) -> WarmResult | None:
        """The fast route at ``cap``, warm-started from the last solve's multipliers (None if it declines).

        Raises TimeoutError if ``deadline`` (a ``time.perf_counter()`` value) passes first.
        """
        limit = None
        if deadline is not None:
            limit = deadline - time.perf_counter()
            if limit <= 0:
                raise TimeoutError("the time budget is spent")
        sol = solve_fast(self.d.with_capacity(cap), self.rel_gap, time_limit=limit, start=self._start,
                         known=list(known))
        if deadline is not None and time.perf_counter() >= deadline and (sol is None or sol.status != "optimal"):
            raise TimeoutError("the time budget is spent")
        if sol is None or sol.status != "optimal":
            return None
        self.fast_solves += 1
        tried = list(sol.multipliers_tried or [])[-10:]
        self._start = tried + [sol.duals] if sol.duals.size else None
        return WarmResult(np.asarray(sol.running, dtype=bool), sol.objective, sol.bound, sol.rounds)

    def _build(self) -> None:
        """(Re)build the persistent cut MILP (bounds at ``reach``) and its HiGHS instance."""
        from pyomo.contrib.appsi.solvers import Highs

        d = self.d
        bounds = d.with_capacity(self.reach)
        from models.cuts import add_cuts, build_cut_model  # Pyomo: imported only where this path runs

        self._add_cuts = add_cuts
        self.m = build_cut_model(bounds)
        add_cuts(self.m, bounds, *_initial_points(bounds))
        self.opt = Highs()
        if not self.opt.available():
            raise SolverError("HiGHS is not available to Pyomo: pip install 'highspy==1.15.1'")
        self.opt.config.load_solution = False
        uc = self.opt.update_config  # only cuts are added and capacity rows changed between solves
        uc.check_for_new_or_removed_vars = False
        uc.check_for_new_or_removed_params = False
        uc.update_vars = False
        uc.update_params = False
        uc.update_named_expressions = False
        uc.check_for_new_objective = False
        uc.update_objective = False
        self.opt.highs_options = {"random_seed": 0, "threads": 1, "mip_rel_gap": self.rel_gap / 10,
                                  "mip_abs_gap": 1e-9, "log_to_console": False}
        self.free_idx = np.flatnonzero(d.can_stop)
        self.free = [self.m.running[d.products[k]] for k in self.free_idx]
        self.rhs = bounds.capacity.astype(float).copy()  # the rows as built
        self.links = bounds.upper.copy()  # U_i in volume_cap[i]: D_i ≤ U_i·y_i, as built
        self.points: dict[int, list[float]] = {}  # QP-point cuts so far, per product
        self.scale = np.maximum(np.abs(d.margin) * bounds.upper, 1.0)

    def _cut_at(self, slate: np.ndarray, x: np.ndarray) -> None:
        """Cuts at a slate's optimal volumes, skipping any within 1e-3 of U_i of a cut already there.

        A nearby cut over-estimates the contribution by at most b_i·(1e-3·U_i)², so the
        skipped ones add little; the MILP-point cuts of the loop are never skipped.
        """
        d = self.d  # (a flat tangent at a product's peak is already among the first cuts)
        at = np.flatnonzero(slate & (d.b > 0) & (x > 0) & (np.abs(d.margin - 2 * d.b * x) > 1e-9 * np.abs(d.margin)))
        keep = []
        for k in at.tolist():
            pts = self.points.setdefault(k, [])
            tol = 1e-3 * max(float(self.links[k]) if np.isfinite(self.links[k]) else 1.0, 1.0)
            if not any(abs(x[k] - q) <= tol for q in pts):
                pts.append(float(x[k]))
                keep.append(k)
        if keep:
            self._add_cuts(self.m, self.d, np.array(keep), x[keep])

    def _set_capacity(self, cap: np.ndarray) -> None:
        """Capacity rows to ``cap``; the on/off links D ≤ U·y tightened to the bounds valid there."""
        for r, name in enumerate(self.d.resources):
            if cap[r] != self.rhs[r]:
                con = self.m.capacity[name]
                con.set_value((None, con.body, float(cap[r])))
                self.rhs[r] = cap[r]
        U = tight_upper(self.d.with_capacity(np.minimum(cap, self.reach)))
        for k in self.free_idx:
            if abs(U[k] - self.links[k]) > 1e-9 * max(abs(U[k]), 1.0):
                p = self.d.products[k]
                self.m.volume_cap[p].set_value(self.m.volume[p] - float(U[k]) * self.m.running[p] <= 0)
                self.links[k] = U[k]

    def _qp_profit(self, cap: np.ndarray) -> Callable[[np.ndarray], tuple[float, np.ndarray | None]]:
        d = self.d.with_capacity(cap)

        def evaluate(slate: np.ndarray) -> tuple[float, np.ndarray | None]:
            self.qp_solves += 1
            res = solve_slate_fast(d, slate)
            return (res.objective, res.volume) if res.status == "optimal" else (-np.inf, None)

        return evaluate

    def solve(self, cap: np.ndarray,
              evaluate: Callable[[np.ndarray], tuple[float, np.ndarray | None]] | None = None,
              known: list[np.ndarray] = (), deadline: float | None = None) -> WarmResult:
        """The optimal slate at capacities ``cap``; ``known`` slates are tried first as incumbents.

        ``evaluate(slate)`` returns the slate's optimal profit at ``cap``
        (products only, −inf if infeasible) and its volumes (or None).  With a
        ``deadline`` (fast route only) a solve that cannot finish by then raises
        TimeoutError.
        """
        from pyomo.contrib.appsi.base import TerminationCondition as ATC

        cap = np.asarray(cap, dtype=float)
        if self.fast:
            got = self._solve_fast(cap, known, deadline)
            if got is not None:
                return got
        evaluate = evaluate or self._qp_profit(cap)
        if not self._built:
            self._build()
            self._built = True
        self._set_capacity(cap)
        best_slate, best = None, -np.inf
        seen: dict[bytes, float] = {}

        best_x = None

        def consider(slate: np.ndarray, cut: bool) -> None:
            nonlocal best_slate, best, best_x
            key = slate_key(slate)
            if key not in seen:
                seen[key], x = evaluate(slate)
                if seen[key] > best:
                    best, best_slate, best_x = seen[key], slate.copy(), x
                if cut and x is not None:
                    self._cut_at(slate, x)

        for s in known:
            consider(np.asarray(s, dtype=bool), cut=False)
        if best_x is not None:
            self._cut_at(best_slate, best_x)  # the incumbent's own optimum: the cuts that matter here
        bound = np.inf
        rounds = 0
        rebuilt = False
        while rounds < self.max_rounds:
            rounds += 1
            res = self.opt.solve(self.m)
            self.milp_solves += 1
            tc = res.termination_condition
            if tc == ATC.infeasible:
                raise SolverError("the commitments do not fit in the capacities asked for: "
                                  "start the range higher")
            if tc != ATC.optimal or res.best_feasible_objective is None:
                if not rebuilt:  # numerical trouble with many cuts: start again from a fresh model once
                    rebuilt = True
                    self._build()
                    self._set_capacity(cap)
                    if best_x is not None:
                        self._cut_at(best_slate, best_x)
                    continue
                raise SolverError(f"HiGHS ended the cut MILP with {tc.name} while re-solving at other capacities")
            bound = min(bound, float(res.best_objective_bound))
            res.solution_loader.load_vars()
            m, d = self.m, self.d
            vol = np.array([m.volume[p].value or 0.0 for p in d.products])
            t = np.array([m.contribution[p].value or 0.0 for p in d.products])
            slate = np.ones(d.n, dtype=bool)
            slate[self.free_idx] = np.array([(v.value or 0.0) > 0.5 for v in self.free], dtype=bool)
            consider(slate, cut=True)
            if relative_gap(bound, best) <= self.rel_gap:
                break
            over = t - d.contribution(vol) > 1e-10 * self.scale
            if not over.any():
                break
            self._add_cuts(m, d, np.flatnonzero(over), vol[over])
        if best_slate is None or not np.isfinite(best):
            raise SolverError("no feasible plan found while re-solving at other capacities")
        return WarmResult(best_slate, best, max(bound, best), rounds)
