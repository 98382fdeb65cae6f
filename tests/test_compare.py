"""``planner compare`` and the variants behind it: a variant's plan is the plan of the hand-edited file (the
definition), a tiny case worked by hand, whole files side by side, the page / workbook / charts, Dask
results identical to one process, and the variants' own messages in every input form."""

from __future__ import annotations

import json
import re

import openpyxl
import pytest
import yaml
from click.testing import CliRunner

from planner import load_scenario
from planner.cli.main import main
from planner.scenario.loading import read_raw

# A two-product case solved by hand (common practice: KKT conditions of a concave QP with one shared row).
# Each product: price = 100 − 0.5·D, unit cost 40, so contribution 60·D − 0.5·D²; both use 1 h of the mill.
# Base: 100 h of mill.  Unconstrained each would make 60 (120 h): the mill binds, 60 − D − λ = 0 with
# 2D = 100 gives D = 50 each, λ = 10 per h, profit 2 × (3000 − 1250) = 3500, less plant 1 = 3499.
# Variant "shift": the 20 h option taken (cost 300) and the oak intercept × 0.95 (margin 55): the mill
# (120 h) no longer binds at oak 55, ash 60 (115 h); profit 1512.5 + 1800 − (1 + 300) = 3011.5.
TINY = {
    "name": "tiny mill", "plant_fixed_cost": 1,
    "products": [{"name": "oak", "price_intercept": 100, "price_slope": 0.5, "unit_cost": 40, "usage": {"mill": 1}},
                 {"name": "ash", "price_intercept": 100, "price_slope": 0.5, "unit_cost": 40, "usage": {"mill": 1}}],
    "resources": [{"name": "mill", "capacity": 100, "unit": "h", "kind": "work_centre"}],
    "options": [{"name": "sat", "adds": {"mill": 20}, "cost": 300}],
    "variants": [{"name": "shift", "description": "Saturday and a lower oak price",
                  "changes": [{"option": "sat", "field": "taken", "set": 1},
                              {"product": "oak", "field": "price_intercept", "scale": 0.95}]},
                 {"name": "no oak", "changes": [{"product": "oak", "field": "max_volume", "set": 0}]},
                 {"name": "price up", "changes": [{"product": "ash", "field": "price_intercept", "add": 10}]}],
}


def write(tmp_path, raw, name="s.yaml"):
    path = tmp_path / name
    path.write_text(yaml.safe_dump(raw, sort_keys=False, allow_unicode=True), encoding="utf-8")
    return path


def compare_json(args, tmp_path):
    out = tmp_path / "c.json"
    res = CliRunner().invoke(main, ["compare", *map(str, args), "--json", str(out)])
    assert res.exit_code == 0, res.output
    return json.loads(out.read_text()), res


def test_tiny_case_worked_by_hand(tmp_path):
    data, res = compare_json([write(tmp_path, TINY)], tmp_path)
    base, (shift, no_oak, up) = data["base"], data["variants"]
    assert base["profit"] == pytest.approx(3499, abs=1e-6)
    assert base["bottlenecks"][0]["name"] == "mill" and base["bottlenecks"][0]["shadow_price"] == pytest.approx(10)
    assert shift["profit"] == pytest.approx(3011.5, abs=1e-6)
    assert shift["profit_change"] == pytest.approx(3011.5 - 3499, abs=1e-6)
    assert [p["volume"] for p in shift["products"]] == pytest.approx([55, 60])
    assert shift["resources"][0]["capacity"] == 120 and shift["bottlenecks"] == []
    assert shift["changes"] == ["options[sat] taken set 1", "products[oak].price_intercept scale 0.95"]
    assert shift["labour_note"].startswith("Labour rules on shifts and overtime differ by jurisdiction")
    # No oak: ash alone has the mill, makes its unconstrained 60 (60 h): 60·60 − 0.5·3600 − 1 = 1799.
    assert no_oak["profit"] == pytest.approx(1799, abs=1e-6)
    assert no_oak["changed_decisions"] == [{"product": "oak", "base_running": True, "running": False}]
    # Ash's intercept +10: 70 − D_ash − λ = 0, 60 − D_oak − λ = 0, D_oak + D_ash = 100 → D_ash 55, D_oak 45, λ 15.
    assert [p["volume"] for p in up["products"]] == pytest.approx([45, 55])
    assert up["resources"][0]["shadow_price"] == pytest.approx(15)
    assert "labour_note" not in up  # a price changes no one's hours
    out = " ".join(res.output.split())
    assert "profit per quarter $3,499 $3,012 $1,799" in out and "stops none oak none" in out


def hand_edited(demo_path, tmp_path, name, edit):
    raw = yaml.safe_load(demo_path.read_text(encoding="utf-8"))
    raw.pop("variants")
    edit(raw)
    return write(tmp_path, raw, f"{name}.yaml")


def by_name(items, name):
    return next(x for x in items if x["name"] == name)


