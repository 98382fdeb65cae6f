"""Risk charts (PNG, matplotlib's Agg backend): profit histogram, profit fan, shadow-price ranges.

- ``profit_histogram.png``: the plan's profit under the samples beside the
  re-optimised best profit, with the break-even line at 0 and the point estimate.
- ``profit_fan.png``: profit against the samples' demand level (mean relative
  change of the price intercepts, %), in bands of equal sample counts: the
  plan's P5–P95 and P25–P75 bands and median, and the re-optimised median.
- ``shadow_prices.png``: each resource's re-optimised shadow price, P5–P95 bar
  and median, beside the point estimate's.
"""

from __future__ import annotations

from pathlib import Path
from typing import TYPE_CHECKING

import numpy as np

from planner.files import write_atomic

if TYPE_CHECKING:  # the charts read a result; they never run the analysis
    from planner.analysis.risk.run import RiskResult


def _pyplot():
    import matplotlib

    matplotlib.use("Agg")
    import matplotlib.pyplot as plt

    return plt


def _save(fig, path: Path) -> Path:
    out = write_atomic(path, lambda tmp: fig.savefig(tmp, format="png", dpi=120, bbox_inches="tight"))
    fig.clf()
    return out


def write_charts(result: RiskResult, folder: str | Path) -> list[Path]:
    """Write the charts into ``folder``; returns their paths."""
    plt = _pyplot()
    folder = Path(folder)
    cur, per = result.plan.currency, result.plan.period
    paths = []
    ok = result.ok
    fig, ax = plt.subplots(figsize=(8, 4.5))
    both = np.concatenate([result.plan_profit, result.best_profit[ok]])
    bins = np.linspace(both.min(), both.max(), 41) if both.size and both.max() > both.min() else 20
    ax.hist(result.plan_profit, bins=bins, alpha=0.6, label="plan, prices kept")
    if ok.any():
        ax.hist(result.best_profit[ok], bins=bins, alpha=0.5, label="re-optimised per sample")
    ax.axvline(0.0, color="black", linewidth=1, label="break-even")
    ax.axvline(result.plan.profit, color="tab:red", linestyle="--", linewidth=1, label="point estimate")
    ax.set_xlabel(f"profit ({cur} per {per})")
    ax.set_ylabel("samples")
    ax.set_title(f"{result.plan.scenario}: profit over {result.samples:,} samples")
    ax.legend()
    paths.append(_save(fig, folder / "profit_histogram.png"))
    plt.close(fig)

    shift = result.demand_shift
    if shift.size >= 20 and np.ptp(shift) > 0:
        fig, ax = plt.subplots(figsize=(8, 4.5))
        order = np.argsort(shift, kind="stable")
        groups = np.array_split(order, min(12, shift.size // 10))
        x = np.array([100 * shift[g].mean() for g in groups])
        q = np.array([np.percentile(result.plan_profit[g], [5, 25, 50, 75, 95]) for g in groups])
        ax.fill_between(x, q[:, 0], q[:, 4], alpha=0.2, color="tab:blue", label="plan P5–P95")
        ax.fill_between(x, q[:, 1], q[:, 3], alpha=0.35, color="tab:blue", label="plan P25–P75")
        ax.plot(x, q[:, 2], color="tab:blue", label="plan median")
        best = [np.median(result.best_profit[g][ok[g]]) if ok[g].any() else np.nan for g in groups]
        ax.plot(x, best, color="tab:orange", linestyle="--", label="re-optimised median")
        ax.axhline(0.0, color="black", linewidth=1)
        ax.set_xlabel("demand level: mean change of the price intercepts (%)")
        ax.set_ylabel(f"profit ({cur} per {per})")
        ax.set_title("Profit fan by demand level")
        ax.legend()
        paths.append(_save(fig, folder / "profit_fan.png"))
        plt.close(fig)

    if len(result.resources) and ok.any():
        fig, ax = plt.subplots(figsize=(8, 0.6 * len(result.resources) + 1.5))
        sp = result.shadow[ok]
        lo, mid, hi = np.percentile(sp, [5, 50, 95], axis=0)
        y = np.arange(len(result.resources))
        ax.barh(y, hi - lo, left=lo, height=0.5, alpha=0.4, label="P5–P95")
        ax.plot(mid, y, "o", color="tab:blue", label="median")
        ax.plot([r.shadow_price for r in result.plan.resources], y, "x", color="tab:red", label="point estimate")
        ax.set_yticks(y, list(result.resources))
        ax.set_xlabel(f"shadow price ({cur} per unit of the resource)")
        ax.set_title("Shadow prices when re-optimised")
        ax.legend()
        paths.append(_save(fig, folder / "shadow_prices.png"))
        plt.close(fig)
    return paths
