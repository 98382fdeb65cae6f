"""A sample-based robust choice of slate (sample average approximation over candidate plans).

The point-estimate plan is best for the lines as written; under uncertainty
another slate of running products may earn more on average.  Candidates are
the slates that the re-optimised samples chose most often, plus the point
plan's own.  Each candidate's plan is its fixed-slate optimum on the point
estimate (volumes, hence prices p = a − b·D), scored by the average of its
profit over the samples under the economics of :mod:`planner.risk.evaluate`
(sample average approximation, restricted to these candidates: the prices
and volumes of a slate are not themselves re-tuned to the samples).

Choosing and scoring on the same samples flatters the winner, so both the
chosen plan and the point plan are scored again on an independent set of
samples (another seed): that comparison is the honest one.
"""

from __future__ import annotations

from collections import Counter
from typing import Any

import numpy as np

from models.data import MixData

from planner.output.plan import Plan
from planner.scenario.schema import Scenario
from planner.analysis.capacity.analysis import plan_open
from planner.analysis.risk.evaluate import evaluate, sample_arrays
from planner.engine import Engine
from planner.analysis.risk.sampling import draw_samples

#: Seed offset of the independent samples that re-score the choice.
CHECK_SEED_OFFSET = 1_000_003


def robust_choice(s: Scenario, base: MixData, point: Plan, arrays: dict[str, np.ndarray],
                  running: np.ndarray, seed: int, top: int = 8) -> dict[str, Any]:
    """The candidate slate of greatest expected profit, beside the point-estimate plan."""
    start = tuple(bool(p.running) for p in point.products)
    counts = Counter(map(tuple, np.asarray(running, dtype=bool).tolist()))
    slates = [start] + [sl for sl, _ in counts.most_common() if sl != start][: top - 1]
    engine = Engine(base)
    opened = plan_open(point)
    check = sample_arrays(base, draw_samples(s, len(arrays["a"]), seed + CHECK_SEED_OFFSET))
    rows = []
    for sl in slates:
        slate = np.array(sl, dtype=bool)
        got = engine.slate(slate, opened=opened)  # the plan's closed resources stay closed
        if got.status != "optimal":
            continue
        obj, vol = got.objective, got.volume
        price = base.a - base.b * vol
        fixed = float(np.sum(base.F[slate | base.must_run])) + s.plant_fixed_cost
        here = evaluate(price, vol, fixed, base, arrays)["profit"]
        again = evaluate(price, vol, fixed, base, check)["profit"]
        rows.append({"running": [n for n, on in zip(base.products, sl) if on],
                     "volumes": {n: float(x) for n, x, on in zip(base.products, vol, sl) if on},
                     "point_estimate_profit": obj - s.plant_fixed_cost,
                     "expected_profit": float(np.mean(here)), "p5": float(np.percentile(here, 5)),
                     "probability_of_loss": float(np.mean(here < 0)),
                     "expected_profit_check": float(np.mean(again)),
                     "share_of_samples_choosing_it": counts.get(sl, 0) / max(len(running), 1),
                     "is_point_plan": sl == start})
    if not rows:
        return {}
    best = max(rows, key=lambda r: r["expected_profit"])
    plan_row = next((r for r in rows if r["is_point_plan"]), None)
    gain = None if plan_row is None else best["expected_profit_check"] - plan_row["expected_profit_check"]
    return {"method": "sample average approximation over the candidate slates",
            "check_seed": seed + CHECK_SEED_OFFSET, "best": best, "point_plan": plan_row,
            "gain_on_check_samples": gain, "candidates": sorted(rows, key=lambda r: -r["expected_profit"])}
