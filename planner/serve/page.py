"""The what-if page: HTML built once from the scenario, and its script and style (served as files).

The page has a control for each resource's capacity, each product's price intercept, unit cost
and fixed cost, and each option (taken or not).  Every change re-plans (``POST /api/plan``, a
short pause after the last keystroke) and shows profit and its change against the scenario as
written, the certified gap, the running products, the bottleneck and every shadow price, and two
charts drawn from the plan JSON (volume and profit by product; utilisation of each resource).
A refused change is shown with the server's message beside the control it names, and the last
good plan stays.  "Save as variant" sends the changes with a name; the server adds them to its
copy of the scenario.

Names reach the page only as text (``textContent``), and as the escaped form of
:func:`planner.output.text.visible`, so no control or bidirectional character acts on the page.
"""

from __future__ import annotations

import json
from html import escape
from pathlib import Path

from planner.output.plan import LABOUR_NOTE
from planner.output.report.style import CSS
from planner.output.text import visible
from planner.scenario.schema import Scenario

_HERE = Path(__file__).resolve().parent


def controls(s: Scenario) -> dict:
    """What the page's controls show and send: every name exact (``name``) and as shown (``label``)."""
    return {
        "scenario": visible(s.name), "currency": visible(s.currency), "period": visible(s.period),
        "plant_fixed_cost": s.plant_fixed_cost, "labour_note": LABOUR_NOTE,
        "resources": [{"name": r.name, "label": visible(r.name), "unit": visible(r.unit), "kind": r.kind,
                       "capacity": r.capacity} for r in s.resources],
        "products": [{"name": p.name, "label": visible(p.name), "unit": visible(p.unit),
                      "price_intercept": p.price_intercept, "unit_cost": p.unit_cost, "fixed_cost": p.fixed_cost}
                     for p in s.products],
        "options": [{"name": o.name, "label": visible(o.name),
                     "adds": {visible(k): v for k, v in (o.adds or o.adds_up_to or {}).items()},
                     "whole": o.adds is not None,
                     "cost": o.cost if o.adds is not None else None, "cost_per_unit": o.cost_per_unit}
                    for o in s.options],
    }


def _number_cell(kind: str, index: int, field: str, value: float, label: str) -> str:
    return (f'<input class="num" type="text" inputmode="decimal" autocomplete="off" spellcheck="false" '
            f'data-kind="{kind}" data-index="{index}" data-field="{field}" value="{value:g}" '
            f'aria-label="{escape(label)}">')


