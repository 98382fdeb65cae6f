"""Small re-solve analyses a report can show when the capacity analysis has not supplied them.

Both work only through :func:`planner.api.plan` (the same solve as every
plan), so their numbers are plans' numbers, never a shortcut:

- :func:`capacity_sweep` — optimal profit and shadow price at a few
  capacities of one resource; a slate change is reported at the first sampled
  capacity where the set of running products differs (the capacity analysis,
  where present, bisects to the exact point instead);
- :func:`value_options` — each capacity option on its own: profit with it,
  gain, net gain after its cost (keys as the capacity analysis writes them:
  name, kind 'whole' | 'part', adds at full scale, used 0..1, cost,
  profit_with, gain, net_gain, slate_changes, slate_change).  An all-or-nothing option is exact; an option
  usable in part is tried at quarter steps of its amount and the best step is
  kept (marked ``approximate``); one that loses money at every step is shown
  at its full amount.

Amounts in the scenario's currency per period; capacities in the resource's unit.
"""

from __future__ import annotations

from pathlib import Path
from typing import Any

from planner.errors import InfeasibleError, ScenarioError
from planner.output.plan import Plan
from planner.output.report.context import ReportContext, make_context
from planner.scenario.schema import Scenario

#: Fractions of a part-usable option's amount tried by :func:`value_options`.
PART_STEPS = (0.25, 0.5, 0.75, 1.0)


def running_set(plan: Plan) -> frozenset[str]:
    """Names of the products that run in a plan."""
    return frozenset(p.name for p in plan.products if p.running)


def slate_change(before: frozenset[str], after: frozenset[str]) -> str:
    """'starts: a; stops: b' between two slates, '' if they are equal."""
    parts = []
    if after - before:
        parts.append("starts: " + ", ".join(sorted(after - before)))
    if before - after:
        parts.append("stops: " + ", ".join(sorted(before - after)))
    return "; ".join(parts)


def capacity_sweep(scenario: Scenario, resource: str, capacities: list[float] | None = None, steps: int = 11,
                   base: Plan | None = None, **solve: Any) -> dict[str, Any]:
    """Re-plan at several capacities of ``resource`` (default: ``steps`` points from 50 % to 150 % of today's).

    Returns ``{"resource", "unit", "points": [{capacity, profit, shadow_price, volumes}],
    "breakpoints": [{capacity, change}], "skipped": [capacity, ...]}``; capacities at which the
    commitments cannot be met are listed in ``skipped``.
    """
    from planner.api import plan as make_plan

    try:
        res = scenario.resource(resource)
    except KeyError:
        names = ", ".join(r.name for r in scenario.resources) or "none"
        raise _unknown_resource(resource, names) from None
    today = res.capacity
    if capacities is None:
        n = max(int(steps), 2)
        lo, hi = 0.5 * today, 1.5 * today if today > 0 else 1.0
        capacities = [lo + (hi - lo) * k / (n - 1) for k in range(n)]
        if today not in capacities:
            capacities.append(today)
    points, skipped = [], []
    for cap in sorted(set(float(c) for c in capacities)):
        if cap == today and base is not None:
            p = base
        else:
            try:
                p = make_plan(scenario, extra_capacity={resource: cap - today}, **solve)
            except InfeasibleError:
                skipped.append(cap)
                continue
        r = next(x for x in p.resources if x.name == resource)
        points.append({"capacity": cap, "profit": p.profit, "shadow_price": r.shadow_price,
                       "volumes": {x.name: x.volume for x in p.products}, "running": sorted(running_set(p))})
    breakpoints = []
    for prev, cur in zip(points, points[1:]):
        change = slate_change(frozenset(prev["running"]), frozenset(cur["running"]))
        if change:
            breakpoints.append({"capacity": cur["capacity"], "change": change, "sampled": True,
                                "after": prev["capacity"]})
    return {"resource": resource, "unit": res.unit, "points": points, "breakpoints": breakpoints,
            "skipped": skipped, "method": "sampled re-solves"}


def sweep_for_report(scenario: Scenario, resource: str, steps: int = 11, base: Plan | None = None,
                     **solve: Any) -> dict[str, Any]:
    """A sweep of ``resource`` from 50 % to 150 % of today's capacity: the capacity analysis's exact sweep
    (``planner.capacity.sweep.run_sweep``) where that package is installed, else :func:`capacity_sweep`."""
    try:
        from planner.analysis.capacity.sweep import run_sweep
    except ImportError:
        return capacity_sweep(scenario, resource, steps=steps, base=base, **solve)
    try:
        today = scenario.resource(resource).capacity
    except KeyError:
        names = ", ".join(r.name for r in scenario.resources) or "none"
        raise _unknown_resource(resource, names) from None
    top = 1.5 * today if today > 0 else 1.0
    return run_sweep(scenario, resource, 0.5 * today, top, steps).to_dict()


def _unknown_resource(name: str, names: str):
    from planner.errors import Problem

    return ScenarioError([Problem("--sweep", f"no resource called '{name}'", f"use one of: {names}")])


def value_options(scenario: Scenario, base: Plan, **solve: Any) -> list[dict[str, Any]]:
    """Each of the scenario's options valued on its own by re-solving (see the module docstring)."""
    from planner.api import plan as make_plan

    out = []
    before = running_set(base)
    for opt in scenario.options:
        if opt.adds:
            trials = [(1.0, dict(opt.adds), float(opt.cost or 0.0))]
        elif opt.adds_up_to:
            total = sum(opt.adds_up_to.values())
            trials = [(f, {k: f * a for k, a in opt.adds_up_to.items()}, f * total * float(opt.cost_per_unit or 0.0))
                      for f in PART_STEPS]
        else:
            continue
        rows = []
        for frac, extra, cost in trials:
            try:
                p = make_plan(scenario, extra_capacity=extra, **solve)
            except InfeasibleError:  # pragma: no cover - more capacity never makes a plan infeasible
                continue
            gain = p.profit - base.profit
            change = slate_change(before, running_set(p))
            row = {"name": opt.name, "kind": "whole" if opt.adds else "part",
                   "adds": dict(opt.adds or opt.adds_up_to or {}), "used": frac, "cost": cost,
                   "profit_with": p.profit, "gain": gain, "net_gain": gain - cost,
                   "slate_changes": bool(change), "slate_change": change, "approximate": len(trials) > 1}
            rows.append(row)
        if rows:
            best = max(rows, key=lambda r: r["net_gain"])
            # An option that loses money at every step is shown at its full amount: what buying it all costs.
            out.append(best if best["net_gain"] > 0 else rows[-1])
    return out


def report_context(plan: Plan, scenario: Scenario, source: str | Path = "", sweep: dict[str, Any] | None = None,
                   with_options: bool = True, deadline: float | None = None, **solve: Any) -> ReportContext:
    """A report's inputs, with the analyses it shows run first (``solve``: rel_gap, time_limit, solver).

    Where the plan has not been through the capacity analysis it is run (shadow-price ranges and exact
    option values, under the default time budget and ``deadline``, a ``time.perf_counter()`` value);
    where that leaves options unvalued they are valued by :func:`value_options`.
    """
    from planner.analysis.capacity.analysis import add_capacity_analysis, auto_budget

    if with_options and "options" not in plan.extras:
        add_capacity_analysis(plan, scenario, budget=auto_budget(plan), deadline=deadline)
    options = plan.extras.get("options")
    origin = "capacity analysis" if options else ""
    if not options and scenario.options and with_options:
        options = value_options(scenario, plan, **solve)
        origin = "re-solved for this report"
    return make_context(plan, scenario, source=source, sweep=sweep, options=options, options_source=origin)
