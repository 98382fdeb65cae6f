"""Last checks before the solver, for a Scenario built or changed in code.

``validate_scenario`` checks everything a file can get wrong; but a notebook
can change a validated Scenario with ``model_copy(update=...)``, which pydantic
does not validate again, or build one without the cross-checks.  These cheap
checks (linear in the usage entries; numpy on the arrays) make sure nothing
reaches the solver that the validator would have refused: names used in
``usage`` are defined, names are unique, and every number is finite and ≥ 0
(a cap may be infinite).  Problems are reported as the validator reports them.
"""

from __future__ import annotations

from collections import Counter

import numpy as np

from models.data import MixData

from planner.errors import Problem, ScenarioError
from planner.scenario.names import character_problem, did_you_mean, how_alike, name_key
from planner.scenario.schema import Scenario
from planner.scenario.uncertain import correlation_problems

_SOURCE = "scenario (changed after validation? check it with planner.validate_scenario)"


def check_names(s: Scenario) -> None:
    """Raise ScenarioError if usage names an undefined resource, or names repeat or break the name rule.

    The rule is the validator's (planner.scenario.names): no control or invisible
    characters, and names in one section differ by more than case, spacing or Unicode form.
    """
    problems = []
    for section, items in (("products", s.products), ("resources", s.resources), ("options", s.options)):
        first: dict[str, str] = {}
        for k, x in enumerate(items):
            bad = character_problem(x.name)
            if bad is not None:
                problems.append(Problem(f"{section}[{k + 1}].name", *bad))
                continue
            seen = first.setdefault(name_key(x.name), x.name)
            if seen != x.name:
                problems.append(Problem(f"{section}[{x.name}]", f"differs from {section}[{seen}] only in "
                                        f"{how_alike(seen, x.name)}", "names must differ by more than case, "
                                        "spacing or how accents are encoded: rename one"))
        for name, count in Counter(x.name for x in items).items():
            if count > 1:
                problems.append(Problem(f"{section}[{name}]", f"name used {count} times", "names must be unique"))
    defined = {r.name for r in s.resources}
    for p in s.products:
        for res in p.usage:
            if res not in defined:
                problems.append(Problem(f"products[{p.name}].usage.{res}", "names a resource that is not defined",
                                        did_you_mean(res, defined) or "add it under resources or fix the name"))
    if problems:
        raise ScenarioError(problems, _SOURCE)


def check_correlations(s: Scenario) -> None:
    """Raise ScenarioError if the scenario's correlations cannot hold together (matrix not positive semi-definite).

    The validator refuses such a scenario already; this re-check is for one changed in code.
    """
    problems = correlation_problems([(c.products[0], c.products[1], c.rho) for c in s.correlations])
    if problems:
        raise ScenarioError(problems, _SOURCE)


def check_extra_capacity(s: Scenario, extra: dict[str, float] | None) -> None:
    """Raise ScenarioError if ``extra`` (resource name → amount added) names an undefined resource."""
    defined = {r.name for r in s.resources}
    unknown = sorted(set(extra or {}) - defined)
    if unknown:
        raise ScenarioError([Problem(f"extra_capacity.{n}", "names a resource that is not defined",
                                     did_you_mean(n, defined)) for n in unknown])


def check_numbers(s: Scenario, d: MixData) -> None:
    """Raise ScenarioError for any number that is not finite and ≥ 0 (caps may be infinite)."""
    problems = []
    fields = {"price_intercept": d.a, "price_slope": d.b, "unit_cost": d.v, "fixed_cost": d.F,
              "min_volume": d.committed, "min_run": d.min_run}
    for field, values in fields.items():
        for k in np.flatnonzero(~np.isfinite(values) | (values < 0)):
            problems.append(Problem(f"products[{d.products[k]}].{field}", f"must be a finite number >= 0 "
                                    f"(got {float(values[k])!r})"))
    for k in np.flatnonzero(np.isnan(d.cap) | (d.cap < 0)):
        problems.append(Problem(f"products[{d.products[k]}].max_volume", f"must be >= 0 (got {float(d.cap[k])!r})"))
    for j in np.flatnonzero(~np.isfinite(d.use_amt) | (d.use_amt < 0)):
        problems.append(Problem(f"products[{d.products[d.use_prod[j]]}].usage.{d.resources[d.use_res[j]]}",
                                f"must be a finite number >= 0 (got {float(d.use_amt[j])!r})"))
    for r in np.flatnonzero(~np.isfinite(d.capacity) | (d.capacity < 0)):
        problems.append(Problem(f"resources[{d.resources[r]}].capacity",
                                f"must be a finite number >= 0 (got {float(d.capacity[r])!r})"))
    if problems:
        raise ScenarioError(problems, _SOURCE)
