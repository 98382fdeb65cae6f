"""One (scaled) mix problem as families of blocks over the shared capacity rows.

A *choice* is one boolean array over every on/off choice of every family, the
families' parts laid end to end (products with a real on/off choice first,
then the all-or-nothing options); :meth:`Problem.split` and
:meth:`Problem.join` convert.  A choice fixes the mixed-integer problem to a
convex QP (:mod:`planner.engine.slateqp`).
"""

from __future__ import annotations

import numpy as np

from models.data import MixData
from planner.engine.blocks import Blocks, OptionBlocks, ProductBlocks, Response
from planner.engine.blocks.months import MonthBlocks


class Problem:
    """The families of blocks of ``d`` (products, options) and the shared rows' capacity."""

    def __init__(self, d: MixData) -> None:
        self.d = d
        # products over several periods are one block each over the periods; else one block per product
        self.products = ProductBlocks(d) if d.periods is None else MonthBlocks(d.periods)
        self.options = OptionBlocks(d)
        self.families: list[Blocks] = [self.products, self.options]
        self.capacity = np.asarray(d.capacity, dtype=float)
        self.m = int(self.capacity.size)
        sizes = [f.n_choices for f in self.families]
        self.bounds = np.r_[0, np.cumsum(sizes)].astype(int)

    @property
    def forced(self) -> bool:
        """True where every family gives forced responses, curvature and choice terms (flips, branching)."""
        return all(f.forced for f in self.families)

    @property
    def n_choices(self) -> int:
        return int(self.bounds[-1])

    def split(self, choice: np.ndarray) -> list[np.ndarray]:
        """The choice as one array per family."""
        z = np.asarray(choice, dtype=bool)
        return [z[a:b] for a, b in zip(self.bounds[:-1], self.bounds[1:])]

    def join(self, parts: list[np.ndarray]) -> np.ndarray:
        """One choice array from the families' parts."""
        return np.concatenate([np.asarray(p, dtype=bool) for p in parts]) if parts else np.zeros(0, dtype=bool)

    def choice(self, running: np.ndarray, taken: np.ndarray | None = None) -> np.ndarray:
        """The choice of a (n,) running mask and a (k,) option-taken mask (whole options; default none)."""
        t = np.zeros(self.options.cost.size, dtype=bool) if taken is None else np.asarray(taken, dtype=bool)
        return self.join([self.products.choice_of(running), t[self.options.whole]])

    def running(self, choice: np.ndarray) -> np.ndarray:
        """(n,) bool: the products that run under ``choice``."""
        return self.products.running(self.split(choice)[0])

    @staticmethod
    def key(choice: np.ndarray) -> bytes:
        """A hashable key of a choice."""
        z = np.asarray(choice, dtype=bool)
        return np.packbits(z).tobytes() + z.size.to_bytes(4, "little")

    def respond(self, lam: np.ndarray, choice: np.ndarray | None = None) -> list[Response]:
        """Every family's best response at λ (with ``choice``: every choice forced to it)."""
        if choice is None:
            return [f.respond(lam) for f in self.families]
        return [f.respond(lam, z) for f, z in zip(self.families, self.split(choice))]

    def curvature(self, lam: np.ndarray, choice: np.ndarray) -> np.ndarray:
        """(m × m) second derivative in λ of the priced value with ``choice`` forced (all families)."""
        return sum((f.curvature(lam, z) for f, z in zip(self.families, self.split(choice))), np.zeros((self.m, self.m)))

    def family_of(self, which: np.ndarray) -> list[tuple[int, np.ndarray, np.ndarray]]:
        """(family index, positions in ``which``, the family's own choice indices) per family ``which`` touches."""
        which = np.asarray(which, dtype=np.int64)
        out = []
        for k in range(len(self.families)):
            a, b = self.bounds[k], self.bounds[k + 1]
            pos = np.flatnonzero((which >= a) & (which < b))
            if pos.size:
                out.append((k, pos, which[pos] - a))
        return out

    def feasible(self, choice: np.ndarray) -> bool:
        """False where a family's part of ``choice`` cannot hold on its own."""
        return all(f.feasible(z) for f, z in zip(self.families, self.split(choice)))

    def profit(self, values: list[np.ndarray], choice: np.ndarray) -> float:
        """True profit of the families' values under ``choice`` (currency, scaled)."""
        return float(sum(f.profit(x, z) for f, x, z in zip(self.families, values, self.split(choice))))
