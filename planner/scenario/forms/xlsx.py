"""Scenario workbooks (.xlsx, openpyxl): reading, writing and the annotated template.

One sheet per table of :mod:`planner.io.tables`.  Sheets the planner does not
use are refused by name through the validator, except ``about`` (the
template's instructions), which is ignored.
"""

from __future__ import annotations

import re
import math
from functools import lru_cache
from pathlib import Path
from typing import Any

from planner.errors import Problem, ScenarioError
from planner.files import set_cell, write_atomic
from planner.scenario.numbers import Formula
from planner.scenario.schema import CHANGE_FIELDS
from planner.scenario.forms.tables import COLUMNS, ORDER, ReadResult, Table, from_tables, to_tables

IGNORED_SHEETS = {"about"}

#: Notes for columns that are not fields of the schema (the rest come from planner/schema.py).
NOTES = {
    ("scenario", "key"): "Setting: name, currency, period, plant_fixed_cost, description.",
    ("scenario", "value"): "Its value.",
    ("usage", "product"): "Product name, as in sheet products.",
    ("usage", "resource"): "Resource name, as in sheet resources.",
    ("usage", "amount"): "Amount of the resource used per unit made. Or give the sheet wide: "
                         "a 'product' column and one column per resource.",
    ("option_amounts", "option"): "Option name, as in sheet options.",
    ("option_amounts", "resource"): "Resource the option adds to.",
    ("option_amounts", "adds"): "Amount added if the option is taken (all or nothing; needs 'cost').",
    ("option_amounts", "adds_up_to"): "Largest amount that may be added (usable in part; needs 'cost_per_unit').",
    ("demand", "product"): "Product whose line is given here instead of price_intercept / price_slope.",
    ("demand", "history"): "Sales-history CSV (product, price, volume[, period]), relative to this workbook.",
    ("demand", "history_product"): "The product's name in the history file, if different.",
    ("demand", "regress"): "volume-on-price (default) or price-on-volume.",
    ("demand", "reference_price"): "A price you know (currency/unit) ...",
    ("demand", "reference_volume"): "... the volume sold at it (units per period) ...",
    ("demand", "elasticity"): "... and the price elasticity of demand there, (dQ/dP)·(P/Q), negative.",
    ("demand", "price_1"): "Two observed points: first price ...",
    ("demand", "volume_1"): "... and the volume sold at it;",
    ("demand", "price_2"): "second price ...",
    ("demand", "volume_2"): "... and the volume sold at it.",
    ("demand_fit", "product"): "Product whose fitted line this is (written by fit-demand).",
    ("correlations", "product_1"): "First product.",
    ("correlations", "product_2"): "Second product.",
    ("correlations", "rho"): "Correlation of their demand, -1 to 1.",
    ("variant_changes", "variant"): "Variant name, as in sheet variants; one row per change, applied in order.",
}
_CLASSES = {"scenario": "Scenario", "products": "Product", "resources": "Resource", "options": "Option",
            "demand_fit": "DemandFit", "uncertainty": "Uncertainty", "variants": "Variant",
            "variant_changes": "Change"}

ABOUT = [
    "Scenario workbook for planner. Fill in the sheets, then: planner plan THIS.xlsx",
    "",
    "Row 1 of each sheet is the heading; one entry per row; no empty rows in the middle.",
    "Hover over a heading for what the column means (units and signs).",
    "products: one row per product. Give its price-demand line as price_intercept and price_slope",
    "  (price = price_intercept - price_slope x volume), or leave both empty and fill sheet demand:",
    "  two observed (price, volume) points, a reference price and volume with the elasticity there,",
    "  or a sales-history CSV to fit (see: planner fit-demand HISTORY.csv).",
    "usage: long (product, resource, amount) or wide (product, then one column per resource).",
    "options: ways to buy capacity; their amounts in option_amounts.",
    "variants: named what-ifs (planner compare); each change is a row of variant_changes: a product, resource,",
    "  option or plant (true), a field, and one of set, add or scale.",
    "Sheets you do not need may stay empty or be deleted (products is required).",
    "Labour rules on shifts and overtime differ by jurisdiction; local law and company agreements govern.",
]


