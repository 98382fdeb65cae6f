"""Terminal text shared by every command: money and quantity formats, the light table style."""

from __future__ import annotations

from rich import box
from rich.table import Table


def money(x: float, currency: str = "$", decimals: int = 0) -> str:
    """'$12,345' style, with a minus sign before the currency for losses; a currency ending in a letter or
    digit ('CHF', '$000') is parted from the amount by a space: 'CHF 12,345'."""
    sign = "-" if x < 0 and round(abs(x), decimals) != 0 else ""
    sep = " " if currency and currency[-1].isalnum() else ""
    return f"{sign}{currency}{sep}{abs(x):,.{decimals}f}"


def qty(x: float | None, decimals: int = 1) -> str:
    """Thousands separators; '—' for a missing value."""
    if x is None:
        return "—"
    if abs(x) >= 1000 or decimals == 0:
        return f"{x:,.0f}"
    return f"{x:,.{decimals}f}"


def price(x: float, currency: str) -> str:
    """A unit price with cents: '€506.42'."""
    return money(x, currency, 2)


def table(title: str) -> Table:
    """A light terminal table: header rule only, columns parted by two spaces (so eight money columns fit in 80)."""
    # No vertical rules: columns are parted by two spaces, so eight money columns fit in 80.
    return Table(title=title, title_justify="left", show_edge=False, pad_edge=False, header_style="bold",
                 box=box.SIMPLE_HEAD, padding=(0, 1), collapse_padding=True)
