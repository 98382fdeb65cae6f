"""The solve engine: one object per scenario, re-solved with other numbers by every command.

``Engine(d)`` takes the model's arrays (:class:`models.data.MixData`, in the
scenario's units), fixes its internal scales once (:mod:`.scaling`), and then
answers, each time under a certified gap and a deadline:

- :meth:`Engine.solve` — the best plan, with any of these changed for this
  solve only: capacities, price intercepts and slopes, unit and fixed costs,
  products forced to run or to stop, which capacity options are on offer;
  warm-started from given multipliers (or the last solve's, ``warm=True``)
  and known slates;
- :meth:`Engine.slate` — the exact plan of one fixed slate (which products run,
  which all-or-nothing options are taken);
- :meth:`Engine.no_better` — a quick Lagrangian check that no plan beats a
  profit by more than the gap.

Every answer is a :class:`Solution` in the scenario's units, checked against
every limit (:mod:`.verify`).  Profit (``objective``) excludes the
plant-wide fixed cost, which the Plan subtracts; it includes the product
groups' and the resources' fixed costs.
"""

from __future__ import annotations

import time
from dataclasses import dataclass, field, replace

import numpy as np

from models.data import MixData
from planner.engine.certificate import Certificate, relative_gap
from planner.engine.dual import minimise
from planner.engine.highs import Status
from planner.engine.infeasible import check_commitments, iis_names
from planner.engine.problem import Problem
from planner.engine.scaling import Scales
from planner.engine.search import Found, search
from planner.engine.settings import CHECK_STEPS, DEFAULT_GAP
from planner.engine.slateqp import SlateResult, solve_choice
from planner.engine.verify import check_period_plan, check_plan, clean_period_volumes, clean_volumes
from planner.errors import InfeasibleError, SolverError


@dataclass
class Solution:
    """A solved plan in the scenario's units (currency, units of volume, resource units)."""

    status: str  # "optimal" (certified to the gap), "time_limit" or "error"
    volume: np.ndarray  # units, product order
    running: np.ndarray  # bool, product order
    objective: float  # currency: the products' and options' profit (no plant-wide fixed cost)
    bound: float  # currency: a proven upper bound on the objective
    duals: np.ndarray  # currency per resource unit, ≥ 0: the shadow prices of the slate's QP
    strategy: str
    rounds: int = 0
    seconds: float = 0.0
    qp_method: str = ""
    messages: list[str] = field(default_factory=list)
    option_scale: np.ndarray = field(default_factory=lambda: np.zeros(0))  # 0..1 per option of the data
    dual_steps: int = 0  # multiplier steps of the Lagrangian bound
    multipliers: np.ndarray | None = None  # currency per resource unit: the best Lagrangian λ met
    multipliers_tried: list = field(default_factory=list)  # λ's worth a warm start next time
    offset: float = 0.0  # currency: the plant-wide fixed cost, subtracted before the gap is measured
    made: np.ndarray | None = None  # with periods: (n × T) units made per product and period
    sold: np.ndarray | None = None  # with periods: (n × T) units sold per product and period
    bought: np.ndarray | None = None  # units bought in per product (of ``volume``, the sales); None: none may be
    group_on: np.ndarray = field(default_factory=lambda: np.zeros(0, dtype=bool))  # per product group: paid
    opened: np.ndarray = field(default_factory=lambda: np.zeros(0, dtype=bool))  # per resource: open (not closed)

    @property
    def gap(self) -> float:
        """The certified gap of the plan's profit: (bound − profit) / max(|profit|, 1), profit after ``offset``."""
        return relative_gap(self.bound - self.offset, self.objective - self.offset)


#: Relative allowance added to the bound of a plan over periods whose fixed-choice QP is HiGHS's own
#: answer (not polished by the KKT conditions): HiGHS's QP tolerances are about 1e-7 to 1e-8.
UNPOLISHED_SLACK = 1e-6


