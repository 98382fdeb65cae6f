"""Explaining an infeasible scenario in its own terms: which limits, which commitments, by how much.

Usage is never negative and volumes can always fall to their floors, so the
commitments fit if and only if, for every resource, the committed floors
(``models.data.committed_floor``: min_volume, or min_run for a product that
must run) fit together.  The check is therefore exact resource by resource:

    committed volumes of A (400 pieces) and B (150 pieces, its min_run as it
    must run) need 5,200 h of mill; it has 4,160 h (short by 1,040 h)

and then says what would make the scenario feasible: the extra capacity per
short resource, or the smallest cuts to the commitments, from the elastic LP
of :mod:`models.elastic` (every short resource at once, so a product
committed on two of them is cut once).  ``iis_names`` asks HiGHS for an
irreducible infeasible subsystem (``iis_strategy`` 2) of the floors and
limits and maps it back to names: a second, independent account of the same
conflict, used where the planner meets infeasibility it did not foresee.
"""

from __future__ import annotations

import numpy as np

from models.data import MixData, committed_floor, committed_made

from planner.engine import highs
from planner.errors import InfeasibleError, SolverError
from planner.scenario.schema import Scenario

#: Relative tolerance on a capacity before commitments count as not fitting.
FIT_TOL = 1e-9


def fmt(x: float) -> str:
    """A number to six significant digits with thousands separators: 5,200 or 0.125."""
    v = float(f"{x:.6g}")
    return f"{int(v):,}" if v.is_integer() and abs(v) < 1e15 else f"{v:,.6g}"


def _names(names: list[str]) -> str:
    return names[0] if len(names) == 1 else f"{', '.join(names[:-1])} and {names[-1]}"


def _floor_reason(s: Scenario, k: int, floor: float) -> str:
    """'400 pieces' or '150 pieces, its min_run as it must run' for product k's floor."""
    p = s.products[k]
    amount = f"{fmt(floor)} {p.unit}"
    if p.min_run > p.min_volume:
        why = "it must run" if p.must_run else f"its min_volume {fmt(p.min_volume)} makes it run"
        return f"{amount}, its min_run as {why}"
    return amount


def short_resources(d: MixData) -> list[int]:
    """Indices of the resources that the committed floors alone overload."""
    need = d.used(committed_made(d))
    return [r for r in range(len(d.resources)) if need[r] > d.capacity[r] * (1 + FIT_TOL) + FIT_TOL]


def conflicts(s: Scenario, d: MixData) -> list[str]:
    """One sentence per overloaded resource, naming the commitments that overload it; [] if all fit."""
    floor = committed_floor(d)
    need = d.used(floor)
    out = []
    for r in short_resources(d):
        res = s.resources[r]
        unit = f" {res.unit}" if res.unit else ""
        users = [k for k, rr, h in zip(d.use_prod, d.use_res, d.use_amt) if rr == r and h > 0 and floor[k] > 0]
        users = sorted(set(int(k) for k in users), key=lambda k: d.products[k])
        who = _names([f"{d.products[k]} ({_floor_reason(s, k, floor[k])})" for k in users])
        noun = "volume" if len(users) == 1 else "volumes"
        out.append(f"committed {noun} of {who} need{'s' if len(users) == 1 else ''} {fmt(need[r])}{unit} of "
                   f"{res.name}; it has {fmt(d.capacity[r])}{unit} (short by {fmt(need[r] - d.capacity[r])}{unit})")
    return out


def smallest_cuts(d: MixData) -> dict[str, tuple[float, float]]:
    """Per product whose commitment must give way: (floor, largest feasible floor) in units (elastic LP)."""
    import pyomo.environ as pyo
    from pyomo.contrib.appsi.solvers import Highs

    from models.elastic import build_elastic_model

    m = build_elastic_model(d)
    opt = Highs()
    if not opt.available():
        raise SolverError("HiGHS is not available to Pyomo: pip install 'highspy==1.15.1'")
    opt.highs_options = {"random_seed": 0, "threads": 1}
    res = opt.solve(m)
    if str(res.termination_condition).split(".")[-1] != "optimal":
        return {}
    floor = committed_floor(d)
    out = {}
    for k, p in enumerate(d.products):
        if floor[k] > 0:
            cut = float(pyo.value(m.shortfall[p]))
            if cut > 1e-9 * max(floor[k], 1.0):
                out[p] = (float(floor[k]), max(float(floor[k]) - cut, 0.0))
    return out


def check_commitments(d: MixData, unit_of: dict[str, str] | None = None) -> None:
    """Raise InfeasibleError naming each resource whose commitments exceed its capacity."""
    need = d.used(committed_made(d))
    have = d.capacity_reach  # with every capacity option taken in full
    conflicts = []
    for r, name in enumerate(d.resources):
        if need[r] > have[r] * (1 + 1e-9) + 1e-9:
            users = sorted({d.products[k] for k, rr in zip(d.use_prod, d.use_res)
                            if rr == r and committed_floor(d)[k] > 0})
            unit = f" {unit_of.get(name, '')}" if unit_of else ""
            conflicts.append(f"committed volumes of {', '.join(users)} need {need[r]:,.6g}{unit} "
                             f"of {name}; it has {have[r]:,.6g}{unit} "
                             f"(short by {need[r] - have[r]:,.6g}{unit})")
    if conflicts:
        raise InfeasibleError(conflicts)


def explain(s: Scenario, d: MixData) -> None:
    """Raise InfeasibleError if the commitments do not fit, saying which, by how much, and what would fit."""
    found = conflicts(s, d)
    if not found:
        return
    need = d.used(committed_made(d))
    adds = []
    for r in short_resources(d):
        res = s.resources[r]
        adds.append(f"{res.name} +{fmt(need[r] - d.capacity[r])}{' ' + res.unit if res.unit else ''}")
    found.append(f"to fit, add capacity ({', '.join(adds)})")
    cuts = smallest_cuts(d)
    if cuts:
        unit = {p.name: p.unit for p in s.products}
        text = ", ".join(f"{name} from {fmt(old)} to {fmt(new)} {unit[name]}" for name, (old, new) in cuts.items())
        found.append(f"or lower the commitments, at the least: {text}")
    raise InfeasibleError(found)


def iis_names(d: MixData) -> tuple[list[str], list[str]]:
    """(resources, products) in an irreducible infeasible subset of floors and limits (HiGHS IIS, strategy 2).

    The LP holds each volume within [committed floor, cap] and every capacity
    row; products are listed only for a committed floor (> 0) in the subset;
    ([], []) if the LP is feasible.
    """
    h = highs.new(1, 0, iis_strategy=2)
    inf = highs.INF
    floor = committed_floor(d)
    upper = np.where(np.isfinite(d.cap), d.cap, inf)
    h.addVars(d.n, floor.astype(float), upper.astype(float))
    order = np.argsort(d.use_res, kind="stable")
    res, prod, amt = d.use_res[order], d.use_prod[order], d.use_amt[order]
    starts = np.searchsorted(res, np.arange(len(d.resources)))
    nr = len(d.resources)
    if nr:
        h.addRows(nr, np.full(nr, -inf), d.capacity.astype(float), len(amt), starts.astype(np.int32),
                  prod.astype(np.int32), amt.astype(float))
    if highs.run(h) != highs.Outcome.INFEASIBLE:
        return [], []
    _, iis = h.getIis()
    if not iis.valid_:
        return [], []
    held = [k for k in iis.col_index_ if floor[k] > 0]  # a bound D >= 0 is no commitment
    return [d.resources[r] for r in sorted(iis.row_index_)], sorted(d.products[k] for k in held)
