"""The fast YAML reader gives PyYAML's result exactly, or declines.

Reference: PyYAML's own safe loader (the package-registry library the
scenario format is defined by).  Every case either is declined by
``fast_read`` (returns None, so PyYAML reads it) or reads to the same
values with the same types, key order and float signs.
"""

from __future__ import annotations

import math
from pathlib import Path

import pytest
import yaml
from hypothesis import given, settings
from hypothesis import strategies as st

from planner.scenario.fastyaml import fast_read, yaml_rs
from planner.scenario.loading import read_yaml_checked
from planner.scenario.synth import synthetic_scenario

pytestmark = pytest.mark.skipif(yaml_rs is None, reason="yaml-rs is not installed")


def _same(a, b) -> bool:
    """Equal values of the same types (dict order, -0.0 and NaN included)."""
    if type(a) is not type(b):
        return False
    if isinstance(a, float):
        return (math.isnan(a) and math.isnan(b)) or (a == b and math.copysign(1, a) == math.copysign(1, b))
    if isinstance(a, dict):
        return (list(a) == list(b) and all(_same(x, y) for x, y in zip(a, b))
                and all(_same(a[k], b[k]) for k in a))
    if isinstance(a, list):
        return len(a) == len(b) and all(_same(x, y) for x, y in zip(a, b))
    return a == b


def _pyyaml(text: str):
    try:
        return yaml.load(text, Loader=yaml.SafeLoader), None
    except yaml.YAMLError as e:
        return None, e


def _planner(text: str):
    """What the planner's own loader reads (PyYAML's safe rules, keeping numbers spelled otherwise than plain decimal)."""
    from planner.scenario.loading import parse_yaml

    return parse_yaml(text)


def _check(text: str) -> bool:
    """Assert the fast reader agrees with PyYAML and with the planner's loader on ``text``; True if it took the fast path."""
    fast = fast_read(text)
    if fast is None:
        return False
    ref, err = _pyyaml(text)
    assert err is None, f"fast path read text PyYAML rejects: {text!r} ({err})"
    assert _same(fast, ref), f"{text!r}: fast {fast!r} != PyYAML {ref!r}"
    assert _same(fast, _planner(text)), f"{text!r}: fast {fast!r} != the planner's loader"
    return True


# Texts where YAML 1.1 (PyYAML) and YAML 1.2 (yaml-rs) part ways, or where
# yaml-rs is more lenient than PyYAML: each must be declined or agree.
PARTING = [
    "a: yes", "a: No", "a: off", "a: 010", "a: -07", "a: 1e3", "a: 1.5e3", "a: 1E-3", "a: 0o17",
    "a: 0x1F", "a: 0b101", "a: 1_000", "a: _75.", "a: -.4", "a: 1:30", "a: 2026-01-05",
    "a: 2026-01-05 10:00:00", "<<: {b: 1}\nc: 2", "a: !!str 5", "a: !!float 1", "---\na: 1\n---\nb: 2",
    "%YAML 1.1\n---\na: 1", "\ufeffa: 1", "a: 1 # c\x85b: 2", "a: x\u2028y", "? [1, 2]\n: x",
    "{[1, 2]: x}", "[?, 1]", "{:: 1}", "[7:, 1]", "\t1: x", "a: 1\na: 2", "a: &x [1]\nb: *x",
    "a: |\n  text\n", "a: >\n  folded\n", "a: one\n  two", "a: 'it''s'", 'a: "tab\\tx"', "a: .inf",
    "a: .NaN", "a: ~", "a:", "a: =", "a: 1.0e+400", "a: 12345678901234567890123", "- - x\n- y",
    "a:\n  - 1\n - 2", "a:\n- 1\n- 2", "a: [1, 2", "a: {b: 1", "a: b: c", "a: 1\r\nb: 2\r\n", "a: 1\rb: 2",
    'a: 1\n"a": 2', "x:\n  a: 1\n  'a': 2", "k: {a: 1, a: 2}", "k: [1, 2]\nk: [3]",
    # numbers the planner's loader keeps as written (planner.scenario.numbers): declined, never read as numbers
    "a: 0400", "a: 0400.5", "a: 6:40", "a: 4_00", "a: 0b11", "a: -0x1F", "k: {b: 4,160}", "k: {b: 0,5, c: 1}",
    "k: [4,160]", "a: +12", "a: .5", "a: 1.0e+3", "a: -0", "a: 0.", "a: 00", "a: '0400'",
]


@pytest.mark.parametrize("text", PARTING)
def test_parting_cases_are_declined_or_agree(text: str) -> None:
    _check(text)


