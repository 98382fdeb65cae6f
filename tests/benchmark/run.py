"""Speed benchmark: the planner at catalogue sizes, side by side with SCIP (not run by pytest).

    python -m tests.benchmark.run                 # every case; table on screen, JSON to benchmark.json
    python -m tests.benchmark.run --quick         # the small cases only
    python -m tests.benchmark.run --scip-cap 600  # longest SCIP run allowed (seconds)

For each seeded scenario (:func:`planner.synth.synthetic_scenario`, written
to YAML first, untimed) it records

- the wall time and peak memory (ru_maxrss of the child) of the whole
  ``planner plan FILE --json OUT`` command in a fresh process: start-up,
  reading, validation, model build, solve and writing the plan (and, where
  the command adds it by default, the capacity analysis: then also the
  time with ``--no-capacity``);
- the same stages timed one by one in this process (read, validate, build
  the arrays, solve, assemble and write the plan), the route taken, multiplier
  steps, cut rounds and the certified gap;
- SCIP (pyscipopt) on the same mixed-integer QP to the same gap, capped at
  min(100 × our solve time, --scip-cap) and reported "not reached" if capped;
- for ≤ 12 products, exhaustive slate enumeration (every on/off slate a QP);
- a 25-point capacity sweep: the whole ``planner sweep`` command in a fresh process;
- the growth exponent of time from 1,000 to 10,000 products.

Ratios are the headline; absolute seconds are beside them.  Timings are of
the machine it runs on: say which when quoting them.
"""

from __future__ import annotations

import argparse
import json
import math
import os
import platform
import subprocess
import sys
import tempfile
import time
from pathlib import Path

import yaml

from planner.cli.main import CAPACITY_AUTO_MAX

ROOT = Path(__file__).resolve().parents[2]
GAP = 1e-4

#: (key, products, limits, fixed costs, density, target text)
CASES = [
    ("50x10-near", 50, 10, "near", 0.25, "whole command <= 2 s"),
    ("200x10-near", 200, 10, "near", 0.25, ">= 100x faster than SCIP"),
    ("12x4-near", 12, 4, "near", 0.5, "agrees with enumeration"),
    ("1000x20-some", 1000, 20, "some", 0.25, "whole command <= 2 s"),
    ("10000x20-some", 10000, 20, "some", 0.25, "growth 1,000 -> 10,000 <= n^1.2"),
    ("10000x50-some", 10000, 50, "some", 0.5, "<= 20 s, <= 2 GiB"),
    ("10000x50-none", 10000, 50, "none", 0.5, "continuous, exact, <= 5 s"),
    # hard catalogues (issue 13): every product has a fixed cost, 80-105 % ("hard") or 5-120 % ("mixed") of
    # its best standalone contribution; the generator's default density
    ("200x10-hard", 200, 10, "hard", 0.25, "<= 2 s; SCIP >= 100x slower; <= 20x QP relaxation"),
    ("1000x20-hard", 1000, 20, "hard", 0.25, "<= 10 s; SCIP >= 100x slower; <= 20x QP relaxation"),
    ("2000x20-hard", 2000, 20, "hard", 0.25, "<= 20 s; <= 20x QP relaxation"),
    ("10000x50-hard", 10000, 50, "hard", 0.25, "<= 120 s, <= 2 GiB; <= 20x QP relaxation"),
    ("1000x20-mixed", 1000, 20, "mixed", 0.25, "<= 2 s; <= 20x QP relaxation"),
    ("1000x20-groups", 1000, 20, "some", 0.25, "50 groups, 4 closable: certified 1e-4 <= 10 s"),
]
QUICK = {"50x10-near", "12x4-near", "1000x20-some", "200x10-hard", "1000x20-mixed"}
#: Cases timed beside HiGHS's own continuous QP relaxation, and raced against SCIP up to 1,000 products.
HARD = ("hard", "mixed")


