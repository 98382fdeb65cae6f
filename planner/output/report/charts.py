"""The report's charts (matplotlib, Agg, no pyplot state): every number drawn comes from the Plan.

Four kinds, each a function returning a :class:`Chart`:

- :func:`product_chart` — one product's revenue, total cost and profit against
  volume over its whole demand range (0 to a/b, where the price reaches 0),
  with the break-even volumes, the standalone optimum, the maximum-revenue
  volume and the mix's volume marked and labelled with their values;
- :func:`mix_chart` — each product's volume and profit in the plan, shut-down
  products drawn as such;
- :func:`resources_chart` — utilisation of each resource with its shadow price;
- :func:`sweep_chart` — profit and shadow price against capacity from a sweep
  dict (``points`` [{capacity, profit, shadow_price, ...}], ``breakpoints``
  [{capacity, change}]), with the slate changes marked.

Marked points carry a matplotlib ``gid`` (``mark-break-even``,
``mark-standalone-optimum``, ``mark-max-revenue``, ``mark-mix``) so tests can
read back exactly what was drawn.  Amounts are in the plan's currency per
period; volumes in each product's unit per period.
"""

from __future__ import annotations

import math
import textwrap
import warnings
from contextlib import contextmanager
from dataclasses import dataclass, field
from typing import Any

import matplotlib

matplotlib.use("Agg")  # never open a window, whatever the environment says

import numpy as np  # noqa: E402
from matplotlib import rc_context  # noqa: E402
from matplotlib.figure import Figure  # noqa: E402
from matplotlib.ticker import MaxNLocator  # noqa: E402

from planner.output.plan import Plan, ProductPlan  # noqa: E402
from planner.scenario.schema import Product  # noqa: E402
from planner.files import file_stem, file_stems  # noqa: E402
from planner.output.report.fmt import money, num, per_unit  # noqa: E402
from planner.output.report.placement import Label, freeze_layout, place_labels, spread  # noqa: E402
from planner.output.report.style import PALETTE as C  # noqa: E402
from planner.output.report.style import RC, count_axis, money_axis  # noqa: E402


@dataclass
class Chart:
    """A drawn chart: ``key`` is its file stem; ``marks`` the values of its marked points."""

    key: str
    title: str
    caption: str
    figure: Figure
    marks: dict[str, Any] = field(default_factory=dict)
    _svg: bytes | None = field(default=None, repr=False)

    def svg(self) -> bytes:
        """The chart as SVG bytes (rendered once, then reused for the file and the HTML page)."""
        if self._svg is None:
            self._svg = render(self, "svg")
        return self._svg


def _volume_range(sp: Product, pp: ProductPlan) -> float:
    """Right end of the volume axis (units): where demand's price reaches 0, or a sensible span for fixed prices."""
    a, b = sp.price_intercept, sp.price_slope
    if b > 0:
        return a / b
    s = pp.standalone
    known = [x for x in (sp.max_volume, s.optimal_volume, pp.volume, *(v for v in s.break_even if v)) if x]
    return 1.25 * max(known) if known else 100.0


