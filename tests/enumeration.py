"""Slate enumeration with highspy, straight from the scenario numbers (an outside reference).

Nothing here imports the planner or models/.  Every on/off slate of the products with a real
choice is solved as a continuous QP passed to highspy as arrays (Hessian diag(2b), HiGHS's
½·xᵀQx convention), with a power-of-two scaling of its own, and each answer is certified in
numpy: the profit is recomputed from volumes that keep every limit, and the Lagrangian dual
function at λ ≥ 0, in closed form per product, bounds the slate from above.  The best slate's
profit is a feasible plan's profit and the largest slate bound a valid upper bound on the
optimum, whatever HiGHS did.  Exact for up to about a dozen choices.  See tests/reference.py
for the economics.
"""

from __future__ import annotations

import itertools
import math
from dataclasses import dataclass

import numpy as np

#: Relative amount by which the reference lets a volume sum exceed a capacity (rounding only).
REF_LIMIT_TOL = 1e-9


@dataclass(frozen=True)
class Numbers:
    """The scenario's numbers as arrays (product order; resources × products usage)."""

    names: tuple[str, ...]
    a: np.ndarray  # price intercept, currency/unit
    b: np.ndarray  # price slope, currency/unit², ≥ 0
    v: np.ndarray  # unit cost, currency/unit
    F: np.ndarray  # fixed cost, currency
    floor: np.ndarray  # smallest volume when running: max(min_volume, min_run), units
    cap: np.ndarray  # max_volume (inf if none), units
    forced: np.ndarray  # must run (must_run, or min_volume > 0)
    choice: np.ndarray  # may be shut down: not forced, and a fixed cost or a minimum run
    H: np.ndarray  # usage, resource unit per unit (m × n)
    capacity: np.ndarray  # resource units (m)
    plant: float  # plant-wide fixed cost, currency

    @property
    def n(self) -> int:
        return len(self.names)

    def box_upper(self) -> np.ndarray:
        """An upper bound on each volume that loses no optimal plan (units).

        min(cap, capacity_r·(1 + REF_LIMIT_TOL) / usage_ri over the resources it uses, and for b > 0
        max(floor, (a − v)/(2b))): the resource terms hold for every feasible plan
        (usage ≥ 0, volumes ≥ 0); beyond the peak of a sloped product's contribution
        more volume earns less and uses more of every resource, so no optimal plan
        goes there.
        """
        hi = self.cap.copy()
        with np.errstate(divide="ignore", invalid="ignore"):
            room = np.where(self.H > 0, self.capacity[:, None] * (1 + REF_LIMIT_TOL)
                            / np.where(self.H > 0, self.H, 1.0), np.inf)
            peak = np.where(self.b > 0, (self.a - self.v) / (2 * np.where(self.b > 0, self.b, 1.0)), np.inf)
        hi = np.minimum(hi, room.min(axis=0, initial=np.inf))
        return np.minimum(hi, np.where(self.b > 0, np.maximum(self.floor, peak), np.inf))

    def profit(self, volume: np.ndarray, running: np.ndarray) -> float:
        """Σ (a − v)·D − b·D² − fixed costs of the running (and forced) products (currency)."""
        run = np.asarray(running, dtype=bool) | self.forced
        terms = np.concatenate([(self.a - self.v) * volume, -self.b * volume * volume, -self.F[run]])
        return math.fsum(terms.tolist())


def scenario_numbers(s) -> Numbers:
    """Read the arrays from a scenario object's own fields (no planner code)."""
    P, R = list(s.products), list(s.resources)
    col = {r.name: k for k, r in enumerate(R)}
    H = np.zeros((len(R), len(P)))
    for i, p in enumerate(P):
        for res, amt in p.usage.items():
            H[col[res], i] += float(amt)
    f = lambda field: np.array([float(getattr(p, field)) for p in P])  # noqa: E731
    forced = np.array([bool(p.must_run) or p.min_volume > 0 for p in P])
    return Numbers(
        names=tuple(p.name for p in P), a=f("price_intercept"), b=f("price_slope"), v=f("unit_cost"),
        F=f("fixed_cost"), floor=np.maximum(f("min_volume"), f("min_run")),
        cap=np.array([np.inf if p.max_volume is None else float(p.max_volume) for p in P]),
        forced=forced, choice=~forced & ((f("fixed_cost") > 0) | (f("min_run") > 0)), H=H,
        capacity=np.array([float(r.capacity) for r in R]), plant=float(s.plant_fixed_cost))


