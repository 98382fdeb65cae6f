"""Reports a person can read: chart labels that never hide each other, one axis per unit, one chart style
with formatted amounts, terminal tables that say what they leave out, and the risk part of the report.

Scenarios are invented.  Overlap is measured on the drawn figure (matplotlib's own text extents, in pixels).
"""

from __future__ import annotations

import json
import re

import numpy as np
import openpyxl
import pytest
import yaml
from click.testing import CliRunner
from PIL import Image
from rich.console import Console

from planner import load_scenario, plan
from planner.cli.main import main
from planner.output.report.placement import overlap

SWEPT = "finishing booth"


def _file(tmp_path, raw, name="s.yaml"):
    f = tmp_path / name
    f.write_text(yaml.safe_dump(raw, allow_unicode=True))
    return f


def _boxes(fig, prefix, patch=False):
    fig.draw_without_rendering()
    r = fig.canvas.get_renderer()
    texts = [t for ax in fig.axes for t in ax.texts if (t.get_gid() or "").startswith(prefix)]
    return texts, [(t.get_bbox_patch() if patch else t).get_window_extent(r) for t in texts]


def _clashes(texts, boxes):
    return [(texts[i].get_text(), texts[j].get_text()) for i in range(len(boxes)) for j in range(i)
            if overlap(boxes[i], boxes[j])]


# --- product charts: value labels never overlap ----------------------------------------------------------------
# p = 300 − 0.1·D, v = 100, F = 10,000: the standalone optimum (300 − 100) / 0.2 = 1,000 pieces; a 923 h press
# at 1 h per piece holds the mix at 923; max revenue at 300 / 0.2 = 1,500; break-even (200 ∓ √(200² − 4·0.1·
# 10,000)) / 0.2 = 51.3 and 1,948.7.  Labels '923' and '1,000' sit 77 units apart, a few pixels at this scale.

CLOSE = {"name": "close", "currency": "£",
         "products": [{"name": "Oak/Bookcase", "price_intercept": 300.0, "price_slope": 0.1, "unit_cost": 100.0,
                       "fixed_cost": 10000.0, "unit": "pieces", "usage": {"press": 1.0}}],
         "resources": [{"name": "press", "capacity": 923.0, "unit": "h"}]}


def test_close_marks_get_labels_that_do_not_overlap(tmp_path, demo_path, demo_plan):
    from planner.output.report.charts import product_chart

    s, _ = load_scenario(_file(tmp_path, CLOSE))
    p = plan(s)
    cases = [(p.products[0], s.products[0], p)]
    ds, _ = load_scenario(demo_path)
    cases += [(pp, sp, demo_plan) for pp, sp in zip(demo_plan.products, ds.products)]
    for pp, sp, pl in cases:
        chart = product_chart(pp, sp, pl.currency, pl.period)  # labels are placed as the chart is made
        texts, boxes = _boxes(chart.figure, "label-")
        assert len(texts) == len(chart.marks.get("break_even", [])) + 3, pp.name  # every mark labelled
        assert _clashes(texts, boxes) == [], pp.name
        ax = chart.figure.axes[0]
        frame = ax.get_window_extent(chart.figure.canvas.get_renderer())
        for t, b in zip(texts, boxes):
            assert frame.x0 <= b.x0 and b.x1 <= frame.x1 and frame.y0 <= b.y0 and b.y1 <= frame.y1, t.get_text()
    close = product_chart(p.products[0], s.products[0], p.currency, p.period)
    labels = {t.get_text() for t in _boxes(close.figure, "label-")[0]}
    assert {"923", "1,000", "1,500", "51.3", "1,949"} == labels  # hand calculation above
    assert "per piece;" in close.caption and "per pieces" not in close.caption


# --- the sweep chart: numbered change points apart, notes whole -------------------------------------------------

def _sweep(bps):
    return {"resource": SWEPT, "unit": "h",
            "points": [{"capacity": c, "profit": 1000.0 + c, "shadow_price": 5.0, "volumes": {}}
                       for c in (2000.0, 3000.0, 4000.0, 5000.0)],
            "breakpoints": bps}


