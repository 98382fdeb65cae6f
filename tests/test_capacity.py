"""Shadow-price ranges and capacity options against published examples, hand working, re-solves and SCIP."""

from __future__ import annotations

import numpy as np
import pytest
import yaml

from planner import plan, validate_scenario
from planner.analysis.capacity.analysis import add_capacity_analysis
from planner.analysis.capacity.ranging import resource_ranges
from planner.scenario.arrays import mix_data
from planner.engine import Engine
from planner.scenario.synth import synthetic_scenario

from .conftest import CASES, needs_scip



def solve_mix(d, rel_gap):
    """The engine's plan of the arrays ``d`` (profit without the plant-wide fixed cost)."""
    return Engine(d).solve(rel_gap=rel_gap)

def raw(name: str) -> dict:
    return yaml.safe_load((CASES / name).read_text())


def analysed(s, choose=False):
    return add_capacity_analysis(plan(s, rel_gap=1e-9), s, choose=choose)


def test_wyndor_lp_ranges_hillier_lieberman_4_7():
    """Hillier & Lieberman, §4.7 (Wyndor, from memory): y2* = 1.5 holds for 6 ≤ b2 ≤ 18, y3* = 1 for
    12 ≤ b3 ≤ 24.  By hand: with plants 2 and 3 binding, x2 = b2/2 and x1 = (18 − b2)/3, so x1 ≥ 0
    needs b2 ≤ 18 and x1 ≤ 4 needs b2 ≥ 6; likewise x1 = (b3 − 12)/3 ∈ [0, 4] gives 12 ≤ b3 ≤ 24.
    Plant 1 (x1 ≤ 4, used 2) has price 0 down to 2."""
    s, _ = validate_scenario(raw("wyndor_lp.yaml"))
    p = analysed(s)
    r = {x.name: x for x in p.resources}
    assert r["plant_2"].shadow_price == pytest.approx(1.5, abs=1e-9)
    assert r["plant_2"].shadow_price_range == pytest.approx([6.0, 18.0], abs=1e-9)
    assert r["plant_3"].shadow_price == pytest.approx(1.0, abs=1e-9)
    assert r["plant_3"].shadow_price_range == pytest.approx([12.0, 24.0], abs=1e-9)
    assert r["plant_2"].shadow_price_slope == 0 and r["plant_3"].shadow_price_slope == 0  # LP: constant
    assert r["plant_1"].shadow_price_range[0] == pytest.approx(2.0, abs=1e-9)
    assert r["plant_1"].shadow_price_range[1] is None
    assert "doors falls to zero" in r["plant_2"].range_high_reason
    assert "plant_1 starts to bind" in r["plant_3"].range_high_reason


def test_wyndor_price_dependent_range_and_one_hour_option_13_2():
    """Hillier & Lieberman §13.2 variant: with plant 3 at 19 the optimum is 882.235 (gain 25.24 < 26),
    at 17 it is 830.235.  By hand, with only plant 3 binding: x1 = (126 − 3λ)/18, x2 = (182 − 2λ)/26 and
    3x1 + 2x2 = b3 give λ = 26(35 − b3)/17: slope −26/17; x1 = 0 at λ = 42 (b3 = 35 − 42·17/26) and
    x1 = 4 (plant 1 binds) at λ = 18 (b3 = 35 − 18·17/26)."""
    data = raw("wyndor_qp.yaml")
    data["options"] = [{"name": "one more hour in plant 3", "adds": {"plant_3": 1}, "cost": 0}]
    s, _ = validate_scenario(data)
    p = analysed(s)
    r3 = {x.name: x for x in p.resources}["plant_3"]
    assert r3.shadow_price == pytest.approx(26.0, abs=1e-9)
    assert r3.shadow_price_slope == pytest.approx(-26 / 17, rel=1e-12)
    assert r3.shadow_price_range == pytest.approx([35 - 42 * 17 / 26, 35 - 18 * 17 / 26], rel=1e-12)
    (o,) = p.extras["options"]
    assert o["profit_with"] == pytest.approx(882.235294117647, abs=1e-6)  # 857 + 26/17·16.5
    assert o["gain"] == pytest.approx(25.235294117647, abs=1e-6)
    assert o["gain"] < o["estimate"] == pytest.approx(26.0)
    assert o["net_gain"] == pytest.approx(o["gain"])
    # one hour less, re-solved: 857 − 26/17·17.5
    assert plan(s, rel_gap=1e-9, extra_capacity={"plant_3": -1}).profit == pytest.approx(830.235294117647, abs=1e-6)


