"""The Excel workbook (openpyxl): the plan's numbers at full precision, formatted for reading.

Sheets: Summary, Products, Resources, Options, Sweep (when a sweep was run), Risk (with ``--risk``),
and the scenario's inputs as read (Input products, Input usage, Input
resources, Input options).  Every sheet has a bold frozen header row and number
formats (currency with thousands separators, volumes, percentages); cells hold
the unrounded values of the Plan, so the workbook equals the JSON plan.
"""

from __future__ import annotations

from pathlib import Path
from typing import Any

from openpyxl import Workbook
from openpyxl.styles import Alignment, Font, PatternFill
from openpyxl.utils import get_column_letter

from planner.files import set_cell
from planner.output.plan import LABOUR_NOTE
from planner.output.report.context import ReportContext
from planner.output.report.fmt import changes_text, option_share, option_slate
from planner.output.report.riskview import risk_rows

HEAD_FILL = PatternFill("solid", fgColor="F1EBDF")
QTY = "#,##0.0"
QTY3 = "#,##0.000"
PCT = "0.0%"


def _money_fmt(currency: str, decimals: int = 0) -> str:
    cur = currency.replace('"', "")
    cur += " " if cur and cur[-1].isalnum() else ""  # 'CHF 1,234', as in the terminal and the page
    return f'"{cur}"#,##0{"." + "0" * decimals if decimals else ""};-"{cur}"#,##0{"." + "0" * decimals if decimals else ""}'


def _sheet(wb: Workbook, title: str, header: list[str], rows: list[list[Any]], formats: dict[str, str] | None = None,
           widths: dict[str, int] | None = None):
    """A sheet with a bold, frozen header row; ``formats`` maps header name to a number format."""
    ws = wb.create_sheet(title)
    for j, name in enumerate(header, start=1):
        cell = set_cell(ws, 1, j, name)
        cell.font = Font(bold=True)
        cell.fill = HEAD_FILL
        cell.alignment = Alignment(wrap_text=True, vertical="top")
    for i, row in enumerate(rows, start=2):
        for j, value in enumerate(row, start=1):
            if value is not None:
                set_cell(ws, i, j, value)  # text stays text: a name starting with '=' is no formula
    ws.freeze_panes = "B2"
    for k, name in enumerate(header, start=1):
        letter = get_column_letter(k)
        fmt = (formats or {}).get(name)
        if fmt:
            for (cell,) in ws.iter_rows(min_row=2, min_col=k, max_col=k):
                cell.number_format = fmt
        longest = max([len(str(name))] + [len(str(r[k - 1])) for r in rows if k - 1 < len(r) and r[k - 1] is not None])
        ws.column_dimensions[letter].width = (widths or {}).get(name, min(max(12, longest + 2), 48))
    return ws


