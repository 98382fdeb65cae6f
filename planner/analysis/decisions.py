r"""What each product's run/stop decision is worth: re-solves of the scenario's engine, filled into the Plan.

For product k of a plan with profit P (currency, plant-wide fixed cost included), certified to
the absolute gap g = bound − P:

- ``cost_of_reversal`` = P − P_k, where P_k is the best profit with k's decision forced the
  other way (``Engine.solve(stop=…)`` for a running product, ``run=…`` for a stopped one), every
  other decision — products, groups, closable resources, options — re-optimised.  Forced to run,
  a product pays its fixed cost (and its groups') and the re-solve picks its volume, which may be
  0 where every unit would lose money: its cost of reversal is then at most those fixed costs.  The exact
  value is ≥ 0; the re-solve is certified to the same gap, so a computed value in (−g − g_k, 0)
  is rounding of the certificate and is reported as 0 (g_k: the forced solve's absolute gap).
  None where the decision cannot be reversed: a must_run product or a committed min_volume
  (``forced``), a product with no on/off choice (no fixed cost, no minimum run, no group with a
  fixed cost: it simply makes what pays), or a reversal that no plan can meet (infeasible).
- ``switch_intercept`` (currency/unit): the price intercept a_k at which k's decision flips, every
  other number held.  The optimal volume of k is non-decreasing in a_k (the objective has
  increasing differences in (a_k, D_k) and the limits do not depend on a_k), so the decision
  flips once, and bisection on re-solves finds it.  Range searched: a running product from its
  intercept down to its unit cost v_k (below v_k no unit pays); a stopped one from its intercept
  up to the cap a_max = v_k + Σ_r h_rk·λ_r + 2·√(4·b_k·F̂_k) (b_k > 0) or v_k + Σ_r h_rk·λ_r + 4·F̂_k/U_k
  (b_k = 0), where λ are the plan's shadow prices and F̂_k the fixed costs a start would bring
  (its own, its groups', the closable resources it uses): the intercept at which its standalone best
  contribution, after paying the plan's prices for the capacity it uses, covers F̂_k four times
  over (at least 1.5 × a_k).  None if the decision does not flip in that range.  Precision: the
  reported value is the midpoint of a bracket [no flip, flip] no wider than ``PRECISION`` × |a_k|
  (or 1 currency unit, whichever is larger), so it is within half that of the flip.
- ``contribution_per_bottleneck_unit`` (currency per resource unit): (price − v_k) / h_bk with b the
  plan's bottleneck (``models.economics.bottleneck``: the binding resource whose extra 1 % is worth
  most); the price is the plan's price where k sells, its intercept (the first unit's price)
  where it does not.  None where k uses none of the bottleneck or nothing binds.

Budget: every product's cost of reversal first, then the switch intercepts, in scenario order,
until ``budget`` seconds (or the command's deadline) pass; a product left incomplete gets
``decision_checked: false``, None for what was not computed (a cost of reversal already computed
is kept) and a ``decision_note`` saying so, and the plan a warning.
"""

from __future__ import annotations

import math
import time
from typing import Any

import numpy as np

from models.economics import bottleneck
from planner.api import engine_for
from planner.errors import InfeasibleError, PlannerError
from planner.output.plan import Plan
from planner.scenario.arrays import mix_data
from planner.scenario.schema import Scenario

#: Seconds the default decision analysis may spend, or ``AUTO_TIMES`` the plan's solve if longer (each
#: cost of reversal is one re-solve of about the plan's time, each switch intercept about eight).
AUTO_BUDGET = 5.0
AUTO_TIMES = 5.0
#: Bracket width of the switch intercept, as a fraction of |a_k| (1 currency unit at least).
PRECISION = 0.005
#: A decision is flagged marginal where its cost of reversal is below this share of |profit| (or the gap).
MARGINAL = 0.01


def decision_budget(p: Plan) -> float:
    """The default decision analysis's budget for plan ``p`` (seconds)."""
    return max(AUTO_BUDGET, AUTO_TIMES * float(p.solver.get("seconds", 0.0) or 0.0))


def unchecked(note: str) -> dict[str, Any]:
    """A product's decision entry left uncomputed, with the reason."""
    return {"cost_of_reversal": None, "switch_intercept": None, "contribution_per_bottleneck_unit": None,
            "decision_checked": False, "decision_note": note}


