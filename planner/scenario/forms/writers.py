"""Writing a scenario in any supported form, chosen by the target path.

``.yaml`` / ``.yml`` → YAML; ``.xlsx`` → workbook; anything else (a path with
no suffix, or an existing folder) → a folder of CSV files.  Writers take the
raw dict (as read, before demand forms are turned into lines), so a
conversion keeps every key: the demand form, fitted uncertainty, options,
uncertainty and correlation lists, and any section it does not know.
"""

from __future__ import annotations

import copy
import os
from pathlib import Path
from typing import Any

import yaml

from planner.files import write_text_atomic


def form_of(path: str | Path) -> str:
    """'yaml', 'xlsx' or 'csv' (a folder) for a target path."""
    p = Path(path)
    suffix = p.suffix.lower()
    if suffix in (".yaml", ".yml"):
        return "yaml"
    if suffix == ".xlsx":
        return "xlsx"
    if p.is_dir() or suffix == "" or str(path).endswith(("/", os.sep)):
        return "csv"
    raise ValueError(f"unsupported target form '{suffix}': use .yaml, .xlsx or a folder name (CSV files)")


def base_dir_of(path: str | Path) -> Path:
    """The folder relative history paths are read from: the one holding the file (or CSV folder)."""
    return Path(path).absolute().parent


def rebase_history(raw: dict[str, Any], old_base: Path, new_base: Path) -> dict[str, Any]:
    """A copy of raw whose relative ``demand.history`` paths still name the same files from new_base."""
    out = copy.deepcopy(raw)
    for p in out.get("products") or []:
        spec = p.get("demand") if isinstance(p, dict) else None
        if isinstance(spec, dict) and isinstance(spec.get("history"), str) and not Path(spec["history"]).is_absolute():
            target = (old_base / spec["history"]).resolve()
            try:
                spec["history"] = Path(os.path.relpath(target, new_base.resolve())).as_posix()
            except ValueError:  # another drive (Windows): no relative path exists
                spec["history"] = str(target)
    return out


def write_yaml(raw: dict[str, Any], path: str | Path) -> Path:
    """Write raw as YAML (floats as their shortest exact text)."""
    text = yaml.safe_dump(raw, sort_keys=False, allow_unicode=True, default_flow_style=None, width=110)
    return write_text_atomic(path, text)


def write_scenario(raw: dict[str, Any], path: str | Path, wide_usage: bool = False) -> Path:
    """Write raw in the form the path asks for."""
    form = form_of(path)
    if form == "yaml":
        return write_yaml(raw, path)
    if form == "xlsx":
        from planner.scenario.forms.xlsx import write_xlsx

        return write_xlsx(raw, path, wide_usage=wide_usage)
    from planner.scenario.forms.csvdir import write_csv_folder

    return write_csv_folder(raw, path, wide_usage=wide_usage)
