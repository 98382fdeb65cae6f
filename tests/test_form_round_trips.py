"""YAML → xlsx → CSV folder → YAML keeps every valid scenario exactly (a property over generated scenarios).

Each form's reading of the scenario must equal the first YAML's, key for key,
and load to the same validated Scenario.  Empty sections (``options: []``,
``uncertainty: []``, ``correlations: []``, as a filled-in template has them),
empty or space-padded text and text that looks like a number are the cases a
table cell cannot carry by itself; the tables then keep the heading, or carry
the value as JSON.
"""

from __future__ import annotations

from pathlib import Path

import pytest
from click.testing import CliRunner
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st

from planner import load_scenario
from planner.cli.main import main
from planner.scenario.forms.writers import write_scenario
from planner.scenario.loading import read_raw
from planner.scenario.names import name_key

_TEXT = st.text(alphabet="abcxyz ABC019-_=',;:#%é€\"", min_size=0, max_size=8)
_NAME = _TEXT.filter(lambda t: t.strip() != "")
_AMOUNT = st.one_of(st.integers(0, 10**6), st.floats(min_value=0.001, max_value=1e6, allow_nan=False),
                    st.just(0.1 + 0.2), st.just(1 / 3))
_RHO = st.one_of(st.just(0.0), st.floats(min_value=0.001, max_value=1), st.floats(min_value=-1, max_value=-0.001))
_POSITIVE = st.one_of(st.integers(1, 10**4), st.floats(min_value=0.001, max_value=1e4))


def _unique(names: list[str]) -> list[str]:
    out, seen = [], set()
    for n in names:
        if name_key(n) not in seen:
            seen.add(name_key(n))
            out.append(n)
    return out


@st.composite
def scenarios(draw) -> dict:
    """A valid raw scenario using every section, with values a table cell cannot carry by itself."""
    resources = [{"name": n, "capacity": draw(_AMOUNT),
                  **draw(st.fixed_dictionaries({}, optional={"unit": _TEXT, "kind": st.sampled_from(
                      ["work_centre", "material", "other"]), "description": _TEXT}))}
                 for n in _unique(draw(st.lists(_NAME, max_size=3)))]
    products = []
    for n in _unique(draw(st.lists(_NAME, min_size=1, max_size=4))):
        p: dict = {"name": n}
        form = draw(st.sampled_from(["line", "points", "elasticity"]))
        if form == "line":
            p["price_intercept"], p["price_slope"] = draw(_AMOUNT), draw(_AMOUNT)
        elif form == "points":
            p1, q2 = draw(_POSITIVE), draw(_POSITIVE)
            p["demand"] = {"points": [[p1, q2 * 2], [p1 * 1.5, q2]]}
        else:
            p["demand"] = {"reference_price": draw(_POSITIVE), "reference_volume": draw(_POSITIVE),
                           "elasticity": -draw(st.floats(min_value=0.1, max_value=5))}
        p["unit_cost"] = draw(_AMOUNT)
        p["max_volume"] = draw(_AMOUNT)
        p |= draw(st.fixed_dictionaries({}, optional={
            "fixed_cost": _AMOUNT, "must_run": st.booleans(), "unit": _TEXT, "description": _TEXT,
            "demand_fit": st.fixed_dictionaries({"intercept_se": _AMOUNT, "slope_se": _AMOUNT},
                                                optional={"n": st.integers(0, 50), "source": _TEXT})}))
        if resources:
            chosen = draw(st.lists(st.sampled_from([r["name"] for r in resources]), unique=True))
            if chosen:
                p["usage"] = {r: draw(_AMOUNT) for r in chosen}
        products.append(p)
    raw: dict = {"name": draw(_NAME), "products": products}
    raw |= draw(st.fixed_dictionaries({}, optional={"currency": _TEXT, "period": _TEXT, "description": _TEXT,
                                                    "plant_fixed_cost": _AMOUNT}))
    if resources or draw(st.booleans()):
        raw["resources"] = resources
    options = []
    if resources:
        for n in _unique(draw(st.lists(_NAME, max_size=2))):
            res = draw(st.lists(st.sampled_from([r["name"] for r in resources]), min_size=1, unique=True))
            if draw(st.booleans()):
                options.append({"name": n, "adds": {r: draw(_POSITIVE) for r in res}, "cost": draw(_AMOUNT)})
            else:
                options.append({"name": n, "adds_up_to": {r: draw(_POSITIVE) for r in res},
                                "cost_per_unit": draw(_AMOUNT)})
    variants = []
    for n in _unique(draw(st.lists(_NAME, max_size=3))):
        changes = []
        for _ in range(draw(st.integers(1, 3))):
            kind = draw(st.sampled_from(["product", "resource", "option", "plant"]))
            if kind == "resource" and resources:
                changes.append({"resource": draw(st.sampled_from([r["name"] for r in resources])),
                                "field": "capacity", "add": draw(_AMOUNT)})
            elif kind == "option" and options:
                o = draw(st.sampled_from(options))
                changes.append({"option": o["name"], "field": "taken",
                                "set": 1 if "adds" in o else draw(st.sampled_from([0, 0.5, 1]))})
            elif kind == "plant":
                changes.append({"plant": True, "field": "plant_fixed_cost", "add": draw(_AMOUNT)})
            else:
                changes.append({"product": draw(st.sampled_from([p["name"] for p in products])),
                                "field": draw(st.sampled_from(["unit_cost", "fixed_cost", "max_volume"])),
                                "scale": draw(st.floats(min_value=0.5, max_value=1.5))})
        variants.append({"name": n, **draw(st.fixed_dictionaries({}, optional={"description": _TEXT})),
                         "changes": changes})
    uncertain = [p["name"] for p in products if draw(st.booleans())]
    sections = {
        "options": options,
        "uncertainty": [{"product": n, "field": "price_intercept", "distribution": "normal", "sd": draw(_AMOUNT)}
                        for n in uncertain],
        "correlations": ([{"products": uncertain[:2], "rho": draw(_RHO)}]
                         if len(uncertain) >= 2 and draw(st.booleans()) else []),
        "variants": variants,
    }
    for key, entries in sections.items():
        if entries or draw(st.booleans()):  # an empty list, as a template gives it, or no key at all
            raw[key] = entries
    return raw


