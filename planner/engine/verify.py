"""Checks of every solved plan in the scenario's own units, before anything reports it.

A plan that breaks a limit by more than ``LIMIT_TOL`` (relative to
max(|limit|, 1)) is an error, never a plan: a capacity, a market cap, a
commitment or minimum run, a volume on a stopped product, an option's scale
outside 0..1.  Volumes below ``ZERO_VOLUME`` of their bound are solver noise
and are reported as 0.
"""

from __future__ import annotations

import numpy as np

from models.data import MixData
from models.periods import PeriodData
from planner.engine.settings import LIMIT_TOL, ZERO_VOLUME
from planner.errors import SolverError


def clean_volumes(volume: np.ndarray, d: MixData) -> np.ndarray:
    """Volumes with solver noise below ``ZERO_VOLUME`` of each bound set to 0 (units)."""
    v = np.asarray(volume, dtype=float).copy()
    v[np.abs(v) <= ZERO_VOLUME * np.maximum(np.where(np.isfinite(d.upper), d.upper, 1.0), 1.0)] = 0.0
    return v


def check_plan(d: MixData, volume: np.ndarray, running: np.ndarray, option_scale: np.ndarray | None = None,
               rel_tol: float = LIMIT_TOL, bought: np.ndarray | None = None) -> None:
    """Raise SolverError naming every limit the solved plan breaks beyond ``rel_tol``.

    ``volume`` is what is sold; ``bought`` (units bought in, or None) uses no resource.
    """
    scale = np.zeros(d.n_options) if option_scale is None or not np.size(option_scale) else np.asarray(option_scale)
    cap = d.capacity + scale @ d.opt_amount if d.n_options else d.capacity
    made = np.asarray(volume, dtype=float) - (0.0 if bought is None else np.asarray(bought, dtype=float))
    used = d.used(made)
    for r in np.flatnonzero(used > cap + rel_tol * np.maximum(np.abs(cap), 1.0)):
        raise SolverError(f"the solved plan uses {used[r]:.9g} of {d.resources[r]} but it has {cap[r]:.9g}: "
                          "the solver's answer breaks a limit, so no plan is reported (try --solver scip)")
    runs = np.asarray(running, dtype=bool) | ~d.can_stop
    floor = np.where(runs, np.where(d.must_run | d.can_stop, d.run_floor, 0.0), 0.0)
    bad = []
    for k in np.flatnonzero(volume > d.cap * (1 + rel_tol) + rel_tol):
        bad.append(f"{d.products[k]} at {volume[k]:.9g} is above its max_volume {d.cap[k]:.9g}")
    for k in np.flatnonzero(volume < floor * (1 - rel_tol) - rel_tol):
        bad.append(f"{d.products[k]} at {volume[k]:.9g} is below its floor {floor[k]:.9g}")
    for k in np.flatnonzero(~runs & (volume > 0)):
        bad.append(f"{d.products[k]} is shut down but has volume {volume[k]:.9g}")
    if bought is not None:
        for k in np.flatnonzero((bought < -rel_tol) | (bought > d.buy_max * (1 + rel_tol) + rel_tol)):
            bad.append(f"{d.products[k]} buys in {bought[k]:.9g} units, outside 0..{d.buy_max[k]:.9g}")
    if np.any(scale < -rel_tol) or np.any(scale > 1 + rel_tol):
        bad.append("an option's scale is outside 0..1")
    if bad:
        raise SolverError("the solved plan breaks a limit, so no plan is reported (try --solver scip): "
                          + "; ".join(bad))


def clean_period_volumes(x: np.ndarray, pd: PeriodData) -> np.ndarray:
    """(n × T) amounts with solver noise below ``ZERO_VOLUME`` of the product's largest sales bound set to 0."""
    v = np.asarray(x, dtype=float).copy()
    hi = pd.sales_upper()
    top = np.max(np.where(np.isfinite(hi), hi, 1.0), axis=1, initial=1.0)
    v[np.abs(v) <= ZERO_VOLUME * np.maximum(top, 1.0)[:, None]] = 0.0
    return v


def check_period_plan(pd: PeriodData, made: np.ndarray, sold: np.ndarray, running: np.ndarray,
                      rel_tol: float = LIMIT_TOL) -> None:
    """Raise SolverError naming every limit a plan over periods breaks: capacity per period, stock ≥ 0,
    final stock, sales caps and commitments, making by a stopped product."""
    bad = []
    used = pd.used(made, sold)
    stock = pd.stock(made, sold)
    tol = lambda x: rel_tol * np.maximum(np.abs(x), 1.0)  # noqa: E731
    for r, t in zip(*np.nonzero(used > pd.capacity + tol(pd.capacity))):
        bad.append(f"{pd.resources[r]} in {pd.periods[t]}: uses {used[r, t]:.9g} of {pd.capacity[r, t]:.9g}")
    size = np.maximum(np.max(np.abs(np.c_[made, sold]), axis=1, initial=0.0), pd.initial)  # the product's scale
    for i, t in zip(*np.nonzero(stock < -tol(size)[:, None])):
        bad.append(f"product {i + 1} in {pd.periods[t]}: stock {stock[i, t]:.9g} is negative")
    for i in np.flatnonzero(stock[:, -1] < pd.final - tol(size)):
        bad.append(f"product {i + 1}: final stock {stock[i, -1]:.9g} is below {pd.final[i]:.9g}")
    for i, t in zip(*np.nonzero((sold > pd.hi + tol(pd.hi)) | (sold < pd.lo - tol(pd.lo)))):
        bad.append(f"product {i + 1} in {pd.periods[t]}: sells {sold[i, t]:.9g} outside its limits")
    for i in np.flatnonzero(~np.asarray(running, dtype=bool) & (np.abs(made).sum(axis=1) > 0)):
        bad.append(f"product {i + 1} is shut down but makes {made[i].sum():.9g}")
    if bad:
        raise SolverError("the solved plan breaks limits: " + "; ".join(bad[:5]) + " (please report this)")