def product_chart(pp: ProductPlan, sp: Product, currency: str, period: str, key: str | None = None) -> Chart:
    """Revenue, total cost and profit of one product against volume, with its key volumes marked and
    labelled with their values (labels placed clear of each other).  ``key``: the file stem (default
    ``product-`` and the name's :func:`planner.files.file_stem`; a report passes stems kept apart)."""
    a, b, v, F = sp.price_intercept, sp.price_slope, sp.unit_cost, sp.fixed_cost
    s = pp.standalone
    unit = pp.unit or "units"
    xmax = _volume_range(sp, pp)
    D = np.linspace(0.0, xmax, 400)
    revenue = (a - b * D) * D
    cost = F + v * D
    profit = revenue - cost
    marks: dict[str, Any] = {}
    with rc_context(RC):
        fig = Figure(figsize=(6.2, 5.4), layout="constrained")
        ax = fig.add_subplot()
        curves = [ax.plot(D, revenue, color=C["revenue"], lw=2.2, label="revenue")[0],
                  ax.plot(D, cost, color=C["cost"], lw=2.0, ls=(0, (6, 3)), label="total cost")[0],
                  ax.plot(D, profit, color=C["profit"], lw=2.4, label="profit")[0]]
        marked = []
        ax.axhline(0, color=C["muted"], lw=0.9)
        if sp.max_volume is not None and sp.max_volume < xmax:
            ax.axvspan(sp.max_volume, xmax, color=C["off"], alpha=0.18, lw=0)
            ax.text(sp.max_volume, 0.02, f"  beyond the cap of {num(sp.max_volume)}", transform=ax.get_xaxis_transform(),
                    color=C["muted"], fontsize=8, va="bottom")
        ymax = float(max(revenue.max(), cost[-1] if b == 0 else revenue.max(), 1.0))
        # Far beyond the optimum the profit curve plunges; keep the view on the region that matters.
        ymin = float(min(0.0, max(profit.min(), -0.6 * ymax), -F, pp.profit))

        labels: list[Label] = []

        def mark(gid, xs, ys, marker, color, size, label, texts):
            line, = ax.plot(xs, ys, ls="none", marker=marker, ms=size, color=color, mec=C["ink"], mew=0.8,
                            zorder=5, label=label)
            line.set_gid(gid)
            marked.append(line)
            labels.extend(Label(x, y, t, f"{gid.removeprefix('mark-')}-{k}", size)
                          for k, (x, y, t) in enumerate(zip(xs, ys, texts)))

        be = [x for x in s.break_even if x is not None]
        if be:
            marks["break_even"] = [(x, 0.0) for x in be]
            mark("mark-break-even", be, [0.0] * len(be), "D", C["panel"], 7,
                 "break-even: " + " and ".join(num(x) for x in be) + f" {unit}", [num(x) for x in be])
        if s.max_revenue_volume is not None:
            x = s.max_revenue_volume
            y = (a - b * x) * x
            marks["max_revenue"] = (x, y)
            capped = b > 0 and sp.max_volume is not None and x >= sp.max_volume and a / (2 * b) > sp.max_volume
            mark("mark-max-revenue", [x], [y], "^", C["revenue"], 8,
                 f"max revenue{' within the cap' if capped else ''}: {num(x)} {unit}, {money(y, currency)}", [num(x)])
        if s.optimal_volume is not None and s.max_profit is not None:
            marks["standalone_optimum"] = (s.optimal_volume, s.max_profit)
            mark("mark-standalone-optimum", [s.optimal_volume], [s.max_profit], "o", C["profit"], 8,
                 f"best on its own: {num(s.optimal_volume)} {unit}, profit {money(s.max_profit, currency)}",
                 [num(s.optimal_volume)])
        if pp.running:
            marks["mix"] = (pp.volume, pp.profit)
            mark("mark-mix", [pp.volume], [pp.profit], "*", C["accent"], 15,
                 f"in the mix: {num(pp.volume)} {unit}, profit {money(pp.profit, currency)}", [num(pp.volume)])
            ax.axvline(pp.volume, color=C["accent"], lw=1.2, ls=":", zorder=1)
        else:
            marks["mix"] = (0.0, pp.profit)
            mark("mark-mix", [0.0], [pp.profit], "X", C["off"], 11,
                 f"in the mix: shut down (saves the fixed cost {money(F, currency)})", ["shut down"])
        ax.set_xlim(0, xmax)
        pad = 0.06 * (ymax - ymin or 1.0)
        ax.set_ylim(ymin - pad, ymax + 2.2 * pad)
        ax.set_xlabel(wrap_label(f"volume ({unit} per {period})", 70, 2))
        ax.set_ylabel(wrap_label(f"amount ({currency} per {period})", 50, 2))
        money_axis(ax, currency)
        count_axis(ax)
        ax.set_title(wrap_label(pp.name, 46, 2))
        key_legend = ax.legend(handles=curves, loc="upper right", handlelength=2.2, fontsize=8,
                               facecolor=C["paper"], framealpha=0.85, frameon=True, edgecolor="none")
        ax.add_artist(key_legend)
        fig.legend(handles=marked, loc="outside lower left", ncols=1, handlelength=1.6, fontsize=8.8)
        renderer = freeze_layout(fig)
        # The mix's point first: it matters most; the others keep clear of it and of each other.
        order = {"mix": 0, "standalone-optimum": 1, "max-revenue": 2, "break-even": 3}
        labels.sort(key=lambda lb: order.get(lb.gid.rsplit("-", 1)[0], 9))
        place_labels(ax, renderer, labels, obstacles=[key_legend.get_window_extent(renderer)])
    one = per_unit(pp.unit)
    caption = (f"{pp.name}: price {money(a, currency, 2)} − {b:g} × volume per {one}; variable cost "
               f"{money(v, currency, 2)} per {one}; fixed cost {money(F, currency)} per {period} "
               "(avoided only by shutting the product down). Standalone values ignore shared limits.")
    return Chart(key=key or f"product-{file_stem(pp.name)}", title=f"{pp.name}: revenue, cost and profit against volume",
                 caption=caption, figure=fig, marks=marks)


