"""The solve engine against the model of record (Pyomo), SCIP, slate enumeration and its own promises.

The model of record is ``models.mix.build_mix_model`` (the file ``--write-model`` writes); the engine
builds its HiGHS models from the same arrays, and these tests hold the two to each other.
"""

from __future__ import annotations

import itertools
import time

import numpy as np
import pytest

from models.data import MixData
from planner import validate_scenario
from planner.engine import Engine
from planner.engine.dual import choice_bounds, evaluate, minimise
from planner.engine.slateqp import solve_choice
from planner.scenario.arrays import mix_data
from planner.scenario.synth import synthetic_scenario

from .conftest import needs_scip
from .reference import enumerate_slates, scenario_numbers, scip_plan, slate_qp


def _data(n, m, seed, fixed="some", **kw):
    s, _ = validate_scenario(synthetic_scenario(n, m, seed=seed, fixed_costs=fixed, **kw))
    return s, mix_data(s)


def _pyomo_slate_qp(d: MixData, slate: np.ndarray) -> tuple[float, np.ndarray]:
    """The fixed-slate QP of the model of record, solved through Pyomo's HiGHS interface."""
    import pyomo.environ as pyo
    from pyomo.contrib.solver.common.factory import SolverFactory

    from models.mix import build_mix_model, read_volumes

    m = build_mix_model(d, slate=slate)
    for options in ({}, {"solver": "hipo"}):  # HiGHS's active-set QP can stall on interior products
        res = SolverFactory("highs").solve(m, load_solutions=False, solver_options=options,
                                           raise_exception_on_nonoptimal_result=False)
        if "convergenceCriteriaSatisfied" in str(res.termination_condition):
            res.solution_loader.load_vars()
            return float(pyo.value(m.profit)), read_volumes(m, d)
    raise AssertionError("the model of record's QP was not solved")


@pytest.mark.parametrize("n,m,seed,slope", [(12, 3, 1, "all"), (40, 6, 2, "mixed"), (90, 8, 3, "mixed")])
def test_slate_qp_matches_the_model_of_record(n, m, seed, slope):
    """highspy from the blocks' columns vs the Pyomo model of record (build_mix_model with a slate)."""
    _, d = _data(n, m, seed, price_slope=slope)
    slate = (np.random.default_rng(seed).random(n) < 0.7) | ~d.can_stop
    ref, ref_vol = _pyomo_slate_qp(d, slate)
    got = Engine(d).slate(slate)
    assert got.status == "optimal"
    assert got.objective == pytest.approx(ref, rel=1e-8)
    assert np.allclose(got.volume, ref_vol, rtol=1e-5, atol=1e-5 * np.max(d.upper[np.isfinite(d.upper)]))


def test_slate_qp_methods_agree_on_interior_products():
    """Interior-point and active-set QP, each polished by the KKT conditions, give the same plan."""
    _, d = _data(120, 8, 9, fixed="none")
    p = Engine(d).problem(d)
    choice = np.zeros(p.n_choices, dtype=bool)
    a = solve_choice(p, choice, method="hipo")
    b = solve_choice(p, choice, method="highs-qp")
    assert a.method.endswith("+kkt") and b.method.endswith("+kkt")
    assert a.objective == pytest.approx(b.objective, rel=1e-12)
    assert np.allclose(a.duals, b.duals, rtol=1e-9, atol=1e-9)


@pytest.mark.parametrize("n,m,fixed,seed", [(7, 3, "near", 21), (10, 4, "some", 22)])
def test_engine_against_enumeration(n, m, fixed, seed):
    """Every slate enumerated (each a continuous QP, tests/reference.py): the engine's profit is the best."""
    s, d = _data(n, m, seed, fixed=fixed)
    sol = Engine(d).solve(rel_gap=1e-9)
    assert sol.status == "optimal"
    best = enumerate_slates(s)
    assert sol.objective == pytest.approx(best, rel=1e-7)
    assert sol.bound >= best - 1e-7 * abs(best)


@needs_scip
@pytest.mark.parametrize("n,m,fixed,seed", [(10, 4, "near", 31), (25, 6, "near", 32), (40, 8, "some", 33)])
def test_engine_against_scip(n, m, fixed, seed):
    """SCIP on the mixed-integer QP built from the raw numbers: same profit within 1e-6 relative."""
    s, d = _data(n, m, seed, fixed=fixed, price_slope="mixed")
    sol = Engine(d).solve(rel_gap=1e-7)
    ref, _ = scip_plan(s, gap=1e-8, time_limit=60)
    assert sol.status == "optimal"
    assert sol.objective == pytest.approx(ref, rel=1e-6)
    assert sol.bound >= ref - 1e-6 * abs(ref)


