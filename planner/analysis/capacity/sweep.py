"""Optimal profit along one resource's capacity, with the exact points where things change.

At each of the evenly spaced capacities the mixed-integer plan is re-solved
by the scenario's engine (:mod:`.resolve`: warm-started from the point before,
its slate the first incumbent) and every slate met is followed exactly along the capacity
(:class:`.paths.SlatePath`: piecewise quadratic profit, affine volumes and
shadow prices).  Where two neighbouring points run different slates the
change point is the crossing of the two slates' profit curves, solved in
closed form and confirmed by re-solves just either side of it (if a third
slate shows there, the search recurses; if no crossing is found it falls back
to bisection on re-solves).  Inside a slate's stretch its pieces give the
points where a limit starts or stops binding or a volume reaches a bound, and
the shadow-price lines give where the bottleneck changes (the binding limit
whose extra one per cent of capacity is worth most: :func:`models.economics.bottleneck`,
the same whatever unit each resource is counted in).

Capacities in the resource's unit; profits in currency per period, after the
plant-wide fixed cost (as in the Plan); shadow prices in currency per unit.
"""

from __future__ import annotations

import time
from collections.abc import Callable
from dataclasses import asdict, dataclass, field
from typing import Any

import numpy as np

from models.data import MixData, committed_made

from planner.engine.infeasible import explain
from planner.errors import ScenarioError, Problem
from planner.scenario.arrays import mix_data
from planner.scenario.schema import Scenario
from planner.analysis.capacity.paths import SlatePath, overtakes
from planner.analysis.capacity.ranging import slate_change
from planner.analysis.capacity.resolve import resolve, slate_key
from planner.engine import Engine
from planner.engine.verify import check_plan
from models.economics import bottleneck

#: Relative distance either side of a change point at which it is confirmed by re-solving.
SIDE = 1e-7


@dataclass
class SweepPoint:
    capacity: float
    profit: float
    shadow_price: float
    volumes: dict[str, float]
    slate: list[str]
    bottleneck: str | None


@dataclass
class Breakpoint:
    capacity: float
    change: str
    kind: str  # "slate", "limit" or "bottleneck"
    profit: float  # just below (a slate change can make the profit jump: see profit_above)
    shadow_price_below: float
    shadow_price_above: float
    profit_above: float | None = None  # just above, where it differs (a minimum run becoming possible)


@dataclass
class Sweep:
    resource: str
    unit: str
    start: float
    stop: float
    currency: str
    points: list[SweepPoint]
    breakpoints: list[Breakpoint]
    stats: dict[str, Any] = field(default_factory=dict)

    def to_dict(self) -> dict[str, Any]:
        from planner.output.plan import LABOUR_NOTE

        return {"resource": self.resource, "unit": self.unit, "from": self.start, "to": self.stop,
                "currency": self.currency, "points": [asdict(p) for p in self.points],
                "breakpoints": [asdict(b) for b in self.breakpoints], "stats": self.stats, "note": LABOUR_NOTE}


