"""Per-product decision analyses and analyses of plans that close a resource, against outside references.

References (tests/groups_reference.py, built from the raw numbers with highspy directly, no planner or
models/ import): ``slate_value`` (one slate's QP with given resources open) and ``enumerate_best``
(every product slate × open/closed resource).  A product forced to run or stop is stated in the raw
numbers themselves (must_run, or the product removed), so the reference never sees the planner's forcing.
"""

from __future__ import annotations

import copy

import numpy as np
import pytest

from planner import plan, validate_scenario
from planner.analysis.capacity.analysis import add_capacity_analysis
from tests.groups_reference import enumerate_best, numbers, slate_value


def closing() -> dict:
    """Three products on assembly (binding); the paint cell's 15,000 is not worth opening for 'gloss'."""
    return {"name": "paint closed",
            "resources": [{"name": "assembly", "capacity": 100.0},
                          {"name": "paint cell", "capacity": 300.0, "fixed_cost": 15000.0, "closable": True}],
            "products": [
                {"name": "plain", "price_intercept": 100.0, "price_slope": 0.2, "unit_cost": 20.0,
                 "fixed_cost": 500.0, "usage": {"assembly": 1.0}},
                {"name": "gloss", "price_intercept": 95.0, "price_slope": 0.2, "unit_cost": 20.0,
                 "fixed_cost": 100.0, "usage": {"assembly": 1.0, "paint cell": 1.0}},
                {"name": "rough", "price_intercept": 70.0, "price_slope": 0.5, "unit_cost": 30.0,
                 "fixed_cost": 300.0, "usage": {"assembly": 0.5}}]}


def held_closed(raw: dict, name: str) -> dict:
    """The raw scenario with resource ``name`` closed for good: capacity 0, cannot open, no fixed cost."""
    out = copy.deepcopy(raw)
    for r in out["resources"]:
        if r["name"] == name:
            r.update(capacity=0.0, closable=False, fixed_cost=0.0)
    return out


def test_ranges_of_a_plan_that_closes_a_resource_keep_it_closed():
    raw = closing()
    s, _ = validate_scenario(raw)
    p = plan(s, rel_gap=1e-9)
    assert p.profit == pytest.approx(enumerate_best(raw), rel=1e-7, abs=1e-4)  # highspy enumeration
    paint = next(r for r in p.resources if r.name == "paint cell")
    assert not paint.open
    add_capacity_analysis(p, s, rel_gap=1e-9)
    asm = next(r for r in p.resources if r.name == "assembly")
    lo, hi = asm.shadow_price_range
    # the re-plan by hand: the plan's slate with paint closed, assembly moved ±1 (highspy directly)
    x = numbers(raw)
    run = np.array([q.running for q in p.products])
    opened = np.array([True, False])
    def value(h):
        y = dict(x, cap=np.array([h, 300.0]))
        return slate_value(y, run, opened)
    fd = (value(101.0) - value(99.0)) / 2
    assert asm.shadow_price == pytest.approx(fd, rel=1e-6, abs=1e-6)
    # inside the range the plan's slate stays best with paint held closed (re-planned by enumeration)
    for h in (lo if lo is not None else 0.5 * 100, hi if hi is not None else 150.0):
        h_in = 100.0 + 0.9 * (h - 100.0)
        ref = held_closed(raw, "paint cell")
        ref["resources"][0]["capacity"] = h_in
        assert value(h_in) == pytest.approx(enumerate_best(ref), rel=1e-7, abs=1e-4)
