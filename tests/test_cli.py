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


def _flat(text: str) -> str:
    return " ".join(text.split())


def test_choose_options_prints_the_chosen_plan(demo_path, tmp_path):
    """It printed one summary line.  Now: the options picked, then the products and resources with their
    capacity added.  Outside check (the scenario file): the Saturday shift adds 624 h to the finishing
    booth's 3,900 h, so the chosen plan's booth has 3,900 + 624 = 4,524 h; its profit less the shift's
    £21,000 is the pick's profit in the JSON, to the gap."""
    import pytest

    out = tmp_path / "p.json"
    res = run("plan", demo_path, "--choose-options", "--json", out)
    assert res.exit_code == 0, res.output
    text = _flat(res.output)
    pick = json.loads(out.read_text())["option_pick"]
    assert [x["name"] for x in pick["picked"]] == ["Saturday shift in finishing"]
    assert "Options chosen together" in text
    assert "Saturday shift in finishing 100% finishing booth +624.0 h €21,000" in text
    assert "Products, with the options" in text and "Resources, with the options' capacity added" in text
    chosen = text.split("Resources, with the options' capacity added")[1]
    assert "finishing booth ◆ 4,524 h 4,524 h 100%" in chosen
    before = text.split("The plan with the options chosen together (their capacity added): profit ")[1].split()[0]
    profit_before_cost = float(before.replace("€", "").replace(",", ""))
    assert profit_before_cost - 21000 == pytest.approx(pick["profit"], rel=1e-4, abs=1)
    assert pick["profit_before_cost"] == pytest.approx(profit_before_cost, rel=1e-4, abs=1)


def test_run_labels_say_why_a_product_runs(tmp_path):
    """Products forced only by min_volume were labelled 'must' like must_run ones."""
    raw = {"name": "labels", "products": [
        {"name": "kept", "price_intercept": 100, "price_slope": 0.5, "unit_cost": 40, "min_volume": 10,
         "fixed_cost": 100, "usage": {"press": 1}},
        {"name": "forced", "price_intercept": 100, "price_slope": 0.5, "unit_cost": 40, "must_run": True,
         "fixed_cost": 100, "usage": {"press": 1}},
        {"name": "loser", "price_intercept": 50, "price_slope": 0.5, "unit_cost": 45, "fixed_cost": 5000,
         "usage": {"press": 1}}],
        "resources": [{"name": "press", "capacity": 1000, "unit": "h"}]}
    f = tmp_path / "labels.yaml"
    f.write_text(yaml.safe_dump(raw))
    res = run("plan", f, "--no-standalone")
    assert res.exit_code == 0, res.output
    rows = {}
    for line in res.output.splitlines():  # the products table comes first (the decisions table repeats names)
        if line.split()[:1] in (["kept"], ["forced"], ["loser"]):
            rows.setdefault(line.split()[0], line.split())
    assert rows["kept"][1] == "committed" and rows["forced"][1] == "must" and rows["loser"][1] == "off"
    text = _flat(res.output)
    assert "must: must_run, may not be shut down; committed: its min_volume makes it run" in text


def test_shut_down_products_show_no_price(demo_plan, demo_path):
    """One rule for every output: no sale, no price (the terminal and the report page show '—'; the
    JSON's and the workbook's values are the other owners' to change, see the price rule in
    planner.output.terminal.sold_price)."""
    from rich.console import Console

    from planner.output.terminal import products_table, sold_price

    off = [x for x in demo_plan.products if x.volume == 0]
    assert off, "the demo shuts a product down"
    assert all(sold_price(x) is None for x in off)
    assert all(sold_price(x) == x.price for x in demo_plan.products if x.volume > 0)
    con = Console(width=200, record=True)
    con.print(products_table(demo_plan, con))
    lines = con.export_text().splitlines()
    for x in off:
        row = next(line for line in lines if line.startswith(x.name + " "))
        assert row.split()[len(x.name.split()) + 2] == "—", row
    res = run("plan", demo_path, "--no-capacity")
    assert "price —: nothing sold, so no price" in _flat(res.output)
