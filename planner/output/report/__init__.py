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
    """Write report.html, plan.xlsx, plan.json (sweep.json with a sweep, risk.json with a risk summary)
    and every chart as PNG and SVG into ``out_dir``.

    Returns the written paths by name ('html', 'xlsx', 'json', 'sweep', 'risk', 'chart:<key>.png',
    'chart:<key>.svg').  Nothing is solved here: without ``context`` the report shows what ``plan`` holds.

    All or nothing: every file is made in memory first, then written beside its name and moved into
    place only when all are complete (:func:`planner.files.write_files`), so a failure leaves the
    folder as it was.  Pages, charts and the workbook show names with control and invisible characters
    escaped (:meth:`ReportContext.for_display`); plan.json keeps them exactly (JSON escapes them).
    Chart files are named by :func:`planner.files.file_stems`: two names never share a file.
    """
    from planner.files import make_folder
    from planner.output.report.charts import quiet_glyphs

    out = make_folder(out_dir, "the report (--out)")
    with quiet_glyphs():
        return _write(plan, scenario, out, source, sweep, context)


def _write(plan: Plan, scenario: Scenario, out: Path, source: str | Path, sweep: dict[str, Any] | None,
           context: ReportContext | None) -> dict[str, Path]:
    import json

    from planner.files import check_target, inside, write_files
    from planner.output.report.charts import all_charts, render
    from planner.output.report.html import render_html
    from planner.output.report.workbook import workbook_bytes

    ctx = context or make_context(plan, scenario, source=source, sweep=sweep)
    shown = ctx.for_display()
    charts = all_charts(shown.plan, shown.scenario, shown.sweep)
    if shown.risk_result is not None:
        from planner.output.risk_charts import risk_charts

        charts += risk_charts(shown.risk_result)
    files: dict[str, tuple[str, bytes]] = {}
    try:
        # Every name checked before anything is drawn: a link out of the folder or a pipe at a name
        # is refused at once.
        names = [f"charts/{ch.key}.{ext}" for ch in charts for ext in ("png", "svg")]
        names += ["report.html", "plan.xlsx", "plan.json"] + (["sweep.json"] if ctx.sweep else []) \
            + (["risk.json"] if ctx.risk else [])
        for rel in names:
            check_target(inside(out, rel))
        for ch in charts:
            files[f"chart:{ch.key}.png"] = (f"charts/{ch.key}.png", render(ch, "png"))
            files[f"chart:{ch.key}.svg"] = (f"charts/{ch.key}.svg", ch.svg())
        files["html"] = ("report.html", render_html(shown, charts).encode("utf-8"))
        files["xlsx"] = ("plan.xlsx", workbook_bytes(shown))
        # Exact names in the JSON: a lone surrogate is written as its JSON escape (\udxxx).
        files["json"] = ("plan.json", ctx.plan.to_json().encode("utf-8", "backslashreplace"))
        if ctx.sweep:
            files["sweep"] = ("sweep.json", json.dumps(ctx.sweep, indent=2, allow_nan=False).encode("ascii"))
        if ctx.risk:
            files["risk"] = ("risk.json", json.dumps(ctx.risk, indent=2, allow_nan=False,
                                                     default=_plain).encode("ascii"))
    finally:
        for ch in charts:
            ch.figure.clear()
    for rel, _ in files.values():
        inside(out, rel)  # never outside the folder, whatever a name or a link says
    written = write_files([(out / rel, lambda tmp, data=data: tmp.write_bytes(data)) for rel, data in files.values()])
    return dict(zip(files, written))


def _plain(x: Any) -> Any:
    import numpy as np

    if isinstance(x, np.generic):
        return x.item()
    raise TypeError(f"not JSON serialisable: {type(x).__name__}")
