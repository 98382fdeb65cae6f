"""Uncertainty and correlation entries: every problem in one pass, exact texts (style of test_validation)."""

from __future__ import annotations

import pytest

from planner import ScenarioError, validate_scenario

from .conftest import tiny


def problems(raw) -> list[str]:
    with pytest.raises(ScenarioError) as info:
        validate_scenario(raw)
    return [str(p) for p in info.value.problems]


def two_products() -> dict:
    raw = tiny()
    raw["products"].append({"name": "gadget", "price_intercept": 80, "price_slope": 0.2, "unit_cost": 30,
                            "usage": {"press": 1}})
    return raw


def test_names_targets_and_fields():
    raw = two_products()
    raw["uncertainty"] = [
        {"product": "widgit", "field": "price_intercept", "distribution": "normal", "sd": 3},
        {"product": "widget", "resource": "press", "field": "capacity", "distribution": "normal", "sd": 3},
        {"field": "capacity", "distribution": "normal", "sd": 3},
        {"product": "widget", "field": "capacity", "distribution": "normal", "sd": 3},
        {"resource": "pres", "field": "capacity", "distribution": "normal", "sd": 5},
        {"resource": "press", "field": "unit_cost", "distribution": "normal", "sd": 5},
    ]
    assert problems(raw) == [
        "uncertainty[1].product: names a product that is not defined ('widgit') (did you mean 'widget'?)",
        "uncertainty[2]: needs exactly one of 'product' or 'resource'",
        "uncertainty[3]: needs exactly one of 'product' or 'resource'",
        "uncertainty[4].field: capacity belongs to a resource (a product's uncertain field is price_intercept, "
        "price_slope or unit_cost)",
        "uncertainty[5].resource: names a resource that is not defined ('pres') (did you mean 'press'?)",
        "uncertainty[6].field: a resource's uncertain field is capacity (got 'unit_cost') "
        "(use 'product:' for a product's field)",
    ]


def test_parameters_of_each_distribution():
    raw = two_products()
    raw["uncertainty"] = [
        {"product": "widget", "field": "price_intercept", "distribution": "normal"},
        {"product": "widget", "field": "unit_cost", "distribution": "triangular", "low": 35, "mode": 45, "high": 42},
        {"product": "gadget", "field": "unit_cost", "distribution": "normal", "sd": 2, "low": 1},
        {"product": "gadget", "field": "price_intercept", "distribution": "uniform", "low": 90, "high": 70},
        {"resource": "press", "field": "capacity", "distribution": "uniform", "low": 900},
        {"product": "gadget", "field": "price_slope", "distribution": "triangular", "low": 0.1, "high": 0.3},
    ]
    assert problems(raw) == [
        "uncertainty[1].sd: is required with distribution normal",
        "uncertainty[2]: needs low <= mode <= high (got 35, 45, 42)",
        "uncertainty[3].low: does not go with distribution normal (normal takes sd)",
        "uncertainty[4]: needs low <= high (got 90, 70)",
        "uncertainty[5].high: is required with distribution uniform",
        "uncertainty[6].mode: is required with distribution triangular",
    ]


def test_fitted_needs_the_fit_and_the_intercept_field():
    raw = two_products()
    raw["products"][0]["demand_fit"] = {"intercept_se": 4.0, "slope_se": 0.05}
    raw["uncertainty"] = [
        {"product": "widget", "field": "price_intercept", "distribution": "fitted"},  # fine
        {"product": "gadget", "field": "price_slope", "distribution": "fitted"},
    ]
    assert problems(raw) == [
        "uncertainty[2].field: fitted moves intercept and slope together (use field: price_intercept)",
        "uncertainty[2]: distribution fitted needs products[gadget].demand_fit "
        "(fit the line from sales history first, or give sd / low, high)",
    ]


def test_one_distribution_per_number():
    raw = two_products()
    raw["products"][0]["demand_fit"] = {"intercept_se": 4.0, "slope_se": 0.05}
    raw["uncertainty"] = [
        {"product": "widget", "field": "price_intercept", "distribution": "fitted"},
        {"product": "widget", "field": "price_slope", "distribution": "normal", "sd": 0.01},
        {"resource": "press", "field": "capacity", "distribution": "normal", "sd": 10},
        {"resource": "press", "field": "capacity", "distribution": "uniform", "low": 900, "high": 1000},
    ]
    assert problems(raw) == [
        "uncertainty: price_slope of product 'widget' has 2 distributions "
        "(give one entry per number (fitted covers price_slope too))",
        "uncertainty: capacity of resource 'press' has 2 distributions "
        "(give one entry per number (fitted covers price_slope too))",
    ]


