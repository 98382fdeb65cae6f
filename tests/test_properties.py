"""Property-based tests (hypothesis) over generated scenarios, valid and corrupted.

Properties checked on every generated valid scenario (invented numbers):

- every returned plan keeps every limit within 1e-7 relative, every cap and
  commitment, and makes nothing of a product it shuts down;
- its profit is never below the best plan a simple greedy finds (products
  added one by one in several orders, each at its best volume in the room
  left; computed here from the raw numbers, independently of the planner);
- no single product's volume can be moved alone (nor the product switched on
  or off alone) to raise profit by more than the certified gap;
- "optimal" always comes with a gap within the one asked for.

Every generated scenario that validates must plan with status ``optimal`` within
the gap asked for, or be refused with InfeasibleError only where its commitments
truly overload a limit (checked independently, by exact sums); a SolverError or
any other error is a failure; plans are compared with the highspy slate
enumeration of tests/reference.py.  Corrupted scenarios (a valid one with a field
replaced by junk, a key dropped or misspelt) must give a ScenarioError or plan
under the same rule; the fuzz run
of the loader feeds it arbitrary bytes and mangled YAML text, a bounded
number of examples so it fits in CI.
"""

from __future__ import annotations

import copy
import json
import math

import pytest
import yaml
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st

from planner import InfeasibleError, ScenarioError, plan, validate_scenario
from planner.scenario.loading import load_scenario

GAP = 1e-6
LIMIT_REL = 1e-7
FAST = settings(max_examples=30, deadline=None, suppress_health_check=[HealthCheck.too_slow], derandomize=True)


def amount(hi: float):
    """A number in [0, hi], with anything below 1e-6 made 0 (the validator refuses 0 < |x| < 1e-12)."""
    return st.floats(0.0, hi).map(lambda t: 0.0 if t < 1e-6 else t)


@st.composite
def scenarios(draw) -> dict:
    n = draw(st.integers(1, 5))
    m = draw(st.integers(1, 3))
    res = [f"r{j}" for j in range(m)]
    products = []
    for i in range(n):
        a = draw(st.floats(1.0, 1000.0))
        v = a * draw(amount(1.2))
        b = draw(st.one_of(st.just(0.0), st.floats(1e-4, 1.0)))
        usage = {r: draw(st.floats(0.01, 5.0)) for r in res if draw(st.booleans())}
        cap = draw(st.floats(1.0, 5000.0)) if (b == 0 or draw(st.booleans())) else None
        p = {"name": f"p{i}", "price_intercept": a, "price_slope": b, "unit_cost": v,
             "fixed_cost": draw(amount(5e4)), "usage": usage}
        if cap is not None:
            p["max_volume"] = cap
        hi = cap if cap is not None else 500.0
        if draw(st.integers(0, 3)) == 0:
            p["min_run"] = draw(amount(hi))
        if draw(st.integers(0, 5)) == 0:
            p["min_volume"] = draw(amount(min(hi, 200.0)))
        if draw(st.integers(0, 6)) == 0:
            p["must_run"] = True
        products.append(p)
    resources = [{"name": r, "capacity": draw(amount(5000.0)), "unit": "h"} for r in res]
    return {"name": "generated", "products": products, "resources": resources}


def _contrib(a, v, b, D):
    return (a - v) * D - b * D * D


def _best_in(a, v, b, lo, hi):
    """Volume in [lo, hi] with the highest concave contribution."""
    if b > 0:
        return min(max((a - v) / (2 * b), lo), hi)
    return hi if a - v > 0 else lo


