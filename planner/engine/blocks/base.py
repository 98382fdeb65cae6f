r"""The block interface: what the engine asks of each family of blocks.

The planner's problem is a few shared rows (the capacity of each resource)
over many independent blocks (a product, a capacity option; later a product
over the months of a quarter, or a group of products under one fixed cost).
With the shared rows priced by multipliers λ ≥ 0 (currency per resource
unit), the problem falls apart block by block:

.. math::

    L(\lambda) = \lambda^\top H + \sum_{\text{blocks } k} \max_{x_k \in X_k}
                 \big[f_k(x_k) - \lambda^\top u_k(x_k)\big]

where f_k is the block's profit (concave) and u_k its use of the shared rows.
L(λ) is an upper bound on the best profit for every λ ≥ 0 (weak duality).

A family of blocks (:class:`Blocks`) answers, for all its blocks at once:

- :meth:`Blocks.respond`: each block's best response at λ, exactly, and the
  value of each of its on/off choices forced either way (valid bounds with a
  choice fixed: Lagrangian fixing and slate enumeration use them); with a
  choice given, the response with every choice forced to it (the dual of a
  fixed-choice QP, :mod:`planner.engine.slatedual`);
- :meth:`Blocks.curvature`: the second derivative in λ of the family's priced
  value with its choices forced (m × m, positive semidefinite; zero where the
  value is piecewise linear), for Newton steps on fixed-choice duals;
- :meth:`Blocks.choice_terms`: for a few choices, each one's priced value when
  on, its use of the shared rows and its curvature, as dense arrays (the
  branch-and-bound's node duals, :mod:`planner.engine.branch`, evaluate these
  many times per node, never the whole family);
- :meth:`Blocks.continuous`: with its on/off choices fixed, its columns of the
  continuous QP (linear and diagonal quadratic profit, bounds, use of the shared
  rows) and the constant and capacity it contributes;
- :meth:`Blocks.add_to_milp`, :meth:`Blocks.cuts`, :meth:`Blocks.milp_start`:
  its columns and rows in the outer-approximation MILP, the tangent cuts where
  the MILP over-estimates its profit, and a MIP start from a known plan.

The Lagrangian (:mod:`planner.engine.dual`), the slate QP
(:mod:`planner.engine.slateqp`), the cut MILP (:mod:`planner.engine.cutmilp`)
and the slate enumeration see blocks only through this interface, so a new
kind of block is a new family here and nothing else.  Amounts are in the
engine's (scaled) units; choices are boolean arrays, one entry per on/off
choice of the family, in the family's own order.
"""

from __future__ import annotations

from abc import ABC, abstractmethod
from dataclasses import dataclass, field

import numpy as np


@dataclass
class Response:
    """One family's best response at multipliers λ (currency; the shared rows' units)."""

    value: float  # Σ over the family's blocks of their best priced profit
    use: np.ndarray  # (m,) use of the shared rows at the best response (negative: capacity added)
    choice: np.ndarray  # (K,) bool, the best on/off choice of each choice
    on: np.ndarray  # (K,) the priced profit of each choice's blocks when forced on (−inf: impossible)
    off: np.ndarray  # (K,) ... when forced off (−inf: impossible)
    fixed: float  # priced profit of the family's blocks that have no choice (so value = fixed + Σ max(on, off))
    x: np.ndarray  # the family's variables at the best response (e.g. volumes)
    sep: tuple | None = None  # (value, on, off) before a coupling (groups) made them joint; None: the same


@dataclass
class Terms:
    """Some choices' blocks when on, at multipliers λ (one row per choice; the shared rows' units).

    The branch-and-bound needs blocks whose off side is empty (no value, no
    use: products and options are), so a choice's part of a node dual is
    ``on`` when forced on, 0 when forced off and max(on, 0) when open.
    Near λ, ``on`` is a function of λ with gradient −``use`` and Hessian
    ``weight``·gᵀg with g = ``direction`` (rank one per choice, ≥ 0).
    """

    on: np.ndarray  # (k,) priced profit when on (−inf: the choice cannot be on)
    use: np.ndarray  # (k, m) use of the shared rows when on
    weight: np.ndarray  # (k,) curvature weight, ≥ 0
    direction: np.ndarray  # (k, m)


