"""Plans over several periods (issue 14): validation, the engine against SCIP, properties.

Outside references: SCIP on the mixed-integer QP written from the raw scenario
numbers (tests/reference_periods.py, nothing from planner/ or models/), and the
one-period planner path (products as blocks, itself held to SCIP and
enumeration in tests/test_engine.py and tests/test_reference.py).
"""

from __future__ import annotations

import copy
import json
import random

import numpy as np
import pytest
from hypothesis import HealthCheck, given, settings, strategies as st

from planner.api import engine_for, plan
from planner.errors import ScenarioError
from planner.scenario.arrays import mix_data
from planner.scenario.validate import validate_scenario
from tests.reference_periods import scip_periods

QUARTER = {
    "name": "quarter",
    "periods": ["October", "November", "December"],
    "products": [
        {"name": "oak bookcase", "price_intercept": [620, 640, 700], "price_slope": 0.18, "unit_cost": 240,
         "fixed_cost": 38000, "holding_cost": 3.0, "initial_stock": 50, "final_stock": 20,
         "stock_usage": {"warehouse": 0.4}, "usage": {"saw line": 0.8}},
        {"name": "pine shelf", "price_intercept": [300, 280, 420], "price_slope": [0.1, 0.1, 0.12],
         "unit_cost": 110, "fixed_cost": 9000, "holding_cost": 1.5, "usage": {"saw line": 0.5},
         "stock_usage": {"warehouse": 0.2}},
    ],
    "resources": [{"name": "saw line", "capacity": [860, 900, 700]}, {"name": "warehouse", "capacity": 300}],
}


def random_raw(seed: int, n: int = 3, T: int = 3, R: int = 2, tight: bool = True) -> dict:
    """A seeded scenario over T periods (numbers of our own invention)."""
    g = random.Random(seed)
    res = [f"r{k}" for k in range(R)]
    products = []
    for i in range(n):
        p = {"name": f"p{i}", "price_intercept": [round(g.uniform(60, 140), 2) for _ in range(T)],
             "price_slope": [round(g.uniform(0.02, 0.3), 3) for _ in range(T)],
             "unit_cost": [round(g.uniform(10, 50), 2) for _ in range(T)],
             "fixed_cost": g.choice([0, round(g.uniform(100, 3000), 1)]),
             "holding_cost": round(g.uniform(0, 6), 2),
             "initial_stock": g.choice([0, 0, round(g.uniform(0, 150), 1)]),
             "final_stock": g.choice([0, 0, round(g.uniform(0, 40), 1)]),
             "usage": {r: round(g.uniform(0.2, 2.0), 2) for r in res if g.random() < 0.8}}
        if g.random() < 0.3:
            p["stock_usage"] = {res[-1]: round(g.uniform(0.05, 0.5), 2)}
        if g.random() < 0.3:
            p["max_volume"] = [round(g.uniform(20, 200), 1) for _ in range(T)]
        if g.random() < 0.2:
            p["min_volume"] = round(g.uniform(0, 10), 1)
        if g.random() < 0.1:
            p["must_run"] = True
        products.append(p)
    scale = 60 if tight else 5000
    resources = [{"name": r, "capacity": [round(g.uniform(0.5, 1.5) * scale * n / 2, 1) for _ in range(T)]}
                 for r in res]
    return {"name": f"random {seed}", "periods": [f"m{t + 1}" for t in range(T)], "products": products,
            "resources": resources}


def _plan(raw: dict):
    s, _ = validate_scenario(copy.deepcopy(raw))
    return s, plan(s, rel_gap=1e-9)


def test_quarter_matches_scip():
    """The example of the issue's contract (numbers of our own) against SCIP on the raw numbers."""
    s, p = _plan(QUARTER)
    ref, sol, status = scip_periods(QUARTER)
    assert status == "optimal"
    assert p.profit == pytest.approx(ref, rel=1e-7)
    for prod in p.products:
        made, sold = sol[prod.name]
        got = p.extras["periods"]["products"][prod.name]
        assert [x["sold"] for x in got] == pytest.approx(sold, rel=1e-5, abs=1e-4)
        assert [x["made"] for x in got] == pytest.approx(made, rel=1e-5, abs=1e-4)


