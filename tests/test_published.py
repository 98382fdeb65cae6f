"""The planner against published worked examples (sources named per test)."""

from __future__ import annotations

import pytest

from planner import plan

from .conftest import CASES


def test_wyndor_lp_hillier_lieberman_3_1():
    """Hillier & Lieberman, Introduction to Operations Research, §3.1 and §4.7 (Wyndor Glass Co.):
    optimum (x1, x2) = (2, 6), Z = 36; shadow prices y1* = 0, y2* = 1.5, y3* = 1."""
    p = plan(CASES / "wyndor_lp.yaml", rel_gap=1e-9)
    assert p.status == "optimal"
    assert p.profit == pytest.approx(36.0, abs=1e-9)
    vol = {x.name: x.volume for x in p.products}
    assert vol["doors"] == pytest.approx(2.0, abs=1e-9)
    assert vol["windows"] == pytest.approx(6.0, abs=1e-9)
    sp = {r.name: r.shadow_price for r in p.resources}
    assert sp == pytest.approx({"plant_1": 0.0, "plant_2": 1.5, "plant_3": 1.0}, abs=1e-9)
    assert p.gap <= 1e-9


def test_wyndor_price_dependent_hillier_lieberman_13_2():
    """Hillier & Lieberman, §13.2: max 126x1 − 9x1² + 182x2 − 13x2² under the §3.1 limits;
    optimum (8/3, 5), Z = 857; the third limit's shadow price is 26."""
    p = plan(CASES / "wyndor_qp.yaml", rel_gap=1e-9)
    assert p.status == "optimal"
    assert p.profit == pytest.approx(857.0, abs=1e-9)
    vol = {x.name: x.volume for x in p.products}
    assert vol["doors"] == pytest.approx(8 / 3, abs=1e-9)
    assert vol["windows"] == pytest.approx(5.0, abs=1e-9)
    sp = {r.name: r.shadow_price for r in p.resources}
    assert sp["plant_3"] == pytest.approx(26.0, abs=1e-9)
    assert sp["plant_1"] == pytest.approx(0.0, abs=1e-12)
    assert sp["plant_2"] == pytest.approx(0.0, abs=1e-12)
    # Prices from the price–demand lines at the optimum: 126 − 9·8/3 = 102, 182 − 13·5 = 117.
    price = {x.name: x.price for x in p.products}
    assert price == pytest.approx({"doors": 102.0, "windows": 117.0}, abs=1e-9)
