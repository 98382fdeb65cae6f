"""Benchmark: a 25-point capacity sweep against one plan (target: sweep ≤ 5 × plan).

Run ``python -m tests.benchmark.sweep [--large N]``; prints one row per case.
Each time is the best of ``--repeat`` runs (the machine may be shared).
The sweep covers the bottleneck (the binding resource with the highest
shadow price) from 0.6× to 1.6× its capacity.
"""

from __future__ import annotations

import argparse
import time

from rich.console import Console
from rich.table import Table

from planner.api import plan
from planner.scenario.loading import load_scenario
from planner.scenario.synth import synthetic_scenario
from planner.scenario.validate import validate_scenario
from planner.analysis.capacity.sweep import run_sweep


def _best(fn, repeat: int):
    best, out = float("inf"), None
    for _ in range(repeat):
        t = time.perf_counter()
        out = fn()
        best = min(best, time.perf_counter() - t)
    return best, out


def bench_case(label: str, s, repeat: int, gaps: tuple[float, ...]) -> list[tuple]:
    t_plan, p = _best(lambda: plan(s), repeat)
    top = p.bottlenecks[0] if p.bottlenecks else max(p.resources, key=lambda r: r.utilisation)
    rows = []
    for gap in gaps:
        t_sw, sw = _best(lambda: run_sweep(s, top.name, 0.6 * top.capacity, 1.6 * top.capacity, 24, rel_gap=gap),
                         repeat)
        rows.append((label, top.name, f"{gap:.0e}", t_plan, t_sw, t_sw / t_plan, sw.stats["fast_solves"] + sw.stats["milp_solves"],
                     sw.stats["qp_solves"], sw.stats["slates"], len(sw.breakpoints)))
    return rows


def main() -> None:
    ap = argparse.ArgumentParser(description=__doc__)
    ap.add_argument("--demo", default="scenarios/demo.yaml")
    ap.add_argument("--large", type=int, default=200, help="products in the synthetic case (0: skip)")
    ap.add_argument("--resources", type=int, default=10)
    ap.add_argument("--repeat", type=int, default=2)
    args = ap.parse_args()
    rows = []
    s, _ = load_scenario(args.demo)
    rows += bench_case("demo", s, args.repeat, (1e-4, 1e-7))
    if args.large:
        s, _ = validate_scenario(synthetic_scenario(args.large, args.resources, seed=0))
        rows += bench_case(f"synthetic {args.large}×{args.resources}", s, 1, (1e-4,))
    t = Table(title="25-point sweep of the bottleneck vs one plan (plan at gap 1e-4)")
    for col in ("case", "resource", "sweep gap", "plan s", "sweep s", "ratio", "re-solves", "QPs", "slates", "changes"):
        t.add_column(col, justify="left" if col in ("case", "resource") else "right")
    for r in rows:
        t.add_row(r[0], r[1], r[2], f"{r[3]:.3f}", f"{r[4]:.3f}", f"{r[5]:.1f}×", *(str(x) for x in r[6:]))
    Console(width=120).print(t)


if __name__ == "__main__":
    main()
