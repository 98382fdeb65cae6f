"""Reading scenario files into validated :class:`Scenario` objects.

YAML is read with a safe loader only (the C one where PyYAML has it).  Other
forms (spreadsheets, CSV folders) register a reader in ``READERS`` that turns
the file into the same plain dict, so every form meets the same validator.
"""

from __future__ import annotations

from pathlib import Path
from typing import Any, Callable

import yaml

from .errors import Problem, ScenarioError
from .schema import Scenario
from .validate import validate_scenario

#: Largest scenario file read, in bytes (a 10,000-product catalogue is ~15 MB).
MAX_FILE_BYTES = 200 * 1024 * 1024

_Loader = getattr(yaml, "CSafeLoader", yaml.SafeLoader)


def read_yaml(path: Path) -> Any:
    """The raw content of a YAML scenario file (safe loader; errors name the line)."""
    try:
        text = path.read_bytes()
    except OSError as e:
        raise ScenarioError([Problem(str(path), f"cannot be read: {e.strerror or e}")]) from None
    try:
        return yaml.load(text, Loader=_Loader)  # noqa: S506 - a safe loader
    except yaml.YAMLError as e:
        mark = getattr(e, "problem_mark", None)
        where = f"{path}, line {mark.line + 1}, column {mark.column + 1}" if mark else str(path)
        what = getattr(e, "problem", None) or str(e)
        raise ScenarioError([Problem(where, f"is not valid YAML: {what}", "check indentation and colons")]) from None


#: Readers by file suffix ("/" for a folder): each returns the raw scenario dict or a ReadResult.
READERS: dict[str, Callable[[Path], Any]] = {".yaml": read_yaml, ".yml": read_yaml}


def read_source(path: str | Path) -> Any:
    """What the path's reader returns: the raw dict, or a ReadResult (raw, locate, problems, base_dir)."""
    p = Path(path)
    if not p.exists():
        raise ScenarioError([Problem(str(p), "no such file or folder", "check the path")])
    if p.is_file() and p.stat().st_size > MAX_FILE_BYTES:
        raise ScenarioError([Problem(str(p), f"is larger than {MAX_FILE_BYTES // 2**20} MiB", "split the scenario")])
    key = "/" if p.is_dir() else p.suffix.lower()
    reader = READERS.get(key)
    if reader is None:
        forms = ", ".join(k for k in sorted(READERS) if k != "/")
        raise ScenarioError([Problem(str(p), f"unsupported scenario form '{key}'", f"use one of: {forms}")])
    return reader(p)


def read_raw(path: str | Path) -> Any:
    """The raw scenario dict from any supported form, without validation."""
    got = read_source(path)
    return got.raw if isinstance(got, ReadResult) else got


def load_scenario(path: str | Path) -> tuple[Scenario, list[str]]:
    """Read and validate a scenario file: (scenario, warnings); ScenarioError lists all problems."""
    got = read_source(path)
    if isinstance(got, ReadResult):
        return validate_scenario(got.raw, source=str(path), locate=got.locate, base_dir=got.base_dir,
                                 found=got.problems)
    return validate_scenario(got, source=str(path), base_dir=Path(path).parent)


# Spreadsheet forms (planner.io): a workbook, or a folder of CSV tables.
from .io.csvdir import read_csv_folder  # noqa: E402
from .io.tables import ReadResult  # noqa: E402
from .io.xlsx import read_xlsx  # noqa: E402

READERS.update({".xlsx": read_xlsx, "/": read_csv_folder})
