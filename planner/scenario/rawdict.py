"""Reading a raw scenario dict (as a reader produced it, before validation) without trusting its shape."""

from __future__ import annotations

from typing import Any

from planner.scenario.names import bad_character
from planner.scenario.numbers import number_or_problem


def entries(raw: dict[str, Any], section: str) -> list[dict[str, Any]]:
    """The entries of a list section that are mappings."""
    items = raw.get(section) or []
    return [x for x in items if isinstance(x, dict)] if isinstance(items, list) else []


def indexed(raw: dict[str, Any], section: str) -> list[tuple[int, dict[str, Any]]]:
    """(position in the file's list, entry) for each entry that is a mapping."""
    items = raw.get(section) or []
    return [(i, x) for i, x in enumerate(items) if isinstance(x, dict)] if isinstance(items, list) else []


def clean_name(x: Any) -> str | None:
    """A name as compared (surrounding spaces removed), or None if it is not text or holds a refused character."""
    if not isinstance(x, str) or bad_character(x) is not None:
        return None
    return x.strip()


def number(x: Any) -> float | None:
    """The value of a raw number by the number rule, or None if the rule refuses it (reported elsewhere)."""
    return number_or_problem(x)[0] if x is not None else None
