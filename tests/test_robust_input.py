"""Limits on what is read, problems from reading and validating reported in one pass, units, warnings."""

from __future__ import annotations

import pytest
import yaml

from planner import ScenarioError, load_scenario, validate_scenario
from planner.scenario import loading, validate
from planner.scenario.units import amount_hint, canonical, split_amount

from .conftest import tiny


def test_file_size_limit(tmp_path, monkeypatch):
    f = tmp_path / "big.yaml"
    f.write_text(yaml.safe_dump(tiny()))
    monkeypatch.setattr(loading, "MAX_FILE_BYTES", 100)
    with pytest.raises(ScenarioError) as info:
        load_scenario(f)
    assert [str(p) for p in info.value.problems] == [f"{f}: is larger than 0 MiB (split the scenario)"]


def test_product_count_limit(monkeypatch):
    raw = tiny()
    raw["products"] = [dict(raw["products"][0], name=f"w{i}") for i in range(4)]
    monkeypatch.setattr(validate, "MAX_PRODUCTS", 3)
    with pytest.raises(ScenarioError) as info:
        validate_scenario(raw)
    assert [str(p) for p in info.value.problems] == [
        "products: has 4 entries; at most 3 are accepted (split the scenario into several)"]


def test_duplicate_keys_and_schema_problems_in_one_pass(tmp_path):
    f = tmp_path / "s.yaml"
    f.write_text("name: x\nname: y\nproducts:\n  - name: a\n    price_intercept: 10\n    unit_cost: -1\n"
                 "    usage: {m: 1}\nresources:\n  - {name: m, capacity: 5}\n")
    with pytest.raises(ScenarioError) as info:
        load_scenario(f)
    assert [str(p) for p in info.value.problems] == [
        "line 2, column 1: key 'name' is given twice in the same mapping (first on line 1) "
        "(keep one: otherwise only the last would count)",
        "products[a].unit_cost: must be >= 0 (got -1) (give a value of 0 or more)",
    ]


def test_duplicate_keys_alone_still_refuse_a_valid_scenario(tmp_path):
    f = tmp_path / "s.yaml"
    f.write_text(yaml.safe_dump(tiny()) + "name: again\n")
    with pytest.raises(ScenarioError, match="key 'name' is given twice"):
        load_scenario(f)


def test_locate_callback_still_leads_each_problem():
    """Spreadsheet readers pass ``locate`` (sheet, row, column); it comes first in every problem."""
    raw = tiny(unit_cost="12 h")
    with pytest.raises(ScenarioError) as info:
        validate_scenario(raw, locate=lambda where: "sheet products, row 2, column unit_cost")
    assert [str(p) for p in info.value.problems] == [
        "sheet products, row 2, column unit_cost (products[widget].unit_cost): must be a plain number "
        "(got '12 h') (write 12: the unit belongs in the 'unit:' field)"]


def test_zero_capacity_used_by_products_is_a_warning():
    raw = tiny()
    raw["resources"][0]["capacity"] = 0
    _, warnings = validate_scenario(raw)
    assert warnings == ["resources[press]: capacity is 0, so widget cannot be made"]


def test_numeric_text_is_read_as_a_number():
    """PyYAML reads 1e3 (no sign in the exponent) as text; the validator accepts it as the number 1000."""
    s, _ = validate_scenario(yaml.safe_load(yaml.safe_dump(tiny()).replace("unit_cost: 40.0", "unit_cost: 1e3")))
    assert s.products[0].unit_cost == 1000.0


@pytest.mark.parametrize("text, number, unit, value", [
    ("4,160", "4,160", "", 4160.0), ("0,5", "0,5", "", 0.5), ("12 h", "12", "h", 12.0),
    ("0.8 h/piece", "0.8", "h/piece", 0.8), ("€620", "620", "", 620.0), ("1.000,5", "1.000,5", "", None)])
def test_split_amount(text, number, unit, value):
    a = split_amount(text)
    assert (a.number, a.unit, a.value) == (number, unit, value)


def test_unit_spellings_and_rate_checks():
    assert canonical("Hours") == canonical("hrs") == "h" and canonical("Kilograms") == "kg"
    assert amount_hint("2 hours", resource="mill", resource_unit="h") == (
        "must be a plain number", "write 2: the unit belongs in resources[mill].unit")
    assert amount_hint("3 min/pcs", resource="mill", resource_unit="h", product="a", product_unit="pieces")[0] == (
        "must be a plain number, and its unit disagrees: 'min' is not the unit of resources[mill] ('h')")


def test_scenario_changed_in_code_is_checked_before_solving():
    """model_copy(update=...) skips pydantic's validation; the planner checks again before the solver."""
    from planner import plan

    s, _ = validate_scenario(tiny())
    negative = s.model_copy(update={"resources": [s.resources[0].model_copy(update={"capacity": -5.0})]})
    with pytest.raises(ScenarioError) as info:
        plan(negative)
    assert [str(p) for p in info.value.problems] == ["resources[press].capacity: must be a finite number >= 0 (got -5.0)"]
    misspelt = s.model_copy(update={"products": [s.products[0].model_copy(update={"usage": {"pres": 1.0}})]})
    with pytest.raises(ScenarioError) as info:
        plan(misspelt)
    assert [str(p) for p in info.value.problems] == [
        "products[widget].usage.pres: names a resource that is not defined (did you mean 'press'?)"]
    with pytest.raises(ScenarioError, match="extra_capacity.saw: names a resource that is not defined"):
        plan(s, extra_capacity={"saw": 10.0})


def test_min_run_that_can_never_fit_is_a_warning():
    _, warnings = validate_scenario(tiny(min_run=1500, fixed_cost=10.0))  # 1,500 h on a 1,000 h press
    assert warnings == ["products[widget]: its min_run 1500 needs 1500 of press, which has 1000: it can never run"]


def test_option_amount_must_be_positive():
    raw = tiny()
    raw["options"] = [{"name": "shift", "adds": {"press": 0}, "cost": 10}]
    with pytest.raises(ScenarioError) as info:
        validate_scenario(raw)
    assert [str(p) for p in info.value.problems] == [
        "options[shift].adds.press: must be > 0 (got 0) (give a value above 0, or leave the entry out)"]


def test_missing_file_suggests_a_close_name(tmp_path):
    (tmp_path / "spring.yaml").write_text(yaml.safe_dump(tiny()))
    with pytest.raises(ScenarioError) as info:
        load_scenario(tmp_path / "spring.yml")
    assert [str(p) for p in info.value.problems] == [
        f"{tmp_path / 'spring.yml'}: no such file or folder (did you mean '{tmp_path / 'spring.yaml'}'?)"]


def test_an_empty_folder_is_refused_with_a_message(tmp_path):
    """A folder is read as CSV tables; an empty one must say what is missing, not crash."""
    with pytest.raises(ScenarioError) as info:
        load_scenario(tmp_path)
    assert [str(p) for p in info.value.problems] == [
        "file products.csv: is missing (add it with a heading row: name, price_intercept, price_slope, unit_cost, ...)"]
