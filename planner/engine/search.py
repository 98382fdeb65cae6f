r"""The exact search for the best choice: slate enumeration, Lagrangian bound, tangent-cut MILP.

On the scaled problem (:mod:`planner.engine.problem`), with a certified
relative gap ``rel_gap`` and an optional deadline:

1. No on/off choices: the continuous QP of every block (:mod:`.slateqp`).
2. Known choices (a previous plan's slate, a neighbour's) are solved first as
   incumbents.
3. Up to ``ENUMERATE_UP_TO`` choices, every slate is bounded at once
   (:mod:`.enumerate`); usually that certifies the best slate after a few QPs.
4. Otherwise (or if the enumeration hands over), the Lagrangian dual of the
   shared rows is minimised (:mod:`.dual`); its best value is a valid bound,
   and the choices the blocks make at its multipliers are slates, solved by the
   QP.  Where (bound − best) / max(|best|, 1) ≤ ``rel_gap``, that is the plan.
5. Otherwise (up to ``BRANCH_MAX_ROWS`` shared rows) the best slate is
   improved by flipping marginal choices (:mod:`.flips`), then the
   branch-and-bound over the Lagrangian (:mod:`.branch`) searches the choices
   its bounds leave open; certified, or at the deadline, that is the answer.
6. Otherwise (too many rows, a family without dense terms, or the node limit)
   the tangent-cut MILP (:mod:`.cutmilp`) on one persistent HiGHS
   instance: the best slate as its MIP start, choices whose opposite cannot
   beat the incumbent fixed by their Lagrangian bounds, new cuts at every
   MILP's solution and at the exact values of every slate it meets.  The bound
   is the smaller of the MILP's dual bound and the Lagrangian's (both valid).

The deadline is one deadline: no step starts the clock again.  If it passes
before any slate is solved, a fallback choice that is always feasible is
solved (:mod:`.fallback`) and returned with status ``time_limit`` and the
Lagrangian's bound.  A search that stops for any other reason without the
certificate says so (status ``error``); it is never called optimal.
"""

from __future__ import annotations

import time
from dataclasses import dataclass, field

import numpy as np

from planner.engine.branch import branch_and_bound
from planner.engine.certificate import Certificate
from planner.engine.cutmilp import CutMilp
from planner.engine.dual import DualPoint, choice_bounds, evaluate, minimise
from planner.engine.enumerate import enumerate_slates
from planner.engine.fallback import fallback_choices
from planner.engine.flips import improve
from planner.engine.highs import Outcome, Status
from planner.engine.problem import Problem
from planner.engine.settings import BRANCH_DUAL_TOL, BRANCH_MAX_ROWS, ENUMERATE_UP_TO, MAX_ROUNDS
from planner.engine.slateqp import SlateResult, solve_choice


@dataclass
class Found:
    """What a search found, in the problem's (scaled) units."""

    status: Status
    best: SlateResult | None  # the best slate's QP (choice, values, objective, duals)
    bound: float
    strategy: str
    rounds: int = 0
    dual_steps: int = 0
    messages: list[str] = field(default_factory=list)
    multipliers: np.ndarray | None = None  # the best Lagrangian λ met
    tried: list[np.ndarray] = field(default_factory=list)  # λ's worth a warm start next time
    infeasible: bool = False  # the MILP found no plan although the commitments fit


class Slates:
    """Fixed-choice QPs met so far (cached by choice) and the best of them."""

    def __init__(self, p: Problem, threads: int, seed: int, clock) -> None:
        self.p, self.threads, self.seed, self.clock = p, threads, seed, clock
        self.seen: dict[bytes, SlateResult] = {}
        self.best: SlateResult | None = None

    def evaluate(self, choice: np.ndarray) -> SlateResult:
        key = Problem.key(choice)
        if key not in self.seen:
            res = solve_choice(self.p, choice, self.clock(), self.threads, self.seed)
            self.seen[key] = res
            if res.status == "optimal" and (self.best is None or res.objective > self.best.objective):
                self.best = res
        return self.seen[key]

    @property
    def value(self) -> float:
        return self.best.objective if self.best is not None else -np.inf


