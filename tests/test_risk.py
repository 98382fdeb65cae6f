"""Monte Carlo risk: reproducibility on any cluster, the deterministic limit, closed forms, and SCIP.

Outside references: the expectation of a linear function (exact); the unit normal
loss function of inventory theory, E[(X − k)⁺] = σ·G((k − μ)/σ) with
G(z) = φ(z) − z·(1 − Φ(z)) (Silver, Pyke & Peterson, *Inventory Management and
Production Planning and Scheduling*, 3rd ed., §B.3, from memory); the means of
the triangular (low + mode + high)/3 and uniform (low + high)/2 distributions
(handbook values); SCIP through pyscipopt for the re-optimised samples; for the
robust choice, every slate's plan from the highspy enumeration of tests/reference.py
scored on the samples in numpy with the README's economics (``scored_by_hand``).
"""

from __future__ import annotations

import json
import math

import numpy as np
import pytest
from click.testing import CliRunner

from planner import load_scenario, validate_scenario
from planner.cli.main import main
from planner.scenario.arrays import mix_data
from planner.analysis.risk import run_risk
from planner.analysis.risk.evaluate import sample_arrays, sample_data
from planner.engine import Engine
from planner.analysis.risk.sampling import draw_samples

from .conftest import needs_scip


def small_uncertain() -> dict:
    """Three products on two resources, with every kind of distribution (invented)."""
    return {
        "name": "small risk", "plant_fixed_cost": 5000,
        "products": [
            {"name": "alpha", "price_intercept": 120, "price_slope": 0.05, "unit_cost": 40, "fixed_cost": 9000,
             "usage": {"press": 1.0, "resin": 2.0}},
            {"name": "beta", "price_intercept": 150, "price_slope": 0.08, "unit_cost": 60, "fixed_cost": 12000,
             "usage": {"press": 1.5, "resin": 1.0}},
            {"name": "gamma", "price_intercept": 90, "price_slope": 0.03, "unit_cost": 35, "fixed_cost": 15000,
             "min_run": 200, "usage": {"press": 0.8, "resin": 1.5}},
        ],
        "resources": [{"name": "press", "capacity": 900}, {"name": "resin", "capacity": 1500}],
        "uncertainty": [
            {"product": "alpha", "field": "price_intercept", "distribution": "normal", "sd": 12},
            {"product": "beta", "field": "price_intercept", "distribution": "triangular",
             "low": 130, "mode": 150, "high": 160},
            {"product": "gamma", "field": "price_intercept", "distribution": "uniform", "low": 80, "high": 100},
            {"product": "beta", "field": "price_slope", "distribution": "normal", "sd": 0.01},
            {"product": "alpha", "field": "unit_cost", "distribution": "normal", "sd": 3},
            {"resource": "press", "field": "capacity", "distribution": "uniform", "low": 800, "high": 950},
        ],
        "correlations": [{"products": ["alpha", "beta"], "rho": 0.5}],
    }


def test_same_seed_identical_in_process_and_on_a_two_worker_cluster():
    from distributed import LocalCluster

    s, _ = validate_scenario(small_uncertain())
    one = run_risk(s, samples=40, seed=11, workers=0, chunk=10)
    with LocalCluster(n_workers=2, threads_per_worker=1, processes=False, dashboard_address=None) as cluster:
        two = run_risk(s, samples=40, seed=11, scheduler=cluster.scheduler_address, chunk=10)  # as --scheduler
    assert two.info["workers"] == 2
    assert one.info["scheduler"] == "in-process"
    for field in ("plan_profit", "best_profit", "status", "running", "shadow", "sold"):
        assert np.array_equal(getattr(one, field), getattr(two, field), equal_nan=True), field
    assert json.dumps(one.to_dict()["products"]) == json.dumps(two.to_dict()["products"])
    other = run_risk(s, samples=40, seed=12, workers=0, chunk=10)
    assert not np.array_equal(one.plan_profit, other.plan_profit)  # the seed matters