def page_html(s: Scenario) -> str:
    """The page for scenario ``s`` (its numbers as the controls' starting values)."""
    data = json.dumps(controls(s), allow_nan=False, ensure_ascii=True).replace("<", "\\u003c")
    res_rows = "".join(
        f'<tr><td>{escape(visible(r.name))}</td><td class="num">'
        f'{_number_cell("resource", k, "capacity", r.capacity, f"capacity of {visible(r.name)}")}</td>'
        f"<td>{escape(visible(r.unit))}</td></tr>" for k, r in enumerate(s.resources))
    prod_rows = "".join(
        f"<tr><td>{escape(visible(p.name))}</td>"
        + "".join(f'<td class="num">{_number_cell("product", k, f, getattr(p, f), f"{f} of {visible(p.name)}")}</td>'
                  for f in ("price_intercept", "unit_cost", "fixed_cost"))
        + "</tr>" for k, p in enumerate(s.products))
    opt_rows = "".join(
        f'<li><label><input type="checkbox" data-kind="option" data-index="{k}"> {escape(visible(o.name))}</label> '
        f'<span class="note">{escape(_option_note(s, o))}</span></li>' for k, o in enumerate(s.options))
    cur = escape(visible(s.currency))
    return ("<!DOCTYPE html>\n<html lang=\"en\"><head><meta charset=\"utf-8\">"
            "<meta name=\"viewport\" content=\"width=device-width, initial-scale=1\">"
            f"<title>{escape(visible(s.name))} — what if</title><link rel=\"icon\" href=\"data:,\"><link rel=\"stylesheet\" href=\"/app.css\"></head>"
            "<body><main>"
            f"<h1>{escape(visible(s.name))}: what if …</h1>"
            f"<p class=\"sub\">Change a number and the plan is made again. Amounts per {escape(visible(s.period))} "
            f"in {cur}.</p>"
            '<div class="layout"><section id="controls" aria-label="changes">'
            '<div class="bar"><button type="button" id="reset">Back to the scenario</button>'
            '<span id="busy" class="note" aria-live="polite"></span></div>'
            + (f'<h2>Capacities</h2><table><thead><tr><th>resource</th><th class="num">capacity</th><th>unit</th>'
               f"</tr></thead><tbody>{res_rows}</tbody></table>" if s.resources else "")
            + f'<h2>Products</h2><div class="scroll"><table><thead><tr><th>product</th>'
              f'<th class="num">price intercept</th><th class="num">unit cost</th><th class="num">fixed cost</th>'
              f"</tr></thead><tbody>{prod_rows}</tbody></table></div>"
            + (f'<h2>Capacity options</h2><ul class="options">{opt_rows}</ul>' if s.options else "")
            + '<h2>Save as variant</h2><div class="save"><input type="text" id="variant-name" '
              'placeholder="name of the variant" aria-label="name of the variant" maxlength="200">'
              '<input type="text" id="variant-description" placeholder="description (optional)" '
              'aria-label="description" maxlength="2000"><button type="button" id="save">Save as variant</button>'
              '<div id="saved" class="note" aria-live="polite"></div></div>'
            + '</section><section id="plan" aria-label="the plan">'
              '<div id="error" class="error" role="alert" hidden></div>'
              '<div class="cards"><div class="card"><div class="k">Total profit</div><div class="v" id="profit">…</div>'
              '<div class="n" id="change"></div></div>'
              '<div class="card"><div class="k">Certified gap</div><div class="v" id="gap">…</div>'
              '<div class="n" id="status"></div></div>'
              '<div class="card"><div class="k">Products running</div><div class="v" id="running">…</div>'
              '<div class="n" id="stopped"></div></div>'
              '<div class="card warn"><div class="k">Bottleneck</div><div class="v long" id="bottleneck">…</div>'
              '<div class="n" id="bottleneck-price"></div></div></div>'
              '<p id="labour" class="note" hidden></p>'
              '<h2>Products</h2><div class="scroll"><table id="products-table"><thead><tr><th>product</th>'
              '<th>status</th><th class="num">volume</th><th class="num">price</th><th class="num">profit</th></tr>'
              '</thead><tbody></tbody></table></div>'
              '<h2>Resources</h2><div class="scroll"><table id="resources-table"><thead><tr><th>resource</th>'
              '<th class="num">used</th><th class="num">capacity</th><th class="num">utilisation</th>'
              '<th class="num">shadow price</th></tr></thead><tbody></tbody></table></div>'
              '<h2>The mix</h2><figure class="chart"><svg id="mix-chart" role="img" aria-label="volume and profit by '
              'product"></svg><figcaption>Volume (left) and profit after its fixed cost (right) of each product; '
              'shut-down products make nothing.</figcaption></figure>'
              '<h2>Utilisation</h2><figure class="chart"><svg id="use-chart" role="img" aria-label="utilisation of '
              'each resource"></svg><figcaption>Share of each capacity used; binding limits in ochre with their '
              'shadow price.</figcaption></figure>'
              '<ul id="warnings" class="points"></ul>'
              "</section></div>"
            f'<footer><div>{escape(LABOUR_NOTE)}</div><div>Served from this computer only; nothing leaves it.</div>'
            "</footer></main>"
            f'<script type="application/json" id="scenario-data">{data}</script>'
            '<script src="/app.js"></script></body></html>\n')


def _option_note(s: Scenario, o) -> str:
    units = {r.name: r.unit for r in s.resources}
    adds = ", ".join(f"{v:g} {units.get(k, '')} {k}".replace("  ", " ") for k, v in (o.adds or o.adds_up_to).items())
    if o.adds is not None:
        return f"adds {visible(adds)} for {o.cost:,.0f}"
    return f"adds up to {visible(adds)} at {o.cost_per_unit:g} per unit (taken in full)"


def page_js() -> str:
    """The page's script (planner/serve/static/app.js)."""
    return (_HERE / "static" / "app.js").read_text(encoding="utf-8")


def page_css() -> str:
    """The report's style with the what-if page's additions."""
    return CSS + (_HERE / "static" / "app.css").read_text(encoding="utf-8")