@pytest.mark.parametrize("seed,fixed", [(1, "none"), (2, "some"), (4, "some"), (9, "some")])
def test_envelope_inside_range_matches_resolves(seed, fixed):
    """Envelope theorem: inside a range dProfit/dH = λ and the profit is the quadratic
    λ·δ + ½·slope·δ²; checked against independent mixed-integer re-solves (finite differences)."""
    s, _ = validate_scenario(synthetic_scenario(7, 3, seed=seed, fixed_costs=fixed, price_slope="mixed"))
    d = mix_data(s)
    base = solve_mix(d, rel_gap=1e-8)
    checked = 0
    for k, rg in enumerate(resource_ranges(d, base.running)):
        if rg.shadow_price <= 0:
            continue
        H0 = d.capacity[k]
        lo, hi = rg.low, rg.high if rg.high is not None else H0 + H0
        step = 0.45 * min(H0 - lo, hi - H0)
        if step <= 1e-6 * H0:
            continue
        prof = {}
        for dh in (-step, step, -step / 2, step / 2):
            cap = d.capacity.copy()
            cap[k] += dh
            prof[dh] = solve_mix(d.with_capacity(cap), rel_gap=1e-8).objective
        slope_fd = (prof[step / 2] - prof[-step / 2]) / step
        assert slope_fd == pytest.approx(rg.shadow_price, rel=1e-6)
        curv_fd = (prof[step] - 2 * base.objective + prof[-step]) / step**2
        assert curv_fd == pytest.approx(rg.slope, rel=1e-4, abs=1e-6 * rg.shadow_price / step)
        for dh in (-step, step):
            assert prof[dh] == pytest.approx(base.objective + rg.shadow_price * dh + 0.5 * rg.slope * dh**2,
                                             rel=1e-9)
        checked += 1
    assert checked >= 1


def overtime_case(cost_per_hour: float) -> dict:
    data = raw("wyndor_qp.yaml")
    data["options"] = [{"name": "plant 3 overtime", "adds_up_to": {"plant_3": 10}, "cost_per_unit": cost_per_hour}]
    return data


def test_overtime_used_until_shadow_price_falls_to_its_cost():
    """Overtime at a premium (time-and-a-half on a base rate of 13.33 is 20 per hour: common practice,
    US FLSA, 29 U.S.C. §207) is worth buying until λ(b3) = 26(35 − b3)/17 falls to 20, i.e. up to
    b3 = 35 − 20·17/26 (hand working above): 3.923 hours."""
    s, _ = validate_scenario(overtime_case(20.0))
    p = analysed(s, choose=True)
    (o,) = p.extras["options"]
    hours = 35 - 20 * 17 / 26 - 18
    assert o["used"] * 10 == pytest.approx(hours, rel=1e-9)
    assert o["cost"] == pytest.approx(20 * hours, rel=1e-9)
    assert o["net_gain"] == pytest.approx(26 / 17 * (35 * hours - ((18 + hours) ** 2 - 18**2) / 2) - 20 * hours, rel=1e-9)
    pick = p.extras["option_pick"]["picked"]
    assert pick[0]["adds"]["plant_3"] == pytest.approx(hours, rel=1e-9)
    at = plan(s, rel_gap=1e-9, extra_capacity={"plant_3": hours})
    assert {r.name: r.shadow_price for r in at.resources}["plant_3"] == pytest.approx(20.0, rel=1e-9)
    # dearer than the first hour is worth (26): not used at all
    s2, _ = validate_scenario(overtime_case(26.5))
    (o2,) = add_capacity_analysis(plan(s2), s2).extras["options"]
    assert o2["used"] == 0 and o2["net_gain"] == 0