def test_zero_variance_reproduces_the_deterministic_plan(demo_path):
    demo, _ = load_scenario(demo_path)
    raw = demo.model_dump()
    for u in raw["uncertainty"]:
        if u["distribution"] == "normal":
            u["sd"] = 0.0
        else:
            base = (demo.resource(u["resource"]).capacity if u["resource"] else
                    getattr(demo.product(u["product"]), u["field"]))
            u.update(low=base, high=base, mode=base if u["distribution"] == "triangular" else None)
    s, _ = validate_scenario(raw)
    r = run_risk(s, samples=8, seed=3, workers=0)
    p = r.plan
    assert np.all(r.status == 0)
    np.testing.assert_allclose(r.plan_profit, p.profit, rtol=1e-12)
    # Re-optimising the unchanged scenario gives the plan again (both certified to 1e-4).
    np.testing.assert_allclose(r.best_profit, p.profit, rtol=1e-4)
    d = r.to_dict()
    assert d["probability_of_loss"] == 0.0
    assert d["value_of_perfect_information"] == pytest.approx(0.0, abs=1e-4 * abs(p.profit))
    for k, prod in enumerate(d["products"]):
        assert prod["probability_running"] == (1.0 if p.products[k].running else 0.0)
        assert prod["plan_sold"]["p5"] == pytest.approx(p.products[k].volume, rel=1e-12, abs=1e-9)
    for k, res in enumerate(d["resources"]):
        assert res["shadow_price"]["mean"] == pytest.approx(p.resources[k].shadow_price, rel=1e-6, abs=1e-6)


def _one_product(slope: float, sd: float) -> dict:
    return {"name": "one", "plant_fixed_cost": 1000,
            "products": [{"name": "lamp", "price_intercept": 200, "price_slope": slope, "unit_cost": 80,
                          "fixed_cost": 4000, "max_volume": 900, "usage": {"bench": 1.0}}],
            "resources": [{"name": "bench", "capacity": 5000}],
            "uncertainty": [{"product": "lamp", "field": "price_intercept", "distribution": "normal", "sd": sd}]}


def test_fixed_price_product_expected_profit_is_linear_in_the_intercept():
    # Fixed price (slope 0): the plan makes its cap D = 900 and sells it at the sampled price a,
    # so profit = (a − v)·D − F − plant is linear in a: E = (E[a] − v)·D − F − plant exactly,
    # with standard deviation D·sd.
    s, _ = validate_scenario(_one_product(0.0, 15.0))
    r = run_risk(s, samples=400, seed=5, workers=0)
    D = 900.0
    closed = (200 - 80) * D - 4000 - 1000
    se = D * 15.0 / math.sqrt(400)
    mean = r.to_dict()["plan_profit"]["mean"]
    assert abs(mean - closed) <= 4 * se
    assert r.to_dict()["plan_profit"]["sd"] == pytest.approx(D * 15.0, rel=0.15)


def test_sloped_product_expected_profit_matches_the_normal_loss_function():
    # Price fixed at p = a − b·D*, D* = (a − v)/(2b) = 600.  Demand at p is Q = (a_s − p)/b
    # ~ N(D*, σ = sd/b); sold = clip(Q, 0, D*), so E[sold] = D* − σ·G(0) + σ·G(D*/σ)
    # (unit normal loss function G), and E[profit] = (p − v)·E[sold] − F − plant.
    b, sd = 0.1, 12.0
    s, _ = validate_scenario(_one_product(b, sd))
    r = run_risk(s, samples=400, seed=9, workers=0)
    D = (200 - 80) / (2 * b)
    p = 200 - b * D
    sigma = sd / b

    def phi(z):
        return math.exp(-z * z / 2) / math.sqrt(2 * math.pi)

    def G(z):
        return phi(z) - z * (1 - 0.5 * (1 + math.erf(z / math.sqrt(2))))

    sold = D - sigma * G(0.0) + sigma * G(D / sigma)
    closed = (p - 80) * sold - 4000 - 1000
    stats = r.to_dict()["plan_profit"]
    assert r.plan.products[0].volume == pytest.approx(D, rel=1e-9)
    assert abs(stats["mean"] - closed) <= 4 * stats["se"]


def test_sampling_moments_correlation_and_truncation():
    raw = small_uncertain()
    raw["uncertainty"][5] = {"resource": "press", "field": "capacity", "distribution": "normal", "sd": 900}
    s, _ = validate_scenario(raw)
    n = 20000
    draws = draw_samples(s, n, seed=1)
    a = draws.full("price_intercept", np.array([120.0, 150.0, 90.0]))
    assert a[:, 0].mean() == pytest.approx(120, abs=4 * 12 / math.sqrt(n))
    assert a[:, 1].mean() == pytest.approx((130 + 150 + 160) / 3, abs=0.1)  # triangular mean
    assert a[:, 2].mean() == pytest.approx(90, abs=0.1)  # uniform mean
    assert a[:, 2].min() >= 80 and a[:, 2].max() <= 100
    # Normal and triangular through a Gaussian copula: Pearson correlation close to rho = 0.5.
    assert np.corrcoef(a[:, 0], a[:, 1])[0, 1] == pytest.approx(0.5, abs=0.03)
    assert abs(np.corrcoef(a[:, 0], a[:, 2])[0, 1]) < 0.03
    H = draws.full("capacity", np.array([900.0, 1500.0]))
    assert H[:, 0].min() == 0.0 and draws.truncated["capacity"] == int(np.sum(H[:, 0] == 0.0)) > 0
    assert np.all(H[:, 1] == 1500.0)
    again = draw_samples(s, n, seed=1)
    assert all(np.array_equal(draws.values[k], again.values[k]) for k in draws.values)


