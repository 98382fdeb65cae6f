"""Numeric command-line options through click's runner: NaN and infinity refused in every spelling, every
range stated in the message and in --help, out-of-range values refused before anything is solved."""

from __future__ import annotations

import click
import pytest
from click.testing import CliRunner

from planner.cli.main import FiniteFloat, main

from .conftest import ROOT

DEMO = str(ROOT / "scenarios" / "demo.yaml")
HISTORY = str(ROOT / "scenarios" / "sales_history.csv")

#: Every spelling of a non-finite number that Python's float() reads, and overflowing ones.
NON_FINITE = ["nan", "NaN", "-nan", "+NAN", "inf", "-inf", "+inf", "INF", "infinity", "-Infinity",
              "1e999", "-1e999", " nan "]

#: (command line before the option, option, the range as the message states it, the range as --help shows it)
OPTIONS = [
    (["plan", DEMO], "--gap", "a number from 0 to 0.1", "0<=x<=0.1"),
    (["plan", DEMO], "--time-limit", "a number above 0 and at most 1,000,000", "0<x<=1,000,000"),
    (["report", DEMO], "--gap", "a number from 0 to 0.1", "0<=x<=0.1"),
    (["report", DEMO], "--time-limit", "a number above 0 and at most 1,000,000", "0<x<=1,000,000"),
    (["demo"], "--time-limit", "a number above 0 and at most 1,000,000", "0<x<=1,000,000"),
    (["sweep", DEMO, "--resource", "finishing booth", "--to", "4000"], "--from", "a number from 0 to 1e15",
     "0<=x<=1e15"),
    (["sweep", DEMO, "--resource", "finishing booth"], "--to", "a number from 0 to 1e15", "0<=x<=1e15"),
    (["sweep", DEMO, "--resource", "finishing booth", "--to", "4000"], "--steps",
     "a whole number from 1 to 100,000", "1<=x<=100,000"),
    (["sweep", DEMO, "--resource", "finishing booth", "--to", "4000"], "--gap", "a number from 1e-12 to 0.01",
     "1e-12<=x<=0.01"),
    (["risk", DEMO], "--samples", "a whole number from 1 to 1,000,000", "1<=x<=1,000,000"),
    (["risk", DEMO], "--seed", "a whole number from 0 to 4,294,967,295", "0<=x<=4,294,967,295"),
    (["risk", DEMO], "--gap", "a number from 0 to 0.1", "0<=x<=0.1"),
    (["risk", DEMO], "--workers", "a whole number from 0 to 256", "0<=x<=256"),
    (["fit-demand", HISTORY], "--level", "a number from 0.5 to 0.999", "0.5<=x<=0.999"),
    (["compare", DEMO], "--gap", "a number from 0 to 0.1", "0<=x<=0.1"),
    (["compare", DEMO], "--time-limit", "a number above 0 and at most 1,000,000", "0<x<=1,000,000"),
    (["compare", DEMO], "--workers", "a whole number from 0 to 256", "0<=x<=256"),
    (["serve", DEMO], "--port", "a whole number from 0 to 65,535", "0<=x<=65,535"),
    (["serve", DEMO], "--gap", "a number from 0 to 0.1", "0<=x<=0.1"),
    (["serve", DEMO], "--time-limit", "a number above 0 and at most 1,000,000", "0<x<=1,000,000"),
]

#: Values just outside each range (per option): each is refused with the same range in the message.
OUTSIDE = {"--gap": ["2", "-1e-9", "0.1000001"], "--time-limit": ["0", "-5", "1e7"], "--from": ["-1", "2e15"],
           "--to": ["-0.5", "1e16"], "--steps": ["0", "100001", "2.5"], "--samples": ["0", "1000001"],
           "--seed": ["-1", "4294967296"], "--workers": ["-1", "257"], "--level": ["0.4", "1"],
           "--port": ["-1", "65536"]}


def invoke(args):
    return CliRunner().invoke(main, [str(a) for a in args])


def flat(text: str) -> str:
    return " ".join(text.split())