#: At most this many products (bars) in the mix chart; larger catalogues show the most profitable.
MAX_MIX_BARS = 30


def mix_chart(plan: Plan) -> Chart:
    """Each product's volume and profit in the plan; shut-down products marked as such.

    Volumes in different units are never drawn on one axis: products are grouped by unit, one volume
    axis per unit (small multiples, in the order the units first appear), beside one shared profit axis.
    """
    shown = _top_products(plan, MAX_MIX_BARS)
    groups: dict[str, list[ProductPlan]] = {}
    for p in shown:
        groups.setdefault(p.unit or "units", []).append(p)
    cur = plan.currency
    profits_all = [p.profit for p in shown]
    pmin, pmax = min(profits_all + [0.0]), max(profits_all + [1.0])
    with rc_context({**RC, "axes.grid.axis": "x"}):
        extra = 0.75 * (len(groups) - 1)
        fig = Figure(figsize=(9.0, 0.5 * len(shown) + 1.6 + extra), layout="constrained")
        gs = fig.add_gridspec(len(groups), 2, height_ratios=[len(g) + 0.6 for g in groups.values()], wspace=0.05)
        first_p = None
        for row, (unit, members) in enumerate(groups.items()):
            prods = list(reversed(members))  # first product at the top
            y = np.arange(len(prods))
            ax_v = fig.add_subplot(gs[row, 0])
            ax_p = fig.add_subplot(gs[row, 1], sharey=ax_v, sharex=first_p)
            first_p = first_p or ax_p
            ax_v.set_gid(f"mix-volume-{row}")
            vols = [p.volume for p in prods]
            ax_v.barh(y, vols, color=[C["revenue"] if p.running else C["off"] for p in prods], height=0.62)
            colours = [C["off"] if not p.running else (C["profit"] if p.profit >= 0 else C["cost"]) for p in prods]
            ax_p.barh(y, [p.profit for p in prods], color=colours, height=0.62)
            vmax = max(vols + [1.0])
            for k, p in enumerate(prods):
                if p.running:
                    ax_v.text(p.volume + 0.01 * vmax, k, f"{num(p.volume)} {p.unit}", va="center", fontsize=8.5)
                    ax_p.text(p.profit + 0.01 * (pmax - pmin) if p.profit >= 0 else p.profit - 0.01 * (pmax - pmin),
                              k, money(p.profit, cur), va="center", ha="left" if p.profit >= 0 else "right",
                              fontsize=8.5)
                else:
                    for ax in (ax_v, ax_p):
                        ax.text(0.01, k, "shut down", transform=ax.get_yaxis_transform(), va="center",
                                fontsize=8.5, color=C["muted"], style="italic")
            ax_v.set_yticks(y, [wrap_label(p.name + ((" (committed)" if p.forced == "min_volume" else " (must run)") if p.must_run else "")) for p in prods])
            ax_v.set_ylim(-0.6, len(prods) - 0.4)
            ax_v.set_xlim(0, vmax * 1.28)
            ax_p.axvline(0, color=C["muted"], lw=0.9)
            ax_v.set_xlabel(f"volume ({unit} per {plan.period})")
            count_axis(ax_v)
            ax_v.xaxis.set_major_locator(MaxNLocator(4))
            ax_p.tick_params(axis="y", length=0, labelleft=False)
            if row == 0:
                ax_v.set_title("Volume in the mix")
                ax_p.set_title("Profit by product")
            if row < len(groups) - 1:
                ax_p.tick_params(axis="x", labelbottom=False)
            else:
                ax_p.set_xlabel(f"profit after its fixed cost ({cur} per {plan.period})")
        first_p.set_xlim(min(pmin * 1.3, 0), pmax * 1.32)
        money_axis(first_p, cur, axis="x")
        first_p.xaxis.set_major_locator(MaxNLocator(4 if len(cur) < 3 else 3))
    return Chart(key="mix", title="The mix: volume and profit by product",
                 caption=(("" if len(shown) == len(plan.products) else
                           f"The {len(shown)} most profitable of {len(plan.products)} products "
                           f"({sum(not p.running for p in plan.products)} shut down in all); the tables list every "
                           "product. ")
                          + "Bars for running products; shut-down products make nothing and pay no fixed cost. "
                          + (f"Volumes in {len(groups)} units ({', '.join(groups)}): each unit has an axis of its "
                             "own. " if len(groups) > 1 else "")
                          + f"Total profit {money(plan.profit, plan.currency)} after the plant-wide fixed cost "
                          f"{money(plan.plant_fixed_cost, plan.currency)}."),
                 figure=fig)