@dataclass
class Columns:
    """A family's part of the continuous QP once its choices are fixed (maximise).

    Profit c·x − q·x² + constant over lo ≤ x ≤ hi; the columns use the shared
    rows by (row, column, amount) triplets; ``capacity`` is added to the rows'
    right-hand sides by the fixed choices themselves (e.g. an option taken).
    """

    c: np.ndarray
    q: np.ndarray  # ≥ 0, so the profit is concave
    lo: np.ndarray
    hi: np.ndarray
    rows: np.ndarray  # int, shared row of each usage entry
    cols: np.ndarray  # int, local column of each usage entry
    amounts: np.ndarray
    constant: float = 0.0
    capacity: np.ndarray | None = None  # (m,) added to the shared rows, or None
    index: np.ndarray = field(default_factory=lambda: np.zeros(0, dtype=np.int64))  # the family's variable of each column
    #: Rows of the family's own (not priced by λ): (count, row_of, local column, amount, upper), each
    #: Σ amount·x ≤ upper; None if it has none (e.g. the stock rows of products over periods).
    local: tuple | None = None

    @property
    def size(self) -> int:
        return int(self.c.size)


class Blocks(ABC):
    """A family of blocks priced by the shared rows (see the module docstring)."""

    #: Short name, used in messages.
    name: str = "blocks"
    #: True where the family answers ``respond(lam, choice)`` with every choice forced, ``curvature``
    #: and ``choice_terms`` (what the flips and the branch-and-bound need); a family that does not is
    #: solved through the cut MILP only.
    forced: bool = False

    @property
    @abstractmethod
    def n_choices(self) -> int:
        """Number of on/off choices in the family."""

    @property
    @abstractmethod
    def n_vars(self) -> int:
        """Number of the family's variables (the length of ``Response.x`` and of a solution's values)."""

    @abstractmethod
    def respond(self, lam: np.ndarray, choice: np.ndarray | None = None) -> Response:
        """Every block's exact best response at λ ≥ 0; with ``choice`` ((K,) bool), every choice forced to it.

        ``on`` and ``off`` are the same either way; ``value``, ``use``, ``choice``
        and ``x`` follow the forced choice where one is given.
        """

    def curvature(self, lam: np.ndarray, choice: np.ndarray) -> np.ndarray:
        """(m × m) second derivative in λ of the family's priced value with ``choice`` forced (default: 0)."""
        m = int(np.asarray(lam).size)
        return np.zeros((m, m))

    def choice_terms(self, lam: np.ndarray, which: np.ndarray) -> Terms | None:
        """:class:`Terms` of the choices ``which`` (indices) at λ, or None where the family cannot give them."""
        return None

    @abstractmethod
    def continuous(self, choice: np.ndarray) -> Columns:
        """The family's QP columns with its choices fixed (``choice``: (K,) bool)."""

    @abstractmethod
    def profit(self, x: np.ndarray, choice: np.ndarray) -> float:
        """The family's true profit at its variables ``x`` and ``choice`` (currency)."""

    @abstractmethod
    def feasible(self, choice: np.ndarray) -> bool:
        """False where a choice cannot hold on its own (e.g. a minimum run above the product's bound)."""

    # --- the outer-approximation MILP -------------------------------------------------
    @abstractmethod
    def add_to_milp(self, milp: "MilpBuilder") -> None:
        """Add the family's columns and rows (and its use of the shared rows) to ``milp``."""

    def cuts(self, milp: "MilpBuilder", x: np.ndarray) -> int:
        """Add cuts where the MILP's solution ``x`` over-estimates the family's profit; how many."""
        return 0

    def cuts_at(self, milp: "MilpBuilder", values: np.ndarray, choice: np.ndarray) -> int:
        """Add cuts at a plan's own values (outer approximation at its optimum); how many."""
        return 0

    @abstractmethod
    def milp_choice(self, milp: "MilpBuilder", x: np.ndarray) -> np.ndarray:
        """The family's choice in a MILP solution ``x`` (all columns)."""

    @abstractmethod
    def milp_start(self, milp: "MilpBuilder", values: np.ndarray, choice: np.ndarray) -> dict[int, float]:
        """Column values of a MIP start at a plan's own values and choice."""

    @abstractmethod
    def milp_fix(self, milp: "MilpBuilder", which: np.ndarray, on: np.ndarray) -> None:
        """Fix the choices ``which`` (indices) on or off in the MILP."""


