"""Wide magnitudes inside the documented range (1e-12..1e15): plan right, or refuse up front; honour time.

README: numbers beyond 1e15 or below 1e-12 (other than 0) are refused; "numbers are scaled
internally by powers of two so that wide ranges of units reach the solver near 1"; "--time-limit
SECONDS returns the best plan found with status time_limit and its certified gap"; exit 4 is
solver trouble.  Scenarios from tests/scenario_gen.py ``wide_scenario`` (invented, feasible by
construction: commitments are a small share of what fits): 8 products with fixed costs near
1e14, slopes 1e-8 and usages 1e-4 (huge_fixed), slopes down to 1e-10 (tiny_slopes), usages down
to 1e-6 (tiny_usage), or all of these with ordinary products in one scenario (mixed).

Each run is the command line in a subprocess (so a hang cannot stop the suite, and time is
measured around what a user runs).  Either the scenario is refused with exit 2 and a message
naming the fields that make it ill-conditioned, or the plan is checked against the highspy slate
enumeration (tests/reference.py, certified to about 1e-9 relative on these cases): every limit
held to 1e-7 relative, bound ≥ reference, profit ≥ reference − gap·|reference| (relative
rounding allowance 1e-8, suited to terms near 1e16 that cancel), status ``optimal`` when no time
limit is given.  With ``--time-limit T`` the wall time must be ≤ 1.1·T + 3 s (start-up allowance).
"""

from __future__ import annotations

import json
import re
import subprocess
import sys
import time
from pathlib import Path

import numpy as np
import pytest

from .differential import LIMIT_REL
from .reference import enumerate_plans, scenario_numbers
from .scenario_gen import as_yaml, wide_scenario

ROOT = Path(__file__).resolve().parent.parent
#: Relative allowance for rounding when comparing profits of this size (currency).
WIDE_ROUND = 1e-8
#: Time allowed for an 8-product plan with no time limit (the passing cases take 1–3 s).
NO_LIMIT_SECONDS = 20.0
#: The time limit given, and the start-up allowance around the command.
LIMIT, STARTUP = 5.0, 3.0
#: A refusal must name where the trouble is: a product's or resource's field.
NAMES_A_FIELD = re.compile(r"(products|resources)\[[^\]]+\]\.(price_slope|fixed_cost|usage|capacity|"
                           r"price_intercept|unit_cost|max_volume|min_run|min_volume)")

_EXIT4 = ("exit 4 'no feasible plan was found in the time allowed' with no time limit: the first cut MILP "
          "ends with no feasible solution (HiGHS numerics; stopping every product is feasible), so no slate "
          "is solved, and the message blames a time limit (fixed costs ~1e14, slopes 1e-8, usages 1e-4)")
_NO_LIMIT_TIME = ("outer approximation stalls (500 rounds, gap ~1e1) and reports status 'time_limit' with no "
                  "time limit; profit far below the optimum (slopes ~1e-10: volumes ~1e13, contributions ~1e16)")
_HANG = ("hangs inside HiGHS in the Lagrangian bundle's projection QP (engine/lagrange.py _project: no time "
         "or iteration limit on that QP); runs past 20 s, past any --time-limit too")
_ANALYSIS = ("--time-limit not honoured: after the solve, the automatic capacity analysis re-solves "
             "the slate QP unscaled (HiGHS: 'LP matrix values greater than 1e15') and runs for minutes")

#: (kind, seed) → diagnosis, for the runs with no time limit (plan --no-capacity).
NO_LIMIT_KNOWN = {
    ("huge_fixed", 0): _EXIT4,
    ("huge_fixed", 2): _HANG,
    ("huge_fixed", 3): _HANG,
    ("tiny_slopes", 0): _NO_LIMIT_TIME,
    ("tiny_slopes", 1): _NO_LIMIT_TIME,
    ("tiny_slopes", 2): _NO_LIMIT_TIME,
    ("tiny_slopes", 3): _NO_LIMIT_TIME,
    ("mixed", 1): _NO_LIMIT_TIME,
    ("mixed", 3): _NO_LIMIT_TIME,
}