def greedy_profit(raw: dict) -> float:
    """Best profit over several greedy orders: forced floors first, then products one by one."""
    prods, caps = raw["products"], {r["name"]: r["capacity"] for r in raw["resources"]}
    forced = [bool(p.get("must_run")) or p.get("min_volume", 0) > 0 for p in prods]
    floor = [max(p.get("min_volume", 0.0), p.get("min_run", 0.0)) if f else 0.0 for p, f in zip(prods, forced)]
    stand = [p["price_intercept"] - p["unit_cost"] for p in prods]
    orders = [sorted(range(len(prods)), key=lambda k: -stand[k]), list(range(len(prods))),
              list(reversed(range(len(prods))))]
    best = -math.inf
    for order in orders:
        rem = dict(caps)
        vol = list(floor)
        for k, p in enumerate(prods):
            for r, h in p["usage"].items():
                rem[r] -= h * vol[k]
        if any(x < -1e-9 for x in rem.values()):
            return -math.inf  # commitments do not fit: no plan at all
        total = 0.0
        for k in order:
            p = prods[k]
            a, v, b, F = p["price_intercept"], p["unit_cost"], p["price_slope"], p.get("fixed_cost", 0.0)
            room = min([rem[r] / h for r, h in p["usage"].items() if h > 0] + [math.inf])
            hi = min(p.get("max_volume", math.inf), vol[k] + max(room, 0.0))
            can_stop = not forced[k] and (F > 0 or p.get("min_run", 0.0) > 0)
            lo = floor[k] if forced[k] else p.get("min_run", 0.0)
            if lo > hi:
                D = vol[k]  # cannot run (or, if forced, stays at its floor)
            else:
                D = _best_in(a, v, b, lo, hi)
            gain = _contrib(a, v, b, D) - F
            if can_stop and (lo > hi or gain <= 0):
                continue  # shut down: no volume, no fixed cost
            for r, h in p["usage"].items():
                rem[r] -= h * (D - vol[k])
            vol[k] = D
            total += gain  # F is 0 for a product without an on/off choice, or unavoidable if forced
        best = max(best, total)
    return best


def check_plan(raw: dict, p, gap: float = GAP) -> None:
    prods = {x["name"]: x for x in raw["products"]}
    caps = {r["name"]: r["capacity"] for r in raw["resources"]}
    used = {r: 0.0 for r in caps}
    for pp in p.products:
        x = prods[pp.name]
        forced = bool(x.get("must_run")) or x.get("min_volume", 0) > 0
        assert pp.volume >= -1e-12
        assert pp.volume <= x.get("max_volume", math.inf) * (1 + LIMIT_REL)
        if not pp.running:
            assert pp.volume == 0.0 and not forced
        else:
            floor = max(x.get("min_volume", 0.0), x.get("min_run", 0.0))
            assert pp.volume >= floor * (1 - LIMIT_REL) - 1e-9
        for r, h in x["usage"].items():
            used[r] += h * pp.volume
    for r, cap in caps.items():
        assert used[r] <= cap * (1 + LIMIT_REL) + 1e-9, (r, used[r], cap)
    if p.status == "optimal":
        assert p.gap <= gap * (1 + 1e-9)


def check_no_single_move(raw: dict, p) -> None:
    """No product's volume (or on/off state) changed alone raises profit by more than the gap."""
    prods = {x["name"]: x for x in raw["products"]}
    caps = {r["name"]: r["capacity"] for r in raw["resources"]}
    vol = {pp.name: pp.volume for pp in p.products}
    used = {r: sum(prods[k]["usage"].get(r, 0.0) * vol[k] for k in vol) for r in caps}
    tol = GAP * max(abs(p.profit), 1.0) * 1.01 + 1e-7
    for pp in p.products:
        x = prods[pp.name]
        a, v, b, F = x["price_intercept"], x["unit_cost"], x["price_slope"], x.get("fixed_cost", 0.0)
        forced = bool(x.get("must_run")) or x.get("min_volume", 0) > 0
        can_stop = not forced and (F > 0 or x.get("min_run", 0.0) > 0)
        room = min([(caps[r] - used[r]) / h for r, h in x["usage"].items() if h > 0] + [math.inf])
        hi = min(x.get("max_volume", math.inf), pp.volume + max(room, 0.0))
        floor = max(x.get("min_volume", 0.0), x.get("min_run", 0.0))
        now = _contrib(a, v, b, pp.volume)
        if pp.running or not can_stop:
            lo = floor if (forced or can_stop) else 0.0
            D = _best_in(a, v, b, lo, hi)
            assert _contrib(a, v, b, D) - now <= tol, ("move", pp.name, pp.volume, D)
            if can_stop:
                assert F - now <= tol, ("shut down", pp.name)
        elif floor <= hi:
            D = _best_in(a, v, b, floor, hi)
            assert _contrib(a, v, b, D) - F <= tol, ("start", pp.name, D)


