"""The fast exact route: Lagrangian bound and slate first, tangent-cut MILP only where the gap is open.

1. No on/off choices: the fixed-slate QP of every product (:mod:`planner.fastqp`).
2. Otherwise minimise the Lagrangian dual of the shared limits
   (:mod:`planner.lagrange`); its best value is a certified upper bound, and
   the products that run at its multipliers are a slate, solved exactly by
   the fixed-slate QP.  Where the gap (bound − profit) / max(|profit|, 1) is
   at most ``rel_gap``, that is the plan.
3. Otherwise the tangent-cut MILP (:mod:`planner.fastcuts`) on one persistent
   HiGHS instance: cuts at each product's peak, half and full bound, at the
   Lagrangian volumes and at the best slate's volumes; that slate as its MIP
   start; new cuts at every MILP's volumes; every slate met solved by the
   fixed-slate QP.  The bound is the smaller of the MILP's dual bound and the
   Lagrangian bound (both valid), so the certificate stays honest.

Amounts exclude the plant-wide fixed cost.  Returns None where the route
does not apply (the caller then uses the general route).
"""

from __future__ import annotations

import time
from dataclasses import fields

import numpy as np

from models.data import MixData

from planner.engine.certificate import relative_gap
from planner.engine.slateqp import solve_slate_fast
from planner.engine.lagrange import DualPoint, choice_bounds, evaluate, minimise_dual
from planner.engine.qp import QPResult

#: MixData fields the fast route understands; any other non-empty field (e.g. capacity options) sends
#: the solve to the general route.
KNOWN_FIELDS = {"products", "resources", "a", "b", "v", "F", "committed", "min_run", "cap", "must_run",
                "use_res", "use_prod", "use_amt", "capacity", "upper", "qp_upper", "can_stop"}


def applies(d: MixData) -> bool:
    """True if ``d`` carries nothing but the fields the fast route models."""
    for f in fields(d):
        if f.name in KNOWN_FIELDS:
            continue
        val = getattr(d, f.name, None)
        if val is None:
            continue
        try:
            if len(val) == 0:
                continue
        except TypeError:
            if not val:
                continue
        return False
    return True


class _Slates:
    """Fixed-slate QPs met so far (cached by slate) and the best of them."""

    def __init__(self, d: MixData, threads: int, seed: int) -> None:
        self.d, self.threads, self.seed = d, threads, seed
        self.seen: dict[bytes, QPResult] = {}
        self.best: tuple[QPResult, np.ndarray] | None = None

    def evaluate(self, slate: np.ndarray, time_limit: float | None = None) -> QPResult:
        key = np.packbits(slate).tobytes()
        if key not in self.seen:
            if np.any(slate & (self.d.run_floor > self.d.upper * (1 + 1e-12) + 1e-12)):
                qp = QPResult("infeasible", np.zeros(self.d.n), -np.inf, -np.inf, np.zeros(len(self.d.resources)),
                              0.0, "none", "a running product cannot reach its minimum run")
            else:
                qp = solve_slate_fast(self.d, slate, time_limit, self.threads, self.seed)
            self.seen[key] = qp
            if qp.status == "optimal" and (self.best is None or qp.objective > self.best[0].objective):
                self.best = (qp, slate.copy())
        return self.seen[key]

    @property
    def value(self) -> float:
        return self.best[0].objective if self.best else -np.inf