def floors_fit(nums: Numbers, running: np.ndarray, rel: float = REF_LIMIT_TOL) -> bool:
    """True if the floors of the running and forced products fit every capacity × (1 + rel) (exact sums).

    The default allows rounding only: a commitment of 1700/2.97 units at 2.97 h each
    needs 1700.0000000000002 h of a 1,700 h resource.
    """
    on = np.asarray(running, dtype=bool) | nums.forced
    lo = np.where(on, nums.floor, 0.0)
    for r in range(len(nums.capacity)):
        need = math.fsum((nums.H[r] * lo).tolist())
        if need > nums.capacity[r] * (1 + rel):
            return False
    return True


@dataclass
class SlateAnswer:
    """One slate's continuous QP, certified: a feasible plan's profit and an upper bound on the slate."""

    running: np.ndarray
    volume: np.ndarray
    profit: float  # currency, before the plant-wide fixed cost
    bound: float  # currency, valid upper bound on this slate's best profit
    duals: np.ndarray  # currency per resource unit, ≥ 0
    status: str  # "optimal" | HiGHS's status text


def _pow2(x: np.ndarray) -> np.ndarray:
    """Powers of two nearest to x (x > 0 and finite; 1 elsewhere): scaling by them is exact."""
    x = np.asarray(x, dtype=float)
    ok = np.isfinite(x) & (x > 0)
    return np.where(ok, np.exp2(np.round(np.log2(np.where(ok, x, 1.0)))), 1.0)


def dual_value(nums: Numbers, running: np.ndarray, lam: np.ndarray, lo: np.ndarray, hi: np.ndarray) -> float:
    """The Lagrangian dual function of one slate's QP at λ ≥ 0 (currency): an upper bound on it.

    g(λ) = Σ_i max_{lo_i ≤ D ≤ hi_i} [(a_i − v_i − h_iᵀλ)·D − b_i·D²] + λᵀH − fixed costs,
    over the running products (weak duality; each maximum in closed form).
    """
    on = np.flatnonzero(np.asarray(running, dtype=bool) | nums.forced | ~nums.choice)
    c = (nums.a - nums.v)[on] - nums.H[:, on].T @ lam
    b, l, u = nums.b[on], lo[on], hi[on]
    with np.errstate(divide="ignore", invalid="ignore", over="ignore"):
        D = np.where(b > 0, np.clip(c / (2 * np.where(b > 0, b, 1.0)), l, u), np.where(c > 0, u, l))
        if np.any(~np.isfinite(D)):
            return math.inf
        terms = np.concatenate([c * D, -b * D * D, lam * nums.capacity, -nums.F[on]])
    return math.fsum(terms.tolist())


#: Each slate QP is tried in these forms until one ends optimal: HiGHS's active-set QP can cycle on a
#: tiny convex QP (seen on a 4-column one, scaled, while the unscaled one solved in 6 iterations).
ATTEMPTS = (("scaled", "qpasm"), ("raw", "qpasm"), ("scaled", "hipo"), ("raw", "hipo"))
#: Limits on each attempt (a cycling active set otherwise runs for ever).
QP_ITERATIONS = 20_000
QP_SECONDS = 10.0


