"""``run_risk``: the plan's risk over Monte Carlo samples, re-optimised per sample on Dask.

1. Plan the point estimate (the scenario as written) with :func:`planner.api.plan`.
2. Draw every sample in the client from one seed (:mod:`planner.risk.sampling`).
3. Evaluate the plan under each sample (:mod:`planner.risk.evaluate`, vectorised).
4. Re-optimise each sample exactly (certified relative gap ≤ ``rel_gap``): the samples
   are cut into chunks of a fixed size (independent of the number of workers); each
   chunk goes to a worker, which builds the scenario's engine once
   (:class:`planner.engine.Engine`, its scales fixed by the base data) and re-solves it
   with each sample's numbers, the plan's slate as the first incumbent and no other
   warm start, so each sample's answer depends only on that sample: results are
   identical for a seed whatever the cluster.

Profits include the plant-wide fixed cost (currency per period), as ``Plan.profit``.
"""

from __future__ import annotations

import time
from dataclasses import dataclass, field
from pathlib import Path
from typing import Any

import numpy as np

from models.data import MixData

from planner.errors import InfeasibleError, Problem, ScenarioError, SolverError
from planner.output.plan import Plan
from planner.scenario.arrays import mix_data
from planner.scenario.schema import Scenario
from planner.engine import DEFAULT_GAP, Engine
from planner.analysis.cluster import ClusterError, dask_client  # noqa: F401  (ClusterError: offered here too)
from planner.analysis.risk.evaluate import evaluate_plan, sample_arrays
from planner.analysis.risk.sampling import draw_samples

#: Samples per chunk sent to a worker (fixed, so chunking never depends on the cluster).
CHUNK = 25
#: How long to try reaching a --scheduler address.
CONNECT_TIMEOUT = "10s"
STATUS = ("optimal", "infeasible", "failed")



def solve_chunk(base: MixData, start: np.ndarray, points: np.ndarray, rel_gap: float,
                arrays: dict[str, np.ndarray], plant_fixed_cost: float = 0.0) -> dict[str, np.ndarray]:
    """Re-optimise the samples of one chunk (runs on a worker); profit excludes the plant-wide cost.

    ``start``: the plan's slate, solved first in every sample; ``points``: the plan's volumes
    (kept for the call's shape; the engine needs no cut points from outside); ``plant_fixed_cost``:
    the certificate is that of the plan's profit, after it.
    """
    n_s = len(arrays["a"])
    engine = Engine(base, offset=plant_fixed_cost)
    out = {"objective": np.full(n_s, np.nan), "bound": np.full(n_s, np.nan),
           "status": np.zeros(n_s, dtype=np.int8), "running": np.zeros((n_s, base.n), dtype=bool),
           "volume": np.zeros((n_s, base.n)), "duals": np.full((n_s, len(base.resources)), np.nan),
           "fallback": np.zeros(n_s, dtype=bool)}
    for s in range(n_s):
        try:
            sol = engine.solve(rel_gap=rel_gap, known=[start], a=arrays["a"][s], b=arrays["b"][s],
                               v=arrays["v"][s], capacity=arrays["H"][s])
        except InfeasibleError:
            out["status"][s] = 1
            continue
        except SolverError:
            out["status"][s] = 2
            continue
        if sol.status != "optimal" or sol.gap > rel_gap:
            out["status"][s] = 2  # not certified: left out rather than reported as optimal
            continue
        out["objective"][s], out["bound"][s] = sol.objective, sol.bound
        # (which products have an on/off choice does not depend on the sampled numbers)
        out["running"][s] = np.where(base.can_stop, sol.running, base.must_run | (sol.volume > 0))
        out["volume"][s], out["duals"][s] = sol.volume, sol.duals
    return out


