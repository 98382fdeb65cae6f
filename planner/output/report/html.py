"""The HTML report: one self-contained page (inline CSS and SVG, no scripts, no outside links).

Layout: the answer first (summary cards and a few plain sentences), then the
tables (products, standalone economics, resources, capacity options), then the
charts (mix, resources, capacity sweep, one per product), and a footer with
what is needed to reproduce the plan (scenario hash, solver versions, settings).
"""

from __future__ import annotations

import re
from html import escape
from typing import Any

from planner.output.plan import LABOUR_NOTE
from planner.output.report.charts import Chart
from planner.output.report.context import ReportContext, option_pays
from planner.output.report.fmt import changes_text, money, num, option_share, option_slate, pct, per_unit
from planner.output.report.riskview import risk_section, risk_sentence
from planner.output.report.style import CSS


def inline_svg(chart: Chart) -> str:
    """The chart as an <svg> element whose ids are prefixed with the chart's key (unique on the page)."""
    text = chart.svg().decode("utf-8")
    text = text[text.index("<svg"):]
    text = re.sub(r"<metadata>.*?</metadata>", "", text, count=1, flags=re.S)  # RDF block with outside URIs
    prefix = chart.key + "-"
    text = re.sub(r'\bid="([^"]+)"', lambda m: f'id="{prefix}{m.group(1)}"', text)
    text = re.sub(r'(xlink:href|href)="#([^"]+)"', lambda m: f'{m.group(1)}="#{prefix}{m.group(2)}"', text)
    text = re.sub(r"url\(#([^)]+)\)", lambda m: f"url(#{prefix}{m.group(1)})", text)
    text = text.replace("<svg ", f'<svg role="img" aria-label="{escape(chart.title)}" ', 1)
    return text


def _figure(chart: Chart) -> str:
    return (f'<figure class="chart" data-chart="{escape(chart.key)}">{inline_svg(chart)}'
            f"<figcaption>{escape(chart.caption)}</figcaption></figure>")


def _card(key: str, value: str, note: str = "", warn: bool = False) -> str:
    cls = "card warn" if warn else "card"
    vcls = "v long" if len(value) > 16 else "v"
    return (f'<div class="{cls}"><div class="k">{escape(key)}</div><div class="{vcls}">{escape(value)}</div>'
            f'<div class="n">{escape(note)}</div></div>')


def _table(head: list[tuple[str, bool]], rows: list[tuple[str, list[str]]]) -> str:
    """head: (label, numeric); rows: (css class, cells already escaped)."""
    th = "".join(f'<th class="num">{escape(h)}</th>' if n else f"<th>{escape(h)}</th>" for h, n in head)
    body = []
    for cls, cells in rows:
        tds = "".join(f'<td class="num">{c}</td>' if n else f"<td>{c}</td>" for c, (_, n) in zip(cells, head))
        body.append(f'<tr class="{cls}">{tds}</tr>')
    return f'<div class="scroll"><table><thead><tr>{th}</tr></thead><tbody>{"".join(body)}</tbody></table></div>'