@lru_cache(maxsize=1)
def field_notes() -> dict[tuple[str, str], str]:
    """The schema fields' docstrings (pydantic's field descriptions), by (table, column)."""
    from planner.scenario import schema

    out = {}
    for table, cls in _CLASSES.items():
        for name, info in getattr(schema, cls).model_fields.items():
            if info.description:
                out[(table, name)] = " ".join(info.description.split())
    out.update(NOTES)
    return out


#: Sheets of the workbook ``planner report`` writes (planner.output.report.workbook) with the inputs as read:
#: no scenario workbook has them, so any one marks a plan, not a scenario.
REPORT_SHEETS = {"Input products", "Input usage", "Input resources", "Input options", "Input scenario"}


def _is_report(wb) -> bool:
    """Whether a workbook is a plan written by ``planner report`` (an input sheet, or its Summary sheet's heading)."""
    names = {ws.title.strip(): ws for ws in wb.worksheets}
    if REPORT_SHEETS & set(names):
        return True
    summary = names.get("Summary")
    head = [c.value for c in next(summary.iter_rows(max_row=1), ())] if summary is not None else []
    return head[:3] == ["item", "value", "unit / meaning"]


def _formulas_without_values(path: Path) -> dict[str, dict[tuple[int, int], str]]:
    """Formula cells of each sheet, by (row, column), read only when the file holds formulas at all."""
    import zipfile

    try:
        with zipfile.ZipFile(path) as z:
            sheets = [n for n in z.namelist() if n.startswith("xl/worksheets/") and n.endswith(".xml")]
            if not any(re.search(rb"<f[ >]", z.read(n)) for n in sheets):
                return {}
    except (OSError, zipfile.BadZipFile, KeyError):
        return {}
    from openpyxl import load_workbook

    wb = load_workbook(path, read_only=True, data_only=False)
    out: dict[str, dict[tuple[int, int], str]] = {}
    for ws in wb.worksheets:
        cells = {}
        for r, row in enumerate(ws.iter_rows(values_only=True), start=1):
            for c, v in enumerate(row, start=1):
                if isinstance(v, str) and v.startswith("="):
                    cells[(r, c)] = v
        if cells:
            out[ws.title] = cells
    wb.close()
    return out


def read_xlsx(path: Path) -> ReadResult:
    """Read a scenario workbook into the raw dict, with every cell's place remembered.

    A formula cell gives its saved value; one saved without a value (a file
    written by a program and never opened) is reported as such.  A workbook
    written by ``planner report`` is refused as a whole: it holds a plan.
    """
    from openpyxl import load_workbook

    try:
        wb = load_workbook(path, data_only=True)
    except Exception as e:  # openpyxl raises many kinds for a damaged or foreign file
        raise ScenarioError([Problem(str(path), f"cannot be read as an .xlsx workbook ({type(e).__name__}: {e})",
                                     "save it from the spreadsheet program as 'Excel Workbook (.xlsx)'")]) from None
    if _is_report(wb):
        raise ScenarioError([Problem(str(path), "this is a report workbook written by planner report: it holds a "
                                     "plan and the inputs as read, not a scenario",
                                     "use the scenario file it came from, named on its Summary sheet, or "
                                     "`planner convert` that file to a workbook")])
    formulas = None
    tables: dict[str, Table] = {}
    for ws in wb.worksheets:
        name = ws.title.strip()
        if name.lower() in IGNORED_SHEETS:
            continue
        rows = [list(r) for r in ws.iter_rows(values_only=True)]
        if any(v is None for r in rows for v in r):
            if formulas is None:
                formulas = _formulas_without_values(path)
            for (r, c), f in formulas.get(ws.title, {}).items():
                if r <= len(rows) and c <= len(rows[r - 1]) and rows[r - 1][c - 1] is None:
                    rows[r - 1][c - 1] = Formula(f)
        header = rows[0] if rows else []
        tables[name] = Table(name, list(header), [(i, r) for i, r in enumerate(rows[1:], start=2)])
    return from_tables(tables, lambda t: f"sheet {t}", path.stem, path.parent)


