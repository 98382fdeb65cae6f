"""Infeasible scenarios whose conflict is known by construction: named, measured, and fixable.

Each scenario below overloads a resource with committed floors chosen so the
shortfall is known by hand; the message must name exactly those commitments
and that limit, HiGHS's IIS (strategy 2) must find the same conflict
independently, and the elastic model's suggested cuts must be minimal (checked
against scipy's linprog on the same LP written from the raw numbers) and must
make the scenario plannable.
"""

from __future__ import annotations

import numpy as np
import pytest
import yaml
from click.testing import CliRunner

from planner import InfeasibleError, plan, validate_scenario
from planner.cli.main import main
from planner.engine.infeasible import conflicts, iis_names, smallest_cuts
from planner.scenario.arrays import mix_data


def product(name, usage, **kw):
    out = {"name": name, "price_intercept": 100.0, "price_slope": 0.01, "unit_cost": 10.0, "unit": "pieces",
           "usage": usage}
    out.update(kw)
    return out


def two_on_the_mill() -> dict:
    """A committed 2,000 × 1.6 h + B's must-run minimum 1,000 × 2 h = 5,200 h on a 4,160 h mill (by hand)."""
    return {"name": "mill overload", "products": [
        product("A", {"mill": 1.6, "oven": 0.1}, min_volume=2000),
        product("B", {"mill": 2.0, "oven": 0.1}, min_run=1000, must_run=True),
        product("C", {"oven": 1.0}, min_volume=10),
        product("D", {"mill": 1.0}),
    ], "resources": [{"name": "mill", "capacity": 4160, "unit": "h"}, {"name": "oven", "capacity": 1000, "unit": "h"}]}


def test_message_names_limit_commitments_and_shortfall():
    s, _ = validate_scenario(two_on_the_mill())
    assert conflicts(s, mix_data(s)) == [
        "committed volumes of A (2,000 pieces) and B (1,000 pieces, its min_run as it must run) need 5,200 h of "
        "mill; it has 4,160 h (short by 1,040 h)"]


def test_iis_finds_the_same_conflict():
    s, _ = validate_scenario(two_on_the_mill())
    assert iis_names(mix_data(s)) == (["mill"], ["A", "B"])


def test_plan_raises_with_fixes_and_cli_exits_3(tmp_path):
    raw = two_on_the_mill()
    with pytest.raises(InfeasibleError) as info:
        plan(validate_scenario(raw)[0])
    lines = info.value.conflicts
    assert lines[1] == "to fit, add capacity (mill +1,040 h)"
    # Elastic LP: cut A by 1,040/1.6 = 650 (a 32.5 % cut) beats cutting B by 520 (52 %).
    assert lines[2] == "or lower the commitments, at the least: A from 2,000 to 1,350 pieces"
    f = tmp_path / "s.yaml"
    f.write_text(yaml.safe_dump(raw))
    res = CliRunner().invoke(main, ["plan", str(f)])
    assert res.exit_code == 3
    assert res.stderr.startswith("error: The scenario is infeasible: its commitments cannot all be met.\n"
                                 "  - committed volumes of A (2,000 pieces) and B")
    assert "Traceback" not in res.output


def test_two_short_resources_are_both_named_and_iis_picks_one():
    raw = {"name": "two", "products": [
        product("P", {"saw": 3.0}, min_volume=100),    # 300 h on a 200 h saw
        product("Q", {"kiln": 2.0}, min_volume=50),    # 100 h ...
        product("R", {"kiln": 1.0}, min_volume=80),    # + 80 h on a 150 h kiln
    ], "resources": [{"name": "saw", "capacity": 200, "unit": "h"}, {"name": "kiln", "capacity": 150, "unit": "h"}]}
    s, _ = validate_scenario(raw)
    d = mix_data(s)
    assert conflicts(s, d) == [
        "committed volume of P (100 pieces) needs 300 h of saw; it has 200 h (short by 100 h)",
        "committed volumes of Q (50 pieces) and R (80 pieces) need 180 h of kiln; it has 150 h (short by 30 h)"]
    assert iis_names(d) in ((["saw"], ["P"]), (["kiln"], ["Q", "R"]))


def test_zero_capacity_needed_by_a_commitment():
    raw = {"name": "zero", "products": [product("P", {"press": 0.5}, min_volume=10)],
           "resources": [{"name": "press", "capacity": 0, "unit": "h"}]}
    s, _ = validate_scenario(raw)
    assert conflicts(s, mix_data(s)) == [
        "committed volume of P (10 pieces) needs 5 h of press; it has 0 h (short by 5 h)"]


def test_uncommitted_products_never_make_it_infeasible():
    raw = two_on_the_mill()
    raw["products"][0]["min_volume"] = 0
    raw["products"][1]["must_run"] = False  # B may now be shut down: its min_run is no commitment
    s, _ = validate_scenario(raw)
    assert conflicts(s, mix_data(s)) == [] and iis_names(mix_data(s)) == ([], [])
    p = plan(s)
    assert p.status == "optimal"


def test_elastic_cuts_are_minimal_and_make_it_plannable():
    """Against scipy.optimize.linprog (HiGHS inside scipy, called on its own matrices)."""
    from scipy.optimize import linprog

    raw = {"name": "tight", "products": [
        product("P", {"saw": 3.0, "kiln": 1.0}, min_volume=100),
        product("Q", {"saw": 1.0, "kiln": 2.0}, min_volume=90),
        product("R", {"kiln": 1.0}, min_volume=40, max_volume=60),
    ], "resources": [{"name": "saw", "capacity": 250, "unit": "h"}, {"name": "kiln", "capacity": 150, "unit": "h"}]}
    s, _ = validate_scenario(raw)
    d = mix_data(s)
    cuts = smallest_cuts(d)
    floors = np.array([100.0, 90.0, 40.0])
    new = np.array([cuts.get(n, (f, f))[1] for n, f in zip("PQR", floors)])
    # The same LP in cut variables s: min Σ s_i / B_i s.t. H·(B − s) ≤ cap, 0 ≤ s ≤ B.
    H = np.array([[3.0, 1.0, 0.0], [1.0, 2.0, 1.0]])
    ref = linprog(1 / floors, A_ub=-H, b_ub=np.array([250.0, 150.0]) - H @ floors,
                  bounds=list(zip([0] * 3, floors)), method="highs")
    assert ref.status == 0
    assert np.sum((floors - new) / floors) == pytest.approx(ref.fun, rel=1e-9, abs=1e-9)
    for k, n in enumerate("PQR"):
        raw["products"][k]["min_volume"] = float(new[k])
    p = plan(validate_scenario(raw)[0])
    assert p.status == "optimal"


def test_check_command_reports_infeasible_commitments(tmp_path):
    f = tmp_path / "s.yaml"
    f.write_text(yaml.safe_dump(two_on_the_mill()))
    res = CliRunner().invoke(main, ["check", str(f)])
    assert res.exit_code == 3
    assert "need 5,200 h of mill; it has 4,160 h (short by 1,040 h)" in res.stderr
