"""One validator for every input form: all problems in one pass, location first.

``validate_scenario(raw)`` takes the plain dict a reader produced (YAML, or a
spreadsheet turned into the same shape) and returns a frozen
:class:`planner.schema.Scenario`, or raises :class:`ScenarioError` listing
every problem with where it is and how to fix it.  Warnings (things that are
legal but probably not meant) are returned alongside.
"""

from __future__ import annotations

import datetime
import math
from collections import Counter
from collections.abc import Callable
from pathlib import Path
from typing import Any

from pydantic import ValidationError

from planner.scenario.demand import expand_demand
from planner.scenario.names import did_you_mean
from planner.errors import Problem, ScenarioError
from planner.scenario.units import amount_hint
from planner.scenario.schema import Correlation, Option, Product, Resource, Scenario, Uncertainty

_FIELDS = {
    "scenario": set(Scenario.model_fields),
    "products": set(Product.model_fields) | {"demand"},
    "resources": set(Resource.model_fields),
    "options": set(Option.model_fields),
    "uncertainty": set(Uncertainty.model_fields),
    "correlations": set(Correlation.model_fields),
}


#: Largest number of products, resources and options a scenario may hold.
MAX_PRODUCTS = 100_000
MAX_RESOURCES = 10_000
MAX_OPTIONS = 10_000

#: Longest shown form of a wrong value in a message (characters).
_GOT_CHARS = 60


def _show(x: Any) -> str:
    """repr of a wrong value, cut short if long."""
    text = repr(x)
    return text if len(text) <= _GOT_CHARS else text[:_GOT_CHARS - 3] + "..."


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


#: Fixes for the schema's own value errors, by the start of their message.
_VALUE_FIXES = {
    "must be a number, not true/false": "write the amount in digits",
    "is too large": "use a larger unit, such as thousands or tonnes, so amounts stay within 1e15",
    "must be a finite number": "write an ordinary number",
    "is too small": "write 0, or change units so the amount is at least 1e-12",
}

_SECTION_HINT = {
    "products": "write each product as a list entry starting '- name: ...'",
    "resources": "write each resource as a list entry starting '- name: ...'",
    "options": "write each option as a list entry starting '- name: ...'",
}


def _amount_context(raw: dict[str, Any], loc: tuple[Any, ...]) -> dict[str, str]:
    """For a number's location, the resource (and product) it is counted in, with their stated units."""
    def unit_of(section: str, name: Any) -> str:
        for e in _entries(raw, section):
            if isinstance(name, str) and str(e.get("name", "")).strip() == name.strip():
                u = e.get("unit")
                return u.strip() if isinstance(u, str) else ""
        return ""

    out: dict[str, str] = {}
    if len(loc) >= 3 and isinstance(loc[1], int):
        entries = raw.get(loc[0]) if isinstance(raw.get(loc[0]), list) else []
        entry = entries[loc[1]] if loc[1] < len(entries) and isinstance(entries[loc[1]], dict) else {}
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


