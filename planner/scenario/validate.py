"""One validator for every input form: all problems in one pass, location first.

``validate_scenario(raw)`` takes the plain dict a reader produced (YAML, or a
spreadsheet turned into the same shape) and returns a frozen
:class:`planner.schema.Scenario`, or raises :class:`ScenarioError` listing
every problem with where it is and how to fix it.  Warnings (things that are
legal but probably not meant) are returned alongside.
"""

from __future__ import annotations

from collections.abc import Callable
from pathlib import Path
from typing import Any

from pydantic import ValidationError

from planner.errors import Problem, ScenarioError
from planner.scenario.demand import expand_demand
from planner.scenario.messages import FIELDS, label, pydantic_problems, where_of
from planner.scenario.names import bad_character, character_problem, did_you_mean, how_alike, name_key, shown
from planner.scenario.numbers import Unusable
from planner.scenario.periods import period_problems
from planner.scenario.rawdict import clean_name, indexed, number
from planner.scenario.schema import Scenario
from planner.scenario.uncertain import uncertainty_problems
from planner.scenario.variants import result_problems, variant_problems

#: Largest number of products, resources and options a scenario may hold.
MAX_PRODUCTS = 100_000
MAX_RESOURCES = 10_000
MAX_OPTIONS = 10_000

_NAMED = ("products", "resources", "options", "variants", "product_groups")


def _name_problems(raw: dict[str, Any]) -> list[Problem]:
    """Names given twice in one section, exactly or in a spelling that differs only in case, spacing or Unicode form."""
    problems: list[Problem] = []
    for section in _NAMED:
        groups: dict[str, list[tuple[int, str]]] = {}
        for i, e in indexed(raw, section):
            n = clean_name(e.get("name"))
            if n:
                groups.setdefault(name_key(n), []).append((i, n))
        for members in groups.values():
            if len(members) < 2:
                continue
            spellings: dict[str, list[int]] = {}
            for i, n in members:  # in order of first use
                spellings.setdefault(n, []).append(i)
            for n, where in spellings.items():
                if len(where) > 1:
                    problems.append(Problem(f"{section}[{n}]", f"name used {len(where)} times", "names must be unique"))
            first = members[0][1]
            for n, where in list(spellings.items())[1:]:
                how = how_alike(first, n)
                # spellings that look the same are told apart by their position in the list
                at, other = ((f"{section}[{where[0] + 1}]", f"{section}[{spellings[first][0] + 1}] ({first})")
                             if "Unicode" in how else (f"{section}[{n}]", f"{section}[{first}]"))
                problems.append(Problem(at, f"differs from {other} only in {how}", "names must differ by more than "
                                        "case, spacing or how accents are encoded: rename one"))
    return problems


#: Text checked by the name rule (planner.scenario.names), per section; descriptions may hold line breaks.
_STRICT = {"scenario": ("name", "currency", "period"), "products": ("name", "unit"), "resources": ("name", "unit"),
           "options": ("name",), "product_groups": ("name",), "uncertainty": ("product", "resource"), "variants": ("name",)}
_KEYED = {"products": ("usage",), "options": ("adds", "adds_up_to")}


def _character_problems(raw: dict[str, Any]) -> list[Problem]:
    """Control, bidirectional and invisible characters in names and in currency, unit, period, descriptions."""
    problems: list[Problem] = []

    def check(where: str, text: Any, line_breaks: bool = False) -> None:
        if isinstance(text, str):
            bad = character_problem(text, line_breaks)
            if bad is not None:
                problems.append(Problem(where, *bad))

    for key in _STRICT["scenario"]:
        check(key, raw.get(key))
    check("description", raw.get("description"), line_breaks=True)
    for section in ("products", "resources", "options", "product_groups", "uncertainty", "correlations", "variants"):
        for i, e in indexed(raw, section):
            at = label(raw, section, i) if section in _NAMED else f"{section}[{i + 1}]"
            for key in _STRICT.get(section, ()):
                check(f"{at}.{key}", e.get(key))
            check(f"{at}.description", e.get("description"), line_breaks=True)
            for key in _KEYED.get(section, ()):
                if isinstance(e.get(key), dict):
                    for k in e[key]:
                        if isinstance(k, str) and bad_character(k) is not None:  # (the location only when needed)
                            check(f"{at}.{key}.{shown(k)}", k)
            if section in ("correlations", "product_groups") and isinstance(e.get("products"), (list, tuple)):
                for n in e["products"]:
                    check(f"{at}.products", n)
            if section == "products" and isinstance(e.get("demand_fit"), dict):
                check(f"{at}.demand_fit.source", e["demand_fit"].get("source"), line_breaks=True)
    return problems


