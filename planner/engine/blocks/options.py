r"""Capacity options as blocks: each adds to the shared rows at a cost.

Option o at scale s_o adds s_o·A_ro to the capacity of each row r for a cost
c_o·s_o: s_o ∈ {0, 1} for an all-or-nothing option (a shift: an on/off
choice), s_o ∈ [0, 1] for one usable in part (overtime, premium material: a
continuous column).  Its use of the shared rows is −A_o·s_o.

At multipliers λ its priced profit (λ·A_o − c_o)·s_o is linear in s, so the
best response is s = 1 where λ·A_o > c_o and 0 otherwise, for both kinds.
With the choices fixed, a taken all-or-nothing option adds its amounts to the
rows and its cost to the constant; an option usable in part is a QP column
with linear profit −c_o over 0 ≤ s ≤ 1.  In the MILP every option is a column
(integer for an all-or-nothing one); its terms are linear, so it needs no cuts.
"""

from __future__ import annotations

import numpy as np

from models.data import MixData
from planner.engine.blocks.base import Blocks, Columns, MilpBuilder, Response, Terms


class OptionBlocks(Blocks):
    """The capacity options of ``d``; its choices are the all-or-nothing ones."""

    name = "options"
    forced = True

    def __init__(self, d: MixData) -> None:
        self.d = d
        self.A = np.asarray(d.opt_amount, dtype=float)  # (k × m)
        self.cost = np.asarray(d.opt_cost, dtype=float)
        self.whole = np.flatnonzero(d.opt_whole)
        self.part = np.flatnonzero(~np.asarray(d.opt_whole, dtype=bool))

    @property
    def n_choices(self) -> int:
        return int(self.whole.size)

    @property
    def n_vars(self) -> int:
        return int(self.cost.size)

    def respond(self, lam: np.ndarray, choice: np.ndarray | None = None) -> Response:
        m = len(self.d.resources)
        if not self.cost.size:
            e = np.zeros(0)
            return Response(0.0, np.zeros(m), np.zeros(0, dtype=bool), e, e, 0.0, e)
        gain = self.A @ lam - self.cost
        s = (gain > 0).astype(float)
        on, off = gain[self.whole], np.zeros(self.whole.size)
        taken = on > off if choice is None else np.asarray(choice, dtype=bool)
        s[self.whole] = taken
        fixed = float(np.sum(np.maximum(gain[self.part], 0.0)))
        value = fixed + float(np.sum(np.where(taken, on, off)))
        return Response(value, -(s @ self.A), taken, on, off, fixed, s)

    def choice_terms(self, lam: np.ndarray, which: np.ndarray) -> Terms | None:
        k = self.whole[np.asarray(which, dtype=np.int64)]
        A = self.A[k]
        return Terms(A @ lam - self.cost[k], -A, np.zeros(k.size), A)

    def continuous(self, choice: np.ndarray) -> Columns:
        m = len(self.d.resources)
        taken = self.whole[np.asarray(choice, dtype=bool)]
        p = self.part
        r, k = np.nonzero(self.A[p].T) if p.size else (np.zeros(0, np.int64), np.zeros(0, np.int64))
        return Columns(c=-self.cost[p], q=np.zeros(p.size), lo=np.zeros(p.size), hi=np.ones(p.size),
                       rows=r.astype(np.int64), cols=k.astype(np.int64), amounts=-self.A[p][k, r],
                       constant=-float(np.sum(self.cost[taken])),
                       capacity=self.A[taken].sum(axis=0) if taken.size else np.zeros(m), index=p)

    def profit(self, x: np.ndarray, choice: np.ndarray) -> float:
        return -float(self.cost @ self.scale_of(x, choice)) if self.cost.size else 0.0

    def scale_of(self, x: np.ndarray, choice: np.ndarray) -> np.ndarray:
        """Each option's scale 0..1: the choice for all-or-nothing ones, ``x`` for the others."""
        s = np.clip(np.asarray(x, dtype=float), 0.0, 1.0).copy()
        s[self.whole] = np.asarray(choice, dtype=float)
        return s

    def feasible(self, choice: np.ndarray) -> bool:
        return True

    # --- the outer-approximation MILP -------------------------------------------------
    def add_to_milp(self, milp: MilpBuilder) -> None:
        k = self.cost.size
        self.col = np.zeros(k, dtype=np.int64)
        if not k:
            return
        self.col[self.whole] = milp.columns(-self.cost[self.whole], np.zeros(self.whole.size),
                                            np.ones(self.whole.size), integer=True)
        self.col[self.part] = milp.columns(-self.cost[self.part], np.zeros(self.part.size), np.ones(self.part.size))
        o, r = np.nonzero(self.A)
        milp.use(r, self.col[o], -self.A[o, r])

    def milp_choice(self, milp: MilpBuilder, x: np.ndarray) -> np.ndarray:
        return x[self.col[self.whole]] > 0.5 if self.whole.size else np.zeros(0, dtype=bool)

    def milp_start(self, milp: MilpBuilder, values: np.ndarray, choice: np.ndarray) -> dict[int, float]:
        return dict(zip(self.col.tolist(), self.scale_of(values, choice).tolist()))

    def milp_fix(self, milp: MilpBuilder, which: np.ndarray, on: np.ndarray) -> None:
        milp.fix(self.col[self.whole[np.asarray(which, dtype=np.int64)]], np.asarray(on, dtype=float))