def test_each_demo_variant_is_the_plan_of_its_hand_edited_file(demo_path, tmp_path):
    """The definition: a variant = the file with its changes made by hand, planned with `planner plan`."""
    data, _ = compare_json([demo_path], tmp_path)
    lacquer = {"oak bookcase": 1.44, "walnut desk": 1.8, "pine dresser": 1.2, "maple sideboard": 1.68,
               "birch nightstand": 0.6, "cedar chest": 1.32, "ash bench": 0.72}

    def saturday(raw):
        by_name(raw["resources"], "finishing booth")["capacity"] += 624
        raw["plant_fixed_cost"] += 21000

    def oak(raw):
        by_name(raw["products"], "oak bookcase")["price_intercept"] = 589.0  # 620 × 0.95

    def dearer(raw):
        for p in raw["products"]:
            p["unit_cost"] += lacquer[p["name"]]

    def no_walnut(raw):
        by_name(raw["products"], "walnut desk")["max_volume"] = 0
    edits = {"Saturday shift": saturday, "oak price down 5 %": oak, "dearer lacquer": dearer,
             "no walnut desks": no_walnut}
    assert [v["name"] for v in data["variants"]] == list(edits)
    for name, edit in edits.items():
        path = hand_edited(demo_path, tmp_path, re.sub(r"\W+", "-", name), edit)
        out = tmp_path / "ref.json"
        assert CliRunner().invoke(main, ["plan", str(path), "--json", str(out), "--no-capacity", "-q"]).exit_code == 0
        ref, v = json.loads(out.read_text()), by_name(data["variants"], name)
        assert v["profit"] == pytest.approx(ref["profit"], rel=1e-9), name
        assert [p["running"] for p in v["products"]] == [p["running"] for p in ref["products"]], name
        assert [p["volume"] for p in v["products"]] == pytest.approx([p["volume"] for p in ref["products"]],
                                                                     rel=1e-9, abs=1e-9), name
        assert v["profit_change"] == pytest.approx(v["profit"] - data["base"]["profit"], abs=1e-9)
    # The README's worked figure: the Saturday shift nets 32,541 on the demo.
    assert by_name(data["variants"], "Saturday shift")["profit_change"] == pytest.approx(32541, abs=1)
    assert by_name(data["variants"], "no walnut desks")["changed_decisions"] == [
        {"product": "walnut desk", "base_running": True, "running": False}]


def test_whole_files_side_by_side_in_any_form(demo_path, tmp_path):
    edited = hand_edited(demo_path, tmp_path, "more-booth",
                         lambda raw: by_name(raw["resources"], "finishing booth").__setitem__("capacity", 4524))
    res = CliRunner().invoke(main, ["convert", str(edited), str(tmp_path / "more-booth.xlsx")])
    assert res.exit_code == 0, res.output
    data, _ = compare_json([demo_path, tmp_path / "more-booth.xlsx"], tmp_path)
    (v,) = data["variants"]
    assert v["file"].endswith("more-booth.xlsx")
    assert v["name"] == "Larkfield Joinery, Q1 (more-booth.xlsx)"  # same scenario name: told apart by the file
    # 624 h more finishing booth without the shift's cost: the README's re-solved gain of 53,541.
    assert v["profit_change"] == pytest.approx(53541, abs=1)
    assert v["labour_note"]  # a work centre's hours differ


def test_variant_option_and_its_mistakes(demo_path, tmp_path):
    data, _ = compare_json([demo_path, "--variant", "no walnut desks", "--variant", "Saturday shift"], tmp_path)
    assert [v["name"] for v in data["variants"]] == ["no walnut desks", "Saturday shift"]
    res = CliRunner().invoke(main, ["compare", str(demo_path), "--variant", "saturday shift"])
    assert res.exit_code == 2
    assert " ".join(res.stderr.split()) == (
        "error: --variant names a variant the scenario does not define ('saturday shift': did you mean 'Saturday "
        "shift'?); its variants: 'Saturday shift', 'oak price down 5 %', 'dearer lacquer', 'no walnut desks'")
    res = CliRunner().invoke(main, ["compare", str(demo_path), str(demo_path), "--variant", "Saturday shift"])
    assert res.exit_code == 2 and "--variant names a variant of one scenario" in res.stderr
    plain = dict(TINY, variants=[])
    res = CliRunner().invoke(main, ["compare", str(write(tmp_path, plain))])
    assert res.exit_code == 2 and "the scenario has no variants to compare" in res.stderr


def test_an_infeasible_variant_is_reported_and_the_rest_compared(tmp_path):
    raw = dict(TINY, products=[dict(TINY["products"][0], min_volume=40), TINY["products"][1]],
               variants=[{"name": "tiny mill", "changes": [{"resource": "mill", "field": "capacity", "set": 30}]},
                         TINY["variants"][2]])
    data, res = compare_json([write(tmp_path, raw)], tmp_path)
    bad, ok = data["variants"]
    assert bad["status"] == "infeasible" and bad["profit"] is None
    assert "committed volume of oak (40 units) needs 40 h of mill; it has 30 h (short by 10 h)" in bad["message"]
    assert ok["status"] == "optimal"
    assert "no plan:" in res.output


