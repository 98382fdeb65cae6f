"""Warm re-plans of one scenario with changes (``planner serve``): one engine kept between requests.

:class:`WarmPlanner` builds the scenario's engine (:class:`planner.engine.Engine`) once and answers
each list of changes (the change objects of a variant, :mod:`planner.scenario.variants`) with the
Plan of the changed scenario.  Changes of capacities, price intercepts and slopes, unit and fixed
costs, options taken and the plant-wide fixed cost are re-solves of that engine
(``Engine.solve(capacity=, a=, b=, v=, F=, warm=True)``: the last solve's multipliers carry over, and
the last slates are solved first as incumbents, so the dual bound stops once it certifies one);
a change of a cap, a commitment or a minimum run changes the model's bounds, so that scenario is
planned afresh (:func:`planner.api.plan`).  Either way the answer is certified to the gap: the
Plan is the plan of the changed scenario to within it, whatever came before.

Not thread-safe: the engine carries state between solves; callers serialise (``planner serve``
holds a lock).
"""

from __future__ import annotations

import math
import time

import numpy as np

from planner.api import build_plan, check_gap, engine_for
from planner.engine.infeasible import explain as explain_infeasible
from planner.errors import PlannerError, SolverError
from planner.output.plan import Plan
from planner.scenario.arrays import mix_data
from planner.scenario.schema import Change, Scenario
from planner.scenario.validate import scenario_warnings
from planner.scenario.variants import apply_changes, describe, touches_people

#: How many recent slates (which products run) each warm re-plan solves first as incumbents.
KNOWN_SLATES = 2
#: Fields whose changes the warm engine re-solves with (the rest change the model's bounds).
WARM_FIELDS = frozenset({"price_intercept", "price_slope", "unit_cost", "fixed_cost", "capacity", "taken",
                         "plant_fixed_cost"})


class WarmPlanner:
    """The plans of one scenario under changes, re-solved on one engine (see the module docstring)."""

    def __init__(self, scenario: Scenario, rel_gap: float = 1e-4, time_limit: float | None = None) -> None:
        check_gap(rel_gap)
        if time_limit is not None and not (math.isfinite(time_limit) and time_limit > 0):
            raise PlannerError(f"the time limit must be a positive number of seconds (got {time_limit!r})")
        self.scenario = scenario
        self.rel_gap, self.time_limit = rel_gap, time_limit
        self.base = mix_data(scenario)
        self.engine = engine_for(scenario, self.base)
        self.solves = {"warm": 0, "fresh": 0}
        self.slates: list[np.ndarray] = []  # running masks of the last warm plans: tried first as incumbents

    def plan(self, changes: list[Change]) -> Plan:
        """The Plan of the scenario with ``changes`` applied (ScenarioError / InfeasibleError / SolverError).

        Its ``extras`` hold ``changes`` (each as text), ``touches_people`` (an option taken or a work
        centre's hours changed: the labour note applies) and ``replan`` (warm or fresh, seconds).
        """
        t0 = time.perf_counter()
        s = apply_changes(self.scenario, changes) if changes else self.scenario
        warm = all(c.field in WARM_FIELDS for c in changes)
        if warm:
            d = mix_data(s)
            explain_infeasible(s, d)  # commitments that cannot fit: named, in the scenario's units
            try:
                sol = self.engine.solve(rel_gap=self.rel_gap, time_limit=self.time_limit, warm=True,
                                        known=list(self.slates), capacity=d.capacity, a=d.a, b=d.b, v=d.v, F=d.F)
            except PlannerError:
                raise
            except Exception as e:  # a solver library's own failure: a message, never a traceback
                raise SolverError(f"the solver failed ({type(e).__name__}: {e})") from e
            if sol.status not in ("optimal", "time_limit"):
                raise SolverError(f"the plan could not be certified to the gap asked for ({'; '.join(sol.messages)})")
            p = build_plan(s, d, sol)
            self.solves["warm"] += 1
            if not any(np.array_equal(sol.running, z) for z in self.slates):
                self.slates = ([np.asarray(sol.running, dtype=bool)] + self.slates)[:KNOWN_SLATES]
        else:
            from planner.api import plan

            p = plan(s, rel_gap=self.rel_gap, time_limit=self.time_limit)
            self.solves["fresh"] += 1
        p.warnings = scenario_warnings(s) + p.warnings if changes else p.warnings
        p.extras["changes"] = [describe(c) for c in changes]
        p.extras["touches_people"] = touches_people(self.scenario, changes)
        p.extras["replan"] = {"route": "warm" if warm else "fresh", "seconds": time.perf_counter() - t0}
        return p

