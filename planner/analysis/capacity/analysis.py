"""The capacity analysis added to a Plan: ranges on its resources, options in its extras."""

from __future__ import annotations

import time

import numpy as np

from planner.errors import PlannerError
from planner.api import engine_for
from planner.output.plan import Plan
from planner.scenario.arrays import mix_data
from planner.scenario.schema import Scenario
from planner.analysis.capacity.options import choose_options, value_options
from planner.analysis.capacity.ranging import resource_ranges


#: Seconds the capacity analysis run by default (by ``plan`` and ``report``) may spend re-checking range
#: ends for better slates, or twice the plan's solve if longer; ``plan --capacity`` has no limit.
AUTO_BUDGET = 1.0


def auto_budget(p: Plan) -> float:
    """The default analysis's re-check budget for plan ``p`` (seconds)."""
    return max(AUTO_BUDGET, 2 * float(p.solver.get("seconds", 0.0) or 0.0))


def plan_slate(p: Plan, can_stop: np.ndarray) -> np.ndarray:
    """The plan's slate as the fixed-slate QP needs it (products without a choice always 'on')."""
    return np.array([x.running for x in p.products], dtype=bool) | ~can_stop


def plan_open(p: Plan) -> np.ndarray:
    """(m,) bool: the resources the plan keeps open (a closed one stays closed in every re-solve)."""
    return np.array([r.open for r in p.resources], dtype=bool)


def add_capacity_analysis(p: Plan, s: Scenario, choose: bool = False, rel_gap: float = 1e-7,
                          budget: float | None = None, deadline: float | None = None) -> Plan:
    """Fill each resource's shadow-price range and the options' values (and the joint pick) in ``p``.

    Ranges: ``shadow_price_range`` [low, high] (None for no end), ``shadow_price_slope``
    and the reasons; ``p.extras['options']`` one entry per option; with ``choose``,
    ``p.extras['option_pick']``.  ``budget``: seconds for re-checking the range ends
    for better slates (None: no limit); ends left unchecked are flagged and warned of.
    ``deadline`` (a ``time.perf_counter()`` value, from a command's --time-limit): the end of
    everything; what it leaves undone is left out and warned of.  Returns ``p``.
    """
    if deadline is not None and p.status != "optimal":
        p.warnings.append("capacity analysis not done: the plan stopped at the time limit, so ranges and option "
                          "values would describe a plan that is not certified")
        return p
    try:
        return _analyse(p, s, choose, rel_gap, budget, deadline)
    except TimeoutError:
        p.warnings.append("capacity analysis not finished within the time limit: what it could not do is left out")
        return p
    except PlannerError as e:  # the plan itself stands; say what is missing and why
        p.warnings.append(f"capacity analysis not done: {e}")
        return p


def _analyse(p: Plan, s: Scenario, choose: bool, rel_gap: float, budget: float | None,
             hard: float | None) -> Plan:
    d = mix_data(s).with_closed(plan_open(p))  # the plan's closed resources stay closed
    if np.any(d.buy_max > 0):  # the fixed-slate parametric QP of the ranges has no bought-in columns yet
        raise PlannerError("shadow-price ranges and option values do not yet follow products that buy in "
                           "(buy_max); the plan and its shadow prices stand")
    engine = engine_for(s, d)
    slate = plan_slate(p, d.can_stop)
    qp = engine.slate(slate)
    duals = qp.duals if qp.status == "optimal" else np.array([r.shadow_price for r in p.resources])
    deadline = None if budget is None else time.perf_counter() + budget
    if hard is not None:
        deadline = hard if deadline is None else min(deadline, hard)
    ranges = resource_ranges(d, slate, rel_gap=rel_gap, deadline=deadline, engine=engine)
    for rp, rg in zip(p.resources, ranges):
        rp.shadow_price_range = [rg.low, rg.high]
        rp.shadow_price_slope = rg.slope
        rp.range_low_reason, rp.range_high_reason = rg.why_low, rg.why_high
        rp.range_slates_checked = rg.slates_checked
    unchecked = [rg.resource for rg in ranges if not rg.slates_checked]
    if unchecked:
        p.warnings.append(f"shadow-price ranges of {len(unchecked)} of {len(ranges)} resources were not fully "
                          f"re-checked for a better slate within the {_budget_text(budget, hard)} ({', '.join(unchecked[:5])}"
                          f"{', …' if len(unchecked) > 5 else ''}): their ranges hold for this slate; "
                          "run planner plan --capacity to check them all")
    base, values = value_options(s, d, slate, duals, rel_gap, engine=engine, deadline=hard)
    p.extras["options"] = [v.to_dict() for v in values]
    if choose and s.options:
        p.extras["option_pick"] = choose_options(s, d, base, slate, rel_gap, deadline=hard)
    return p


def _budget_text(budget: float | None, hard: float | None) -> str:
    if budget is None:
        return "time limit"
    return f"{budget:.2g} s budget" + (" (or the time limit)" if hard is not None else "")