def _summary(ctx: ReportContext) -> str:
    p, c = ctx.plan, ctx.currency
    running = [x for x in p.products if x.running]
    stopped = [x for x in p.products if not x.running]
    binding = p.bottlenecks
    status = {"optimal": "optimal", "time_limit": "time limit reached"}.get(p.status, p.status)
    cards = [
        _card(f"Total profit per {p.period}", money(p.profit, c), f"after the plant-wide fixed cost {money(p.plant_fixed_cost, c)}"),
        _card("Certified gap", f"{100 * p.gap:.3g} %", f"{status}; no plan beats {money(p.bound, c)}",
              warn=p.status != "optimal"),
        _card("Products running", f"{len(running)} of {len(p.products)}",
              ("shut down: " + ", ".join(x.name for x in stopped)) if stopped else "every product runs"),
        _card("Binding limits", str(len(binding)) if binding else "none",
              "; ".join(f"{r.name} ({money(r.shadow_price, c, 2)} per {per_unit(r.unit)})" for r in binding)
              or "every resource has spare capacity", warn=bool(binding)),
    ]
    best, paying = ctx.best_option, ctx.paying_option
    if paying is not None:
        cards.append(_card("Best capacity option", paying["name"],
                           f"net gain {money(paying['net_gain'], c)} per {p.period} (pays)"))
    elif best is not None:
        n = len([o for o in ctx.options if o.get("net_gain") is not None])
        cards.append(_card("Best capacity option", "No option pays",
                           f"none of the {n} options valued adds more profit than it costs" if n > 1 else
                           "the option valued adds no more profit than it costs", warn=True))
    points = []
    if running:
        top = max(running, key=lambda x: x.profit)
        points.append(f"Run {len(running)} products; the largest profit comes from <b>{escape(top.name)}</b> "
                      f"({escape(money(top.profit, c))} on {escape(num(top.volume))} {escape(top.unit)}).")
    if stopped:
        names = ", ".join(f"<b>{escape(x.name)}</b>" for x in stopped)
        points.append(f"Shut down {names}: the plan makes more without them — they would not cover their "
                      "costs here, or the capacity they would use earns more in other products.")
    if binding:
        r = binding[0]
        points.append(f"The bottleneck is <b>{escape(r.name)}</b> (the binding limit whose extra 1 % is worth most, "
                      f"about {escape(money(r.value_of_one_percent, c))}): one more {escape(per_unit(r.unit))} is worth "
                      f"{escape(money(r.shadow_price, c, 2))} of profit, for a small change. Larger additions "
                      "(a shift) are valued by re-solving, below.")
    if paying is not None:
        changes = changes_text(option_slate(paying))
        points.append(f"Best capacity option: <b>{escape(paying['name'])}</b>, gain "
                      f"{escape(money(paying.get('gain', 0.0), c))} for a cost of "
                      f"{escape(money(paying.get('cost', 0.0), c))} (net {escape(money(paying['net_gain'], c))})"
                      + (f"; {escape(changes)}" if changes else "") + ".")
    elif best is not None:
        points.append("No capacity option pays: none adds more profit than it costs, so today's capacity stays "
                      "(the options table shows each one's break-even).")
    if ctx.risk:
        points.append(risk_sentence(ctx))
    for w in p.warnings:
        points.append(f"Warning: {escape(w)}")
    items = "".join(f"<li>{x}</li>" for x in points)
    return f'<section id="summary"><div class="cards">{"".join(cards)}</div><ul class="points">{items}</ul></section>'


def _products(ctx: ReportContext) -> str:
    p, c = ctx.plan, ctx.currency
    head = [("product", False), ("status", False), ("volume", True), ("price", True), ("revenue", True),
            ("variable cost", True), ("contribution", True), ("fixed cost", True), ("profit", True)]
    rows = []
    for x in p.products:
        tag = (('<span class="tag on">committed</span>' if x.forced == "min_volume" else
                '<span class="tag on">must run</span>') if x.must_run else '<span class="tag on">runs</span>') \
            if x.running else '<span class="tag off">shut down</span>'
        rows.append(("on" if x.running else "off", [
            escape(x.name), tag, escape(f"{num(x.volume)} {x.unit}"),
            escape(money(x.price, c, 2)) if x.volume > 0 else "—",
            escape(money(x.revenue, c)), escape(money(x.variable_cost, c)), escape(money(x.contribution, c)),
            escape(money(x.fixed_cost, c)), f"<b>{escape(money(x.profit, c))}</b>"]))
    tot = lambda attr: sum(getattr(x, attr) for x in p.products)  # noqa: E731
    rows.append(("total", ["<b>all products</b>", "", "", "", escape(money(tot("revenue"), c)),
                           escape(money(tot("variable_cost"), c)), escape(money(tot("contribution"), c)),
                           escape(money(tot("fixed_cost"), c)), f"<b>{escape(money(tot('profit'), c))}</b>"]))
    note = (f'<p class="note">Amounts per {escape(p.period)} in {escape(c)}. Contribution = revenue − variable cost; '
            "profit = contribution − the product's fixed cost."
            + (f" Less the plant-wide fixed cost {escape(money(p.plant_fixed_cost, c))}: total profit "
               f"{escape(money(p.profit, c))}." if p.plant_fixed_cost else "") + "</p>")
    shead = [("product", False), ("best volume", True), ("price there", True), ("best profit", True),
             ("max-revenue volume", True), ("break-even volumes", True), ("volume in the mix", True)]
    srows = []
    for x in p.products:
        s = x.standalone
        be = " – ".join(num(v) if v is not None else "∞" for v in s.break_even) if s.break_even else "never breaks even"
        srows.append(("on" if x.running else "off", [
            escape(x.name), escape(num(s.optimal_volume)),
            escape(money(s.optimal_price, c, 2)) if s.optimal_price is not None else "—",
            escape(money(s.max_profit, c)) if s.max_profit is not None else "—",
            escape(num(s.max_revenue_volume)), escape(be),
            escape(num(x.volume)) if x.running else "shut down"]))
    snote = ('<p class="note">Each product on its own, as if it had the plant to itself (no shared limits; its cap '
             "applies). The mix gives a product less than its best volume when it competes for a binding limit.</p>")
    return (f'<section id="products"><h2>Products</h2>{_table(head, rows)}{note}'
            f'<h2>Standalone economics</h2>{_table(shead, srows)}{snote}</section>')


