"""Variants: named what-ifs in the scenario (``variants:``), checked and applied to a Scenario.

A change names one number the way ``uncertainty`` does (``product`` or ``resource`` with a
``field``), or an option (``option`` with field ``taken``), or the plant (``plant: true`` with
field ``plant_fixed_cost``), and says what becomes of it with exactly one of ``set`` (the new
value), ``add`` (added to it, in its unit) or ``scale`` (multiplied by it).  Changes are applied
in order to the scenario as written.

Taking an option (field ``taken``, a share from 0 to 1; an all-or-nothing option 0 or 1) adds
its amounts times the share to the capacities it names and its cost times the share to the
plant-wide fixed cost: a variant's profit is after the cost of what it takes.  The share starts
at 0 in every variant, so ``add: 1`` and ``set: 1`` mean the same.

Checks, in two steps so that ``planner check`` lists every problem at once:

- :func:`variant_problems` on the raw dict (before the schema): names that are defined (with a
  "did you mean"), one target, a field that belongs to it, exactly one of set/add/scale, variant
  names that differ (the name rule of :mod:`planner.scenario.names`);
- :func:`result_problems` on the validated Scenario: each variant's result must still be a
  valid scenario (every number ≥ 0 and of a usable size, commitments and minimum runs within
  the caps, an option's share 0..1); a problem names the variant and the change that made it.

:func:`read_changes` checks a list of changes that comes from elsewhere (``planner serve``)
the same way, and :func:`apply_changes` makes the changed Scenario.
"""

from __future__ import annotations

from collections.abc import Iterable
from typing import Any

from pydantic import ValidationError

from planner.errors import Problem, ScenarioError
from planner.scenario.names import character_problem, did_you_mean, shown
from planner.scenario.numbers import SIZE_FIXES, size_problem
from planner.scenario.rawdict import clean_name, entries, indexed
from planner.scenario.schema import CHANGE_FIELDS, Change, Option, Scenario, Variant

#: The keys that name a change's target, in the order messages list them.
TARGETS = ("product", "resource", "option", "plant")
#: The keys that say what becomes of the number.
OPERATIONS = ("set", "add", "scale")
#: Most changes in one variant, or in one request of ``planner serve``.
MAX_CHANGES = 10_000

_FIELD_OWNER = {f: t for t, fields in CHANGE_FIELDS.items() for f in fields}


def _targets(c: dict[str, Any]) -> list[str]:
    """The target keys a raw change gives (``plant`` only when true)."""
    return [t for t in TARGETS if (c.get(t) is True if t == "plant" else c.get(t) is not None)]


def change_shape_problems(c: Any, where: str, products: set[str], resources: set[str],
                          options: set[str]) -> list[Problem]:
    """What is wrong with one raw change's shape and names (its numbers are the schema's to check)."""
    if not isinstance(c, dict):
        return []  # the schema names the type
    problems: list[Problem] = []
    given = _targets(c)
    fld = c.get("field")
    if len(given) != 1:
        what = f"gives {' and '.join(repr(t) for t in given)}" if given else "names no target"
        hint = (f"field {fld} goes with '{_FIELD_OWNER[fld]}" + (": true'" if _FIELD_OWNER[fld] == "plant" else "'")
                if isinstance(fld, str) and fld in _FIELD_OWNER else
                "product: NAME, resource: NAME, option: NAME or plant: true")
        problems.append(Problem(where, f"needs exactly one of 'product', 'resource', 'option' or 'plant: true' "
                                f"({what})", hint))
    else:
        target = given[0]
        name = c.get(target)
        known = {"product": products, "resource": resources, "option": options}.get(target)
        if known is not None and isinstance(name, str) and clean_name(name) is not None \
                and name.strip() not in known:
            section = target + "s"
            hint = did_you_mean(name, known) or f"name {'an' if target == 'option' else 'a'} {target} defined " \
                                               f"under {section}"
            problems.append(Problem(f"{where}.{target}", f"names {'an' if target == 'option' else 'a'} {target} "
                                    f"that is not defined ({name!r})", hint))
        if isinstance(name, str):
            bad = character_problem(name)
            if bad is not None:
                problems.append(Problem(f"{where}.{target}", *bad))
        if isinstance(fld, str) and fld in _FIELD_OWNER and fld not in CHANGE_FIELDS[target]:
            allowed = CHANGE_FIELDS[target]
            problems.append(Problem(f"{where}.field", f"{fld} is not a field of {'an' if target == 'option' else 'a'} "
                                    f"{target}", f"a {target}'s field is {', '.join(allowed[:-1]) + ' or ' if len(allowed) > 1 else ''}"
                                    f"{allowed[-1]}"))
    ops = [k for k in OPERATIONS if c.get(k) is not None]
    if len(ops) != 1:
        what = f"gives {' and '.join(ops)}" if ops else "gives none"
        problems.append(Problem(where, f"needs exactly one of 'set', 'add' or 'scale' ({what})",
                                "set: the new value; add: an amount added to it; scale: a factor it is multiplied by"))
    return problems