def _highs_qp(cost, q, A, lo, hi, rhs, method: str):
    """min costᵀx + ½ Σ q_i x_i² s.t. A x ≤ rhs, lo ≤ x ≤ hi, straight into highspy: (status, x, row duals)."""
    import highspy

    m, k = A.shape
    h = highspy.Highs()
    h.setOptionValue("output_flag", False)
    h.setOptionValue("threads", 1)
    h.setOptionValue("random_seed", 0)
    h.setOptionValue("time_limit", QP_SECONDS)
    h.setOptionValue("qp_iteration_limit", QP_ITERATIONS)
    if method == "hipo":
        if h.setOptionValue("solver", "hipo") != highspy.HighsStatus.kOk:
            return "no hipo", None, None
    lp = highspy.HighsLp()
    lp.num_col_, lp.num_row_ = int(k), int(m)
    lp.col_cost_ = np.asarray(cost, dtype=float)
    lp.col_lower_ = np.asarray(lo, dtype=float)
    lp.col_upper_ = np.where(np.isfinite(hi), hi, highspy.kHighsInf)
    lp.row_lower_ = np.full(m, -highspy.kHighsInf)
    lp.row_upper_ = np.asarray(rhs, dtype=float)
    nz = A != 0
    lp.a_matrix_.format_ = highspy.MatrixFormat.kColwise
    lp.a_matrix_.start_ = np.concatenate([[0], np.cumsum(nz.sum(axis=0))]).astype(np.int32)
    lp.a_matrix_.index_ = np.nonzero(nz.T)[1].astype(np.int32)
    lp.a_matrix_.value_ = A.T[nz.T]
    h.passModel(lp)
    qcols = np.flatnonzero(q > 0)
    if qcols.size:
        hess = highspy.HighsHessian()
        hess.dim_ = int(k)
        hess.format_ = highspy.HessianFormat.kTriangular
        hess.start_ = np.concatenate([[0], np.cumsum(q > 0)]).astype(np.int32)
        hess.index_ = qcols.astype(np.int32)
        hess.value_ = np.asarray(q, dtype=float)[qcols]
        h.passHessian(hess)
    try:
        h.run()
    except Exception as e:  # noqa: BLE001  (a solver failure is an answer: try the next form)
        return f"raised {type(e).__name__}", None, None
    ms = h.getModelStatus()
    if ms != highspy.HighsModelStatus.kOptimal:
        return h.modelStatusToString(ms), None, None
    sol = h.getSolution()
    return "optimal", np.asarray(sol.col_value, dtype=float), np.asarray(sol.row_dual, dtype=float)


def slate_qp(nums: Numbers, running: np.ndarray) -> SlateAnswer | None:
    """The slate's continuous QP through highspy; None if its floors cannot fit (checked exactly).

    HiGHS minimises, so it gets the negated contribution: cost −(a − v), Hessian
    diag(2b).  Volumes D = σ·x, rows × ρ and the objective × ω, all powers of two.
    """
    running = np.asarray(running, dtype=bool) | nums.forced | ~nums.choice  # free-volume products: columns too
    if not floors_fit(nums, running):
        return None
    lo_all = nums.floor.copy()
    hi_all = nums.box_upper()
    hi_all = np.where((lo_all > hi_all) & (lo_all <= hi_all * (1 + REF_LIMIT_TOL)), lo_all, hi_all)  # rounding
    if np.any(running & (lo_all > hi_all)):
        return None  # a product that cannot reach its floor within its cap
    on = np.flatnonzero(running)
    m, k = len(nums.capacity), on.size
    if k == 0:
        zero = np.zeros(nums.n)
        return SlateAnswer(running, zero, 0.0, 0.0, np.zeros(m), "optimal")
    lo, hi = lo_all[on], hi_all[on]
    c, q, Hk = (nums.a - nums.v)[on], 2.0 * nums.b[on], nums.H[:, on]
    sigma = _pow2(np.where(np.isfinite(hi) & (hi > 0), hi, np.maximum(lo, 1.0)))
    Hs = Hk * sigma
    top = Hs.max(axis=1, initial=0.0)
    rho = _pow2(1.0 / np.where(top > 0, top, 1.0))
    cs, qs = c * sigma, q * sigma * sigma
    omega = float(_pow2(np.array([1.0 / max(float(np.max(np.abs(cs), initial=0.0)),
                                             float(np.max(qs, initial=0.0)), 1e-300)]))[0])
    # HiGHS's QP stops at tolerances near 1e-7, and its active-set QP can call a point "optimal" that is
    # far from it (seen with slopes 1e-8 and usages 1e-4: zero duals, a 1e14 gap).  So every answer is
    # kept honest here: volumes that keep every limit give a profit, the dual function at λ ≥ 0 gives a
    # bound; the KKT system on the answer's active set, solved here, makes a right answer exact to
    # rounding.  Forms are tried until the best profit and the least bound meet (certified).
    answers, tried = [], []
    for form, method in ATTEMPTS:
        if form == "scaled":
            status, xs, yd = _highs_qp(-omega * cs, omega * qs, Hs * rho[:, None], lo / sigma, hi / sigma,
                                       nums.capacity * rho, method)
            if status == "optimal":
                x, duals = xs * sigma, np.maximum(-yd, 0.0) * rho / omega
        else:
            status, xs, yd = _highs_qp(-c, q, Hk, lo, hi, nums.capacity, method)
            if status == "optimal":
                x, duals = xs, np.maximum(-yd, 0.0)
        tried.append(f"{form} {method}: {status}")
        if status != "optimal":
            continue
        for D, lam in [(x, duals)] + [_kkt_point(nums, on, lo, hi, x, duals, tol) for tol in (1e-9, 1e-7, 1e-5)]:
            if D is None:
                continue
            volume = np.zeros(nums.n)
            volume[on] = np.clip(D, lo, hi)
            volume = _into_limits(nums, volume, running, lo_all)
            if volume is not None:
                answers.append((nums.profit(volume, running), dual_value(nums, running, lam, lo_all, hi_all),
                                volume, lam))
        if answers and _certified(max(a[0] for a in answers), min(a[1] for a in answers)):
            break
    if not answers:  # the floors fit: still a feasible plan, and λ = 0 still gives a bound
        volume = np.where(running, lo_all, 0.0)
        zero = np.zeros(m)
        answers.append((nums.profit(volume, running), dual_value(nums, running, zero, lo_all, hi_all), volume, zero))
    profit, _, volume, _ = max(answers, key=lambda t: t[0])
    _, bound, _, lam = min(answers, key=lambda t: t[1])
    if not _certified(profit, bound) and m:
        bound, lam = _lower_dual(nums, running, lam, lo_all, hi_all, bound)
    status = "optimal" if _certified(profit, bound) else "not certified (" + "; ".join(tried) + ")"
    return SlateAnswer(running=running, volume=volume, profit=profit, bound=bound, duals=lam, status=status)


