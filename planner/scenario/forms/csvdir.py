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


#: Separators a spreadsheet program may have used instead of the comma, by name.
SEPARATORS = {";": "semicolon", "\t": "tab"}


def separator_problem(first_line: str) -> str | None:
    """'semicolon' or 'tab' if a CSV file's first row shows it was saved with that separator, else None.

    The heading row names the columns; read comma-separated it is then one
    cell holding the separator (column names never contain one).
    """
    cells = next(csv.reader([first_line]), [])
    if len(cells) != 1:
        return None
    for sep, name in SEPARATORS.items():
        if sep in cells[0] and len(cells[0].split(sep)) > 1:
            return name
    return None


def separator_message(name: str) -> tuple[str, str]:
    """(message, fix) for a CSV file saved with another separator."""
    return (f"this file looks {name}-separated",
            "save it comma-separated: in the spreadsheet program, save as CSV with the comma as separator")


def _text(path: Path) -> str:
    try:
        return path.read_text(encoding="utf-8-sig")
    except (OSError, UnicodeDecodeError) as e:
        raise ScenarioError([Problem(str(path), f"cannot be read ({e})", "save it as UTF-8 CSV")]) from None


def _read_table(path: Path, text: str | None = None) -> Table:
    text = _text(path) if text is None else text
    rows = list(csv.reader(io.StringIO(text, newline="")))
    header = rows[0] if rows else []
    return Table(path.stem, list(header), [(i, r) for i, r in enumerate(rows[1:], start=2)])


def _history_files(folder: Path, files: list[Path]) -> set[Path]:
    """History CSVs the demand table names (they are data for the fit, not tables)."""
    demand = next((p for p in files if p.stem.strip().lower() == "demand"), None)
    if demand is None:
        return set()
    t = _read_table(demand)
    header = [str(h).strip() for h in t.header]
    if "history" not in header:
        return set()
    j = header.index("history")
    return {(folder.parent / r[j].strip()).resolve() for _, r in t.rows if j < len(r) and r[j].strip()}


def read_csv_folder(folder: Path) -> ReadResult:
    """Read a folder of CSV tables into the raw dict, with every cell's place remembered.

    Files are tables by their names in any case (``Products.csv``, ``products.CSV``); two
    files naming one table, or a file saved with semicolons or tabs, are refused first.
    """
    files = sorted(p for p in folder.iterdir() if p.suffix.lower() == ".csv" and p.is_file())
    groups: dict[str, list[str]] = {}
    for p in files:
        groups.setdefault(p.stem.strip().casefold(), []).append(p.name)
    same = [g for g in groups.values() if len(g) > 1]
    if same:
        raise ScenarioError([Problem(" and ".join(f"file {n}" for n in names),
                                     "name the same table (file names are compared ignoring case)",
                                     "keep one: merge the rows into one file and delete the other")
                             for names in same], str(folder))
    skip = _history_files(folder, files)
    texts = {p: _text(p) for p in files if p.resolve() not in skip}
    odd = [(p, kind) for p, text in texts.items() if (kind := separator_problem(text.split("\n", 1)[0]))]
    if odd:
        raise ScenarioError([Problem(f"file {p.name}", *separator_message(kind)) for p, kind in odd], str(folder))
    names = {p.stem.strip(): p.name for p in texts}
    tables = {p.stem.strip(): _read_table(p, text) for p, text in texts.items()}
    return from_tables(tables, lambda t: f"file {names.get(t, t + '.csv')}", folder.name, folder.parent)


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