def test_out_writes_a_self_contained_page_a_workbook_and_charts(demo_path, tmp_path):
    out = tmp_path / "cmp"
    res = CliRunner().invoke(main, ["compare", str(demo_path), "--out", str(out), "-q"])
    assert res.exit_code == 0, res.output
    data = json.loads((out / "compare.json").read_text())
    html = (out / "compare.html").read_text(encoding="utf-8")
    assert "<script" not in html and "<link" not in html and "<img" not in html
    assert not re.search(r'\b(src|href)="(?!#)', html)
    assert set(re.findall(r"https?://[^\s\"'<>)]+", html)) <= {"http://www.w3.org/2000/svg",
                                                               "http://www.w3.org/1999/xlink"}
    for v in [data["base"]] + data["variants"]:
        assert f"€{v['profit']:,.0f}" in html, v["name"]
    assert html.count('<figure class="chart"') == 2 and "Labour rules on shifts" in html
    for key in ("profit-by-variant", "profit-change"):
        assert (out / "charts" / f"{key}.png").read_bytes()[:8] == b"\x89PNG\r\n\x1a\n"
        assert (out / "charts" / f"{key}.svg").stat().st_size > 5000
    wb = openpyxl.load_workbook(out / "compare.xlsx")
    assert wb.sheetnames == ["Comparison", "Products", "Resources", "Changes"]
    head = [c.value for c in wb["Comparison"][1]]
    assert head[1:] == ["base: Larkfield Joinery, Q1"] + [v["name"] for v in data["variants"]]
    # Equal as a spreadsheet stores it (Microsoft, "Excel specifications and limits": 15 significant digits).
    assert [c.value for c in wb["Comparison"][2]][1:] == pytest.approx(
        [data["base"]["profit"]] + [v["profit"] for v in data["variants"]], rel=1e-15)
    rows = list(wb["Products"].iter_rows(min_row=2, values_only=True))
    assert len(rows) == 7 * 5
    walnut = next(r for r in rows if r[0] == "no walnut desks" and r[1] == "walnut desk")
    assert walnut[2] is False and walnut[3] == 0


@pytest.mark.slow
def test_many_variants_on_dask_give_the_same_results_as_one_process(tmp_path):
    """More than a handful of variants go to a local Dask cluster; each plan depends on its variant only."""
    raw = dict(TINY, variants=[{"name": f"mill {h}", "changes": [{"resource": "mill", "field": "capacity", "set": h}]}
                               for h in (60, 80, 90, 110, 130, 150, 170)])
    path = write(tmp_path, raw)
    one, _ = compare_json([path, "--workers", "0"], tmp_path)
    two, _ = compare_json([path, "--workers", "2"], tmp_path)
    assert one["run"]["scheduler"] == "in-process" and two["run"]["scheduler"] == "local cluster"
    assert two["run"]["workers"] == 2
    for a, b in zip(one["variants"], two["variants"]):
        assert {k: v for k, v in a.items() if k != "run"} == {k: v for k, v in b.items() if k != "run"}
    # Each of these by hand: below 120 h the mill binds and both make H/2; above, each makes 60.
    for v, h in zip(one["variants"], (60, 80, 90, 110, 130, 150, 170)):
        d = min(h / 2, 60)
        assert v["profit"] == pytest.approx(2 * (60 * d - 0.5 * d * d) - 1, abs=1e-6)


def test_variants_travel_through_every_form_with_located_messages(tmp_path):
    path = write(tmp_path, TINY)
    for target in ("s.xlsx", "s_csv"):
        res = CliRunner().invoke(main, ["convert", str(path), str(tmp_path / target)])
        assert res.exit_code == 0, res.output
        assert read_raw(tmp_path / target) == TINY
        assert load_scenario(tmp_path / target)[0] == load_scenario(path)[0]
    rows = (tmp_path / "s_csv" / "variant_changes.csv").read_text().splitlines()
    assert rows[0] == "variant,product,option,field,set,add,scale"  # the columns a change uses, in the table's order
    assert rows[2] == "shift,oak,,price_intercept,,,0.95"
    text = (tmp_path / "s_csv" / "variant_changes.csv").read_text().replace(",price_intercept,,,0.95",
                                                                             ",price_intercpt,,,0.95")
    (tmp_path / "s_csv" / "variant_changes.csv").write_text(text)
    res = CliRunner().invoke(main, ["check", str(tmp_path / "s_csv")])
    assert res.exit_code == 2
    assert ("  - file variant_changes.csv, row 3, column field (variants[shift].changes[2].field): must be one of "
            "'price_intercept', 'price_slope', 'unit_cost', 'fixed_cost', 'max_volume', 'min_volume', 'min_run', "
            "'capacity', 'taken' or 'plant_fixed_cost' (got 'price_intercpt') (did you mean 'price_intercept'?)\n"
            in res.stderr)


def test_a_variant_name_follows_the_name_rule(tmp_path):
    raw = json.loads(json.dumps(TINY))
    raw["variants"][2]["name"] = "price\u202eup"
    res = CliRunner().invoke(main, ["check", str(write(tmp_path, raw))])
    assert res.exit_code == 2
    assert "  - variants[3].name: contains a bidirectional control character U+202E at position 6 (remove it)\n" \
        in res.stderr