def _lower_dual(nums: Numbers, running: np.ndarray, lam: np.ndarray, lo: np.ndarray, hi: np.ndarray,
                bound: float) -> tuple[float, np.ndarray]:
    """The dual function minimised over λ ≥ 0 from ``lam`` (scipy, derivative-free; m ≤ a few).

    Where the QP is degenerate (fixed prices, ties) HiGHS's row duals can be off by 1e-7 while
    its volumes are right; g is convex in λ, so a direct search brings the bound down to the
    optimum.  Any λ ≥ 0 gives a valid bound, so the search needs no convergence proof.
    """
    from scipy.optimize import minimize

    def g(x):
        return dual_value(nums, running, np.abs(x), lo, hi)

    best = (bound, lam)
    for method, opts in (("Nelder-Mead", {"xatol": 1e-13, "fatol": 1e-13, "maxiter": 20000}),
                         ("Powell", {"xtol": 1e-13, "ftol": 1e-15, "maxiter": 20000})):
        res = minimize(g, best[1], method=method, options=opts)
        x = np.abs(res.x)
        value = g(x)
        if value < best[0]:
            best = (value, x)
    return best


#: Relative width of [profit, bound] within which a slate's answer counts as certified.
CERTIFIED_REL = 1e-9


def _certified(profit: float, bound: float) -> bool:
    return bound - profit <= CERTIFIED_REL * max(abs(profit), abs(bound), 1.0)


def _kkt_point(nums: Numbers, on: np.ndarray, lo: np.ndarray, hi: np.ndarray, D: np.ndarray,
               lam: np.ndarray, tol: float) -> tuple[np.ndarray | None, np.ndarray | None]:
    """Volumes and duals solving the KKT conditions on the active set that (D, λ) shows at ``tol``.

    Products within tol of a bound sit on it; the others satisfy
    (a − v) − 2b·D − hᵀλ = 0; rows with λ > 0 or within tol of full hold with
    equality, the others get λ = 0.  One linear solve (least squares).
    """
    c, b, Hk, cap = (nums.a - nums.v)[on], nums.b[on], nums.H[:, on], nums.capacity
    size = np.maximum(np.where(np.isfinite(hi), hi, np.abs(D)), 1.0)
    at_lo = D <= lo + tol * size
    at_hi = ~at_lo & (D >= hi - tol * size)
    free = ~at_lo & ~at_hi
    used = Hk @ D
    rows = np.flatnonzero((lam > tol * max(float(np.max(np.abs(c), initial=1.0)), 1.0))
                          | (used >= cap - tol * np.maximum(cap, 1.0)))
    fixed = np.where(at_lo, lo, np.where(at_hi, hi, 0.0))
    f = np.flatnonzero(free)
    nf, nb = f.size, rows.size
    if nf + nb == 0:
        return fixed, np.zeros(len(cap))
    K = np.zeros((nf + nb, nf + nb))
    rhs = np.zeros(nf + nb)
    K[:nf, :nf] = np.diag(2 * b[f])
    K[:nf, nf:] = Hk[np.ix_(rows, f)].T
    rhs[:nf] = c[f]
    K[nf:, :nf] = Hk[np.ix_(rows, f)]
    rhs[nf:] = cap[rows] - Hk[rows] @ fixed
    sol, *_ = np.linalg.lstsq(K, rhs, rcond=None)
    if not np.all(np.isfinite(sol)):
        return None, None
    out = fixed.copy()
    out[f] = sol[:nf]
    duals = np.zeros(len(cap))
    duals[rows] = np.maximum(sol[nf:], 0.0)
    return out, duals


