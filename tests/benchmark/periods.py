"""Speed benchmark of plans over several periods (not run by pytest).

    python -m tests.benchmark.periods            # every case; a table on screen, JSON to benchmark-periods.json
    python -m tests.benchmark.periods --quick    # the small cases only

Each seeded scenario (numbers of our own invention: seasonal intercepts,
monthly capacities with a holiday dip, fixed costs so that products may shut
down, holding costs and some initial stock) is written to YAML first
(untimed); then the whole ``planner plan FILE --json OUT`` command is timed in
a fresh process (start-up, reading, validation, solve, writing), and the
solve alone in this process, with its route and certified gap.
"""

from __future__ import annotations

import argparse
import json
import random
import subprocess
import sys
import tempfile
import time
from pathlib import Path

import yaml

ROOT = Path(__file__).resolve().parents[2]
GAP = 1e-4

#: (key, products, periods, limits, target text)
CASES = [
    ("1000x3x20", 1000, 3, 20, "whole command <= 5 s"),
    ("13x200x20", 200, 13, 20, "whole command <= 10 s"),
    ("10000x3x50", 10000, 3, 50, "whole command <= 60 s"),
]
QUICK = {"1000x3x20"}


def scenario(n: int, T: int, m: int, seed: int = 7) -> dict:
    """A seeded scenario over T periods with n products and m shared limits."""
    g = random.Random(seed)
    res = [f"centre {k + 1}" for k in range(m)]
    products = []
    for i in range(n):
        base = g.uniform(80, 200)
        season = [round(base * (1 + 0.3 * ((t % 4) / 3)), 2) for t in range(T)]
        used = g.sample(res, k=max(1, m // 4))
        products.append({
            "name": f"item {i + 1}", "price_intercept": season, "price_slope": round(g.uniform(0.05, 0.5), 3),
            "unit_cost": round(base * g.uniform(0.3, 0.6), 2), "fixed_cost": round(g.uniform(0, 4000), 1),
            "holding_cost": round(g.uniform(0.5, 3), 2), "initial_stock": g.choice([0, 0, 0, 25]),
            "usage": {r: round(g.uniform(0.1, 1.0), 2) for r in used}})
    per = n * 60 / m
    resources = [{"name": r, "capacity": [round(per * (0.7 if t == T - 1 else 1.0) * g.uniform(0.9, 1.1), 1)
                                          for t in range(T)]} for r in res]
    return {"name": f"periods {n}x{T}x{m}", "periods": [f"period {t + 1}" for t in range(T)],
            "products": products, "resources": resources}


def run(keys: list[str]) -> dict:
    from planner.api import plan
    from planner.scenario.loading import load_scenario

    out = {"gap": GAP, "cases": {}}
    with tempfile.TemporaryDirectory() as tmp:
        for key, n, T, m, target in CASES:
            if key not in keys:
                continue
            path = Path(tmp) / f"{key}.yaml"
            path.write_text(yaml.safe_dump(scenario(n, T, m), sort_keys=False))
            t0 = time.perf_counter()
            done = subprocess.run([sys.executable, "-m", "planner.cli", "plan", str(path), "--json",
                                   str(Path(tmp) / f"{key}.json"), "--quiet", "--gap", str(GAP)],
                                  cwd=ROOT, capture_output=True, text=True)
            whole = time.perf_counter() - t0
            s, _ = load_scenario(path)
            t1 = time.perf_counter()
            try:
                p = plan(s, rel_gap=GAP)
                got = {"gap": p.gap, "strategy": p.solver["strategy"], "qp_method": p.solver["qp_method"]}
            except Exception as e:  # recorded, not hidden: the table shows the case failed
                got = {"gap": float("nan"), "strategy": f"FAILED: {type(e).__name__}", "qp_method": str(e)[:120]}
            solve = time.perf_counter() - t1
            out["cases"][key] = {"target": target, "whole_s": whole, "exit": done.returncode, "plan_s": solve,
                                 **got, "error": done.stderr[-300:]}
    return out


def main(argv: list[str] | None = None) -> None:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--quick", action="store_true", help="small cases only")
    ap.add_argument("--json", type=Path, default=Path("benchmark-periods.json"))
    ap.add_argument("--cases", nargs="*", default=None, help="case keys to run")
    a = ap.parse_args(argv)
    keys = a.cases or [k for k, *_ in CASES if not a.quick or k in QUICK]
    res = run(keys)
    print(f"{'case':<12} {'whole':>8} {'plan()':>8} {'gap':>9}  route / target")
    for key, r in res["cases"].items():
        print(f"{key:<12} {r['whole_s']:>7.2f}s {r['plan_s']:>7.2f}s {r['gap']:>9.1e}  {r['strategy']} "
              f"({r['qp_method']}), exit {r['exit']} / {r['target']}")
    a.json.write_text(json.dumps(res, indent=1))


if __name__ == "__main__":
    main()