@pytest.mark.parametrize("n,m,seed", [(10, 3, 41), (25, 5, 42)])
def test_enumeration_and_cut_milp_routes_agree(monkeypatch, n, m, seed):
    """The two exact routes inside the engine (slate enumeration; Lagrangian + cut MILP) give one optimum."""
    import planner.engine.search as search

    _, d = _data(n, m, seed, fixed="near")
    first = Engine(d).solve(rel_gap=1e-8)
    monkeypatch.setattr(search, "ENUMERATE_UP_TO", 0)
    second = Engine(d).solve(rel_gap=1e-8)
    assert second.strategy != "enumeration"
    assert second.objective == pytest.approx(first.objective, rel=1e-7)


def test_lagrangian_bounds_are_valid():
    """L(λ) ≥ the best plan at every λ ≥ 0, and the forced-choice bounds hold (checked by enumeration)."""
    s, d = _data(7, 3, 51, fixed="near")
    engine = Engine(d, scaled=False)
    p = engine.problem(d)
    best = enumerate_slates(s)
    nums = scenario_numbers(s)
    assert np.array_equal(nums.choice, d.can_stop)
    rng = np.random.default_rng(0)
    for lam in [np.zeros(3), rng.uniform(0, 50, 3), rng.uniform(0, 500, 3)]:
        assert evaluate(p, lam).value >= best - 1e-9 * abs(best)
    res = minimise(p, rel_tol=1e-8)
    assert res.lower <= res.best.value + 1e-9 * abs(res.best.value)
    stop_b, run_b = choice_bounds(res.points, p.n_choices)
    free = np.flatnonzero(d.can_stop)
    for j in range(min(3, free.size)):
        i = free[j]
        for running, bnd in ((False, stop_b[j]), (True, run_b[j])):
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


def test_continuous_plan_is_an_exact_kkt_point():
    """No on/off choices: the engine's plan satisfies the KKT conditions (polished)."""
    _, d = _data(300, 10, 61, fixed="none")
    sol = Engine(d).solve(rel_gap=1e-4)
    assert sol.strategy == "qp" and sol.qp_method.endswith("+kkt") and sol.gap == 0.0
    H = d.usage_dense()
    assert np.all(H @ sol.volume <= d.capacity * (1 + 1e-12) + 1e-9)
    reduced = d.margin - 2 * d.b * sol.volume - H.T @ sol.duals
    inside = (sol.volume > 1e-9) & (sol.volume < d.qp_upper - 1e-9)
    assert np.max(np.abs(reduced[inside])) < 1e-6


def test_time_limit_is_spent_once():
    """A search the deadline stops returns then (status time_limit), never starting another route afresh."""
    _, d = _data(100, 20, 1, fixed="hard")  # a root gap of about 1 %: no route certifies 1e-9 in 0.3 s
    t0 = time.perf_counter()
    sol = Engine(d).solve(rel_gap=1e-9, time_limit=0.3)
    took = time.perf_counter() - t0
    assert sol.status == "time_limit" and sol.bound >= sol.objective
    assert took < 0.3 + 1.5  # one deadline: the limit plus one last slate QP, not the limit twice


def test_scaling_keeps_every_field():
    """Scaling copies the data with dataclasses.replace: capacity options survive it (they were dropped)."""
    s, d = _data(6, 2, 7)
    d = MixData(**{**{f: getattr(d, f) for f in ("products", "resources", "a", "b", "v", "F", "committed",
                                                 "min_run", "cap", "must_run", "use_res", "use_prod", "use_amt",
                                                 "capacity")},
                   "options": ("shift",), "opt_amount": np.array([[100.0, 0.0]]), "opt_cost": np.array([5.0]),
                   "opt_whole": np.array([True])})
    engine = Engine(d)
    scaled = engine.scales.apply(d)
    assert scaled.options == ("shift",) and scaled.n_options == 1
    assert np.allclose(scaled.opt_amount * engine.scales.row, d.opt_amount)


