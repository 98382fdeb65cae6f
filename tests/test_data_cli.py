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


def _wrong_history(tmp_path, noisy: bool):
    """Volumes rising with price: noisy (β's interval reaches past 0) or clearly (it does not)."""
    prices = list(range(10, 20))
    extra = [0, -10, 20, -12, 20, 0, 20, -15, 15, -10] if noisy else [0, 1, -1, 0, 1, -1, 0, 1, -1, 0]
    volumes = [100 + 3 * p + e for p, e in zip(prices, extra)]
    h = tmp_path / ("noisy.csv" if noisy else "clear.csv")
    h.write_text("product,price,volume\n" + "".join(f"W,{p},{v}\n" for p, v in zip(prices, volumes)))
    return h, prices, volumes


@pytest.mark.parametrize("noisy", [True, False])
def test_fit_demand_wrong_sign_interval_contains_the_estimate(tmp_path, noisy):
    """A wrong-signed history printed the slope interval '0.1249–∞', which does not hold the (negative)
    estimate.  Outside reference: scipy.stats.linregress of volume on price (β and its standard error)
    and scipy's t quantile; b = −1/β, so β's interval [β − t·se, β + t·se] maps to b's confidence set,
    two rays when it reaches past 0 (the one holding the estimate is (−∞, −1/(β + t·se)]), else the
    interval [−1/(β − t·se), −1/(β + t·se)]."""
    scipy_stats = pytest.importorskip("scipy.stats")
    h, prices, volumes = _wrong_history(tmp_path, noisy)
    ref = scipy_stats.linregress(prices, volumes)
    t = scipy_stats.t.ppf(0.975, len(prices) - 2)
    lo_beta, hi_beta = ref.slope - t * ref.stderr, ref.slope + t * ref.stderr
    assert ref.slope > 0 and (lo_beta < 0) == noisy  # the two cases are the two shapes
    out = tmp_path / "fit.json"
    res = run("fit-demand", h, "--json", out)
    assert res.exit_code == 0, res.output
    line = json.loads(out.read_text())["products"][0]
    b = line["slope"]
    assert b == pytest.approx(-1 / ref.slope, rel=1e-10)
    lo, hi = line["slope_ci"]
    assert hi == pytest.approx(-1 / hi_beta, rel=1e-10)
    if noisy:
        assert lo is None
    else:
        assert lo == pytest.approx(-1 / lo_beta, rel=1e-10)
    assert (lo is None or lo <= b) and b <= hi < 0
    text = " ".join(res.output.split())
    assert "wrong sign" in text.split("warning:")[0]  # in the table, under the interval
    assert (f"-∞ to {hi:,.4g}" if noisy else f"{lo:,.4g} to {hi:,.4g}") in text
