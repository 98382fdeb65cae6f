"""One number rule for every numeric field, in every input form and on both YAML paths.

The rule (planner.scenario.numbers): a number is written in plain decimal and
means that decimal value; spellings YAML 1.1 reads otherwise than a reader's
eye (``0400`` is octal 256 to PyYAML, ``6:40`` is base 60, ``0x190`` hex,
``0b…`` binary, ``4_00`` with underscores, ``0o…`` octal in YAML 1.2) are
refused with the decimal to write.  The YAML 1.1 readings asserted below are
from the YAML 1.1 type repository (int and float: "yaml.org/type/int",
"yaml.org/type/float"), checked against PyYAML's own safe loader here.
"""

from __future__ import annotations

import copy
from pathlib import Path
from typing import Any

import pytest
import yaml

from planner import ScenarioError, load_scenario
from planner.scenario import loading

SENTINEL = "@@value@@"


def base() -> dict[str, Any]:
    """A valid scenario touching every numeric field."""
    return {
        "name": "rule", "plant_fixed_cost": 400,
        "products": [
            {"name": "widget", "price_intercept": 400, "price_slope": 0.5, "unit_cost": 40, "fixed_cost": 400,
             "max_volume": 4000, "min_volume": 0, "min_run": 0, "usage": {"press": 0.5},
             "demand_fit": {"intercept_se": 400, "slope_se": 0.5, "covariance": 0.5, "n": 12, "r2": 0.5,
                            "price_min": 400, "price_max": 4000}},
            {"name": "gadget", "unit_cost": 40, "usage": {"press": 0.5},
             "demand": {"points": [[400, 1200], [600, 900]]}},
            {"name": "gizmo", "unit_cost": 40, "usage": {"press": 0.5},
             "demand": {"reference_price": 400, "reference_volume": 400, "elasticity": -1.5}},
        ],
        "resources": [{"name": "press", "capacity": 400000, "unit": "h"}],
        "options": [{"name": "shift", "adds": {"press": 400}, "cost": 400},
                    {"name": "overtime", "adds_up_to": {"press": 400}, "cost_per_unit": 400}],
        "uncertainty": [
            {"product": "widget", "field": "price_intercept", "distribution": "normal", "sd": 400, "mean": 400},
            {"product": "gadget", "field": "price_intercept", "distribution": "uniform", "low": 400, "high": 4000},
            {"product": "gizmo", "field": "price_intercept", "distribution": "triangular", "low": 1, "mode": 400,
             "high": 4000},
            {"resource": "press", "field": "capacity", "distribution": "normal", "sd": 400},
        ],
        "correlations": [{"products": ["widget", "gadget"], "rho": 0.5}],
    }


#: (path in the raw dict, the location the validator names, a valid value there)
FIELDS: list[tuple[tuple[Any, ...], str, float]] = [
    (("plant_fixed_cost",), "plant_fixed_cost", 400),
    *[(("products", 0, f), f"products[widget].{f}", v) for f, v in (
        ("price_intercept", 400), ("price_slope", 0.5), ("unit_cost", 40), ("fixed_cost", 400),
        ("max_volume", 4000), ("min_volume", 400), ("min_run", 400))],
    (("products", 0, "usage", "press"), "products[widget].usage.press", 0.5),
    *[(("products", 0, "demand_fit", f), f"products[widget].demand_fit.{f}", v) for f, v in (
        ("intercept_se", 400), ("slope_se", 0.5), ("covariance", 0.5), ("n", 12), ("r2", 0.5),
        ("price_min", 400), ("price_max", 4000))],
    (("products", 1, "demand", "points", 0, 0), "products[gadget].demand.points", 400),
    (("products", 1, "demand", "points", 1, 1), "products[gadget].demand.points", 900),
    *[(("products", 2, "demand", f), f"products[gizmo].demand.{f}", v) for f, v in (
        ("reference_price", 400), ("reference_volume", 400), ("elasticity", -1.5))],
    (("resources", 0, "capacity"), "resources[press].capacity", 400000),
    (("options", 0, "adds", "press"), "options[shift].adds.press", 400),
    (("options", 0, "cost"), "options[shift].cost", 400),
    (("options", 1, "adds_up_to", "press"), "options[overtime].adds_up_to.press", 400),
    (("options", 1, "cost_per_unit"), "options[overtime].cost_per_unit", 400),
    (("uncertainty", 0, "sd"), "uncertainty[1].sd", 400),
    (("uncertainty", 0, "mean"), "uncertainty[1].mean", 400),
    (("uncertainty", 1, "low"), "uncertainty[2].low", 400),
    (("uncertainty", 1, "high"), "uncertainty[2].high", 4000),
    (("uncertainty", 2, "mode"), "uncertainty[3].mode", 400),
    (("correlations", 0, "rho"), "correlations[1].rho", 0.5),
]
IDS = [".".join(map(str, f[0])) for f in FIELDS]

#: Spellings of 400 that YAML 1.1 reads otherwise or that are not plain decimal, with the fix the planner gives.
REFUSED = {
    "0400": "write 400", "0400.0": "write 400.0", "6:40": "write 6.6667 if it means hours and minutes, or 400 if minutes",
    "0x190": "write 400", "0o620": "write 400", "0b110010000": "write 400", "4_00": "write 400",
    "'0400'": "write 400", '"4_00"': "write 400", "' 0x190 '": "write 400",
}


def put(raw: dict, path: tuple, value: Any) -> dict:
    out = copy.deepcopy(raw)
    x = out
    for part in path[:-1]:
        x = x[part]
    x[path[-1]] = value
    return out


