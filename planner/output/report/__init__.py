"""Reports that managers read: a self-contained HTML page, an Excel workbook and the charts (PNG and SVG).

Everything reads one Plan (and its Scenario) through a :class:`ReportContext`::

    from planner import load_scenario, plan
    from planner.analysis.replan import report_context
    from planner.output.report import write_report
    scenario, _ = load_scenario("scenarios/demo.yaml")
    p = plan(scenario)
    ctx = report_context(p, scenario, source="scenarios/demo.yaml")   # the capacity analysis, options valued
    paths = write_report(p, scenario, "report/", context=ctx)
"""

from __future__ import annotations

from pathlib import Path
from typing import Any

from planner.output.plan import Plan
from planner.scenario.schema import Scenario
from planner.output.report.context import ReportContext, make_context

__all__ = ["write_report", "ReportContext", "make_context"]


def write_report(plan: Plan, scenario: Scenario, out_dir: str | Path, source: str | Path = "",
                 sweep: dict[str, Any] | None = None, context: ReportContext | None = None) -> dict[str, Path]:
    """Write report.html, plan.xlsx, plan.json (sweep.json with a sweep) and every chart as PNG and SVG
    into ``out_dir``.

    Returns the written paths by name ('html', 'xlsx', 'json', 'sweep', 'chart:<key>.png', 'chart:<key>.svg').
    Nothing is solved here: without ``context`` the report shows what ``plan`` holds.
    """
    from planner.files import write_atomic, write_text_atomic
    from planner.output.report.charts import all_charts, render
    from planner.output.report.html import render_html
    from planner.output.report.workbook import write_workbook

    out = Path(out_dir)
    out.mkdir(parents=True, exist_ok=True)
    ctx = context or make_context(plan, scenario, source=source, sweep=sweep)
    charts = all_charts(plan, scenario, ctx.sweep)
    paths: dict[str, Path] = {}
    chart_dir = out / "charts"
    for ch in charts:
        paths[f"chart:{ch.key}.png"] = write_atomic(chart_dir / f"{ch.key}.png", lambda tmp, ch=ch: render(ch, "png", tmp))
        paths[f"chart:{ch.key}.svg"] = write_atomic(chart_dir / f"{ch.key}.svg", lambda tmp, ch=ch: tmp.write_bytes(ch.svg()))
    paths["html"] = write_text_atomic(out / "report.html", render_html(ctx, charts))
    paths["xlsx"] = write_workbook(ctx, out / "plan.xlsx")
    paths["json"] = write_text_atomic(out / "plan.json", plan.to_json())
    if ctx.sweep:
        import json

        paths["sweep"] = write_text_atomic(out / "sweep.json", json.dumps(ctx.sweep, indent=2, allow_nan=False))
    for ch in charts:
        ch.figure.clear()
    return paths
