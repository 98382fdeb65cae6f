"""Number formatting shared by the charts, the HTML page and the workbook (thousands separators, currency)."""

from __future__ import annotations

import re

from planner.output.terminal import money

__all__ = ["money", "num", "pct", "slug"]


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