def _pydantic_problems(raw: dict[str, Any], err: ValidationError) -> list[Problem]:
    problems = []
    skip: set[str] = set()
    for e in err.errors(include_url=False):
        loc = tuple(e["loc"])
        kind = e["type"]
        got = e.get("input")
        if loc and loc[-1] == "[key]":  # a mapping key of the wrong type, e.g. usage: {1: 0.5}
            where = _where(raw, loc[:-1])
            if isinstance(loc[-2], (int, float)) and _value_at(raw, loc[:-1]) is None:
                skip.add(where)  # {mill: 0,5} reads as {mill: 0, 5: null}: a decimal comma
                problems.append(Problem(where, f"'{loc[-2]}' has no amount: a decimal comma splits the number "
                                        "inside { }", "write decimals with a point, e.g. 0.5"))
            else:
                problems.append(Problem(where, f"names must be text (got {_show(loc[-2])})", f"quote it: '{loc[-2]}'"))
            continue
        where = _where(raw, loc)
        if where in skip:
            continue
        if kind == "extra_forbidden":
            key = str(loc[-1])
            allowed = _FIELDS.get(_section_of(loc), set())
            if len(loc) >= 4 and loc[-2] in ("usage", "adds", "adds_up_to"):
                allowed = set()
            hint = did_you_mean(key, allowed)
            problems.append(Problem(where, "unknown key", hint or f"allowed keys: {', '.join(sorted(allowed))}"))
        elif kind == "missing":
            problems.append(Problem(where, "is required but missing", "add it"))
        elif kind in ("greater_than_equal", "greater_than", "less_than_equal"):
            bound = {"greater_than_equal": ">= 0", "greater_than": "> 0"}.get(kind, f"<= {e.get('ctx', {}).get('le')}")
            if kind != "less_than_equal" and e.get("ctx", {}).get("ge", e.get("ctx", {}).get("gt", 0)) != 0:
                bound = f"{'>=' if kind == 'greater_than_equal' else '>'} {e['ctx'].get('ge', e['ctx'].get('gt'))}"
            fix = {">= 0": "give a value of 0 or more", "> 0": "give a value above 0, or leave the entry out"}
            problems.append(Problem(where, f"must be {bound} (got {_show(got)})", fix.get(bound, "")))
        elif kind in ("float_parsing", "float_type") and isinstance(got, str):
            message, fix = amount_hint(got, **_amount_context(raw, loc))
            problems.append(Problem(where, f"{message} (got {_show(got)})", fix))
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
                problems.append(Problem(where, f"must be a list (got {_show(got)})", _SECTION_HINT[str(loc[0])]))
            elif kind == "string_type" and isinstance(got, datetime.date):
                problems.append(Problem(where, f"must be text, but YAML reads {got.isoformat()} as a date",
                                        f"quote it: '{got.isoformat()}'"))
            elif kind == "string_type" and isinstance(got, (int, float)):
                shown = str(got).lower() if isinstance(got, bool) else got
                problems.append(Problem(where, f"must be text (got {_show(got)})", f"quote it: '{shown}'"))
            elif kind.startswith("float") and isinstance(got, int) and not isinstance(got, bool):
                problems.append(Problem(where, f"is too large (got {_show(got)})", _VALUE_FIXES["is too large"]))
            else:
                problems.append(Problem(where, f"must be {noun} (got {_show(got)})",
                                        "write true or false" if noun.startswith("true") else ""))
        elif kind in ("too_short", "string_too_short"):
            problems.append(Problem(where, "must not be empty", "list at least one entry" if kind == "too_short"
                                    else "give a name"))
        elif kind == "value_error":
            msg = str(e.get("ctx", {}).get("error", e["msg"]))
            fix = next((f for start, f in _VALUE_FIXES.items() if msg.startswith(start)), "")
            problems.append(Problem(where, f"{msg} (got {_show(got)})", fix))
        elif kind == "invalid_key":
            problems.append(Problem(_where(raw, loc[:-1]) if len(loc) > 1 else "",
                                    f"keys must be text (got {_show(loc[-1] if loc else got)})",
                                    "quote the key, or remove it"))
        elif kind == "model_type":
            problems.append(Problem(where, f"must be a mapping of keys (got {_show(got)})",
                                    "write 'key: value' lines under it"))
        elif kind == "literal_error":
            allowed = str(e.get("ctx", {}).get("expected", ""))
            hint = did_you_mean(str(got), [a.strip(" '") for a in allowed.replace(" or ", ", ").split(",")])
            problems.append(Problem(where, f"must be one of {allowed} (got {_show(got)})", hint))
        else:
            problems.append(Problem(where, f"{e['msg']} (got {_show(got)})"))
    return _drop_explained_missing(problems)


def _drop_explained_missing(problems: list[Problem]) -> list[Problem]:
    """Leave out 'X is required but missing' where an unknown key in the same entry is a near miss of X."""
    suggested = set()
    for p in problems:
        if p.message == "unknown key" and p.fix.startswith("did you mean '"):
            suggested.add(f"{p.where.rsplit('.', 1)[0]}.{p.fix[len('did you mean ') + 1:-2]}")
    return [p for p in problems if not (p.message == "is required but missing" and p.where in suggested)]


