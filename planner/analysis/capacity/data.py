"""Scenario capacity options as model data (:class:`models.data.MixData` option arrays)."""

from __future__ import annotations

from dataclasses import replace

import numpy as np

from models.data import MixData

from planner.scenario.schema import Option, Scenario


def option_amounts(s: Scenario, o: Option) -> dict[str, float]:
    """Resource → amount the option adds at full scale (resource units)."""
    return dict(o.adds or o.adds_up_to or {})


def option_full_cost(o: Option) -> float:
    """Cost of the option at full scale (currency): its cost, or cost_per_unit × the amounts added.

    With several resources an option usable in part costs cost_per_unit for
    each unit it adds to each of them (scale 0..1 times each amount).
    """
    if o.adds is not None:
        return float(o.cost or 0.0)
    return float(o.cost_per_unit or 0.0) * float(sum((o.adds_up_to or {}).values()))


def with_options(d: MixData, s: Scenario, names: list[str] | None = None) -> MixData:
    """``d`` offering the scenario's options (all, or those named), in scenario order."""
    chosen = [o for o in s.options if names is None or o.name in names]
    index = {r: k for k, r in enumerate(d.resources)}
    amount = np.zeros((len(chosen), len(d.resources)))
    for k, o in enumerate(chosen):
        for res, amt in option_amounts(s, o).items():
            amount[k, index[res]] += float(amt)
    return replace(d, options=tuple(o.name for o in chosen), opt_amount=amount,
                   opt_cost=np.array([option_full_cost(o) for o in chosen], dtype=float),
                   opt_whole=np.array([o.adds is not None for o in chosen], dtype=bool))