def _resources(ctx: ReportContext) -> str:
    p, c = ctx.plan, ctx.currency
    if not p.resources:
        return '<section id="resources"><h2>Resources</h2><p class="note">The scenario has no shared limits.</p></section>'
    has_range = any(getattr(r, "shadow_price_range", None) for r in p.resources)
    head = [("resource", False), ("used", True), ("capacity", True), ("utilisation", True), ("shadow price", True)]
    if has_range:
        head.append(("price holds for capacity", True))
    head.append(("limit", False))
    rows = []
    for r in p.resources:
        u = f" {r.unit}" if r.unit else ""
        sp = f"{money(r.shadow_price, c, 2)} per {per_unit(r.unit)}" if r.shadow_price > 0 else "0"
        cells = [escape(r.name), escape(num(r.used) + u), escape(num(r.capacity) + u), escape(pct(r.utilisation)),
                 escape(sp)]
        if has_range:
            rng = getattr(r, "shadow_price_range", None)
            cells.append(escape(f"{num(rng[0])} – {num(rng[1]) if rng[1] is not None else '∞'}{u}") if rng else "—")
        cells.append('<span class="tag bind">binding</span>' if r.binding else "spare")
        rows.append(("bind" if r.binding else "", cells))
    return f'<section id="resources"><h2>Resources</h2>{_table(head, rows)}</section>'


def _options(ctx: ReportContext) -> str:
    if not ctx.options:
        return ""
    c, per = ctx.currency, ctx.plan.period
    head = [("option", False), ("adds", False), ("rate", True), ("cost", True), ("profit with it", True),
            ("gain", True), ("net gain", True), ("break-even", True), ("slate changes", False)]
    rows = []
    for o in sorted(ctx.options, key=lambda o: -(o.get("net_gain") or 0.0)):
        adds = o.get("adds") or {}
        units = {r.name: r.unit for r in ctx.scenario.resources}
        adds_text = ", ".join(f"{num(a)} {units.get(k, '')} {k}".replace("  ", " ") for k, a in adds.items())
        share = option_share(o)
        if share is not None:
            adds_text += f" (best use: {pct(share)} of it)"
        rate, unit = ctx.option_rate(o)
        one = per_unit(unit)
        rate_text = f"{money(rate, c, 2)} per {one}" if rate is not None else "one price"
        if o.get("kind") == "part" and o.get("break_even_cost_per_unit") is not None:
            be = f"{money(o['break_even_cost_per_unit'], c, 2)} per {one}"
        elif o.get("break_even_cost") is not None:
            be = money(o["break_even_cost"], c)
        else:
            be = "—"
        net = o.get("net_gain")
        rows.append(("bind" if option_pays(o, ctx.plan.profit) else "", [
            escape(o.get("name", "")), escape(adds_text), escape(rate_text), escape(money(o.get("cost", 0.0), c)),
            escape(money(o["profit_with"], c)) if o.get("profit_with") is not None else "—",
            escape(money(o.get("gain", 0.0), c)), f"<b>{escape(money(net, c))}</b>" if net is not None else "—",
            escape(be), escape(changes_text(option_slate(o)) or "none")]))
    src = ("Valued by the capacity analysis." if ctx.options_source == "capacity analysis" else
           "Each option valued on its own by re-solving the plan with it; options usable in part were tried at "
           "25 %, 50 %, 75 % and 100 % of their amount.")
    note = (f'<p class="note">Amounts per {escape(per)}. Gain = profit with the option − profit today; net gain = '
            "gain − the option's cost. Rate: the cost per unit of an option usable in part (an all-or-nothing "
            "option has one price). Break-even: the most the whole option may cost and still pay; for an option "
            f"usable in part, the most it may cost per unit. {escape(src)} {escape(LABOUR_NOTE)}</p>")
    return f'<section id="options"><h2>Capacity options</h2>{_table(head, rows)}{note}</section>'