class MilpBuilder:
    """Columns and rows of the outer-approximation MILP, gathered from every family (maximise).

    The first ``m`` rows are the shared capacity rows ≤ H; families add their
    use of them with :meth:`use` and their own columns and rows with
    :meth:`columns` and :meth:`rows`.  Each family keeps the column indices it
    was given; after :meth:`planner.engine.cutmilp.CutMilp.build` more rows
    (cuts) go through :meth:`rows` as well.
    """

    def __init__(self, capacity: np.ndarray) -> None:
        self.m = int(capacity.size)
        self.capacity = np.asarray(capacity, dtype=float)
        self.cost: list[np.ndarray] = []
        self.lo: list[np.ndarray] = []
        self.hi: list[np.ndarray] = []
        self.integer: list[np.ndarray] = []
        self.ncol = 0
        self.offset = 0.0
        self._use: list[tuple[np.ndarray, np.ndarray, np.ndarray]] = []
        self._rows: list[tuple[np.ndarray, np.ndarray, np.ndarray, np.ndarray, np.ndarray]] = []
        self.nrow = self.m
        self.sink = None  # after the build: a function that adds rows to the live model
        self.fixer = None  # after the build: a function that changes column bounds in the live model
        self._fixed: dict[int, float] = {}

    def columns(self, cost: np.ndarray, lo: np.ndarray, hi: np.ndarray, integer: bool = False) -> np.ndarray:
        """Add columns; returns their indices."""
        k = int(np.asarray(cost).size)
        idx = np.arange(self.ncol, self.ncol + k, dtype=np.int64)
        self.cost.append(np.asarray(cost, float))
        self.lo.append(np.asarray(lo, float))
        self.hi.append(np.asarray(hi, float))
        self.integer.append(np.full(k, 1 if integer else 0, dtype=np.int32))
        self.ncol += k
        return idx

    def use(self, rows: np.ndarray, cols: np.ndarray, amounts: np.ndarray) -> None:
        """Entries of the shared capacity rows (row < m, global column, amount)."""
        self._use.append((np.asarray(rows, np.int64), np.asarray(cols, np.int64), np.asarray(amounts, float)))

    def rows(self, count: int, row_of: np.ndarray, cols: np.ndarray, amounts: np.ndarray,
             lower: np.ndarray, upper: np.ndarray) -> None:
        """Add ``count`` rows lower ≤ Σ amount·x ≤ upper; ``row_of`` numbers each entry's row 0..count−1."""
        if count == 0:
            return
        row_of = np.asarray(row_of, np.int64)
        if self.sink is not None:
            self.sink(count, row_of, np.asarray(cols, np.int64), np.asarray(amounts, float),
                      np.asarray(lower, float), np.asarray(upper, float))
            return
        self._rows.append((row_of + self.nrow, np.asarray(cols, np.int64), np.asarray(amounts, float),
                           np.asarray(lower, float), np.asarray(upper, float)))
        self.nrow += count

    def fix(self, cols: np.ndarray, values: np.ndarray) -> None:
        """Fix columns to values (bounds lo = hi = value)."""
        cols = np.asarray(cols, np.int64)
        values = np.asarray(values, float)
        if self.fixer is not None:
            self.fixer(cols, values)
        else:
            self._fixed.update(zip(cols.tolist(), values.tolist()))

    def arrays(self):
        """(cost, lo, hi, integrality, row lower, row upper, rows, cols, vals) of the model as gathered."""
        cost, lo, hi = np.concatenate(self.cost), np.concatenate(self.lo), np.concatenate(self.hi)
        integer = np.concatenate(self.integer)
        for c, v in self._fixed.items():
            lo[c] = hi[c] = v
        rows = [u[0] for u in self._use] + [r[0] for r in self._rows]
        cols = [u[1] for u in self._use] + [r[1] for r in self._rows]
        vals = [u[2] for u in self._use] + [r[2] for r in self._rows]
        rlo = [np.full(self.m, -np.inf)] + [r[3] for r in self._rows]
        rhi = [self.capacity] + [r[4] for r in self._rows]
        cat = (lambda xs, dt: np.concatenate(xs).astype(dt) if xs else np.zeros(0, dt))
        return (cost, lo, hi, integer, np.concatenate(rlo), np.concatenate(rhi), cat(rows, np.int64),
                cat(cols, np.int64), cat(vals, float))