#: Keys whose values are text: an unusable value there is explained as text, not as a number.
_TEXT_KEYS = {"name", "currency", "period", "description", "unit", "kind", "product", "resource", "field",
              "distribution", "source", "products"}


def _unusable_problems(raw: dict[str, Any]) -> list[Problem]:
    """Each value a reader could not use as written (numbers spelled otherwise, split by a comma, unsaved formulas)."""
    found: list[tuple[tuple[Any, ...], Unusable, bool]] = []

    def walk(loc: tuple[Any, ...], x: Any) -> None:
        items = x.items() if isinstance(x, dict) else enumerate(x) if isinstance(x, list) else ()
        for k, v in items:
            if isinstance(k, Unusable):
                found.append((loc + (k,), k, True))
            if isinstance(v, Unusable):
                text = any(isinstance(part, str) and part in _TEXT_KEYS for part in (loc + (k,))[-2:])
                found.append((loc + (k,), v, text))
            elif isinstance(v, (dict, list)):
                walk(loc + (k,), v)

    walk((), raw)
    problems = []
    for loc, mark, as_text in found:
        where = where_of(raw, loc)
        if mark.place():
            where = f"{mark.place()} ({where})"
        message, fix = mark.problem(as_text)
        if as_text and isinstance(loc[-1], Unusable) and message.startswith("must be text"):
            message = "names " + message
        problems.append(Problem(where, message, fix))
    return problems


def _cross_problems(raw: dict[str, Any]) -> list[Problem]:
    """Problems between entries: duplicate names, unknown resources, contradictions."""
    problems: list[Problem] = _name_problems(raw)
    resources = {n for _, r in indexed(raw, "resources") if (n := clean_name(r.get("name")))}
    for i, p in indexed(raw, "products"):
        at = label(raw, "products", i)
        usage = p.get("usage")
        if isinstance(usage, dict):
            for res in usage:
                if clean_name(res) is None:
                    continue  # reported by the schema (names must be text) or the name rule
                if res.strip() not in resources:
                    hint = did_you_mean(str(res), resources) or "add it under resources or fix the name"
                    problems.append(Problem(f"{at}.usage.{res}", "names a resource that is not defined", hint))
        lo, hi, run = number(p.get("min_volume")), number(p.get("max_volume")), number(p.get("min_run"))
        if lo is not None and hi is not None and lo > hi:
            problems.append(Problem(f"{at}.min_volume", f"committed volume {lo:g} exceeds max_volume {hi:g}",
                                    "lower the commitment or raise the cap"))
        if run is not None and hi is not None and run > hi:
            problems.append(Problem(f"{at}.min_run", f"minimum run {run:g} exceeds max_volume {hi:g}",
                                    "the product could never run: lower min_run"))
        slope = number(p.get("price_slope", 0.0))
        tidy = set(p) <= FIELDS["products"] and (not isinstance(usage, dict) or all(
            isinstance(k, str) and k.strip() in resources for k in usage))  # else its own problem explains
        if (number(p.get("buy_max")) or 0) > 0 and p.get("buy_cost") is None:
            problems.append(Problem(f"{at}.buy_cost", "buy_max is set but buy_cost is missing",
                                    "give the cost per unit bought in, or remove buy_max"))
        if tidy and slope == 0 and p.get("max_volume") is None:
            used = isinstance(usage, dict) and any((number(v) or 0) > 0 and str(k) in resources
                                                   for k, v in usage.items())
            if not used:
                problems.append(Problem(f"{at}.max_volume", "a fixed-price product with no cap and no resource use "
                                        "would be made without limit", "set max_volume, a price_slope or usage"))
    for i, o in indexed(raw, "options"):
        at = label(raw, "options", i)
        whole, part = o.get("adds"), o.get("adds_up_to")
        if (whole is None) == (part is None):
            problems.append(Problem(at, "needs exactly one of 'adds' (all or nothing) or 'adds_up_to' (usable in part)"))
        if whole is not None and o.get("cost") is None:
            problems.append(Problem(f"{at}.cost", "is required with 'adds'", "give the option's cost for the period"))
        if part is not None and o.get("cost_per_unit") is None:
            problems.append(Problem(f"{at}.cost_per_unit", "is required with 'adds_up_to'", "give the cost per unit added"))
        if whole is not None and o.get("cost_per_unit") is not None:
            problems.append(Problem(f"{at}.cost_per_unit", "goes with 'adds_up_to', not 'adds'", "use 'cost' for an all-or-nothing option"))
        if part is not None and o.get("cost") is not None:
            problems.append(Problem(f"{at}.cost", "goes with 'adds', not 'adds_up_to'", "use 'cost_per_unit' for an option usable in part"))
        for key in ("adds", "adds_up_to"):
            amounts = o.get(key)
            if isinstance(amounts, dict) and not amounts:
                problems.append(Problem(f"{at}.{key}", "names no resource",
                                        "give the amount it adds to at least one resource, or remove the option"))
            if isinstance(amounts, dict):
                for res in amounts:
                    if clean_name(res) is not None and res.strip() not in resources:
                        hint = did_you_mean(str(res), resources) or "name a resource defined under resources"
                        problems.append(Problem(f"{at}.{key}.{res}", "names a resource that is not defined", hint))
    problems += _group_problems(raw) + _buy_in_with_groups(raw)
    problems += uncertainty_problems(raw) + variant_problems(raw) + period_problems(raw)
    return problems