def search(p: Problem, rel_gap: float, deadline: float | None = None, threads: int = 1, seed: int = 0,
           money: float = 1.0, start: list[np.ndarray] | None = None,
           known: list[np.ndarray] = (), offset: float = 0.0) -> Found:
    """The best choice of ``p`` to ``rel_gap`` by ``deadline`` (a ``time.perf_counter()`` value).

    ``start``: multipliers to try first (warm start); ``known``: choices to solve first as incumbents;
    ``money``: currency per unit of the problem's money (for the gap's floor of 1 currency);
    ``offset``: a constant (the plant-wide fixed cost, in the problem's money) subtracted from profit
    and bound before every gap test, so the certificate is that of the plan's own profit.
    """
    cert = Certificate(money, offset)
    def left() -> float | None:
        return None if deadline is None else max(deadline - time.perf_counter(), 0.01)

    def out_of_time() -> bool:
        return deadline is not None and time.perf_counter() >= deadline

    def gap(bound: float) -> float:
        return cert.gap(bound, slates.value)

    slates = Slates(p, threads, seed, left)
    if p.n_choices == 0:
        res = slates.evaluate(np.zeros(0, dtype=bool))
        if res.status == "optimal":
            return Found(Status.OPTIMAL, res, res.objective, "qp")
        status = Status.TIME_LIMIT if res.status == "time_limit" else Status.ERROR
        return Found(status, None, np.inf, "qp", messages=[res.message])
    for z in known:
        slates.evaluate(z)
    points: list[DualPoint] = []
    messages: list[str] = []
    bound = np.inf
    if p.n_choices <= ENUMERATE_UP_TO:
        first = slates.best.choice if slates.best is not None else None
        en = enumerate_slates(p, slates.evaluate, rel_gap, cert, first, deadline)
        points = en.points
        bound = en.bound
        if slates.best is not None and (en.certified or gap(bound) <= rel_gap):
            return Found(Status.OPTIMAL, slates.best, max(bound, slates.value), "enumeration",
                         messages=[f"every slate bounded; {en.qps} slate QP{'s' if en.qps != 1 else ''} solved"],
                         multipliers=slates.best.duals, tried=[q.lam for q in points[-10:]])
        if en.certified and slates.best is None:
            return Found(Status.ERROR, None, -np.inf, "enumeration", infeasible=True,
                         messages=["no slate is feasible although the commitments fit"])
        messages.append(f"enumeration handed over after {en.qps} slate QPs")
    # the Lagrangian bound and its slates; with an incumbent, stop as soon as it is certified
    target = slates.value + 0.5 * cert.slack(rel_gap, slates.value) if slates.best else -np.inf
    dual = minimise(p, rel_tol=max(rel_gap / 4, 1e-9), start=start, deadline=deadline, target=target,
                    bundle=points, threads=threads, seed=seed, cert=cert)
    bound = min(bound, dual.best.value)
    steps = dual.steps
    _try(slates, dual.points, 1 if slates.best is not None and gap(bound) <= rel_gap else 3, out_of_time)
    if slates.best is not None and gap(bound) > rel_gap and not out_of_time():
        # the QP's shadow prices are a good point for the dual too; then tighten towards the incumbent
        more = minimise(p, rel_tol=max(rel_gap / 20, 1e-10), deadline=deadline,
                        target=slates.value + 0.5 * cert.slack(rel_gap, slates.value),
                        bundle=dual.points + [evaluate(p, slates.best.duals)], threads=threads, seed=seed,
                        cert=cert)
        steps += more.steps
        bound = min(bound, more.best.value)
        _try(slates, more.points[len(dual.points):], 3, out_of_time)
        dual = more
    messages.append(f"Lagrangian bound after {steps} multiplier steps")
    tried = [q.lam for q in dual.points[-10:]]

    def found(status: Status, strategy: str, rounds: int = 0) -> Found:
        return Found(status, slates.best, max(bound, slates.value), strategy, rounds, steps, messages,
                     dual.best.lam, tried)

    if slates.best is not None and gap(bound) <= rel_gap:
        return found(Status.OPTIMAL, "lagrangian")
    if out_of_time():
        return _fallback(p, slates, found, messages, "lagrangian")
    if slates.best is not None and p.m <= BRANCH_MAX_ROWS and p.forced:
        # the dual minimised closely (its bounds fix the choices), flips of the marginal choices from the
        # incumbent and from the slate at the dual's minimum, then the branch-and-bound over the Lagrangian
        best = slates.best
        slates.evaluate(improve(p, best.choice, best.duals, best.objective, deadline)[0])
        if gap(bound) > rel_gap and not out_of_time():
            fine = minimise(p, rel_tol=BRANCH_DUAL_TOL, deadline=deadline, bundle=dual.points, threads=threads,
                            seed=seed, cert=cert)
            steps += fine.steps
            bound = min(bound, fine.best.value)
            dual = fine
            tried = [q.lam for q in dual.points[-10:]]
            res = slates.evaluate(fine.best.choice)
            if res.status == "optimal" and gap(bound) > rel_gap and not out_of_time():
                slates.evaluate(improve(p, res.choice, res.duals, res.objective, deadline)[0])
        if gap(bound) <= rel_gap:
            messages.append("a better slate by flipping marginal choices")
            return found(Status.OPTIMAL, "lagrangian+flips")
        br = branch_and_bound(p, slates, dual.points, rel_gap, cert, deadline)
        bound = min(bound, br.bound)
        if br.reason != "not_applicable":
            messages.append(f"branch-and-bound over the Lagrangian: {br.nodes} node{'s' if br.nodes != 1 else ''}")
        if br.certified and gap(bound) <= rel_gap:
            return found(Status.OPTIMAL, "lagrangian+branch")
        if br.reason == "time_limit" or out_of_time():
            return _fallback(p, slates, found, messages, "lagrangian+branch")
    return _milp(p, slates, dual.points, bound, rel_gap, cert, threads, seed, left, out_of_time, found, messages)


