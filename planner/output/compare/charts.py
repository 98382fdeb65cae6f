"""Charts of a comparison (matplotlib, Agg): profit by variant, and each variant's change against the base.

Drawn in the report's style (:mod:`planner.output.report.style`); every number comes from the
comparison's JSON.  A variant without a plan (infeasible) is drawn as an empty row saying so.
"""

from __future__ import annotations

from typing import Any

import matplotlib

matplotlib.use("Agg")

import numpy as np  # noqa: E402
from matplotlib import rc_context  # noqa: E402
from matplotlib.figure import Figure  # noqa: E402
from matplotlib.ticker import MaxNLocator  # noqa: E402

from planner.output.report.charts import Chart, wrap_label  # noqa: E402
from planner.output.report.fmt import money  # noqa: E402
from planner.output.report.style import PALETTE as C  # noqa: E402
from planner.output.report.style import RC, money_axis  # noqa: E402


def _bars(ax, names: list[str], values: list[float | None], colours: list[str], texts: list[str],
          span: float) -> None:
    y = np.arange(len(names))[::-1]  # the first entry at the top
    ax.barh(y, [0.0 if v is None else v for v in values], color=colours, height=0.62)
    for k, (v, text) in enumerate(zip(values, texts)):
        if v is None:
            ax.text(0.01, y[k], text, transform=ax.get_yaxis_transform(), va="center", fontsize=8.5,
                    color=C["muted"], style="italic")
        else:
            ax.text(v + (0.012 * span if v >= 0 else -0.012 * span), y[k], text, va="center",
                    ha="left" if v >= 0 else "right", fontsize=8.5)
    ax.set_yticks(y, [wrap_label(n) for n in names])
    ax.set_ylim(-0.6, len(names) - 0.4)
    ax.axvline(0, color=C["muted"], lw=0.9)


def profit_chart(data: dict[str, Any]) -> Chart:
    """Profit of the base and of each variant (bars), with each variant's change against the base."""
    cur, per = data["currency"], data["period"]
    cols = [data["base"]] + data["variants"]
    names = [v["name"] for v in cols]
    profits = [v.get("profit") for v in cols]
    base = data["base"]["profit"]
    known = [p for p in profits if p is not None]
    lo, hi = min(known + [0.0]), max(known + [1.0])
    span = max(hi - lo, 1.0)
    colours = [C["accent"] if k == 0 else (C["profit"] if (p or 0) >= base else C["cost"])
               for k, p in enumerate(profits)]
    texts = []
    for k, v in enumerate(cols):
        if v.get("profit") is None:
            texts.append(f"no plan ({v['status']})")
        elif k == 0:
            texts.append(f"{money(v['profit'], cur)} (base)")
        else:
            ch = v["profit_change"]
            texts.append(f"{money(v['profit'], cur)} ({'+' if ch > 0.5 else ''}{money(ch, cur)})")
    with rc_context({**RC, "axes.grid.axis": "x"}):
        fig = Figure(figsize=(9.0, 0.5 * len(cols) + 1.6), layout="constrained")
        ax = fig.add_subplot()
        ax.set_gid("profit-by-variant")
        _bars(ax, names, profits, colours, texts, span)
        ax.set_xlim(min(lo * 1.35, 0), hi * 1.45)
        ax.set_xlabel(f"profit ({cur} per {per}, after every fixed cost)")
        ax.set_title("Profit by variant")
        money_axis(ax, cur, axis="x")
        ax.xaxis.set_major_locator(MaxNLocator(4 if len(cur) < 3 else 3))
    return Chart(key="profit-by-variant", title="Profit by variant",
                 caption=("Each variant planned on its own; the change is against the base (ochre). Profit after "
                          "the plant-wide fixed cost and the cost of any option a variant takes."),
                 figure=fig, marks={"profit": profits})


def change_chart(data: dict[str, Any]) -> Chart:
    """Each variant's profit change against the base (gains green, losses terracotta)."""
    cur, per = data["currency"], data["period"]
    cols = data["variants"]
    names = [v["name"] for v in cols]
    changes = [v.get("profit_change") for v in cols]
    known = [c for c in changes if c is not None]
    lo, hi = min(known + [0.0]), max(known + [0.0])
    span = max(hi - lo, 1.0)
    colours = [C["profit"] if (c or 0) >= 0 else C["cost"] for c in changes]
    texts = [f"no plan ({v['status']})" if c is None else ("+" if c > 0.5 else "") + money(c, cur)
             for v, c in zip(cols, changes)]
    with rc_context({**RC, "axes.grid.axis": "x"}):
        fig = Figure(figsize=(9.0, 0.5 * max(len(cols), 1) + 1.6), layout="constrained")
        ax = fig.add_subplot()
        ax.set_gid("profit-change")
        _bars(ax, names, changes, colours, texts, span)
        pad = 0.45 * span
        ax.set_xlim(lo - (pad if lo < 0 else 0.05 * span), hi + (pad if hi > 0 else 0.05 * span))
        ax.set_xlabel(f"change in profit against the base ({cur} per {per})")
        ax.set_title("Change in profit against the base")
        money_axis(ax, cur, axis="x")
        ax.xaxis.set_major_locator(MaxNLocator(4 if len(cur) < 3 else 3))
    return Chart(key="profit-change", title="Change in profit against the base",
                 caption="Gains green, losses terracotta; a variant without a plan says why.",
                 figure=fig, marks={"change": changes})


def comparison_charts(data: dict[str, Any]) -> list[Chart]:
    """Every chart of a comparison, in page order."""
    return [profit_chart(data), change_chart(data)]
