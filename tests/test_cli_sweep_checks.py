"""`planner sweep` refuses ranges it cannot sweep before any solve, with the right exit code and advice.

The numbers are worked by hand from the scenario below (two products, two limits): product A has
min_volume 300 and uses 2 h of oven per unit, so its commitment needs 300 × 2 = 600 h of oven; the
oven has 500 h, so the scenario is infeasible in the oven whatever the press has.
"""

from __future__ import annotations

import json

import pytest
import yaml
from click.testing import CliRunner

from planner.analysis.capacity.sweep import Sweep, SweepPoint
from planner.cli.main import main
from planner.cli.sweep import check_points
from planner.errors import SolverError
from planner.scenario.validate import validate_scenario


def two_limits(oven: float = 500.0, oven_use_a: float = 2.0) -> dict:
    return {"name": "two limits",
            "products": [{"name": "A", "price_intercept": 100, "price_slope": 0.1, "unit_cost": 10, "min_volume": 300,
                          "usage": {"press": 1, "oven": oven_use_a}},
                         {"name": "B", "price_intercept": 90, "price_slope": 0.1, "unit_cost": 10,
                          "usage": {"press": 1, "oven": 1}}],
            "resources": [{"name": "press", "capacity": 1000, "unit": "h"},
                          {"name": "oven", "capacity": oven, "unit": "h"}]}


@pytest.fixture
def scenario_file(tmp_path):
    def write(**kw):
        f = tmp_path / "two.yaml"
        f.write_text(yaml.safe_dump(two_limits(**kw)))
        return str(f)
    return write


def invoke(*args):
    res = CliRunner().invoke(main, [str(a) for a in args])
    return res, " ".join(res.output.split())


def test_infeasible_in_another_resource_exits_3_with_the_plan_diagnosis(scenario_file):
    """Was exit 4 with 'start the range higher', which no capacity of the press could fix."""
    f = scenario_file()
    res, out = invoke("sweep", f, "--resource", "press", "--from", "500", "--to", "3000", "--steps", "2")
    assert res.exit_code == 3, res.output
    assert "committed volume of A (300 units) needs 600 h of oven; it has 500 h (short by 100 h)" in out
    assert "this holds at every capacity of press, so no sweep of it can help" in out
    assert "start the range higher" not in out
    plan, plan_out = invoke("plan", f)  # the same diagnosis as plan
    assert plan.exit_code == 3 and "needs 600 h of oven; it has 500 h (short by 100 h)" in plan_out


def test_from_below_the_commitments_exits_2_with_the_smallest_valid_from(scenario_file):
    """Was exit 4 (a PlannerError without a class).  600 h = 300 units × 2 h (hand calculation)."""
    f = scenario_file()
    res, out = invoke("sweep", f, "--resource", "oven", "--from", "100", "--to", "2000", "--steps", "2")
    assert res.exit_code == 2, res.output
    assert "Invalid value for '--from'" in out
    assert "needs 600 h of oven; it has 100 h (short by 500 h)" in out
    assert "Start the sweep at --from 600 or higher" in out
    ok, _ = invoke("sweep", f, "--resource", "oven", "--from", "600", "--to", "2000", "--steps", "2", "-q")
    assert ok.exit_code == 0, ok.output


def test_default_start_below_the_commitments_names_the_scenario_capacity(scenario_file):
    f = scenario_file()
    res, out = invoke("sweep", f, "--resource", "oven", "--to", "2000", "--steps", "2")
    assert res.exit_code == 2, res.output
    assert "the scenario's capacity of oven (500 h, where the sweep starts without --from)" in out
    assert "--from 600 or higher" in out


def test_to_below_the_commitments_names_to(scenario_file):
    f = scenario_file(oven=800)
    res, out = invoke("sweep", f, "--resource", "oven", "--to", "100", "--steps", "2")
    assert res.exit_code == 2 and "Invalid value for '--to'" in out and "--to 600 or higher" in out


def test_smallest_valid_from_is_rounded_up(scenario_file):
    """A needs 300 × 1.2345678 = 370.37034 h (hand calculation); six digits rounded down (370.370) would
    still be short, so the message gives 370.371, and a sweep from there runs."""
    f = scenario_file(oven=1000, oven_use_a=1.2345678)
    res, out = invoke("sweep", f, "--resource", "oven", "--from", "370", "--to", "900", "--steps", "2")
    assert res.exit_code == 2 and "--from 370.371 or higher" in out, out
    ok, _ = invoke("sweep", f, "--resource", "oven", "--from", "370.371", "--to", "900", "--steps", "2", "-q")
    assert ok.exit_code == 0, ok.output


def test_from_equal_to_to_is_refused(scenario_file):
    """Steps > 0 between equal ends gave identical points: a sweep needs two capacities."""
    f = scenario_file(oven=800)
    res, out = invoke("sweep", f, "--resource", "oven", "--from", "700", "--to", "700")
    assert res.exit_code == 2 and "--to 700 h is the same as --from 700 h" in out and "planner plan" in out
    res, out = invoke("sweep", f, "--resource", "oven", "--to", "800")  # the default start is today's 800
    assert res.exit_code == 2 and "is the same as the scenario's capacity of oven (800 h" in out


def test_from_above_to_sweeps_the_same_range_and_says_so(scenario_file, tmp_path):
    f = scenario_file(oven=800)
    js = tmp_path / "down.json"
    res, out = invoke("sweep", f, "--resource", "oven", "--from", "2000", "--to", "700", "--steps", "2",
                      "--json", js)
    assert res.exit_code == 0, res.output
    assert "the sweep runs from 700 up to 2,000 (--to is below the start)" in out
    assert [p["capacity"] for p in json.loads(js.read_text())["points"]] == [700.0, 1350.0, 2000.0]


def test_too_wide_a_range_is_refused_with_the_widest_valid_end(scenario_file):
    """600 h to 1e13 h lost its low end in rounding (a plan using 1,300 h of a 600 h oven was printed);
    the widest sweep is 1e8 × its scale (600 h here: its low end), 6e10 h."""
    f = scenario_file()
    res, out = invoke("sweep", f, "--resource", "oven", "--from", "600", "--to", "1e13", "--steps", "2")
    assert res.exit_code == 2, res.output
    assert "Sweep to --to 6e10 or less" in out


def test_every_sweep_point_is_checked_against_the_limits():
    """A point whose volumes break a limit at its capacity is an error (exit 4), never output:
    A 450 and B 400 use 2·450 + 400 = 1,300 h of oven, more than 600 h (hand calculation)."""
    s, _ = validate_scenario(two_limits(oven=800))

    def sweep(volumes):
        return Sweep("oven", "h", 600, 700, "$", [SweepPoint(600.0, 0.0, 0.0, volumes, ["A", "B"], None)], [])

    with pytest.raises(SolverError, match="uses 1,300 h of oven but it has 600 h"):
        check_points(s, sweep({"A": 450.0, "B": 400.0}))
    check_points(s, sweep({"A": 300.0, "B": 0.0}))  # exactly full: 600 h
