"""One validator for every input form: all problems in one pass, location first.

``validate_scenario(raw)`` takes the plain dict a reader produced (YAML, or a
spreadsheet turned into the same shape) and returns a frozen
:class:`planner.schema.Scenario`, or raises :class:`ScenarioError` listing
every problem with where it is and how to fix it.  Warnings (things that are
legal but probably not meant) are returned alongside.
"""

from __future__ import annotations

import difflib
import math
from collections import Counter
from collections.abc import Callable
from typing import Any

from pydantic import ValidationError

from .errors import Problem, ScenarioError
from .schema import Correlation, Option, Product, Resource, Scenario, Uncertainty

_FIELDS = {
    "scenario": set(Scenario.model_fields),
    "products": set(Product.model_fields),
    "resources": set(Resource.model_fields),
    "options": set(Option.model_fields),
    "uncertainty": set(Uncertainty.model_fields),
    "correlations": set(Correlation.model_fields),
}


def did_you_mean(word: str, choices: list[str] | set[str]) -> str:
    """A 'did you mean ...?' hint for a near-miss name, or ''."""
    close = difflib.get_close_matches(str(word), sorted(map(str, choices)), n=1, cutoff=0.6)
    return f"did you mean '{close[0]}'?" if close else ""


def _label(raw: dict[str, Any], section: str, index: int) -> str:
    """'products[doors]' if the entry has a usable name, else 'products[3]' (1-based)."""
    try:
        entry = raw[section][index]
        name = entry.get("name") if isinstance(entry, dict) else None
    except (KeyError, IndexError, TypeError):
        name = None
    if isinstance(name, str) and name.strip():
        return f"{section}[{name.strip()}]"
    return f"{section}[{index + 1}]"


def _where(raw: dict[str, Any], loc: tuple[Any, ...]) -> str:
    parts: list[str] = []
    i = 0
    while i < len(loc):
        part = loc[i]
        if part in ("products", "resources", "options", "uncertainty", "correlations") and i + 1 < len(loc) and isinstance(loc[i + 1], int):
            parts.append(_label(raw, str(part), loc[i + 1]))
            i += 2
            continue
        parts.append(str(part))
        i += 1
    return ".".join(parts).replace(".[", "[")


def _section_of(loc: tuple[Any, ...]) -> str:
    if len(loc) >= 3 and loc[0] in _FIELDS and isinstance(loc[1], int):
        return str(loc[0])
    return "scenario"


def _pydantic_problems(raw: dict[str, Any], err: ValidationError) -> list[Problem]:
    problems = []
    for e in err.errors(include_url=False):
        loc = tuple(e["loc"])
        where = _where(raw, loc)
        kind = e["type"]
        got = e.get("input")
        if kind == "extra_forbidden":
            key = str(loc[-1])
            allowed = _FIELDS.get(_section_of(loc), set())
            if len(loc) >= 4 and loc[-2] in ("usage", "adds", "adds_up_to"):
                allowed = set()
            hint = did_you_mean(key, allowed)
            problems.append(Problem(where, "unknown key", hint or f"allowed keys: {', '.join(sorted(allowed))}"))
        elif kind == "missing":
            problems.append(Problem(where, "is required but missing", "add it"))
        elif kind in ("greater_than_equal", "greater_than"):
            bound = ">= 0" if kind == "greater_than_equal" else "> 0"
            problems.append(Problem(where, f"must be {bound} (got {got!r})"))
        elif kind in ("float_parsing", "float_type", "bool_parsing", "bool_type", "string_type", "dict_type", "list_type"):
            want = {"float": "a number", "bool": "true or false", "string": "text", "dict": "a mapping of name: amount", "list": "a list"}
            noun = next((v for k, v in want.items() if kind.startswith(k)), "another type")
            problems.append(Problem(where, f"must be {noun} (got {got!r})"))
        elif kind == "too_short":
            problems.append(Problem(where, "must not be empty", "list at least one entry"))
        elif kind == "value_error":
            msg = str(e.get("ctx", {}).get("error", e["msg"]))
            problems.append(Problem(where, f"{msg} (got {got!r})"))
        else:
            problems.append(Problem(where, f"{e['msg']} (got {got!r})"))
    return problems


def _entries(raw: dict[str, Any], section: str) -> list[dict[str, Any]]:
    items = raw.get(section) or []
    return [x for x in items if isinstance(x, dict)] if isinstance(items, list) else []


def _names(raw: dict[str, Any], section: str) -> list[str]:
    return [str(x["name"]).strip() for x in _entries(raw, section) if isinstance(x.get("name"), str)]