def variant_problems(raw: dict[str, Any]) -> list[Problem]:
    """Cross-checks of ``variants`` on the raw dict: each change's shape and names.

    Variant names follow the name rule with the other named sections (``validate._name_problems``).
    """
    problems: list[Problem] = []
    names = {section: {n for e in entries(raw, section) if (n := clean_name(e.get("name"))) is not None}
             for section in ("products", "resources", "options")}
    for i, v in indexed(raw, "variants"):
        name = clean_name(v.get("name"))
        at = f"variants[{name}]" if name else f"variants[{i + 1}]"
        changes = v.get("changes")
        if isinstance(changes, list):
            if len(changes) > MAX_CHANGES:
                problems.append(Problem(f"{at}.changes", f"has {len(changes):,} changes; at most {MAX_CHANGES:,} "
                                        "are accepted", "split it into several variants"))
                continue
            for k, c in enumerate(changes):
                problems += change_shape_problems(c, f"{at}.changes[{k + 1}]", names["products"],
                                                  names["resources"], names["options"])
    return problems


# --- applying changes ---------------------------------------------------------------------------

def option_full_cost(o: Option) -> float:
    """Cost of an option taken in full (currency): its cost, or cost_per_unit × every amount it adds."""
    if o.adds is not None:
        return float(o.cost or 0.0)
    return float(o.cost_per_unit or 0.0) * float(sum((o.adds_up_to or {}).values()))


def _new_value(c: Change, old: float | None) -> float | None:
    if c.set is not None:
        return float(c.set)
    if old is None:
        return None
    if c.add is not None:
        return old + float(c.add)
    return old * float(c.scale)  # type: ignore[arg-type]


def _how(c: Change) -> str:
    op = next(k for k in OPERATIONS if getattr(c, k) is not None)
    return f"{op} {getattr(c, op):g}"


class _Applied:
    """The numbers a list of changes gives, and which change last set each (for messages)."""

    def __init__(self, s: Scenario) -> None:
        self.s = s
        self.products: dict[str, dict[str, Any]] = {}
        self.capacity: dict[str, float] = {}
        self.taken: dict[str, float] = {}
        self.plant: float | None = None
        self.by: dict[tuple[str, str, str], str] = {}  # (kind, name, field) -> where of the last change


def _apply(s: Scenario, changes: Iterable[Change], where: str) -> tuple[_Applied, list[Problem]]:
    res = {r.name: r for r in s.resources}
    opts = {o.name: o for o in s.options}
    prods = {p.name: p for p in s.products}
    out = _Applied(s)
    problems: list[Problem] = []
    for k, c in enumerate(changes):
        at = f"{where}[{k + 1}]"
        if c.product is not None:
            p = prods.get(c.product)
            if p is None:
                problems.append(Problem(f"{at}.product", f"names a product that is not defined ({c.product!r})",
                                        did_you_mean(c.product, set(prods)) or "name a product defined under products"))
                continue
            row = out.products.setdefault(p.name, {})
            old = row.get(c.field, getattr(p, c.field))
            new = _new_value(c, old)
            if new is None:
                problems.append(Problem(at, f"products[{p.name}] has no {c.field} to {_how(c).split()[0]}",
                                        f"give it one with set: the cap in {p.unit} per {s.period}"))
                continue
            row[c.field] = new
            out.by[("products", p.name, c.field)] = at
        elif c.resource is not None:
            r = res.get(c.resource)
            if r is None:
                problems.append(Problem(f"{at}.resource", f"names a resource that is not defined ({c.resource!r})",
                                        did_you_mean(c.resource, set(res)) or "name a resource defined under resources"))
                continue
            out.capacity[r.name] = _new_value(c, out.capacity.get(r.name, r.capacity))  # type: ignore[assignment]
            out.by[("resources", r.name, "capacity")] = at
        elif c.option is not None:
            o = opts.get(c.option)
            if o is None:
                problems.append(Problem(f"{at}.option", f"names an option that is not defined ({c.option!r})",
                                        did_you_mean(c.option, set(opts)) or "name an option defined under options"))
                continue
            out.taken[o.name] = _new_value(c, out.taken.get(o.name, 0.0))  # type: ignore[assignment]
            out.by[("options", o.name, "taken")] = at
        else:
            out.plant = _new_value(c, s.plant_fixed_cost if out.plant is None else out.plant)
            out.by[("plant", "", "plant_fixed_cost")] = at
    return out, problems