@dataclass
class RiskResult:
    """Per-sample results and the point-estimate plan; ``to_dict`` gives the summary (JSON)."""

    plan: Plan
    samples: int
    seed: int
    plan_profit: np.ndarray  # (N,) currency, the plan under each sample
    best_profit: np.ndarray  # (N,) currency, re-optimised; nan where infeasible or not certified
    status: np.ndarray  # (N,) index into STATUS
    running: np.ndarray  # (N × n) bool, re-optimised
    shadow: np.ndarray  # (N × m) currency per resource unit, re-optimised
    sold: np.ndarray  # (N × n) units the plan sells under each sample
    products: tuple[str, ...]
    resources: tuple[str, ...]
    units: dict[str, str] = field(default_factory=dict)
    truncated: dict[str, int] = field(default_factory=dict)
    info: dict[str, Any] = field(default_factory=dict)
    demand_shift: np.ndarray = field(default_factory=lambda: np.zeros(0))
    """(N,) mean relative change of the price intercepts in each sample (for the fan chart)."""

    @property
    def ok(self) -> np.ndarray:
        return self.status == 0

    def to_dict(self) -> dict[str, Any]:
        ok = self.ok
        pp, bp = self.plan_profit, self.best_profit[ok]
        gain = self.best_profit[ok] - self.plan_profit[ok]
        n = self.samples
        out = {
            "scenario": self.plan.scenario, "currency": self.plan.currency, "period": self.plan.period,
            "samples": n, "seed": self.seed,
            "point_estimate_profit": self.plan.profit,
            "plan_profit": _stats(pp),
            "probability_of_loss": float(np.mean(pp < 0)) if n else 0.0,
            "best_profit": _stats(bp),
            "value_of_perfect_information": float(np.mean(gain)) if gain.size else None,
            "samples_infeasible": int(np.sum(self.status == 1)),
            "samples_not_certified": int(np.sum(self.status == 2)),
            "products": [
                {"name": name, "planned_running": bool(self.plan.products[k].running),
                 "planned_volume": self.plan.products[k].volume,
                 "probability_running": float(np.mean(self.running[ok, k])) if ok.any() else None,
                 "plan_sold": _stats(self.sold[:, k])}
                for k, name in enumerate(self.products)],
            "resources": [
                {"name": name, "unit": self.units.get(name, ""),
                 "planned_shadow_price": self.plan.resources[r].shadow_price,
                 "shadow_price": _stats(self.shadow[ok, r]),
                 "probability_binding": float(np.mean(self.shadow[ok, r] > 1e-9)) if ok.any() else None}
                for r, name in enumerate(self.resources)],
            "truncated_draws": self.truncated,
            "robust_choice": self.info.get("robust", {}),
            "run": {k: v for k, v in self.info.items() if k != "robust"},
            "economics": ("plan under a sample: its prices are kept, volumes follow the sample's demand at "
                          "those prices, capped by the planned volumes and cut in proportion if a sampled "
                          "capacity is short; profit includes every fixed cost of the plan"),
        }
        return out


def _stats(x: np.ndarray) -> dict[str, float | None]:
    """mean, sd, standard error of the mean, P5, P50, P95 (None when there are no values)."""
    x = np.asarray(x, dtype=float)
    if x.size == 0:
        return {"mean": None, "sd": None, "se": None, "p5": None, "p50": None, "p95": None}
    p5, p50, p95 = np.percentile(x, [5, 50, 95])
    sd = float(np.std(x, ddof=1)) if x.size > 1 else 0.0
    return {"mean": float(np.mean(x)), "sd": sd, "se": sd / np.sqrt(x.size),
            "p5": float(p5), "p50": float(p50), "p95": float(p95)}