def _entries(raw: dict[str, Any], section: str) -> list[dict[str, Any]]:
    items = raw.get(section) or []
    return [x for x in items if isinstance(x, dict)] if isinstance(items, list) else []


def _indexed(raw: dict[str, Any], section: str) -> list[tuple[int, dict[str, Any]]]:
    """(position in the file's list, entry) for each entry that is a mapping."""
    items = raw.get(section) or []
    return [(i, x) for i, x in enumerate(items) if isinstance(x, dict)] if isinstance(items, list) else []


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
    for i, p in _indexed(raw, "products"):
        label = _label(raw, "products", i)
        usage = p.get("usage")
        if isinstance(usage, dict):
            for res in usage:
                if not isinstance(res, str):
                    continue  # reported by the schema: names must be text
                if res.strip() not in resources:
                    hint = did_you_mean(str(res), resources) or "add it under resources or fix the name"
                    problems.append(Problem(f"{label}.usage.{res}", "names a resource that is not defined", hint))
        lo, hi = p.get("min_volume"), p.get("max_volume")
        if _num(lo) and _num(hi) and lo > hi:
            problems.append(Problem(f"{label}.min_volume", f"committed volume {lo:g} exceeds max_volume {hi:g}", "lower the commitment or raise the cap"))
        run, hi2 = p.get("min_run"), p.get("max_volume")
        if _num(run) and _num(hi2) and run > hi2:
            problems.append(Problem(f"{label}.min_run", f"minimum run {run:g} exceeds max_volume {hi2:g}", "the product could never run: lower min_run"))
        slope = p.get("price_slope", 0.0)
        tidy = set(p) <= _FIELDS["products"] and (not isinstance(usage, dict) or all(
            isinstance(k, str) and k.strip() in resources for k in usage))  # else its own problem explains
        if tidy and _num(slope) and slope == 0 and p.get("max_volume") is None:
            used = isinstance(usage, dict) and any(_num(v) and v > 0 and str(k) in resources for k, v in usage.items())
            if not used:
                problems.append(Problem(f"{label}.max_volume", "a fixed-price product with no cap and no resource use would be made without limit", "set max_volume, a price_slope or usage"))
    for i, o in _indexed(raw, "options"):
        label = _label(raw, "options", i)
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
                    if isinstance(res, str) and res.strip() not in resources:
                        hint = did_you_mean(str(res), resources) or "name a resource defined under resources"
                        problems.append(Problem(f"{label}.{key}.{res}", "names a resource that is not defined", hint))
    problems += _uncertainty_problems(raw)
    return problems


_PRODUCT_FIELDS = ("price_intercept", "price_slope", "unit_cost")
_PARAMS = {"normal": ("sd",), "triangular": ("low", "mode", "high"), "uniform": ("low", "high"), "fitted": ()}