class _Sweeper:
    def __init__(self, d: MixData, r: int, plant_fixed: float, rel_gap: float, top: float) -> None:
        self.d, self.r, self.plant = d, r, plant_fixed
        self.u = np.eye(len(d.resources))[r]
        self.H0 = float(d.capacity[r])
        self.rel_gap = rel_gap
        self.engine = Engine(d, offset=plant_fixed)
        self.resolves = 0
        self.paths: dict[bytes, SlatePath] = {}
        self.last: np.ndarray | None = None  # the slate best() returned last
        self.certified = 0  # points settled by the dual bound alone

    def cap(self, t: float) -> np.ndarray:
        """Every resource's capacity at H0 + t on the swept one (resource units)."""
        return self.d.capacity + t * self.u

    def path(self, slate: np.ndarray) -> SlatePath:
        key = slate_key(slate)
        if key not in self.paths:
            self.paths[key] = SlatePath(self.engine, self.d, slate, self.u)
        return self.paths[key]

    def best(self, t: float, quick: bool = False) -> np.ndarray:
        """The optimal slate at H0 + t, to the gap (re-solved warm).

        ``quick``: near a point just solved (confirming a change point), first
        try whether a dual bound shows that nothing beats the slate met last.
        """
        cap = self.d.capacity + t * self.u
        if quick and self.last is not None:  # the slate met last, if a dual bound shows nothing beats it
            value = self.path(self.last).profit(t)
            if np.isfinite(value) and self.engine.no_better(value, self.rel_gap, capacity=cap):
                self.certified += 1
                return self.last
        known = [self.last] if self.last is not None else []  # (each known slate costs a QP solve)
        self.resolves += 1
        self.last = resolve(self.engine, cap, self.rel_gap, known).running
        return self.last

    def better_of(self, t: float, slates: list[np.ndarray]) -> np.ndarray:
        """The slate with the highest exact profit at t among ``slates`` (the first on ties)."""
        values = [self.path(sl).profit(t) for sl in slates]
        return slates[int(np.argmax(values))]

    def locate(self, ta: float, sa: np.ndarray, tb: float, sb: np.ndarray, out: list, depth: int = 0) -> None:
        """Append (t, slate before, slate after) for every slate change found in (ta, tb)."""
        if depth > 8 or tb <= ta:
            return
        tc = overtakes(self.path(sa), self.path(sb), ta, tb)
        if tc is None:
            pa, pb = self.path(sa).profit(tb), self.path(sb).profit(tb)
            if pb <= pa + 1e-9 * max(abs(pa), 1.0):
                return  # b never gets ahead of a here: the two tie to within the gap, no change to place
            tc = self._bisect(ta, sa, tb)
        eps = SIDE * max(abs(self.H0 + tc), 1.0)
        # either side, a slate found within the gap that does no better than the known one is not a change
        self.last = sa
        t_left = max(tc - eps, ta)
        left = self.better_of(t_left, [sa, self.best(t_left, quick=True)]) if tc - eps > ta else sa
        self.last = sb
        t_right = min(tc + eps, tb)
        right = self.better_of(t_right, [sb, self.best(t_right, quick=True)]) if tc + eps < tb else sb
        if slate_key(left) != slate_key(sa):
            self.locate(ta, sa, tc - eps, left, out, depth + 1)
        if slate_key(left) != slate_key(right):
            out.append((tc, left, right))
        if slate_key(right) != slate_key(sb):
            self.locate(tc + eps, right, tb, sb, out, depth + 1)

    def _bisect(self, ta: float, sa: np.ndarray, tb: float) -> float:
        """Fallback: the change point by bisection on re-solves (slate a on the left)."""
        lo, hi = ta, tb
        while hi - lo > SIDE * max(abs(self.H0 + hi), 1.0):
            mid = 0.5 * (lo + hi)
            if slate_key(self.best(mid)) == slate_key(sa):
                lo = mid
            else:
                hi = mid
        return 0.5 * (lo + hi)


def _bottleneck(d: MixData, lam: np.ndarray, capacity: np.ndarray) -> str | None:
    """The bottleneck's name at shadow prices ``lam`` and these capacities (None if nothing binds)."""
    scale = max(float(np.max(np.abs(d.margin), initial=1.0)), 1.0)
    k = bottleneck(lam, capacity, tol=1e-9 * scale)
    return None if k is None else d.resources[k]


