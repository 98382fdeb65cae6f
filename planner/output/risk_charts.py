"""Risk charts in the report's style (:mod:`planner.output.report.style`): profit histogram, profit fan,
shadow-price ranges.  ``planner risk --charts DIR`` writes them as PNG; ``planner report --risk N`` shows
them on the page.

- ``profit_histogram``: the plan's profit under the samples beside the re-optimised best profit, with
  the break-even line at 0 and the point estimate;
- ``profit_fan``: profit against the samples' demand level (mean relative change of the price
  intercepts, %), in bands of equal sample counts: the plan's P5–P95 and P25–P75 bands and median,
  and the re-optimised median (only with at least 20 samples that differ in demand);
- ``shadow_prices``: each resource's re-optimised shadow price, P5–P95 bar and median, beside the point
  estimate's.

Amounts in the plan's currency per period (tick labels '€250k'); shadow prices per resource unit.
"""

from __future__ import annotations

from pathlib import Path
from typing import TYPE_CHECKING

import numpy as np

from planner.files import make_folder, write_files
from planner.output.report.charts import Chart, quiet_glyphs, render, wrap_label
from planner.output.report.fmt import money, per_unit
from planner.output.report.style import PALETTE as C
from planner.output.report.style import RC, count_axis, money_axis

if TYPE_CHECKING:  # the charts read a result; they never run the analysis
    from planner.analysis.risk.run import RiskResult

def _histogram(result: RiskResult) -> Chart:
    from matplotlib import rc_context
    from matplotlib.figure import Figure

    cur, per = result.plan.currency, result.plan.period
    ok = result.ok
    with rc_context(RC):
        fig = Figure(figsize=(8.0, 4.6), layout="constrained")
        ax = fig.add_subplot()
        both = np.concatenate([result.plan_profit, result.best_profit[ok]])
        bins = np.linspace(both.min(), both.max(), 41) if both.size and both.max() > both.min() else 20
        ax.hist(result.plan_profit, bins=bins, color=C["revenue"], alpha=0.75, label="plan, prices kept")
        if ok.any():
            ax.hist(result.best_profit[ok], bins=bins, color=C["accent"], alpha=0.55, label="re-optimised per sample")
        ax.axvline(0.0, color=C["ink"], lw=1.1, label="break-even (profit 0)")
        ax.axvline(result.plan.profit, color=C["cost"], ls="--", lw=1.3,
                   label=f"point estimate {money(result.plan.profit, cur)}")
        ax.set_xlabel(f"profit ({cur} per {per})")
        ax.set_ylabel("samples")
        money_axis(ax, cur, axis="x")
        count_axis(ax, axis="y")
        ax.set_title(wrap_label(f"{result.plan.scenario}: profit over {result.samples:,} samples", 80, 2))
        ax.legend(loc="upper left")
    loss = float(np.mean(result.plan_profit < 0)) if result.samples else 0.0
    return Chart(key="risk-profit-histogram", title="Profit under uncertainty",
                 caption=(f"Profit of the plan under each of {result.samples:,} samples (its prices kept) and the "
                          f"best profit re-optimised for each sample. Chance of a loss with the plan: "
                          f"{100 * loss:.1f} %."), figure=fig)