def _checked(a: _Applied, label: str) -> list[Problem]:
    """Problems of the applied numbers: each one as the schema and the validator would refuse it."""
    s = a.s
    problems: list[Problem] = []

    def bad(key: tuple[str, str, str], what: str, value: float, message: str, fix: str) -> None:
        problems.append(Problem(a.by.get(key, label), f"makes {what} {value:g}, but it {message}", fix))

    def number(key: tuple[str, str, str], what: str, value: float) -> bool:
        why = size_problem(value)
        if why:
            bad(key, what, value, why, next(v for k, v in SIZE_FIXES.items() if why.startswith(k)))
            return False
        if value < 0:
            bad(key, what, value, "must be >= 0", "change it so the result is 0 or more")
            return False
        return True

    prods = {p.name: p for p in s.products}
    for name, row in a.products.items():
        p = prods[name]
        ok = all(number(("products", name, f), f"products[{name}].{f}", v) for f, v in row.items())
        if not ok:
            continue
        merged = {f: row.get(f, getattr(p, f)) for f in CHANGE_FIELDS["product"]}
        cap = merged["max_volume"]
        if cap is not None and merged["min_volume"] > cap:
            key = ("products", name, "min_volume") if "min_volume" in row else ("products", name, "max_volume")
            problems.append(Problem(a.by[key], f"makes products[{name}] commit {merged['min_volume']:g} above its "
                                    f"max_volume {cap:g}", "lower the commitment or raise the cap"))
        if cap is not None and merged["min_run"] > cap:
            key = ("products", name, "min_run") if "min_run" in row else ("products", name, "max_volume")
            problems.append(Problem(a.by[key], f"makes products[{name}] need a minimum run of {merged['min_run']:g} "
                                    f"above its max_volume {cap:g}", "the product could never run: lower min_run"))
        if merged["price_slope"] == 0 and cap is None and not any(v > 0 for v in p.usage.values()):
            key = ("products", name, "price_slope")
            problems.append(Problem(a.by.get(key, label), f"makes products[{name}] a fixed-price product with no "
                                    "cap and no resource use, which would be made without limit",
                                    "keep a price_slope, or give the product a max_volume"))
    for name, value in a.capacity.items():
        number(("resources", name, "capacity"), f"resources[{name}].capacity", value)
    opts = {o.name: o for o in s.options}
    for name, share in a.taken.items():
        key = ("options", name, "taken")
        whole = opts[name].adds is not None
        if whole and share not in (0.0, 1.0):
            bad(key, f"the share of options[{name}] taken", share, "is all or nothing: 0 or 1",
                "set: 1 to take it, set: 0 to leave it")
        elif not 0 <= share <= 1:
            bad(key, f"the share of options[{name}] taken", share, "must be from 0 to 1",
                "set: 1 takes all of it, set: 0.5 half")
    if a.plant is not None:
        number(("plant", "", "plant_fixed_cost"), "plant_fixed_cost", a.plant)
    return sorted(problems, key=lambda p: _position(p.where))


def _position(where: str) -> int:
    """The change's number in 'variants[x].changes[3]' (0 where none), so problems list in the changes' order."""
    tail = where.rsplit("[", 1)[-1].rstrip("]")
    return int(tail) if tail.isdigit() else 0


