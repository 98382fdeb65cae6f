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


# --- per-product decisions -----------------------------------------------------------------------

from planner.analysis.decisions import PRECISION, add_decision_analysis  # noqa: E402


def random_small(seed: int, n: int = 5) -> dict:
    """A small random scenario: a group, a closable resource with a fixed cost, products with fixed costs."""
    rng = np.random.default_rng(1000 + seed)
    res = [{"name": "r0", "capacity": float(rng.integers(60, 160)), "closable": True,
            "fixed_cost": float(rng.integers(200, 2500))},
           {"name": "r1", "capacity": float(rng.integers(60, 200))}]
    prods = []
    for i in range(n):
        use = {"r1": float(rng.integers(1, 4))}
        if rng.random() < 0.5:
            use["r0"] = float(rng.integers(1, 3))
        prods.append({"name": f"p{i}", "price_intercept": float(rng.integers(60, 160)),
                      "price_slope": float(rng.uniform(0.1, 0.6)), "unit_cost": float(rng.integers(10, 50)),
                      "fixed_cost": float(rng.integers(100, 1500)), "usage": use})
    groups = [{"name": "g0", "products": ["p0", "p1"], "fixed_cost": float(rng.integers(200, 2000))}]
    return {"name": f"decisions {seed}", "products": prods, "resources": res, "product_groups": groups}


def without(raw: dict, name: str) -> dict:
    """The raw scenario with product ``name`` stopped: removed, and from its groups (an empty group is never paid)."""
    out = copy.deepcopy(raw)
    out["products"] = [q for q in out["products"] if q["name"] != name]
    groups = []
    for g in out.get("product_groups", []):
        g["products"] = [m for m in g["products"] if m != name]
        if g["products"]:
            groups.append(g)
    out["product_groups"] = groups
    return out


def forced_on(raw: dict, name: str) -> dict:
    out = copy.deepcopy(raw)
    next(q for q in out["products"] if q["name"] == name)["must_run"] = True
    return out


def with_intercept(raw: dict, name: str, a: float) -> dict:
    out = copy.deepcopy(raw)
    next(q for q in out["products"] if q["name"] == name)["price_intercept"] = a
    return out


def reference_runs(raw: dict, name: str) -> bool:
    """Does the optimum make ``name``? Enumeration with it and without it (highspy directly)."""
    return enumerate_best(raw) > enumerate_best(without(raw, name)) + 1e-6


def analysed(raw: dict, **kw):
    s, _ = validate_scenario(raw)
    p = plan(s, rel_gap=1e-9)
    add_decision_analysis(p, s, rel_gap=1e-9, **kw)
    return p


@pytest.mark.parametrize("seed", range(4))
def test_cost_of_reversal_matches_enumeration_with_the_decision_forced(seed):
    raw = closing() if seed == 0 else random_small(seed)
    p = analysed(raw)
    best = enumerate_best(raw)
    assert p.profit == pytest.approx(best, rel=1e-7, abs=1e-4)
    seen = 0
    for x in p.products:
        e = x.decision
        assert e["decision_checked"]
        ref_forced = enumerate_best(without(raw, x.name) if x.running else forced_on(raw, x.name))
        assert e["cost_of_reversal"] == pytest.approx(best - ref_forced, rel=1e-6, abs=1e-3)
        assert e["cost_of_reversal"] >= 0
        seen += 1
    assert seen == len(raw["products"])


@pytest.mark.parametrize("seed", range(3))
def test_switch_intercept_flips_the_reference_decision_either_side(seed):
    raw = closing() if seed == 0 else random_small(seed, n=4)
    p = analysed(raw)
    flips = 0
    for x in p.products:
        sw = x.decision["switch_intercept"]
        if sw is None:
            continue
        a0 = next(q["price_intercept"] for q in raw["products"] if q["name"] == x.name)
        half = max(PRECISION * abs(a0), 1.0)  # the stated bracket: the flip lies within half of it of sw
        below = reference_runs(with_intercept(raw, x.name, sw - half), x.name)
        above = reference_runs(with_intercept(raw, x.name, sw + half), x.name)
        assert not below and above, (x.name, sw)
        assert reference_runs(with_intercept(raw, x.name, a0), x.name) == x.running
        flips += 1
    assert flips >= 1