def test_fitted_distribution_recovers_the_covariance():
    raw = _one_product(0.1, 1.0)
    raw["products"][0]["demand_fit"] = {"intercept_se": 10.0, "slope_se": 0.02, "covariance": -0.12}
    raw["uncertainty"] = [{"product": "lamp", "field": "price_intercept", "distribution": "fitted"}]
    s, _ = validate_scenario(raw)
    draws = draw_samples(s, 20000, seed=2)
    ab = np.column_stack([draws.values["price_intercept"][:, 0], draws.values["price_slope"][:, 0]])
    cov = np.cov(ab.T)
    assert cov[0, 0] == pytest.approx(100.0, rel=0.05)
    assert cov[1, 1] == pytest.approx(0.0004, rel=0.05)
    assert cov[0, 1] == pytest.approx(-0.12, rel=0.08)
    assert draws.truncated["price_slope"] == 0


@needs_scip
def test_sample_re_optimisation_matches_scip(demo_path, monkeypatch):
    import planner.engine.search as search

    from .reference import scip_plan

    demo, _ = load_scenario(demo_path)
    base = mix_data(demo)
    draws = draw_samples(demo, 12, seed=4)
    arrays = sample_arrays(base, draws)
    engine = Engine(base)
    for i in range(12):
        d = sample_data(base, arrays["a"][i], arrays["b"][i], arrays["v"][i], arrays["H"][i])
        change = {"a": d.a, "b": d.b, "v": d.v, "capacity": d.capacity}
        sol = engine.solve(**change)  # slate bounding (few on/off choices)
        with monkeypatch.context() as m:
            m.setattr(search, "ENUMERATE_UP_TO", 0)
            sol2 = engine.solve(**change)  # the Lagrangian + cut MILP route
        assert sol.status == "optimal" and sol.strategy == "enumeration"
        assert sol2.status == "optimal" and sol2.strategy != "enumeration"
        assert sol2.objective == pytest.approx(sol.objective, rel=1e-4)
        products = [p.model_copy(update={"price_intercept": float(d.a[k]), "price_slope": float(d.b[k]),
                                         "unit_cost": float(d.v[k])}) for k, p in enumerate(demo.products)]
        resources = [r.model_copy(update={"capacity": float(d.capacity[k])}) for k, r in enumerate(demo.resources)]
        ref, _ = scip_plan(demo.model_copy(update={"products": products, "resources": resources}))
        assert sol.objective == pytest.approx(ref, rel=1e-4), i
        assert sol.bound >= ref - 1e-6 * abs(ref)
        assert sol2.bound >= ref - 1e-6 * abs(ref)
        from planner.engine.dual import evaluate

        L = evaluate(engine.problem(d), engine.scales.prices_in(sol.duals)).value * engine.scales.money
        assert L >= ref - 1e-6 * abs(ref)  # weak duality


def test_cli_risk_prints_the_chance_of_a_loss_and_writes_json(tmp_path):
    import yaml

    path = tmp_path / "small.yaml"
    path.write_text(yaml.safe_dump(small_uncertain()))
    out = tmp_path / "risk.json"
    res = CliRunner().invoke(main, ["risk", str(path), "--samples", "30", "--seed", "2", "--workers", "0",
                                    "--json", str(out)], catch_exceptions=False)
    assert res.exit_code == 0, res.output
    assert "Chance of a loss" in res.output
    data = json.loads(out.read_text())
    for key in ("mean", "p5", "p50", "p95"):
        assert key in data["plan_profit"]
    assert 0.0 <= data["probability_of_loss"] <= 1.0
    assert isinstance(data["value_of_perfect_information"], float)
    assert [p["name"] for p in data["products"]] == ["alpha", "beta", "gamma"]
    assert all(0.0 <= p["probability_running"] <= 1.0 for p in data["products"])
    assert data["samples"] == 30


def test_cli_risk_unreachable_scheduler_is_a_clear_error(tmp_path, monkeypatch):
    import yaml

    monkeypatch.setattr("planner.analysis.risk.run.CONNECT_TIMEOUT", "1s")

    path = tmp_path / "small.yaml"
    path.write_text(yaml.safe_dump(small_uncertain()))
    res = CliRunner().invoke(main, ["risk", str(path), "--samples", "5", "--scheduler", "tcp://127.0.0.1:9"])
    assert res.exit_code == 2  # bad input: the address is what to fix (exit 4 before issue 17)
    assert "cannot reach the Dask scheduler at tcp://127.0.0.1:9" in res.output