def _changed(a: _Applied) -> Scenario:
    s = a.s
    capacity = {r.name: r.capacity for r in s.resources}
    capacity.update(a.capacity)
    plant = s.plant_fixed_cost if a.plant is None else a.plant
    for o in s.options:
        share = a.taken.get(o.name, 0.0)
        if share > 0:
            for r, amount in (o.adds or o.adds_up_to or {}).items():
                capacity[r] += share * float(amount)
            plant += share * option_full_cost(o)
    products = [p.model_copy(update=a.products[p.name]) if p.name in a.products else p for p in s.products]
    resources = [r.model_copy(update={"capacity": capacity[r.name]}) if capacity[r.name] != r.capacity else r
                 for r in s.resources]
    return s.model_copy(update={"products": products, "resources": resources, "plant_fixed_cost": plant})


def apply_changes(s: Scenario, changes: Iterable[Change], where: str = "changes") -> Scenario:
    """The scenario with ``changes`` applied in order; ScenarioError naming each change whose result is invalid.

    ``where`` labels the changes in messages (``variants[Saturday shift].changes`` → ``...changes[2]``).
    The result keeps the scenario's variants; options taken stay listed (their effect is in the
    capacities and the plant-wide fixed cost).
    """
    applied, problems = _apply(s, list(changes), where)
    problems = sorted(problems + _checked(applied, where), key=lambda p: _position(p.where))
    if problems:
        raise ScenarioError(problems)
    return _changed(applied)


def variant_scenario(s: Scenario, name: str) -> Scenario:
    """The scenario of the variant called ``name`` (KeyError if none; ScenarioError if its result is invalid)."""
    v = s.variant(name)
    return apply_changes(s, v.changes, f"variants[{v.name}].changes")


def result_problems(s: Scenario) -> list[Problem]:
    """Each variant's changes applied to ``s``: the problems of results that would not be valid scenarios."""
    problems: list[Problem] = []
    for v in s.variants:
        applied, found = _apply(s, v.changes, f"variants[{v.name}].changes")
        problems += sorted(found + _checked(applied, f"variants[{v.name}]"), key=lambda p: _position(p.where))
    return problems


def touches_people(s: Scenario, changes: Iterable[Change]) -> bool:
    """Whether changes take an option (a shift, overtime) or change a work centre's hours: the labour note applies."""
    kinds = {r.name: r.kind for r in s.resources}
    return any(c.option is not None or (c.resource is not None and kinds.get(c.resource) == "work_centre")
               for c in changes)


def read_changes(s: Scenario, items: Any, where: str = "changes") -> list[Change]:
    """Changes from outside the scenario file (a JSON request), checked as a variant's are; ScenarioError if not valid.

    ``items`` must be a list of mappings; problems are located as ``changes[2].field``.
    """
    if not isinstance(items, list):
        raise ScenarioError([Problem(where, f"must be a list of changes (got {type(items).__name__})",
                                     'send {"changes": [{"resource": ..., "field": "capacity", "add": 100}, ...]}')])
    if len(items) > MAX_CHANGES:
        raise ScenarioError([Problem(where, f"has {len(items):,} changes; at most {MAX_CHANGES:,} are accepted",
                                     "send fewer changes")])
    from planner.scenario.messages import pydantic_problems

    names = ({p.name for p in s.products}, {r.name for r in s.resources}, {o.name for o in s.options})
    problems: list[Problem] = []
    out: list[Change] = []
    for k, c in enumerate(items):
        at = f"{where}[{k + 1}]"
        if not isinstance(c, dict):
            problems.append(Problem(at, f"must be a mapping of keys (got {type(c).__name__})",
                                    'write it as {"product": NAME, "field": ..., "set": ...}'))
            continue
        shape = change_shape_problems(c, at, *names)
        try:
            change = Variant.model_validate({"name": "request", "changes": [c]}).changes[0]
        except ValidationError as err:
            problems += [Problem(at + p.where.removeprefix("changes[1]"), p.message, p.fix)
                         for p in pydantic_problems({"changes": [c]}, err)] + shape
            continue
        problems += shape
        out.append(change)
    if problems:
        raise ScenarioError(problems)
    applied, found = _apply(s, out, where)
    found = sorted(found + _checked(applied, where), key=lambda p: _position(p.where))
    if found:
        raise ScenarioError(found)
    return out


def describe(c: Change) -> str:
    """One change as text: 'resources[finishing booth].capacity add 624'."""
    if c.product is not None:
        what = f"products[{shown(c.product)}].{c.field}"
    elif c.resource is not None:
        what = f"resources[{shown(c.resource)}].capacity"
    elif c.option is not None:
        what = f"options[{shown(c.option)}] taken"
    else:
        what = "plant_fixed_cost"
    return f"{what} {_how(c)}"
