"""Terminal text shared by every command: money and quantity formats, the light table style."""

from __future__ import annotations

from collections.abc import Callable

from rich import box
from rich.console import Console
from rich.measure import Measurement
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


#: Widest a name column is made (names wrap at spaces onto more lines) before any column is left out.
NAME_WRAP = 22


def add_column(t: Table, col: str, left: bool = False, name: bool = False, name_width: int | None = None) -> None:
    """A column of a fitted table: numbers right-aligned and never wrapped; a name column wraps (at most
    ``name_width`` wide when given)."""
    t.add_column(col, justify="left" if left else "right", no_wrap=not name, overflow="fold",
                 min_width=min(12, len(col)) if name else None, max_width=name_width if name else None)


def fit_table(build: Callable[[set[str], int | None], Table], console: Console | None,
              optional: list[str]) -> Table:
    """The first table from ``build(drop, name_width)`` that fits the console: names whole; then names
    wrapped to :data:`NAME_WRAP`; then, names wrapped, leaving out ``optional`` columns in order.  A table
    that leaves columns out says which, in a line under it."""
    def fits(t: Table) -> bool:
        return Measurement.get(console, console.options.update_width(10_000), t).maximum <= console.width

    shown = build(set(), None)
    if console is None or fits(shown):
        return shown
    drop: list[str] = []
    shown = build(set(), NAME_WRAP)
    for col in optional:
        if fits(shown):
            break
        drop.append(col)
        shown = build(set(drop), NAME_WRAP)
    if drop:
        shown.caption = (f"columns left out at this width: {', '.join(drop)}; widen the terminal or use --json")
        shown.caption_justify = "left"
    return shown


# --- text that is safe to show ------------------------------------------------------------------------------------

#: Unicode categories never shown raw: control characters (terminal escapes), format characters
#: (bidirectional overrides, zero-width), surrogates, private-use and unassigned code points, line and
#: paragraph separators.
HIDDEN_CATEGORIES = frozenset({"Cc", "Cf", "Cs", "Co", "Cn", "Zl", "Zp"})


def visible(text: str) -> str:
    """``text`` with every character that would act rather than show (a terminal escape, a bidirectional
    override, a zero-width space, a newline) written as ``\\xNN`` / ``\\uNNNN`` / ``\\UNNNNNNNN``;
    other text unchanged ('oak\\x07' shows as 'oak\\\\x07')."""
    import unicodedata

    if text.isprintable() and text.isascii():
        return text
    out, changed = [], False
    for ch in text:
        if unicodedata.category(ch) in HIDDEN_CATEGORIES:
            c = ord(ch)
            out.append(f"\\x{c:02x}" if c < 0x100 else f"\\u{c:04x}" if c < 0x10000 else f"\\U{c:08x}")
            changed = True
        else:
            out.append(ch)
    return "".join(out) if changed else text


def display_copy(obj):
    """A copy of ``obj`` (Plan, Scenario, dicts, lists, dataclasses, pydantic models) with every text in
    it, keys included, passed through :func:`visible`; numbers and flags untouched, and the object itself
    returned where nothing changes.  Reports and the terminal show this copy, so no name can reach a
    page, a chart, a worksheet or a terminal raw."""
    import dataclasses

    if isinstance(obj, str):
        return visible(obj)
    if isinstance(obj, dict):
        new = {display_copy(k): display_copy(v) for k, v in obj.items()}
        same = len(new) == len(obj) and all(a is b for a, b in zip(new, obj)) and \
            all(new[k] is obj[k] for k in obj if k in new)
        return obj if same else new
    if isinstance(obj, (list, tuple)):
        new = [display_copy(v) for v in obj]
        if all(a is b for a, b in zip(new, obj)):
            return obj
        return type(obj)(new) if isinstance(obj, list) or type(obj) is tuple else new
    if dataclasses.is_dataclass(obj) and not isinstance(obj, type):
        changes = {}
        for f in dataclasses.fields(obj):
            if not f.init:
                continue
            v = getattr(obj, f.name)
            nv = display_copy(v)
            if nv is not v:
                changes[f.name] = nv
        return dataclasses.replace(obj, **changes) if changes else obj
    if hasattr(obj, "model_copy") and hasattr(type(obj), "model_fields"):  # a pydantic model
        changes = {}
        for name in type(obj).model_fields:
            v = getattr(obj, name)
            nv = display_copy(v)
            if nv is not v:
                changes[name] = nv
        return obj.model_copy(update=changes) if changes else obj
    return obj
