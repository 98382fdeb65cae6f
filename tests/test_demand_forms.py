"""Demand stated as two points, a point elasticity or a sales history: each becomes the same line.

Point elasticity ε = (dQ/dP)·(P/Q) (the standard definition).  On price = a − b·Q,
dQ/dP = −1/b, so b = −P/(ε·Q) and a = P·(1 − 1/ε).  The cases below are worked by hand.
"""

from __future__ import annotations

import shutil

import pytest

from planner import ScenarioError, load_scenario, plan, validate_scenario
from planner.scenario.demand import from_elasticity, from_points, point_elasticity
from models.economics import standalone

from .conftest import CASES, tiny


@pytest.mark.parametrize("P, Q, eps, a, b", [
    # P = 100, Q = 1000, ε = −2: b = 100/(2·1000) = 0.05, a = 100 + 0.05·1000 = 150.
    # Check: Q(P) = (150 − P)/0.05 = 3000 − 20P; Q(100) = 1000; dQ/dP·P/Q = −20·100/1000 = −2.
    (100.0, 1000.0, -2.0, 150.0, 0.05),
    # Inelastic: P = 40, Q = 500, ε = −0.5: b = 40/(0.5·500) = 0.16, a = 40·(1 + 2) = 120.
    # Check: Q(P) = 750 − 6.25P; Q(40) = 500; −6.25·40/500 = −0.5.
    (40.0, 500.0, -0.5, 120.0, 0.16),
    # Unit elastic: P = 60, Q = 300, ε = −1: b = 0.2, a = 120 (and revenue peaks exactly there).
    (60.0, 300.0, -1.0, 120.0, 0.2),
])
def test_elasticity_by_hand(P, Q, eps, a, b):
    got_a, got_b = from_elasticity(P, Q, eps)
    assert got_a == pytest.approx(a, rel=1e-12)
    assert got_b == pytest.approx(b, rel=1e-12)
    assert point_elasticity(got_a, got_b, Q) == pytest.approx(eps, rel=1e-12)


def test_unit_elasticity_is_the_revenue_peak():
    # Common practice (textbook microeconomics): revenue is greatest where |ε| = 1.
    a, b = from_elasticity(60.0, 300.0, -1.0)
    import numpy as np

    econ = standalone(np.array([a]), np.array([b]), np.array([0.0]), np.array([0.0]), np.array([np.inf]))[0]
    assert econ.max_revenue_volume == pytest.approx(300.0, rel=1e-12)


def test_two_points_by_hand():
    # (540, 1200) and (600, 900): b = (540 − 600)/(900 − 1200) = 0.2; a = 540 + 0.2·1200 = 780;
    # check 780 − 0.2·900 = 600.
    a, b = from_points(540, 1200, 600, 900)
    assert (a, b) == (pytest.approx(780.0), pytest.approx(0.2))


def product(**demand):
    raw = tiny()
    p = raw["products"][0]
    del p["price_intercept"], p["price_slope"]
    p["demand"] = demand
    return raw


def test_forms_become_the_line_in_validation():
    s, _ = validate_scenario(product(points=[[540, 1200], [600, 900]]))
    assert (s.products[0].price_intercept, s.products[0].price_slope) == (pytest.approx(780), pytest.approx(0.2))
    s, _ = validate_scenario(product(reference_price=100, reference_volume=1000, elasticity=-2))
    assert (s.products[0].price_intercept, s.products[0].price_slope) == (pytest.approx(150), pytest.approx(0.05))
    assert s.products[0].demand_fit is None


def problems(raw, **kw) -> list[str]:
    with pytest.raises(ScenarioError) as info:
        validate_scenario(raw, **kw)
    return [str(p) for p in info.value.problems]


