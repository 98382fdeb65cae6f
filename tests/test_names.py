"""The name rule (planner.scenario.names): refused characters everywhere a name is, and names that differ only in case.

Character classes are the Unicode Standard's general categories (Cc control, Cf
format) and its bidirectional controls (UAX #9, section 2); the normalisation
forms are UAX #15's.  Python's ``unicodedata`` is the outside reference used
to confirm each test character's category.
"""

from __future__ import annotations

import copy
import unicodedata

import pytest

from planner import ScenarioError, validate_scenario

from .conftest import tiny

#: One character of each refused class, with the word the message uses.
REFUSED = {
    "\x00": "a control character", "\x1b": "a control character", "\x7f": "a control character",
    "\x85": "a control character", "\x9b": "a control character",
    "\u202a": "a bidirectional control character", "\u202e": "a bidirectional control character",
    "\u2066": "a bidirectional control character", "\u2069": "a bidirectional control character",
    "\u200e": "a bidirectional control character", "\u061c": "a bidirectional control character",
    "\u200b": "an invisible character", "\u200d": "an invisible character", "\ufeff": "an invisible character",
    "\u2060": "an invisible character", "\u00ad": "an invisible character", "\u2028": "an invisible character",
    "\u3164": "an invisible character", "\ue000": "an unassigned or private-use character",
}


def full() -> dict:
    raw = tiny()
    raw["products"].append({"name": "gadget", "price_intercept": 80, "price_slope": 0.2, "unit_cost": 30,
                            "usage": {"press": 1}, "unit": "pieces"})
    raw["options"] = [{"name": "shift", "adds": {"press": 10}, "cost": 5}]
    raw["uncertainty"] = [{"product": n, "field": "price_intercept", "distribution": "normal", "sd": 1}
                          for n in ("widget", "gadget")]
    raw["correlations"] = [{"products": ["widget", "gadget"], "rho": 0.3}]
    raw |= {"currency": "EUR", "period": "month"}
    return raw


def _set(raw: dict, place: str, text: str) -> str:
    """Put ``text`` into the named place (renaming references too), return the location the validator names."""
    if place in ("name", "currency", "period"):
        raw[place] = text
        return place
    if place == "product name":
        raw["products"][1]["name"] = text
        # the uncertainty and correlation entries still name "gadget": reported too, not checked here
        return "products[2].name"
    if place == "product unit":
        raw["products"][1]["unit"] = text
        return "products[gadget].unit"
    if place == "resource unit":
        raw["resources"][0]["unit"] = text
        return "resources[press].unit"
    if place == "option name":
        raw["options"][0]["name"] = text
        return "options[1].name"
    if place == "usage key":
        raw["products"][1]["usage"] = {text: 1}
        return "products[gadget].usage."
    if place == "adds key":
        raw["options"][0]["adds"] = {text: 10}
        return "options[shift].adds."
    if place == "uncertainty product":
        raw["uncertainty"][1]["product"] = text
        return "uncertainty[2].product"
    if place == "correlated product":
        raw["correlations"][0]["products"][1] = text
        return "correlations[1].products"
    raise AssertionError(place)


PLACES = ["name", "currency", "period", "product name", "product unit", "resource unit", "option name", "usage key",
          "adds key", "uncertainty product", "correlated product"]


def problems(raw) -> list[str]:
    with pytest.raises(ScenarioError) as info:
        validate_scenario(raw)
    return [str(p) for p in info.value.problems]


def test_the_test_characters_are_of_the_classes_named():
    for ch, kind in REFUSED.items():
        cat = unicodedata.category(ch)
        assert {"a control character": {"Cc"}, "a bidirectional control character": {"Cf"},
                "an invisible character": {"Cf", "Zl", "Lo"}, "an unassigned or private-use character": {"Co"}}[kind] \
            >= {cat}, (hex(ord(ch)), cat)


@pytest.mark.parametrize("place", PLACES)
@pytest.mark.parametrize("ch", sorted(REFUSED))
def test_refused_characters_in_every_name(place, ch):
    raw = full()
    where = _set(raw, place, f"gad{ch}get")
    got = [p for p in problems(raw) if p.startswith(where)]
    code = f"U+{ord(ch):04X}"
    assert len(got) == 1 and got[0].endswith(f": contains {REFUSED[ch]} {code} at position 4 (remove it)"), got
    assert ch not in got[0]  # the message never carries the character itself to a terminal


def test_the_first_refused_character_is_named_with_its_position():
    raw = full()
    raw["products"][0]["name"] = "\u202ewid\u200bget"
    assert problems(raw)[0] == "products[1].name: contains a bidirectional control character U+202E at position 1 (remove it)"


def test_descriptions_may_break_lines_but_hold_nothing_else():
    raw = full()
    raw["description"] = "line one\nline two\tend"
    raw["products"][0]["description"] = "fine\r\nstill fine"
    validate_scenario(raw)
    raw["resources"][0]["description"] = "x\x1b]0;title\x07"
    assert problems(raw) == [
        "resources[press].description: contains a control character U+001B at position 2 (remove it)"]


@pytest.mark.parametrize("name", ["café", "名前", "m²", "a\u00a0b", "Ølstykke 3/4\"", "=SUM(A1)", "Δ-line", "🙂"])
def test_visible_text_is_a_name(name):
    raw = full()
    raw["products"][1]["name"] = name
    raw["uncertainty"][1]["product"] = raw["correlations"][0]["products"][1] = name
    s, _ = validate_scenario(raw)
    assert s.products[1].name == name.strip()


@pytest.mark.parametrize("section, a, b, how", [
    ("products", "Oak shelf", "oak SHELF", "case"),
    ("products", "oak shelf", "oak  shelf", "spacing"),
    ("resources", "café", "cafe\u0301", "Unicode form"),
    ("resources", "Ｍill", "Mill", "Unicode form"),
    ("options", "Night Shift", "night  shift", "spacing and case"),
])
def test_names_that_differ_only_in_case_spacing_or_form_are_refused(section, a, b, how):
    raw = full()
    first = raw[section][0]
    twin = copy.deepcopy(first) | {"name": b}
    first["name"] = a
    raw[section].append(twin)
    if section == "resources":
        for p in raw["products"]:
            p["usage"] = {a: 1}
        raw["options"][0]["adds"] = {a: 10}
    if section == "products":
        raw["uncertainty"][0]["product"] = raw["correlations"][0]["products"][0] = a
    got = [p for p in problems(raw) if "differs from" in p]
    assert len(got) == 1 and f"only in {how} (names must differ by more than case, spacing or how accents are " \
        "encoded: rename one)" in got[0], got


def test_lookups_stay_exact_with_a_hint():
    raw = full()
    raw["products"][0]["usage"] = {"Press": 1}
    assert problems(raw) == ["products[widget].usage.Press: names a resource that is not defined (did you mean 'press'?)"]


def test_a_scenario_changed_in_code_is_held_to_the_rule():
    from planner import plan

    s, _ = validate_scenario(full())
    twin = s.model_copy(update={"products": [s.products[0], s.products[1].model_copy(update={"name": "WIDGET"})]})
    with pytest.raises(ScenarioError, match=r"products\[WIDGET\]: differs from products\[widget\] only in case"):
        plan(twin)
    hidden = s.model_copy(update={"resources": [s.resources[0].model_copy(update={"name": "pre\u200bss"})]})
    with pytest.raises(ScenarioError, match=r"resources\[1\]\.name: contains an invisible character U\+200B"):
        plan(hidden)