def _into_limits(nums: Numbers, volume: np.ndarray, running: np.ndarray, lo: np.ndarray) -> np.ndarray | None:
    """Volumes pulled back toward the floors (by at most 1e-8) so every capacity holds exactly.

    Only where the floors alone overfill a capacity by rounding (within REF_LIMIT_TOL) is that
    rounding allowed; a reference plan never gains from using more than a capacity.
    """
    base = np.where(running, lo, 0.0)
    room = np.maximum(nums.capacity, nums.H @ base)
    for shrink in (0.0, 1e-15, 1e-13, 1e-12, 1e-11, 1e-10, 1e-9, 1e-8):
        trial = base + (volume - base) * (1 - shrink)
        if np.all(nums.H @ trial <= room):
            return trial
    return None  # not a plan: this candidate is dropped


@dataclass
class Enumeration:
    """The best of every slate: a feasible plan, its profit and a valid upper bound (currency)."""

    feasible: bool  # False: the forced products' floors alone overload a limit
    profit: float  # best profit before the plant-wide fixed cost (−inf if infeasible)
    bound: float  # upper bound on the optimum, before the plant-wide fixed cost
    volume: np.ndarray
    running: np.ndarray
    slates: int  # slates whose QP was solved
    statuses: tuple[str, ...]  # HiGHS statuses other than optimal met (the bound still holds)


def _standalone_best(nums: Numbers, hi: np.ndarray) -> np.ndarray:
    """Each product's best contribution alone within [floor, hi] (currency): no plan earns more from it."""
    lo = nums.floor
    m = nums.a - nums.v
    with np.errstate(divide="ignore", invalid="ignore"):
        D = np.where(nums.b > 0, np.clip(m / (2 * np.where(nums.b > 0, nums.b, 1.0)), lo, hi),
                     np.where(m > 0, hi, lo))
        out = m * D - nums.b * D * D
    return np.where(np.isfinite(out), out, np.inf)


def enumerate_plans(s, max_choices: int = 12) -> Enumeration:
    """Every slate of the products with an on/off choice, best first by a standalone bound.

    A slate is skipped only when Σ over its running products of (best standalone
    contribution − fixed cost) is no more than the best profit already found (a
    valid bound: the shared limits only lower it), so the answer is exact.
    """
    nums = scenario_numbers(s)
    free = np.flatnonzero(nums.choice)
    assert free.size <= max_choices, "enumeration is for small cases only"
    none = Enumeration(False, -math.inf, -math.inf, np.zeros(nums.n), nums.forced.copy(), 0, ())
    if not floors_fit(nums, nums.forced):
        return none
    hi = np.maximum(nums.box_upper(), np.where(nums.floor <= nums.box_upper() * (1 + REF_LIMIT_TOL), nums.floor, 0.0))
    alone = _standalone_best(nums, hi) - nums.F
    slates = []
    for bits in itertools.product([False, True], repeat=free.size):
        run = nums.forced.copy()
        run[free] = bits
        slates.append((math.fsum(np.where(run | ~nums.choice, alone, 0.0).tolist()) if not np.any(
            run & (nums.floor > hi)) else -math.inf, run))
    slates.sort(key=lambda t: -t[0])
    best: SlateAnswer | None = None
    bound, solved, odd = -math.inf, 0, []
    for ub, run in slates:
        if ub == -math.inf:
            continue
        if best is not None and ub <= best.profit:
            bound = max(bound, ub)
            continue
        ans = slate_qp(nums, run)
        if ans is None:
            continue
        solved += 1
        if ans.status != "optimal":
            odd.append(ans.status)
        bound = max(bound, min(ans.bound, ub))
        if best is None or ans.profit > best.profit:
            best = ans
    if best is None:
        return none
    return Enumeration(True, best.profit, max(bound, best.profit), best.volume, best.running, solved, tuple(odd))


def enumerate_slates(s) -> float:
    """Best profit (before plant-wide fixed cost) over every slate, each a continuous QP (highspy directly)."""
    e = enumerate_plans(s)
    return e.profit