def test_form_errors():
    assert problems(product(reference_price=100, reference_volume=1000, elasticity=2)) == [
        "products[widget].demand.elasticity: must be < 0: demand falls as price rises (got 2) "
        "(price elasticities are negative: write e.g. -1.5)"]
    assert problems(product(points=[[100, 50], [90, 50]])) == [
        "products[widget].demand.points: both points have volume 50: the slope is undefined "
        "(give two points with different volumes)"]
    assert problems(product(points=[[100, 50], [110, 60]])) == [
        "products[widget].demand.points: price rises with volume between the points (slope -1) "
        "(a demand line falls: check the pairs are [price, volume])"]
    assert problems(product(points=[[1, 2]], elasticity=-1)) == [
        "products[widget].demand: needs exactly one form: points, elasticity (reference_price, reference_volume, "
        "elasticity) or history (got points and elasticity)"]
    raw = product(reference_price=100, reference_volume=1000, elasticity=-2, regres="x")
    raw["products"][0]["price_slope"] = 1
    assert problems(raw) == [
        "products[widget].demand.regres: unknown key (did you mean 'regress'?)",
        "products[widget].demand: is given together with price_intercept / price_slope "
        "(give the line one way only: remove one of them)"]


def test_history_fills_line_and_uncertainty(tmp_path):
    shutil.copy(CASES / "rich_sales.csv", tmp_path / "sales.csv")
    raw = product(history="sales.csv", product="hub")
    s, warnings = validate_scenario(raw, base_dir=tmp_path)
    from planner.scenario.fit import fit_history

    ref = next(f for f in fit_history(tmp_path / "sales.csv")[0] if f.product == "hub")  # same fit, directly
    p = s.products[0]
    assert p.price_intercept == ref.intercept and p.price_slope == ref.slope
    fit = p.demand_fit
    assert (fit.intercept_se, fit.slope_se, fit.covariance, fit.n, fit.r2) == (
        ref.intercept_se, ref.slope_se, ref.covariance, 10, ref.r2)
    assert (fit.price_min, fit.price_max, fit.source) == (ref.price_min, ref.price_max, "sales.csv")
    assert problems(product(history="sales.csv"), base_dir=tmp_path) == [
        "products[widget].demand.history: sales.csv has no rows for product 'widget' "
        "(add its rows, or set demand.product)"]
    assert problems(product(history="nowhere.csv"), base_dir=tmp_path) == [
        f"products[widget].demand.history: {tmp_path / 'nowhere.csv'}: cannot be read: No such file or directory "
        "(check the history file's path)"]


def test_wrong_sign_history_is_refused(tmp_path):
    (tmp_path / "h.csv").write_text("product,price,volume\n" + "".join(f"widget,{p},{100 + 3 * p}\n" for p in range(10, 20)))
    got = problems(product(history="h.csv"), base_dir=tmp_path)
    assert len(got) == 1 and "wrong sign: in this history volume rises as price rises" in got[0]


def test_fit_warnings_reach_the_plan_and_extrapolation_is_flagged(tmp_path):
    # Five points priced 95–105 on volume = 1000 − 5·price exactly, i.e. price = 200 − 0.2·volume.
    rows = [(95, 525), (98, 510), (100, 500), (102, 490), (105, 475)]  # volume = 1000 − 5·price exactly
    (tmp_path / "h.csv").write_text("product,price,volume\n" + "".join(f"widget,{p},{q}\n" for p, q in rows))
    raw = product(history="h.csv")  # line: price = 200 − 0.2·volume; unit cost 40
    raw["resources"][0]["capacity"] = 300.0  # press binds at volume 300, so price = 200 − 60 = 140 > 105
    import yaml

    (tmp_path / "s.yaml").write_text(yaml.safe_dump(raw))
    p = plan(tmp_path / "s.yaml")
    assert p.products[0].price == pytest.approx(140.0, rel=1e-9)
    assert p.warnings == [
        "products[widget]: demand fitted from h.csv: few points: 5 observations (8 or more advised); "
        "the intervals are wide",
        "products[widget]: planned price 140.00 is above the prices in its sales history (95.00 to 105.00): "
        "the fitted line is extrapolated there; check that the planned volume is believable"]
    raw["products"][0]["unit_cost"] = 0.0  # unconstrained optimum volume 200/(2·0.2) = 500, price 100: inside
    raw["resources"][0]["capacity"] = 1000.0
    (tmp_path / "s.yaml").write_text(yaml.safe_dump(raw))
    p = plan(tmp_path / "s.yaml")
    assert p.products[0].price == pytest.approx(100.0, rel=1e-9)
    assert not any("extrapolated" in w for w in p.warnings)