def add_decision_analysis(p: Plan, s: Scenario, rel_gap: float = 1e-7, budget: float | None = None,
                          deadline: float | None = None, limit: int | None = None) -> Plan:
    """Fill each product's ``decision`` (see the module docstring) and ``p.extras['decisions']``; returns ``p``.

    ``budget``: seconds (None: no limit); ``deadline``: a ``time.perf_counter()`` value, the end of
    everything; ``limit``: most products analysed (None: all).
    """
    if p.status != "optimal":
        for x in p.products:
            x.decision = unchecked("the plan is not certified")
        p.warnings.append("decision analysis not done: the plan stopped at the time limit")
        return p
    if s.periods is not None:  # forced run/stop re-solves over periods are not checked yet: never shown wrong
        for x in p.products:
            x.decision = unchecked("not computed yet for plans over periods")
        p.warnings.append("product decisions (cost of reversal, switch intercept) are not computed yet for plans "
                          "over periods")
        return p
    if limit is not None and len(p.products) > limit:
        for x in p.products:
            x.decision = unchecked(f"more than {limit} products")
        p.warnings.append(f"decision analysis skipped for {len(p.products):,} products (each needs several "
                          "re-solves): add --decisions to compute them")
        return p
    t0 = time.perf_counter()
    end = None if budget is None else t0 + budget
    if deadline is not None:
        end = deadline if end is None else min(end, deadline)
    try:
        return _analyse(p, s, rel_gap, end, budget)
    except PlannerError as e:  # the plan stands; say what is missing
        for x in p.products:
            if x.decision is None:
                x.decision = unchecked(f"not done: {e}")
        p.warnings.append(f"decision analysis not done: {e}")
        return p


class _Resolver:
    """Re-solves of one scenario's engine with one product's decision or intercept changed."""

    def __init__(self, p: Plan, s: Scenario, rel_gap: float, end: float | None) -> None:
        self.d = mix_data(s)
        self.engine = engine_for(s, self.d)
        self.rel_gap, self.end = rel_gap, end
        self.slate = np.array([x.running for x in p.products], dtype=bool)

    def out_of_time(self) -> bool:
        return self.end is not None and time.perf_counter() >= self.end

    def solve(self, **changes):
        """The re-solve (None if the deadline cut it short: its answer is not certified)."""
        if self.out_of_time():
            raise TimeoutError
        sol = self.engine.solve(rel_gap=self.rel_gap, deadline=self.end, warm=True, **changes)
        if sol.status != "optimal":
            raise TimeoutError
        return sol

    def runs(self, k: int, a_k: float) -> bool:
        """Does product k run (make something) at intercept a_k, every other number held?"""
        a = self.d.a.copy()
        a[k] = a_k
        sol = self.solve(a=a, known=[self.slate])
        return bool(sol.running[k]) and sol.volume[k] > 0


def _analyse(p: Plan, s: Scenario, rel_gap: float, end: float | None, budget: float | None) -> Plan:
    rs = _Resolver(p, s, rel_gap, end)
    d = rs.d
    H = d.usage_dense()
    lam = np.array([r.shadow_price for r in p.resources], dtype=float)
    b_idx = bottleneck(lam, np.array([r.capacity for r in p.resources], dtype=float))
    tol = (p.bound - p.profit) + rel_gap * max(abs(p.profit), 1.0)  # the plan's and a re-solve's certificates
    product_profit = p.profit + s.plant_fixed_cost  # the engine's objective leaves the plant-wide cost out
    can = np.zeros(len(p.products), dtype=bool)
    for k, x in enumerate(p.products):  # first every cost of reversal (one re-solve each)
        if rs.out_of_time():
            x.decision = unchecked("time budget spent")
            continue
        entry: dict[str, Any] = {"contribution_per_bottleneck_unit": _per_bottleneck(d, H, b_idx, k, x)}
        try:
            entry.update(_reversal(rs, k, x, product_profit, tol))
        except TimeoutError:
            x.decision = unchecked("time budget spent")
            continue
        can[k] = entry.pop("_can")
        entry.update(switch_intercept=None, decision_checked=not can[k])
        x.decision = entry
    for k, x in enumerate(p.products):  # then the switch intercepts (a bisection each), as time allows
        if not can[k] or rs.out_of_time():
            continue
        try:
            x.decision["switch_intercept"] = _switch(rs, H, lam, k, x)
            x.decision["decision_checked"] = True
        except TimeoutError:
            x.decision["decision_note"] = (x.decision["decision_note"] + "; " if x.decision["decision_note"]
                                           else "") + "switch intercept not computed: time budget spent"
    done = sum(bool(x.decision and x.decision["decision_checked"]) for x in p.products)
    if done < len(p.products):
        spent = "time limit" if budget is None else f"{budget:.2g} s budget (or the time limit)"
        p.warnings.append(f"decisions of {len(p.products) - done} of {len(p.products)} products were not analysed "
                          f"within the {spent}: they show decision_checked false; run planner plan --decisions "
                          "to compute them all")
    p.extras["decisions"] = {"bottleneck": None if b_idx is None else p.resources[b_idx].name,
                             "switch_precision": PRECISION, "marginal_share": MARGINAL, "gap": tol,
                             "analysed": done}
    return p


