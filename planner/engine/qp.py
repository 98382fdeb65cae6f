"""The continuous QP for a fixed slate (which products run), solved by HiGHS via Pyomo.

Returns exact volumes and the capacity duals (shadow prices, currency per
resource unit, ≥ 0 for a binding ≤ limit).  HiGHS's active-set QP is used for
small models; beyond ``IPM_FROM`` products with a price slope, its
interior-point QP ('hipo', in highspy-extras) where installed, because the
active-set method slows sharply and then fails with thousands of products
strictly inside their bounds.
"""

from __future__ import annotations

import time
from dataclasses import dataclass

import numpy as np

from models.data import MixData

from planner.engine.kkt import polish, polish_arrays

#: Products with a price slope above which the interior-point QP is preferred.
IPM_FROM = 1500


@dataclass
class QPResult:
    """Outcome of one fixed-slate QP."""

    status: str  # "optimal", "time_limit", "infeasible", "error"
    volume: np.ndarray  # units, product order
    objective: float  # currency, products' profit for this slate (no plant-wide cost)
    bound: float  # currency, upper bound on the objective from the solver
    duals: np.ndarray  # currency per resource unit, resource order, ≥ 0
    seconds: float
    method: str
    message: str = ""
    option_scale: np.ndarray | None = None  # 0..1 per (partial) option of the data, option order


def has_ipm() -> bool:
    """True if HiGHS's interior-point QP (highspy-extras) is importable."""
    try:
        import highspy_extras  # noqa: F401
    except ImportError:
        return False
    return True


def solve_slate_qp(d: MixData, slate: np.ndarray, time_limit: float | None = None,
                   threads: int = 1, seed: int = 0) -> QPResult:
    """Solve the mix QP with the running slate fixed; volumes, objective and duals."""
    import pyomo.environ  # noqa: F401  (before contrib.solver; imported here, not at start-up)
    from pyomo.contrib.solver.common.factory import SolverFactory
    from pyomo.contrib.solver.common.results import TerminationCondition as TC

    from models.mix import build_mix_model, read_option_scale, read_volumes

    t0 = time.perf_counter()
    slate = np.asarray(slate, dtype=bool)
    model = build_mix_model(d, slate=slate)
    quad = int(np.count_nonzero(slate & (d.b > 0)))
    method = "hipo" if quad >= IPM_FROM and has_ipm() else "highs-qp"
    solver = SolverFactory("highs")
    options: dict = {"random_seed": seed}
    if method == "hipo":
        options["solver"] = "hipo"
    try:
        res = solver.solve(model, threads=threads, time_limit=time_limit, solver_options=options,
                           raise_exception_on_nonoptimal_result=False, load_solutions=False)
    except Exception as e:  # the solver itself failed: report, do not guess
        return QPResult("error", np.zeros(d.n), float("nan"), float("nan"), np.zeros(len(d.resources)),
                        time.perf_counter() - t0, method, f"HiGHS failed on the fixed-slate QP: {e}")
    tc = res.termination_condition
    status = {TC.convergenceCriteriaSatisfied: "optimal", TC.maxTimeLimit: "time_limit",
              TC.provenInfeasible: "infeasible", TC.locallyInfeasible: "infeasible"}.get(tc, "error")
    if status != "optimal" or res.incumbent_objective is None:
        return QPResult(status if status != "optimal" else "error", np.zeros(d.n), float("nan"), float("nan"),
                        np.zeros(len(d.resources)), time.perf_counter() - t0, method,
                        f"HiGHS ended the fixed-slate QP with {tc.name}")
    res.solution_loader.load_vars()
    volume = read_volumes(model, d)
    duals = np.zeros(len(d.resources))
    if len(d.resources):
        got = res.solution_loader.get_duals([model.capacity[r] for r in d.resources])
        duals = np.array([got[model.capacity[r]] for r in d.resources], dtype=float)
    duals = np.maximum(duals, 0.0)
    volume = np.clip(volume, np.where(slate, d.run_floor, 0.0), np.where(slate, d.qp_upper, 0.0))
    bound = res.objective_bound
    scale = np.clip(read_option_scale(model, d), 0.0, 1.0)
    if d.n_options:
        exact = _polish_with_options(d, slate, volume, scale, duals)
        if exact is not None:
            volume, scale, duals = exact
    else:
        exact = polish(d, slate, volume, duals)
        if exact is not None:
            volume, duals = exact
    if exact is not None:
        method += "+kkt"
    objective = float(np.sum(d.contribution(volume)) - np.sum(d.F[slate]) - d.opt_cost @ scale)
    if exact is not None or bound is None:
        bound = objective  # KKT point of a convex QP: primal and dual objectives agree
    return QPResult("optimal", volume, objective, float(max(bound, objective)), duals,
                    time.perf_counter() - t0, method, option_scale=scale)


def _polish_with_options(d: MixData, slate: np.ndarray, volume: np.ndarray, scale: np.ndarray,
                         duals: np.ndarray):
    """KKT polish with the partial options as extra linear columns: margin −c_o, usage −A_ro, 0 ≤ s ≤ 1."""
    n = d.n
    c = np.concatenate([d.margin, -d.opt_cost])
    b = np.concatenate([d.b, np.zeros(d.n_options)])
    H = np.hstack([d.usage_dense(), -d.opt_amount.T])
    lo = np.concatenate([np.where(slate, d.run_floor, 0.0), np.zeros(d.n_options)])
    hi = np.concatenate([np.where(slate, d.qp_upper, 0.0), np.ones(d.n_options)])
    got = polish_arrays(c, b, H, d.capacity, lo, hi, np.concatenate([volume, scale]), duals)
    if got is None:
        return None
    x, lam = got
    return x[:n], np.clip(x[n:], 0.0, 1.0), lam