def _cross_problems(raw: dict[str, Any]) -> list[Problem]:
    """Problems between entries: duplicate names, unknown resources, contradictions."""
    problems: list[Problem] = []
    for section in ("products", "resources", "options"):
        for name, count in Counter(_names(raw, section)).items():
            if count > 1:
                problems.append(Problem(f"{section}[{name}]", f"name used {count} times", "names must be unique"))
    resources = set(_names(raw, "resources"))
    products = {"products": _entries(raw, "products")}  # once: a list per product made this O(n²)
    for i, p in enumerate(products["products"]):
        label = _label(products, "products", i)
        usage = p.get("usage")
        if isinstance(usage, dict):
            for res in usage:
                if str(res) not in resources:
                    hint = did_you_mean(str(res), resources) or "add it under resources or fix the name"
                    problems.append(Problem(f"{label}.usage.{res}", "names a resource that is not defined", hint))
        lo, hi = p.get("min_volume"), p.get("max_volume")
        if _num(lo) and _num(hi) and lo > hi:
            problems.append(Problem(f"{label}.min_volume", f"committed volume {lo:g} exceeds max_volume {hi:g}", "lower the commitment or raise the cap"))
        run, hi2 = p.get("min_run"), p.get("max_volume")
        if _num(run) and _num(hi2) and run > hi2:
            problems.append(Problem(f"{label}.min_run", f"minimum run {run:g} exceeds max_volume {hi2:g}", "the product could never run: lower min_run"))
        if _num(p.get("price_slope")) and p.get("price_slope") == 0 and p.get("max_volume") is None:
            used = isinstance(usage, dict) and any(_num(v) and v > 0 and str(k) in resources for k, v in usage.items())
            if not used:
                problems.append(Problem(f"{label}.max_volume", "a fixed-price product with no cap and no resource use would be made without limit", "set max_volume, a price_slope or usage"))
    for i, o in enumerate(_entries(raw, "options")):
        label = _label({"options": _entries(raw, "options")}, "options", i)
        whole, part = o.get("adds"), o.get("adds_up_to")
        if (whole is None) == (part is None):
            problems.append(Problem(label, "needs exactly one of 'adds' (all or nothing) or 'adds_up_to' (usable in part)"))
        if whole is not None and o.get("cost") is None:
            problems.append(Problem(f"{label}.cost", "is required with 'adds'", "give the option's cost for the period"))
        if part is not None and o.get("cost_per_unit") is None:
            problems.append(Problem(f"{label}.cost_per_unit", "is required with 'adds_up_to'", "give the cost per unit added"))
        if whole is not None and o.get("cost_per_unit") is not None:
            problems.append(Problem(f"{label}.cost_per_unit", "goes with 'adds_up_to', not 'adds'", "use 'cost' for an all-or-nothing option"))
        if part is not None and o.get("cost") is not None:
            problems.append(Problem(f"{label}.cost", "goes with 'adds', not 'adds_up_to'", "use 'cost_per_unit' for an option usable in part"))
        for key in ("adds", "adds_up_to"):
            amounts = o.get(key)
            if isinstance(amounts, dict):
                for res in amounts:
                    if str(res) not in resources:
                        hint = did_you_mean(str(res), resources) or "name a resource defined under resources"
                        problems.append(Problem(f"{label}.{key}.{res}", "names a resource that is not defined", hint))
    return problems


def _num(x: Any) -> bool:
    return isinstance(x, (int, float)) and not isinstance(x, bool) and math.isfinite(x)


def scenario_warnings(s: Scenario) -> list[str]:
    """Legal but probably unintended things, for the user to see."""
    warnings = []
    for p in s.products:
        if p.price_intercept <= p.unit_cost and p.min_volume == 0 and not p.must_run:
            warnings.append(
                f"products[{p.name}]: price_intercept {p.price_intercept:g} <= unit_cost {p.unit_cost:g}: "
                "never profitable, it will stay shut down"
            )
    return warnings


def validate_scenario(raw: Any, source: str = "",
                      locate: Callable[[str], str | None] | None = None) -> tuple[Scenario, list[str]]:
    """Validate a raw scenario dict; return (scenario, warnings) or raise ScenarioError.

    ``locate`` maps a problem's location ("products[doors].unit_cost") to the
    place in the user's file ("sheet products, row 4, column unit_cost"), for
    readers of spreadsheets and CSV folders; its answer is put before the location.
    """
    if not isinstance(raw, dict):
        raise ScenarioError([Problem("", f"the scenario must be a mapping of keys (got {type(raw).__name__})",
                                     "start the file with 'name:' and 'products:'")], source)
    problems: list[Problem] = []
    scenario = None
    try:
        scenario = Scenario.model_validate(raw)
    except ValidationError as err:
        problems += _pydantic_problems(raw, err)
    problems += _cross_problems(raw)
    if locate is not None:
        problems = [Problem(f"{place} ({p.where})" if (place := locate(p.where)) else p.where, p.message, p.fix)
                    for p in problems]
    if problems or scenario is None:
        raise ScenarioError(problems, source)
    return scenario, scenario_warnings(scenario)