@pytest.mark.parametrize("seed", range(40))
def test_random_against_scip(seed):
    """Seeded scenarios with fixed costs, stock, final stock, stock usage, caps and commitments: SCIP's optimum.

    (Seed 17 once found the commitments check refusing a feasible plan: it fixed sales at the commitments,
    so stock that selling more would have cleared out of a warehouse counted against its capacity.)"""
    raw = random_raw(seed, n=3 + seed % 3, T=2 + seed % 3)
    try:
        s, p = _plan(raw)
    except Exception as e:  # the reference must then find no plan either
        ref = scip_periods(raw, time_limit=30)
        assert ref[2] == "infeasible", (e, ref)
        return
    ref, _, status = scip_periods(raw, time_limit=30)
    assert status == "optimal"
    assert p.profit == pytest.approx(ref, rel=1e-6, abs=1e-4)


@pytest.mark.parametrize("seed", range(6))
def test_best_response_is_the_priced_optimum(seed):
    """Each family's best response at λ sums to the Lagrangian dual function: SCIP on the priced problem.

    Capacities are generous, so the capacity-derived sales bounds the engine may use never bind.
    """
    raw = random_raw(100 + seed, n=3, T=3, tight=False)
    for p in raw["products"]:
        p["max_volume"] = [150.0, 160.0, 170.0]
    s, _ = validate_scenario(copy.deepcopy(raw))
    d = mix_data(s)
    eng = engine_for(s, d)
    prob = eng.problem(d)
    g = np.random.default_rng(seed)
    lam = g.uniform(0, 8, prob.m) * (g.random(prob.m) < 0.7)
    value = float(lam @ prob.capacity + sum(r.value for r in prob.respond(lam)))
    T = len(raw["periods"])
    prices = {(r["name"], t): lam[k * T + t] for k, r in enumerate(raw["resources"]) for t in range(T)}
    ref, _, status = scip_periods(raw, prices=prices)
    assert status == "optimal"
    assert value == pytest.approx(ref, rel=1e-7, abs=1e-5)


def test_one_period_equals_today():
    """A file with one period plans as the same file without periods (profit, volumes, shadow prices)."""
    base = {"name": "one", "products": [
        {"name": "a", "price_intercept": 100, "price_slope": 0.2, "unit_cost": 30, "fixed_cost": 2000,
         "usage": {"m": 1.0, "n": 0.5}},
        {"name": "b", "price_intercept": 80, "price_slope": 0.1, "unit_cost": 20, "fixed_cost": 500,
         "usage": {"m": 0.5}, "max_volume": 250},
        {"name": "c", "price_intercept": 60, "price_slope": 0.3, "unit_cost": 50, "fixed_cost": 900,
         "usage": {"n": 1.0}}],
        "resources": [{"name": "m", "capacity": 200}, {"name": "n", "capacity": 120}]}
    one = copy.deepcopy(base)
    one["periods"] = ["Q1"]
    _, today = _plan(base)
    _, months = _plan(one)
    assert months.profit == pytest.approx(today.profit, rel=1e-9)
    for x, y in zip(months.products, today.products):
        assert x.volume == pytest.approx(y.volume, rel=1e-7, abs=1e-7) and x.running == y.running
    assert [r.shadow_price for r in months.resources] == pytest.approx([r.shadow_price for r in today.resources],
                                                                          rel=1e-6, abs=1e-7)


