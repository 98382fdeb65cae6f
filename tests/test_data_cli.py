"""template, convert and fit-demand through click's runner; the template → fit-demand → plan flow."""

from __future__ import annotations

import json
import shutil

import pytest
from click.testing import CliRunner

from planner.cli.main import main
from planner.scenario.loading import read_raw

from .conftest import CASES, ROOT


def run(*args):
    return CliRunner().invoke(main, [str(a) for a in args], catch_exceptions=False)


def test_convert_round_trip_and_refuses_to_overwrite(tmp_path):
    src = ROOT / "scenarios" / "demo_history.yaml"
    res = run("convert", src, tmp_path / "d.xlsx")
    assert res.exit_code == 0, res.output
    assert run("convert", tmp_path / "d.xlsx", tmp_path / "d_csv").exit_code == 0
    assert run("convert", tmp_path / "d_csv", tmp_path / "d.yaml").exit_code == 0
    back = read_raw(tmp_path / "d.yaml")
    raw = read_raw(src)
    # history paths are rewritten to name the same file from the new place; all else is the same
    for p, q in zip(raw["products"], back["products"], strict=True):
        if "demand" in p and "history" in p["demand"]:
            assert (tmp_path / q["demand"]["history"]).resolve() == (src.parent / p["demand"]["history"]).resolve()
            q["demand"]["history"] = p["demand"]["history"]
    assert back == raw
    res = run("convert", src, tmp_path / "d.xlsx")
    assert res.exit_code == 2 and "exists; pass --force" in res.output
    res = run("convert", src, tmp_path / "d.txt")
    assert res.exit_code == 2 and "unsupported target form '.txt'" in res.output


def test_convert_refuses_an_invalid_source(tmp_path):
    (tmp_path / "bad.yaml").write_text("name: x\nproducts:\n  - name: a\n    unit_cost: 1\n")
    res = run("convert", tmp_path / "bad.yaml", tmp_path / "out.xlsx")
    assert res.exit_code == 2
    assert "products[a].price_intercept: is required but missing" in res.output
    assert not (tmp_path / "out.xlsx").exists()


def test_fit_demand_json_contract(tmp_path):
    out = tmp_path / "fit.json"
    res = run("fit-demand", ROOT / "scenarios" / "sales_history.csv", "--json", out)
    assert res.exit_code == 0, res.output
    assert "oak bookcase" in res.output and "R²" in res.output
    data = json.loads(out.read_text())
    assert [p["product"] for p in data["products"]] == ["oak bookcase", "walnut desk", "pine dresser"]
    for p in data["products"]:
        for key in ("product", "intercept", "slope", "r2", "n", "intercept_se", "slope_se", "covariance",
                    "intercept_ci", "slope_ci", "price_min", "price_max", "warnings"):
            assert key in p
        assert p["n"] == 8 and p["slope"] > 0


def test_fit_demand_warns_and_bad_file_exits_2(tmp_path):
    h = tmp_path / "h.csv"
    h.write_text("product,price,volume\n" + "".join(f"[odd] thing,{p},{100 + 3 * p}\n" for p in range(10, 20)))
    res = run("fit-demand", h)
    assert res.exit_code == 0
    assert "warning: [odd] thing: wrong sign" in " ".join(res.output.split())
    h.write_text("product,price,volume\nA,1,x\n")
    res = run("fit-demand", h)
    assert res.exit_code == 2 and "h.csv, row 2, column volume: must be a number >= 0 (got 'x')" in res.output


def test_fit_demand_into_scenario_keeps_uncertainty(tmp_path):
    out = tmp_path / "fitted.yaml"
    res = run("fit-demand", ROOT / "scenarios" / "sales_history.csv", "--into", ROOT / "scenarios" / "demo.yaml",
              "--out", out)
    assert res.exit_code == 0, res.output
    raw = read_raw(out)
    oak = raw["products"][0]
    assert oak["demand_fit"]["n"] == 8 and oak["demand_fit"]["source"] == "sales_history.csv"
    assert oak["price_slope"] > 0 and raw["products"][3].get("demand_fit") is None


def test_template_fill_fit_plan_flow(tmp_path):
    """The README flow: template, fill it in, check the history's fit, plan with its warnings shown."""
    from openpyxl import load_workbook

    book = tmp_path / "plant.xlsx"
    assert run("template", book).exit_code == 0
    assert run("template", book).exit_code == 2  # exists
    shutil.copy(CASES / "rich_sales.csv", tmp_path / "sales.csv")
    res = run("fit-demand", tmp_path / "sales.csv")
    assert res.exit_code == 0 and "hub" in res.output
    wb = load_workbook(book)
    wb["scenario"]["B2"] = "Plant"
    wb["products"].append(["hub", None, None, 120, 700])
    wb["usage"].append(["hub", "lathe", 0.5])
    wb["resources"].append(["lathe", 40, "h", "work_centre"])  # tight: forces a high price
    wb["demand"].append(["hub", "sales.csv"])
    wb.save(book)
    res = run("plan", book)
    assert res.exit_code == 0, res.output
    text = " ".join(res.output.split())
    assert "warning: products[hub]: planned price" in text and "extrapolated" in text
    res = run("check", book)
    assert res.exit_code == 0 and "valid" in res.output


@pytest.mark.parametrize("name", ["t.yaml"])
def test_template_only_writes_workbooks(tmp_path, name):
    res = run("template", tmp_path / name)
    assert res.exit_code == 2 and "name it with .xlsx" in res.output


def test_fit_demand_reports_products_it_cannot_fit(tmp_path):
    h = tmp_path / "h.csv"
    h.write_text("product,price,volume\nA,10,90\nA,12,80\nA,14,71\nB,5,5\nB,5,6\n")
    res = run("fit-demand", h)
    assert res.exit_code == 0, res.output
    text = " ".join(res.output.split())
    assert "warning: A: only 3 observations" not in text  # 3 points: standard errors exist
    assert "warning: A: few points: 3 observations" in text
    assert ("warning: not fitted: h.csv, product B: every observed price is 5: the history says nothing "
            "about how volume answers price") in text
    res = run("fit-demand", h, "--product", "B")
    assert res.exit_code == 2 and "every observed price is 5" in res.output