def solve_fast(d: MixData, rel_gap: float, time_limit: float | None = None, threads: int = 1, seed: int = 0,
               start: list[np.ndarray] | None = None, known: list[np.ndarray] = ()):
    """The fast route (see the module docstring); a :class:`planner.solve.MixSolution` or None.

    ``start``: multipliers to try first (e.g. the shadow prices of a previous
    plan of the same scenario, for sweeps); ``known``: slates to solve first,
    as incumbents (e.g. the plan's own slate when re-solving at other capacities).
    """
    from planner.engine.solve import MixSolution

    t0 = time.perf_counter()
    deadline = None if time_limit is None else t0 + time_limit

    def left() -> float | None:
        return None if deadline is None else max(deadline - time.perf_counter(), 0.01)

    slates = _Slates(d, threads, seed)
    if not d.can_stop.any():
        qp = slates.evaluate(np.ones(d.n, dtype=bool), left())
        if qp.status != "optimal":
            return None
        return MixSolution(qp.status, qp.volume, np.ones(d.n, dtype=bool), qp.objective,
                           max(qp.bound, qp.objective), qp.duals, "qp", 0, qp_method=qp.method)
    for slate in known:
        slates.evaluate(np.asarray(slate, dtype=bool) | ~d.can_stop, left())
    # 2. the Lagrangian bound and its slate
    # with a known slate solved, stop the bound as soon as it certifies that slate
    target = slates.value + 0.5 * rel_gap * max(abs(slates.value), 1.0) if slates.best is not None else -np.inf
    dual = minimise_dual(d, rel_tol=max(rel_gap / 4, 1e-9), start=start, deadline=deadline, target=target)
    bound = dual.best.value
    steps = dual.steps
    certified = slates.best is not None and relative_gap(bound, slates.value) <= rel_gap
    _try_slates(slates, dual.points, left, 1 if certified else 3)  # (a known slate already certified: one try)
    if slates.best is not None and relative_gap(bound, slates.value) > rel_gap:
        # the QP's shadow prices are a good point for the dual too; then tighten towards the incumbent
        qp_point = evaluate(d, slates.best[0].duals)
        more = minimise_dual(d, rel_tol=max(rel_gap / 20, 1e-10), start=None, deadline=deadline,
                             target=slates.value + rel_gap * max(abs(slates.value), 1.0) * 0.5,
                             bundle=dual.points + [qp_point])
        steps += more.steps
        bound = min(bound, more.best.value)
        _try_slates(slates, more.points[len(dual.points):], left)
        dual = more
    messages = [f"Lagrangian bound after {steps} multiplier steps"]
    if slates.best is not None and relative_gap(bound, slates.value) <= rel_gap:
        return _solution(MixSolution, slates, bound, "lagrangian", 0, "optimal", messages, steps, dual.best.lam,
                         [p.lam for p in dual.points])
    if deadline is not None and time.perf_counter() >= deadline:
        if slates.best is None:
            return None
        return _solution(MixSolution, slates, bound, "lagrangian", 0, "time_limit", messages, steps,
                         dual.best.lam, [p.lam for p in dual.points])
    # 3. the tangent-cut MILP where the gap is still open
    from planner.engine.cutmilp import CutMilp
    from planner.engine.solve import _initial_points

    milp = CutMilp(d, threads, seed, mip_rel_gap=rel_gap / 4)
    milp.add_cuts(*_initial_points(d))
    on = np.flatnonzero(dual.best.slate & (dual.best.volume > 0))
    milp.add_cuts(on, dual.best.volume[on])
    if slates.best is not None:
        qp, slate = slates.best
        on = np.flatnonzero(slate & (qp.volume > 0))
        milp.add_cuts(on, qp.volume[on])
    status, rounds = "optimal", 0
    scale = np.maximum(np.abs(d.margin) * d.upper, 1.0)
    stop_bound, run_bound = choice_bounds(d, dual.points)
    fixed = np.zeros(d.n, dtype=bool)
    fixed_bound = -np.inf  # best any plan with a fixed choice flipped could make
    milp_bound = np.inf
    tight = False
    while rounds < 500:
        rounds += 1
        if slates.best is not None:
            # Lagrangian fixing: a choice whose opposite cannot beat the target is fixed
            thr = slates.value + 0.5 * rel_gap * max(abs(slates.value), 1.0)
            to_run = d.can_stop & ~fixed & (stop_bound < thr) & (run_bound >= thr)
            to_stop = d.can_stop & ~fixed & (run_bound < thr) & (stop_bound >= thr)
            if to_run.any() or to_stop.any():
                ks = np.flatnonzero(to_run | to_stop)
                milp.fix_running(ks, to_run[ks].astype(float))
                fixed[ks] = True
                fixed_bound = max(fixed_bound, float(np.max(np.where(to_run[ks], stop_bound[ks], run_bound[ks]))))
                milp_bound = np.inf  # the restricted MILP's bound is taken afresh
            milp.start_from(slates.best[0].volume, slates.best[1])
        # early rounds only place cuts: solve them loosely, the last ones to the target
        loose = float(max(rel_gap / 4, 0.1 * relative_gap(bound, slates.value))) if not tight else rel_gap / 4
        milp.h.setOptionValue("mip_rel_gap", loose)
        res = milp.solve(left())
        if res["infeasible"]:
            if fixed.any():
                res["bound"] = -np.inf  # nothing left in the restricted set beats the fixed choices
            else:
                return None  # let the general route name the problem
        milp_bound = min(milp_bound, res["bound"])
        bound = min(dual.best.value, max(milp_bound, fixed_bound))
        if not res["has_solution"]:
            status = "time_limit" if res["time_limit"] else "error"
            break
        qp = slates.evaluate(res["slate"], left())
        if relative_gap(bound, slates.value) <= rel_gap:
            break
        if res["time_limit"]:
            status = "time_limit"
            break
        if not res["optimal"]:
            status = "error"
            break
        vol, t = res["volume"], res["t"]
        over = t - d.contribution(vol) > 1e-9 * scale
        if not over.any():
            if loose > rel_gap / 4:
                tight = True  # exact at its own point but solved loosely: solve it to the target
                continue
            break  # the MILP is exact at its own point: its gap is the one left
        milp.add_cuts(np.flatnonzero(over), vol[over])
        if qp.status == "optimal":  # and at the exact volumes of the slate it chose
            on = np.flatnonzero(res["slate"] & (qp.volume > 0))
            milp.add_cuts(on, qp.volume[on])
    if slates.best is None or status == "error":
        return None
    messages.append(f"tangent-cut MILP: {rounds} round{'s' if rounds != 1 else ''}, {milp.ncuts} cuts")
    sol = _solution(MixSolution, slates, bound, "lagrangian+cuts", rounds, status, messages, steps, dual.best.lam,
                    [p.lam for p in dual.points])
    if sol.status == "optimal" and sol.gap > rel_gap:
        return None  # not certified here: the general route decides
    return sol


def _try_slates(slates: _Slates, points: list[DualPoint], left, few: int = 3) -> None:
    """Solve the slates of the best ``few`` dual points (each distinct slate once)."""
    ranked = sorted(points, key=lambda p: p.value)[:few]
    for p in ranked:
        slates.evaluate(p.slate, left())


def _solution(cls, slates: _Slates, bound: float, strategy: str, rounds: int, status: str,
              messages: list[str], steps: int, lam: np.ndarray | None = None, tried: list | None = None):
    qp, slate = slates.best
    sol = cls(status, qp.volume, slate.copy(), qp.objective, max(bound, qp.objective), qp.duals, strategy,
              rounds, qp_method=qp.method, messages=messages)
    sol.dual_steps = steps
    sol.multipliers = lam
    sol.multipliers_tried = tried
    return sol
