"""Workbooks and CSV folders: lossless round trips, the template, and bad spreadsheets located exactly."""

from __future__ import annotations

import shutil

import pytest
import yaml

from planner import ScenarioError, load_scenario, plan
from planner.scenario.forms.tables import from_tables, to_tables, Table
from planner.scenario.forms.writers import write_scenario
from planner.scenario.loading import read_raw

from .conftest import CASES, ROOT

RICH = CASES / "rich_mix.yaml"


def same_plan(p, q, tol=1e-9):
    """Two plans agree to tol in profit, bound, every volume, price and shadow price."""
    assert p.status == q.status
    assert q.profit == pytest.approx(p.profit, rel=tol, abs=tol)
    assert q.bound == pytest.approx(p.bound, rel=tol, abs=tol)
    for a, b in zip(p.products, q.products, strict=True):
        assert (a.name, a.running) == (b.name, b.running)
        assert b.volume == pytest.approx(a.volume, rel=tol, abs=tol)
        assert b.price == pytest.approx(a.price, rel=tol, abs=tol)
    for a, b in zip(p.resources, q.resources, strict=True):
        assert b.shadow_price == pytest.approx(a.shadow_price, rel=tol, abs=tol)


@pytest.mark.parametrize("source", [ROOT / "scenarios" / "demo.yaml", RICH], ids=["demo", "every-section"])
def test_yaml_xlsx_csv_yaml_round_trip(tmp_path, source):
    # Copy next to its history file so relative paths keep working from tmp_path.
    src = tmp_path / source.name
    shutil.copy(source, src)
    shutil.copy(CASES / "rich_sales.csv", tmp_path / "rich_sales.csv")
    raw0 = read_raw(src)
    write_scenario(raw0, tmp_path / "s.xlsx")
    write_scenario(read_raw(tmp_path / "s.xlsx"), tmp_path / "s_csv")
    write_scenario(read_raw(tmp_path / "s_csv"), tmp_path / "back.yaml")
    for path in ("s.xlsx", "s_csv", "back.yaml"):
        assert read_raw(tmp_path / path) == raw0, path  # every key, exactly
    p0 = plan(src, rel_gap=1e-9)
    for path in ("s.xlsx", "s_csv", "back.yaml"):
        same_plan(p0, plan(tmp_path / path, rel_gap=1e-9))


def test_wide_usage_reads_like_long(tmp_path):
    raw = read_raw(RICH)
    write_scenario(raw, tmp_path / "wide.xlsx", wide_usage=True)
    write_scenario(raw, tmp_path / "wide_csv", wide_usage=True)
    header = (tmp_path / "wide_csv" / "usage.csv").read_text().splitlines()[0]
    assert header == "product,lathe,mill,steel"
    assert read_raw(tmp_path / "wide.xlsx") == raw
    assert read_raw(tmp_path / "wide_csv") == raw


def test_unknown_sections_and_nested_values_survive_tables():
    raw = {"name": "x", "future_setting": {"a": [1, 2]}, "products": [{"name": "p", "extra": {"k": 1.5}}],
           "future_list": [{"name": "f1", "value": 2.5}, {"name": "f2", "note": "t", "deep": [1, {"x": 2}]}]}
    tables = to_tables(raw)
    back = from_tables({k: Table(k, h, [(i + 2, r) for i, r in enumerate(rows)]) for k, (h, rows) in tables.items()},
                       lambda t: f"sheet {t}", "x")
    assert back.problems == []
    assert back.raw == raw


