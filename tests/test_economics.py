"""Standalone cost–volume formulas (Sullivan, Wicks & Koelling, Engineering Economy, ch. 2,
cost–volume relationships: D* = (a − v)/2b, D_R = a/2b, break-even
D = [(a − v) ± √((a − v)² − 4bF)]/2b) on cases worked by hand here."""

from __future__ import annotations

import math

import pytest

from models.economics import standalone


def one(a, b, v, F, cap=math.inf):
    return standalone([a], [b], [v], [F], [cap])[0]


def test_profit_maximising_volume_price_and_profit():
    # a = 100, b = 0.5, v = 40, F = 800: D* = 60/1 = 60, p = 100 − 30 = 70,
    # profit = 60·60 − 0.5·60² − 800 = 1,000; D_R = 100/1 = 100.
    s = one(100, 0.5, 40, 800)
    assert s.optimal_volume == pytest.approx(60.0, abs=1e-12)
    assert s.optimal_price == pytest.approx(70.0, abs=1e-12)
    assert s.max_profit == pytest.approx(1000.0, abs=1e-9)
    assert s.max_revenue_volume == pytest.approx(100.0, abs=1e-12)


def test_two_break_even_volumes():
    # disc = 60² − 4·0.5·800 = 2,000: D = 60 ± √2000 = 15.27864..., 104.72135...
    s = one(100, 0.5, 40, 800)
    low, high = s.break_even
    assert low == pytest.approx(60 - math.sqrt(2000), abs=1e-9)
    assert high == pytest.approx(60 + math.sqrt(2000), abs=1e-9)
    for d in (low, high):  # profit is zero there
        assert 60 * d - 0.5 * d * d - 800 == pytest.approx(0.0, abs=1e-9)


def test_never_breaks_even_when_root_is_imaginary():
    # F = 2,000 > (a − v)²/4b = 1,800: the discriminant is negative.
    s = one(100, 0.5, 40, 2000)
    assert s.break_even == ()
    assert s.max_profit == pytest.approx(-200.0, abs=1e-9)
    assert not s.profitable_within_cap


def test_cap_limits_the_optimum_and_revenue_volume():
    # max_volume 50 < D* = 60: D = 50, p = 75, profit = 3000 − 1250 − 800 = 950.
    s = one(100, 0.5, 40, 800, cap=50)
    assert s.optimal_volume == pytest.approx(50.0)
    assert s.optimal_price == pytest.approx(75.0)
    assert s.max_profit == pytest.approx(950.0)
    assert s.max_revenue_volume == pytest.approx(50.0)


def test_fixed_price_product_is_linear():
    # a = 30, b = 0, v = 20, F = 500, cap 200: best at the cap, profit 10·200 − 500 = 1,500;
    # one break-even volume F/(a − v) = 50, profit rising beyond it.
    s = one(30, 0.0, 20, 500, cap=200)
    assert s.optimal_volume == pytest.approx(200.0)
    assert s.max_profit == pytest.approx(1500.0)
    assert s.break_even == (pytest.approx(50.0), None)
    assert s.max_revenue_volume == pytest.approx(200.0)


def test_unprofitable_product_stays_at_zero():
    s = one(30, 0.1, 35, 0)
    assert s.optimal_volume == 0.0
    assert s.break_even == ()