def test_must_run_product_has_no_reversal_and_budget_zero_flags_every_product():
    raw = closing()
    raw["products"][0]["must_run"] = True
    p = analysed(raw)
    e = p.products[0].decision
    assert e["cost_of_reversal"] is None and e["switch_intercept"] is None and e["decision_checked"]
    assert "must_run" in e["decision_note"]
    assert p.products[0].to_dict()["cost_of_reversal"] is None
    q = analysed(closing(), budget=0.0)
    assert all(x.decision["decision_checked"] is False for x in q.products)
    assert all(x.decision["cost_of_reversal"] is None for x in q.products)
    assert any("were not analysed" in w for w in q.warnings)


def test_contribution_per_bottleneck_unit_by_hand():
    # closing(): assembly binds (plain alone, 100 units at price 100 − 0.2·100 = 80, unit cost 20);
    # gloss and rough stop: their first unit's price is the intercept.  Hand calculation.
    p = analysed(closing())
    per = {x.name: x.decision["contribution_per_bottleneck_unit"] for x in p.products}
    assert p.extras["decisions"]["bottleneck"] == "assembly"
    assert per == pytest.approx({"plain": (80 - 20) / 1.0, "gloss": (95 - 20) / 1.0, "rough": (70 - 30) / 0.5})


def test_cli_writes_decisions_to_json_and_the_table(tmp_path):
    import json

    import yaml
    from click.testing import CliRunner

    from planner.cli.main import main

    f = tmp_path / "closing.yaml"
    f.write_text(yaml.safe_dump(closing()))
    out = tmp_path / "plan.json"
    res = CliRunner().invoke(main, ["plan", str(f), "--decisions", "--json", str(out)])
    assert res.exit_code == 0, res.output
    prods = {q["name"]: q for q in json.loads(out.read_text())["products"]}
    ref_forced = enumerate_best(without(closing(), "plain"))  # plain stopped, highspy enumeration
    assert prods["plain"]["cost_of_reversal"] == pytest.approx(enumerate_best(closing()) - ref_forced, abs=1e-3)
    assert all(q["decision_checked"] for q in prods.values())
    assert "Product decisions" in res.output
    res = CliRunner().invoke(main, ["plan", str(f), "--no-decisions", "--json", str(out)])
    assert res.exit_code == 0, res.output
    assert "cost_of_reversal" not in json.loads(out.read_text())["products"][0]


@pytest.mark.parametrize("seed", range(3))
def test_slate_path_profit_counts_group_and_resource_fixed_costs(seed):
    # the capacity paths compare slates' profits: each must carry its groups' and resources' fixed costs
    from planner.analysis.capacity.analysis import plan_open, plan_slate
    from planner.analysis.capacity.paths import SlatePath
    from planner.api import engine_for
    from planner.scenario.arrays import mix_data

    raw = random_small(seed)
    s, _ = validate_scenario(raw)
    p = plan(s, rel_gap=1e-9)
    d = mix_data(s).with_closed(plan_open(p))
    slate = plan_slate(p, d.can_stop)
    path = SlatePath(engine_for(s, d), d, slate, np.eye(len(d.resources))[1])
    x = numbers(raw)
    run = np.array([q.running for q in p.products])
    ref = slate_value(x, run, plan_open(p))  # highspy directly on the raw numbers
    assert path.profit(0.0) == pytest.approx(ref, rel=1e-7, abs=1e-4)
    assert ref == pytest.approx(p.profit, rel=1e-7, abs=1e-4)