def _footer(ctx: ReportContext) -> str:
    p = ctx.plan
    versions = ", ".join(f"{k} {v}" for k, v in ctx.versions.items())
    solver = p.solver
    settings = (f"strategy {solver.get('strategy', '?')}, {solver.get('rounds', '?')} rounds, "
                f"QP {solver.get('qp_method', '?')}, threads {solver.get('threads', '?')}, "
                f"solve time {solver.get('seconds', 0):.2f} s")
    sha = f"<code>{escape(ctx.sha256)}</code>" if ctx.sha256 else "(planned from an object, no file)"
    return ("<footer>"
            f"<div>Scenario <b>{escape(p.scenario)}</b> · file <code>{escape(ctx.source or '—')}</code></div>"
            f"<div>SHA-256 of the scenario file: {sha}</div>"
            f"<div>Made {escape(ctx.generated.strftime('%Y-%m-%d %H:%M UTC'))} · status {escape(p.status)}, "
            f"gap {p.gap:.3g}, bound {escape(money(p.bound, ctx.currency))} · {escape(settings)}</div>"
            f"<div>Versions: {escape(versions)}</div>"
            f"<div>{escape(LABOUR_NOTE)}</div>"
            "</footer>")


def render_html(ctx: ReportContext, charts: list[Chart]) -> str:
    """The whole page as a string (UTF-8 when written)."""
    p = ctx.plan
    by_key = {ch.key: ch for ch in charts}
    top = "".join(_figure(by_key[k]) for k in ("mix", "resources") if k in by_key)
    sweep = [ch for ch in charts if ch.key.startswith("sweep-")]
    product_figs = "".join(_figure(ch) for ch in charts if ch.key.startswith("product-"))
    n_charted = sum(1 for ch in charts if ch.key.startswith("product-"))
    omitted = (f" Charts for the {n_charted} most profitable of {len(p.products)} products; the workbook lists "
               "every product." if n_charted < len(p.products) else "")
    sweep_html = ""
    if sweep:
        bps = sorted((ctx.sweep or {}).get("breakpoints", []), key=lambda b: b["capacity"])  # numbered as drawn
        unit = (ctx.sweep or {}).get("unit", "")

        def where(b):
            if b.get("after") is not None:
                return f"between {num(b['after'])} and {num(b['capacity'])} {unit}".rstrip()
            return f"at {num(b['capacity'])} {unit}".rstrip()

        lst = "".join(f"<li>{escape(where(b))}: {escape(str(b.get('change', '')))}</li>" for b in bps)
        sweep_html = (f'<section id="sweep"><h2>Capacity sweep</h2>{_figure(sweep[0])}'
                      + (f'<ol class="points">{lst}</ol>' if lst else '<p class="note">No change of slate, binding limits or bottleneck in the range swept.</p>')
                      + "</section>")
    desc = ctx.scenario.description
    sub = f"Plan for one {p.period}" + (f" · {desc}" if desc else "")
    return ("<!DOCTYPE html>\n<html lang=\"en\"><head><meta charset=\"utf-8\">"
            "<meta name=\"viewport\" content=\"width=device-width, initial-scale=1\">"
            f"<title>{escape(p.scenario)} — plan</title><style>{CSS}</style></head><body><main>"
            f"<h1>{escape(p.scenario)}</h1><p class=\"sub\">{escape(sub)}</p>"
            f"{_summary(ctx)}"
            f"{_products(ctx)}{_resources(ctx)}{_options(ctx)}"
            f'<section id="charts"><h2>The plan in charts</h2>{top}</section>'
            f"{sweep_html}"
            f"{risk_section(ctx, ''.join(_figure(ch) for ch in charts if ch.key.startswith('risk-')))}"
            f'<section id="economics"><h2>Each product: revenue, cost and profit against volume</h2>'
            f'<p class="note">Over the whole demand range (up to the volume at which the price reaches zero), with '
            f"the volume the mix gives each product.{omitted}</p>"
            f'<div class="grid2">{product_figs}</div></section>'
            f"{_footer(ctx)}</main></body></html>\n")