def test_json_contract():
    """Top-level periods; per-product and per-resource period lists; volumes are horizon totals."""
    s, p = _plan(QUARTER)
    out = json.loads(p.to_json())
    assert out["periods"] == QUARTER["periods"]
    for prod in out["products"]:
        rows = prod["periods"]
        assert [r["period"] for r in rows] == QUARTER["periods"]
        assert prod["volume"] == pytest.approx(sum(r["sold"] for r in rows))
        assert set(rows[0]) == {"period", "made", "sold", "stock", "price"}
    for res in out["resources"]:
        assert [r["period"] for r in res["periods"]] == QUARTER["periods"]
        assert set(res["periods"][0]) == {"period", "capacity", "used", "shadow_price"}


def _check_raw_plan(raw: dict, out: dict) -> None:
    """Stock balances and every month's capacity, recomputed from the raw numbers and the JSON."""
    T = len(raw["periods"])
    use = np.zeros((len(raw["resources"]), T))
    names = [r["name"] for r in raw["resources"]]
    for p, q in zip(raw["products"], out["products"]):
        stock = float(p.get("initial_stock", 0))
        for t, row in enumerate(q["periods"]):
            stock += row["made"] - row["sold"]
            assert row["stock"] == pytest.approx(stock, abs=1e-6 * max(1, abs(stock)))
            assert stock >= -1e-6
            for r, h in p.get("usage", {}).items():
                use[names.index(r), t] += h * row["made"]
            for r, h in p.get("stock_usage", {}).items():
                use[names.index(r), t] += h * row["stock"]
        assert stock >= float(p.get("final_stock", 0)) - 1e-6
    for k, r in enumerate(raw["resources"]):
        cap = r["capacity"] if isinstance(r["capacity"], list) else [r["capacity"]] * T
        assert np.all(use[k] <= np.asarray(cap) * (1 + 1e-7) + 1e-6)


@settings(max_examples=15, deadline=None, derandomize=True, suppress_health_check=[HealthCheck.too_slow])
@given(st.integers(0, 10_000), st.integers(1, 4), st.integers(1, 5))
def test_property_stock_and_capacity(seed, T, n):
    """Hypothesis: every plan balances its stock and stays within each month's capacity (raw numbers)."""
    raw = random_raw(seed, n=n, T=T)
    try:
        s, p = _plan(raw)
    except Exception:
        return  # infeasible draws are checked against SCIP in test_random_against_scip
    _check_raw_plan(raw, json.loads(p.to_json()))


@pytest.mark.parametrize("change, where, text", [
    (lambda r: r["products"][0].update(price_intercept=[1, 2]), "products[oak bookcase].price_intercept",
     "has 2 values but there are 3 periods (October, November, December)"),
    (lambda r: r["resources"][0].update(capacity=[1, 2, 3, 4]), "resources[saw line].capacity",
     "has 4 values but there are 3 periods"),
    (lambda r: r["products"][0].update(setup_cost=100), "products[oak bookcase].setup_cost",
     "setup costs and times are not planned yet"),
    (lambda r: r["products"][0].update(min_volume=[0, 9, 0], max_volume=[5, 5, 5]),
     "products[oak bookcase].min_volume", "in November: committed volume 9 exceeds max_volume 5"),
    (lambda r: r["products"][0].update(stock_usage={"wherehouse": 1}),
     "products[oak bookcase].stock_usage.wherehouse", "names a resource that is not defined"),
    (lambda r: r.update(periods=["Oct", "oct"]), "periods[oct]", "is the same name as periods[1]"),
])
def test_period_messages(change, where, text):
    raw = copy.deepcopy(QUARTER)
    change(raw)
    with pytest.raises(ScenarioError) as e:
        validate_scenario(raw)
    assert any(p.where == where and text in p.message for p in e.value.problems), e.value.problems


def test_lists_without_periods_refused():
    raw = copy.deepcopy(QUARTER)
    del raw["periods"]
    with pytest.raises(ScenarioError) as e:
        validate_scenario(raw)
    got = {(p.where, p.message) for p in e.value.problems}
    assert ("products[oak bookcase].price_intercept",
            "is a list of 3 values but the scenario has no periods") in got
    assert ("products[oak bookcase].initial_stock", "only applies with periods") in got


