"""Reports: the workbook equals the JSON plan, the charts mark the standalone economics, the page is
self-contained and opens in headless Chromium (no network) with no console errors and every chart drawn.

The report is made once per module through the CLI (``planner report ... --sweep``), as a user would.
"""

from __future__ import annotations

import hashlib
import json
import math
import re

import numpy as np
import openpyxl
import pytest
import yaml
from PIL import Image
from click.testing import CliRunner
from rich.console import Console

from planner.cli.main import main

from .browser import find_chromium, open_page
from .conftest import tiny

# Chromium comes from Debian (.ci/run installs it); the browser test is skipped only where no binary exists.
needs_chromium = pytest.mark.skipif(find_chromium() is None,
                                    reason="no Chromium binary (Debian: apt-get install chromium; .ci/run does this)")

SWEPT = "finishing booth"


@pytest.fixture(scope="module")
def report_dir(tmp_path_factory, demo_path):
    out = tmp_path_factory.mktemp("report")
    res = CliRunner().invoke(main, ["report", str(demo_path), "--out", str(out), "--sweep", SWEPT,
                                    "--sweep-steps", "3"], catch_exceptions=False)
    assert res.exit_code == 0, res.output
    assert "report written to" in res.output
    return out


def test_report_writes_every_file(report_dir, demo_path):
    plan = json.loads((report_dir / "plan.json").read_text())
    keys = ["mix", "resources", "sweep-finishing-booth"] + [
        "product-" + re.sub(r"[^a-z0-9]+", "-", p["name"].lower()) for p in plan["products"]]
    for key in keys:
        for ext in ("png", "svg"):
            f = report_dir / "charts" / f"{key}.{ext}"
            assert f.is_file() and f.stat().st_size > 5000, f
    assert (report_dir / "charts" / "mix.png").read_bytes()[:8] == b"\x89PNG\r\n\x1a\n"
    assert (report_dir / "report.html").stat().st_size > 50_000
    sweep = json.loads((report_dir / "sweep.json").read_text())
    assert sweep["resource"] == SWEPT and len(sweep["points"]) >= 3
    for pt in sweep["points"]:
        assert set(pt["volumes"]) == {p["name"] for p in plan["products"]}


def same(x):
    """Equal as a spreadsheet stores it: openpyxl writes 16 significant digits and Excel keeps 15
    (Microsoft, "Excel specifications and limits": number precision 15 digits)."""
    return x if isinstance(x, (bool, str)) or x is None else pytest.approx(x, rel=1e-15, abs=1e-12)


def test_workbook_numbers_equal_the_json_plan(report_dir):
    plan = json.loads((report_dir / "plan.json").read_text())
    wb = openpyxl.load_workbook(report_dir / "plan.xlsx")
    assert {"Summary", "Products", "Resources", "Options", "Sweep", "Input products", "Input usage",
            "Input resources", "Input options"} <= set(wb.sheetnames)
    for ws in wb.worksheets:
        assert ws.freeze_panes == "B2", ws.title  # header row (and name column) frozen

    def rows(ws):
        head = [c.value for c in ws[1]]
        return [dict(zip(head, (c.value for c in r))) for r in ws.iter_rows(min_row=2)]

    products = rows(wb["Products"])
    assert [r["product"] for r in products] == [p["name"] for p in plan["products"]]
    for row, p in zip(products, plan["products"]):
        for col, key in (("volume", "volume"), ("price", "price"), ("revenue", "revenue"),
                         ("variable cost", "variable_cost"), ("contribution", "contribution"),
                         ("fixed cost", "fixed_cost"), ("profit", "profit"), ("running", "running")):
            assert row[col] == same(p[key]), (p["name"], col)
        s = p["standalone"]
        assert row["standalone best volume"] == same(s["optimal_volume"])
        assert row["standalone best profit"] == same(s["max_profit"])
        assert [row["break-even low"], row["break-even high"]][:len(s["break_even"])] == \
            [same(x) for x in s["break_even"]]
    cur = plan["currency"]
    assert f'"{cur}"#,##0' in wb["Products"]["K2"].number_format  # profit column in the scenario's currency
    resources = rows(wb["Resources"])
    for row, r in zip(resources, plan["resources"]):
        assert row["resource"] == r["name"]
        assert row["capacity"] == same(r["capacity"]) and row["used"] == same(r["used"])
        assert row["utilisation"] == same(r["utilisation"]) and row["binding"] == r["binding"]
        assert row[f"shadow price ({cur} per unit)"] == same(r["shadow_price"])
    summary = {r["item"]: r["value"] for r in rows(wb["Summary"])}
    assert summary["total profit"] == same(plan["profit"])
    assert summary["certified bound"] == same(plan["bound"])
    assert summary["gap"] == same(plan["gap"])
    assert summary["scenario"] == plan["scenario"]
    # The inputs as read: the demo's first product line.
    first = rows(wb["Input products"])[0]
    assert (first["name"], first["price_intercept"], first["price_slope"], first["fixed_cost"]) == \
        ("oak bookcase", 620, 0.18, 38000)
    assert rows(wb["Input usage"])[0]["finishing booth"] == 1.6