def test_sweep_badges_never_overlap_and_notes_are_never_cut(demo_plan):
    from planner.output.report.charts import render, sweep_chart

    long = "slate: " + ", ".join(f"product number {k} with a long name starts" for k in range(6))
    for bps in ([{"capacity": 4679.0, "change": "cnc router starts to bind"},
                 {"capacity": 4754.0, "change": "bottleneck: finishing booth → cnc router"},
                 {"capacity": 4870.0, "change": "finishing booth stops binding"}],
                [{"capacity": 3000.0 + 3 * k, "change": long if k == 0 else f"change {k}"} for k in range(14)]):
        chart = sweep_chart(_sweep(bps), demo_plan)
        render(chart, "png")
        texts, boxes = _boxes(chart.figure, "badge-", patch=True)
        assert sorted(int(t.get_text()) for t in texts) == list(range(1, len(bps) + 1))
        assert _clashes(texts, boxes) == []
        notes = " ".join(" ".join(t.get_text().split()) for t in chart.figure.texts)
        assert "…" not in notes
        if len(bps) > 3:
            assert long in notes  # wrapped onto lines, never cut
            assert "and 4 more, listed in the report and the workbook" in notes


# --- the mix chart: one volume axis per unit --------------------------------------------------------------------

MIXED = {"name": "mixed units", "currency": "CHF", "period": "month",
         "products": [
             {"name": "Solid oak bookcase with adjustable shelves (large)", "price_intercept": 620.0,
              "price_slope": 0.18, "unit_cost": 240.0, "fixed_cost": 38000.0, "unit": "pieces",
              "usage": {"finishing booth and lacquer line": 1.6}},
             {"name": "Flat-pack kitchen cabinet kit, white", "price_intercept": 400.0, "price_slope": 0.05,
              "unit_cost": 150.0, "fixed_cost": 20000.0, "unit": "kits",
              "usage": {"finishing booth and lacquer line": 1.0}},
             {"name": "Moulding profile (ogee, 2.4 m lengths)", "price_intercept": 30.0, "price_slope": 0.0005,
              "unit_cost": 8.0, "fixed_cost": 5000.0, "unit": "metres",
              "usage": {"finishing booth and lacquer line": 0.05}},
             {"name": "Walnut desk", "price_intercept": 980.0, "price_slope": 0.45, "unit_cost": 410.0,
              "fixed_cost": 52000.0, "unit": "pieces", "usage": {"finishing booth and lacquer line": 2.2}}],
         "resources": [{"name": "finishing booth and lacquer line", "capacity": 2500.0, "unit": "h"}]}


def test_mix_chart_gives_each_unit_its_own_axis(tmp_path):
    from planner.output.report.charts import mix_chart

    s, _ = load_scenario(_file(tmp_path, MIXED))
    p = plan(s)
    chart = mix_chart(p)
    vol_axes = [ax for ax in chart.figure.axes if (ax.get_gid() or "").startswith("mix-volume-")]
    got = {ax.get_xlabel(): sorted(" ".join(t.get_text().split()) for t in ax.get_yticklabels())
           for ax in vol_axes}
    assert got == {"volume (pieces per month)": sorted(["Solid oak bookcase with adjustable shelves (large)",
                                                        "Walnut desk"]),
                   "volume (kits per month)": ["Flat-pack kitchen cabinet kit, white"],
                   "volume (metres per month)": ["Moulding profile (ogee, 2.4 m lengths)"]}
    assert "each unit has an axis of its own" in chart.caption


# --- risk charts in the report's style --------------------------------------------------------------------------

@pytest.fixture(scope="module")
def risk_result(demo_path):
    from planner.analysis.risk.run import run_risk

    return run_risk(demo_path, samples=60, seed=3, workers=0)


def test_risk_charts_share_the_report_style(risk_result, tmp_path):
    from planner.output.report.style import PALETTE
    from planner.output.risk_charts import risk_charts, write_charts

    charts = risk_charts(risk_result)
    assert [c.key for c in charts] == ["risk-profit-histogram", "risk-profit-fan", "risk-shadow-prices"]
    paper = PALETTE["paper"]
    for c in charts:
        c.figure.draw_without_rendering()
        assert c.figure.get_facecolor()[:3] == pytest.approx(tuple(int(paper[i:i + 2], 16) / 255 for i in (1, 3, 5)))
    hist = charts[0].figure.axes[0]
    ticks = [t.get_text() for t in hist.get_xticklabels() if t.get_text()]
    assert ticks and all(t.startswith(("€", "-€")) for t in ticks), ticks  # amounts, not '250000'
    assert any(t.endswith("k") for t in ticks), ticks
    written = write_charts(risk_result, tmp_path / "rc")
    assert sorted(p.name for p in written) == ["profit_fan.png", "profit_histogram.png", "shadow_prices.png"]
    for p in written:  # the page's paper colour in the corner, not matplotlib's white
        corner = Image.open(p).convert("RGB").getpixel((1, 1))
        assert corner == tuple(int(paper[i:i + 2], 16) for i in (1, 3, 5)), (p.name, corner)


