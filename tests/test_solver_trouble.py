"""Solver trouble: time limits give an honest status and gap, missing solvers say what to install,
a plan that breaks a limit is refused, numerically wide inputs are scaled, and runs repeat exactly."""

from __future__ import annotations

import json

import numpy as np
import pytest
import yaml
from click.testing import CliRunner

from planner import SolverError, plan, validate_scenario
from planner.api import build_plan
from planner.cli.main import main
from planner.scenario.arrays import mix_data
from planner.engine import Engine, Solution
from planner.engine.scaling import Scales
from planner.scenario.synth import synthetic_scenario

from .conftest import needs_scip, tiny


@pytest.fixture(scope="module")
def hard():
    """20 products whose fixed costs sit near their best contribution (hard for the bound): solved in ~1 s."""
    s, _ = validate_scenario(synthetic_scenario(20, 6, seed=1, fixed_costs="near"))
    return s, plan(s, rel_gap=1e-6)


def test_time_limit_returns_a_plan_with_certified_gap_never_optimal(hard):
    s, full = hard
    assert full.status == "optimal" and full.gap <= 1e-6
    p = plan(s, rel_gap=1e-6, time_limit=0.01)
    assert p.status == "time_limit"
    assert p.gap > 1e-6  # stopped before the certificate: and says so
    assert p.profit <= full.profit + 1e-6 * abs(full.profit)  # a feasible plan ...
    assert p.bound >= full.profit - 1e-6 * abs(full.profit)  # ... and a valid upper bound
    for r in p.resources:
        assert r.used <= r.capacity * (1 + 1e-7)


def test_time_limit_through_the_cli(hard, tmp_path):
    s, _ = hard
    f = tmp_path / "hard.yaml"
    f.write_text(yaml.safe_dump(synthetic_scenario(20, 6, seed=1, fixed_costs="near")))
    out = tmp_path / "plan.json"
    res = CliRunner().invoke(main, ["plan", str(f), "--gap", "1e-6", "--time-limit", "0.01", "--json", str(out), "-q"])
    assert res.exit_code == 0, res.output
    data = json.loads(out.read_text())
    assert data["status"] == "time_limit" and data["gap"] > 1e-6 and data["bound"] >= data["profit"]


def test_missing_highs_names_what_to_install(monkeypatch, tmp_path):
    import sys

    monkeypatch.setitem(sys.modules, "highspy", None)  # import highspy now fails
    f = tmp_path / "s.yaml"
    f.write_text(yaml.safe_dump(tiny(fixed_cost=100.0)))  # an on/off choice: the engine needs HiGHS
    res = CliRunner().invoke(main, ["plan", str(f)])
    assert res.exit_code == 4
    assert res.stderr == "error: HiGHS is not available: pip install 'highspy==1.15.1'\n"


def test_failing_solver_library_names_what_to_install(monkeypatch):
    import highspy

    def broken(self):
        raise RuntimeError("library not loaded")

    monkeypatch.setattr(highspy.Highs, "run", broken)
    with pytest.raises(SolverError, match=r"library not loaded \(reinstall highspy: pip install 'highspy==1.15.1'\)"):
        plan(validate_scenario(tiny())[0])


def test_unknown_solver_is_exit_4_with_advice(tmp_path):
    f = tmp_path / "s.yaml"
    f.write_text(yaml.safe_dump(tiny(fixed_cost=100.0)))
    res = CliRunner().invoke(main, ["plan", str(f), "--solver", "nosuchsolver"])
    assert res.exit_code == 4
    assert "solver 'nosuchsolver' is not available to Pyomo; install it" in res.stderr


def test_plan_breaking_a_limit_is_an_error_not_a_plan():
    s, _ = validate_scenario(tiny())
    d = mix_data(s)
    wrong = Solution("optimal", np.array([1000.0 * (1 + 1e-6)]), np.array([True]), 0.0, 0.0,
                        np.zeros(1), "test")  # press: 1,000 h; this uses 1,000.001 h
    with pytest.raises(SolverError, match="the solved plan uses 1000.001 of press but it has 1000"):
        build_plan(s, d, wrong)