class Engine:
    """The solve engine of one scenario's data (see the module docstring)."""

    def __init__(self, d: MixData, threads: int = 1, seed: int = 0, scaled: bool = True,
                 units: dict[str, str] | None = None, offset: float = 0.0) -> None:
        """``offset``: the plant-wide fixed cost (currency), which no decision changes but which the
        certificate is measured after: the gap is that of the plan's profit, not of the products' alone."""
        self.base = d
        self.offset = float(offset)
        self.threads, self.seed = int(threads), int(seed)
        self.scales = Scales.of(d) if scaled and d.periods is None else Scales.identity(d)
        self.units = units
        self._warm: list[np.ndarray] | None = None  # scaled multipliers of the last warm solve
        self.solves = 0

    # --- the data of one solve -----------------------------------------------------------
    def data(self, capacity=None, a=None, b=None, v=None, F=None, run=None, stop=None, options=None) -> MixData:
        """The base data with this solve's changes (scenario units; None keeps a field).

        ``run``/``stop``: (n,) bool, products forced to run (then must run) or to stop
        (then make nothing); ``options``: (k,) bool, the options still on offer.
        """
        d = self.base
        changes = {k: np.asarray(x, dtype=float) for k, x in
                   (("capacity", capacity), ("a", a), ("b", b), ("v", v), ("F", F)) if x is not None}
        if changes:
            d = replace(d, **changes)
        if run is not None and np.any(run):
            d = replace(d, must_run=d.must_run | np.asarray(run, dtype=bool))
        if stop is not None and np.any(stop):
            off = np.asarray(stop, dtype=bool)
            d = replace(d, must_run=d.must_run & ~off, cap=np.where(off, 0.0, d.cap),
                        committed=np.where(off, 0.0, d.committed), min_run=np.where(off, 0.0, d.min_run))
        if options is not None:
            d = d.with_options(np.asarray(options, dtype=bool))
        return d

    def problem(self, d: MixData) -> Problem:
        """The scaled problem of ``d``."""
        return Problem(self.scales.apply(d))

    # --- solves --------------------------------------------------------------------------
    def solve(self, rel_gap: float = DEFAULT_GAP, time_limit: float | None = None, deadline: float | None = None,
              start: list[np.ndarray] | None = None, known: list[np.ndarray] = (), warm: bool = False,
              solver: str | None = None, **changes) -> Solution:
        """The best plan to ``rel_gap`` (see the module docstring); raises on no plan.

        ``time_limit`` (seconds) or ``deadline`` (a ``time.perf_counter()`` value): the
        earlier counts.  ``start``: multipliers (currency per resource unit) to try
        first; ``known``: (n,) running masks to solve first as incumbents.
        """
        t0 = time.perf_counter()
        if time_limit is not None:
            deadline = t0 + time_limit if deadline is None else min(deadline, t0 + time_limit)
        d = self.data(**changes)
        check_commitments(d, self.units)
        if solver:
            from planner.engine.other import solve_other

            sol = solve_other(self, d, solver, rel_gap, None if deadline is None else deadline - t0)
        else:
            p = self.problem(d)
            lam = [self.scales.prices_in(x) for x in (start or [])]
            if warm and self._warm:
                lam = self._warm + lam
            found = search(p, rel_gap, deadline, self.threads, self.seed, self.scales.money, lam,
                           [p.choice(np.asarray(z, dtype=bool)) for z in known],
                           offset=self.offset / self.scales.money)
            sol = self._solution(d, p, found)
            if warm:
                self._warm = [self.scales.prices_in(x) for x in sol.multipliers_tried[-10:]] + \
                    ([self.scales.prices_in(sol.duals)] if sol.duals.size else [])
        sol.seconds = time.perf_counter() - t0
        self.solves += 1
        return sol

    def slate(self, running: np.ndarray, taken: np.ndarray | None = None, time_limit: float | None = None,
              opened: np.ndarray | None = None, **changes) -> Solution:
        """The exact plan of a fixed slate: ``running`` (n,) products, ``taken`` (k,) all-or-nothing options,
        ``opened`` (m,) resources open (default all); a product group is paid where a member runs.

        Status "optimal" (exact to rounding where the polish applies) or, where the slate
        cannot be planned, "infeasible" / "time_limit" / "error" with zero volumes.
        """
        t0 = time.perf_counter()
        d = self.data(**changes)
        p = self.problem(d)
        res = solve_choice(p, p.choice(np.asarray(running, dtype=bool) | ~d.can_stop, taken, opened), time_limit,
                           self.threads, self.seed)
        if res.status != "optimal":
            n = d.n
            return Solution(res.status, np.zeros(n), np.asarray(running, dtype=bool) | ~d.can_stop, -np.inf,
                            -np.inf, np.zeros(len(d.resources)), "slate", messages=[res.message],
                            option_scale=np.zeros(d.n_options), seconds=time.perf_counter() - t0)
        sol = self._from_slate(d, p, res, res.objective, Status.OPTIMAL, "slate")
        sol.seconds = time.perf_counter() - t0
        return sol

    def no_better(self, profit: float, rel_gap: float, max_steps: int = CHECK_STEPS, warm: bool = True,
                  **changes) -> bool:
        """True if no plan beats ``profit`` (currency, no plant-wide cost) by more than the gap.

        A Lagrangian certificate, warm-started from the last multipliers: cheap where
        it holds; False where it cannot show it (the caller then solves).
        """
        d = self.data(**changes)
        p = self.problem(d)
        mu = self.scales.money
        net = profit - self.offset
        target = (profit + rel_gap * max(abs(net), 1.0)) / mu
        res = minimise(p, rel_tol=rel_gap / 4, start=self._warm if warm else None, target=target,
                       max_steps=max_steps, threads=self.threads, seed=self.seed,
                       cert=Certificate(mu, self.offset / mu))
        if res.best.value <= target:
            if warm:
                self._warm = [q.lam for q in res.points[-10:]]
            return True
        return False

    # --- back to the scenario's units ------------------------------------------------------
    def _solution(self, d: MixData, p: Problem, found: Found) -> Solution:
        if found.infeasible:
            limits, held = iis_names(d)
            raise InfeasibleError([f"HiGHS finds these limits and commitments in conflict: {', '.join(limits + held)}"]
                                  if limits else ["the model is infeasible although every commitment fits; "
                                                  "please report this"])
        if found.best is None:
            hint = (" (try a longer --time-limit or a looser --gap, or report it)" if d.periods is not None
                    else " (try --solver scip, or report it)")  # --solver is refused with periods
            raise SolverError("no feasible plan was found" + (": " + "; ".join(found.messages) if found.messages
                                                              else "") + hint)
        sol = self._from_slate(d, p, found.best, found.bound, found.status, found.strategy)
        sol.rounds, sol.dual_steps = found.rounds, found.dual_steps
        sol.messages = list(found.messages) + list(sol.messages)
        if found.multipliers is not None:
            sol.multipliers = self.scales.prices_out(found.multipliers)
        sol.multipliers_tried = [self.scales.prices_out(x) for x in found.tried]
        return sol

    def _from_slate(self, d: MixData, p: Problem, res: SlateResult, bound: float, status: str,
                    strategy: str) -> Solution:
        mu = self.scales.money
        parts = p.split(res.choice)
        if d.periods is not None:
            return self._from_periods(d, p, res, bound, status, strategy)
        volume = clean_volumes(self.scales.volumes(res.values[0][:d.n]), d)
        bought = None
        if np.any(d.buy_max > 0):
            bought = np.minimum(clean_volumes(self.scales.volumes(p.products.bought(res.values[0])), d), volume)
        running = p.products.running(parts[0])
        scale = p.options.scale_of(res.values[1], parts[1]) if d.n_options else np.zeros(0)
        opened = p.opened(res.choice)
        check_plan(d if opened.all() else replace(d, capacity=np.where(opened, d.capacity, 0.0)), volume, running,
                   scale, bought=bought)
        objective = res.objective * mu
        return Solution(str(status), volume, running, objective, max(bound * mu, objective),
                        self.scales.prices_out(res.duals), strategy, qp_method=res.method, option_scale=scale,
                        offset=self.offset, bought=bought, group_on=p.group_on(res.choice),
                        opened=opened)

    def _from_periods(self, d: MixData, p: Problem, res: SlateResult, bound: float, status: str,
                      strategy: str) -> Solution:
        """The Solution of a plan over periods: made and sold per period, volumes as the horizon's sales."""
        made, sold = p.products.split(res.values[0])
        made, sold = clean_period_volumes(made, d.periods), clean_period_volumes(sold, d.periods)
        running = p.products.running(p.split(res.choice)[0])
        check_period_plan(d.periods, made, sold, running)
        bound = max(bound, res.objective)
        messages = []
        if not res.method.endswith("+kkt"):  # HiGHS's own answer (its tolerance), not polished to exactness:
            bound += UNPOLISHED_SLACK * max(abs(res.objective), 1.0)  # the bound says so
            messages.append("the fixed-choice QP over periods was not polished exactly: the bound allows for "
                            "HiGHS's tolerance")
        sol = Solution(str(status), sold.sum(axis=1), running, res.objective, bound,
                       np.asarray(res.duals, dtype=float), strategy, qp_method=res.method,
                       option_scale=np.zeros(0), offset=self.offset, made=made, sold=sold)
        sol.messages = messages
        return sol