def check_outcome(raw: dict, s, gap: float):
    """Plan a validated scenario: a plan, optimal within ``gap``, or InfeasibleError only when it must be.

    Returns the plan, or None for a scenario rightly refused as infeasible.

    The commitments' fit is checked independently (tests/reference.py: every forced product's
    floor, summed exactly, against each capacity): fitting with a margin of 1e-9 must plan;
    short by more than 1e-7 (the planner's limit tolerance) must be refused; in between,
    rounding, either is right.  SolverError, a time-limit status with no time limit, or any other
    error fails the property.  Plans are also compared with the highspy slate enumeration.
    """
    from .reference import enumerate_plans, floors_fit, scenario_numbers

    nums = scenario_numbers(s)
    fits, short = floors_fit(nums, nums.forced, rel=-1e-9), not floors_fit(nums, nums.forced, rel=1e-7)
    try:
        p = plan(s, rel_gap=gap)
    except InfeasibleError as e:
        assert e.conflicts and not fits, "feasible commitments called infeasible"
        return None
    assert not short, "commitments that do not fit were given a plan"
    assert p.status == "optimal", (p.status, p.solver.get("messages"))
    check_plan(raw, p, gap)
    ref = enumerate_plans(s)
    if ref.feasible:
        target = ref.profit - nums.plant
        assert p.profit >= target - gap * max(abs(target), 1.0) * 1.01 - 1e-9 * max(abs(target), 1.0)
        assert p.bound >= target - 1e-9 * max(abs(target), 1.0)
    return p


@FAST
@given(scenarios())
def test_generated_plans_keep_limits_beat_greedy_and_are_locally_optimal(raw):
    s, _ = validate_scenario(raw)  # the generator writes valid scenarios: a ScenarioError fails here
    p = check_outcome(raw, s, GAP)
    if p is None:
        assert greedy_profit(raw) == -math.inf  # the floors truly overload a limit (greedy agrees)
        return
    check_no_single_move(raw, p)
    assert json.loads(p.to_json())["status"] == p.status  # strict JSON: no NaN or infinity anywhere
    assert p.profit >= greedy_profit(raw) - GAP * max(abs(p.profit), 1.0) * 1.01 - 1e-7


JUNK = st.one_of(st.none(), st.booleans(), st.text(max_size=8), st.integers(-10**20, 10**20),
                 st.floats(allow_nan=True, allow_infinity=True), st.lists(st.integers(), max_size=3),
                 st.dictionaries(st.text(max_size=3), st.integers(), max_size=2))


@st.composite
def corrupted(draw) -> dict:
    raw = copy.deepcopy(draw(scenarios()))
    for _ in range(draw(st.integers(1, 3))):
        kind = draw(st.sampled_from(["replace", "drop", "misspell", "top", "usage"]))
        section = draw(st.sampled_from(["products", "resources"]))
        entry = draw(st.sampled_from(raw[section])) if isinstance(raw.get(section), list) and raw[section] else None
        if not isinstance(entry, dict):
            continue
        key = draw(st.sampled_from(sorted(entry)))
        if kind == "replace":
            entry[key] = draw(JUNK)
        elif kind == "drop":
            entry.pop(key)
        elif kind == "misspell":
            entry[key[:-1] + "x"] = entry.pop(key)
        elif kind == "top":
            raw[draw(st.sampled_from(["products", "resources", "name", "options"]))] = draw(JUNK)
        elif isinstance(entry.get("usage"), dict):
            entry["usage"][draw(st.text(max_size=4))] = draw(JUNK)
    return raw