def _fan(result: RiskResult) -> Chart | None:
    from matplotlib import rc_context
    from matplotlib.figure import Figure

    shift = result.demand_shift
    if shift.size < 20 or not np.ptp(shift) > 0:
        return None
    cur, per = result.plan.currency, result.plan.period
    ok = result.ok
    order = np.argsort(shift, kind="stable")
    groups = np.array_split(order, min(12, shift.size // 10))
    x = np.array([100 * shift[g].mean() for g in groups])
    q = np.array([np.percentile(result.plan_profit[g], [5, 25, 50, 75, 95]) for g in groups])
    best = [np.median(result.best_profit[g][ok[g]]) if ok[g].any() else np.nan for g in groups]
    with rc_context(RC):
        fig = Figure(figsize=(8.0, 4.6), layout="constrained")
        ax = fig.add_subplot()
        ax.fill_between(x, q[:, 0], q[:, 4], color=C["revenue"], alpha=0.18, lw=0, label="plan P5–P95")
        ax.fill_between(x, q[:, 1], q[:, 3], color=C["revenue"], alpha=0.35, lw=0, label="plan P25–P75")
        ax.plot(x, q[:, 2], color=C["revenue"], lw=2.0, label="plan median")
        ax.plot(x, best, color=C["accent"], ls="--", lw=2.0, label="re-optimised median")
        ax.axhline(0.0, color=C["ink"], lw=1.0)
        ax.set_xlabel("demand level: mean change of the price intercepts (%)")
        ax.set_ylabel(f"profit ({cur} per {per})")
        money_axis(ax, cur)
        ax.set_title("Profit fan by demand level")
        fig.legend(loc="outside lower center", ncols=4)
    return Chart(key="risk-profit-fan", title="Profit fan by demand level",
                 caption=("Samples sorted by their demand level and put in groups of equal size; bands show the "
                          "spread of the plan's profit in each group."), figure=fig)


def _shadow(result: RiskResult) -> Chart | None:
    from matplotlib import rc_context
    from matplotlib.figure import Figure

    ok = result.ok
    if not len(result.resources) or not ok.any():
        return None
    cur = result.plan.currency
    sp = result.shadow[ok]
    lo, mid, hi = np.percentile(sp, [5, 50, 95], axis=0)
    y = np.arange(len(result.resources))
    with rc_context({**RC, "axes.grid.axis": "x"}):
        fig = Figure(figsize=(8.0, 0.55 * len(result.resources) + 1.8), layout="constrained")
        ax = fig.add_subplot()
        ax.barh(y, hi - lo, left=lo, height=0.5, color=C["sweep"], alpha=0.35, label="P5–P95")
        ax.plot(mid, y, "o", color=C["sweep"], label="median")
        ax.plot([r.shadow_price for r in result.plan.resources], y, "D", ms=5, color=C["accent"],
                mec=C["ink"], mew=0.6, label="point estimate")
        units = {result.units.get(r, "") for r in result.resources}
        ax.set_yticks(y, [wrap_label(f"{r} (per {per_unit(result.units.get(r, ''))})") for r in result.resources])
        one = per_unit(units.pop()) if len(units) == 1 else "unit of the resource"
        ax.set_xlabel(f"shadow price ({cur} per {one})")
        money_axis(ax, cur, axis="x")
        ax.set_title("Shadow prices when re-optimised")
        ax.legend(loc="lower right")
    return Chart(key="risk-shadow-prices", title="Shadow prices when re-optimised",
                 caption="Each resource's shadow price re-optimised per sample: P5–P95 bar, median, and the "
                         "point estimate's.", figure=fig)


def risk_charts(result: RiskResult) -> list[Chart]:
    """The risk charts that apply to ``result`` (the fan needs 20 samples differing in demand)."""
    return [c for c in (_histogram(result), _fan(result), _shadow(result)) if c is not None]


def write_charts(result: RiskResult, folder: str | Path) -> list[Path]:
    """Write the charts as PNG into ``folder`` (all or, on a failure, none); returns their paths."""
    out = make_folder(folder, "the charts (--charts)")
    stem = {"risk-profit-histogram": "profit_histogram", "risk-profit-fan": "profit_fan",
            "risk-shadow-prices": "shadow_prices"}
    with quiet_glyphs():
        charts = risk_charts(result)
        data = [(out / f"{stem[c.key]}.png", render(c, "png", dpi=120)) for c in charts]
    for c in charts:
        c.figure.clear()
    return write_files([(p, lambda tmp, b=b: tmp.write_bytes(b)) for p, b in data])