def yaml_with(raw: dict, path: tuple, written: str) -> str:
    """The scenario as YAML with ``written`` put verbatim where ``path`` points (block or flow style)."""
    text = yaml.safe_dump(put(raw, path, SENTINEL), sort_keys=False, default_flow_style=None)
    assert text.count(f"'{SENTINEL}'") == 1
    return text.replace(f"'{SENTINEL}'", written)


@pytest.fixture(params=["pyyaml", "fast"])
def reader(request, monkeypatch):
    """Both YAML paths: PyYAML's, and the fast reader offered every file (it must agree or decline)."""
    if request.param == "fast":
        monkeypatch.setattr(loading, "FAST_FROM_BYTES", 0)
    return request.param


def problems(path: Path) -> list[str]:
    with pytest.raises(ScenarioError) as info:
        load_scenario(path)
    return [str(p) for p in info.value.problems]


def test_the_base_scenario_is_valid(tmp_path, reader):
    f = tmp_path / "s.yaml"
    f.write_text(yaml.safe_dump(base(), sort_keys=False))
    load_scenario(f)


def test_yaml_11_readings_are_what_the_rule_guards_against():
    """PyYAML (YAML 1.1) reads these plainly written scalars as numbers other than the decimal a reader sees."""
    read = {t: yaml.safe_load(f"a: {t}")["a"] for t in ("0400", "6:40", "0x190", "0b110010000", "4_00", "0o620")}
    assert read == {"0400": 256, "6:40": 400, "0x190": 400, "0b110010000": 400, "4_00": 400, "0o620": "0o620"}


@pytest.mark.parametrize("path, where, valid", FIELDS, ids=IDS)
def test_every_spelling_is_refused_in_every_numeric_field(tmp_path, reader, path, where, valid):
    for written, fix in REFUSED.items():
        f = tmp_path / "s.yaml"
        f.write_text(yaml_with(base(), path, written))
        got = problems(f)
        mine = [p for p in got if f"{where}" in p]
        assert len(mine) == 1, (written, got)
        assert "must be a plain decimal number" in mine[0] and mine[0].endswith(f"({fix})"), (written, mine[0])
        if not written.startswith(("'", '"')) and written != "0o620":  # YAML typed it: its line is named
            assert mine[0].startswith("line "), mine[0]


def _plain_spellings(v: float) -> list[str]:
    text = repr(float(v)) if not float(v).is_integer() else str(int(v))
    out = [text, repr(float(v)), f"{v:e}", f'"{text}"', f"'{v:e}'"]
    if v >= 0:
        out.append("+" + text)
    if 0 < v < 1:
        out.append(text.lstrip("0"))  # .5
    return out


@pytest.mark.parametrize("path, where, valid", FIELDS, ids=IDS)
def test_plain_decimal_means_its_value_in_every_numeric_field(tmp_path, reader, path, where, valid):
    f = tmp_path / "ref.yaml"
    f.write_text(yaml.safe_dump(put(base(), path, valid), sort_keys=False))
    ref, _ = load_scenario(f)
    for written in _plain_spellings(valid):
        f = tmp_path / "s.yaml"
        f.write_text(yaml_with(base(), path, written))
        got, _ = load_scenario(f)
        assert got == ref, written


@pytest.mark.parametrize("written", ["true", "yes", ".inf", "-.inf", ".nan", "'inf'", "'nan'", "'Infinity'",
                                     "1.0e+16", "'1e16'", "1.0e-13"])
@pytest.mark.parametrize("path, where, valid", FIELDS[::3], ids=IDS[::3])
def test_booleans_non_finite_and_out_of_range_are_refused_everywhere(tmp_path, path, where, valid, written):
    f = tmp_path / "s.yaml"
    f.write_text(yaml_with(base(), path, written))
    mine = [p for p in problems(f) if where in p]
    assert len(mine) == 1
    assert any(m in mine[0] for m in ("not true/false", "must be a finite number", "is too large", "is too small",
                                      "must be <=")), mine[0]


@pytest.mark.parametrize("form", ["csv", "xlsx"])
def test_table_forms_hold_text_to_the_same_rule(tmp_path, form):
    """A CSV or text cell is text: '0400' is refused there too (it read as 400 in CSV and 256 in YAML before)."""
    from planner.scenario.forms.writers import write_scenario

    raw = base()
    raw["resources"][0]["capacity"] = "0400"
    raw["products"][0]["unit_cost"] = "4_0"
    raw["options"][0]["cost"] = "6:40"
    raw["correlations"][0]["rho"] = "0x1"
    target = tmp_path / ("s.xlsx" if form == "xlsx" else "s")
    write_scenario(raw, target)
    got = problems(target)
    assert [p.split(": ", 1)[1] for p in got] == [
        "must be a plain decimal number: '4_0' has '_' between its digits (write 40)",
        "must be a plain decimal number: '0400' has a leading zero (write 400)",
        "must be a plain decimal number: '6:40' is written in base 60, like a time "
        "(write 6.6667 if it means hours and minutes, or 400 if minutes)",
        "must be a plain decimal number: '0x1' is written in hexadecimal (1 in decimal) (write 1)",
    ]
    assert "(products[widget].unit_cost)" in got[0] and "(resources[press].capacity)" in got[1]


def test_check_does_not_call_such_a_file_valid(tmp_path):
    from click.testing import CliRunner

    from planner.cli.main import main

    f = tmp_path / "s.yaml"
    f.write_text(yaml_with(base(), ("resources", 0, "capacity"), "0400"))
    res = CliRunner().invoke(main, ["check", str(f)])
    assert res.exit_code == 2 and "valid" not in res.output
    assert "0400 has a leading zero, which YAML reads as the octal number 256 (write 400)" in res.stderr