def test_template_filled_in_plans(tmp_path):
    from openpyxl import load_workbook

    from planner.scenario.forms.xlsx import write_template

    path = write_template(tmp_path / "t.xlsx")
    wb = load_workbook(path)
    assert wb.sheetnames[:4] == ["about", "scenario", "products", "usage"]
    assert wb["products"]["B1"].value == "price_intercept"
    assert "Price at which demand falls to zero" in wb["products"]["B1"].comment.text  # from the schema
    kinds = wb["resources"].data_validations.dataValidation[0]
    assert str(kinds.sqref) == "D2:D5000" and kinds.formula1 == '"work_centre,material,other"'
    # A planner fills it in: one product from intercept and slope, one from a sales history.
    shutil.copy(CASES / "rich_sales.csv", tmp_path / "sales.csv")
    wb["scenario"]["B2"] = "Filled template"
    wb["products"].append(["gear", 200, 0.05, 60])
    wb["products"].append(["hub", None, None, 120, 700])
    wb["usage"].append(["gear", "lathe", 0.25])
    wb["usage"].append(["hub", "lathe", 0.5])
    wb["resources"].append(["lathe", 600, "h", "work_centre"])
    wb["demand"].append(["hub", "sales.csv"])
    wb.save(path)
    s, warnings = load_scenario(path)
    assert s.name == "Filled template"
    hub = s.product("hub")
    assert hub.demand_fit is not None and hub.demand_fit.n == 10 and hub.demand_fit.source == "sales.csv"
    p = plan(path)
    assert p.status == "optimal" and p.profit > 0


# ---------------------------------------------------------------- bad spreadsheets


def bad_copy(tmp_path, form):
    """The every-section scenario written as a workbook or folder (with its history beside it)."""
    shutil.copy(CASES / "rich_sales.csv", tmp_path / "rich_sales.csv")
    raw = read_raw(RICH)
    target = tmp_path / ("bad.xlsx" if form == "xlsx" else "bad")
    write_scenario(raw, target)
    return target


def edit(target, table, fn):
    """Apply fn(rows) to a table's rows (lists of cells, heading first) in either form."""
    if target.suffix == ".xlsx":
        from openpyxl import load_workbook

        wb = load_workbook(target)
        ws = wb[table]
        rows = [list(r) for r in ws.iter_rows(values_only=True)]
        rows = fn(rows)
        wb.remove(ws)
        ws = wb.create_sheet(table)
        for r in rows:
            ws.append(r)
        wb.save(target)
    else:
        import csv

        path = target / f"{table}.csv"
        rows = fn(list(csv.reader(path.read_text().splitlines())))
        with path.open("w", newline="") as f:
            csv.writer(f).writerows([["" if c is None else c for c in r] for r in rows])


def messages(path) -> list[str]:
    with pytest.raises(ScenarioError) as info:
        load_scenario(path)
    return [str(p) for p in info.value.problems]


@pytest.fixture(params=["xlsx", "csv"])
def bad(tmp_path, request):
    t = bad_copy(tmp_path, request.param)
    sheet = "sheet" if request.param == "xlsx" else "file"
    ext = "" if request.param == "xlsx" else ".csv"
    return t, lambda name: f"{sheet} {name}{ext}"


def test_missing_sheet(bad):
    target, at = bad
    if target.suffix == ".xlsx":
        from openpyxl import load_workbook

        wb = load_workbook(target)
        wb.remove(wb["products"])
        wb.save(target)
    else:
        (target / "products.csv").unlink()
    assert messages(target) == [f"{at('products')}: is missing (add it with a heading row: name, price_intercept, "
                                "price_slope, unit_cost, ...)"]


def test_sheet_names_in_any_case(tmp_path):
    from openpyxl import load_workbook

    write_scenario(read_raw(ROOT / "scenarios" / "demo.yaml"), tmp_path / "c.xlsx")
    wb = load_workbook(tmp_path / "c.xlsx")
    wb["products"].title = "Product list"  # a misnamed sheet gets a hint
    wb.save(tmp_path / "c.xlsx")
    assert messages(tmp_path / "c.xlsx") == [
        "sheet products: is missing (did you mean 'Product list'? add it with a heading row: name, price_intercept, "
        "price_slope, unit_cost, ...)"]
    wb["Product list"].title = "PRODUCTS"
    wb["PRODUCTS"]["D3"] = "abc"
    wb.save(tmp_path / "c.xlsx")
    assert messages(tmp_path / "c.xlsx") == [
        "sheet PRODUCTS, row 3, column unit_cost (products[walnut desk].unit_cost): must be a number (got 'abc') (write digits only, e.g. 1200 or 0.75)"]