@pytest.fixture
def no_fsync(monkeypatch):
    """Files are still written atomically; only the flush to disk is skipped (durability is not under test here)."""
    import planner.files

    monkeypatch.setattr(planner.files.os, "fsync", lambda fd: None)


@settings(max_examples=30, deadline=None, derandomize=True,
          suppress_health_check=[HealthCheck.function_scoped_fixture, HealthCheck.too_slow])
@given(raw=scenarios())
def test_every_form_reads_back_exactly(tmp_path_factory, no_fsync, raw):
    d = tmp_path_factory.mktemp("trip")
    write_scenario(raw, d / "a.yaml")
    raw0 = read_raw(d / "a.yaml")
    assert raw0 == raw
    s0, _ = load_scenario(d / "a.yaml")
    write_scenario(raw0, d / "b.xlsx")
    write_scenario(read_raw(d / "b.xlsx"), d / "c_csv")
    write_scenario(read_raw(d / "c_csv"), d / "d.yaml")
    for path in ("b.xlsx", "c_csv", "d.yaml"):
        assert read_raw(d / path) == raw0, path
        assert load_scenario(d / path)[0] == s0, path


def test_a_filled_template_converts_to_every_form(tmp_path):
    """The template's empty sheets (options, uncertainty, correlations ...) become empty sections that convert back."""
    from openpyxl import load_workbook

    run = CliRunner()
    assert run.invoke(main, ["template", str(tmp_path / "t.xlsx")]).exit_code == 0
    wb = load_workbook(tmp_path / "t.xlsx")
    wb["scenario"]["B2"] = "Filled"
    wb["products"].append(["gear", 200, 0.05, 60])
    wb["usage"].append(["gear", "lathe", 0.25])
    wb["resources"].append(["lathe", 600, "h", "work_centre"])
    wb.save(tmp_path / "t.xlsx")
    raw = read_raw(tmp_path / "t.xlsx")
    assert raw["options"] == raw["uncertainty"] == raw["correlations"] == raw["variants"] == []
    for source, target in (("t.xlsx", "t_csv"), ("t_csv", "t2.xlsx"), ("t2.xlsx", "t.yaml"), ("t.yaml", "u_csv")):
        res = run.invoke(main, ["convert", str(tmp_path / source), str(tmp_path / target)])
        assert res.exit_code == 0, res.output
        assert read_raw(tmp_path / target) == raw, target
        load_scenario(tmp_path / target)
    header = (tmp_path / "t_csv" / "correlations.csv").read_text().splitlines()
    assert header == ["product_1,product_2,rho"]


def test_empty_sections_keep_their_headings(tmp_path):
    raw = {"name": "x", "products": [{"name": "p", "price_intercept": 10, "unit_cost": 1, "max_volume": 5}],
           "options": [], "uncertainty": [], "correlations": []}
    write_scenario(raw, tmp_path / "c")
    assert (Path(tmp_path / "c" / "options.csv").read_text().splitlines()
            == ["name,cost,cost_per_unit,description"])
    assert read_raw(tmp_path / "c") == raw