def test_workbook_options_and_sweep(report_dir):
    wb = openpyxl.load_workbook(report_dir / "plan.xlsx")
    opts = {r[0].value: [c.value for c in r] for r in wb["Options"].iter_rows(min_row=2)}
    assert set(opts) == {"Saturday shift in finishing", "CNC overtime", "premium board"}
    for name, (_, _, _share, cost, with_, gain, net, *_rest) in opts.items():
        assert net == pytest.approx(gain - cost, abs=1e-6), name
    plan = json.loads((report_dir / "plan.json").read_text())
    sweep = [[c.value for c in r] for r in wb["Sweep"].iter_rows(min_row=2)]
    today = next(r["capacity"] for r in plan["resources"] if r["name"] == SWEPT)
    for row in sweep:
        if row[0] == pytest.approx(today, rel=1e-12):  # the sweep passes through the plan itself
            assert row[1] == pytest.approx(plan["profit"], rel=1e-6)
    # More of a limit never lowers the optimal profit (a relaxation: common practice in sensitivity analysis).
    profits = [r[1] for r in sorted(sweep)]
    assert all(b >= a - 1e-6 * abs(a) for a, b in zip(profits, profits[1:]))
    assert len(sweep) >= 3


def test_html_is_self_contained_with_summary_and_footer(report_dir, demo_path):
    html = (report_dir / "report.html").read_text(encoding="utf-8")
    plan = json.loads((report_dir / "plan.json").read_text())
    # No scripts, no stylesheets or images fetched from anywhere, no links out.
    assert "<script" not in html and "<link" not in html and "@import" not in html and "<img" not in html
    assert not re.search(r'\b(src|href)="(?!#)', html)
    assert not re.search(r"url\((?!#)", html)
    urls = set(re.findall(r"https?://[^\s\"'<>)]+", html))
    assert urls <= {"http://www.w3.org/2000/svg", "http://www.w3.org/1999/xlink"}, urls  # SVG namespaces only
    # Summary at the top: total profit, gap, running products, binding limit, best option.
    summary = html[html.index('id="summary"'):html.index('id="products"')]
    assert f"€{plan['profit']:,.0f}" in summary
    assert "Certified gap" in summary and "5 of 7" in summary
    assert "finishing booth" in summary and "Saturday shift in finishing" in summary
    # Summary first, then the tables, then the charts, then the footer (the layout).
    order = [html.index(x) for x in ('id="summary"', 'id="products"', 'id="resources"', 'id="options"',
                                     'id="charts"', 'id="economics"', "<footer>")]
    assert order == sorted(order)
    # Every chart inline, ids unique on the page.
    assert html.count('<figure class="chart"') == 3 + len(plan["products"])
    ids = re.findall(r'\bid="([^"]+)"', html)
    assert len(ids) == len(set(ids))
    # Footer: what reproduces the plan.
    footer = html[html.index("<footer>"):]
    assert hashlib.sha256(demo_path.read_bytes()).hexdigest() in footer
    for pkg, ver in plan["solver"]["versions"].items():
        assert f"{pkg} {ver}" in footer
    assert plan["scenario"] in footer and "UTC" in footer
    assert "local law and company agreements govern" in footer


