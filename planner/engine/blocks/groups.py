r"""Product groups as blocks: a shared fixed cost paid if any member runs.

Group g (fixed cost G_g ≥ 0, currency) has an on/off choice z_g; each member
i runs only if every group it belongs to is on: y_i ≤ z_g.  Its priced profit
on its own is −G_g·z_g (it uses no shared row).

The links couple the groups' choices with the products' choices, so the
family cannot answer at λ on its own: :meth:`GroupBlocks.couple` takes the
products' own answer (each member's priced profit on_i and off_i = 0 forced
either way, from :mod:`.products`) and answers jointly, per *component* (the
groups linked through shared members; groups sharing no product are each a
component of one group).  For a component with groups C and members P_C and
an open set S ⊆ C (containing every group of a product that must run):

.. math::  V_S = \sum_{i \in P_C,\ \mathrm{groups}(i) \subseteq S} \max(on_i, off_i)
                 + \sum_{\text{other } i \in P_C} off_i - \sum_{g \in S} G_g,

and the component's exact priced profit is max_S V_S, found by listing every
S (2^|C| sets, components of up to ``EXACT_UP_TO`` groups).  The value of
each choice forced either way is the best V_S under that restriction (a
member forced on: S ⊇ groups(i) and on_i in place of its best; forced off:
off_i in place of it; a group on or off: S ∋ g or S ∌ g), so Lagrangian
fixing stays exact.  A larger component is answered by the relaxation that
drops its links (each member at its best, every group off): a valid, weaker
bound; the cut MILP, which has every link as a row, closes the gap.

The slate enumeration needs bounds affine in the choice: it uses the
separable values (members' own on/off, −G_g / 0 for the groups; exact for a
slate that respects the links) and refuses slates that break a link
(:meth:`GroupBlocks.breaks`).
"""

from __future__ import annotations

import numpy as np

from models.data import MixData
from planner.engine.blocks.base import Blocks, Columns, MilpBuilder, Response
from planner.engine.highs import INF

#: Largest component (groups linked through shared products) answered exactly by listing its open sets.
EXACT_UP_TO = 10


