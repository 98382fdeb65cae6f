"""Capacity options valued by re-solving: each on its own, and the best set chosen jointly.

Amounts are per period in the scenario's currency; profits include the
plant-wide fixed cost (as in the Plan).  For an option:

- ``profit_with``: the optimal plan's profit with the option available, before
  the option's cost (for an option usable in part: at the amount that pays best);
- ``gain`` = profit_with − profit without it; ``cost`` = what the amount used
  costs; ``net_gain`` = gain − cost;
- ``break_even_cost``: the cost of the whole option at which it just pays
  (= the gain from all of it); for options usable in part also per unit;
- ``estimate``: shadow prices × amounts — the small-change answer, shown
  beside the re-solve so the difference is visible.

Gains are measured from the plan without options re-solved to ``rel_gap``
(tighter than a plan's default certificate), so two re-solves are compared
on the same footing.

The joint pick offers every option to the engine at once (an on/off choice
for ``adds``, a scale 0..1 for ``adds_up_to``: :mod:`planner.engine.blocks.options`)
and solves it exactly.
"""

from __future__ import annotations

from dataclasses import asdict, dataclass
from typing import Any

import numpy as np

from models.data import MixData

from planner.scenario.schema import Scenario
from planner.engine import Engine
from planner.analysis.capacity.data import option_amounts, option_full_cost, with_options
from planner.analysis.capacity.ranging import slate_change
from planner.analysis.capacity.resolve import resolve


@dataclass
class OptionValue:
    """One option valued on its own (currency per period; see the module docstring)."""

    name: str
    kind: str  # "whole" (all or nothing) or "part" (usable in part)
    adds: dict[str, float]  # resource → amount at full scale
    used: float  # share of the option used at its best, 0..1
    cost: float
    profit_with: float
    gain: float
    net_gain: float
    break_even_cost: float
    break_even_cost_per_unit: float | None
    estimate: float
    slate_changes: bool
    slate_change: str
    pays: bool
    cost_per_unit: float | None = None  # currency per resource unit added, for an option usable in part

    def to_dict(self) -> dict[str, Any]:
        return asdict(self)


def value_options(s: Scenario, d: MixData, base_slate: np.ndarray, duals: np.ndarray,
                  rel_gap: float = 1e-7, engine: Engine | None = None,
                  deadline: float | None = None) -> tuple[float, list[OptionValue]]:
    """(base profit re-solved to ``rel_gap``, each option's value), profits with plant-wide cost.

    ``engine``: the scenario's engine on ``d`` (built if not given); ``deadline``: a
    ``time.perf_counter()`` value past which TimeoutError is raised.
    """
    if not s.options:
        return float("nan"), []
    dd = with_options(d, s)
    engine = engine or Engine(d, offset=s.plant_fixed_cost)
    offered = Engine(dd, offset=s.plant_fixed_cost)
    base = resolve(engine, d.capacity, rel_gap, known=[base_slate], deadline=deadline)
    base_profit = base.objective - s.plant_fixed_cost
    out = []
    for k, o in enumerate(s.options):
        amount = dd.opt_amount[k]
        total = float(amount.sum())
        full = resolve(engine, d.capacity + amount, rel_gap, known=[base.running], deadline=deadline)
        gain_full = full.objective - base.objective
        estimate = float(duals @ amount)
        if o.adds is not None:
            used, slate, gain = 1.0, full.running, gain_full
            cost = float(o.cost or 0.0)
        else:
            sol = _certified(offered.solve(rel_gap=rel_gap, options=np.arange(dd.n_options) == k,
                                           known=[base.running], deadline=deadline))
            used = float(sol.option_scale[0]) if sol.option_scale.size else 0.0
            cost = used * option_full_cost(o)
            gain = sol.objective + cost - base.objective
            slate = sol.running
            if used <= 1e-12:
                used, cost, gain, slate = 0.0, 0.0, 0.0, base.running
        change = slate_change(d, base.running, np.asarray(slate, dtype=bool))
        net = gain - cost
        out.append(OptionValue(
            name=o.name, kind="whole" if o.adds is not None else "part", adds=option_amounts(s, o), used=used,
            cost=cost, profit_with=base_profit + gain, gain=gain, net_gain=net, break_even_cost=gain_full,
            break_even_cost_per_unit=gain_full / total if o.adds_up_to is not None and total > 0 else None,
            estimate=estimate, slate_changes=bool(change), slate_change=change, pays=net > 1e-9 * max(abs(base_profit), 1),
            cost_per_unit=float(o.cost_per_unit) if o.adds_up_to is not None and o.cost_per_unit is not None else None))
    return base_profit, out


def choose_options(s: Scenario, d: MixData, base_profit: float, base_slate: np.ndarray,
                   rel_gap: float = 1e-7, deadline: float | None = None) -> dict[str, Any]:
    """The best set of options chosen jointly (binary shifts, continuous overtime and material)."""
    dd = with_options(d, s)
    sol = _certified(Engine(dd, offset=s.plant_fixed_cost).solve(rel_gap=rel_gap, known=[np.asarray(base_slate, dtype=bool)],
                                      deadline=deadline))
    picks = []
    for k, o in enumerate(s.options):
        scale = float(sol.option_scale[k])
        if scale <= 1e-12:
            continue
        picks.append({"name": o.name, "used": scale,
                      "adds": {r: scale * a for r, a in option_amounts(s, o).items()},
                      "cost": scale * option_full_cost(o)})
    cost = sum(p["cost"] for p in picks)
    profit = sol.objective - s.plant_fixed_cost  # net of the options' costs
    return {"picked": picks, "cost": cost, "profit": profit, "profit_before_cost": profit + cost,
            "net_gain": profit - base_profit, "gap": sol.gap, "status": sol.status,
            "slate_change": slate_change(d, np.asarray(base_slate, dtype=bool), sol.running),
            "volumes": {p: float(v) for p, v in zip(d.products, sol.volume)}}


def _certified(sol):
    """The solution; TimeoutError where a deadline stopped it, SolverError where it could not be certified."""
    from planner.errors import SolverError

    if sol.status == "time_limit":
        raise TimeoutError("the time limit is spent")
    if sol.status != "optimal":
        raise SolverError("valuing the capacity options could not certify a plan: " + "; ".join(sol.messages))
    return sol
