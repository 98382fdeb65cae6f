"""Mixed-integer plans against outside references: SCIP (pyscipopt) and slate enumeration.

Both references are in tests/reference.py and read the raw scenario numbers: SCIP solves the
mixed-integer QP; the enumeration solves every slate's QP with highspy directly (no planner
code) and certifies each in numpy.  The last tests check the references themselves: a hand
case worked by the KKT conditions, and the enumeration against SCIP.
"""

from __future__ import annotations

import pytest

from planner import plan, validate_scenario
from planner.scenario.synth import synthetic_scenario

from .conftest import needs_scip
from .reference import enumerate_slates, scenario_numbers, scip_plan

CASES = [(6, 3, "some", 1), (8, 4, "near", 2), (10, 3, "near", 3), (10, 5, "some", 4), (9, 2, "near", 5)]


@pytest.mark.parametrize("n,m,fixed,seed", CASES)
def test_against_enumeration(n, m, fixed, seed):
    """Every on/off slate enumerated, each slate a continuous QP (exact for ≤ 12 products)."""
    s, _ = validate_scenario(synthetic_scenario(n, m, seed=seed, fixed_costs=fixed))
    p = plan(s, rel_gap=1e-9)
    best = enumerate_slates(s)
    assert p.status == "optimal"
    assert p.profit == pytest.approx(best, rel=1e-7)


@needs_scip
@pytest.mark.parametrize("n,m,fixed,seed", CASES + [(14, 4, "some", 6), (12, 6, "near", 7)])
def test_against_scip(n, m, fixed, seed):
    """SCIP solves the mixed-integer QP (built from the raw numbers) to gap 1e-9."""
    s, _ = validate_scenario(synthetic_scenario(n, m, seed=seed, fixed_costs=fixed, price_slope="mixed"))
    p = plan(s, rel_gap=1e-9)
    ref, _ = scip_plan(s)
    assert p.status == "optimal"
    assert p.profit == pytest.approx(ref, rel=1e-6)
    assert p.bound >= ref - 1e-6 * abs(ref)


@needs_scip
def test_commitments_and_min_runs_against_scip():
    raw = synthetic_scenario(10, 3, seed=11, fixed_costs="some", commitments=True)
    for i, prod in enumerate(raw["products"]):
        if i % 3 == 0 and "min_volume" not in prod:
            prod["min_run"] = 150.0
        if i == 4:
            prod["must_run"] = True
    s, _ = validate_scenario(raw)
    p = plan(s, rel_gap=1e-9)
    ref, _ = scip_plan(s)
    assert p.profit == pytest.approx(ref, rel=1e-6)
    assert p.profit == pytest.approx(enumerate_slates(s), rel=1e-7)
    for x, raw_p in zip(p.products, raw["products"]):
        if x.running and raw_p.get("min_run"):
            assert x.volume >= raw_p["min_run"] - 1e-9
        assert x.volume >= raw_p.get("min_volume", 0.0) - 1e-9


def test_enumeration_on_a_hand_case():
    """Two products on a 100 h press, worked by hand (KKT conditions).

    A: a = 100, b = 0.5, v = 40 (peak 60 units); B: a = 80, b = 0.25, v = 20, F = 1,000 (peak 120).
    Both running, the press binds: D_A = 60 − λ, D_B = 2·(60 − λ), D_A + D_B = 100, so λ = 80/3,
    D_A = 100/3, D_B = 200/3; profit 2000 − 5000/9 + 4000 − 10000/9 − 1000 = 10000/3.
    A alone: 60 units, 60·60 − 0.5·3600 = 1800 (less).  With B's min_run at 150 (more than the
    press holds) B cannot run and the best is A alone, 1800.
    """
    from .reference import enumerate_plans, slate_qp

    raw = {"name": "hand", "resources": [{"name": "press", "capacity": 100}], "products": [
        {"name": "A", "price_intercept": 100, "price_slope": 0.5, "unit_cost": 40, "usage": {"press": 1}},
        {"name": "B", "price_intercept": 80, "price_slope": 0.25, "unit_cost": 20, "fixed_cost": 1000,
         "usage": {"press": 1}}]}
    s, _ = validate_scenario(raw)
    e = enumerate_plans(s)
    assert e.profit == pytest.approx(10000 / 3, rel=1e-12) and e.bound == pytest.approx(10000 / 3, rel=1e-12)
    assert e.volume == pytest.approx([100 / 3, 200 / 3], rel=1e-12)
    both = slate_qp(scenario_numbers(s), [True, True])
    assert both.duals == pytest.approx([80 / 3], rel=1e-12)
    raw["products"][1]["min_run"] = 150
    s, _ = validate_scenario(raw)
    e = enumerate_plans(s)
    assert e.profit == pytest.approx(1800, rel=1e-12) and not e.running[1]
    assert plan(s, rel_gap=1e-9).profit == pytest.approx(1800, rel=1e-9)


@needs_scip
@pytest.mark.parametrize("seed", [1, 9, 13, 23, 25, 27])
def test_enumeration_reference_agrees_with_scip(seed):
    """The highspy enumeration checked against SCIP (both from the raw numbers) on seeded cases of
    tests/scenario_gen.py: same optimum to 1e-6, SCIP's plan (profit recomputed from its volumes)
    within the enumeration's bound, and the enumeration certified (bound − profit ≤ 1e-9 relative).
    Seeds with 4–6 on/off choices."""
    from .differential import _against_scip
    from .reference import enumerate_plans
    from .scenario_gen import small_scenario

    s, _ = validate_scenario(small_scenario(seed))
    e = enumerate_plans(s)
    assert e.feasible and e.slates >= 1
    assert e.bound - e.profit <= 1e-9 * max(abs(e.profit), 1.0)
    assert _against_scip(s, scenario_numbers(s), e) == []