@pytest.mark.parametrize("seed", range(4))
def test_cut_milp_converges_to_scip(seed):
    """The months family's tangent-cut MILP (cuts added at each MILP solution) is a relaxation whose bound
    closes on SCIP's optimum of the raw mixed-integer QP."""
    from planner.engine.cutmilp import CutMilp

    raw = random_raw(300 + seed, n=5, T=3)
    for p in raw["products"]:
        p["fixed_cost"] = 800.0
    s, _ = validate_scenario(copy.deepcopy(raw))
    d = mix_data(s)
    prob = engine_for(s, d).problem(d)
    milp = CutMilp(prob)
    ref, _, status = scip_periods(raw)
    assert status == "optimal"
    for _ in range(200):
        r = milp.solve(None, 1e-10)
        assert r.bound >= ref - 1e-6 * max(abs(ref), 1.0)  # a relaxation: never below the optimum
        if not milp.cuts(r.x):
            break
    assert r.bound == pytest.approx(ref, rel=1e-5)


def _one_period_pair(seed: int) -> tuple[dict, dict]:
    """A seeded scenario without periods, and the same with one period (lists of one number)."""
    raw = random_raw(seed, n=4, T=1)
    for p in raw["products"]:
        for f in ("holding_cost", "initial_stock", "final_stock", "stock_usage"):
            p.pop(f, None)
    months = copy.deepcopy(raw)
    today = copy.deepcopy(raw)
    del today["periods"]
    for p in today["products"]:
        for f in ("price_intercept", "price_slope", "unit_cost", "max_volume"):
            if isinstance(p.get(f), list):
                p[f] = p[f][0]
    for r in today["resources"]:
        r["capacity"] = r["capacity"][0]
    return today, months


@settings(max_examples=20, deadline=None, derandomize=True, suppress_health_check=[HealthCheck.too_slow])
@given(st.integers(0, 100_000))
def test_property_one_period_equals_today(seed):
    """Hypothesis: a one-period file plans as the same file without periods (profit and each product's volume)."""
    today, months = _one_period_pair(seed)
    try:
        _, a = _plan(today)
    except Exception as e:
        with pytest.raises(type(e)):
            _plan(months)
        return
    _, b = _plan(months)
    assert b.profit == pytest.approx(a.profit, rel=1e-7, abs=1e-6)
    for x, y in zip(b.products, a.products):
        assert x.volume == pytest.approx(y.volume, rel=1e-5, abs=1e-5)


@pytest.mark.parametrize("seed", range(3))
def test_model_of_record_agrees(seed):
    """The Pyomo model of record over periods (models/months.py), solved by SCIP through Pyomo, agrees with the
    engine and with SCIP on the raw numbers."""
    import pyomo.environ as pyo

    from models.months import build_period_model

    raw = random_raw(700 + seed, n=4, T=3)
    s, p = _plan(raw)
    d = mix_data(s)
    m = build_period_model(d.periods, d.products)
    got = pyo.SolverFactory("scip_direct" if pyo.SolverFactory("scip_direct").available(False) else "scip")
    opt = got.solve(m, options={"limits/gap": 1e-9})
    assert str(opt.solver.termination_condition) == "optimal"
    assert pyo.value(m.profit) == pytest.approx(p.profit, rel=1e-6)
    assert pyo.value(m.profit) == pytest.approx(scip_periods(raw)[0], rel=1e-6)