def test_text_in_number_cell(bad):
    target, at = bad

    def fn(rows):
        rows[2][rows[0].index("unit_cost")] = "eighty"
        return rows

    edit(target, "products", fn)
    assert messages(target) == [
        f"{at('products')}, row 3, column unit_cost (products[gear B].unit_cost): must be a number (got 'eighty') (write digits only, e.g. 1200 or 0.75)"]


def test_empty_row_in_the_middle(bad):
    target, at = bad
    edit(target, "resources", lambda rows: rows[:2] + [[None] * len(rows[0])] + rows[2:])
    assert messages(target) == [
        f"{at('resources')}, row 3: is empty, but rows follow it "
        "(delete the empty row: a table ends at its first empty row)"]


def test_product_in_usage_not_in_products(bad):
    target, at = bad
    edit(target, "usage", lambda rows: rows + [["gear Ax", "lathe", 0.3]])
    row = sum(len(p.get("usage", {})) for p in read_raw(RICH)["products"]) + 2  # heading, then one row per entry
    assert messages(target) == [f"{at('usage')}, row {row}, column product: names a product that is not defined: "
                                "'gear Ax' (did you mean 'gear A'?)"]


def test_every_problem_in_one_pass_with_places(bad):
    target, at = bad

    def fn(rows):
        rows[1][rows[0].index("price_slope")] = -1
        rows[0].append("fixd_cost")
        rows[1].append(3)
        return rows

    edit(target, "products", fn)
    edit(target, "resources", lambda rows: [r if i != 2 else [r[0], "lots", *r[2:]] for i, r in enumerate(rows)])
    got = messages(target)
    assert got == [
        f"{at('products')}, row 2, column price_slope (products[gear A].price_slope): must be >= 0 (got -1) (give a value of 0 or more)",
        f"{at('products')}, row 2, column fixd_cost (products[gear A].fixd_cost): unknown key "
        "(did you mean 'fixed_cost'?)",
        f"{at('resources')}, row 3, column capacity (resources[mill].capacity): must be a number (got 'lots') (write digits only, e.g. 1200 or 0.75)",
    ]


def test_demand_form_problem_located(bad):
    target, at = bad

    def fn(rows):
        rows[2][rows[0].index("elasticity")] = 1.6  # positive: wrong
        return rows

    edit(target, "demand", fn)
    assert messages(target) == [
        f"{at('demand')}, row 3, column elasticity (products[shaft].demand.elasticity): must be < 0: demand "
        "falls as price rises (got 1.6) (price elasticities are negative: write e.g. -1.5)"]


def test_yaml_still_reports_without_sheet_places():
    raw = yaml.safe_load(RICH.read_text())
    raw["products"][0]["unit_cost"] = "x"
    from planner import validate_scenario

    with pytest.raises(ScenarioError) as info:
        validate_scenario(raw, base_dir=CASES)
    assert [str(p) for p in info.value.problems] == ["products[gear A].unit_cost: must be a number (got 'x') (write digits only, e.g. 1200 or 0.75)"]


@pytest.mark.parametrize("target", ["f.xlsx", "f_csv"])
def test_floats_come_back_bit_for_bit(tmp_path, target):
    import numpy as np

    rng = np.random.default_rng(0)  # values needing all 17 significant digits, and extremes
    vals = [float(x) for x in rng.uniform(0, 1000, 50)] + [0.1 + 0.2, 1 / 3, 1e-300, 5e-324, 1.7976931348623157e308]
    raw = {"name": "f", "products": [{"name": f"p{i}", "price_intercept": v} for i, v in enumerate(vals)]}
    write_scenario(raw, tmp_path / target)
    back = [p["price_intercept"] for p in read_raw(tmp_path / target)["products"]]
    assert [v.hex() for v in back] == [v.hex() for v in vals]