def _run(raw: dict, tmp_path: Path, args: list[str], timeout: float) -> tuple[int | None, float, str, dict | None]:
    """(exit code or None if killed at ``timeout``, wall seconds, output, plan JSON or None)."""
    src, out = tmp_path / "wide.yaml", tmp_path / "plan.json"
    src.write_text(as_yaml(raw))
    cmd = [sys.executable, "-m", "planner.cli", "plan", str(src), "--json", str(out), *args]
    t0 = time.perf_counter()
    try:
        proc = subprocess.run(cmd, cwd=ROOT, capture_output=True, text=True, timeout=timeout)
    except subprocess.TimeoutExpired:
        return None, time.perf_counter() - t0, "", None
    wall = time.perf_counter() - t0
    plan = json.loads(out.read_text()) if proc.returncode == 0 and out.exists() else None
    return proc.returncode, wall, proc.stdout + proc.stderr, plan


def _check(raw: dict, rc: int | None, text: str, plan: dict | None, limited: bool) -> None:
    """The outcome rules of the module docstring."""
    assert rc is not None, "killed: did not finish in the time allowed"
    if rc == 2:
        assert NAMES_A_FIELD.search(text), f"refused without naming the numbers:\n{text}"
        return
    assert rc == 0, f"exit {rc} on a feasible scenario:\n{text[-800:]}"
    from planner import validate_scenario

    s, _ = validate_scenario(raw)
    nums = scenario_numbers(s)
    ref = enumerate_plans(s)
    assert ref.feasible and ref.bound - ref.profit <= 1e-8 * max(abs(ref.profit), 1.0)  # reference certified
    vol = np.array([p["volume"] for p in plan["products"]])
    run = np.array([p["running"] for p in plan["products"]])
    assert np.all(vol >= 0) and np.all(vol <= nums.cap * (1 + LIMIT_REL))
    assert np.all(nums.H @ vol <= nums.capacity * (1 + LIMIT_REL)), "a capacity is broken"
    on = run | nums.forced
    assert np.all(vol[on & (nums.forced | nums.choice)] >= nums.floor[on & (nums.forced | nums.choice)]
                  * (1 - LIMIT_REL)), "a floor is broken"
    assert np.all(vol[~run] == 0.0)
    scale = max(abs(ref.profit), 1.0)
    mine = nums.profit(vol, run) - nums.plant
    assert mine == pytest.approx(plan["profit"], rel=WIDE_ROUND, abs=WIDE_ROUND * scale)
    target = ref.profit - nums.plant
    assert plan["bound"] >= target - WIDE_ROUND * scale, "bound below a feasible plan's profit"
    assert mine <= ref.bound - nums.plant + 1e-6 * scale
    if not limited:
        assert plan["status"] == "optimal", f"status {plan['status']!r} with no time limit"
    if plan["status"] == "optimal":
        gap = plan["gap"]
        assert gap <= 1e-4 * (1 + 1e-9)
        assert plan["profit"] >= target - 1e-4 * scale - WIDE_ROUND * scale


def _cases(known: dict, pairs) -> list:
    """The cases; those in ``known`` failed before the solve engine (their diagnosis is kept there) and are
    now plain regression tests."""
    return [pytest.param(k, s, id=f"{k}-{s}") for k, s in pairs]


_DEFAULT_NO_LIMIT = [("huge_fixed", 0), ("huge_fixed", 1), ("tiny_slopes", 0), ("tiny_usage", 0), ("mixed", 2)]
#: The slow variants: the rest of seeds 0..3 of each kind, less repeats of a failure already shown.
_MORE_NO_LIMIT = [("huge_fixed", 3), ("tiny_slopes", 1), ("tiny_usage", 1), ("tiny_usage", 2), ("tiny_usage", 3),
                  ("mixed", 0), ("mixed", 1), ("mixed", 3)]


@pytest.mark.parametrize("kind,seed", _cases(NO_LIMIT_KNOWN, _DEFAULT_NO_LIMIT))
def test_wide_magnitudes_plan_right_or_are_refused(tmp_path, kind, seed):
    raw = wide_scenario(seed, kind)
    rc, _, text, plan = _run(raw, tmp_path, ["--no-capacity"], NO_LIMIT_SECONDS)
    _check(raw, rc, text, plan, limited=False)