def test_changed_numbers_are_re_solved_like_fresh_data():
    """A re-solve with other capacities, prices and costs equals a fresh engine on the changed data."""
    _, d = _data(30, 5, 8, fixed="near")
    engine = Engine(d)
    engine.solve(rel_gap=1e-8, warm=True)
    cap, a = d.capacity * 1.2, d.a * 0.97
    warm = engine.solve(rel_gap=1e-8, warm=True, capacity=cap, a=a)
    fresh = Engine(engine.data(capacity=cap, a=a)).solve(rel_gap=1e-8)
    assert warm.objective == pytest.approx(fresh.objective, rel=1e-7)


def test_forced_choices():
    """Forcing a product to stop makes nothing of it; forcing one to run keeps it running."""
    _, d = _data(12, 3, 9, fixed="near")
    engine = Engine(d)
    base = engine.solve(rel_gap=1e-8)
    k = int(np.flatnonzero(base.running & d.can_stop)[0])
    stop = np.zeros(d.n, dtype=bool)
    stop[k] = True
    off = engine.solve(rel_gap=1e-8, stop=stop)
    assert off.volume[k] == 0 and off.objective <= base.objective + 1e-7 * abs(base.objective)
    j = np.flatnonzero(~base.running & d.can_stop)
    if j.size:
        run = np.zeros(d.n, dtype=bool)
        run[j[0]] = True
        on = engine.solve(rel_gap=1e-8, run=run)
        assert on.running[j[0]] and on.objective <= base.objective + 1e-7 * abs(base.objective)


def test_every_highs_instance_is_made_by_the_adapter():
    """Seed, threads and silence are set on every HiGHS model: no module but the adapter makes one."""
    from pathlib import Path

    root = Path(__file__).resolve().parents[1] / "planner"
    makers = [str(f.relative_to(root)) for f in root.rglob("*.py")
              if "highspy.Highs()" in f.read_text(encoding="utf-8") and f.name != "highs.py"]
    assert makers == []


def test_kkt_polish_corrects_a_misread_active_set():
    """max 10x − x² + y − y² s.t. x + y ≤ 3, 0 ≤ x, y (by hand: with y > 0, 10 − 2x = 1 − 2y and x + y = 3
    give y = −0.75, so y = 0, x = 3, λ = 10 − 2·3 = 4, and y's reduced profit 1 − 4 < 0 keeps it at 0).
    A guess slightly inside (as an interior-point answer is) reads y as free; the polish corrects it."""
    from planner.engine.kkt import polish

    c, b = np.array([10.0, 1.0]), np.array([1.0, 1.0])
    H, cap = np.array([[1.0, 1.0]]), np.array([3.0])
    lo, hi = np.zeros(2), np.full(2, np.inf)
    got = polish(c, b, H, cap, lo, hi, np.array([2.99, 0.01]), np.array([4.02]))
    assert got is not None
    x, lam = got
    assert x == pytest.approx([3.0, 0.0], abs=1e-12) and lam == pytest.approx([4.0], abs=1e-12)


def test_a_stalled_interior_point_answer_is_used_only_when_both_solutions_are_feasible(monkeypatch):
    """HiGHS's 'hipo' may end "no progress" (status Unknown) at a solved point (seen on 200 products ×
    13 periods); such an answer is used, polished, and equals the active-set QP's optimum.  A stall
    whose primal or dual solution is not feasible, or whose objectives are apart, is not used."""
    from types import SimpleNamespace

    from planner.engine import highs

    _, d = _data(120, 8, 9, fixed="none")
    p = Engine(d).problem(d)
    choice = np.zeros(p.n_choices, dtype=bool)
    ref = solve_choice(p, choice, method="highs-qp")
    real = highs.run

    def stalled(h):
        real(h)
        return highs.Outcome.ERROR  # as if HiGHS had reported "Unknown"

    monkeypatch.setattr(highs, "run", stalled)
    got = solve_choice(p, choice, method="hipo")
    assert got.status == "optimal" and got.method.startswith("hipo-stalled")
    assert got.objective == pytest.approx(ref.objective, rel=1e-9)
    monkeypatch.setattr(highs, "run", real)

    def fake(primal: int, dual: int, gap: float):
        info = SimpleNamespace(primal_solution_status=primal, dual_solution_status=dual,
                               primal_dual_objective_error=gap)
        return SimpleNamespace(getInfo=lambda: info)

    assert highs.stalled_but_solved(fake(2, 2, 1e-9), 1e-7)
    assert not highs.stalled_but_solved(fake(1, 2, 1e-9), 1e-7)
    assert not highs.stalled_but_solved(fake(2, 0, 1e-9), 1e-7)
    assert not highs.stalled_but_solved(fake(2, 2, 1e-3), 1e-7)
