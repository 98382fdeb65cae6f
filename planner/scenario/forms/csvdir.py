"""Scenario folders: one CSV file per table of :mod:`planner.io.tables` (UTF-8, comma-separated).

``products.csv`` is required; the folder's name is the scenario's default
name.  Relative history paths are relative to the folder that holds this
folder (as for a file).  A history file the demand table names may sit inside
the folder (``history: myfolder/sales.csv``): it is not read as a table.
"""

from __future__ import annotations

import csv
import io
from pathlib import Path
from typing import Any

from planner.errors import Problem, ScenarioError
from planner.files import write_text_atomic
from planner.scenario.forms.tables import ORDER, ReadResult, Table, cell_text, from_tables, to_tables


def _read_table(path: Path) -> Table:
    try:
        text = path.read_text(encoding="utf-8-sig")
    except (OSError, UnicodeDecodeError) as e:
        raise ScenarioError([Problem(str(path), f"cannot be read ({e})", "save it as UTF-8 CSV")]) from None
    rows = list(csv.reader(io.StringIO(text, newline="")))
    header = rows[0] if rows else []
    return Table(path.stem, list(header), [(i, r) for i, r in enumerate(rows[1:], start=2)])


def _history_files(folder: Path) -> set[Path]:
    """History CSVs the demand table names (they are data for the fit, not tables)."""
    demand = folder / "demand.csv"
    if not demand.exists():
        return set()
    t = _read_table(demand)
    header = [str(h).strip() for h in t.header]
    if "history" not in header:
        return set()
    j = header.index("history")
    return {(folder.parent / r[j].strip()).resolve() for _, r in t.rows if j < len(r) and r[j].strip()}


def read_csv_folder(folder: Path) -> ReadResult:
    """Read a folder of CSV tables into the raw dict, with every cell's place remembered."""
    skip = _history_files(folder)
    tables = {p.stem.strip(): _read_table(p) for p in sorted(folder.glob("*.csv")) if p.resolve() not in skip}
    return from_tables(tables, lambda t: f"file {t}.csv", folder.name, folder.parent)


def _csv_text(header: list[str], rows: list[list[Any]]) -> str:
    buf = io.StringIO()
    w = csv.writer(buf, lineterminator="\n")
    w.writerow(header)
    w.writerows([[cell_text(v) for v in r] for r in rows])
    return buf.getvalue()


def write_csv_folder(raw: dict[str, Any], folder: str | Path, wide_usage: bool = False) -> Path:
    """Write a raw scenario dict as a folder of CSV files (each written atomically)."""
    folder = Path(folder)
    folder.mkdir(parents=True, exist_ok=True)
    tables = to_tables(raw, wide_usage=wide_usage)
    for name in ORDER + [t for t in tables if t not in ORDER]:
        if name in tables:
            write_text_atomic(folder / f"{name}.csv", _csv_text(*tables[name]))
    return folder
