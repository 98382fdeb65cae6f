"""The fast route against the model of record (Pyomo), SCIP and slate enumeration."""

from __future__ import annotations

import dataclasses

import numpy as np
import pytest

from models.data import MixData
from planner import validate_scenario
from planner.engine.slateqp import solve_slate_fast
from planner.engine.fastroute import applies, solve_fast
from planner.engine.lagrange import choice_bounds, evaluate, minimise_dual
from planner.scenario.arrays import mix_data
from planner.engine.qp import solve_slate_qp
from planner.engine.solve import _outer_approximation
from planner.scenario.synth import synthetic_scenario

from .conftest import needs_scip
from .reference import enumerate_slates, scenario_numbers, scip_plan, slate_qp


def _data(n, m, seed, fixed="some", **kw):
    s, _ = validate_scenario(synthetic_scenario(n, m, seed=seed, fixed_costs=fixed, **kw))
    return s, mix_data(s)


@pytest.mark.parametrize("n,m,seed,slope", [(12, 3, 1, "all"), (40, 6, 2, "mixed"), (90, 8, 3, "mixed"),
                                            (150, 10, 4, "all")])
def test_fast_qp_matches_pyomo_model(n, m, seed, slope):
    """highspy straight from arrays vs the Pyomo model of record (build_mix_model with a slate)."""
    _, d = _data(n, m, seed, price_slope=slope)
    slate = np.random.default_rng(seed).random(n) < 0.7
    ref = solve_slate_qp(d, slate)
    got = solve_slate_fast(d, slate)
    assert ref.status == got.status == "optimal"
    assert got.objective == pytest.approx(ref.objective, rel=1e-9)
    assert np.allclose(got.volume, ref.volume, rtol=1e-6, atol=1e-6 * np.max(d.upper[np.isfinite(d.upper)]))


def test_fast_qp_methods_agree_on_interior_products():
    """Interior-point and active-set QP, each polished by the KKT conditions, give the same plan."""
    _, d = _data(120, 8, 9, fixed="none")
    slate = np.ones(d.n, dtype=bool)
    a = solve_slate_fast(d, slate, method="hipo")
    b = solve_slate_fast(d, slate, method="highs-qp")
    assert a.method.endswith("+kkt") and b.method.endswith("+kkt")
    assert a.objective == pytest.approx(b.objective, rel=1e-12)
    assert np.allclose(a.duals, b.duals, rtol=1e-9, atol=1e-9)


@pytest.mark.parametrize("n,m,fixed,seed", [(7, 3, "near", 21), (10, 4, "some", 22)])
def test_fast_route_against_enumeration(n, m, fixed, seed):
    """Every slate enumerated (each a continuous QP): the fast route's profit is the best of them."""
    s, d = _data(n, m, seed, fixed=fixed)
    sol = solve_fast(d, 1e-9)
    assert sol is not None and sol.status == "optimal"
    best = enumerate_slates(s)
    assert sol.objective == pytest.approx(best, rel=1e-7)
    assert sol.bound >= best - 1e-7 * abs(best)


@needs_scip
@pytest.mark.parametrize("n,m,fixed,seed", [(10, 4, "near", 31), (25, 6, "near", 32), (40, 8, "some", 33)])
def test_fast_route_against_scip(n, m, fixed, seed):
    """SCIP on the mixed-integer QP built from the raw numbers: same profit within 1e-6 relative."""
    s, d = _data(n, m, seed, fixed=fixed, price_slope="mixed")
    sol = solve_fast(d, 1e-7)
    ref, _ = scip_plan(s, gap=1e-8, time_limit=60)
    assert sol is not None and sol.status == "optimal"
    assert sol.objective == pytest.approx(ref, rel=1e-6)
    assert sol.bound >= ref - 1e-6 * abs(ref)


def test_fast_route_matches_general_route():
    """The fast route and the general Pyomo outer approximation agree on a seeded case."""
    _, d = _data(25, 5, 41, fixed="near")
    fast = solve_fast(d, 1e-8)
    general = _outer_approximation(d, 1e-8, None, 1, 0)
    assert fast.objective == pytest.approx(general.objective, rel=1e-6)


def test_lagrangian_bounds_are_valid():
    """L(λ) ≥ the best plan at every λ ≥ 0, and the forced-choice bounds hold (checked by enumeration)."""
    import itertools

    s, d = _data(7, 3, 51, fixed="near")
    best = enumerate_slates(s)
    nums = scenario_numbers(s)
    assert np.array_equal(nums.choice, d.can_stop)
    rng = np.random.default_rng(0)
    for lam in [np.zeros(3), rng.uniform(0, 50, 3), rng.uniform(0, 500, 3)]:
        assert evaluate(d, lam).value >= best - 1e-9 * abs(best)
    res = minimise_dual(d, rel_tol=1e-8)
    assert res.lower <= res.best.value + 1e-9 * abs(res.best.value)
    stop_b, run_b = choice_bounds(d, res.points)
    free = np.flatnonzero(d.can_stop)
    for i in free[:3]:
        for running, bnd in ((False, stop_b[i]), (True, run_b[i])):
            top = -np.inf
            others = [k for k in free if k != i]
            for bits in itertools.product([False, True], repeat=len(others)):
                slate = np.ones(d.n, dtype=bool)
                slate[others] = bits
                slate[i] = running
                qp = slate_qp(nums, slate)  # the highspy reference, from the raw numbers
                if qp is not None:
                    assert qp.status == "optimal"
                    top = max(top, qp.profit)
            assert bnd >= top - 1e-7 * max(abs(top), 1.0)


def test_continuous_plan_is_exact_kkt_point():
    """No on/off choices: the fast route's plan satisfies the KKT conditions (polished)."""
    _, d = _data(300, 10, 61, fixed="none")
    sol = solve_fast(d, 1e-4)
    assert sol.strategy == "qp" and sol.qp_method.endswith("+kkt") and sol.gap == 0.0
    H = d.usage_dense()
    assert np.all(H @ sol.volume <= d.capacity * (1 + 1e-12) + 1e-9)
    reduced = d.margin - 2 * d.b * sol.volume - H.T @ sol.duals
    inside = (sol.volume > 1e-9) & (sol.volume < d.qp_upper - 1e-9)
    assert np.max(np.abs(reduced[inside])) < 1e-6


def test_data_with_other_fields_goes_to_the_general_route():
    """A MixData carrying fields the fast route does not model (e.g. capacity options) is not taken."""
    _, d = _data(5, 2, 71)
    assert applies(d)
    base = {f.name: getattr(d, f.name) for f in dataclasses.fields(d) if f.init}
    base.update(options=("saturday shift",), opt_amount=np.ones((1, len(d.resources))),
                opt_cost=np.array([100.0]), opt_whole=np.array([True]))
    assert not applies(MixData(**base))
