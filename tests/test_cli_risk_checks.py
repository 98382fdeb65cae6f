"""`planner risk`: --scheduler addresses checked by form (exit 2 with an example) and connection failures
as bad input; distributions that cannot produce the scenario's own value warned about; the wording of
the Monte Carlo interval and of an in-process run."""

from __future__ import annotations

import json

import pytest
import yaml
from click.testing import CliRunner

from planner.analysis.risk.sampling import FAR_SD, coverage_warnings
from planner.cli.main import main
from planner.cli.risk import address_problem
from planner.scenario.validate import validate_scenario

from .test_risk import small_uncertain

MALFORMED = ["foo://x:1", "http://10.0.0.5:8786", "inproc://", "inproc://192.168.1.2/4242/1", "10.0.0.5",
             "tcp://scheduler", "tcp://h:abc", "tcp://h:0", "tcp://h:99999", "", "   ", "tcp://", "://h:8786",
             "tcp://h:8786/path", "tcp://h h:8786", "tcp//h:8786", "h:-1"]
VALID = ["tcp://10.0.0.5:8786", "10.0.0.5:8786", "tls://sched.example.org:8786", "tcp://[::1]:8786",
         "ws://h:1", "wss://h:65535", "ucx://10.1.2.3:13337", "TCP://Host-1.local:8786", "localhost:8786"]


def invoke(*args):
    res = CliRunner().invoke(main, [str(a) for a in args])
    return res, " ".join(res.output.split())


@pytest.fixture
def small(tmp_path):
    f = tmp_path / "small.yaml"
    f.write_text(yaml.safe_dump(small_uncertain()))
    return f


@pytest.mark.parametrize("address", MALFORMED)
def test_malformed_scheduler_address_exits_2_with_an_example(small, address):
    """Was exit 5 (internal error: Dask's ValueError) after planning the point estimate."""
    res, out = invoke("risk", small, "--samples", "5", "--scheduler", address)
    assert res.exit_code == 2, res.output
    assert "Invalid value for '--scheduler'" in out and "e.g. tcp://10.0.0.5:8786" in out
    assert "planning the point estimate" not in out  # refused before any work
    assert address_problem(address) is not None


@pytest.mark.parametrize("address", VALID)
def test_valid_scheduler_address_forms_pass_the_form_check(address):
    assert address_problem(address) is None


def test_unreachable_scheduler_is_bad_input_with_the_fix(small, monkeypatch):
    """A well-formed address nobody listens on (port 1 of this machine): exit 2, not 4, and it fails
    before the point estimate is planned."""
    monkeypatch.setattr("planner.analysis.risk.run.CONNECT_TIMEOUT", "1s")
    res, out = invoke("risk", small, "--samples", "5", "--scheduler", "localhost:1")
    assert res.exit_code == 2, res.output
    assert "cannot reach the Dask scheduler at localhost:1" in out
    assert "leave --scheduler out for a local cluster" in out
    assert "Point-estimate plan" not in out


def with_entry(entry: dict, **scenario_changes) -> dict:
    raw = small_uncertain()
    raw["uncertainty"] = [entry]
    raw.pop("correlations")
    for k, v in scenario_changes.items():
        raw[k] = v
    return raw


def test_uniform_that_cannot_produce_the_capacity_is_warned_about():
    """Capacity 900 with uniform 800–850: no draw reaches 900, so the risk is that of another plant."""
    s, _ = validate_scenario(with_entry({"resource": "press", "field": "capacity", "distribution": "uniform",
                                         "low": 800, "high": 850}))
    (w,) = coverage_warnings(s)
    assert w.startswith("uncertainty[1] (resources[press].capacity = 900): the scenario's value 900 lies outside "
                        "the range the uniform distribution covers (800 to 850)")


def test_triangular_outside_and_normal_far_away_are_warned_about_and_near_ones_are_not():
    tri = {"product": "beta", "field": "price_intercept", "distribution": "triangular",
           "low": 160, "mode": 170, "high": 190}  # beta's intercept is 150
    s, _ = validate_scenario(with_entry(tri))
    (w,) = coverage_warnings(s)
    assert "uncertainty[1] (products[beta].price_intercept = 150)" in w and "(160 to 190)" in w
    # alpha's unit cost is 40: a mean of 52 with sd 3 is (52 − 40) / 3 = 4.0 sd away (not more: no warning);
    # a mean of 52.3 is 4.1 sd away (hand calculation)
    for mean, warned in ((52.0, False), (52.3, True), (40.0, False)):
        s, _ = validate_scenario(with_entry({"product": "alpha", "field": "unit_cost", "distribution": "normal",
                                             "mean": mean, "sd": 3}))
        found = coverage_warnings(s)
        assert bool(found) == warned, (mean, found)
        if warned:
            assert f"lies 4.1 sd from the normal distribution's mean 52.3 (sd 3), more than {FAR_SD:g} sd" in found[0]
    s, _ = validate_scenario(with_entry({"product": "alpha", "field": "unit_cost", "distribution": "normal",
                                         "mean": 41, "sd": 0}))
    assert "sd 0 at mean 41, so every sample takes 41 and none the scenario's value 40" in coverage_warnings(s)[0]
    s, _ = validate_scenario(small_uncertain())  # every entry of the shipped small case covers its value
    assert coverage_warnings(s) == []


def test_risk_cli_prints_the_warning_and_writes_it_to_json(tmp_path):
    f = tmp_path / "far.yaml"
    f.write_text(yaml.safe_dump(with_entry({"resource": "press", "field": "capacity", "distribution": "uniform",
                                            "low": 800, "high": 850})))
    js = tmp_path / "risk.json"
    res, out = invoke("risk", f, "--samples", "20", "--workers", "0", "--json", js, "--no-robust")
    assert res.exit_code == 0, res.output
    assert "warning: uncertainty[1] (resources[press].capacity = 900)" in out
    assert any("lies outside the range the uniform distribution covers" in w
               for w in json.loads(js.read_text())["warnings"])


def test_interval_is_called_95_percent_and_in_process_run_says_so(small, tmp_path):
    """'± £1,746 Monte Carlo' was 1.96 × SE without saying so; --workers 0 printed 'starting workers'."""
    js = tmp_path / "risk.json"
    res, out = invoke("risk", small, "--samples", "30", "--seed", "3", "--workers", "0", "--json", js, "--no-robust")
    assert res.exit_code == 0, res.output
    se = json.loads(js.read_text())["plan_profit"]["se"]
    assert f"(95 % interval ± ${1.96 * se:,.0f}: the Monte Carlo error of the mean)" in out
    assert "solving in this process" in out and "starting workers" not in out