def robust_case() -> dict:
    """Three products on one press (invented): xeno pays at the point estimate (profit 1,000 alone)
    but its intercept is uncertain (sd 20 on a margin of 40): made to plan, it sells clip(Q, 0, D),
    so on average it loses its fixed cost's worth, and the robust slate drops it."""
    return {"name": "robust", "plant_fixed_cost": 2000,
            "products": [
                {"name": "xeno", "price_intercept": 100, "price_slope": 0.1, "unit_cost": 60, "fixed_cost": 3000,
                 "usage": {"press": 1.0}},
                {"name": "yarrow", "price_intercept": 150, "price_slope": 0.05, "unit_cost": 50,
                 "fixed_cost": 5000, "usage": {"press": 1.0}},
                {"name": "zinnia", "price_intercept": 120, "price_slope": 0.08, "unit_cost": 40,
                 "fixed_cost": 4000, "min_run": 100, "usage": {"press": 0.8}}],
            "resources": [{"name": "press", "capacity": 1500}],
            "uncertainty": [
                {"product": "xeno", "field": "price_intercept", "distribution": "normal", "sd": 20},
                {"product": "yarrow", "field": "price_intercept", "distribution": "normal", "sd": 10},
                {"product": "zinnia", "field": "price_slope", "distribution": "uniform", "low": 0.06, "high": 0.1},
                {"resource": "press", "field": "capacity", "distribution": "triangular",
                 "low": 1300, "mode": 1500, "high": 1600}]}


def scored_by_hand(nums, volume: np.ndarray, running: np.ndarray, A, B, V, H) -> np.ndarray:
    """Profit of a fixed plan under each sample, from the README's economics, in numpy (currency).

    Price kept at p = a − b·D; demand at p under the sample is Q = (a_s − p)/b_s; sold =
    clip(Q, 0, D); if a sampled capacity cannot hold the sales, all are cut by θ = min_r H_r/used_r;
    variable cost on what is sold; fixed costs of the running products and the plant always.
    (Every product here has a slope, so no price-taker branch is needed.)
    """
    p = nums.a - nums.b * volume
    sold = np.clip((A - p) / B, 0.0, volume)
    used = sold @ nums.H.T
    theta = np.minimum(1.0, np.min(np.where(used > 0, H / np.where(used > 0, used, 1.0), np.inf), axis=1))
    sold = sold * theta[:, None]
    return ((p - V) * sold).sum(axis=1) - nums.F[running | nums.forced].sum() - nums.plant


def test_robust_choice_matches_an_independent_scoring_of_every_slate_and_charts_are_written(tmp_path):
    # Reference: every slate's plan from the highspy enumeration of tests/reference.py (raw numbers),
    # each scored on the same samples by scored_by_hand (numpy on the sample arrays); the robust
    # choice must pick the slate with the greatest expected profit, here not the point plan's.
    import itertools

    from planner.output.risk_charts import write_charts

    from .reference import scenario_numbers, slate_qp

    s, _ = validate_scenario(robust_case())
    N, seed = 200, 7
    r = run_risk(s, samples=N, seed=seed, workers=0)
    rc = r.to_dict()["robust_choice"]
    nums = scenario_numbers(s)

    def sample_numbers(sd):
        d = draw_samples(s, N, sd)  # the samples are the input; the scoring below is ours
        return (d.full("price_intercept", nums.a), d.full("price_slope", nums.b),
                d.full("unit_cost", nums.v), d.full("capacity", nums.capacity))

    here, check = sample_numbers(seed), sample_numbers(rc["check_seed"])
    mine = {}
    for bits in itertools.product([False, True], repeat=nums.n):
        ans = slate_qp(nums, np.array(bits))
        if ans is None or ans.status != "optimal":
            continue
        names = tuple(n for n, on in zip(nums.names, ans.running) if on)
        mine[names] = (ans, float(np.mean(scored_by_hand(nums, ans.volume, ans.running, *here))),
                       float(np.mean(scored_by_hand(nums, ans.volume, ans.running, *check))))
    assert len(mine) == 8
    for c in rc["candidates"]:
        ans, expected, expected_check = mine[tuple(c["running"])]
        assert c["expected_profit"] == pytest.approx(expected, rel=1e-9), c["running"]
        assert c["expected_profit_check"] == pytest.approx(expected_check, rel=1e-9), c["running"]
        assert c["point_estimate_profit"] == pytest.approx(ans.profit - nums.plant, rel=1e-9)
        for name, vol in c["volumes"].items():
            assert vol == pytest.approx(ans.volume[nums.names.index(name)], rel=1e-7)
    best_of_all = max(mine, key=lambda k: mine[k][1])
    assert best_of_all == ("yarrow", "zinnia")  # xeno dropped: it loses on average
    assert tuple(rc["best"]["running"]) == best_of_all
    assert rc["best"]["expected_profit"] == pytest.approx(mine[best_of_all][1], rel=1e-9)
    point = tuple(n for n, p in zip(nums.names, r.plan.products) if p.running)
    assert point == ("xeno", "yarrow", "zinnia") and rc["point_plan"]["running"] == list(point)
    assert rc["point_plan"]["expected_profit"] == pytest.approx(mine[point][1], rel=1e-9)
    assert mine[point][1] < mine[best_of_all][1] - 500  # a real difference, not a tie
    assert rc["gain_on_check_samples"] == pytest.approx(mine[best_of_all][2] - mine[point][2], rel=1e-9)
    # The point plan's score is also the risk evaluation's own mean of the plan's profit.
    assert float(np.mean(r.plan_profit)) == pytest.approx(mine[point][1], rel=1e-9)
    paths = write_charts(r, tmp_path)
    assert sorted(p.name for p in paths) == ["profit_fan.png", "profit_histogram.png", "shadow_prices.png"]
    for p in paths:
        assert p.read_bytes()[:8] == b"\x89PNG\r\n\x1a\n"