def _put(ws, row: int, col: int, value: Any) -> None:
    cell = set_cell(ws, row, col, value)  # text is always text, never a formula (planner.files)
    if isinstance(value, float) and math.isfinite(value) and float(f"{value:.16g}") != value:
        # openpyxl writes numbers with 16 significant digits; this one needs 17 to come back exactly.
        # The cell stays numeric (type 'n'); only the text written for it is the exact repr.
        cell._value = repr(value)


def _sheet(wb, name: str, header: list[str], rows: list[list[Any]], notes: bool) -> None:
    from openpyxl.comments import Comment
    from openpyxl.styles import Font

    ws = wb.create_sheet(name)
    docs = field_notes() if notes else {}
    for j, h in enumerate(header, start=1):
        _put(ws, 1, j, h)
        ws.cell(row=1, column=j).font = Font(bold=True)
        doc = docs.get((name, h.removesuffix(":json")))
        if doc:
            ws.cell(row=1, column=j).comment = Comment(doc, "planner", width=300, height=110)
        ws.column_dimensions[ws.cell(row=1, column=j).column_letter].width = max(12, min(40, len(h) + 4))
    for i, r in enumerate(rows, start=2):
        for j, v in enumerate(r, start=1):
            if v is not None:
                _put(ws, i, j, v)
    ws.freeze_panes = "A2"


def _save(wb, path: Path) -> Path:
    return write_atomic(path, lambda tmp: wb.save(str(tmp)))


def write_xlsx(raw: dict[str, Any], path: str | Path, wide_usage: bool = False, notes: bool = True) -> Path:
    """Write a raw scenario dict as a workbook (lossless: :func:`read_xlsx` gives the same dict back)."""
    from openpyxl import Workbook

    wb = Workbook()
    wb.remove(wb.active)
    tables = to_tables(raw, wide_usage=wide_usage)
    for name in ORDER + [t for t in tables if t not in ORDER]:
        if name in tables:
            _sheet(wb, name, *tables[name], notes=notes)
    return _save(wb, Path(path))


def write_template(path: str | Path) -> Path:
    """Write an empty, annotated workbook: every table with its heading and a note on each column."""
    from openpyxl import Workbook

    wb = Workbook()
    ws = wb.active
    ws.title = "about"
    for i, line in enumerate(ABOUT, start=1):
        ws.cell(row=i, column=1, value=line)
    ws.column_dimensions["A"].width = 100
    _sheet(wb, "scenario", ["key", "value"], [["name", None], ["currency", "$"], ["period", "quarter"],
                                              ["plant_fixed_cost", 0]], notes=True)
    for name in ORDER[1:]:
        _sheet(wb, name, list(COLUMNS[name]), [], notes=True)
    _choices(wb, {("products", "must_run"): ["TRUE", "FALSE"],
                  ("resources", "kind"): ["work_centre", "material", "other"],
                  ("demand", "regress"): ["volume-on-price", "price-on-volume"],
                  ("uncertainty", "field"): ["price_intercept", "price_slope", "unit_cost", "capacity"],
                  ("uncertainty", "distribution"): ["normal", "triangular", "uniform", "fitted"],
                  ("variant_changes", "plant"): ["TRUE"],
                  ("variant_changes", "field"): [f for fields in CHANGE_FIELDS.values() for f in fields]})
    return _save(wb, Path(path))


def _choices(wb, lists: dict[tuple[str, str], list[str]], rows: int = 5000) -> None:
    """Drop-down lists for columns with a fixed set of values (the validator still checks them)."""
    from openpyxl.worksheet.datavalidation import DataValidation

    for (sheet, col), values in lists.items():
        ws = wb[sheet]
        letter = ws.cell(row=1, column=COLUMNS[sheet].index(col) + 1).column_letter
        dv = DataValidation(type="list", formula1='"' + ",".join(values) + '"', allow_blank=True)
        ws.add_data_validation(dv)
        dv.add(f"{letter}2:{letter}{rows}")
