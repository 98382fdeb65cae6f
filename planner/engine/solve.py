"""Solve strategies for the mix model: exact, with an honest certificate.

- No real on/off choices: the convex QP directly (HiGHS).
- On/off choices (fixed costs or minimum runs): HiGHS cannot solve a
  mixed-integer QP, so outer approximation: the tangent-cut MILP of
  :mod:`models.cuts` on one persistent HiGHS instance, cuts added at each
  MILP's volumes, every slate met evaluated by the fixed-slate QP, until
  (upper bound − best profit) / max(|best profit|, 1) ≤ ``rel_gap``.  The
  bound is the MILP's dual bound, valid because every cut over-estimates the
  concave contribution.
- ``solver=NAME``: the mixed-integer QP handed as it is to another Pyomo
  solver (for example ``scip``); the slate it picks is then re-solved by the
  fixed-slate QP for exact volumes and duals.

Amounts are in the scenario's currency; the objective excludes the
plant-wide fixed cost (the planner subtracts it).
"""

from __future__ import annotations

import time
from dataclasses import dataclass, field

import numpy as np

from models.data import MixData, committed_floor

from planner.engine import fastroute
from planner.engine.certificate import relative_gap
from planner.errors import InfeasibleError, SolverError
from planner.engine.qp import QPResult, solve_slate_qp

#: Default certified relative gap.
DEFAULT_GAP = 1e-4


@dataclass
class MixSolution:
    """The solved mix: volumes, slate, certificate and duals (resource order)."""

    status: str
    volume: np.ndarray
    running: np.ndarray
    objective: float
    bound: float
    duals: np.ndarray
    strategy: str
    rounds: int = 0
    seconds: float = 0.0
    qp_method: str = ""
    messages: list[str] = field(default_factory=list)
    option_scale: np.ndarray = field(default_factory=lambda: np.zeros(0))  # 0..1 per option of the data
    dual_steps: int = 0  # multiplier steps of the Lagrangian bound (fast route)
    multipliers: np.ndarray | None = None  # currency per resource unit: the best Lagrangian λ (fast route)
    multipliers_tried: list = field(default_factory=list)  # every λ the bundle evaluated (warm starts)

    @property
    def gap(self) -> float:
        return relative_gap(self.bound, self.objective)


def check_commitments(d: MixData, unit_of: dict[str, str] | None = None) -> None:
    """Raise InfeasibleError naming each resource whose commitments exceed its capacity."""
    need = d.used(committed_floor(d))
    have = d.capacity_reach  # with every capacity option taken in full
    conflicts = []
    for r, name in enumerate(d.resources):
        if need[r] > have[r] * (1 + 1e-9) + 1e-9:
            users = sorted({d.products[k] for k, rr in zip(d.use_prod, d.use_res)
                            if rr == r and committed_floor(d)[k] > 0})
            unit = f" {unit_of.get(name, '')}" if unit_of else ""
            conflicts.append(f"committed volumes of {', '.join(users)} need {need[r]:,.6g}{unit} "
                             f"of {name}; it has {have[r]:,.6g}{unit} "
                             f"(short by {need[r] - have[r]:,.6g}{unit})")
    if conflicts:
        raise InfeasibleError(conflicts)


def solve_mix(d: MixData, rel_gap: float = DEFAULT_GAP, time_limit: float | None = None,
              solver: str | None = None, threads: int = 1, seed: int = 0) -> MixSolution:
    """Solve the mix exactly to ``rel_gap``; see the module docstring for the routes."""
    t0 = time.perf_counter()
    check_commitments(d)
    fast = None
    if not solver and fastroute.applies(d):
        fast = fastroute.solve_fast(d, rel_gap, time_limit, threads, seed)
    if fast is not None:
        sol = fast
    elif solver:
        sol = _solve_other(d, solver, rel_gap, time_limit, threads, seed)
    elif not d.can_stop.any() and not d.opt_whole.any():
        qp = solve_slate_qp(d, np.ones(d.n, dtype=bool), time_limit, threads, seed)
        _raise_on(qp)
        if qp.status == "time_limit":
            raise SolverError("the time limit ran out before HiGHS finished the QP (a convex QP has no plan to "
                              "show until it ends): raise --time-limit")
        sol = _from_qp(qp, np.ones(d.n, dtype=bool), "qp", qp.bound)
    else:
        sol = _outer_approximation(d, rel_gap, time_limit, threads, seed)
    sol.seconds = time.perf_counter() - t0
    return sol


def _raise_on(qp: QPResult) -> None:
    if qp.status == "error":
        raise SolverError(qp.message + " (reinstall highspy: pip install 'highspy==1.15.1')")


def _from_qp(qp: QPResult, slate: np.ndarray, strategy: str, bound: float, rounds: int = 0) -> MixSolution:
    scale = qp.option_scale if qp.option_scale is not None else np.zeros(0)
    return MixSolution(qp.status, qp.volume, slate.copy(), qp.objective, max(bound, qp.objective), qp.duals,
                       strategy, rounds, qp_method=qp.method, option_scale=scale)


