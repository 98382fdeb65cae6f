"""Mixed-integer plans against outside references: SCIP (pyscipopt) and slate enumeration."""

from __future__ import annotations

import pytest

from planner import plan, validate_scenario
from planner.scenario.synth import synthetic_scenario

from .conftest import needs_scip
from .reference import enumerate_slates, scip_plan

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