def resources_chart(plan: Plan) -> Chart:
    """Utilisation of each resource (%) beside its shadow price (currency per resource unit)."""
    res = list(reversed(plan.resources))
    y = np.arange(len(res))
    cur = plan.currency
    with rc_context({**RC, "axes.grid.axis": "x"}):
        fig = Figure(figsize=(9.0, 0.5 * max(len(res), 1) + 1.6), layout="constrained")
        ax_u, ax_s = fig.subplots(1, 2, sharey=True, gridspec_kw={"width_ratios": [1.25, 1]})
        util = [100 * r.utilisation for r in res]
        ax_u.barh(y, [100] * len(res), color=C["grid"], height=0.62)
        ax_u.barh(y, util, color=[C["accent"] if r.binding else C["revenue"] for r in res], height=0.62)
        for k, r in enumerate(res):
            u = f" {r.unit}" if r.unit else ""
            ax_u.text(101.5, k, f"{num(r.used)} of {num(r.capacity)}{u}", va="center", fontsize=8.5)
        ax_u.axvline(100, color=C["ink"], lw=1.0)
        ax_u.set_xlim(0, 150)
        ax_u.set_xticks([0, 25, 50, 75, 100])
        ax_u.set_yticks(y, [wrap_label(r.name) + ("  ◆ binding" if r.binding else "") for r in res])
        ax_u.set_xlabel("utilisation (% of capacity used)")
        ax_u.set_title("Utilisation")
        sps = [r.shadow_price for r in res]
        smax = max(sps + [1e-9])
        ax_s.barh(y, sps, color=[C["accent"] if r.shadow_price > 0 else C["off"] for r in res], height=0.62)
        for k, r in enumerate(res):
            text = f"{money(r.shadow_price, cur, 2)} per {per_unit(r.unit)}" if r.shadow_price > 0 else "0 (spare capacity)"
            rng = getattr(r, "shadow_price_range", None)
            if r.shadow_price > 0 and rng and len(rng) == 2 and all(x is not None for x in rng):
                text += f"\nholds {num(rng[0])}–{num(rng[1])} {r.unit}".rstrip()
            ax_s.text(r.shadow_price + 0.02 * smax, k, text, va="center", fontsize=8.5)
        ax_s.set_xlim(0, smax * 1.9 if smax > 1e-9 else 1)
        ax_s.set_xlabel(f"shadow price ({cur} of profit per extra unit)")
        ax_s.set_title("Shadow price")
        ax_s.tick_params(axis="y", length=0)
        money_axis(ax_s, cur, axis="x")
        ax_s.xaxis.set_major_locator(MaxNLocator(4))
    return Chart(key="resources", title="Resources: utilisation and shadow prices",
                 caption=("A shadow price is the profit one more unit of a resource would add, for a small change; "
                          "a binding limit is used to the full. For a whole shift, re-solve (see the options)."),
                 figure=fig)