def _initial_points(d: MixData) -> tuple[np.ndarray, np.ndarray]:
    """Cut points per product: its standalone peak, half its bound and its bound."""
    U = d.upper
    with np.errstate(divide="ignore", invalid="ignore"):
        peak = np.where(d.b > 0, d.margin / (2 * np.where(d.b > 0, d.b, 1.0)), U)
    peak = np.clip(peak, 0.0, U)
    ks, pts = [np.arange(d.n)], [peak]
    curved = np.flatnonzero(d.b > 0)
    ks += [curved, curved]
    pts += [0.5 * U[curved], U[curved]]
    return np.concatenate(ks), np.concatenate(pts)


class _Slates:
    """Fixed-slate QP results met so far, and the best of them."""

    def __init__(self, d: MixData, threads: int, seed: int) -> None:
        self.d, self.threads, self.seed = d, threads, seed
        self.seen: dict[bytes, QPResult] = {}
        self.best: tuple[QPResult, np.ndarray] | None = None

    def evaluate(self, slate: np.ndarray, time_limit: float | None, taken: np.ndarray | None = None) -> QPResult:
        key = np.packbits(slate).tobytes()
        if taken is not None and taken.size:
            key += b"|" + np.packbits(taken).tobytes()
        if key not in self.seen:
            if taken is not None and self.d.n_options:
                qp = _solve_with_options(self.d, slate, taken, time_limit, self.threads, self.seed)
            else:
                qp = solve_slate_qp(self.d, slate, time_limit, self.threads, self.seed)
            self.seen[key] = qp
            if qp.status == "optimal" and (self.best is None or qp.objective > self.best[0].objective):
                self.best = (qp, slate.copy())
        return self.seen[key]


def _solve_with_options(d: MixData, slate: np.ndarray, taken: np.ndarray, time_limit: float | None,
                        threads: int, seed: int) -> QPResult:
    """Fixed slate and all-or-nothing options decided: the QP with the partial options free.

    The result's option_scale covers every option of ``d`` (1/0 for the
    all-or-nothing ones) and its objective is net of every option's cost.
    """
    from dataclasses import replace

    qp = solve_slate_qp(d.with_whole_taken(taken), slate, time_limit, threads, seed)
    scale = np.where(taken & d.opt_whole, 1.0, 0.0)
    if qp.option_scale is not None:
        scale[~d.opt_whole] = qp.option_scale
    return replace(qp, objective=qp.objective - d.whole_cost(taken), bound=qp.bound - d.whole_cost(taken),
                   option_scale=scale)


