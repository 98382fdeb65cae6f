"""Bad input gets every problem in one pass, each with its location and a fix (texts tested)."""

from __future__ import annotations

import pytest

from planner import ScenarioError, validate_scenario

from .conftest import tiny


def problems(raw) -> list[str]:
    with pytest.raises(ScenarioError) as info:
        validate_scenario(raw)
    return [str(p) for p in info.value.problems]


def test_all_problems_in_one_pass():
    raw = tiny(price_slope=-2, unit_cost="abc", fixd_cost=3, usage={"pres": 1})
    raw["currencyy"] = "$"
    assert problems(raw) == [
        "products[widget].price_slope: must be >= 0 (got -2) (give a value of 0 or more)",
        "products[widget].unit_cost: must be a number (got 'abc') (write digits only, e.g. 1200 or 0.75)",
        "products[widget].fixd_cost: unknown key (did you mean 'fixed_cost'?)",
        "currencyy: unknown key (did you mean 'currency'?)",
        "products[widget].usage.pres: names a resource that is not defined (did you mean 'press'?)",
    ]


def test_duplicate_names():
    raw = tiny()
    raw["products"].append(dict(raw["products"][0]))
    raw["resources"].append({"name": "press", "capacity": 5})
    assert problems(raw) == [
        "products[widget]: name used 2 times (names must be unique)",
        "resources[press]: name used 2 times (names must be unique)",
    ]


def test_missing_and_negative():
    raw = tiny(unit_cost=-1)
    del raw["products"][0]["price_intercept"]
    raw["resources"][0]["capacity"] = -5
    assert problems(raw) == [
        "products[widget].price_intercept: is required but missing (add it)",
        "products[widget].unit_cost: must be >= 0 (got -1) (give a value of 0 or more)",
        "resources[press].capacity: must be >= 0 (got -5) (give a value of 0 or more)",
    ]


def test_not_finite_and_contradictions():
    raw = tiny(price_intercept=float("nan"), min_volume=50, max_volume=10)
    assert problems(raw) == [
        "products[widget].price_intercept: must be a finite number (got nan) (write an ordinary number)",
        "products[widget].min_volume: committed volume 50 exceeds max_volume 10 (lower the commitment or raise the cap)",
    ]


def test_unbounded_fixed_price_product():
    raw = tiny(price_slope=0, usage={})
    assert problems(raw) == [
        "products[widget].max_volume: a fixed-price product with no cap and no resource use would be made "
        "without limit (set max_volume, a price_slope or usage)",
    ]


def test_never_profitable_is_a_warning_not_an_error():
    s, warnings = validate_scenario(tiny(price_intercept=30, unit_cost=40))
    assert warnings == ["products[widget]: price_intercept 30 <= unit_cost 40: never profitable, it will stay shut down"]
    assert s.products[0].name == "widget"


def test_not_a_mapping():
    assert problems([1, 2]) == [
        "the scenario must be a mapping of keys (got list) (start the file with 'name:' and 'products:')"]


def test_unnamed_product_is_located_by_position():
    raw = tiny()
    del raw["products"][0]["name"]
    assert problems(raw) == ["products[1].name: is required but missing (add it)"]