def test_cli_plan_and_refusals(tmp_path):
    """`planner plan` over periods writes the contract; commands that do not handle periods yet refuse (exit 2)."""
    import yaml
    from click.testing import CliRunner

    from planner.cli.main import main

    path = tmp_path / "quarter.yaml"
    path.write_text(yaml.safe_dump(QUARTER, sort_keys=False))
    out = tmp_path / "plan.json"
    res = CliRunner().invoke(main, ["plan", str(path), "--json", str(out)])
    assert res.exit_code == 0, res.output
    assert "Per period: made / sold / stock" in res.output and "November" in res.output
    assert json.loads(out.read_text())["periods"] == QUARTER["periods"]
    for args, what in ((["sweep", str(path), "--resource", "saw line", "--to", "1000"], "planner sweep"),
                       (["report", str(path), "--out", str(tmp_path / "r")], "planner report"),
                       (["plan", str(path), "--solver", "scip"], "--solver"),
                       (["convert", str(path), str(tmp_path / "q.xlsx")], "convert to a workbook")):
        res = CliRunner().invoke(main, args)
        assert res.exit_code == 2, (args, res.output)
        assert f"periods: {what}" in res.stderr and "is not supported with periods yet" in res.stderr


def test_cli_infeasible_names_the_month(tmp_path):
    """Commitments over periods that cannot fit: exit 3, the resource and the month named (hand calculation:
    500 committed in February, at most 100 + 300 press hours by then, 100 short)."""
    import yaml
    from click.testing import CliRunner

    from planner.cli.main import main

    raw = {"name": "tight", "periods": ["Jan", "Feb"], "products": [
        {"name": "a", "price_intercept": 100, "unit_cost": 10, "price_slope": 0.1, "min_volume": [0, 500],
         "usage": {"press": 1}}], "resources": [{"name": "press", "capacity": [100, 300], "unit": "h"}]}
    path = tmp_path / "tight.yaml"
    path.write_text(yaml.safe_dump(raw, sort_keys=False))
    res = CliRunner().invoke(main, ["plan", str(path)])
    assert res.exit_code == 3
    assert "press in Feb: the committed sales and final stock need 100 h more than its capacity 300" in res.stderr


def test_buying_in_with_periods_is_refused_by_name(tmp_path):
    """Buying in is planned for one period only: with periods it is refused, naming the product and field."""
    f = tmp_path / "s.yaml"
    f.write_text("name: t\nperiods: [Jan, Feb]\nproducts:\n"
                 "  - {name: shelf, price_intercept: 100, price_slope: 0.1, unit_cost: 30, buy_cost: 50,"
                 " buy_max: 10, usage: {press: 1}}\nresources:\n  - {name: press, capacity: 100}\n")
    from click.testing import CliRunner

    from planner.cli.main import main
    out = CliRunner().invoke(main, ["plan", str(f)])
    assert out.exit_code == 2
    assert "products[shelf].buy_max: buying in is not supported with periods yet" in out.output


def test_final_stock_commitment_and_decisions_over_periods_are_said_plainly(tmp_path):
    """A product that must leave more stock than it starts with is 'committed' by its final_stock (not
    'must_run'), and the product decisions are not reported over periods (flagged and warned of)."""
    import json

    from click.testing import CliRunner

    from planner.cli.main import main
    f = tmp_path / "s.yaml"
    f.write_text("name: t\nperiods: [Jan, Feb]\nproducts:\n"
                 "  - {name: mug, price_intercept: 18, price_slope: 0.002, unit_cost: 5.5, fixed_cost: 400,"
                 " usage: {kiln: 0.05}}\n"
                 "  - {name: platter, price_intercept: 70, price_slope: 0.03, unit_cost: 21, fixed_cost: 900,"
                 " final_stock: 50, usage: {kiln: 0.4}}\nresources:\n  - {name: kiln, capacity: [400, 300]}\n")
    out = tmp_path / "p.json"
    res = CliRunner().invoke(main, ["plan", str(f), "--json", str(out)])
    assert res.exit_code == 0, res.output
    assert "committed: its final_stock makes it run" in res.output
    plan = json.loads(out.read_text())
    platter = next(p for p in plan["products"] if p["name"] == "platter")
    assert platter["forced"] == "final_stock" and platter["running"] is True
    assert all(p.get("decision_checked") is False for p in plan["products"])
    assert any("not computed yet for plans over periods" in w for w in plan["warnings"])