def _outer_approximation(d: MixData, rel_gap: float, time_limit: float | None,
                         threads: int, seed: int, max_rounds: int = 500) -> MixSolution:
    import pyomo.environ  # noqa: F401  (Pyomo is imported only where a route needs it: start-up time)
    from pyomo.contrib.appsi.base import TerminationCondition as ATC
    from pyomo.contrib.appsi.solvers import Highs

    from models.cuts import add_cuts, build_cut_model

    deadline = None if time_limit is None else time.perf_counter() + time_limit
    m = build_cut_model(d)
    add_cuts(m, d, *_initial_points(d))
    opt = Highs()
    if not opt.available():
        raise SolverError("HiGHS is not available to Pyomo: pip install 'highspy==1.15.1'")
    opt.config.load_solution = False
    opt.highs_options = {"random_seed": seed, "threads": threads, "mip_rel_gap": rel_gap / 10,
                         "mip_abs_gap": 1e-9}
    slates = _Slates(d, threads, seed)
    free = [m.running[p] for k, p in enumerate(d.products) if d.can_stop[k]]
    free_idx = np.flatnonzero(d.can_stop)
    bound = np.inf
    status = "optimal"
    rounds = 0
    scale = np.maximum(np.abs(d.margin) * d.upper, 1.0)
    while rounds < max_rounds:
        rounds += 1
        if deadline is not None:
            left = deadline - time.perf_counter()
            if left <= 0:
                status = "time_limit"
                break
            opt.config.time_limit = left
        res = opt.solve(m)
        tc = res.termination_condition
        if tc == ATC.infeasible:
            from planner.engine.infeasible import iis_names

            limits, held = iis_names(d)
            raise InfeasibleError([f"HiGHS finds these limits and commitments in conflict: {', '.join(limits + held)}"]
                                  if limits else ["the cut model is infeasible although every commitment fits; "
                                                  "please report this"])
        if res.best_objective_bound is not None and np.isfinite(res.best_objective_bound):
            bound = min(bound, float(res.best_objective_bound))
        if res.best_feasible_objective is None:
            status = "time_limit" if tc == ATC.maxTimeLimit else "error"
            break
        res.solution_loader.load_vars()
        vol = np.array([m.volume[p].value or 0.0 for p in d.products])
        t = np.array([m.contribution[p].value or 0.0 for p in d.products])
        slate = np.ones(d.n, dtype=bool)
        slate[free_idx] = np.array([(v.value or 0.0) > 0.5 for v in free], dtype=bool)
        taken = None
        if d.n_options:
            taken = np.array([(m.option_scale[o].value or 0.0) > 0.5 for o in d.options]) & d.opt_whole
        left = None if deadline is None else max(deadline - time.perf_counter(), 0.01)
        qp_here = slates.evaluate(slate, left, taken)
        if qp_here.status == "optimal":  # cuts at the slate's own optimum too (Duran & Grossmann)
            x = qp_here.volume  # (a flat tangent at a product's peak is already among the first cuts)
            at = np.flatnonzero(slate & (d.b > 0) & (x > 0) & (np.abs(d.margin - 2 * d.b * x) > 1e-9 * np.abs(d.margin)))
            add_cuts(m, d, at, qp_here.volume[at])
        if tc == ATC.maxTimeLimit:
            status = "time_limit"
            break
        if tc != ATC.optimal:
            status = "error"
            break
        best = slates.best[0].objective if slates.best else -np.inf
        if relative_gap(bound, best) <= rel_gap:
            break
        over = t - d.contribution(vol) > 1e-9 * scale
        if not over.any():
            if opt.highs_options["mip_rel_gap"] > 0:  # the gap left is the MILP's own: close it fully once
                opt.highs_options = dict(opt.highs_options, mip_rel_gap=0.0, mip_abs_gap=0.0)
                continue
            break
        add_cuts(m, d, np.flatnonzero(over), vol[over])
    fell_back = slates.best is None and deadline is not None and status != "error"
    if fell_back:  # the time limit ended the search before any slate was solved: a feasible plan anyway
        from planner.engine.fallback import fallback_slates

        status = "time_limit"
        for fallback in fallback_slates(d):
            qp = solve_slate_qp(d, fallback, None, threads, seed)
            if qp.status == "optimal":
                slates.best = (qp, fallback)
                break
    if slates.best is None:
        raise SolverError("no feasible plan was found in the time allowed: raise --time-limit")
    if not np.isfinite(bound):
        from planner.engine.fallback import standalone_bound

        bound = standalone_bound(d)  # valid without the MILP: the shared limits dropped
    qp, slate = slates.best
    sol = _from_qp(qp, slate, "outer-approximation", bound, rounds)
    if fell_back:
        sol.messages.append("the time limit ended the search before any slate was solved: a fallback slate is shown")
    if status == "optimal" and sol.gap > rel_gap:
        # Never 'optimal' without the certificate: a round limit is a limit; anything else is trouble.
        status = "time_limit" if rounds >= max_rounds else "error"
        sol.messages.append(f"stopped at gap {sol.gap:.2e} after {rounds} rounds, above the {rel_gap:.1e} asked for")
    sol.status = status
    return sol


def _solve_other(d: MixData, name: str, rel_gap: float, time_limit: float | None,
                 threads: int, seed: int) -> MixSolution:
    """Hand the mixed-integer QP to another Pyomo solver; re-solve its slate with HiGHS."""
    import pyomo.environ as pyo

    from models.mix import build_mix_model

    if name == "scip" and not pyo.SolverFactory("scip").available(exception_flag=False):
        name = "scip_direct"  # SCIP through pyscipopt when no scip executable is on the PATH
    try:
        opt = pyo.SolverFactory(name)
        ok = opt.available(exception_flag=False)
    except Exception:
        ok = False
    if not ok:
        raise SolverError(f"solver '{name}' is not available to Pyomo; install it (for SCIP: "
                          "pip install pyscipopt, then --solver scip; or leave --solver out to use HiGHS)")
    m = build_mix_model(d)
    opts = {}
    if time_limit is not None:
        opts["limits/time"] = time_limit
    try:
        res = opt.solve(m, load_solutions=True, options=opts) if opts else opt.solve(m)
    except Exception as e:
        raise SolverError(f"solver '{name}' failed: {e}") from None
    tc = str(res.solver.termination_condition)
    slate = np.ones(d.n, dtype=bool)
    for k, p in enumerate(d.products):
        if d.can_stop[k]:
            slate[k] = (m.running[p].value or 0.0) > 0.5
    ub = getattr(res.problem, "upper_bound", None)
    try:
        bound = float(ub)
    except (TypeError, ValueError):
        bound = np.inf
    if d.n_options:
        taken = np.array([(m.option_scale[o].value or 0.0) > 0.5 for o in d.options]) & d.opt_whole
        qp = _solve_with_options(d, slate, taken, None, threads, seed)
    else:
        qp = solve_slate_qp(d, slate, None, threads, seed)
    _raise_on(qp)
    solved = "optimal" in tc.lower()
    sol = _from_qp(qp, slate, f"solver:{name}", bound if np.isfinite(bound) else qp.objective)
    if not np.isfinite(bound):
        sol.messages.append(f"{name} reported no bound; its own optimality claim is taken as the bound")
    if not solved:
        sol.status = "time_limit" if "limit" in tc.lower() else "error"
    elif sol.gap > max(rel_gap, 1e-6):
        sol.status = "time_limit"
        sol.messages.append(f"{name} stopped at gap {sol.gap:.2e}")
    return sol
