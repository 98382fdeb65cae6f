r"""Resources with their own fixed cost; closable ones as on/off choices on their capacity rows.

Resource r has a fixed cost E_r ≥ 0 (currency per period).  One that cannot
close always pays it (a constant).  A closable one is open (w_r = 1) or
closed (w_r = 0): its shared row's capacity is H_r·w_r and it pays E_r·w_r.
The problem's own capacity of a closable row is 0 (:class:`planner.engine.
problem.Problem`); opening adds H_r, exactly like an all-or-nothing capacity
option (:mod:`.options`) with amount H_r on its own row and cost E_r.

At multipliers λ the priced profit of opening is λ_r·H_r − E_r (linear), so
the best response is open where that is positive; forced either way the
values are exact.  In the QP an open resource adds H_r to its row and −E_r to
the constant; in the MILP w_r is a binary column with cost E_r and use −H_r.
"""

from __future__ import annotations

import numpy as np

from models.data import MixData
from planner.engine.blocks.base import Blocks, Columns, MilpBuilder, Response


class ResourceBlocks(Blocks):
    """The resources' fixed costs of ``d``; its choices are the closable resources (open or closed)."""

    name = "resources"

    def __init__(self, d: MixData) -> None:
        self.d = d
        closable = np.asarray(d.res_closable, dtype=bool)
        self.rows = np.flatnonzero(closable)
        self.H = np.asarray(d.capacity, dtype=float)[self.rows]
        self.E = np.asarray(d.res_fixed, dtype=float)[self.rows]
        self.always = float(np.sum(np.asarray(d.res_fixed, dtype=float)[~closable]))

    @property
    def n_choices(self) -> int:
        return int(self.rows.size)

    @property
    def n_vars(self) -> int:
        return int(self.rows.size)

    def respond(self, lam: np.ndarray) -> Response:
        m = len(self.d.resources)
        gain = lam[self.rows] * self.H - self.E
        w = gain > 0
        use = np.zeros(m)
        use[self.rows] = -self.H * w
        value = -self.always + float(np.sum(np.maximum(gain, 0.0)))
        return Response(value, use, w, gain, np.zeros(self.rows.size), -self.always, w.astype(float))

    def capacity_of(self, choice: np.ndarray) -> np.ndarray:
        """(m,) capacity the open resources add to their rows."""
        out = np.zeros(len(self.d.resources))
        w = np.asarray(choice, dtype=bool)
        out[self.rows[w]] = self.H[w]
        return out

    def continuous(self, choice: np.ndarray) -> Columns:
        e = np.zeros(0)
        i = np.zeros(0, dtype=np.int64)
        w = np.asarray(choice, dtype=bool)
        return Columns(c=e, q=e, lo=e, hi=e, rows=i, cols=i, amounts=e,
                       constant=-self.always - float(np.sum(self.E[w])), capacity=self.capacity_of(w))

    def profit(self, x: np.ndarray, choice: np.ndarray) -> float:
        return -self.always - float(np.sum(self.E[np.asarray(choice, dtype=bool)]))

    def feasible(self, choice: np.ndarray) -> bool:
        return True

    # --- the outer-approximation MILP -------------------------------------------------
    def add_to_milp(self, milp: MilpBuilder) -> None:
        k = self.rows.size
        milp.offset -= self.always
        self.col = milp.columns(-self.E, np.zeros(k), np.ones(k), integer=True) if k else np.zeros(0, np.int64)
        if k:
            milp.use(self.rows, self.col, -self.H)

    def milp_choice(self, milp: MilpBuilder, x: np.ndarray) -> np.ndarray:
        return x[self.col] > 0.5 if self.rows.size else np.zeros(0, dtype=bool)

    def milp_start(self, milp: MilpBuilder, values: np.ndarray, choice: np.ndarray) -> dict[int, float]:
        return dict(zip(self.col.tolist(), np.asarray(choice, dtype=float).tolist()))

    def milp_fix(self, milp: MilpBuilder, which: np.ndarray, on: np.ndarray) -> None:
        milp.fix(self.col[np.asarray(which, dtype=np.int64)], np.asarray(on, dtype=float))