# --- the terminal at 80 columns with long names -----------------------------------------------------------------

def test_long_names_wrap_and_left_out_columns_are_named(tmp_path):
    from planner.output.terminal import print_plan

    s, _ = load_scenario(_file(tmp_path, MIXED))
    p = plan(s)
    con = Console(width=80, record=True, color_system=None)
    print_plan(p, con)
    text = con.export_text()
    lines = text.splitlines()
    assert max(len(x) for x in lines) <= 80
    head = next(x for x in lines if x.startswith("product "))
    shown = head.split()
    full = ["product", "run", "volume", "price", "revenue", "contrib.", "fixed", "profit"]
    missing = [c for c in ("contrib.", "revenue", "fixed") if c not in shown]
    assert set(shown) | set(missing) == set(full)
    flat = " ".join(text.split())
    if missing:
        assert f"columns left out at this width: {', '.join(missing)}; widen the terminal or use --json" in flat
    for prod in MIXED["products"]:  # every word of every name is there (wrapped, never cut)
        for word in prod["name"].split():
            assert word in text, word
    wide = Console(width=200, record=True, color_system=None)
    print_plan(p, wide)
    assert "columns left out" not in wide.export_text()


# --- risk in the meeting report ---------------------------------------------------------------------------------

def test_report_with_risk_shows_loss_percentiles_and_the_robust_choice(tmp_path, demo_path, risk_result):
    out = tmp_path / "r"
    res = CliRunner().invoke(main, ["report", str(demo_path), "--out", str(out), "--risk", "60", "--seed", "3",
                                    "--no-options", "-q"])
    assert res.exit_code == 0, res.output
    risk = json.loads((out / "risk.json").read_text())
    direct = risk_result.to_dict()  # the same seed, run directly: the report shows exactly these numbers
    assert risk["plan_profit"] == pytest.approx(direct["plan_profit"])
    assert risk["probability_of_loss"] == direct["probability_of_loss"]
    assert risk["plan_profit"]["p5"] == pytest.approx(float(np.percentile(risk_result.plan_profit, 5)))
    html = (out / "report.html").read_text(encoding="utf-8")
    section = re.sub(r"<[^>]+>", " ", html[html.index('id="risk"'):html.index("</section>", html.index('id="risk"'))])
    section = " ".join(section.split())
    pp = risk["plan_profit"]
    assert f"{100 * risk['probability_of_loss']:.1f} %" in section
    assert " / ".join(f"€{pp[k]:,.0f}" for k in ("p5", "p50", "p95")) in section
    assert "Robust choice" in section
    assert html.count('data-chart="risk-') == 3
    summary = html[html.index('id="summary"'):html.index('id="products"')]
    assert "chance of a loss" in summary
    assert "local law and company agreements govern" in html
    wb = openpyxl.load_workbook(out / "plan.xlsx")
    rows = {r[0].value: r[1].value for r in wb["Risk"].iter_rows(min_row=2)}
    # openpyxl writes 16 significant digits (as in test_report.same)
    assert rows["chance of a loss"] == pytest.approx(risk["probability_of_loss"], rel=1e-15)
    assert rows["plan profit: P5"] == pytest.approx(pp["p5"], rel=1e-15)
    assert rows["plan profit: 95 % Monte Carlo half-width"] == pytest.approx(1.96 * pp["se"], rel=1e-15)
    # Without --risk the report has no risk part (default off).
    from .conftest import tiny

    plain = tmp_path / "plain"
    assert CliRunner().invoke(main, ["report", str(_file(tmp_path, tiny())), "--out", str(plain), "--no-options",
                                     "-q"]).exit_code == 0
    assert not (plain / "risk.json").exists() and 'id="risk"' not in (plain / "report.html").read_text()


# --- exit codes are documented ----------------------------------------------------------------------------------

def test_every_exit_code_is_documented():
    from pathlib import Path

    import importlib

    from planner import errors

    cli = importlib.import_module("planner.cli.main")  # the module (planner.cli.main is also a command's name)

    codes = {v for k, v in vars(errors).items() if k.startswith("EXIT_")} | {5, 130}
    readme = (Path(__file__).resolve().parents[1] / "README.md").read_text(encoding="utf-8")
    line = next(x for x in readme.splitlines() if x.startswith("Exit codes"))
    for code in sorted(codes):
        assert re.search(rf"\b{code}\b", line), code
        assert re.search(rf"^- {code}:", cli.__doc__, re.M), code
