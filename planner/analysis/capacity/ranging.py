"""Each resource's shadow price, its rate of change, and the capacity range where both hold.

For resource r the plan's slate and active set are followed as a parametric
QP (:mod:`.parametric`): on the range the shadow price is λ_r(H) = λ_r + s·(H − H_r)
with s = dλ_r/dH_r ≤ 0 (0 for a linear plan: ordinary LP ranging) and the
optimal profit is quadratic in H.  The range ends at the first event — another
limit starts or stops binding, a volume reaches zero, a minimum or a cap, or a
product held at a bound would move — or where another slate of running
products becomes better.  The slate is checked by re-solving the
mixed-integer plan with the scenario's engine (:mod:`.resolve`) at both ends; where it differs, the exact
crossing of the two slates' profit curves is found in closed form and checked
by a re-solve just inside it.
"""

from __future__ import annotations

import time
from dataclasses import dataclass

import numpy as np

from models.data import MixData, committed_made, tight_upper

from planner.engine import Engine
from planner.analysis.capacity.parametric import Degenerate, SlateQP, classify, is_kkt, piece_at
from planner.analysis.capacity.paths import SlatePath, overtakes
from planner.analysis.capacity.resolve import resolve, slate_key

#: Relative step inside a crossing at which the slate is re-checked.
INSIDE = 1e-6


@dataclass
class Range:
    """The range of one resource's shadow price (capacities in the resource's unit; None: no end)."""

    resource: str
    shadow_price: float  # currency per unit at the plan
    slope: float  # dλ/dH, currency per unit² (≤ 0)
    low: float | None
    high: float | None
    why_low: str
    why_high: str
    slates_checked: bool = True  # False: an end was not re-checked for a better slate (time budget)


#: Added to a range end's reason where the time budget left it unchecked for other slates.
UNCHECKED = " (other slates not checked: time budget)"


def slate_change(d: MixData, before: np.ndarray, after: np.ndarray) -> str:
    """'cedar chest starts; maple sideboard shuts down' (empty if the slates agree)."""
    parts = [f"{d.products[k]} starts" for k in np.flatnonzero(after & ~before)]
    parts += [f"{d.products[k]} shuts down" for k in np.flatnonzero(before & ~after)]
    return "; ".join(parts)


def reach_of(d: MixData, r: int) -> float:
    """Capacity of r beyond which it cannot bind: Σ_i h_ri·U_i with r unlimited (inf if unbounded)."""
    cap = d.capacity.copy()
    cap[r] = np.inf
    with np.errstate(invalid="ignore"):
        U = tight_upper(d.with_capacity(cap))
    H = d.usage_dense()[r]
    use = H > 0
    return float(np.sum(H[use] * U[use])) if use.any() else float(d.capacity[r])