#: Changes listed under the sweep chart (the HTML page and the workbook list every one).
MAX_SWEEP_NOTES = 10


def _sweep_curves(sweep: dict[str, Any]) -> tuple[list[float], list[float], list[float]]:
    """(capacity, profit, shadow price) to draw: the points, plus each exact change point's values just
    below and just above it where the sweep gives them (so jumps are drawn as jumps)."""
    rows = [(p["capacity"], 0, p["profit"], p.get("shadow_price")) for p in sweep.get("points", [])]
    for bp in sweep.get("breakpoints", []):
        if bp.get("after") is None and bp.get("profit") is not None and "shadow_price_below" in bp:
            above = bp.get("profit_above")
            rows.append((bp["capacity"], -1, bp["profit"], bp["shadow_price_below"]))
            rows.append((bp["capacity"], 1, above if above is not None else bp["profit"],
                         bp.get("shadow_price_above", bp["shadow_price_below"])))
    rows.sort(key=lambda r: (r[0], r[1]))
    return ([r[0] for r in rows], [r[2] for r in rows],
            [math.nan if r[3] is None else r[3] for r in rows])


def sweep_chart(sweep: dict[str, Any], plan: Plan) -> Chart:
    """Profit and shadow price against one resource's capacity, with the slate changes marked and numbered."""
    name = sweep.get("resource", "resource")
    unit = sweep.get("unit", "")
    if not unit:
        unit = next((r.unit for r in plan.resources if r.name == name), "")
    pts = sorted(sweep.get("points", []), key=lambda p: p["capacity"])
    caps, prof, sps = _sweep_curves(sweep)
    bps = sorted(sweep.get("breakpoints", []), key=lambda b: b["capacity"])
    cur = plan.currency
    with rc_context(RC):
        fig = Figure(figsize=(8.6, 5.8), layout="constrained")
        ax_p, ax_s = fig.subplots(2, 1, sharex=True, gridspec_kw={"height_ratios": [1.5, 1]})
        ax_p.plot(caps, prof, color=C["profit"], lw=2.2)
        ax_p.plot([p["capacity"] for p in pts], [p["profit"] for p in pts], ls="none", marker="o", ms=3.5,
                  color=C["profit"])
        if any(not math.isnan(x) for x in sps):
            ax_s.plot(caps, sps, color=C["sweep"], lw=2.0)
            ax_s.plot([p["capacity"] for p in pts], [p.get("shadow_price") for p in pts], ls="none", marker="o",
                      ms=3.5, color=C["sweep"])
        current = next((r.capacity for r in plan.resources if r.name == name), None)
        for ax in (ax_p, ax_s):
            if current is not None:
                ax.axvline(current, color=C["accent"], lw=1.4)
            for bp in bps:
                if bp.get("after") is not None:  # sampled: the change lies somewhere in this interval
                    ax.axvspan(bp["after"], bp["capacity"], color=C["cost"], alpha=0.12, lw=0)
                else:
                    ax.axvline(bp["capacity"], color=C["cost"], lw=1.0, ls="--")
        if current is not None:
            ax_p.text(current, 0.03, f" today: {num(current)} {unit}", transform=ax_p.get_xaxis_transform(),
                      color=C["ink"], fontsize=8.5, va="bottom")
        notes = []
        for k, bp in enumerate(bps, start=1):
            where = (f"{num(bp['after'])}–{num(bp['capacity'])}" if bp.get("after") is not None
                     else num(bp["capacity"]))
            notes.append(textwrap.fill(f"{k}  {where} {unit}: {bp.get('change', '')}", NOTE_WIDTH,
                                       subsequent_indent="     ", break_on_hyphens=False))
        lines = 0
        if notes:
            shown = notes[:MAX_SWEEP_NOTES]
            if len(notes) > len(shown):
                shown.append(f"and {len(notes) - len(shown)} more, listed in the report and the workbook")
            text = "\n".join(shown)
            lines = text.count("\n") + 1
            fig.set_figheight(5.8 + 0.17 * lines)
            fig.text(0.0, 0.0, text, fontsize=8.2, color=C["ink"], va="bottom", ha="left", linespacing=1.45)
            # Keep the axes above the notes: each line is 8.2 pt × 1.45, about 0.17 inch.
            bottom = min(0.6, (0.17 * lines + 0.12) / fig.get_figheight())
            fig.get_layout_engine().set(rect=(0, bottom, 1, 1 - bottom))
        ax_p.set_ylabel(f"optimal profit ({cur} per {plan.period})")
        ax_s.set_ylabel(f"shadow price ({cur} per {per_unit(unit)})")
        ax_s.set_xlabel(wrap_label(f"capacity of {name} ({unit or 'units'} per {plan.period})", 90, 2))
        money_axis(ax_p, cur)
        money_axis(ax_s, cur)
        count_axis(ax_s)
        ax_p.set_title(wrap_label(f"Capacity sweep: {name}", 80, 2))
        _number_changes(fig, ax_p, bps, prof)
    return Chart(key=f"sweep-{file_stem(name)}", title=f"Capacity sweep of {name}",
                 caption=("Each dot is a full re-solve at that capacity. Numbered dashed lines: the slate, a binding "
                          "limit or the bottleneck changes there (shaded bands where the points were only sampled "
                          "and the change lies between them). The solid line is today's capacity."),
                 figure=fig, marks={"breakpoints": [bp["capacity"] for bp in bps]})