def run_sweep(s: Scenario, resource: str, start: float | None, stop: float, steps: int,
              rel_gap: float = 1e-7, progress: Callable[[int, int], None] | None = None) -> Sweep:
    """Sweep ``resource`` from ``start`` (default its capacity) to ``stop`` in ``steps`` equal steps."""
    t_start = time.perf_counter()
    names = [r.name for r in s.resources]
    if resource not in names:
        from planner.scenario.names import did_you_mean

        hint = did_you_mean(resource, names) or f"choose one of: {', '.join(names)}"
        raise ScenarioError([Problem(f"--resource {resource}", "is not a resource of the scenario", hint)])
    d = mix_data(s)
    if np.any(d.buy_max > 0):
        raise ScenarioError([Problem("products.buy_max", "a capacity sweep does not yet follow products that "
                                     "buy in", "plan each capacity with planner plan, or set buy_max to 0")])
    if np.any(d.res_closable):  # its slate paths re-solve with every resource open
        raise ScenarioError([Problem("resources.closable", "a capacity sweep does not yet follow resources that "
                                     "may close", "plan each capacity with planner plan, or set closable to false")])
    r = names.index(resource)
    unit = s.resources[r].unit
    start = float(d.capacity[r]) if start is None else float(start)
    lo, hi = min(start, stop), max(start, stop)
    need = float(d.used(committed_made(d))[r])
    if lo < need - 1e-9 * max(need, 1.0) or lo < 0:
        raise ScenarioError([Problem(f"--from {lo:,.6g}", f"the sweep of {resource} starts below what the committed "
                                     f"and minimum volumes need ({need:,.6g} {unit})",
                                     f"start at {max(need, 0):,.6g} or above")])
    if steps < 1:
        raise ScenarioError([Problem(f"--steps {steps}", "must be at least 1")])
    room = d.capacity.copy()
    room[r] = max(room[r], need)
    explain(s, d.with_capacity(room))  # another limit the commitments overload: no capacity of this one helps
    sw = _Sweeper(d, r, s.plant_fixed_cost, rel_gap, hi)
    H = np.linspace(lo, hi, steps + 1)
    T = H - sw.H0
    slates = []
    for k, t in enumerate(T):
        slates.append(sw.best(float(t)))
        if progress:
            progress(k + 1, len(T))
    # a neighbour's slate that does at least as well here replaces the one found (both are within the gap;
    # this keeps slates that tie to within the gap from showing as changes)
    for k in range(len(T)):
        near = [slates[k]] + [slates[j] for j in (k - 1, k + 1) if 0 <= j < len(T)]
        slates[k] = sw.better_of(float(T[k]), near)
    changes: list = []
    for k in range(len(T) - 1):
        if slate_key(slates[k]) != slate_key(slates[k + 1]):
            sw.locate(float(T[k]), slates[k], float(T[k + 1]), slates[k + 1], changes)
    points = [_point(sw, float(t), sl) for t, sl in zip(T, slates)]
    for t, sl, pt in zip(T, slates, points):  # each point is a plan: held to every limit at its own capacity
        check_plan(d.with_capacity(sw.cap(float(t))), np.array([pt.volumes[n] for n in d.products]), sl)
    bps = _breakpoints(sw, T, slates, changes)
    stats = {"seconds": time.perf_counter() - t_start, "fast_solves": sw.resolves,
             "dual_checks": sw.certified,
             "milp_solves": 0,
             "qp_solves": sum(p.qp_solves for p in sw.paths.values()),
             "slates": len(sw.paths), "rel_gap": rel_gap}
    return Sweep(resource, unit, lo, hi, s.currency, points, bps, stats)


def _point(sw: _Sweeper, t: float, slate: np.ndarray) -> SweepPoint:
    d, path = sw.d, sw.path(slate)
    p = path.at(t)
    x, lam = p.x(t), np.maximum(p.lam(t), 0.0)
    x = np.where(np.abs(x) <= 1e-9 * np.maximum(d.upper, 1.0), 0.0, x)
    return SweepPoint(capacity=sw.H0 + t, profit=path.q.profit(p.x(t)) - sw.plant, shadow_price=float(lam[sw.r]),
                      volumes={n: float(v) for n, v in zip(d.products, x)},
                      slate=[n for n, on in zip(d.products, slate) if on],
                      bottleneck=_bottleneck(d, lam, sw.cap(t)))