def run_risk(scenario: Scenario | str | Path, samples: int = 1000, seed: int = 0,
             rel_gap: float = DEFAULT_GAP, scheduler: str | None = None, workers: int | None = None,
             client: Any = None, progress: Any = None, chunk: int = CHUNK, robust: bool = True) -> RiskResult:
    """Risk of the point-estimate plan over ``samples`` draws (see the module docstring).

    ``workers=0`` runs in this process without Dask; otherwise ``client`` (a
    ``distributed.Client``), else ``scheduler`` (an address), else a local cluster
    with ``workers`` processes (default: all cores).  ``progress(done, total)``
    is called as chunks finish.  ``robust``: also the sample-based robust choice
    (:mod:`planner.risk.robust`) in ``info["robust"]``.
    """
    from planner.api import plan as make_plan
    from planner.scenario.loading import load_scenario

    t0 = time.perf_counter()
    if not isinstance(scenario, Scenario):
        scenario, _ = load_scenario(scenario)
    base = mix_data(scenario)
    if np.any(base.buy_max > 0):  # evaluate.py prices a plan's use of resources from its sales alone
        raise ScenarioError([Problem("products.buy_max", "planner risk does not yet follow products that buy in",
                                     "set buy_max to 0 for the risk run, or plan the samples one by one")])
    if base.n_groups or np.any(base.res_fixed > 0) or np.any(base.res_closable):  # evaluate.py: product costs only
        raise ScenarioError([Problem("product_groups, resources.fixed_cost", "planner risk does not yet count the fixed costs of product "
                                     "groups and resources", "plan the samples one by one with planner plan, or "
                                     "leave product_groups and resource fixed costs out for the risk run")])
    point = make_plan(scenario, rel_gap=rel_gap)
    draws = draw_samples(scenario, samples, seed)
    arrays = sample_arrays(base, draws)
    ev = evaluate_plan(point, base, arrays)
    start = np.array([p.running for p in point.products], dtype=bool)
    points = np.array([p.volume for p in point.products])
    bounds = [(lo, min(lo + chunk, samples)) for lo in range(0, samples, chunk)]
    pieces = [{k: v[lo:hi] for k, v in arrays.items()} for lo, hi in bounds]
    t1 = time.perf_counter()
    results, n_workers, where = _run_chunks(base, start, points, rel_gap, scenario.plant_fixed_cost, pieces,
                                            scheduler, workers, client, progress)
    merged = {k: np.concatenate([r[k] for r in results]) if results else np.zeros(0)
              for k in ("objective", "status", "running", "duals", "fallback")}
    if not results:
        merged["running"] = np.zeros((0, base.n), dtype=bool)
        merged["duals"] = np.zeros((0, len(base.resources)))
    best = merged["objective"] - scenario.plant_fixed_cost
    info = {"workers": n_workers, "scheduler": where, "chunk": chunk, "rel_gap": rel_gap,
            "seconds": time.perf_counter() - t0, "seconds_reoptimising": time.perf_counter() - t1,
            "fallback_solves": int(np.sum(merged["fallback"])),
            "uncertain_numbers": int(sum(v.shape[1] for v in draws.values.values()))}
    if robust and samples:
        from planner.analysis.risk.robust import robust_choice

        info["robust"] = robust_choice(scenario, base, point, arrays, merged["running"][merged["status"] == 0],
                                       seed)
    info["seconds"] = time.perf_counter() - t0
    return RiskResult(point, samples, seed, ev["profit"], best, merged["status"].astype(np.int8),
                      merged["running"], merged["duals"], ev["sold"], base.products, base.resources,
                      {r.name: r.unit for r in scenario.resources}, draws.truncated, info,
                      np.mean((arrays["a"] - base.a) / np.maximum(base.a, 1e-9), axis=1))


def _run_chunks(base, start, points, rel_gap, plant, pieces, scheduler, workers, client, progress):
    """Solve every chunk; returns (results in chunk order, number of workers, where it ran)."""
    total = len(pieces)
    if progress:
        progress(0, total)
    if workers == 0 and client is None and scheduler is None:
        results = []
        for i, piece in enumerate(pieces):
            results.append(solve_chunk(base, start, points, rel_gap, piece, plant))
            if progress:
                progress(i + 1, total)
        return results, 1, "in-process"
    from distributed import as_completed

    with dask_client(scheduler, workers, client, CONNECT_TIMEOUT) as (client, n_workers, where):
        shared = client.scatter([base, start, points], broadcast=True)
        futures = [client.submit(solve_chunk, *shared, rel_gap, piece, plant, pure=False) for piece in pieces]
        order = {f.key: i for i, f in enumerate(futures)}
        results: list = [None] * total
        for done, fut in enumerate(as_completed(futures), start=1):
            results[order[fut.key]] = fut.result()
            if progress:
                progress(done, total)
        return results, n_workers, where