def test_whole_option_value_is_a_resolve_difference(demo_path):
    """Each all-or-nothing option on its own equals plan(with the amount) − plan(without), re-solved
    by the planner's main route; the estimate λ × amount overstates it on the demo's bottleneck."""
    from planner import load_scenario

    s, _ = load_scenario(demo_path)
    p = analysed(s)
    base = plan(s, rel_gap=1e-9).profit
    for o, opt in zip(p.extras["options"], s.options):
        if opt.adds is None:
            continue
        with_it = plan(s, rel_gap=1e-9, extra_capacity=dict(opt.adds)).profit
        assert o["profit_with"] == pytest.approx(with_it, rel=1e-7)
        assert o["gain"] == pytest.approx(with_it - base, abs=1e-6 * abs(base))
        assert o["net_gain"] == pytest.approx(with_it - base - opt.cost, abs=1e-6 * abs(base))
        assert o["break_even_cost"] == pytest.approx(o["gain"])
        assert o["estimate"] > o["gain"]  # the shadow price falls over 624 h
    booth = {r.name: r for r in p.resources}["finishing booth"]
    assert booth.shadow_price_range[0] < booth.capacity < booth.shadow_price_range[1]


@needs_scip
@pytest.mark.parametrize("seed", [3, 8])
def test_joint_pick_against_scip(seed):
    """The joint choice (binary shifts, continuous overtime and premium material) against SCIP solving
    the mixed-integer QP with option variables built from the raw numbers."""
    from .capacity_reference import scip_plan_with_options

    data = synthetic_scenario(8, 3, seed=seed, fixed_costs="some", price_slope="mixed")
    caps = {r["name"]: r["capacity"] for r in data["resources"]}
    data["options"] = [
        {"name": "extra shift r000", "adds": {"r000": 0.3 * caps["r000"]}, "cost": 1000.0},
        {"name": "overtime r001", "adds_up_to": {"r001": 0.2 * caps["r001"]}, "cost_per_unit": 15.0},
        {"name": "premium r002", "adds_up_to": {"r002": 0.25 * caps["r002"]}, "cost_per_unit": 40.0},
        {"name": "shift on two", "adds": {"r000": 0.1 * caps["r000"], "r002": 0.1 * caps["r002"]}, "cost": 500.0},
    ]
    s, _ = validate_scenario(data)
    p = analysed(s, choose=True)
    ref, scales = scip_plan_with_options(s)
    pick = p.extras["option_pick"]
    assert pick["profit"] == pytest.approx(ref, rel=1e-6)
    got = {x["name"]: x["used"] for x in pick["picked"]}
    for name, z in scales.items():
        if name.startswith(("extra shift", "shift on")):
            assert got.get(name, 0.0) == pytest.approx(round(z))


def test_choose_options_enumerates_whole_options(demo_path):
    """On the demo the joint pick equals the best over every subset of the all-or-nothing options (with
    the partial ones free), each re-solved: enumeration."""
    import itertools

    from planner import load_scenario
    from planner.analysis.capacity.data import with_options

    s, _ = load_scenario(demo_path)
    p = analysed(s, choose=True)
    d = with_options(mix_data(s), s)
    whole = np.flatnonzero(d.opt_whole)
    best = -np.inf
    for bits in itertools.product([False, True], repeat=whole.size):
        taken = np.zeros(d.n_options, dtype=bool)
        taken[whole] = bits
        fixed = d.with_whole_taken(taken)  # shifts decided, partial options free
        best = max(best, solve_mix(fixed, rel_gap=1e-9).objective - d.whole_cost(taken) - s.plant_fixed_cost)
    assert p.extras["option_pick"]["profit"] == pytest.approx(best, rel=1e-8)