@settings(max_examples=120, deadline=None, suppress_health_check=[HealthCheck.too_slow], derandomize=True)
@given(corrupted())
def test_corrupted_scenarios_give_a_plan_or_a_scenario_error(raw):
    """Junk is refused with a ScenarioError listing the problems; what passes validation plans like
    any valid scenario (check_outcome: optimal, or infeasible only when the commitments do not fit;
    a SolverError fails)."""
    try:
        s, _ = validate_scenario(raw)
    except ScenarioError as e:
        assert e.problems and all(str(p) for p in e.problems)
        return
    check_outcome(as_raw(s), s, 1e-4)


def as_raw(s) -> dict:
    """The validated scenario as a raw dict with its defaults filled in (no max_volume where none)."""
    raw = s.model_dump()
    for p in raw["products"]:
        if p["max_volume"] is None:
            del p["max_volume"]
    return raw


VALID_YAML = yaml.safe_dump({"name": "fuzz", "products": [
    {"name": "a", "price_intercept": 50, "price_slope": 0.01, "unit_cost": 20, "usage": {"mill": 0.5}}],
    "resources": [{"name": "mill", "capacity": 400, "unit": "h"}]})


@st.composite
def mangled_yaml(draw) -> bytes:
    text = bytearray(VALID_YAML.encode())
    for _ in range(draw(st.integers(1, 6))):
        pos = draw(st.integers(0, len(text)))
        op = draw(st.sampled_from(["insert", "delete", "replace"]))
        chunk = draw(st.sampled_from([b":", b"-", b" ", b"\t", b"\n", b"[", b"{", b"}", b"&a", b"*a", b"!!str",
                                      b"'", b'"', b"#", b"\xff", b"\x00", b"1e400", b"yes", b"~", b"<<: *a"]))
        if op == "insert":
            text[pos:pos] = chunk
        elif op == "delete":
            del text[pos:pos + draw(st.integers(1, 5))]
        else:
            text[pos:pos + len(chunk)] = chunk
    return bytes(text)


@settings(max_examples=300, deadline=None, suppress_health_check=[HealthCheck.too_slow,
                                                                   HealthCheck.function_scoped_fixture],
          derandomize=True)
@given(st.one_of(mangled_yaml(), st.binary(max_size=300)))
def test_fuzz_loader_never_raises_anything_but_a_scenario_error(tmp_path, data):
    f = tmp_path / "fuzz.yaml"
    f.write_bytes(data)
    try:
        load_scenario(f)
    except ScenarioError as e:
        assert e.problems and "Traceback" not in str(e)


def test_the_checks_can_fail(demo_path):
    """The property checks catch a plan moved off its optimum, or one breaking a limit."""
    from dataclasses import replace

    raw = yaml.safe_load(demo_path.read_text())
    p = plan(demo_path, rel_gap=GAP)
    check_plan(raw, p)
    check_no_single_move(raw, p)
    k = next(i for i, x in enumerate(p.products) if x.running and x.volume > 100)
    moved = copy.copy(p)
    moved.products = list(p.products)
    moved.products[k] = replace(p.products[k], volume=p.products[k].volume * 0.9)
    with pytest.raises(AssertionError):
        check_no_single_move(raw, moved)
    moved.products[k] = replace(p.products[k], volume=p.products[k].volume * 1.5)
    with pytest.raises(AssertionError):
        check_plan(raw, moved)
    assert greedy_profit(raw) <= p.profit + raw["plant_fixed_cost"]


def test_greedy_reference_on_a_hand_case():
    """The greedy itself, checked by hand: one product, 1,000 h press, peak (100 − 40)/(2·0.5) = 60 units."""
    from .conftest import tiny

    assert greedy_profit(tiny()) == pytest.approx(60 * 60 - 0.5 * 60 * 60)