def build_workbook(ctx: ReportContext) -> Workbook:
    """The whole workbook in memory."""
    p, c = ctx.plan, ctx.currency
    m0, m2 = _money_fmt(c, 0), _money_fmt(c, 2)
    wb = Workbook()
    wb.remove(wb.active)
    best, paying = ctx.best_option, ctx.paying_option
    summary = [
        ["scenario", p.scenario, ""], ["status", p.status, ""],
        ["total profit", p.profit, f"{c} per {p.period}, after the plant-wide fixed cost"],
        ["certified bound", p.bound, f"{c} per {p.period}: no plan makes more"],
        ["gap", p.gap, "(bound − profit) / max(|profit|, 1)"],
        ["plant-wide fixed cost", p.plant_fixed_cost, f"{c} per {p.period}"],
        ["products running", sum(x.running for x in p.products), f"of {len(p.products)}"],
        ["shut down", ", ".join(x.name for x in p.products if not x.running) or "none", ""],
        ["binding limits", ", ".join(r.name for r in p.bottlenecks) or "none", "dearest shadow price first"],
        ["best capacity option", paying["name"] if paying else ("no option pays" if best else "none"),
         "" if paying or not best else "none adds more profit than it costs"],
        ["its net gain", paying["net_gain"] if paying else None, f"{c} per {p.period}"],
        ["scenario file", ctx.source, ""], ["scenario SHA-256", ctx.sha256, ""],
        ["made", ctx.generated.strftime("%Y-%m-%d %H:%M UTC"), ""],
        ["versions", ", ".join(f"{k} {v}" for k, v in ctx.versions.items()), ""],
        ["note", LABOUR_NOTE, ""],
    ]
    ws = _sheet(wb, "Summary", ["item", "value", "unit / meaning"], summary, widths={"item": 24, "value": 40,
                                                                                       "unit / meaning": 50})
    for row in (3, 4, 6, 11):
        ws.cell(row=row + 1, column=2).number_format = m0
    ws.cell(row=6, column=2).number_format = "0.00E+00"

    prod_head = ["product", "running", "must run", "volume", "unit", "price", "revenue", "variable cost",
                 "contribution", "fixed cost", "profit", "standalone best volume", "standalone best price",
                 "standalone best profit", "max-revenue volume", "break-even low", "break-even high"]
    prows = []
    for x in p.products:
        s = x.standalone
        be = list(s.break_even) + [None, None]
        prows.append([x.name, x.running, x.must_run, x.volume, x.unit, x.sold_price, x.revenue, x.variable_cost,
                      x.contribution, x.fixed_cost, x.profit, s.optimal_volume, s.optimal_price, s.max_profit,
                      s.max_revenue_volume, be[0], be[1]])
    _sheet(wb, "Products", prod_head, prows, {
        "volume": QTY, "price": m2, "revenue": m0, "variable cost": m0, "contribution": m0, "fixed cost": m0,
        "profit": m0, "standalone best volume": QTY, "standalone best price": m2, "standalone best profit": m0,
        "max-revenue volume": QTY, "break-even low": QTY, "break-even high": QTY})

    res_head = ["resource", "unit", "capacity", "used", "utilisation", "binding", f"shadow price ({c} per unit)",
                "range low (capacity)", "range high (capacity)"]
    rrows = []
    for r in p.resources:
        rng = list(getattr(r, "shadow_price_range", None) or []) + [None, None]
        rrows.append([r.name, r.unit, r.capacity, r.used, r.utilisation, r.binding, r.shadow_price, rng[0], rng[1]])
    _sheet(wb, "Resources", res_head, rrows, {"capacity": QTY, "used": QTY, "utilisation": PCT,
                                              f"shadow price ({c} per unit)": m2, "range low (capacity)": QTY,
                                              "range high (capacity)": QTY})

    opt_head = ["option", "adds", "share used", "cost", "profit with it", "gain", "net gain", "slate changes",
                "valued by", "cost per unit", "break-even cost", "break-even cost per unit"]
    orows = []
    for o in ctx.options:
        adds = "; ".join(f"{k}: {a:g}" for k, a in (o.get("adds") or {}).items())
        share = option_share(o)
        rate, _ = ctx.option_rate(o)
        orows.append([o.get("name"), adds, 1.0 if share is None else share, o.get("cost"), o.get("profit_with"),
                      o.get("gain"), o.get("net_gain"), changes_text(option_slate(o)) or "none", ctx.options_source,
                      rate, o.get("break_even_cost"), o.get("break_even_cost_per_unit")])
    _sheet(wb, "Options", opt_head, orows, {"share used": PCT, "cost": m0, "profit with it": m0, "gain": m0,
                                            "net gain": m0, "cost per unit": m2, "break-even cost": m0,
                                            "break-even cost per unit": m2})

    if ctx.sweep and ctx.sweep.get("points"):
        names = [x.name for x in p.products]
        head = ["capacity", "profit", "shadow price"] + [f"volume: {n}" for n in names]
        srows = []
        for pt in ctx.sweep["points"]:
            vols = pt.get("volumes") or {}
            vols = vols if isinstance(vols, dict) else dict(zip(names, vols))
            srows.append([pt["capacity"], pt["profit"], pt.get("shadow_price")] + [vols.get(n) for n in names])
        _sheet(wb, "Sweep", head, srows, {"capacity": QTY, "profit": m0, "shadow price": m2,
                                          **{f"volume: {n}": QTY for n in names}})

    if ctx.risk:
        rows = risk_rows(ctx)
        ws = _sheet(wb, "Risk", ["item", "value", "unit / meaning"], [r[:3] for r in rows],
                    widths={"item": 40, "value": 22, "unit / meaning": 50})
        for k, r in enumerate(rows, start=2):
            fmt = {"money": m0, "share": PCT}.get(r[3])
            if fmt:
                ws.cell(row=k, column=2).number_format = fmt

    _inputs(wb, ctx)
    return wb


def _inputs(wb: Workbook, ctx: ReportContext) -> None:
    s = ctx.scenario
    cur = ctx.currency
    fields = ["name", "price_intercept", "price_slope", "unit_cost", "fixed_cost", "max_volume", "min_volume",
              "min_run", "must_run", "unit", "description"]
    _sheet(wb, "Input products", fields, [[getattr(p, f) for f in fields] for p in s.products],
           {"price_intercept": _money_fmt(cur, 2), "price_slope": "0.000###", "unit_cost": _money_fmt(cur, 2),
            "fixed_cost": _money_fmt(cur), "max_volume": QTY, "min_volume": QTY, "min_run": QTY})
    res_names = [r.name for r in s.resources]
    _sheet(wb, "Input usage", ["product"] + res_names,
           [[p.name] + [p.usage.get(r, 0.0) for r in res_names] for p in s.products],
           {r: "0.000###" for r in res_names})
    rf = ["name", "capacity", "unit", "kind", "description"]
    _sheet(wb, "Input resources", rf, [[getattr(r, f) for f in rf] for r in s.resources], {"capacity": QTY})
    orows = []
    for o in s.options:
        for kind, amounts in (("all or nothing", o.adds), ("usable in part", o.adds_up_to)):
            for res, amount in (amounts or {}).items():
                orows.append([o.name, kind, res, amount, o.cost, o.cost_per_unit, o.description])
    _sheet(wb, "Input options", ["option", "kind", "resource", "amount", "cost", "cost per unit", "description"],
           orows, {"amount": QTY, "cost": _money_fmt(cur), "cost per unit": _money_fmt(cur, 2)})
    _sheet(wb, "Input scenario", ["key", "value"],
           [["name", s.name], ["currency", s.currency], ["period", s.period],
            ["plant_fixed_cost", s.plant_fixed_cost], ["description", s.description]],
           widths={"key": 20, "value": 60})["B5"].number_format = _money_fmt(cur)


def workbook_bytes(ctx: ReportContext) -> bytes:
    """The whole workbook as the bytes of an .xlsx file."""
    import io

    buf = io.BytesIO()
    build_workbook(ctx).save(buf)
    return buf.getvalue()


def write_workbook(ctx: ReportContext, path: str | Path) -> Path:
    """Write the workbook atomically to ``path``."""
    from planner.files import write_bytes_atomic

    return write_bytes_atomic(path, workbook_bytes(ctx))
