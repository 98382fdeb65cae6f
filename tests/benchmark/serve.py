"""Speed of ``planner serve``: the re-plan round trip of the what-if page's API (not run by pytest).

    python -m tests.benchmark.serve                 # the demo and 1,000 products; JSON to serve-benchmark.json
    python -m tests.benchmark.serve --rounds 50

For each scenario it starts the real command (``planner serve FILE --port 0`` in a fresh process, the
engine built and warmed once at start-up), then sends ``POST /api/plan`` requests from this process
over 127.0.0.1 and times each round trip from the request's first byte to the last byte of the
answer: the JSON read and checked, the changes applied and re-validated, the warm re-solve, the
plan assembled and sent back.  Each request changes other numbers than the one before (a
capacity, then a price intercept, then both), so no answer is a repeat.  Targets: ≤ 300 ms on the
demo, ≤ 1 s at 1,000 products (median and 95th percentile are reported, with the worst).
"""

from __future__ import annotations

import argparse
import json
import os
import re
import statistics
import subprocess
import sys
import tempfile
import time
import urllib.request
from pathlib import Path

import yaml

ROOT = Path(__file__).resolve().parents[2]
TARGETS = {"demo": 0.3, "1000x20-some": 1.0}


def start(path: Path, folder: Path) -> tuple[subprocess.Popen, str, float]:
    """The server process, its URL and its start-up seconds (until it prints the URL)."""
    t0 = time.perf_counter()
    proc = subprocess.Popen([sys.executable, "-m", "planner.cli", "serve", str(path), "--port", "0", "--save-to",
                             str(folder / f"{path.stem}-copy.yaml")], cwd=ROOT, stdout=subprocess.PIPE,
                            stderr=subprocess.STDOUT, text=True, env={**os.environ, "COLUMNS": "200"})
    for line in proc.stdout:  # type: ignore[union-attr]
        m = re.search(r"http://127\.0\.0\.1:(\d+)/", line)
        if m:
            return proc, f"http://127.0.0.1:{m.group(1)}", time.perf_counter() - t0
    raise RuntimeError(f"the server did not start (exit code {proc.wait()})")


def post(url: str, changes: list[dict]) -> tuple[float, dict]:
    body = json.dumps({"changes": changes}).encode()
    req = urllib.request.Request(url + "/api/plan", data=body, headers={"Content-Type": "application/json"})
    t0 = time.perf_counter()
    with urllib.request.urlopen(req, timeout=120) as res:
        answer = json.loads(res.read())
    return time.perf_counter() - t0, answer


def requests(raw: dict, rounds: int) -> list[list[dict]]:
    """A different set of changes for every round: capacities and price intercepts moved by a few per cent."""
    res = [r["name"] for r in raw.get("resources", [])]
    prods = [p["name"] for p in raw["products"]]
    out = []
    for k in range(rounds):
        f = 0.9 + 0.2 * ((k * 7) % 11) / 10
        c = [{"resource": res[k % len(res)], "field": "capacity", "scale": round(f, 3)}]
        p = [{"product": prods[(3 * k) % len(prods)], "field": "price_intercept", "scale": round(2 - f, 3)}]
        out.append([c, p, c + p][k % 3])
    return out


def measure(key: str, path: Path, rounds: int, folder: Path) -> dict:
    raw = yaml.safe_load(path.read_text(encoding="utf-8"))
    proc, url, startup = start(path, folder)
    try:
        first, _ = post(url, [])
        times, routes = [], []
        for changes in requests(raw, rounds):
            dt, answer = post(url, changes)
            assert answer["status"] in ("optimal", "time_limit"), answer
            times.append(dt)
            routes.append(answer["replan"]["route"])
    finally:
        proc.terminate()
        proc.wait(timeout=20)
    times.sort()
    return {"case": key, "products": len(raw["products"]), "resources": len(raw.get("resources", [])),
            "rounds": rounds, "startup_seconds": startup, "first_seconds": first,
            "median_seconds": statistics.median(times), "p95_seconds": times[int(0.95 * (len(times) - 1))],
            "max_seconds": times[-1], "warm_routes": routes.count("warm"), "target_seconds": TARGETS[key],
            "met": times[int(0.95 * (len(times) - 1))] <= TARGETS[key], "load_average": os.getloadavg()[0]}


def run(rounds: int, json_path: Path) -> dict:
    from planner.scenario.synth import synthetic_scenario

    with tempfile.TemporaryDirectory() as tmp:
        folder = Path(tmp)
        big = folder / "1000x20-some.yaml"
        big.write_text(yaml.safe_dump(synthetic_scenario(1000, 20, seed=1, fixed_costs="some"), sort_keys=False))
        cases = [("demo", ROOT / "scenarios" / "demo.yaml"), ("1000x20-some", big)]
        rows = [measure(key, path, rounds, folder) for key, path in cases]
    res = {"machine": {"cpus": os.cpu_count(), "python": sys.version.split()[0]}, "cases": rows}
    json_path.write_text(json.dumps(res, indent=2))
    return res


def table(res: dict) -> str:
    lines = [f"{'case':<14} {'start s':>8} {'first ms':>9} {'median ms':>10} {'p95 ms':>8} {'max ms':>8} "
             f"{'warm':>6} {'target':>8} {'met':>4} {'load':>5}"]
    for r in res["cases"]:
        lines.append(f"{r['case']:<14} {r['startup_seconds']:>8.2f} {1000 * r['first_seconds']:>9.1f} "
                     f"{1000 * r['median_seconds']:>10.1f} {1000 * r['p95_seconds']:>8.1f} "
                     f"{1000 * r['max_seconds']:>8.1f} {r['warm_routes']:>3}/{r['rounds']:<2} "
                     f"{1000 * r['target_seconds']:>6.0f}ms {'yes' if r['met'] else 'NO':>4} {r['load_average']:>5.2f}")
    return "\n".join(lines)


def main(argv: list[str] | None = None) -> None:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--rounds", type=int, default=30, help="requests per scenario")
    ap.add_argument("--json", type=Path, default=Path("serve-benchmark.json"), help="where to write the results")
    a = ap.parse_args(argv)
    res = run(a.rounds, a.json)
    print(table(res))
    print(f"\nresults written to {a.json}")


if __name__ == "__main__":
    main()
