"""Speed of ``planner risk`` on the demo (prints a table; run with ``python -m pytest -m benchmark -s``)."""

from __future__ import annotations

import os
import time

import pytest

pytestmark = pytest.mark.benchmark


def test_risk_speed_table(demo_path, request):
    if "benchmark" not in (request.config.getoption("-m") or ""):
        pytest.skip("speed benchmark: run with -m benchmark -s")
    from planner.analysis.risk import run_risk

    rows = []
    for samples, workers in ((200, 0), (1000, 0), (1000, os.cpu_count() or 1)):
        t0 = time.perf_counter()
        r = run_risk(demo_path, samples=samples, seed=7, workers=workers)
        wall = time.perf_counter() - t0
        rows.append((samples, r.info["scheduler"], r.info["workers"], wall, 1000 * r.info["seconds_reoptimising"]
                     / samples, r.info["fallback_solves"], float((r.plan_profit < 0).mean())))
    print(f"\n{'samples':>8} {'where':>14} {'workers':>8} {'wall s':>8} {'ms/sample':>10} {'fallbacks':>10} "
          f"{'P(loss)':>8}")
    for n, where, w, wall, per, fb, loss in rows:
        print(f"{n:>8} {where:>14} {w:>8} {wall:>8.1f} {per:>10.1f} {fb:>10} {loss:>8.3f}")
    assert rows[1][6] == rows[2][6]  # same seed, same answer in-process and on the cluster