#: Characters per line of the notes under the sweep chart (long changes wrap; nothing is cut).
NOTE_WIDTH = 110
#: Height (axes fraction) of one row of numbered badges above the sweep's profit curve.
BADGE_ROW = 0.085


def _number_changes(fig, ax, bps: list[dict[str, Any]], profits: list[float]) -> None:
    """Number the change points with badges along the top of ``ax``, at least a badge apart (in as many
    rows as they need, neighbours in different rows), each joined to its capacity by a leader line;
    the profit axis gets room above the curve for them."""
    if not bps:
        return
    xs = [bp["capacity"] if bp.get("after") is None else 0.5 * (bp["after"] + bp["capacity"]) for bp in bps]
    width_pt = fig.get_figwidth() * 72 * 0.85
    badge_pt = 15.0
    rows = max(1, math.ceil(len(bps) * badge_pt * 1.2 / (width_pt - badge_pt)))
    finite = [y for y in profits if y is not None and not math.isnan(y)] or [0.0]
    lo, hi = min(finite), max(finite)
    span = (hi - lo) or max(abs(hi), 1.0)
    room = BADGE_ROW * rows + 0.03
    bottom = lo - 0.05 * span
    ax.set_ylim(bottom, bottom + (hi + 0.04 * span - bottom) / (1 - room))
    renderer = freeze_layout(fig)
    frame = ax.get_window_extent(renderer)
    px = renderer.points_to_pixels(1.0)
    gap = badge_pt * 1.2 * px
    wish = [float(ax.transData.transform((x, 0))[0]) for x in xs]
    order = sorted(range(len(xs)), key=lambda k: wish[k])
    place = [0.0] * len(xs)
    for r in range(rows):
        members = order[r::rows]
        for k, pos in zip(members, spread([wish[k] for k in members], gap, frame.x0 + gap / 2, frame.x1 - gap / 2)):
            place[k] = pos
    for rank, k in enumerate(order):
        row = rank % rows
        fx = (place[k] - frame.x0) / frame.width
        fy = 0.985 - BADGE_ROW * row
        ann = ax.annotate(str(k + 1), xy=(xs[k], fy - BADGE_ROW * 0.75), xycoords=ax.get_xaxis_transform(),
                          xytext=(fx, fy), textcoords="axes fraction", fontsize=7.5, color=C["panel"],
                          ha="center", va="top", fontweight="bold", zorder=7,
                          bbox={"boxstyle": "circle,pad=0.2", "fc": C["cost"], "ec": "none"},
                          arrowprops={"arrowstyle": "-", "color": C["cost"], "lw": 0.8, "shrinkA": 0, "shrinkB": 0})
        ann.set_gid(f"badge-{k + 1}")


