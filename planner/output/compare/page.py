"""The comparison as one self-contained HTML page (inline CSS and SVG, no scripts, no outside links).

Layout: the answer first (the best variant, the base, how many variants), then the side-by-side
table (a column per variant: profit, change, status, starts and stops, bottleneck and its shadow
price), each product's volume and each resource's shadow price side by side, what each variant
changes, the charts, and a footer (the scenario file's SHA-256, the date, the labour note).
Reads the comparison's JSON after ``display_copy`` (names escaped).
"""

from __future__ import annotations

from html import escape
from typing import Any

from planner.output.compare.terminal import rows as summary_rows
from planner.output.plan import LABOUR_NOTE
from planner.output.report.charts import Chart
from planner.output.report.fmt import money, num
from planner.output.report.html import inline_svg
from planner.output.report.style import CSS


def _table(head: list[str], body: list[tuple[str, list[str]]], numeric_from: int = 1) -> str:
    th = "".join(f'<th class="num">{escape(h)}</th>' if j >= numeric_from else f"<th>{escape(h)}</th>"
                 for j, h in enumerate(head))
    trs = []
    for cls, cells in body:
        tds = "".join(f'<td class="num">{c}</td>' if j >= numeric_from else f"<td>{c}</td>"
                      for j, c in enumerate(cells))
        trs.append(f'<tr class="{cls}">{tds}</tr>')
    return f'<div class="scroll"><table><thead><tr>{th}</tr></thead><tbody>{"".join(trs)}</tbody></table></div>'


def _figure(chart: Chart) -> str:
    return (f'<figure class="chart" data-chart="{escape(chart.key)}">{inline_svg(chart)}'
            f"<figcaption>{escape(chart.caption)}</figcaption></figure>")


def _card(key: str, value: str, note: str = "", warn: bool = False) -> str:
    vcls = "v long" if len(value) > 16 else "v"
    return (f'<div class="card{" warn" if warn else ""}"><div class="k">{escape(key)}</div>'
            f'<div class="{vcls}">{escape(value)}</div><div class="n">{escape(note)}</div></div>')


def _summary(data: dict[str, Any]) -> str:
    cur, per = data["currency"], data["period"]
    base, variants = data["base"], data["variants"]
    planned = [v for v in variants if v.get("profit") is not None]
    best = max(planned, key=lambda v: v["profit_change"], default=None)
    cards = [_card(f"Base profit per {per}", money(base["profit"], cur), base["name"]),
             _card("Variants", str(len(variants)),
                   f"{len(variants) - len(planned)} without a plan" if len(planned) < len(variants)
                   else "each planned on its own", warn=len(planned) < len(variants))]
    if best is not None and best["profit_change"] > 0.5:
        cards.append(_card("Best variant", best["name"],
                           f"{money(best['profit'], cur)}, {money(best['profit_change'], cur)} more than the base"))
    elif best is not None:
        cards.append(_card("Best variant", "None beats the base", "every variant makes no more than the base",
                           warn=True))
    return f'<section id="summary"><div class="cards">{"".join(cards)}</div></section>'


def _side_by_side(data: dict[str, Any]) -> str:
    cols = [data["base"]] + data["variants"]
    head = [""] + [("base: " if k == 0 else "") + v["name"] for k, v in enumerate(cols)]
    body = [("", [f"<b>{escape(label)}</b>"] + [escape(c) for c in cells]) for label, cells in summary_rows(data)]
    return f'<section id="comparison"><h2>Side by side</h2>{_table(head, body)}</section>'


def _details(data: dict[str, Any]) -> str:
    cur = data["currency"]
    cols = [data["base"]] + data["variants"]
    head = ["product"] + [v["name"] for v in cols]
    names = list(dict.fromkeys(p["name"] for v in cols for p in v.get("products", [])))
    by = [{p["name"]: p for p in v.get("products", [])} for v in cols]

    def vol(p: dict[str, Any] | None) -> str:
        if p is None:
            return "—"
        if not p["running"]:
            return '<span class="tag off">shut down</span>'
        return escape(f"{num(p['volume'])} {p['unit']} at {money(p['price'], cur, 2)}" if p["price"] is not None
                      else f"{num(p['volume'])} {p['unit']}")
    prows = [("", [escape(n)] + [vol(b.get(n)) for b in by]) for n in names]
    res = list(dict.fromkeys(r["name"] for v in cols for r in v.get("resources", [])))
    rb = [{r["name"]: r for r in v.get("resources", [])} for v in cols]

    def shadow(r: dict[str, Any] | None) -> str:
        if r is None:
            return "—"
        u = f"/{r['unit']}" if r["unit"] else ""
        text = f"{money(r['shadow_price'], cur, 2)}{u}" if r["shadow_price"] > 0 else "0 (spare)"
        return escape(f"{text} · {100 * r['utilisation']:.0f} % used")
    rrows = [("", [escape(n)] + [shadow(b.get(n)) for b in rb]) for n in res]
    out = f'<section id="products"><h2>Products: volume and price</h2>{_table(head, prows)}</section>'
    if res:
        out += (f'<section id="resources"><h2>Resources: shadow price and utilisation</h2>'
                f'{_table(["resource"] + head[1:], rrows)}</section>')
    return out


def _changes(data: dict[str, Any]) -> str:
    items = []
    for v in data["variants"]:
        what = "; ".join(v.get("changes") or []) or (f"file {v['file']}" if v.get("file") else "")
        desc = f" — {escape(v['description'])}" if v.get("description") else ""
        extra = "" if v.get("profit") is not None else \
            f'<br><span class="note">No plan: {escape(v.get("message", ""))}</span>'
        items.append(f"<li><b>{escape(v['name'])}</b>{desc}: {escape(what)}{extra}</li>")
    labour = f'<p class="note">{escape(LABOUR_NOTE)}</p>' if any(v.get("labour_note") for v in data["variants"]) \
        else ""
    return f'<section id="variants"><h2>What each variant changes</h2><ul class="points">{"".join(items)}</ul>' \
           f"{labour}</section>"


def render_page(data: dict[str, Any], charts: list[Chart], source: str = "", sha256: str = "",
                generated: str = "") -> str:
    """The whole page as a string (UTF-8 when written)."""
    base = data["base"]
    figs = "".join(_figure(ch) for ch in charts)
    sha = f"<code>{escape(sha256)}</code>" if sha256 else "—"
    return ("<!DOCTYPE html>\n<html lang=\"en\"><head><meta charset=\"utf-8\">"
            "<meta name=\"viewport\" content=\"width=device-width, initial-scale=1\">"
            f"<title>{escape(base['name'])} — variants compared</title><style>{CSS}</style></head><body><main>"
            f"<h1>{escape(base['name'])}: variants compared</h1>"
            f"<p class=\"sub\">{escape(base.get('description') or '')} Amounts per {escape(data['period'])} in "
            f"{escape(data['currency'])}, after every fixed cost and the cost of any option a variant takes.</p>"
            f"{_summary(data)}{_side_by_side(data)}{_changes(data)}"
            f'<section id="charts"><h2>Profit by variant</h2>{figs}</section>'
            f"{_details(data)}"
            "<footer>"
            f"<div>Scenario <b>{escape(base['name'])}</b> · file <code>{escape(source or '—')}</code></div>"
            f"<div>SHA-256 of the scenario file: {sha}</div>"
            f"<div>Made {escape(generated)} · each plan certified to a relative gap of "
            f"{data.get('run', {}).get('rel_gap', 0):g}</div>"
            f"<div>{escape(LABOUR_NOTE)}</div>"
            "</footer></main></body></html>\n")
