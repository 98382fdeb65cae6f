"""Schema errors (pydantic's) as problems a person can act on: "location: message (fix)".

Locations name entries by their name where it is usable (``products[oak
shelf].unit_cost``), else by position (``products[3]``); text where a number
belongs is explained with the units stated for that amount
(:mod:`planner.scenario.units`); numbers spelled against the number rule get
the decimal to write (:mod:`planner.scenario.numbers`).
"""

from __future__ import annotations

import datetime
from typing import Any

from pydantic import ValidationError

from planner.errors import Problem
from planner.scenario.names import did_you_mean, shown
from planner.scenario.numbers import SIZE_FIXES, Unusable
from planner.scenario.rawdict import clean_name, entries
from planner.scenario.schema import (PER_PERIOD_TAGS, Change, Correlation, Option, Product, ProductGroup, Resource,
                                     Scenario, Uncertainty, Variant)
from planner.scenario.units import amount_hint

FIELDS = {
    "scenario": set(Scenario.model_fields),
    "products": set(Product.model_fields) | {"demand"},
    "resources": set(Resource.model_fields),
    "options": set(Option.model_fields),
    "product_groups": set(ProductGroup.model_fields),
    "uncertainty": set(Uncertainty.model_fields),
    "correlations": set(Correlation.model_fields),
    "variants": set(Variant.model_fields),
    "changes": set(Change.model_fields),
}


#: Longest shown form of a wrong value in a message (characters).
_GOT_CHARS = 60


def show(x: Any) -> str:
    """repr of a wrong value, cut short if long."""
    text = repr(x)
    return text if len(text) <= _GOT_CHARS else text[:_GOT_CHARS - 3] + "..."


def label(raw: dict[str, Any], section: str, index: int) -> str:
    """'products[doors]' if the entry has a usable name, else 'products[3]' (1-based)."""
    try:
        entry = raw[section][index]
        name = entry.get("name") if isinstance(entry, dict) else None
    except (KeyError, IndexError, TypeError):
        name = None
    name = clean_name(name) if section != "changes" else None  # changes have no names: by position
    return f"{section}[{name}]" if name else f"{section}[{index + 1}]"


def where_of(raw: dict[str, Any], loc: tuple[Any, ...]) -> str:
    parts: list[str] = []
    i = 0
    while i < len(loc):
        part = loc[i]
        if part in ("products", "resources", "options", "product_groups", "uncertainty", "correlations", "variants",
                    "changes") \
                and i + 1 < len(loc) and isinstance(loc[i + 1], int):
            parts.append(label(raw, str(part), loc[i + 1]))
            i += 2
            continue
        parts.append(shown(part) if isinstance(part, str) else str(part))
        i += 1
    return ".".join(parts).replace(".[", "[")


def _section_of(loc: tuple[Any, ...]) -> str:
    if len(loc) >= 5 and loc[0] == "variants" and loc[2] == "changes" and isinstance(loc[3], int):
        return "changes"
    if len(loc) == 3 and loc[0] == "changes" and isinstance(loc[1], int):
        return "changes"
    if len(loc) >= 3 and loc[0] in FIELDS and isinstance(loc[1], int):
        return str(loc[0])
    return "scenario"


#: Fixes for the schema's own value errors, by the start of their message.
_VALUE_FIXES = {"must be a number, not true/false": "write the amount in digits",
                "must be a whole number": "write it without decimals", **SIZE_FIXES}

_SECTION_HINT = {
    "products": "write each product as a list entry starting '- name: ...'",
    "resources": "write each resource as a list entry starting '- name: ...'",
    "options": "write each option as a list entry starting '- name: ...'",
    "product_groups": "write each group as a list entry starting '- name: ...'",
}