def _try(slates: Slates, points: list[DualPoint], few: int, out_of_time) -> None:
    """Solve the slates of the best ``few`` dual points (each distinct slate once)."""
    for q in sorted(points, key=lambda q: q.value)[:few]:
        if out_of_time() and slates.best is not None:
            return
        slates.evaluate(q.choice)


def _fallback(p: Problem, slates: Slates, found, messages: list[str], strategy: str, rounds: int = 0) -> Found:
    """Status time_limit with the best slate, or a fallback choice solved without a limit if none."""
    if slates.best is None:
        for z in fallback_choices(p):
            res = solve_choice(p, z, None, slates.threads, slates.seed)
            if res.status == "optimal":
                slates.best = res
                messages.append("the time limit ended the search before any slate was solved: "
                                "a fallback slate is shown")
                break
    return found(Status.TIME_LIMIT, strategy, rounds)


def _milp(p: Problem, slates: Slates, points: list[DualPoint], bound: float, rel_gap: float, cert: "Certificate",
          threads: int, seed: int, left, out_of_time, found, messages: list[str]) -> Found:
    """The tangent-cut MILP where the Lagrangian leaves the gap open (step 5 of the module docstring)."""
    lag_bound = bound
    milp = CutMilp(p, threads, seed, mip_rel_gap=rel_gap / 4)
    best_pt = min(points, key=lambda q: q.value)
    milp.cuts_at(best_pt.values, best_pt.choice)
    if slates.best is not None:
        milp.cuts_at(slates.best.values, slates.best.choice)
    K = p.n_choices
    stop_bound, run_bound = choice_bounds(points, K)
    fixed = np.zeros(K, dtype=bool)
    fixed_bound = -np.inf  # best any plan with a fixed choice flipped could make
    milp_bound = np.inf
    tight, exact = False, False
    rounds = 0
    status = Status.OPTIMAL
    bound_now = bound
    while True:
        if rounds >= MAX_ROUNDS:
            status = Status.ERROR
            messages.append(f"stopped after {rounds} cut rounds at gap "
                            f"{cert.gap(bound_now, slates.value):.2e}, above the {rel_gap:.1e} asked for")
            break
        rounds += 1
        if slates.best is not None:
            thr = slates.value + 0.5 * cert.slack(rel_gap, slates.value)
            to_on = ~fixed & (stop_bound < thr) & (run_bound >= thr)
            to_off = ~fixed & (run_bound < thr) & (stop_bound >= thr)
            if to_on.any() or to_off.any():
                ks = np.flatnonzero(to_on | to_off)
                milp.fix(ks, to_on[ks])
                fixed[ks] = True
                fixed_bound = max(fixed_bound, float(np.max(np.where(to_on[ks], stop_bound[ks], run_bound[ks]))))
                milp_bound = np.inf  # the restricted MILP's bound is taken afresh
            milp.start_from(slates.best.values, slates.best.choice)
        # early rounds only place cuts: solve them loosely, the last ones to the target, then exactly
        gap_now = cert.gap(bound_now, slates.value)
        mip_gap = 0.0 if exact else (rel_gap / 4 if tight else float(max(rel_gap / 4, 0.1 * gap_now)))
        res = milp.solve(left(), mip_gap)
        if res.outcome == Outcome.INFEASIBLE:
            if not fixed.any():
                return Found(Status.ERROR, slates.best, bound_now, "lagrangian+cuts", rounds,
                             messages=messages, infeasible=True)
            res.bound = -np.inf  # nothing left in the restricted set beats the fixed choices
        milp_bound = min(milp_bound, res.bound)
        bound_now = min(lag_bound, max(milp_bound, fixed_bound))
        if not res.has_solution:
            if res.outcome == Outcome.TIME_LIMIT or out_of_time():
                status = Status.TIME_LIMIT
            elif res.outcome == Outcome.INFEASIBLE:
                pass  # every choice left is fixed and none beats the incumbent: certified below
            else:
                status = Status.ERROR
                messages.append(f"HiGHS ended the cut MILP with '{res.outcome}'")
            break
        qp = slates.evaluate(res.choice)
        if cert.gap(bound_now, slates.value) <= rel_gap:
            break
        if res.outcome == Outcome.TIME_LIMIT or out_of_time():
            status = Status.TIME_LIMIT
            break
        if res.outcome != Outcome.OPTIMAL:
            status = Status.ERROR
            messages.append(f"HiGHS ended the cut MILP with '{res.outcome}'")
            break
        added = milp.cuts(res.x)
        if qp.status == "optimal":  # and at the exact values of the slate it chose
            milp.cuts_at(qp.values, res.choice)
        if not added:
            # the MILP is exact at its own point, so its gap is its own mip gap: close it
            if not tight:
                tight = True
            elif not exact:
                exact = True
            else:
                status = Status.ERROR
                messages.append("the cut MILP is exact at its own point but the gap stays open")
                break
    messages.append(f"tangent-cut MILP: {rounds} round{'s' if rounds != 1 else ''}, {milp.ncuts} cuts")
    out = found(status, "lagrangian+cuts", rounds)
    out.bound = max(bound_now, slates.value)
    if status == Status.TIME_LIMIT:
        out = _fallback(p, slates, lambda s, st, r: _with_bound(found(s, st, r), bound_now, slates),
                        messages, "lagrangian+cuts", rounds)
    elif slates.best is None:
        out.status = Status.ERROR
        messages.append("no feasible slate was found")
    elif status == Status.OPTIMAL and cert.gap(out.bound, slates.value) > rel_gap:
        out.status = Status.ERROR
        messages.append("the search ended without certifying the gap asked for")
    return out


def _with_bound(f: Found, bound: float, slates: Slates) -> Found:
    f.bound = max(min(f.bound, bound), slates.value)
    return f