def _per_bottleneck(d, H: np.ndarray, b_idx: int | None, k: int, x) -> float | None:
    if b_idx is None or H[b_idx, k] <= 0:
        return None
    price = x.price if x.volume > 0 else float(d.a[k])
    return float((price - d.v[k]) / H[b_idx, k])


def _reversal(rs: _Resolver, k: int, x, product_profit: float, tol: float) -> dict[str, Any]:
    """cost_of_reversal (with a note where None) and whether the decision can be reversed at all."""
    if x.forced:
        return {"cost_of_reversal": None, "decision_note": f"committed ({x.forced}): cannot be reversed",
                "_can": False}
    if not rs.d.can_stop[k]:
        return {"cost_of_reversal": None, "decision_note": "no on/off choice (no fixed cost, minimum run "
                "or costly group): it makes what pays", "_can": False}
    mask = np.zeros(rs.d.n, dtype=bool)
    mask[k] = True
    other = rs.slate.copy()
    other[k] = not x.running
    try:
        sol = rs.solve(stop=mask, known=[other]) if x.running else rs.solve(run=mask, known=[other])
    except InfeasibleError:
        return {"cost_of_reversal": None, "decision_note": "no plan meets every limit with it reversed",
                "_can": True}
    cost = product_profit - sol.objective
    slack = tol + (sol.bound - sol.objective)
    note = ""
    if cost < 0:
        if cost >= -slack:
            cost = 0.0  # within the certificates: the reversal is as good as the plan
            note = "reversal within the certified gap"
        else:
            note = "the reversed plan beats the plan by more than the gap: please report this"
    return {"cost_of_reversal": float(cost), "decision_note": note, "_can": True}


def _switch(rs: _Resolver, H: np.ndarray, lam: np.ndarray, k: int, x) -> float | None:
    """The intercept at which product k's decision flips (bisection, see the module docstring)."""
    d = rs.d
    a0, v = float(d.a[k]), float(d.v[k])
    width = max(PRECISION * abs(a0), 1.0)
    if x.running:
        lo, hi = v, a0  # lo: stops, hi: runs
        if lo >= hi or rs.runs(k, lo):
            return None
    else:
        lo, hi = a0, _cap(rs, H, lam, k)
        if not rs.runs(k, hi):
            return None
    while hi - lo > width:
        mid = 0.5 * (lo + hi)
        if rs.runs(k, mid):
            hi = mid
        else:
            lo = mid
    return 0.5 * (lo + hi)


def _cap(rs: _Resolver, H: np.ndarray, lam: np.ndarray, k: int) -> float:
    """a_max of a stopped product (see the module docstring)."""
    d = rs.d
    F = float(d.F[k])
    members = np.asarray(d.grp_prod) == k
    F += float(np.sum(np.asarray(d.grp_cost)[np.asarray(d.grp_idx)[members]]))
    shut = np.asarray(d.res_closable, dtype=bool) & (H[:, k] > 0)
    F += float(np.sum(np.asarray(d.res_fixed)[shut]))
    base = float(d.v[k] + H[:, k] @ lam)
    if d.b[k] > 0:
        top = base + 2 * math.sqrt(4 * float(d.b[k]) * F)
    else:
        top = base + (4 * F / float(d.cap[k]) if np.isfinite(d.cap[k]) and d.cap[k] > 0 else abs(float(d.a[k])))
    a0 = float(d.a[k])
    return max(top, a0 + 0.5 * max(abs(a0), 1.0))