@pytest.mark.slow
@pytest.mark.parametrize("kind,seed", _cases(NO_LIMIT_KNOWN, _MORE_NO_LIMIT))
def test_more_wide_magnitudes_plan_right_or_are_refused(tmp_path, kind, seed):
    raw = wide_scenario(seed, kind)
    rc, _, text, plan = _run(raw, tmp_path, ["--no-capacity"], NO_LIMIT_SECONDS)
    _check(raw, rc, text, plan, limited=False)


_EXIT4_LIMIT = ("exit 4 'no feasible plan was found in the time allowed' after ~2 s of a 5 s --time-limit: "
                "the first cut MILP fails (HiGHS numerics) and no fallback slate is tried (README: a feasible "
                "fallback slate is solved and shown)")
#: (kind, seed) → diagnosis, for `planner plan --time-limit 5` (the whole command, analyses included).
LIMIT_KNOWN = {
    ("huge_fixed", 0): _EXIT4_LIMIT,
    ("huge_fixed", 2): _ANALYSIS,
    ("huge_fixed", 3): _HANG,
    ("tiny_slopes", 0): _ANALYSIS,
    ("tiny_slopes", 1): _ANALYSIS,
    ("tiny_slopes", 2): _ANALYSIS,
    ("mixed", 1): _ANALYSIS,
    ("mixed", 3): _ANALYSIS,
}

_DEFAULT_LIMIT = [("huge_fixed", 0), ("huge_fixed", 2), ("tiny_usage", 0), ("mixed", 0)]
# (tiny_slopes 3 is left out: the command took 6.3–7.3 s in three runs and 10.1 s once on a loaded
# machine, just either side of the 8.5 s allowance, so it would pass or fail with the load.)
_MORE_LIMIT = [("huge_fixed", 1), ("huge_fixed", 3), ("tiny_slopes", 0), ("tiny_usage", 1),
               ("tiny_usage", 2), ("mixed", 1), ("mixed", 2)]


def _timed(tmp_path, kind, seed):
    raw = wide_scenario(seed, kind)
    allowed = 1.1 * LIMIT + STARTUP
    rc, wall, text, plan = _run(raw, tmp_path, ["--time-limit", repr(LIMIT)], allowed + 1.0)
    assert rc is not None and wall <= allowed, f"took {wall:.1f} s for --time-limit {LIMIT:g} (allowed {allowed:g} s)"
    _check(raw, rc, text, plan, limited=True)


@pytest.mark.parametrize("kind,seed", _cases(LIMIT_KNOWN, _DEFAULT_LIMIT))
def test_time_limit_is_honoured_on_wide_magnitudes(tmp_path, kind, seed):
    """`planner plan --time-limit 5` (default analyses included) ends within 1.1·5 s + 3 s start-up."""
    _timed(tmp_path, kind, seed)


@pytest.mark.slow
@pytest.mark.parametrize("kind,seed", _cases(LIMIT_KNOWN, _MORE_LIMIT))
def test_time_limit_is_honoured_on_more_wide_magnitudes(tmp_path, kind, seed):
    _timed(tmp_path, kind, seed)


def test_the_wide_check_can_fail(tmp_path):
    """_check refuses a plan whose bound is below the reference and one that breaks a capacity."""
    raw = wide_scenario(0, "tiny_usage")
    rc, _, text, plan = _run(raw, tmp_path, ["--no-capacity"], NO_LIMIT_SECONDS)
    _check(raw, rc, text, plan, limited=False)
    low = dict(plan, bound=plan["profit"] * (1 - 1e-3) if plan["profit"] > 0 else plan["profit"] - 1e3)
    with pytest.raises(AssertionError):
        _check(raw, rc, text, low, limited=False)
    big = dict(plan, products=[dict(p, volume=p["volume"] * 2) for p in plan["products"]])
    with pytest.raises(AssertionError):
        _check(raw, rc, text, big, limited=False)
    with pytest.raises(AssertionError):
        _check(raw, 4, "error: no feasible plan", None, limited=False)