# --- chart data against the closed-form economics ----------------------------------------------------------
# Cost–volume relationships with price p = a − b·D (Sullivan, Wicks & Koelling, Engineering Economy, ch. 2,
# demand-driven case; formulas from memory, checked by hand below): max revenue at a/(2b), best profit at
# (a − v)/(2b), break-even where (a − v)·D − b·D² − F = 0.
# Hand check for the demo's oak bookcase (a 620, b 0.18, v 240, F 38,000, cap 1,500):
#   D* = 380 / 0.36 = 1,055.56; π* = 380² / 0.72 − 38,000 = 162,555.56;
#   D_be = (380 ∓ √(380² − 4·0.18·38,000)) / 0.36 = (380 ∓ 342.111) / 0.36 = 105.25 and 2,005.86;
#   a/(2b) = 1,722 exceeds the cap, so max revenue is at 1,500: (620 − 270)·1,500 = 525,000.

def _marks(chart):
    ax = chart.figure.axes[0]
    return {ln.get_gid(): (np.asarray(ln.get_xdata(), float), np.asarray(ln.get_ydata(), float))
            for ln in ax.lines if ln.get_gid()}, ax


def test_oak_bookcase_marks_by_hand(demo_plan, demo_path):
    from planner import load_scenario
    from planner.output.report.charts import product_chart

    s, _ = load_scenario(demo_path)
    pp = demo_plan.products[0]
    assert pp.name == "oak bookcase"
    marks, _ = _marks(product_chart(pp, s.products[0], demo_plan.currency, demo_plan.period))
    bx, by = marks["mark-break-even"]
    assert bx == pytest.approx([105.25, 2005.86], abs=0.01) and list(by) == [0.0, 0.0]
    ox, oy = marks["mark-standalone-optimum"]
    assert (ox[0], oy[0]) == (pytest.approx(1055.56, abs=0.01), pytest.approx(162555.56, abs=0.01))
    rx, ry = marks["mark-max-revenue"]
    assert (rx[0], ry[0]) == (1500.0, pytest.approx(525000.0, abs=1e-6))


def test_every_product_chart_marks_its_standalone_economics_and_the_mix(demo_plan, demo_path):
    from planner import load_scenario
    from planner.output.report.charts import product_chart

    s, _ = load_scenario(demo_path)
    for pp, sp in zip(demo_plan.products, s.products):
        a, b, v, F = sp.price_intercept, sp.price_slope, sp.unit_cost, sp.fixed_cost
        cap = sp.max_volume if sp.max_volume is not None else math.inf
        st = pp.standalone
        marks, ax = _marks(product_chart(pp, sp, demo_plan.currency, demo_plan.period))
        # Marked points equal the Plan's standalone economics exactly ...
        assert list(marks["mark-break-even"][0]) == [x for x in st.break_even if x is not None]
        assert marks["mark-standalone-optimum"][0][0] == st.optimal_volume
        assert marks["mark-standalone-optimum"][1][0] == st.max_profit
        assert marks["mark-max-revenue"][0][0] == st.max_revenue_volume
        # ... and the closed forms (independent of planner.economics).
        m = a - v
        d_opt = min(m / (2 * b), cap)
        assert st.optimal_volume == pytest.approx(d_opt, rel=1e-12)
        assert st.max_profit == pytest.approx(m * d_opt - b * d_opt ** 2 - F, rel=1e-12)
        root = math.sqrt(m * m - 4 * b * F)
        assert list(marks["mark-break-even"][0]) == pytest.approx([(m - root) / (2 * b), (m + root) / (2 * b)])
        assert marks["mark-max-revenue"][0][0] == pytest.approx(min(a / (2 * b), cap))
        # The drawn profit curve passes through its marks (400 points; chord error of a parabola ≤ 2b·h²/8).
        profit_line = next(ln for ln in ax.lines if ln.get_label() == "profit")
        xs, ys = (np.asarray(z, float) for z in profit_line.get_data())
        h = xs[1] - xs[0]
        for x in marks["mark-break-even"][0]:
            assert np.interp(x, xs, ys) == pytest.approx(0.0, abs=b * h * h / 4 + 1e-6)
        assert xs[-1] == pytest.approx(a / b)  # the whole demand range, up to where the price reaches 0
        # The mix's own point: the plan's volume and profit, or a shut-down mark at zero.
        mx, my = marks["mark-mix"]
        assert (mx[0], my[0]) == ((pp.volume, pp.profit) if pp.running else (0.0, 0.0))
        for label in (ax.get_xlabel(), ax.get_ylabel()):
            assert "per quarter" in label  # axes carry units
        assert "€" in ax.get_ylabel()