def _breakpoints(sw: _Sweeper, T: np.ndarray, slates: list, changes: list) -> list[Breakpoint]:
    d, r = sw.d, sw.r
    changes = sorted(changes, key=lambda c: c[0])
    # stretches of one slate: [t_a, t_b] with its slate
    edges = [float(T[0])] + [c[0] for c in changes] + [float(T[-1])]
    stretch_slates = [slates[0]] + [c[2] for c in changes]
    out: list[Breakpoint] = []
    for ta, before, after in changes:
        pa, pb = sw.path(before), sw.path(after)
        la, lb = pa.at(ta), pb.at(ta)
        lam_a = la.lam(ta) if la else np.zeros(len(d.resources))
        lam_b = lb.lam(ta) if lb else np.zeros(len(d.resources))
        text = "slate: " + slate_change(d, before, after)
        ba, bb = _bottleneck(d, lam_a, sw.cap(ta)), _bottleneck(d, lam_b, sw.cap(ta))
        if ba != bb:
            text += f"; bottleneck: {ba or 'none'} → {bb or 'none'}"
        profit, above = pa.profit(ta) - sw.plant, pb.profit(ta) - sw.plant
        jump = above if abs(above - profit) > 1e-9 * max(abs(profit), 1.0) else None
        out.append(Breakpoint(sw.H0 + ta, text, "slate", profit, float(max(lam_a[r], 0)), float(max(lam_b[r], 0)),
                              jump))
    for (ta, tb), slate in zip(zip(edges[:-1], edges[1:]), stretch_slates):
        path = sw.path(slate)
        pieces = path.cover(ta, tb)
        for p in pieces:
            if ta < p.t_hi < tb and p.why_hi:
                nxt = next((q for q in pieces if q is not p and q.contains(p.t_hi) and q.t_hi > p.t_hi), None)
                lam_a = np.maximum(p.lam(p.t_hi), 0)
                lam_b = np.maximum(nxt.lam(p.t_hi), 0) if nxt else lam_a
                text = p.why_hi
                ba, bb = _bottleneck(d, lam_a, sw.cap(p.t_hi)), _bottleneck(d, lam_b, sw.cap(p.t_hi))
                if ba != bb:
                    text += f"; bottleneck: {ba or 'none'} → {bb or 'none'}"
                out.append(Breakpoint(sw.H0 + p.t_hi, text, "limit", path.profit(p.t_hi) - sw.plant,
                                      float(lam_a[r]), float(lam_b[r])))
            out.extend(_bottleneck_crossings(sw, path, p, max(ta, p.t_lo), min(tb, p.t_hi)))
    out.sort(key=lambda b: b.capacity)
    return out


def _bottleneck_crossings(sw: _Sweeper, path: SlatePath, p, a: float, b: float) -> list[Breakpoint]:
    """Points inside one piece where another binding limit's extra 1 % overtakes the bottleneck's.

    On the piece λ_j(t) = λ_j(a) + λ'_j·(t − a) and H_j(t) = H_j(a) + u_j·(t − a), so each
    value 0.01·λ_j·H_j is quadratic in t and the crossings are roots in closed form.
    """
    d, out = sw.d, []
    t = a
    for _ in range(len(d.resources)):
        lam = np.maximum(p.lam(t), 0)
        cur = _bottleneck(d, lam, sw.cap(t))
        if cur is None:
            break
        c = d.resources.index(cur)
        best_t, best_j = b, None
        lam_t, cap_t = p.lam(t), sw.cap(t)
        for j in np.flatnonzero(p.active):
            if j == c:
                continue
            # w_j(s) − w_c(s) = k0 + k1·s + k2·s² for s = t' − t
            k0 = lam_t[j] * cap_t[j] - lam_t[c] * cap_t[c]
            k1 = p.dlam[j] * cap_t[j] + lam_t[j] * sw.u[j] - p.dlam[c] * cap_t[c] - lam_t[c] * sw.u[c]
            k2 = p.dlam[j] * sw.u[j] - p.dlam[c] * sw.u[c]
            s_cross = _first_rise(k0, k1, k2, best_t - t)
            if s_cross is not None:
                best_t, best_j = t + s_cross, j
        if best_j is None:
            break
        lam_here = p.lam(best_t)
        out.append(Breakpoint(sw.H0 + best_t, f"bottleneck: {cur} → {d.resources[best_j]}", "bottleneck",
                              path.profit(best_t) - sw.plant, float(lam_here[sw.r]), float(lam_here[sw.r])))
        t = best_t + 1e-12 * max(abs(best_t), 1.0)
    return out


def _first_rise(k0: float, k1: float, k2: float, width: float) -> float | None:
    """Smallest s in (0, width) past which k0 + k1·s + k2·s² turns positive (None if it does not)."""
    scale = max(abs(k0), abs(k1) * max(width, 1.0), abs(k2) * max(width, 1.0) ** 2, 1e-300)
    roots = []
    if abs(k2) > 1e-15 * scale:
        disc = k1 * k1 - 4 * k2 * k0
        if disc >= 0:
            sq = np.sqrt(disc)
            roots = [(-k1 - sq) / (2 * k2), (-k1 + sq) / (2 * k2)]
    elif abs(k1) > 1e-15 * scale:
        roots = [-k0 / k1]
    for s in sorted(x for x in roots if 0 < x < width):
        after = s + 1e-9 * max(width, 1.0)
        if k0 + k1 * after + k2 * after * after > 0:
            return float(s)
    return None
