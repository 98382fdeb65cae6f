"""The comparison as an Excel workbook (openpyxl): every number unrounded, text cells always text.

Sheets: Comparison (a column per variant, the base first: profit, change, status, gap, bottleneck
and its shadow price, starts, stops), Products (one row per variant and product: running, volume,
price, profit), Resources (one row per variant and resource: capacity, used, utilisation, shadow
price, binding), Changes (one row per change of each variant).  Header rows bold and frozen.
"""

from __future__ import annotations

import io
from typing import Any

from openpyxl import Workbook
from openpyxl.styles import Alignment, Font, PatternFill
from openpyxl.utils import get_column_letter

from planner.files import set_cell
from planner.output.compare.terminal import bottleneck, decisions
from planner.output.plan import LABOUR_NOTE

HEAD_FILL = PatternFill("solid", fgColor="F1EBDF")


def money_format(currency: str, decimals: int = 0) -> str:
    """An Excel number format with the currency before the amount ('"€"#,##0')."""
    cur = currency.replace('"', "")
    cur += " " if cur and cur[-1].isalnum() else ""
    tail = "." + "0" * decimals if decimals else ""
    return f'"{cur}"#,##0{tail};-"{cur}"#,##0{tail}'


def _sheet(wb: Workbook, title: str, header: list[str], rows: list[list[Any]],
           formats: dict[int, str] | None = None, freeze: str = "B2") -> None:
    ws = wb.create_sheet(title)
    for j, name in enumerate(header, start=1):
        cell = set_cell(ws, 1, j, name)
        cell.font, cell.fill = Font(bold=True), HEAD_FILL
        cell.alignment = Alignment(wrap_text=True, vertical="top")
    for i, row in enumerate(rows, start=2):
        for j, value in enumerate(row, start=1):
            if value is not None:
                cell = set_cell(ws, i, j, value)
                fmt = (formats or {}).get(j)
                if fmt and isinstance(value, (int, float)) and not isinstance(value, bool):
                    cell.number_format = fmt
    ws.freeze_panes = freeze
    for j, name in enumerate(header, start=1):
        longest = max([len(str(name))] + [len(str(r[j - 1])) for r in rows if j - 1 < len(r) and r[j - 1] is not None])
        ws.column_dimensions[get_column_letter(j)].width = min(max(12, longest + 2), 48)


def build_book(data: dict[str, Any]) -> Workbook:
    """The whole workbook in memory (see the module docstring)."""
    cur = data["currency"]
    m0, m2 = money_format(cur), money_format(cur, 2)
    cols = [data["base"]] + data["variants"]
    wb = Workbook()
    wb.remove(wb.active)
    head = ["item"] + [("base: " if k == 0 else "") + v["name"] for k, v in enumerate(cols)]

    def line(label: str, get) -> list[Any]:
        return [label] + [get(v) for v in cols]
    planned = lambda f: (lambda v: f(v) if v.get("profit") is not None else None)  # noqa: E731
    neck = lambda v: bottleneck(v) or {}  # noqa: E731
    rows = [line(f"profit ({cur} per {data['period']})", lambda v: v.get("profit")),
            line("change against the base", lambda v: v.get("profit_change")),
            line("status", lambda v: v["status"]),
            line("gap", lambda v: v.get("gap")),
            line("bottleneck", planned(lambda v: neck(v).get("name") or "none binds")),
            line(f"its shadow price ({cur} per unit)", planned(lambda v: neck(v).get("shadow_price"))),
            line("starts", planned(lambda v: ", ".join(decisions(v)[0]))),
            line("stops", planned(lambda v: ", ".join(decisions(v)[1]))),
            line("changes", lambda v: "; ".join(v.get("changes") or []) or v.get("file", "")),
            line("description", lambda v: v.get("description", "")),
            line("no plan because", lambda v: v.get("message", "")),
            line("labour note", lambda v: LABOUR_NOTE if v.get("labour_note") else "")]
    row_formats = [m0, m0, None, "0.00E+00", None, m2]  # by row: profit, change, status, gap, ..., shadow price
    _sheet(wb, "Comparison", head, rows)
    ws = wb["Comparison"]
    for i, fmt in enumerate(row_formats, start=2):
        for j in range(2, len(cols) + 2):
            if fmt and isinstance(ws.cell(row=i, column=j).value, (int, float)):
                ws.cell(row=i, column=j).number_format = fmt
    prod = [[v["name"], p["name"], p["running"], p["volume"], p["price"], p["profit"], p["unit"]]
            for v in cols for p in v.get("products", [])]
    _sheet(wb, "Products", ["variant", "product", "running", "volume", "price", "profit", "unit"], prod,
           {4: "#,##0.0", 5: m2, 6: m0})
    res = [[v["name"], r["name"], r["capacity"], r["used"], r["utilisation"], r["shadow_price"], r["binding"],
            r["unit"]] for v in cols for r in v.get("resources", [])]
    _sheet(wb, "Resources", ["variant", "resource", "capacity", "used", "utilisation",
                             f"shadow price ({cur} per unit)", "binding", "unit"], res,
           {3: "#,##0.0", 4: "#,##0.0", 5: "0.0%", 6: m2})
    ch = [[v["name"], k + 1, c] for v in data["variants"] for k, c in enumerate(v.get("changes") or [])]
    _sheet(wb, "Changes", ["variant", "change", "what"], ch)
    return wb


def book_bytes(data: dict[str, Any]) -> bytes:
    """The workbook as the bytes of an .xlsx file."""
    buf = io.BytesIO()
    build_book(data).save(buf)
    return buf.getvalue()