def test_sweep_chart_from_a_sweep_dict_and_file(demo_plan, tmp_path):
    from planner.errors import ScenarioError
    from planner.output.report.charts import sweep_chart
    from planner.cli.report import load_sweep_file

    sweep = {"resource": SWEPT, "points": [{"capacity": c, "profit": 1000.0 + c, "shadow_price": 5.0,
                                            "volumes": {}} for c in (3000.0, 3900.0, 4800.0)],
             "breakpoints": [{"capacity": 3500.0, "change": "starts: x"}]}
    f = tmp_path / "sweep.json"
    f.write_text(json.dumps(sweep))
    chart = sweep_chart(load_sweep_file(f), demo_plan)
    top, bottom = chart.figure.axes
    assert list(top.lines[0].get_xdata()) == [3000.0, 3900.0, 4800.0]
    assert list(top.lines[0].get_ydata()) == [4000.0, 4900.0, 5800.0]
    assert chart.marks["breakpoints"] == [3500.0]
    assert "h" in bottom.get_xlabel() and "€" in top.get_ylabel() and "€" in bottom.get_ylabel()
    f.write_text(json.dumps({"points": "no"}))
    with pytest.raises(ScenarioError, match="is not a sweep"):
        load_sweep_file(f)


def test_unknown_sweep_resource_is_a_clean_error(demo_path, tmp_path):
    res = CliRunner().invoke(main, ["report", str(demo_path), "--out", str(tmp_path), "--sweep", "finishng booth"])
    assert res.exit_code == 2
    assert "--sweep: no resource called 'finishng booth'" in res.output and "finishing booth" in res.output
    assert "Traceback" not in res.output


# --- options valued by re-solving, checked by hand ------------------------------------------------------------
# One product, p = 100 − 0.5·D, v = 40, 1 h per unit on a press of 40 h: D = 40, profit 60·40 − 0.5·40² = 1,600.
# A 10 h shift costing 100 gives D = 50: 60·50 − 0.5·50² = 1,750, gain 150, net 50.
# Overtime up to 40 h at 5/h, tried at 10, 20, 30, 40 h: D = 50, 60, 60, 60 (60 is the unconstrained optimum),
# gains 150, 200, 200, 200, costs 50, 100, 150, 200, nets 100, 100, 50, 0: the first best (10 h) is kept.

def test_options_valued_by_resolving_match_hand_calculation(tmp_path):
    from planner import load_scenario, plan
    from planner.analysis.replan import value_options

    raw = tiny()
    raw["resources"][0]["capacity"] = 40.0
    raw["options"] = [{"name": "shift", "adds": {"press": 10.0}, "cost": 100.0},
                      {"name": "overtime", "adds_up_to": {"press": 40.0}, "cost_per_unit": 5.0}]
    f = tmp_path / "t.yaml"
    f.write_text(yaml.safe_dump(raw))
    s, _ = load_scenario(f)
    base = plan(s, rel_gap=1e-9)
    assert base.profit == pytest.approx(1600.0, abs=1e-6)
    shift, overtime = value_options(s, base, rel_gap=1e-9)
    assert (shift["profit_with"], shift["gain"], shift["net_gain"]) == \
        (pytest.approx(1750.0, abs=1e-6), pytest.approx(150.0, abs=1e-6), pytest.approx(50.0, abs=1e-6))
    assert not shift["approximate"]
    assert overtime["used"] == 0.25 and overtime["adds"] == {"press": 40.0} and overtime["kind"] == "part"
    assert (overtime["cost"], overtime["net_gain"]) == (pytest.approx(50.0), pytest.approx(100.0, abs=1e-6))
    assert overtime["approximate"]


