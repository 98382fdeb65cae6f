"""Number formatting shared by the charts, the HTML page and the workbook (thousands separators, currency)."""

from __future__ import annotations

import re
from typing import Any

from planner.output.text import money

__all__ = ["changes_text", "money", "num", "option_share", "option_slate", "pct", "slug"]


def num(x: float | None, decimals: int | None = None) -> str:
    """A quantity with thousands separators: whole numbers from 100 up, else up to two decimals; '—' if None."""
    if x is None:
        return "—"
    if decimals is None:
        decimals = 0 if abs(x) >= 100 else (1 if abs(x) >= 10 else 2)
    text = f"{x:,.{decimals}f}"
    if decimals and "." in text:
        text = text.rstrip("0").rstrip(".")
    return "0" if text in ("-0", "") else text


def pct(x: float, decimals: int = 0) -> str:
    """A fraction 0..1 as a percentage: 0.843 -> '84%'."""
    return f"{100 * x:.{decimals}f}%"


def slug(name: str) -> str:
    """A file-name-safe form of a name: 'oak bookcase' -> 'oak-bookcase'."""
    s = re.sub(r"[^A-Za-z0-9]+", "-", name).strip("-").lower()
    return s or "item"


def option_slate(option: dict[str, Any]) -> Any:
    """An option's slate change: the text where one is given ('slate_change'), else 'slate_changes'."""
    return option.get("slate_change") or option.get("slate_changes")


def option_share(option: dict[str, Any]) -> float | None:
    """Share (0..1) of a part-usable option's amount used at its best, None for all-or-nothing ones."""
    if option.get("kind") == "part" and option.get("used") is not None:
        return float(option["used"])
    return None


def changes_text(v: Any) -> str:
    """A slate change given as text, a flag, a list or a mapping, as one line of text ('' for none)."""
    if v is None or v is False or v == "" or v == []:
        return ""
    if v is True:
        return "the slate of running products changes"
    if isinstance(v, (list, tuple)):
        return "; ".join(str(x) for x in v)
    if isinstance(v, dict):
        return "; ".join(f"{k}: {', '.join(map(str, x)) if isinstance(x, (list, tuple)) else x}" for k, x in v.items())
    return str(v)
