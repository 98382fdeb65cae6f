"""Capacity sweeps: change points against a brute-force fine grid of independent re-solves."""

from __future__ import annotations

import csv
import json

import numpy as np
import pytest
from click.testing import CliRunner

from planner import load_scenario, validate_scenario
from planner.analysis.capacity.sweep import run_sweep
from planner.cli.main import main
from planner.scenario.arrays import mix_data
from planner.engine import Engine
from planner.scenario.synth import synthetic_scenario

from .conftest import CASES



def solve_mix(d, rel_gap):
    """The engine's plan of the arrays ``d`` (profit without the plant-wide fixed cost)."""
    return Engine(d).solve(rel_gap=rel_gap)

def grid_slates(s, resource: str, caps: np.ndarray):
    """Brute force: the planner's main route (not the sweep's machinery) at every grid capacity."""
    d = mix_data(s)
    r = d.resources.index(resource)
    out = []
    for H in caps:
        cap = d.capacity.copy()
        cap[r] = H
        sol = solve_mix(d.with_capacity(cap), rel_gap=1e-8)
        out.append((tuple(sol.running.tolist()), sol.objective - s.plant_fixed_cost, sol.duals))
    return out


def check_against_grid(s, resource: str, lo: float, hi: float, steps: int, fine: int):
    sw = run_sweep(s, resource, lo, hi, steps, rel_gap=1e-8)
    caps = np.linspace(lo, hi, fine + 1)
    grid = grid_slates(s, resource, caps)
    slate_bps = [b.capacity for b in sw.breakpoints if b.kind == "slate"]
    changed = [k for k in range(fine) if grid[k][0] != grid[k + 1][0]]
    # every change the fine grid sees has an exact change point inside its interval ...
    for k in changed:
        assert any(caps[k] <= c <= caps[k + 1] for c in slate_bps), f"missed a slate change in {caps[k]}..{caps[k + 1]}"
    # ... and every change point found lies where the grid changes (or pairs up inside one interval)
    for c in slate_bps:
        k = min(int(np.searchsorted(caps, c)) - 1, fine - 1)
        inside = [x for x in slate_bps if caps[k] <= x <= caps[k + 1]]
        assert k in changed or len(inside) % 2 == 0
    # the points' profits agree with the independent re-solves (same capacities on both grids)
    for p in sw.points:
        j = int(np.argmin(np.abs(caps - p.capacity)))
        if abs(caps[j] - p.capacity) < 1e-9 * max(p.capacity, 1):
            assert p.profit == pytest.approx(grid[j][1], rel=1e-7)
    return sw, changed


def test_demo_finishing_booth_every_slate_change(demo_path):
    """The demo's bottleneck swept from 2,000 to 2,900 h: the three slate changes the fine grid sees
    (every 37.5 h) are each found exactly; just either side of each, independent re-solves run the
    slates the sweep reports."""
    s, _ = load_scenario(demo_path)
    sw, changed = check_against_grid(s, "finishing booth", 2000.0, 2900.0, 6, 24)
    assert len(changed) == 3
    d = mix_data(s)
    r = d.resources.index("finishing booth")
    for b in (b for b in sw.breakpoints if b.kind == "slate"):
        sides = []
        for dh in (-1e-3, 1e-3):
            cap = d.capacity.copy()
            cap[r] = b.capacity + dh
            sides.append(solve_mix(d.with_capacity(cap), rel_gap=1e-9).running)
        assert not np.array_equal(sides[0], sides[1]), f"no change at {b.capacity}"


def test_synthetic_slate_changes_against_grid():
    s, _ = validate_scenario(synthetic_scenario(6, 2, seed=3, fixed_costs="near"))
    d = mix_data(s)
    H = float(d.capacity[0])
    sw, changed = check_against_grid(s, "r000", 0.5 * H, 2.0 * H, 5, 36)
    assert changed, "the case should change slate somewhere on the range"