# --- terminal at 80 columns ------------------------------------------------------------------------------------

def test_terminal_tables_fit_80_columns_without_wrapping_names(demo_plan):
    from planner.output.terminal import print_plan

    con = Console(width=80, record=True, color_system=None)
    print_plan(demo_plan, con)
    text = con.export_text()
    lines = text.splitlines()
    assert max(len(line) for line in lines) <= 80
    for p in demo_plan.products:  # every product name whole on one line, in the products table
        assert any(line.startswith(p.name + " ") for line in lines), p.name
    assert "€429,358" in text or f"€{demo_plan.profit:,.0f}" in text  # thousands separators and currency
    assert "€95.52/h" in text


def test_money_parts_a_currency_code_from_the_amount():
    from planner.output.terminal import money

    assert money(1234567.4, "€") == "€1,234,567"
    assert money(-988.2, "CHF") == "-CHF 988"
    assert money(36, "$000") == "$000 36"
    assert money(95.523, "€", 2) == "€95.52"


def test_terminal_drops_optional_columns_when_narrow(demo_plan):
    from planner.output.terminal import products_table

    wide = Console(width=120, record=True, color_system=None)
    wide.print(products_table(demo_plan, wide))
    narrow = Console(width=60, record=True, color_system=None)
    narrow.print(products_table(demo_plan, narrow))
    wide_text, narrow_text = wide.export_text(), narrow.export_text()
    head = narrow_text.splitlines()[1]  # the header row
    assert "contrib." in wide_text and "contrib." not in head
    assert max(len(x) for x in narrow_text.splitlines()) <= 60
    assert "profit" in head
    # ... and says so under the table, naming what it left out.
    said = " ".join(narrow_text.split())
    assert "columns left out at this width: contrib., revenue" in said and "widen the terminal or use --json" in said
    assert "columns left out" not in wide_text


# --- the page in a real browser ---------------------------------------------------------------------------------

QUERIES = {
    "charts": "Array.from(document.querySelectorAll('figure.chart')).map(f => {"
              " const s = f.querySelector('svg'); const r = s ? s.getBoundingClientRect() : {width: 0, height: 0};"
              " return [f.dataset.chart, r.width, r.height, s ? s.querySelectorAll('path').length : 0]; })",
    "title": "document.title",
    "h1": "document.querySelector('h1').textContent",
    "cards": "document.querySelectorAll('#summary .card').length",
    "tables": "document.querySelectorAll('table').length",
}


def _not_blank(png_path, background=(0xFB, 0xF8, 0xF2)):
    im = np.asarray(Image.open(png_path).convert("RGB")).astype(int)
    differs = np.abs(im - np.array(background)).sum(axis=2) > 30
    colours = len(np.unique((im[..., 0] << 16) | (im[..., 1] << 8) | im[..., 2]))
    return float(differs.mean()), colours


@needs_chromium
def test_report_opens_in_headless_chromium(report_dir):
    plan = json.loads((report_dir / "plan.json").read_text())
    page = open_page(report_dir / "report.html", QUERIES)
    assert page.console_errors == [] and page.exceptions == []
    assert page.outside_requests == []  # opens offline: nothing fetched but the file itself
    assert page.values["title"].startswith(plan["scenario"]) and page.values["h1"] == plan["scenario"]
    assert page.values["cards"] == 5 and page.values["tables"] >= 4
    charts = page.values["charts"]
    expected = {"mix", "resources", "sweep-finishing-booth"} | {
        "product-" + p["name"].replace(" ", "-") for p in plan["products"]}
    assert {c[0] for c in charts} == expected
    for key, width, height, paths in charts:
        assert width > 300 and height > 150 and paths > 50, key  # drawn, with real content
    shot = report_dir / "screenshot-top.png"
    shot.write_bytes(page.viewport_png)
    (report_dir / "screenshot-full.png").write_bytes(page.full_png)
    inked, colours = _not_blank(shot)
    assert inked > 0.05 and colours > 50, (inked, colours)  # text, cards and a chart, not an empty page
    full_inked, _ = _not_blank(report_dir / "screenshot-full.png")
    assert full_inked > 0.03  # a blank or unstyled page would be near 0