def _buy_in_with_groups(raw: dict[str, Any]) -> list[Problem]:
    """Buying in is not yet planned together with product groups or closable resources: refused by name."""
    if not raw.get("product_groups") and not any(r.get("closable") not in (None, False, 0)
                                                 for _, r in indexed(raw, "resources")):
        return []
    return [Problem(f"{label(raw, 'products', i)}.buy_max", "buying in is not supported together with product groups "
                    "or closable resources yet", "remove buy_max and buy_cost, or the groups and closable resources")
            for i, p in indexed(raw, "products") if p.get("buy_max") not in (None, 0, False)]


def _group_problems(raw: dict[str, Any]) -> list[Problem]:
    """Members of product groups: each a defined product, named once per group."""
    problems: list[Problem] = []
    products = {n for _, p in indexed(raw, "products") if (n := clean_name(p.get("name")))}
    for i, g in indexed(raw, "product_groups"):
        at = label(raw, "product_groups", i)
        members = g.get("products")
        if not isinstance(members, (list, tuple)):
            continue  # reported by the schema
        seen: set[str] = set()
        for n in members:
            if clean_name(n) is None:
                continue  # reported by the schema or the name rule
            name = n.strip()
            if name not in products:
                hint = did_you_mean(name, products) or "name a product defined under products"
                problems.append(Problem(f"{at}.products.{shown(name)}", "names a product that is not defined", hint))
            elif name in seen:
                problems.append(Problem(f"{at}.products.{shown(name)}", "is listed twice in the group",
                                        "list each member once"))
            seen.add(name)
    return problems


def _listing(names: list[str], most: int = 5) -> str:
    """'A', 'A and B', 'A, B and C', or 'A, B, C, D, E and 7 more'."""
    if len(names) > most:
        return f"{', '.join(names[:most])} and {len(names) - most} more"
    return names[0] if len(names) == 1 else f"{', '.join(names[:-1])} and {names[-1]}"


def _size_problems(raw: dict[str, Any]) -> list[Problem]:
    """Sections longer than the planner accepts (checked first: validating them would take long)."""
    limits = {"products": MAX_PRODUCTS, "resources": MAX_RESOURCES, "options": MAX_OPTIONS}
    return [Problem(section, f"has {len(raw[section]):,} entries; at most {limit:,} are accepted",
                    "split the scenario into several")
            for section, limit in limits.items() if isinstance(raw.get(section), list) and len(raw[section]) > limit]


def scenario_warnings(s: Scenario) -> list[str]:
    """Legal but probably unintended things, for the user to see."""
    warnings = []
    zero = {r.name: [] for r in s.resources if not isinstance(r.capacity, list) and r.capacity == 0}
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
    for p in (s.products if s.periods is None else ()):  # (per-period values: no single comparison)
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
        problems = _unusable_problems(raw) + problems + pydantic_problems(raw, err)
    problems += _character_problems(raw) + _cross_problems(raw)
    if scenario is not None and not problems:  # each variant's result, once the scenario itself is valid
        problems += result_problems(scenario)
    if locate is not None:
        problems = [Problem(f"{place} ({p.where})" if (place := locate(p.where)) else p.where, p.message, p.fix)
                    for p in problems]
    problems = list(found or []) + problems
    if problems or scenario is None:
        raise ScenarioError(problems, source)
    return scenario, demand_notes + scenario_warnings(scenario)