def write_scenario(folder: Path, key: str, n: int, m: int, fixed: str, density: float) -> Path:
    from planner.scenario.synth import synthetic_scenario

    path = folder / f"{key}.yaml"
    raw = synthetic_scenario(n, m, seed=1, fixed_costs=fixed, density=density)
    if key.endswith("-groups"):
        add_groups(raw, 50, 4)
    with open(path, "w") as f:
        yaml.dump(raw, f, Dumper=getattr(yaml, "CSafeDumper", yaml.SafeDumper), sort_keys=False)
    return path


def add_groups(raw: dict, groups: int, closable: int, seed: int = 2) -> None:
    """Products in ``groups`` groups of consecutive products (each group's fixed cost 10–40 % of its members'
    standalone best contribution), the first ``closable`` resources closable with a fixed cost."""
    import random

    rng = random.Random(seed)
    P = raw["products"]
    size = max(len(P) // groups, 1)
    raw["product_groups"] = []
    for g in range(groups):
        members = P[g * size:(g + 1) * size]
        best = sum(max(p["price_intercept"] - p["unit_cost"], 0.0) ** 2 / (4 * p["price_slope"])
                   for p in members if p.get("price_slope", 0) > 0)
        raw["product_groups"].append({"name": f"line {g + 1}", "products": [p["name"] for p in members],
                                      "fixed_cost": round(rng.uniform(0.1, 0.4) * best, 2)})
    for r in raw["resources"][:closable]:
        r["closable"] = True
        r["fixed_cost"] = round(rng.uniform(0.02, 0.1) * sum(g["fixed_cost"] for g in raw["product_groups"]), 2)


def whole_command(path: Path, out: Path, *extra: str) -> dict:
    """Wall time and peak memory of `planner plan` as a fresh process (threads as shipped)."""
    cmd = [sys.executable, "-m", "planner.cli", "plan", str(path), "--json", str(out), "--quiet", *extra]
    t0 = time.perf_counter()
    proc = subprocess.Popen(cmd, cwd=ROOT, stdout=subprocess.DEVNULL, stderr=subprocess.PIPE)
    _, status, usage = os.wait4(proc.pid, 0)
    wall = time.perf_counter() - t0
    proc.returncode = os.waitstatus_to_exitcode(status)
    err = proc.stderr.read().decode() if proc.stderr else ""
    plan = json.loads(out.read_text()) if out.exists() else {}
    return {"seconds": wall, "cpu_seconds": usage.ru_utime + usage.ru_stime, "load_average": os.getloadavg()[0],
            "peak_mib": usage.ru_maxrss / 1024.0, "exit": proc.returncode,
            "status": plan.get("status"), "gap": plan.get("gap"), "error": err.strip()[-300:]}


def stages(path: Path) -> tuple[dict, object, object, object]:
    """Each stage timed in this process; returns (timings, scenario, data, solution)."""
    from planner.api import build_plan
    from planner.scenario.loading import read_raw
    from planner.scenario.arrays import mix_data
    from planner.engine import Engine
    from planner.scenario.validate import validate_scenario

    t = [time.perf_counter()]
    raw = read_raw(path)
    t.append(time.perf_counter())
    s, warnings = validate_scenario(raw, source=str(path))
    t.append(time.perf_counter())
    d = mix_data(s)
    t.append(time.perf_counter())
    sol = Engine(d).solve(rel_gap=GAP)
    t.append(time.perf_counter())
    p = build_plan(s, d, sol, warnings)
    p.to_json()
    t.append(time.perf_counter())
    names = ["read", "validate", "build", "solve", "plan_out"]
    out = {k: t[i + 1] - t[i] for i, k in enumerate(names)}
    out.update(strategy=sol.strategy, qp_method=sol.qp_method, dual_steps=sol.dual_steps, rounds=sol.rounds,
               gap=sol.gap, status=sol.status, profit=float(sol.objective),
               usage_entries=int(d.use_amt.size))
    return out, s, d, sol


def scip_side(s, ours: float, cap: float) -> dict:
    from tests.reference import scip_race

    limit = min(100.0 * ours, cap)
    r = scip_race(s, GAP, limit)
    r["limit"] = limit
    return r


def relaxation_side(s) -> dict:
    """HiGHS's continuous QP relaxation (on/off variables in [0, 1]) from the raw numbers: the faster of its
    active-set and interior-point QP that ends optimal (build + solve seconds)."""
    from tests.reference import qp_relaxation

    runs = {solver: qp_relaxation(s, solver) for solver in ("choose", "hipo")}
    ok = {k: r for k, r in runs.items() if r["status"] == "Optimal"}
    best = min(ok.items(), key=lambda kv: kv[1]["seconds"]) if ok else min(runs.items(), key=lambda kv: kv[1]["seconds"])
    return {**best[1], "solver": best[0], "all": {k: {"seconds": r["seconds"], "status": r["status"]}
                                                  for k, r in runs.items()}}


def enumeration_side(s) -> dict:
    from tests.reference import enumerate_slates

    t0 = time.perf_counter()
    best = enumerate_slates(s)
    return {"seconds": time.perf_counter() - t0, "profit": best}


def sweep_side(path: Path, plan_json: Path, out: Path, points: int = 25) -> dict:
    """The whole `planner sweep` command (fresh process): the dearest resource from 1.0× to 1.5× its capacity."""
    plan = json.loads(plan_json.read_text())
    r = max(plan["resources"], key=lambda x: x["shadow_price"])
    cmd = [sys.executable, "-m", "planner.cli", "sweep", str(path), "--resource", r["name"],
           "--to", repr(1.5 * r["capacity"]), "--steps", str(points - 1), "--gap", repr(GAP),
           "--json", str(out), "--quiet"]
    t0 = time.perf_counter()
    proc = subprocess.run(cmd, cwd=ROOT, capture_output=True, text=True)
    wall = time.perf_counter() - t0
    got = json.loads(out.read_text()) if out.exists() else {}
    return {"seconds": wall, "points": points, "resource": r["name"], "exit": proc.returncode,
            "stats": got.get("stats", {}), "breakpoints": len(got.get("breakpoints", [])),
            "error": proc.stderr.strip()[-300:]}


def run(keys: list[str], scip_cap: float, json_path: Path) -> dict:
    results: dict = {"machine": {"cpus": os.cpu_count(), "python": platform.python_version(),
                                 "platform": platform.platform()}, "gap": GAP, "cases": {}}
    with tempfile.TemporaryDirectory() as tmp:
        folder = Path(tmp)
        for key, n, m, fixed, density, target in CASES:
            if key not in keys:
                continue
            path = write_scenario(folder, key, n, m, fixed, density)
            whole = whole_command(path, folder / f"{key}.json")
            if n <= CAPACITY_AUTO_MAX:  # the default command adds the capacity analysis here: time the plan alone too
                whole["plan_only"] = whole_command(path, folder / f"{key}-plan.json", "--no-capacity")["seconds"]
            st, s, d, sol = stages(path)
            row = {"products": n, "limits": m, "fixed_costs": fixed, "target": target, "whole": whole,
                   "stages": st}
            if (n <= 200 and fixed != "none") or (n <= 1000 and fixed == "hard"):
                row["scip"] = scip_side(s, st["solve"], scip_cap)
            if fixed in HARD:
                row["relaxation"] = relaxation_side(s)
            if n <= 12:
                row["enumeration"] = enumeration_side(s)
            if key == "1000x20-some":
                row["sweep"] = sweep_side(path, folder / f"{key}.json", folder / f"{key}-sweep.json")
            results["cases"][key] = row
            print(f"  done {key}: whole {whole['seconds']:.2f} s", file=sys.stderr, flush=True)
    c = results["cases"]
    if "1000x20-some" in c and "10000x20-some" in c:
        for what in ("whole", "solve"):
            a = c["1000x20-some"]["whole"]["seconds"] if what == "whole" else c["1000x20-some"]["stages"]["solve"]
            b = c["10000x20-some"]["whole"]["seconds"] if what == "whole" else c["10000x20-some"]["stages"]["solve"]
            results[f"growth_exponent_{what}"] = math.log(b / a) / math.log(10.0)
    json_path.write_text(json.dumps(results, indent=2, default=float))
    return results


def table(res: dict) -> str:
    lines = [f"certified gap target {res['gap']:g}; {res['machine']['cpus']} cores; Python {res['machine']['python']}",
             "",
             "(whole: wall seconds of the command, CPU seconds of the child in brackets, machine load average "
             "after it)", "",
             "| case | whole `planner plan` | peak MiB | read | validate | build | solve | route | steps/rounds "
             "| gap | SCIP to same gap | ratio | target |",
             "|---|---|---|---|---|---|---|---|---|---|---|---|---|"]
    for key, r in res["cases"].items():
        st, wh = r["stages"], r["whole"]
        scip, ratio = "—", "—"
        if "scip" in r:
            sc = r["scip"]
            scip = f"{sc['seconds']:.1f} s" if sc["reached"] else \
                f"not reached in {sc['limit']:.0f} s (gap {sc['gap']:.1%})"
            ratio = f"{sc['seconds'] / st['solve']:.0f}×" if sc["reached"] else f"> {sc['limit'] / st['solve']:.0f}×"
        if "relaxation" in r:
            rx = r["relaxation"]
            scip += (f"; HiGHS QP relaxation {rx['seconds']:.2f} s ({rx['solver']}): whole command "
                     f"{wh['seconds'] / rx['seconds']:.1f}×, solve {st['solve'] / rx['seconds']:.1f}× it")
        if "enumeration" in r:
            en = r["enumeration"]
            same = abs(en["profit"] - st["profit"]) <= 1e-6 * max(abs(en["profit"]), 1.0)
            scip += f"; enumeration {en['seconds']:.1f} s, {'same profit' if same else 'DIFFERENT profit'}"
        lines.append(
            f"| {key} | {wh['seconds']:.2f} s [{wh['cpu_seconds']:.2f} CPU s, load {wh['load_average']:.1f}]"
            f"{'; ' + format(wh['plan_only'], '.2f') + ' s with --no-capacity' if 'plan_only' in wh else ''}"
            f"{'' if wh['exit'] == 0 else ' exit ' + str(wh['exit'])} | {wh['peak_mib']:.0f} | {st['read']:.2f} "
            f"| {st['validate']:.2f} | {st['build']:.3f} | {st['solve']:.2f} | {st['strategy']} ({st['qp_method']}) "
            f"| {st['dual_steps']}/{st['rounds']} | {st['gap']:.1e} | {scip} | {ratio} | {r['target']} |")
    extra = []
    for key, r in res["cases"].items():
        if "sweep" in r:
            sw = r["sweep"]
            st = sw["stats"]
            extra.append(f"- sweep ({key}): the whole `planner sweep` command, {sw['points']} capacities of "
                         f"{sw['resource']} (1.0×–1.5×, gap {GAP:g}): {sw['seconds']:.2f} s = "
                         f"{sw['seconds'] / r['whole']['seconds']:.1f}× one whole plan command "
                         f"({r['whole']['seconds']:.2f} s); {st.get('fast_solves', '?')} warm re-solves, "
                         f"{st.get('dual_checks', '?')} change-point checks by the dual bound, "
                         f"{st.get('slates', '?')} slates, {sw['breakpoints']} exact change points"
                         f"{'' if sw['exit'] == 0 else '; exit ' + str(sw['exit']) + ' ' + sw['error']}")
    for what in ("whole", "solve"):
        if f"growth_exponent_{what}" in res:
            extra.append(f"- growth 1,000 → 10,000 products (20 limits), {what}: "
                         f"n^{res[f'growth_exponent_{what}']:.2f}")
    return "\n".join(lines + [""] + extra)


def main(argv: list[str] | None = None) -> None:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--quick", action="store_true", help="small cases only")
    ap.add_argument("--cases", nargs="*", default=None, help="case keys to run")
    ap.add_argument("--scip-cap", type=float, default=600.0, help="longest SCIP run (seconds)")
    ap.add_argument("--json", type=Path, default=Path("benchmark.json"), help="where to write the results")
    a = ap.parse_args(argv)
    keys = a.cases or [k for k, *_ in CASES if not a.quick or k in QUICK]
    res = run(keys, a.scip_cap, a.json)
    print(table(res))
    print(f"\nresults written to {a.json}")


if __name__ == "__main__":
    main()