def _uncertainty_problems(raw: dict[str, Any]) -> list[Problem]:
    """Cross-checks of ``uncertainty`` and ``correlations`` (names, fields, parameters, order)."""
    problems: list[Problem] = []
    products = {str(p.get("name")).strip(): p for p in _entries(raw, "products") if isinstance(p.get("name"), str)}
    resources = set(_names(raw, "resources"))
    targets: Counter = Counter()
    intercepts: set[str] = set()
    for i, u in enumerate(_entries(raw, "uncertainty")):
        where = f"uncertainty[{i + 1}]"
        prod, res, fld, dist = u.get("product"), u.get("resource"), u.get("field"), u.get("distribution")
        if (prod is None) == (res is None):
            problems.append(Problem(where, "needs exactly one of 'product' or 'resource'"))
        elif prod is not None and str(prod).strip() not in products:
            hint = did_you_mean(str(prod), set(products)) or "name a product defined under products"
            problems.append(Problem(f"{where}.product", f"names a product that is not defined ({prod!r})", hint))
        elif res is not None and str(res).strip() not in resources:
            hint = did_you_mean(str(res), resources) or "name a resource defined under resources"
            problems.append(Problem(f"{where}.resource", f"names a resource that is not defined ({res!r})", hint))
        if prod is not None and res is None and fld == "capacity":
            problems.append(Problem(f"{where}.field", "capacity belongs to a resource",
                                    "a product's uncertain field is price_intercept, price_slope or unit_cost"))
        if res is not None and prod is None and fld in _PRODUCT_FIELDS:
            problems.append(Problem(f"{where}.field", f"a resource's uncertain field is capacity (got {fld!r})",
                                    "use 'product:' for a product's field"))
        if dist in _PARAMS:
            for key in _PARAMS[dist]:
                if u.get(key) is None:
                    problems.append(Problem(f"{where}.{key}", f"is required with distribution {dist}"))
            for key in ("sd", "mean", "low", "mode", "high"):
                if u.get(key) is not None and key not in _PARAMS[dist] and not (dist == "normal" and key == "mean"):
                    problems.append(Problem(f"{where}.{key}", f"does not go with distribution {dist}",
                                            f"{dist} takes {', '.join(_PARAMS[dist]) or 'no parameters'}"))
        lo, mode, hi = u.get("low"), u.get("mode"), u.get("high")
        if dist == "triangular" and all(_num(x) for x in (lo, mode, hi)) and not lo <= mode <= hi:
            problems.append(Problem(where, f"needs low <= mode <= high (got {lo:g}, {mode:g}, {hi:g})"))
        if dist == "uniform" and _num(lo) and _num(hi) and lo > hi:
            problems.append(Problem(where, f"needs low <= high (got {lo:g}, {hi:g})"))
        name = str(prod).strip() if prod is not None else None
        if dist == "fitted":
            if fld != "price_intercept":
                problems.append(Problem(f"{where}.field", "fitted moves intercept and slope together",
                                        "use field: price_intercept"))
            if name in products and not isinstance(products[name].get("demand_fit"), dict):
                problems.append(Problem(where, f"distribution fitted needs products[{name}].demand_fit",
                                        "fit the line from sales history first, or give sd / low, high"))
        single = (prod is None) != (res is None)
        if single and dist == "fitted":
            targets[(("product", name), "price_intercept")] += 1
            targets[(("product", name), "price_slope")] += 1
        elif single and fld in (_PRODUCT_FIELDS if prod is not None else ("capacity",)):
            targets[(("product", name) if prod is not None else ("resource", str(res).strip()), fld)] += 1
        if prod is not None and fld == "price_intercept":
            intercepts.add(name)
    for ((kind, name), fld), count in targets.items():
        if count > 1:
            problems.append(Problem("uncertainty", f"{fld} of {kind} {name!r} has {count} distributions",
                                    "give one entry per number (fitted covers price_slope too)"))
    pairs: Counter = Counter()
    for i, c in enumerate(_entries(raw, "correlations")):
        where = f"correlations[{i + 1}]"
        names = c.get("products")
        if not isinstance(names, (list, tuple)) or len(names) != 2:
            continue  # the schema reports the shape
        a, b = (str(x).strip() for x in names)
        for x in (a, b):
            if x not in products:
                hint = did_you_mean(x, set(products)) or "name a product defined under products"
                problems.append(Problem(f"{where}.products", f"names a product that is not defined ({x!r})", hint))
            elif x not in intercepts:
                problems.append(Problem(f"{where}.products", f"{x!r} has no uncertainty on price_intercept",
                                        "correlation links the products' demand: give each an intercept distribution"))
        if a == b:
            problems.append(Problem(f"{where}.products", "names the same product twice"))
        pairs[frozenset((a, b))] += 1
    for pair, count in pairs.items():
        if count > 1:
            problems.append(Problem("correlations", f"{' and '.join(sorted(pair))} are correlated {count} times",
                                    "give each pair once"))
    return problems