def test_runs_are_deterministic_and_record_threads(hard):
    s, first = hard
    again = plan(s, rel_gap=1e-6)
    a, b = first.to_dict(), again.to_dict()
    a["solver"].pop("seconds"), b["solver"].pop("seconds")
    assert a == b
    assert a["solver"]["threads"] == 1


def wide_scenario() -> dict:
    """Products counted in grams, kilograms and tonnes; resources in seconds and hours: usage 1e-4 .. 1e6.

    Invented numbers (a demo of units, not a real plant); the optimum comes from SCIP.
    """
    products = [
        {"name": "powder (g)", "price_intercept": 0.09, "price_slope": 2e-9, "unit_cost": 0.03, "fixed_cost": 2000,
         "usage": {"mixer (s)": 0.004, "packing (h)": 1e-4}},
        {"name": "paste (kg)", "price_intercept": 60.0, "price_slope": 0.004, "unit_cost": 18.0, "fixed_cost": 5000,
         "usage": {"mixer (s)": 3.5, "packing (h)": 0.02}},
        {"name": "bulk (t)", "price_intercept": 41000.0, "price_slope": 2000.0, "unit_cost": 15000.0,
         "fixed_cost": 9000, "min_run": 0.5, "usage": {"mixer (s)": 4000.0, "packing (h)": 1.5, "silo (g)": 1e6}},
    ]
    resources = [{"name": "mixer (s)", "capacity": 180000, "unit": "s"},
                 {"name": "packing (h)", "capacity": 60, "unit": "h"},
                 {"name": "silo (g)", "capacity": 4.5e6, "unit": "g"}]
    return {"name": "wide units", "products": products, "resources": resources}


def test_scaling_is_exact_in_powers_of_two():
    s, _ = validate_scenario(wide_scenario())
    d = mix_data(s)
    sc = Scales.of(d)
    sd = sc.apply(d)
    assert np.all(np.log2(sc.col) == np.round(np.log2(sc.col)))
    assert np.array_equal(sd.use_amt * sc.row[d.use_res] / sc.col[d.use_prod], d.use_amt)
    assert np.array_equal(sd.b / sc.col**2, d.b) and np.array_equal(sd.capacity * sc.row, d.capacity)
    assert np.all((sd.upper > 0.5) & (sd.upper < 2.0) | (d.upper == 0))


@needs_scip
def test_wide_coefficients_match_scip_and_keep_every_limit():
    """Against SCIP (pyscipopt on the raw numbers, tests/reference.py)."""
    from .reference import scip_plan

    s, _ = validate_scenario(wide_scenario())
    ref, _ = scip_plan(s)
    p = plan(s, rel_gap=1e-9)
    assert p.status == "optimal"
    assert p.profit == pytest.approx(ref, rel=1e-7)
    for r in p.resources:
        assert r.used <= r.capacity * (1 + 1e-7)
    unscaled = Engine(mix_data(s), scaled=False).solve(rel_gap=1e-9)
    scaled = Engine(mix_data(s)).solve(rel_gap=1e-9)
    assert scaled.objective == pytest.approx(unscaled.objective, rel=1e-9)


def test_plan_breaking_a_cap_or_commitment_is_an_error():
    s, _ = validate_scenario(tiny(max_volume=50.0, min_volume=10.0))
    d = mix_data(s)
    over = Solution("optimal", np.array([50.001]), np.array([True]), 0.0, 0.0, np.zeros(1), "test")
    with pytest.raises(SolverError, match="widget at 50.001 is above its max_volume 50"):
        build_plan(s, d, over)
    under = Solution("optimal", np.array([9.99]), np.array([True]), 0.0, 0.0, np.zeros(1), "test")
    with pytest.raises(SolverError, match="widget at 9.99 is below its floor 10"):
        build_plan(s, d, under)