def test_correlations():
    raw = two_products()
    raw["uncertainty"] = [{"product": "widget", "field": "price_intercept", "distribution": "normal", "sd": 3}]
    raw["correlations"] = [
        {"products": ["widget", "gadgett"], "rho": 0.3},
        {"products": ["widget", "gadget"], "rho": 0.3},
        {"products": ["gadget", "widget"], "rho": 0.2},
        {"products": ["widget", "widget"], "rho": 0.2},
        {"products": ["widget", "gadget"], "rho": 1.5},
    ]
    assert problems(raw) == [
        "correlations[5].rho: must be <= 1.0 (got 1.5)",
        "correlations[1].products: names a product that is not defined ('gadgett') (did you mean 'gadget'?)",
        "correlations[2].products: 'gadget' has no uncertainty on price_intercept "
        "(correlation links the products' demand: give each an intercept distribution)",
        "correlations[3].products: 'gadget' has no uncertainty on price_intercept "
        "(correlation links the products' demand: give each an intercept distribution)",
        "correlations[4].products: names the same product twice",
        "correlations[5].products: 'gadget' has no uncertainty on price_intercept "
        "(correlation links the products' demand: give each an intercept distribution)",
        "correlations: gadget and widget are correlated 3 times (give each pair once)",
    ]


def _cannot_hold() -> dict:
    raw = two_products()
    raw["products"].append({"name": "gizmo", "price_intercept": 60, "price_slope": 0.1, "unit_cost": 20,
                            "usage": {"press": 1}})
    raw["uncertainty"] = [{"product": n, "field": "price_intercept", "distribution": "normal", "sd": 3}
                          for n in ("widget", "gadget", "gizmo")]
    raw["correlations"] = [{"products": ["widget", "gadget"], "rho": 0.9},
                           {"products": ["gadget", "gizmo"], "rho": 0.9},
                           {"products": ["widget", "gizmo"], "rho": -0.9}]
    return raw


def test_correlations_that_cannot_hold_together():
    """Refused by validation, so by `check` and every command alike (it was refused only by `risk`, with no file name).

    Outside check (hand calculation): the matrix [[1, .9, -.9], [.9, 1, .9], [-.9, .9, 1]] has
    determinant 1 - 3(.81) + 2(.9)(.9)(-.9) = -2.888 < 0, so it is no correlation matrix.
    """
    import numpy as np

    R = np.array([[1, .9, -.9], [.9, 1, .9], [-.9, .9, 1]])
    assert np.linalg.det(R) == pytest.approx(1 - 3 * 0.81 - 2 * 0.729)
    assert problems(_cannot_hold()) == [
        "correlations: the correlations widget–gadget 0.9, gadget–gizmo 0.9, widget–gizmo -0.9 cannot hold together "
        "(the correlation matrix is not positive semi-definite) (weaken some of them: for example, if A goes with B "
        "and B with C, A cannot go strongly against C)"]


def test_only_the_pairs_that_conflict_are_named():
    raw = _cannot_hold()
    raw["products"].append({"name": "gear", "price_intercept": 60, "price_slope": 0.1, "unit_cost": 20,
                            "usage": {"press": 1}})
    raw["uncertainty"].append({"product": "gear", "field": "price_intercept", "distribution": "normal", "sd": 3})
    raw["correlations"].append({"products": ["gear", "widget"], "rho": 0.3})
    [p] = problems(raw)
    assert "widget–gadget 0.9, gadget–gizmo 0.9, widget–gizmo -0.9 cannot" in p and "gear" not in p


def test_correlations_that_hold_are_accepted():
    """Equal correlations of 0.5 among three products: eigenvalues 2, 0.5, 0.5 (hand calculation), all >= 0."""
    raw = _cannot_hold()
    for c in raw["correlations"]:
        c["rho"] = 0.5
    s, _ = validate_scenario(raw)
    assert [c.rho for c in s.correlations] == [0.5, 0.5, 0.5]


def test_check_and_risk_name_the_file(tmp_path):
    import yaml
    from click.testing import CliRunner

    from planner.cli.main import main

    path = tmp_path / "corr.yaml"
    path.write_text(yaml.safe_dump(_cannot_hold()))
    for command in (["check", str(path)], ["risk", str(path), "--samples", "10"]):
        res = CliRunner().invoke(main, command)
        assert res.exit_code == 2, res.output
        assert f"error: {path}: 1 problem in the scenario:\n  - correlations: the correlations" in res.stderr


def test_a_scenario_changed_in_code_is_checked_again():
    from planner.scenario.guard import check_correlations

    raw = _cannot_hold()
    for c in raw["correlations"]:
        c["rho"] = 0.5
    s, _ = validate_scenario(raw)
    bad = s.model_copy(update={"correlations": [c.model_copy(update={"rho": -0.9 if i == 2 else 0.9})
                                                for i, c in enumerate(s.correlations)]})
    with pytest.raises(ScenarioError, match="cannot hold together"):
        check_correlations(bad)
    check_correlations(s)  # a valid one passes