def _listing(names: list[str], most: int = 5) -> str:
    """'A', 'A and B', 'A, B and C', or 'A, B, C, D, E and 7 more'."""
    if len(names) > most:
        return f"{', '.join(names[:most])} and {len(names) - most} more"
    return names[0] if len(names) == 1 else f"{', '.join(names[:-1])} and {names[-1]}"


def _num(x: Any) -> bool:
    return isinstance(x, (int, float)) and not isinstance(x, bool) and math.isfinite(x)


def _size_problems(raw: dict[str, Any]) -> list[Problem]:
    """Sections longer than the planner accepts (checked first: validating them would take long)."""
    limits = {"products": MAX_PRODUCTS, "resources": MAX_RESOURCES, "options": MAX_OPTIONS}
    return [Problem(section, f"has {len(raw[section]):,} entries; at most {limit:,} are accepted",
                    "split the scenario into several")
            for section, limit in limits.items() if isinstance(raw.get(section), list) and len(raw[section]) > limit]


def scenario_warnings(s: Scenario) -> list[str]:
    """Legal but probably unintended things, for the user to see."""
    warnings = []
    zero = {r.name: [] for r in s.resources if r.capacity == 0}
    for p in (s.products if zero else []):
        for res, amount in p.usage.items():
            if res in zero and amount > 0:
                zero[res].append(p.name)
    for res, users in zero.items():
        if users:
            warnings.append(f"resources[{res}]: capacity is 0, so {_listing(users)} cannot be made")
    capacity = {r.name: r.capacity for r in s.resources}
    for p in s.products:
        if p.min_run > 0 and not p.must_run and p.min_volume == 0:
            for res, amount in p.usage.items():
                if res in capacity and capacity[res] > 0 and amount * p.min_run > capacity[res] * (1 + 1e-9):
                    warnings.append(f"products[{p.name}]: its min_run {p.min_run:g} needs {amount * p.min_run:g} "
                                    f"of {res}, which has {capacity[res]:g}: it can never run")
                    break
    for p in s.products:
        if p.price_intercept <= p.unit_cost and p.min_volume == 0 and not p.must_run:
            warnings.append(
                f"products[{p.name}]: price_intercept {p.price_intercept:g} <= unit_cost {p.unit_cost:g}: "
                "never profitable, it will stay shut down"
            )
    return warnings


def validate_scenario(raw: Any, source: str = "",
                      locate: Callable[[str], str | None] | None = None,
                      base_dir: str | Path | None = None,
                      found: list[Problem] | None = None) -> tuple[Scenario, list[str]]:
    """Validate a raw scenario dict; return (scenario, warnings) or raise ScenarioError.

    ``locate`` maps a problem's location ("products[doors].unit_cost") to the
    place in the user's file ("sheet products, row 4, column unit_cost"), for
    readers of spreadsheets and CSV folders; its answer is put before the location.
    Products may state demand in other forms (``demand:``, see planner.demand);
    history files are found relative to ``base_dir``.  ``found`` are problems a
    reader already found (listed first, already located).
    """
    if not isinstance(raw, dict):
        raise ScenarioError([Problem("", f"the scenario must be a mapping of keys (got {type(raw).__name__})",
                                     "start the file with 'name:' and 'products:'")], source)
    problems: list[Problem] = _size_problems(raw)
    if problems:
        raise ScenarioError(problems, source)
    raw, problems, demand_notes = expand_demand(raw, base_dir)
    scenario = None
    try:
        scenario = Scenario.model_validate(raw)
    except ValidationError as err:
        problems += _pydantic_problems(raw, err)
    problems += _cross_problems(raw)
    if locate is not None:
        problems = [Problem(f"{place} ({p.where})" if (place := locate(p.where)) else p.where, p.message, p.fix)
                    for p in problems]
    problems = list(found or []) + problems
    if problems or scenario is None:
        raise ScenarioError(problems, source)
    return scenario, demand_notes + scenario_warnings(scenario)
