"""``compare``: the base plan and each variant planned side by side (``planner compare``).

A variant is the scenario with its changes applied (:func:`planner.scenario.variants.apply_changes`);
its plan is :func:`planner.api.plan` of that scenario, exactly what planning the hand-edited file
gives.  Whole files can be compared too (:func:`compare_files`): the first is the base.

Each plan is made from its own scenario alone (a fresh engine, no warm start), so the results do
not depend on where they were made.  More than :data:`DASK_FROM` - 1 variants go to Dask (a local
cluster by default, like ``planner risk``; ``workers=0`` plans them in this process), one task per
variant, collected in the variants' order: the results are the same on any number of workers.

Profits are in the scenario's currency per period, after the plant-wide fixed cost and the cost of
any option a variant takes.
"""

from __future__ import annotations

import time
from dataclasses import dataclass, field
from pathlib import Path
from typing import Any

from planner.analysis.cluster import dask_client
from planner.errors import EXIT_BAD_INPUT, InfeasibleError, PlannerError, ScenarioError, SolverError
from planner.output.plan import LABOUR_NOTE, Plan
from planner.scenario.names import did_you_mean
from planner.scenario.schema import Scenario
from planner.scenario.variants import apply_changes, describe, touches_people

#: From this many variants on, they are planned on Dask unless told otherwise (a handful run in this process).
DASK_FROM = 6
#: How long to try reaching a scheduler address.
CONNECT_TIMEOUT = "10s"


class CompareError(PlannerError):
    """What to compare is not clear (a variant the scenario does not define, no variants): bad input."""

    exit_code = EXIT_BAD_INPUT


@dataclass
class Entry:
    """One column of the comparison: the base or a variant, with its plan or why it has none."""

    name: str
    description: str = ""
    changes: list[str] = field(default_factory=list)
    plan: Plan | None = None
    status: str = ""  # the plan's status, or "infeasible" / "solver trouble"
    message: str = ""  # why there is no plan
    labour: bool = False  # takes an option or changes a work centre's hours
    source: str = ""  # the file it came from (whole-file comparisons)


def plan_entry(scenario: Scenario, rel_gap: float, time_limit: float | None) -> tuple[Plan | None, str, str]:
    """(plan, status, message) of one scenario: an infeasible one or solver trouble is reported, not raised.

    Runs on a Dask worker for many variants: it depends on the scenario and the settings only.
    """
    from planner.api import plan
    from planner.scenario.validate import scenario_warnings

    try:
        p = plan(scenario, rel_gap=rel_gap, time_limit=time_limit)
    except InfeasibleError as e:
        return None, "infeasible", str(e)
    except SolverError as e:
        return None, "solver trouble", str(e)
    p.warnings = scenario_warnings(scenario) + p.warnings  # legal but probably not meant, as for a file
    return p, p.status, ""


@dataclass
class Comparison:
    """The base and its variants, planned (``to_dict`` is the JSON of ``planner compare --json``)."""

    base: Entry
    variants: list[Entry]
    currency: str
    period: str
    info: dict[str, Any] = field(default_factory=dict)
    warnings: list[str] = field(default_factory=list)

    @property
    def labour(self) -> bool:
        return any(v.labour for v in self.variants)

    def to_dict(self) -> dict[str, Any]:
        base = self.base.plan
        assert base is not None
        out = {"currency": self.currency, "period": self.period, "base": _summary(self.base, None),
               "variants": [_summary(v, base) for v in self.variants], "run": self.info,
               "warnings": self.warnings,
               "economics": ("each variant is the scenario with its changes applied, planned on its own; profit "
                             "after the plant-wide fixed cost and the cost of any option the variant takes"),
               "note": LABOUR_NOTE}
        return out


def _bottlenecks(p: Plan) -> list[dict[str, Any]]:
    return [{"name": r.name, "shadow_price": r.shadow_price, "value_of_one_percent": r.value_of_one_percent,
             "unit": r.unit} for r in p.bottlenecks]


def _summary(e: Entry, base: Plan | None) -> dict[str, Any]:
    p = e.plan
    out: dict[str, Any] = {"name": e.name}
    if base is not None or e.description:
        out["description"] = e.description
    if e.source:
        out["file"] = e.source
    if base is not None:
        out["changes"] = e.changes
    if p is None:
        out.update({"profit": None, "profit_change": None, "status": e.status, "gap": None, "message": e.message,
                    "products": [], "resources": [], "changed_decisions": [], "bottlenecks": []})
        if e.labour:
            out["labour_note"] = LABOUR_NOTE
        return out
    out.update({"profit": p.profit, "status": p.status, "gap": p.gap, "bound": p.bound, "scenario": p.scenario})
    if base is not None:
        out["profit_change"] = p.profit - base.profit
    out["products"] = [{"name": x.name, "running": x.running, "volume": x.volume, "price": x.sold_price,
                        "profit": x.profit, "unit": x.unit} for x in p.products]
    out["resources"] = [{"name": r.name, "capacity": r.capacity, "used": r.used, "utilisation": r.utilisation,
                         "shadow_price": r.shadow_price, "binding": r.binding, "unit": r.unit} for r in p.resources]
    if base is not None:
        before = {x.name: x.running for x in base.products}
        out["changed_decisions"] = [{"product": x.name, "base_running": before[x.name], "running": x.running}
                                    for x in p.products if x.name in before and before[x.name] != x.running]
    out["bottlenecks"] = _bottlenecks(p)
    out["warnings"] = p.warnings
    if e.labour:
        out["labour_note"] = LABOUR_NOTE
    return out