def test_numbers_kept_as_written_are_declined() -> None:
    """The fast path never sees a number the planner's loader would keep as written (it has no such type)."""
    for text in ("a: 0400", "a: 6:40", "a: 4_00", "a: 0x1F", "a: 0b11", "k: {b: 4,160}", "a: 0400.5", "a: 1_0.5"):
        assert fast_read(text) is None, text


def test_rules_that_differ_are_declined() -> None:
    """Values YAML 1.1 types differently from 1.2 never take the fast path (common practice: the YAML 1.1 and 1.2 specs)."""
    for text in ("a: yes", "a: 010", "a: 1e3", "a: 0o17", "a: 1:30", "a: 2026-01-05", "<<: {b: 1}",
                 "a: 1\na: 2", 'a: 1\n"a": 2', "k: {a: 1, a: 2}", "\ufeffa: 1"):
        assert fast_read(text) is None, text


def test_a_generated_catalogue_takes_the_fast_path_and_agrees() -> None:
    raw = synthetic_scenario(300, 12, seed=3, fixed_costs="some", density=0.4)
    text = yaml.dump(raw, Dumper=yaml.SafeDumper, sort_keys=False)
    assert _check(text), "a plain generated catalogue should take the fast path"
    flow = yaml.dump(raw, Dumper=yaml.SafeDumper, sort_keys=False, default_flow_style=None)
    _check(flow)


def test_reading_a_file_gives_pyyaml_values(tmp_path: Path, monkeypatch) -> None:
    import planner.scenario.loading as loading

    taken = []
    monkeypatch.setattr(loading, "FAST_FROM_BYTES", 0)  # offer this small file to the fast reader too
    monkeypatch.setattr(loading, "fast_read", lambda text: taken.append(1) or fast_read(text))
    raw = synthetic_scenario(40, 5, seed=7, fixed_costs="near", density=0.5)
    path = tmp_path / "s.yaml"
    path.write_text(yaml.dump(raw, Dumper=yaml.SafeDumper, sort_keys=False), encoding="utf-8")
    got, problems = read_yaml_checked(path)
    assert taken and fast_read(path.read_text(encoding="utf-8")) is not None
    assert problems == []
    assert _same(got, yaml.safe_load(path.read_text(encoding="utf-8")))


def test_keys_given_twice_are_still_located(tmp_path: Path) -> None:
    path = tmp_path / "dup.yaml"
    path.write_text("name: x\nproducts: []\nname: y\n", encoding="utf-8")
    _, problems = read_yaml_checked(path)
    assert len(problems) == 1 and "line 3" in problems[0].where and "given twice" in problems[0].message


_FRIENDLY = ["x", "abc def", "a-b", "p00012", "r000", "É t'é", "名前", "a,b", "a (b) c", "50%", "a/b", "it's",
             "yes", "No", "on", "null", "True", "010", "1e3", "1:30", "2026-01-05", "a#b", "a: b", "", " x",
             "0400", "6:40", "4_00", "0x1F", "0b11", "4,160", "+12", ".5", "1.0e+3", "00", "0."]
_scalars = st.one_of(st.sampled_from(_FRIENDLY), st.integers(-10**20, 10**20), st.booleans(), st.none(),
                     st.floats(allow_nan=True, allow_infinity=True), st.text(max_size=6))
_docs = st.recursive(_scalars, lambda inner: st.one_of(
    st.lists(inner, max_size=4), st.dictionaries(st.one_of(st.sampled_from(_FRIENDLY), st.text(max_size=4)),
                                                 inner, max_size=4)), max_leaves=20)


@settings(max_examples=400, deadline=None)
@given(doc=_docs, flow=st.sampled_from([False, None]), edits=st.lists(
    st.tuples(st.integers(0, 40), st.sampled_from([" ", "", "'", "# c", "  ", "-", ":", "1", "e5", "\t", "0", "_0",
                                                    ",160", ":40"])),
    max_size=3))
def test_dumped_and_edited_documents_agree(doc, flow, edits) -> None:
    """PyYAML's own output, then lightly edited by hand (indents, quotes, comments), reads the same."""
    text = yaml.dump(doc, Dumper=yaml.SafeDumper, default_flow_style=flow, allow_unicode=True, sort_keys=False)
    lines = text.split("\n")
    for i, piece in edits:
        i %= len(lines)
        if piece == "'":
            lines[i] = lines[i].replace("'", "")
        elif piece in (" ", "  "):
            lines[i] = piece + lines[i]
        elif piece == "":
            lines[i] = lines[i][1:]
        else:
            lines[i] = lines[i] + (" " + piece if piece == "# c" else piece)
    _check("\n".join(lines))
    _check("\n".join(lines).replace("'", ""))  # quoted numbers written plain: 0400, 6:40 ... as YAML types them