def resource_ranges(d: MixData, slate: np.ndarray, rel_gap: float = 1e-6,
                    deadline: float | None = None, engine: Engine | None = None) -> list[Range]:
    """Ranges of every resource's shadow price at the optimal ``slate`` of ``d``.

    ``engine``: the scenario's engine (one is built on ``d`` if not given); its
    re-solves are certified to ``rel_gap``.

    Each range end is checked for a better slate by re-solving the mixed-integer
    plan there, dearest shadow price first; past ``deadline`` (a
    ``time.perf_counter()`` value) the remaining ends keep the fixed slate's
    range, flagged ``slates_checked=False`` with the reason saying so.
    """
    slate = np.asarray(slate, dtype=bool)
    engine = engine or Engine(d)
    R = len(d.resources)
    need = d.used(committed_made(d))
    paths, pieces, ends = [], [], []
    start = _start(engine, d, slate)  # one solve serves every direction
    for r in range(R):
        path = SlatePath(engine, d, slate, np.eye(R)[r])
        piece = None
        if start is not None:
            try:
                piece = piece_at(path.q, path.cap0, path.u, 0.0, *start)
                if is_kkt(path.q, path.cap0, piece.x(0.0), piece.lam(0.0)):
                    path.pieces.append(piece)
                else:
                    piece = None
            except Degenerate:
                piece = None
        if piece is None:
            piece = path.at(0.0)
        paths.append(path)
        pieces.append(piece)
        if piece is None:
            ends.append((0.0, 0.0))
            continue
        t_hi = piece.t_hi
        if not np.isfinite(t_hi):
            t_hi = max(reach_of(d, r) - d.capacity[r], 0.0)
            if not np.isfinite(t_hi):
                t_hi = max(d.capacity[r], 1.0)
        t_lo = max(piece.t_lo, path.t_min, need[r] - d.capacity[r], -d.capacity[r])
        ends.append((t_lo, t_hi))
    out: list[Range | None] = [None] * R
    # dearest shadow prices first: where a time budget runs out, the bottlenecks are done
    order = sorted(range(R), key=lambda r: -(float(pieces[r].lam(0.0)[r]) if pieces[r] is not None else -1.0))
    for r in order:
        piece, path = pieces[r], paths[r]
        name = d.resources[r]
        H0 = float(d.capacity[r])
        if piece is None:
            out[r] = Range(name, 0.0, 0.0, None, None, "not ranged: the active set is degenerate",
                           "not ranged: the active set is degenerate")
            continue
        lam, slope = float(piece.lam(0.0)[r]), float(piece.dlam[r])
        hi, why_hi = piece.t_hi, piece.why_hi
        lo, why_lo = piece.t_lo, piece.why_lo
        t_lo_check, t_hi_check = ends[r]
        if t_lo_check > lo:
            lo, why_lo = t_lo_check, "the committed and minimum volumes need this much"
            if t_lo_check <= -H0:
                why_lo = "capacity reaches 0"
        why_hi = why_hi or "no end: the limit stays slack"
        checked = True
        for sign, t_end in ((+1, t_hi_check), (-1, t_lo_check)):
            if sign < 0 and not piece.active[r]:
                continue  # a slack limit cut back to its use: the plan still fits, so it stays optimal
            if sign * t_end <= 0:
                continue
            try:
                change = _slate_change_between(d, engine, rel_gap, path, slate, r, t_end, sign, deadline)
            except TimeoutError:  # the budget ran out before or during this end's check
                checked = False
                if sign > 0:
                    why_hi += UNCHECKED
                else:
                    why_lo += UNCHECKED
                continue
            if change is not None:
                t_c, text = change
                if sign > 0 and t_c < hi:
                    hi, why_hi = t_c, f"the slate changes: {text}"
                if sign < 0 and t_c > lo:
                    lo, why_lo = t_c, f"the slate changes: {text}"
        out[r] = Range(name, lam, slope, H0 + lo if np.isfinite(lo) else None,
                       H0 + hi if np.isfinite(hi) else None, why_lo, why_hi, checked)
    return [x for x in out if x is not None]


def _start(engine: Engine, d: MixData, slate: np.ndarray):
    """The active set of the plan's slate at the scenario's capacities (None if not found)."""
    res = engine.slate(slate, capacity=d.capacity)
    if res.status != "optimal":
        return None
    return classify(SlateQP.of(d, slate), res.volume, res.duals)


def _slate_change_between(d: MixData, engine: Engine, rel_gap: float, path: SlatePath, slate: np.ndarray, r: int,
                          t_end: float, sign: int, deadline: float | None = None) -> tuple[float, str] | None:
    """The nearest point between 0 and t_end where another slate becomes optimal, with its text.

    Raises TimeoutError where ``deadline`` passes before the answer is certain.
    """
    if sign * t_end <= 0:
        return None
    u = path.u
    target = t_end
    found = None
    for _ in range(8):
        if deadline is not None and time.perf_counter() > deadline:
            raise TimeoutError("the time budget is spent")
        if engine.no_better(path.profit(target), rel_gap, capacity=d.capacity + target * u):
            return found
        res = resolve(engine, d.capacity + target * u, rel_gap, known=[slate], deadline=deadline)
        if slate_key(res.running) == slate_key(slate):
            return found
        other = SlatePath(engine, d, res.running, u)
        t_c = overtakes(path, other, 0.0, target)
        if t_c is None:
            return found
        found = (t_c, slate_change(d, slate, res.running))
        # re-check just inside the crossing: a third slate may come first
        target = t_c - sign * INSIDE * max(abs(t_c), abs(d.capacity[r]), 1.0)
        if sign * target <= 0:
            return found
    return found