def test_wyndor_price_dependent_sweep_limits_by_hand():
    """Wyndor §13.2 variant, plant 3 from 10 to 30 (hand working in test_capacity): plant 1 starts to
    bind at 35 − 18·17/26; then x1 = 4, x2 = (b3 − 12)/2, λ3 = 91 − 13·x2 and λ1 = 54 − 3·λ3.  The
    bottleneck is the binding plant whose extra 1 % is worth most (λ·capacity/100): on [23.2, 24]
    plant 3's λ3·b3 ≥ 13·23.2 stays above plant 1's 4·λ1 = 4·(54 − 3·λ3) ≤ 60, so it changes only at
    24, where plant 2 binds too (x = (4, 6)), plant 3 goes slack and λ1 = 126 − 18·4 = 54,
    λ2 = (182 − 26·6)/2 = 13: plant 1 (4·54 = 216) ahead of plant 2 (12·13 = 156).  The profit
    stays at 126·4 − 9·16 + 182·6 − 13·36 = 984 beyond."""
    s, _ = load_scenario(CASES / "wyndor_qp.yaml")
    sw = run_sweep(s, "plant_3", 10.0, 30.0, 20)
    bps = [(b.capacity, b.change) for b in sw.breakpoints]
    assert len(bps) == 2
    assert bps[0][0] == pytest.approx(35 - 18 * 17 / 26, rel=1e-12) and "plant_1 starts to bind" in bps[0][1]
    assert bps[1][0] == pytest.approx(24.0, rel=1e-12) and "plant_2 starts to bind" in bps[1][1]
    assert "bottleneck: plant_3 → plant_1" in bps[1][1]
    assert sw.breakpoints[1].shadow_price_below == pytest.approx(13.0) and sw.breakpoints[1].shadow_price_above == 0
    at = {p.capacity: p for p in sw.points}
    assert at[18.0].profit == pytest.approx(857.0, abs=1e-9) and at[18.0].shadow_price == pytest.approx(26.0)
    assert at[19.0].profit == pytest.approx(882.235294117647, abs=1e-9)
    assert at[30.0].profit == pytest.approx(984.0, abs=1e-9) and at[30.0].shadow_price == 0
    assert at[12.0].shadow_price == pytest.approx(26 * (35 - 12) / 17, rel=1e-12)


def test_sweep_cli_json_and_csv(tmp_path):
    js, cs = tmp_path / "s.json", tmp_path / "s.csv"
    res = CliRunner().invoke(main, ["sweep", str(CASES / "wyndor_qp.yaml"), "--resource", "plant_3", "--from", "10",
                                    "--to", "30", "--steps", "4", "--json", str(js), "--csv", str(cs)])
    assert res.exit_code == 0, res.output
    assert "Where things change" in res.output and "plant_1 starts to bind" in res.output
    data = json.loads(js.read_text())
    assert [p["capacity"] for p in data["points"]] == [10.0, 15.0, 20.0, 25.0, 30.0]
    assert set(data["points"][0]) >= {"capacity", "profit", "shadow_price", "volumes"}
    assert set(data["points"][0]["volumes"]) == {"doors", "windows"}
    assert all(set(b) >= {"capacity", "change"} for b in data["breakpoints"]) and data["breakpoints"]
    rows = list(csv.DictReader(cs.open()))
    assert rows[0]["kind"] == "point" and "volume: doors" in rows[0]
    assert sum(r["kind"] == "breakpoint" for r in rows) == len(data["breakpoints"])
    bad = CliRunner().invoke(main, ["sweep", str(CASES / "wyndor_qp.yaml"), "--resource", "plant 3", "--to", "30"])
    assert bad.exit_code == 2 and "did you mean 'plant_3'" in bad.output


def test_loose_gap_sweep_points_stay_within_the_gap_of_independent_resolves():
    """At gap 1e-4 (the plan's default) on 60 products: every point's profit is within the gap of the
    main route re-solved at 1e-8 there, and never above it (each point is a real plan)."""
    s, _ = validate_scenario(synthetic_scenario(60, 6, seed=5, fixed_costs="some"))
    d = mix_data(s)
    H = float(d.capacity[2])
    sw = run_sweep(s, "r002", 0.8 * H, 1.4 * H, 8, rel_gap=1e-4)
    grid = grid_slates(s, "r002", np.array([p.capacity for p in sw.points]))
    for p, (_, best, _) in zip(sw.points, grid):
        assert p.profit <= best + 1e-7 * abs(best)
        assert p.profit >= best - 1e-4 * abs(best)
    assert sw.stats["fast_solves"] >= len(sw.points)
