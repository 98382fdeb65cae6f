"""Number formatting shared by the charts, the HTML page and the workbook (thousands separators, currency)."""

from __future__ import annotations

import re
from typing import Any

from planner.output.text import money

__all__ = ["changes_text", "money", "num", "option_share", "option_slate", "pct", "per_unit", "slug"]


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
    """A file-name-safe form of one name: 'oak bookcase' -> 'oak-bookcase' (:func:`planner.files.file_stem`).
    Several names that become files together go through :func:`planner.files.file_stems`, which keeps
    them apart."""
    from planner.files import file_stem

    return file_stem(name)


#: Words ending in 's' that are singular ('per lens' reads right as it is).
_SINGULAR_S = frozenset({"lens", "series", "species", "news", "means", "gas", "bus", "chassis", "corps",
                         "physics", "logistics", "kudos"})
#: Plurals with no singular of their own ('per unit (scissors)').
_PLURAL_ONLY = frozenset({"glasses", "scissors", "trousers", "pliers", "tongs", "shears", "goods", "jeans"})
#: Abbreviated plurals.
_SHORT = {"pcs": "pc", "hrs": "hr", "mins": "min", "secs": "sec", "lbs": "lb", "yds": "yd", "kgs": "kg",
          "qtys": "qty", "ctns": "ctn", "pkgs": "pkg"}


def _singular(word: str) -> str | None:
    """The singular of a regular English plural (letters only), None if it is not one."""
    low = word.lower()
    if low in _SHORT:
        one = _SHORT[low]
    elif (not re.fullmatch(r"[a-z]{4,}", low) or low in _SINGULAR_S or low in _PLURAL_ONLY
          or not low.endswith("s") or low.endswith(("ss", "us", "is", "ous"))):
        return None
    elif low.endswith("ies") and len(low) > 4:
        one = low[:-3] + "y"
    elif low.endswith(("ches", "shes", "xes", "zes", "sses")):
        one = low[:-2]
    else:
        one = low[:-1]
    return word[: len(one)] if word[: len(one)].lower() == one else one


def per_unit(unit: str) -> str:
    """What follows 'per' for a unit: the singular of a plain English plural ('pieces' -> 'piece',
    'boxes' -> 'box', 'sheets of board' -> 'sheet of board', 'pcs' -> 'pc'); a unit that is not a
    plural as it is ('h', 'kg', 'm³', 'lens'); any other plural as 'unit (glasses)'.  '' gives 'unit'."""
    unit = (unit or "").strip()
    if not unit:
        return "unit"
    first, _, rest = unit.partition(" ")
    one = _singular(first)
    if one is not None and (not rest or rest.startswith("of ")):
        return f"{one} {rest}".rstrip()
    low = first.lower()
    if one is not None or low in _PLURAL_ONLY:
        return f"unit ({unit})"
    return unit


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
