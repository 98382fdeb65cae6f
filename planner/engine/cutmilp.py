r"""The outer-approximation MILP on one persistent highspy instance, gathered from the families of blocks.

Each family adds its columns and rows (:meth:`planner.engine.blocks.Blocks.add_to_milp`):
for products the volumes D, contribution estimates t and on/off columns y
with the links max(L, M)·y ≤ D ≤ U·y and the first tangent cuts; for
options their scale columns.  Together with the shared capacity rows this is

.. math::

    \max \sum_i t_i - \sum_i F_i y_i - \sum_o c_o s_o \quad\text{s.t.}\quad
    H D - A s \le \mathrm{cap},\; \text{the families' own rows},\;
    t_i \le (c_i - 2 b_i \bar D) D_i + b_i \bar D^2 y_i \text{ at each cut point } \bar D,

the model of record's outer approximation (:func:`models.cuts.build_cut_model`;
``tests/test_engine_model.py`` checks the two are the same rows).  Every cut
over-estimates the concave contribution, so the MILP's dual bound is a valid
upper bound (Duran & Grossmann 1986, Math. Programming 36).  Cuts are added
as rows to the same instance (no rebuild); the best plan known is passed in
as a MIP start before every solve.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from planner.engine import highs
from planner.engine.blocks import MilpBuilder
from planner.engine.problem import Problem
from planner.engine.settings import LEAN_MIP


@dataclass
class MilpResult:
    """One run of the cut MILP (amounts in the problem's units)."""

    outcome: highs.Outcome
    bound: float  # upper bound on the profit (inf if none)
    has_solution: bool
    x: np.ndarray | None = None  # every column's value
    choice: np.ndarray | None = None  # the on/off choices of the solution


class CutMilp:
    """The cut MILP of a problem; ``cuts`` appends rows, ``solve`` re-runs it."""

    def __init__(self, p: Problem, threads: int = 1, seed: int = 0, mip_rel_gap: float = 1e-5) -> None:
        self.p = p
        self.b = MilpBuilder(p.capacity)
        for f in p.families:
            f.add_to_milp(self.b)
        cost, lo, hi, integer, rlo, rhi, R, C, V = self.b.arrays()
        start, index, value = highs.csr(self.b.nrow, R, C, V)
        self.h = highs.new(threads, seed, mip_rel_gap=float(mip_rel_gap), **LEAN_MIP)
        self.h.passModel(int(cost.size), int(self.b.nrow), int(index.size), 2, -1, float(self.b.offset), cost,
                         lo, hi, rlo, rhi, start, index, value, integer)
        self.b.sink = self._add_rows
        self.b.fixer = self._fix
        self.ncuts = 0

    def _add_rows(self, count: int, row_of: np.ndarray, cols: np.ndarray, vals: np.ndarray,
                  lower: np.ndarray, upper: np.ndarray) -> None:
        start, index, value = highs.csr(count, row_of, cols, vals)
        self.h.addRows(int(count), lower, upper, int(index.size), start, index, value)
        self.ncuts += int(count)

    def _fix(self, cols: np.ndarray, values: np.ndarray) -> None:
        if cols.size:
            self.h.changeColsBounds(int(cols.size), cols.astype(np.int32), values, values)

    def cuts(self, x: np.ndarray) -> int:
        """Cuts wherever the solution ``x`` over-estimates a block's profit; how many."""
        return sum(f.cuts(self.b, x) for f in self.p.families)

    def cuts_at(self, values: list[np.ndarray], choice: np.ndarray) -> int:
        """Cuts at a plan's own values (each family's variables) under ``choice``."""
        return sum(f.cuts_at(self.b, v, z) for f, v, z in zip(self.p.families, values, self.p.split(choice)))

    def fix(self, which: np.ndarray, on: np.ndarray) -> None:
        """Fix the choices ``which`` (indices into the problem's choice array) on or off."""
        which = np.asarray(which, dtype=np.int64)
        on = np.asarray(on, dtype=bool)
        for k, f in enumerate(self.p.families):
            a, b = self.p.bounds[k], self.p.bounds[k + 1]
            sel = (which >= a) & (which < b)
            if sel.any():
                f.milp_fix(self.b, which[sel] - a, on[sel])

    def start_from(self, values: list[np.ndarray], choice: np.ndarray) -> None:
        """A MIP start: the given plan, with each estimate at its true value (every cut holds there)."""
        import highspy

        x = np.zeros(self.b.ncol)
        for f, v, z in zip(self.p.families, values, self.p.split(choice)):
            for col, val in f.milp_start(self.b, v, z).items():
                x[col] = val
        sol = highspy.HighsSolution()
        sol.col_value = x.tolist()
        sol.value_valid = True
        self.h.setSolution(sol)

    def solve(self, time_limit: float | None, mip_rel_gap: float) -> MilpResult:
        """Run the MILP to ``mip_rel_gap``; its outcome, bound and solution."""
        highs.set_options(self.h, {"time_limit": highs.time_option(time_limit), "mip_rel_gap": float(mip_rel_gap)})
        got = highs.run(self.h)
        info = self.h.getInfo()
        bound = float(info.mip_dual_bound) if np.isfinite(info.mip_dual_bound) else np.inf
        if got == highs.Outcome.INFEASIBLE:
            return MilpResult(got, -np.inf, False)
        has = info.primal_solution_status == 2
        if not has:
            return MilpResult(got, bound, False)
        x = np.asarray(self.h.getSolution().col_value, dtype=float)
        choice = self.p.join([f.milp_choice(self.b, x) for f in self.p.families])
        return MilpResult(got, bound, True, x, choice)
