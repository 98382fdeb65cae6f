"""Checks of a scenario planned period by period (``periods:``), on the raw dict, location first.

A per-period field (``PER_PRODUCT`` of a product, ``capacity`` of a resource)
is a number, the same in every period, or a list of exactly one number per
period, in the order of ``periods``.  The stock fields (``holding_cost``,
``initial_stock``, ``final_stock``, ``stock_usage``) and the setup fields
(``setup_cost``, ``setup_time``) only mean something with ``periods``.

What the planner cannot plan with periods yet is refused here with a clear
message (never planned silently wrong): setup costs and times, ``min_run``,
capacity options, uncertainty, correlations and variants.
"""

from __future__ import annotations

from typing import Any

from planner.errors import Problem
from planner.scenario.messages import label
from planner.scenario.names import character_problem, name_key
from planner.scenario.rawdict import clean_name, indexed, number

#: Product fields that may hold one number per period.
PER_PRODUCT = ("price_intercept", "price_slope", "unit_cost", "max_volume", "min_volume", "holding_cost",
               "setup_cost")
#: Product fields that only apply with ``periods``.
STOCK_FIELDS = ("holding_cost", "initial_stock", "final_stock", "stock_usage", "setup_cost", "setup_time")
#: Sections and fields not planned with periods yet.
NOT_YET_SECTIONS = ("options", "uncertainty", "correlations", "variants", "product_groups")


def _used(x: Any) -> bool:
    """True where a raw value says more than its default (a number ≠ 0, a non-empty list or mapping)."""
    if isinstance(x, (list, tuple, dict)):
        return len(x) > 0
    v = number(x)
    return v is not None and v != 0


def period_problems(raw: dict[str, Any]) -> list[Problem]:
    """Every problem of ``periods`` and of the per-period values (see the module docstring)."""
    periods = raw.get("periods")
    if periods is None:
        return _without_periods(raw)
    problems: list[Problem] = []
    if not isinstance(periods, list) or not periods:
        return [Problem("periods", "must be a list of period names, in order",
                        "e.g. periods: [October, November, December], or leave it out for one period")]
    names: dict[str, int] = {}
    for k, n in enumerate(periods):
        if not isinstance(n, str) or not n.strip():
            problems.append(Problem(f"periods[{k + 1}]", f"must be a name (got {n!r})", "write the period's name"))
            continue
        bad = character_problem(n)
        if bad is not None:
            problems.append(Problem(f"periods[{k + 1}]", *bad))
            continue
        key = name_key(n)
        if key in names:
            problems.append(Problem(f"periods[{n.strip()}]", f"is the same name as periods[{names[key] + 1}]",
                                    "period names must differ by more than case, spacing or Unicode form"))
        names[key] = k
    T = len(periods)
    shown = ", ".join(str(p) for p in periods[:4]) + (" ..." if T > 4 else "")
    resources = {n for _, r in indexed(raw, "resources") if (n := clean_name(r.get("name")))}

    def length(where: str, value: Any) -> None:
        if isinstance(value, list) and len(value) != T:
            problems.append(Problem(where, f"has {len(value)} values but there are {T} periods ({shown})",
                                    "give one number per period, in the order of periods, or one number for all"))

    for i, p in indexed(raw, "products"):
        at = label(raw, "products", i)
        for f in PER_PRODUCT:
            length(f"{at}.{f}", p.get(f))
        for f in ("setup_time", "stock_usage"):
            amounts = p.get(f)
            if isinstance(amounts, dict):
                for res in amounts:
                    if clean_name(res) is not None and res.strip() not in resources:
                        problems.append(Problem(f"{at}.{f}.{res}", "names a resource that is not defined",
                                                "add it under resources or fix the name"))
        lo, hi = p.get("min_volume"), p.get("max_volume")
        if isinstance(lo, list) or isinstance(hi, list):
            los = lo if isinstance(lo, list) else [lo] * T
            his = hi if isinstance(hi, list) else [hi] * T
            if len(los) == T and len(his) == T:
                for k, (a, b) in enumerate(zip(los, his)):
                    a, b = number(a), number(b)
                    if a is not None and b is not None and a > b:
                        problems.append(Problem(f"{at}.min_volume", f"in {periods[k]}: committed volume {a:g} "
                                                f"exceeds max_volume {b:g}", "lower the commitment or raise the cap"))
        if _used(p.get("min_run")):
            problems.append(Problem(f"{at}.min_run", "is not supported with periods yet",
                                    "remove min_run, or plan one period at a time"))
        for f in ("buy_cost", "buy_max"):
            if _used(p.get(f)):
                problems.append(Problem(f"{at}.{f}", "buying in is not supported with periods yet",
                                        f"remove {f}, or plan one period at a time"))
        for f in ("setup_cost", "setup_time"):
            if _used(p.get(f)):
                problems.append(Problem(f"{at}.{f}", "setup costs and times are not planned yet",
                                        f"remove {f} for now: a later version plans each period's setup"))
        if _used(p.get("demand")):
            problems.append(Problem(f"{at}.demand", "is not supported with periods yet",
                                    "give price_intercept and price_slope per period"))
    for i, r in indexed(raw, "resources"):
        length(f"{label(raw, 'resources', i)}.capacity", r.get("capacity"))
        for f in ("fixed_cost", "closable"):
            if r.get(f) not in (None, False, 0):
                problems.append(Problem(f"{label(raw, 'resources', i)}.{f}", "is not supported with periods yet",
                                        f"remove {f}, or plan one period at a time"))
    for section in NOT_YET_SECTIONS:
        if raw.get(section):
            problems.append(Problem(section, "is not supported with periods yet",
                                    f"remove {section}, or plan one period at a time"))
    return problems


def _without_periods(raw: dict[str, Any]) -> list[Problem]:
    """Per-period lists and stock fields in a scenario without ``periods``."""
    problems: list[Problem] = []
    for i, p in indexed(raw, "products"):
        at = label(raw, "products", i)
        for f in PER_PRODUCT:
            if isinstance(p.get(f), list):
                problems.append(Problem(f"{at}.{f}", f"is a list of {len(p[f])} values but the scenario has no "
                                        "periods", "add periods: [names...] or give one number"))
        for f in STOCK_FIELDS:
            if _used(p.get(f)):
                problems.append(Problem(f"{at}.{f}", "only applies with periods",
                                        "add periods: [names...] or remove it"))
    for i, r in indexed(raw, "resources"):
        if isinstance(r.get("capacity"), list):
            problems.append(Problem(f"{label(raw, 'resources', i)}.capacity", f"is a list of {len(r['capacity'])} "
                                    "values but the scenario has no periods", "add periods: [names...] or give one number"))
    return problems


def per_period(value: Any, T: int) -> list[float]:
    """A validated per-period value as T numbers (a number repeated, or the list itself)."""
    if isinstance(value, (list, tuple)):
        return [float(x) for x in value]
    return [float(value)] * T


def refuse_periods(s, what: str, fix: str = "plan it with 'planner plan', or leave periods out") -> None:
    """Refuse (exit 2, a clear message) a command or option that does not handle ``periods`` yet."""
    if getattr(s, "periods", None) is not None:
        from planner.errors import ScenarioError

        raise ScenarioError([Problem("periods", f"{what} is not supported with periods yet", fix)])