@needs_scip
def test_sample_where_the_active_set_qp_fails_matches_scip(demo_path, monkeypatch):
    # A demo sample (numbers rounded from a draw) on which HiGHS 1.15's active-set QP answers
    # "unbounded" for a slate when its stopped products are kept as columns fixed at 0; the
    # per-sample route builds the slate's QP without them.  Reference: SCIP on the raw MIQP.
    from .reference import scip_plan

    demo, _ = load_scenario(demo_path)
    a = [689.02, 931.707, 296.794, 659.886, 244.854, 530.844, 317.447]
    b = [0.17536, 0.50021, 0.07904, 0.38738, 0.04644, 0.32222, 0.06086]
    H = [2894.34, 2918.76, 6074.82, 330.89, 3175.12]
    products = [p.model_copy(update={"price_intercept": a[k], "price_slope": b[k]}) for k, p in enumerate(demo.products)]
    resources = [r.model_copy(update={"capacity": H[k]}) for k, r in enumerate(demo.resources)]
    s = demo.model_copy(update={"products": products, "resources": resources})
    ref, _ = scip_plan(s)
    import planner.engine.search as search

    d = mix_data(s)
    for limit in (12, 0):  # slate bounding, outer approximation
        monkeypatch.setattr(search, "ENUMERATE_UP_TO", limit)
        sol = Engine(mix_data(demo)).solve(a=d.a, b=d.b, v=d.v, capacity=d.capacity)
        assert sol.status == "optimal"
        assert sol.objective == pytest.approx(ref, rel=1e-6)
        assert [p.name for p, on in zip(demo.products, sol.running) if on] == \
            ["oak bookcase", "walnut desk", "birch nightstand", "ash bench"]


def test_samples_whose_commitments_do_not_fit_are_counted_not_solved():
    # Committed 600 units need 600 h of the press; the press is uniform on [500, 700] h, so about half
    # the samples cannot meet the commitment (P(H < 600) = 0.5 for the uniform distribution).
    raw = {"name": "tight", "products": [
        {"name": "bolt", "price_intercept": 50, "price_slope": 0.01, "unit_cost": 20, "min_volume": 600,
         "usage": {"press": 1.0}}],
        "resources": [{"name": "press", "capacity": 650}],
        "uncertainty": [{"resource": "press", "field": "capacity", "distribution": "uniform",
                         "low": 500, "high": 700}]}
    s, _ = validate_scenario(raw)
    r = run_risk(s, samples=200, seed=1, workers=0)
    d = r.to_dict()
    short = int(np.sum(r.to_dict()["samples_infeasible"]))
    assert 0.4 * 200 < short < 0.6 * 200
    assert short == int(np.sum(sample_arrays(mix_data(s), draw_samples(s, 200, 1))["H"][:, 0] < 600))
    assert np.all(np.isnan(r.best_profit[r.status == 1]))
    assert d["best_profit"]["mean"] is not None and d["samples_not_certified"] == 0
    assert np.all(np.isfinite(r.plan_profit))  # the plan is still evaluated (its volume cut to fit)