def _amount_context(raw: dict[str, Any], loc: tuple[Any, ...]) -> dict[str, str]:
    """For a number's location, the resource (and product) it is counted in, with their stated units."""
    def unit_of(section: str, name: Any) -> str:
        for e in entries(raw, section):
            if isinstance(name, str) and str(e.get("name", "")).strip() == name.strip():
                u = e.get("unit")
                return u.strip() if isinstance(u, str) else ""
        return ""

    out: dict[str, str] = {}
    if len(loc) >= 3 and isinstance(loc[1], int):
        listed = raw.get(loc[0]) if isinstance(raw.get(loc[0]), list) else []
        entry = listed[loc[1]] if loc[1] < len(listed) and isinstance(listed[loc[1]], dict) else {}
        name = entry.get("name")
        if loc[0] == "resources" and loc[2] == "capacity" and isinstance(name, str):
            out = {"resource": name.strip(), "resource_unit": unit_of("resources", name)}
        elif loc[0] == "products" and loc[2] == "usage" and len(loc) >= 4 and isinstance(loc[3], str):
            out = {"resource": loc[3], "resource_unit": unit_of("resources", loc[3])}
            if isinstance(name, str):
                out |= {"product": name.strip(), "product_unit": str(entry.get("unit") or "units")}
        elif loc[0] == "options" and loc[2] in ("adds", "adds_up_to") and len(loc) >= 4 and isinstance(loc[3], str):
            out = {"resource": loc[3], "resource_unit": unit_of("resources", loc[3])}
    return out


def _value_at(raw: Any, loc: tuple[Any, ...]) -> Any:
    for part in loc:
        try:
            raw = raw[part]
        except (KeyError, IndexError, TypeError):
            return None
    return raw


