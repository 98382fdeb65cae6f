"""The command line through click's runner: exit codes, output and the JSON contract."""

from __future__ import annotations

import json

import yaml
from click.testing import CliRunner

from planner.cli.main import main

from .conftest import CASES, tiny


def run(*args):
    return CliRunner().invoke(main, [str(a) for a in args], catch_exceptions=False)


def test_plan_demo_prints_and_writes_json(demo_path, tmp_path):
    out = tmp_path / "plan.json"
    res = run("plan", demo_path, "--json", out)
    assert res.exit_code == 0, res.output
    assert "Products" in res.output and "Resources" in res.output and "gap" in res.output
    data = json.loads(out.read_text())
    assert data["status"] == "optimal"
    for key in ("profit", "bound", "gap", "products", "resources"):
        assert key in data
    p0 = data["products"][0]
    for key in ("name", "running", "volume", "price", "revenue", "variable_cost", "fixed_cost", "profit", "standalone"):
        assert key in p0
    for key in ("optimal_volume", "optimal_price", "max_profit", "max_revenue_volume", "break_even"):
        assert key in p0["standalone"]
    for key in ("name", "capacity", "used", "shadow_price"):
        assert key in data["resources"][0]
    # The demo's story: at least one product shut down, at least one limit binding.
    assert any(not p["running"] for p in data["products"])
    assert any(r["shadow_price"] > 0 for r in data["resources"])
    total = sum(p["profit"] for p in data["products"]) - data["plant_fixed_cost"]
    assert data["profit"] == __import__("pytest").approx(total, abs=1e-6)


def test_bad_input_exits_2_with_message(tmp_path):
    f = tmp_path / "bad.yaml"
    f.write_text(yaml.safe_dump(tiny(price_slope=-1, usage={"prss": 1})))
    res = CliRunner().invoke(main, ["plan", str(f)])
    assert res.exit_code == 2
    assert "products[widget].price_slope: must be >= 0 (got -1)" in res.output
    assert "did you mean 'press'?" in res.output
    assert "Traceback" not in res.output


def test_infeasible_exits_3_naming_the_limit(tmp_path):
    raw = tiny(min_volume=1500)
    f = tmp_path / "inf.yaml"
    f.write_text(yaml.safe_dump(raw))
    res = CliRunner().invoke(main, ["plan", str(f)])
    assert res.exit_code == 3
    assert "committed volume of widget (1,500 units) needs 1,500 h of press; it has 1,000 h (short by 500 h)" in res.output


def test_yaml_syntax_error_names_the_line(tmp_path):
    f = tmp_path / "broken.yaml"
    f.write_text("name: x\nproducts:\n  - name: a\n   price: [\n")
    res = CliRunner().invoke(main, ["plan", str(f)])
    assert res.exit_code == 2
    assert "line 4" in res.output


def test_missing_file_exits_2(tmp_path):
    res = CliRunner().invoke(main, ["plan", str(tmp_path / "nope.yaml")])
    assert res.exit_code == 2
    assert "no such file or folder" in res.output


def test_check_command(demo_path):
    res = run("check", demo_path)
    assert res.exit_code == 0
    assert "valid — 7 products, 5 resources" in res.output


def test_solver_option_hands_miqp_to_scip(tmp_path):
    import pytest

    pytest.importorskip("pyscipopt")
    out = tmp_path / "p.json"
    res = run("plan", CASES / "small_mix.yaml", "--solver", "scip", "--json", out, "-q")
    assert res.exit_code == 0, res.output
    data = json.loads(out.read_text())
    ours = json.loads((lambda: (run("plan", CASES / "small_mix.yaml", "--json", tmp_path / "q.json", "--gap", "1e-9", "-q"),
                                (tmp_path / "q.json").read_text())[1])())
    assert data["profit"] == pytest.approx(ours["profit"], rel=1e-6)