def choose_variants(s: Scenario, names: list[str] | None) -> list[str]:
    """The variants to plan: those named (in the order given, each once), else every one; bad names are bad input."""
    defined = [v.name for v in s.variants]
    if not names:
        return defined
    unknown = [n for n in names if n not in defined]
    if unknown:
        hints = "; ".join(f"{n!r}: {did_you_mean(n, defined) or 'not defined'}" for n in unknown)
        listed = ", ".join(repr(n) for n in defined) if defined else "none: add a 'variants:' list to the scenario"
        raise CompareError(f"--variant names a variant the scenario does not define ({hints}); its variants: {listed}")
    return list(dict.fromkeys(names))


def compare_variants(s: Scenario, names: list[str] | None = None, rel_gap: float = 1e-4,
                     time_limit: float | None = None, workers: int | None = None, scheduler: str | None = None,
                     client: Any = None, warnings: list[str] | None = None) -> Comparison:
    """The base plan and the plan of each variant of ``s`` (those named, else all); see the module docstring."""
    chosen = choose_variants(s, names)
    if not chosen:
        raise CompareError("the scenario has no variants to compare: add a 'variants:' list (see README, "
                           "'What-if'), or compare whole files: planner compare A.yaml B.yaml")
    entries = [Entry(s.name, s.description)]
    scenarios = [s]
    for name in chosen:
        v = s.variant(name)
        try:
            scenarios.append(apply_changes(s, v.changes, f"variants[{v.name}].changes"))
        except ScenarioError as e:  # validated when read; a Scenario changed in code may still get here
            raise ScenarioError(e.problems, "scenario") from None
        entries.append(Entry(v.name, v.description, [describe(c) for c in v.changes],
                             labour=touches_people(s, v.changes)))
    return _run(entries, scenarios, rel_gap, time_limit, workers, scheduler, client, list(warnings or []))


def compare_files(paths: list[str | Path], rel_gap: float = 1e-4, time_limit: float | None = None,
                  workers: int | None = None, scheduler: str | None = None, client: Any = None) -> Comparison:
    """Whole scenario files (any input form) side by side; the first is the base."""
    from planner.scenario.loading import load_scenario

    entries, scenarios, notes = [], [], []
    for k, path in enumerate(paths):
        s, warns = load_scenario(path)
        notes += [f"{path}: {w}" for w in warns]
        scenarios.append(s)
        labour = k > 0 and _differs_in_people(scenarios[0], s)
        entries.append(Entry(s.name, s.description, source=str(path), labour=labour))
    names = [e.name for e in entries]
    for k, e in enumerate(entries):  # two files of one scenario name: told apart by their file
        if names.count(e.name) > 1:
            e.name = f"{e.name} ({Path(e.source).name})"
    return _run(entries, scenarios, rel_gap, time_limit, workers, scheduler, client, notes)


def _differs_in_people(a: Scenario, b: Scenario) -> bool:
    """Whether b's work centres have other hours than a's, or it lists other options (shifts, overtime)."""
    hours = {r.name: r.capacity for r in a.resources if r.kind == "work_centre"}
    return any(r.kind == "work_centre" and hours.get(r.name) != r.capacity for r in b.resources) or \
        [o.name for o in a.options] != [o.name for o in b.options]


def _run(entries: list[Entry], scenarios: list[Scenario], rel_gap: float, time_limit: float | None,
         workers: int | None, scheduler: str | None, client: Any, warnings: list[str]) -> Comparison:
    from planner.api import plan

    t0 = time.perf_counter()
    base = entries[0]
    base.plan = plan(scenarios[0], rel_gap=rel_gap, time_limit=time_limit)  # no base, no comparison: raised
    base.status = base.plan.status
    rest = scenarios[1:]
    local = workers == 0 or (workers is None and scheduler is None and client is None and len(rest) < DASK_FROM)
    if local:
        results = [plan_entry(sc, rel_gap, time_limit) for sc in rest]
        n_workers, where = 1, "in-process"
    else:
        results, n_workers, where = _on_dask(rest, rel_gap, time_limit, workers, scheduler, client)
    for e, (p, status, message) in zip(entries[1:], results):
        e.plan, e.status, e.message = p, status, message
    info = {"plans": len(scenarios), "workers": n_workers, "scheduler": where, "rel_gap": rel_gap,
            "seconds": time.perf_counter() - t0}
    s = scenarios[0]
    return Comparison(base, entries[1:], s.currency, s.period, info, warnings)


def _on_dask(scenarios, rel_gap, time_limit, workers, scheduler, client):
    """Each scenario planned as one Dask task; results in the scenarios' order."""
    with dask_client(scheduler, workers, client, CONNECT_TIMEOUT, most=len(scenarios)) as (client, n_workers, where):
        futures = [client.submit(plan_entry, sc, rel_gap, time_limit, pure=False) for sc in scenarios]
        return client.gather(futures), n_workers, where