class GroupBlocks(Blocks):
    """The product groups of ``d``; one on/off choice per group, linked to ``products`` (the products' family)."""

    name = "groups"

    def __init__(self, d: MixData, products: Blocks) -> None:
        self.d = d
        self.products = products
        free = products.free
        self.G = np.asarray(d.grp_cost, dtype=float)
        self.M = d.group_members()  # (groups × products)
        self.choice_at = np.full(d.n, -1, dtype=np.int64)  # the products' choice index of each product
        self.choice_at[free] = np.arange(free.size)
        fixed_on = ~d.can_stop  # products without a choice always run
        self.required = (self.M & fixed_on[None, :]).any(axis=1)  # groups that must be on
        self.components = self._components()

    def _components(self) -> list[tuple[np.ndarray, np.ndarray]]:
        """(groups, member products) of each component of groups linked through shared members."""
        g = self.G.size
        parent = np.arange(g)

        def root(k: int) -> int:
            while parent[k] != k:
                parent[k] = parent[parent[k]]
                k = parent[k]
            return int(k)

        for i in np.flatnonzero(self.M.sum(axis=0) > 1):
            gs = np.flatnonzero(self.M[:, i])
            for k in gs[1:]:
                parent[root(int(k))] = root(int(gs[0]))
        roots = np.array([root(k) for k in range(g)], dtype=np.int64)
        out = []
        for r in np.unique(roots):
            gs = np.flatnonzero(roots == r)
            out.append((gs, np.flatnonzero(self.M[gs].any(axis=0))))
        return out

    @property
    def n_choices(self) -> int:
        return int(self.G.size)

    @property
    def n_vars(self) -> int:
        return 0

    def respond(self, lam: np.ndarray) -> Response:
        """The separable answer (every group off, −G_g if forced on); :meth:`couple` makes it joint."""
        g = self.G.size
        return Response(0.0, np.zeros(len(self.d.resources)), np.zeros(g, dtype=bool), -self.G,
                        np.where(self.required, -np.inf, 0.0), 0.0, np.zeros(0))

    def couple(self, prod: Response, grp: Response) -> tuple[Response, Response]:
        """The joint answer of products and groups (see the module docstring); the inputs are kept as ``sep``."""
        on, off = prod.on.copy(), prod.off.copy()
        choice = prod.choice.copy()
        g_on, g_off = grp.on.copy(), grp.off.copy()
        g_choice = np.zeros(self.G.size, dtype=bool)
        delta = 0.0  # change of the products' value
        for gs, members in self.components:
            ci = self.choice_at[members]
            free = members[ci >= 0]
            ci = ci[ci >= 0]
            if gs.size > EXACT_UP_TO:
                # the relaxation: links dropped; the choice repaired so that its slate is feasible
                g_choice[gs] = self.required[gs] | (self.M[np.ix_(gs, free)] & choice[ci][None, :]).any(axis=1)
                continue
            k = gs.size
            S = ((np.arange(2 ** k)[:, None] >> np.arange(k)) & 1).astype(bool)  # open sets
            S = S[~(self.required[gs][None, :] & ~S).any(axis=1)]
            need = self.M[np.ix_(gs, free)]  # (k × members): group j needed by member
            allowed = ~(need[None, :, :] & ~S[:, :, None]).any(axis=1)  # (sets × members)
            best = np.maximum(prod.on[ci], prod.off[ci])
            drop = best - prod.off[ci]
            V = allowed @ drop + float(np.sum(prod.off[ci])) - S @ self.G[gs]
            top = int(np.argmax(V))
            vmax = float(V[top])
            on[ci] = np.max(np.where(allowed, V[:, None], -np.inf), axis=0) - best + prod.on[ci]
            off[ci] = np.max(V[:, None] - allowed * drop[None, :], axis=0)
            choice[ci] = allowed[top] & (prod.on[ci] > prod.off[ci])
            g_on[gs] = np.max(np.where(S, V[:, None], -np.inf), axis=0)
            g_off[gs] = np.max(np.where(~S, V[:, None], -np.inf), axis=0)
            g_choice[gs] = S[top]
            delta += vmax - float(np.sum(best))
        D = prod.x.copy()
        stopped = self.choice_at >= 0
        stopped[stopped] = ~choice[self.choice_at[stopped]]
        D[stopped] = 0.0
        use = self.d.used(D) if self.d.use_amt.size else prod.use
        p2 = Response(prod.value + delta, use, choice, on, off, prod.value + delta - float(np.sum(np.maximum(on, off))),
                      D, sep=(prod.value, prod.on, prod.off))
        g2 = Response(0.0, grp.use, g_choice, g_on, g_off, -float(np.sum(np.maximum(g_on, g_off))), grp.x,
                      sep=(grp.value, grp.on, grp.off))
        return p2, g2

    def breaks(self, running: np.ndarray, on: np.ndarray) -> np.ndarray:
        """Per row: does a (rows × n) running mask with (rows × groups) group choice break a link y_i ≤ z_g?"""
        running = np.atleast_2d(running)
        on = np.atleast_2d(on)
        if not self.G.size:
            return np.zeros(running.shape[0], dtype=bool)
        need = (running.astype(np.int64) @ self.M.T.astype(np.int64)) > 0  # (rows × groups)
        return (need & ~on).any(axis=1)

    def needed(self, running: np.ndarray) -> np.ndarray:
        """(groups,) bool: the groups a running mask needs on (some member runs)."""
        return (self.M & np.asarray(running, dtype=bool)[None, :]).any(axis=1) if self.G.size else np.zeros(0, bool)

    def continuous(self, choice: np.ndarray) -> Columns:
        e = np.zeros(0)
        i = np.zeros(0, dtype=np.int64)
        return Columns(c=e, q=e, lo=e, hi=e, rows=i, cols=i, amounts=e,
                       constant=-float(np.sum(self.G[np.asarray(choice, dtype=bool)])))

    def profit(self, x: np.ndarray, choice: np.ndarray) -> float:
        return -float(np.sum(self.G[np.asarray(choice, dtype=bool)]))

    def feasible(self, choice: np.ndarray) -> bool:
        return bool(np.all(np.asarray(choice, dtype=bool)[self.required]))

    # --- the outer-approximation MILP -------------------------------------------------
    def add_to_milp(self, milp: MilpBuilder) -> None:
        """After the products' family (its ``ycol``: the y column of each product, −1 where no choice)."""
        self.ycol = self.products.ycol
        g = self.G.size
        self.col = milp.columns(-self.G, self.required.astype(float), np.ones(g), integer=True) if g else \
            np.zeros(0, dtype=np.int64)
        gi, pi = np.nonzero(self.M)
        has = self.ycol[pi] >= 0
        gi, pi = gi[has], pi[has]
        k = gi.size
        # y_i − z_g ≤ 0
        milp.rows(k, np.r_[np.arange(k), np.arange(k)], np.r_[self.ycol[pi], self.col[gi]],
                  np.r_[np.ones(k), -np.ones(k)], np.full(k, -INF), np.zeros(k))

    def milp_choice(self, milp: MilpBuilder, x: np.ndarray) -> np.ndarray:
        return x[self.col] > 0.5 if self.G.size else np.zeros(0, dtype=bool)

    def milp_start(self, milp: MilpBuilder, values: np.ndarray, choice: np.ndarray) -> dict[int, float]:
        return dict(zip(self.col.tolist(), np.asarray(choice, dtype=float).tolist()))

    def milp_fix(self, milp: MilpBuilder, which: np.ndarray, on: np.ndarray) -> None:
        milp.fix(self.col[np.asarray(which, dtype=np.int64)], np.asarray(on, dtype=float))
