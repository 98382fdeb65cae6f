"""One formulation: the engine's HiGHS rows are the model of record's (models/, the model --write-model writes).

The engine builds its models from the blocks' arrays; the model of record is built by Pyomo from the
same data (``models.mix``, ``models.cuts``).  Both are evaluated at random points: every row's slack
to its bounds and the objective must agree (affine functions equal at random points are equal), so
an accidental change to either formulation fails here.
"""

from __future__ import annotations

import numpy as np
import pytest

from planner import validate_scenario
from planner.analysis.capacity.data import with_options
from planner.engine import Engine
from planner.engine.cutmilp import CutMilp
from planner.scenario.arrays import mix_data
from planner.scenario.synth import synthetic_scenario


def _highs_rows(h, x: np.ndarray) -> tuple[np.ndarray, np.ndarray, float]:
    """(slack to upper bounds, slack to lower bounds) of every finite row bound at x, and the objective."""
    lp = h.getLp()
    A = np.zeros((lp.num_row_, lp.num_col_))
    start, index, value = (np.asarray(v) for v in (lp.a_matrix_.start_, lp.a_matrix_.index_, lp.a_matrix_.value_))
    for j in range(len(start) - 1):  # column-wise after passModel and addRows
        A[index[start[j]:start[j + 1]], j] = value[start[j]:start[j + 1]]
    act = A @ x
    up, lo = np.asarray(lp.row_upper_), np.asarray(lp.row_lower_)
    obj = float(np.asarray(lp.col_cost_) @ x + lp.offset_)
    return np.sort((up - act)[np.isfinite(up)]), np.sort((act - lo)[np.isfinite(lo)]), obj


def _pyomo_rows(m) -> tuple[np.ndarray, np.ndarray, float]:
    import pyomo.environ as pyo

    ups, los = [], []
    for c in m.component_data_objects(pyo.Constraint, active=True):
        body = pyo.value(c.body)
        if c.has_ub():
            ups.append(pyo.value(c.upper) - body)
        if c.has_lb():
            los.append(body - pyo.value(c.lower))
    return np.sort(ups), np.sort(los), float(pyo.value(m.profit))


@pytest.mark.parametrize("n,m,fixed,seed,options,groups", [(6, 2, "near", 1, False, False),
                                                            (9, 3, "some", 2, True, False),
                                                            (14, 4, "near", 3, True, False),
                                                            (10, 3, "some", 4, True, True),
                                                            (8, 2, "near", 5, False, True)])
def test_cut_milp_rows_are_the_model_of_record(n, m, fixed, seed, options, groups):
    from models.cuts import add_cuts, build_cut_model

    raw = synthetic_scenario(n, m, seed=seed, fixed_costs=fixed, commitments=True)
    if groups:  # overlapping groups (one of fixed cost 0), a closable resource and one with a fixed cost
        names = [q["name"] for q in raw["products"]]
        raw["product_groups"] = [{"name": "g1", "products": names[:3], "fixed_cost": 900.0},
                                 {"name": "g2", "products": names[2:5], "fixed_cost": 400.0},
                                 {"name": "g3", "products": names[5:], "fixed_cost": 0.0}]
        raw["resources"][0].update(fixed_cost=700.0, closable=True)
        raw["resources"][1].update(fixed_cost=300.0)
    if options:  # one all-or-nothing option and one usable in part
        first = raw["resources"][0]
        amount = {first["name"]: 0.2 * first["capacity"]}
        raw["options"] = [{"name": "shift", "adds": amount, "cost": 500.0},
                          {"name": "overtime", "adds_up_to": amount, "cost_per_unit": 3.0}]
    s, _ = validate_scenario(raw)
    d = with_options(mix_data(s), s) if options else mix_data(s)
    p = Engine(d, scaled=False).problem(d)
    milp = CutMilp(p)
    rng = np.random.default_rng(seed)
    pts_k, pts_x = p.products.initial_points()
    extra = rng.uniform(0, 1, d.n) * np.where(np.isfinite(d.upper), d.upper, 1.0)
    milp.cuts_at([extra, np.zeros(d.n_options)], np.ones(p.n_choices, dtype=bool))
    ref = build_cut_model(d)
    add_cuts(ref, d, pts_k, pts_x)
    run = p.products.running(np.ones(p.products.n_choices, dtype=bool))
    at = np.flatnonzero(run & (d.b > 0) & (extra > 0) & (np.abs(d.margin - 2 * d.b * extra) > 1e-9 * np.abs(d.margin)))
    add_cuts(ref, d, at, extra[at])
    for _ in range(3):
        x = rng.uniform(-1, 2, milp.b.ncol) * 10.0
        for k, name in enumerate(d.products):
            ref.volume[name].set_value(float(x[p.products.Dcol[k]]), skip_validation=True)
            ref.contribution[name].set_value(float(x[p.products.tcol[k]]), skip_validation=True)
            if p.products.ycol[k] >= 0:
                ref.running[name].set_value(float(x[p.products.ycol[k]]), skip_validation=True)
        for k, o in enumerate(d.options):
            ref.option_scale[o].set_value(float(x[p.options.col[k]]), skip_validation=True)
        for k, g in enumerate(d.groups):
            ref.group_on[g].set_value(float(x[p.groups.col[k]]), skip_validation=True)
        for k, r in enumerate(p.resources.rows):
            ref.open[d.resources[r]].set_value(float(x[p.resources.col[k]]), skip_validation=True)
        up_h, lo_h, obj_h = _highs_rows(milp.h, x)
        up_p, lo_p, obj_p = _pyomo_rows(ref)
        assert up_h.size == up_p.size and lo_h.size == lo_p.size
        assert np.allclose(up_h, up_p, rtol=1e-9, atol=1e-6)
        assert np.allclose(lo_h, lo_p, rtol=1e-9, atol=1e-6)
        assert obj_h == pytest.approx(obj_p, rel=1e-9, abs=1e-6)
