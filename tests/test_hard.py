"""Hard catalogues (fixed costs close to what each product can earn) against outside references.

- SCIP (pyscipopt) on the mixed-integer QP built straight from the scenario numbers
  (tests/reference.py), on catalogues small enough for it to finish: same profit to the
  gap, and the planner's bound never below SCIP's optimum (a bound must be valid);
- every on/off slate enumerated (≤ 12 products), each a continuous QP;
- the fixed-choice dual of a slate (Newton steps) against HiGHS's QP of the same slate
  (highspy used directly by the engine's slate QP, a different algorithm);
- ``--time-limit`` honesty on a hard case: status time_limit, a feasible plan, a bound
  at least SCIP's best profit found;
- shadow-price range re-checks on 100 products × 20 limits within the default budget.
"""

from __future__ import annotations

import time

import numpy as np
import pytest

from planner import plan, validate_scenario
from planner.engine import Engine
from planner.engine.dual import minimise
from planner.engine.slatedual import price_slate
from planner.engine.slateqp import solve_choice
from planner.scenario.arrays import mix_data
from planner.scenario.synth import synthetic_scenario

from .conftest import needs_scip
from .reference import enumerate_slates, scip_plan, scip_race


def _scenario(n, m, fixed="hard", seed=1, **kw):
    s, _ = validate_scenario(synthetic_scenario(n, m, seed=seed, fixed_costs=fixed, **kw))
    return s


@pytest.mark.parametrize("n,m,fixed,seed", [(10, 3, "hard", 1), (12, 4, "hard", 2), (12, 3, "mixed", 3),
                                            (11, 5, "hard", 4)])
def test_hard_against_enumeration(n, m, fixed, seed):
    """Every slate enumerated (tests/reference.py), each a continuous QP: same best profit."""
    s = _scenario(n, m, fixed, seed)
    p = plan(s, rel_gap=1e-9)
    assert p.status == "optimal"
    assert p.profit == pytest.approx(enumerate_slates(s), rel=1e-7)


@needs_scip
@pytest.mark.parametrize("n,m,seed", [(20, 4, 1), (30, 5, 3), (40, 5, 5)])
def test_hard_against_scip(n, m, seed):
    """SCIP to gap 1e-9 on hard catalogues it can finish; ours to 1e-4 (enumeration is out of reach here).

    The branch-and-bound over the Lagrangian certifies these; its bound must be at least SCIP's
    optimum and its profit within the gap of it.
    """
    s = _scenario(n, m, "hard", seed)
    p = plan(s, rel_gap=1e-4)
    ref, _ = scip_plan(s, gap=1e-9, time_limit=120.0)
    assert p.status == "optimal"
    assert p.bound >= ref - 1e-6 * abs(ref)  # a valid bound is never below the optimum
    assert p.profit <= ref + 1e-6 * abs(ref)  # and no plan beats the optimum
    assert p.profit >= ref - 1e-4 * abs(ref)  # within the gap asked for


@needs_scip
def test_branch_and_bound_route_against_scip():
    """A catalogue where the Lagrangian leaves the gap open: the search takes the branch-and-bound, and its
    plan matches SCIP (to 1e-6, SCIP at 1e-9) with the gap asked for tight."""
    s = _scenario(60, 5, "hard", 7)
    d = mix_data(s)
    sol = Engine(d).solve(rel_gap=1e-6)
    ref, _ = scip_plan(s, gap=1e-9, time_limit=300.0)
    assert sol.status == "optimal"
    assert sol.strategy == "lagrangian+branch"
    assert sol.bound >= ref - 1e-7 * abs(ref)
    assert sol.objective == pytest.approx(ref, rel=1e-6)


def test_slate_dual_matches_the_slate_qp():
    """Newton on the fixed-choice dual reaches the slate QP's optimum (HiGHS + KKT polish), from above."""
    s = _scenario(300, 10, "hard", 7)
    d = mix_data(s)
    e = Engine(d)
    p = e.problem(d)
    r = minimise(p, rel_tol=1e-6)
    rng = np.random.default_rng(0)
    for _ in range(3):
        z = r.best.choice.copy()
        flip = rng.choice(z.size, size=5, replace=False)
        z[flip] = ~z[flip]
        qp = solve_choice(p, z)
        fd = price_slate(p, z, r.best.lam)
        assert fd.converged
        assert fd.value >= qp.objective - 1e-9 * abs(qp.objective)  # weak duality
        assert fd.value == pytest.approx(qp.objective, rel=1e-9)


@needs_scip
def test_time_limit_is_honest_on_a_hard_case():
    """A limit far too short: status time_limit, a plan that fits, and a bound no plan found beats
    (SCIP's best profit in 20 s is a plan, so a valid bound is at least it)."""
    s = _scenario(1000, 20, "hard", 1)
    d = mix_data(s)
    t0 = time.perf_counter()
    sol = Engine(d).solve(rel_gap=1e-4, time_limit=1.5)
    took = time.perf_counter() - t0
    assert sol.status == "time_limit"
    assert took < 1.5 + 3.0  # one deadline: the last step started before it ends soon after
    assert np.all(d.used(sol.volume) <= d.capacity * (1 + 1e-7) + 1e-7)
    assert sol.bound >= sol.objective
    race = scip_race(s, 1e-4, 20.0)
    assert sol.bound >= race["profit"] - 1e-6 * abs(race["profit"])


def test_range_rechecks_on_a_hard_case_stop_at_their_budget_and_say_so():
    """100 products × 20 limits, hard: where the re-check budget runs out, the analysis stops within it and
    every end it did not check is flagged (the range then holds for the plan's slate only).

    The issue's target, every end checked within the default budget on this case, is not met: each
    unchecked end would need a mixed-integer re-solve (several seconds here)."""
    from planner.analysis.capacity.analysis import add_capacity_analysis

    s = _scenario(100, 20, "hard", 1)
    p = plan(s)
    t0 = time.perf_counter()
    add_capacity_analysis(p, s, budget=3.0)
    took = time.perf_counter() - t0
    assert took <= 3.0 + 15.0  # the re-solve under way when the budget ends is stopped at it
    assert all(r.range_slates_checked in (True, False) for r in p.resources)
    unchecked = [r for r in p.resources if r.range_slates_checked is False]
    for r in unchecked:
        assert "not checked" in (r.range_low_reason or "") + (r.range_high_reason or "")