def test_plan_cli_json_has_ranges_and_options(demo_path, tmp_path):
    import json

    from click.testing import CliRunner

    from planner.cli.main import main

    out = tmp_path / "plan.json"
    res = CliRunner().invoke(main, ["plan", str(demo_path), "--json", str(out), "--choose-options"])
    assert res.exit_code == 0, res.output
    assert "Shadow prices and their ranges" in res.output and "Capacity options" in res.output
    assert "Saturday shift in finishing" in res.output and "local law" in res.output
    data = json.loads(out.read_text())
    booth = next(r for r in data["resources"] if r["name"] == "finishing booth")
    low, high = booth["shadow_price_range"]
    assert low < booth["capacity"] < high and booth["shadow_price_slope"] < 0
    assert {o["name"] for o in data["options"]} == {"Saturday shift in finishing", "CNC overtime", "premium board"}
    for o in data["options"]:
        assert set(o) >= {"name", "cost", "profit_with", "gain", "net_gain", "slate_changes"}
        assert o["net_gain"] == pytest.approx(o["gain"] - o["cost"])
    assert data["option_pick"]["profit"] >= data["profit"]


def test_time_budget_flags_unchecked_ends_and_keeps_the_slate_range():
    """With no time for re-checks, each range is the fixed slate's own (the parametric QP's), flagged, and warned of."""
    s, _ = validate_scenario(synthetic_scenario(8, 3, seed=2, fixed_costs="some", price_slope="mixed"))
    d = mix_data(s)
    base = solve_mix(d, rel_gap=1e-8)
    full = resource_ranges(d, base.running)
    rushed = resource_ranges(d, base.running, deadline=0.0)  # a deadline already passed
    assert any(not b.slates_checked for b in rushed)
    for a, b in zip(full, rushed):
        assert b.shadow_price == pytest.approx(a.shadow_price) and b.slope == pytest.approx(a.slope)
        if not b.slates_checked:
            assert "time budget" in (b.why_low + b.why_high)
        # the fixed slate's range can only be wider than the one cut short by a slate change
        assert (b.high is None) or (a.high is not None and b.high >= a.high - 1e-9 * max(abs(a.high), 1))
        assert (b.low is None) or (a.low is not None and b.low <= a.low + 1e-9 * max(abs(a.low), 1))
    p = add_capacity_analysis(plan(s, rel_gap=1e-9), s, budget=0.0)
    flagged = [r for r in p.resources if r.range_slates_checked is False]
    assert all(r.range_slates_checked is not None for r in p.resources)
    assert flagged and any("not fully re-checked" in w for w in p.warnings)


@pytest.mark.parametrize("seed", [3, 5, 8])
def test_slack_limit_cut_to_its_use_keeps_the_plan(seed):
    """Common practice (a smaller feasible set that still holds the optimum keeps it optimal): cutting a
    slack limit down to its use, re-solved from scratch, gives the same profit."""
    s, _ = validate_scenario(synthetic_scenario(9, 4, seed=seed, fixed_costs="some"))
    d = mix_data(s)
    base = solve_mix(d, rel_gap=1e-9)
    used = d.used(base.volume)
    for k, rg in enumerate(resource_ranges(d, base.running)):
        if used[k] < d.capacity[k] * (1 - 1e-6) and rg.low is not None:
            cap = d.capacity.copy()
            cap[k] = rg.low
            assert solve_mix(d.with_capacity(cap), rel_gap=1e-9).objective == pytest.approx(base.objective, rel=1e-7)


def test_ranges_agree_whichever_exact_route_re_solves(monkeypatch):
    """Range ends re-checked by slate enumeration and by the Lagrangian + cut MILP route give the same ranges."""
    import planner.engine.search as search

    s, _ = validate_scenario(synthetic_scenario(10, 3, seed=4, fixed_costs="near"))
    d = mix_data(s)
    base = solve_mix(d, rel_gap=1e-9)
    fast = resource_ranges(d, base.running)
    monkeypatch.setattr(search, "ENUMERATE_UP_TO", 0)  # every re-solve through the cut MILP
    slow = resource_ranges(d, base.running)
    for a, b in zip(fast, slow):
        for x, y in ((a.low, b.low), (a.high, b.high)):
            assert (x is None) == (y is None)
            if x is not None:
                assert x == pytest.approx(y, rel=1e-6)