def pydantic_problems(raw: dict[str, Any], err: ValidationError) -> list[Problem]:
    problems = []
    skip: set[str] = set()
    for e in err.errors(include_url=False):
        loc = tuple(x for x in e["loc"] if x not in PER_PERIOD_TAGS)  # a per-period value's form is no place
        kind = e["type"]
        got = e.get("input")
        if kind == "unusable" or isinstance(got, Unusable):
            continue  # reported where it stands, with its line (validate.unusable_problems)
        if loc and loc[-1] == "[key]":  # a mapping key of the wrong type, e.g. usage: {1: 0.5}
            where = where_of(raw, loc[:-1])
            if isinstance(loc[-2], (int, float)) and _value_at(raw, loc[:-1]) is None:
                skip.add(where)  # {mill: 0,5} reads as {mill: 0, 5: null}: a decimal comma
                problems.append(Problem(where, f"'{loc[-2]}' has no amount: a decimal comma splits the number "
                                        "inside { }", "write decimals with a point, e.g. 0.5"))
            else:
                problems.append(Problem(where, f"names must be text (got {show(loc[-2])})", f"quote it: '{loc[-2]}'"))
            continue
        where = where_of(raw, loc)
        periods = raw.get("periods")
        if (len(loc) == 4 and loc[0] in ("products", "resources") and isinstance(loc[3], int)
                and isinstance(periods, list) and 0 <= loc[3] < len(periods) and isinstance(periods[loc[3]], str)):
            where = f"{where_of(raw, loc[:3])} in {periods[loc[3]]}"  # one number of a per-period list
        if where in skip:
            continue
        if kind == "extra_forbidden":
            key = str(loc[-1])
            allowed = FIELDS.get(_section_of(loc), set())
            if len(loc) >= 4 and loc[-2] in ("usage", "adds", "adds_up_to"):
                allowed = set()
            hint = did_you_mean(key, allowed)
            problems.append(Problem(where, "unknown key", hint or f"allowed keys: {', '.join(sorted(allowed))}"))
        elif kind == "number_rule":
            problems.append(Problem(where, str(e["ctx"]["message"]), str(e["ctx"]["fix"])))
        elif kind == "missing":
            problems.append(Problem(where, "is required but missing", "add it"))
        elif kind in ("greater_than_equal", "greater_than", "less_than_equal"):
            bound = {"greater_than_equal": ">= 0", "greater_than": "> 0"}.get(kind, f"<= {e.get('ctx', {}).get('le')}")
            if kind != "less_than_equal" and e.get("ctx", {}).get("ge", e.get("ctx", {}).get("gt", 0)) != 0:
                bound = f"{'>=' if kind == 'greater_than_equal' else '>'} {e['ctx'].get('ge', e['ctx'].get('gt'))}"
            fix = {">= 0": "give a value of 0 or more", "> 0": "give a value above 0, or leave the entry out"}
            problems.append(Problem(where, f"must be {bound} (got {show(got)})", fix.get(bound, "")))
        elif kind in ("float_parsing", "float_type") and isinstance(got, str):
            message, fix = amount_hint(got, **_amount_context(raw, loc))
            problems.append(Problem(where, f"{message} (got {show(got)})", fix))
        elif kind in ("float_parsing", "float_type", "bool_parsing", "bool_type", "string_type", "dict_type",
                      "list_type", "int_parsing", "int_type"):
            want = {"float": "a number", "bool": "true or false", "string": "text", "dict": "a mapping of name: amount",
                    "list": "a list", "int": "a whole number"}
            noun = next((v for k, v in want.items() if kind.startswith(k)), "another type")
            if got is None and len(loc) == 1 and str(loc[0]) in _SECTION_HINT:
                problems.append(Problem(where, "is empty", f"list the {loc[0]} under it, each starting '- name: ...'"))
            elif got is None:
                problems.append(Problem(where, f"is empty (must be {noun})", "give a value or remove the key"))
            elif kind == "list_type" and len(loc) == 1 and str(loc[0]) in _SECTION_HINT:
                problems.append(Problem(where, f"must be a list (got {show(got)})", _SECTION_HINT[str(loc[0])]))
            elif kind == "string_type" and isinstance(got, datetime.date):
                problems.append(Problem(where, f"must be text, but YAML reads {got.isoformat()} as a date",
                                        f"quote it: '{got.isoformat()}'"))
            elif kind == "string_type" and isinstance(got, (int, float)):
                shown = str(got).lower() if isinstance(got, bool) else got
                problems.append(Problem(where, f"must be text (got {show(got)})", f"quote it: '{shown}'"))
            elif kind.startswith("float") and isinstance(got, int) and not isinstance(got, bool):
                problems.append(Problem(where, f"is too large (got {show(got)})", _VALUE_FIXES["is too large"]))
            else:
                problems.append(Problem(where, f"must be {noun} (got {show(got)})",
                                        "write true or false" if noun.startswith("true") else ""))
        elif kind in ("too_short", "string_too_short"):
            problems.append(Problem(where, "must not be empty", "list at least one entry" if kind == "too_short"
                                    else "give a name"))
        elif kind == "value_error":
            msg = str(e.get("ctx", {}).get("error", e["msg"]))
            fix = next((f for start, f in _VALUE_FIXES.items() if msg.startswith(start)), "")
            problems.append(Problem(where, f"{msg} (got {show(got)})", fix))
        elif kind == "invalid_key":
            problems.append(Problem(where_of(raw, loc[:-1]) if len(loc) > 1 else "",
                                    f"keys must be text (got {show(loc[-1] if loc else got)})",
                                    "quote the key, or remove it"))
        elif kind == "model_type":
            problems.append(Problem(where, f"must be a mapping of keys (got {show(got)})",
                                    "write 'key: value' lines under it"))
        elif kind == "literal_error":
            allowed = str(e.get("ctx", {}).get("expected", ""))
            hint = did_you_mean(str(got), [a.strip(" '") for a in allowed.replace(" or ", ", ").split(",")])
            problems.append(Problem(where, f"must be one of {allowed} (got {show(got)})", hint))
        else:
            problems.append(Problem(where, f"{e['msg']} (got {show(got)})"))
    return _drop_explained_missing(problems)


def _drop_explained_missing(problems: list[Problem]) -> list[Problem]:
    """Leave out 'X is required but missing' where an unknown key in the same entry is a near miss of X."""
    suggested = set()
    for p in problems:
        if p.message == "unknown key" and p.fix.startswith("did you mean '"):
            suggested.add(f"{p.where.rsplit('.', 1)[0]}.{p.fix[len('did you mean ') + 1:-2]}")
    return [p for p in problems if not (p.message == "is required but missing" and p.where in suggested)]