def wrap_label(text: str, width: int = 28, lines: int = 3) -> str:
    """A name for an axis label, wrapped at spaces onto at most ``lines`` lines of ``width`` characters
    (cut with '…' only beyond that; the full name is in the tables)."""
    import textwrap

    parts = textwrap.wrap(text, width, break_long_words=True, break_on_hyphens=False) or [text]
    if len(parts) > lines:
        parts = parts[:lines]
        parts[-1] = parts[-1][: width - 1].rstrip() + "…"
    return "\n".join(parts)


def all_charts(plan: Plan, scenario, sweep: dict[str, Any] | None = None) -> list[Chart]:
    """Every chart of a report, in page order: mix, resources, sweep (if any), then one per product."""
    charts = [mix_chart(plan)]
    if plan.resources:
        charts.append(resources_chart(plan))
    if sweep and sweep.get("points"):
        charts.append(sweep_chart(sweep, plan))
    by_name = {p.name: p for p in scenario.products}
    shown = charted_products(plan)
    stems = file_stems([pp.name for pp in shown])  # two names never share a file, whatever their spelling
    charts += [product_chart(pp, by_name[pp.name], plan.currency, plan.period, key=f"product-{stem}")
               for pp, stem in zip(shown, stems)]
    return charts


#: At most this many per-product charts in a report (a catalogue of thousands would bury the page).
MAX_PRODUCT_CHARTS = 24


def charted_products(plan: Plan) -> list[ProductPlan]:
    """The products that get their own chart, in plan order: all of them, or the most profitable ones
    (running first, then shut-down ones by standalone profit) up to :data:`MAX_PRODUCT_CHARTS`."""
    return _top_products(plan, MAX_PRODUCT_CHARTS)


def _top_products(plan: Plan, limit: int) -> list[ProductPlan]:
    """All products if there are at most ``limit``, else the most profitable ones (running first, then
    shut-down ones by standalone profit), in plan order."""
    if len(plan.products) <= limit:
        return list(plan.products)
    ranked = sorted(plan.products, key=lambda x: (not x.running, -(x.profit if x.running else
                                                                    (x.standalone.max_profit or 0.0))))
    keep = {id(x) for x in ranked[:limit]}
    return [x for x in plan.products if id(x) in keep]


@contextmanager
def quiet_glyphs():
    """A context in which matplotlib does not warn about characters its font lacks (they are drawn as
    boxes; the tables and the workbook show every name whole)."""
    with warnings.catch_warnings():
        warnings.filterwarnings("ignore", message=r"Glyph \d+ .*missing from font")
        yield


def render(chart: Chart, fmt: str, path=None, dpi: int = 150) -> bytes | None:
    """Write the chart as 'png' or 'svg' to ``path`` (or return the bytes when ``path`` is None)."""
    import io

    with rc_context(RC):
        buf = io.BytesIO() if path is None else None
        chart.figure.savefig(path if path is not None else buf, format=fmt, dpi=dpi, metadata=_metadata(fmt))
        # The first draw placed everything; keep that layout for the other format (same look, less time).
        chart.figure.set_layout_engine("none")
        return None if buf is None else buf.getvalue()


def _metadata(fmt: str) -> dict:
    # No creation date: the same plan gives byte-identical chart files.
    return {"Date": None} if fmt == "svg" else {"Software": "planner"}