@pytest.mark.parametrize("value", NON_FINITE)
@pytest.mark.parametrize("before,option,wanted,shown", OPTIONS, ids=[f"{o[0][0]}{o[1]}" for o in OPTIONS])
def test_non_finite_values_are_refused_with_the_range(before, option, wanted, shown, value):
    res = invoke(before + [option, value])
    out = flat(res.output)
    assert res.exit_code == 2, res.output
    assert f"Invalid value for '{option}'" in out
    assert "is not a finite number (NaN and infinity are refused)" in out
    assert f"give {wanted}" in out
    assert "Traceback" not in res.output


@pytest.mark.parametrize("before,option,wanted,shown", OPTIONS, ids=[f"{o[0][0]}{o[1]}" for o in OPTIONS])
def test_out_of_range_values_are_refused_with_the_range(before, option, wanted, shown):
    for value in OUTSIDE[option]:
        if option == "--steps" and value == "2.5":
            res = invoke(before + [option, value])
            assert res.exit_code == 2 and "is not a whole number" in flat(res.output)
            continue
        res = invoke(before + [option, value])
        out = flat(res.output)
        assert res.exit_code == 2, (option, value, res.output)
        assert "is out of range" in out and f"give {wanted}" in out, (option, value, out)


@pytest.mark.parametrize("before,option,wanted,shown", OPTIONS, ids=[f"{o[0][0]}{o[1]}" for o in OPTIONS])
def test_help_states_each_range(before, option, wanted, shown):
    res = invoke([before[0], "--help"])
    assert res.exit_code == 0
    out = flat(res.output)
    start = out.index(option + " ")
    extra = out[start:out.index("]", start) + 1]  # the option's line(s) up to click's [default; range] block
    assert shown in extra, (option, extra)


def test_every_numeric_option_of_every_command_is_checked_for_finiteness():
    """By class, not by example: every float or integer option of every command uses the one type
    (report --sweep-steps, defined in planner/cli/report.py by another module's owner, is an integer
    range that already refuses 'nan' and 'inf' as "not a valid integer")."""
    elsewhere = {("report", "--sweep-steps")}
    unchecked = []
    for name, cmd in main.commands.items():
        for p in cmd.params:
            if isinstance(p.type, (click.types.FloatParamType, click.types.IntParamType)) \
                    and not isinstance(p.type, FiniteFloat) and (name, p.opts[0]) not in elsewhere:
                unchecked.append((name, p.opts[0]))
    assert not unchecked


def test_gap_two_is_refused_and_the_reason_given():
    """`plan --gap 2` used to give a plan called optimal at a 16 % gap."""
    res = invoke(["plan", DEMO, "--gap", "2"])
    out = flat(res.output)
    assert res.exit_code == 2
    assert "2 is out of range; give a number from 0 to 0.1" in out
    assert "a plan within this gap is called optimal" in out


def test_sweep_to_inf_and_nan_are_refused_before_any_solve():
    """`sweep --to inf` ended in a segmentation fault; `--to nan` printed 21 identical points."""
    for value in ("inf", "nan"):
        res = invoke(["sweep", DEMO, "--resource", "finishing booth", "--to", value])
        assert res.exit_code == 2 and "is not a finite number" in flat(res.output)
        assert "Sweep of" not in res.output


def test_values_inside_the_ranges_are_accepted(tmp_path):
    res = invoke(["plan", DEMO, "--gap", "0.1", "--time-limit", "1e3", "--no-capacity", "-q"])
    assert res.exit_code == 0, res.output
    res = invoke(["fit-demand", HISTORY, "--level", "0.9"])
    assert res.exit_code == 0, res.output
    assert "intervals at 90%" in flat(res.output)


def test_whole_numbers_written_as_floats_are_accepted():
    from planner.cli.main import WholeNumber

    t = FiniteFloat  # the integer type shares its checks

    w = WholeNumber(1, 10)
    assert w.convert("1e1", None, None) == 10 and w.convert("3", None, None) == 3
    assert isinstance(w.convert("4.0", None, None), int)
    with pytest.raises(click.BadParameter, match="not a whole number"):
        w.convert("2.5", None, None)
    with pytest.raises(click.BadParameter, match="not a number"):
        t(0, 1).convert("ten", None, None)
    with pytest.raises(click.BadParameter, match="not a number"):
        t(0, 1).convert(True, None, None)
