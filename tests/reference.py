"""Outside references for the planner's answers, built from the raw scenario numbers.

Nothing here imports the planner or models/: every reference reads the
scenario's own fields (``products[i].price_intercept`` ...) and writes its
model straight into another solver, so a formulation error in models/ or a
fault in planner/engine cannot hide on both sides.

- ``scip_plan``: the mixed-integer QP written straight into SCIP through
  pyscipopt.
- ``enumerate_plans`` / ``enumerate_slates`` (in tests/enumeration.py, offered
  here too): every on/off slate of the products with a real choice, each slate's continuous QP passed to highspy
  directly as arrays (Hessian diag(2b), HiGHS's ½·xᵀQx convention), with a
  power-of-two scaling of its own.  Each slate's answer is certified in numpy:
  the profit is recomputed from the volumes (checked against every limit), and
  the Lagrangian dual function at the row duals (HiGHS's, polished, or found by
  a direct search), evaluated in closed form per product, gives an upper bound
  on that slate.  The best slate's profit is
  thus a feasible plan's profit and the largest slate bound a valid upper bound
  on the optimum, whatever HiGHS did.  Exact for up to about a dozen choices.

The economics (README, "scenario file"): price p = a − b·D; contribution
(a − v)·D − b·D²; a product that must run (``must_run``, or ``min_volume`` > 0)
makes at least max(min_volume, min_run) and always pays its fixed cost; a
product with a fixed cost or a minimum run may instead be shut down (volume 0,
no fixed cost), and makes at least min_run when it runs; any other product makes
0..cap freely.  Σ_i usage_ri·D_i ≤ capacity_r for every resource.
"""

from __future__ import annotations

from typing import TYPE_CHECKING

if TYPE_CHECKING:  # type only: the references never call into the planner
    from planner.scenario.schema import Scenario


def scip_plan(s: "Scenario", gap: float = 1e-9, time_limit: float = 60.0) -> tuple[float, dict[str, float]]:
    """(optimal profit before plant-wide fixed cost, volumes) from SCIP."""
    m, D, _ = _scip_model(s, gap, time_limit)
    m.optimize()
    assert m.getStatus() in ("optimal", "gaplimit"), m.getStatus()  # gaplimit: solved to the gap asked for
    return m.getObjVal(), {k: m.getVal(v) for k, v in D.items()}


def scip_race(s: "Scenario", gap: float, time_limit: float) -> dict:
    """SCIP to a relative gap within a time limit: seconds, whether it got there, its profit and bound.

    The gap is measured as the planner measures it, (bound − profit) / max(|profit|, 1).
    """
    import time

    m, _, _ = _scip_model(s, gap, time_limit)
    t0 = time.perf_counter()
    m.optimize()
    secs = time.perf_counter() - t0
    primal = m.getObjVal() if m.getNSols() > 0 else float("-inf")
    dual = m.getDualbound()
    g = max(0.0, (dual - primal) / max(abs(primal), 1.0)) if m.getNSols() > 0 else float("inf")
    return {"seconds": secs, "reached": bool(g <= gap * (1 + 1e-9)), "gap": g, "profit": primal, "bound": dual,
            "status": m.getStatus()}


def _scip_upper(s: "Scenario", p) -> float:
    """A volume bound that loses no optimal plan, as tight as the raw numbers give (units).

    It is also the big-M of the on/off link D ≤ M·y, so it must be tight: with the
    old M = 1e7 and SCIP's integrality tolerance (1e-6 on y), a stopped product could
    still make ~10 units without paying its fixed cost (found by the differential
    test, seed 324: SCIP's 40,272.34 was no plan; the true optimum is 40,179.57).
    min(max_volume, (capacity_r + every option's amount for r) / usage_r, and for a sloped
    product max(min_volume, min_run, (a − v)/(2b))); 1e7 if none applies.
    """
    bounds = [p.max_volume] if p.max_volume is not None else []
    caps = {r.name: r.capacity for r in s.resources}
    for o in s.options:  # capacity options can add to a resource: count them all in full
        for res, amt in (o.adds or o.adds_up_to or {}).items():
            caps[res] += amt
    bounds += [caps[res] / amt for res, amt in p.usage.items() if amt > 0]
    if p.price_slope > 0:
        peak = (p.price_intercept - p.unit_cost) / (2 * p.price_slope)
        bounds.append(max(p.min_volume, p.min_run, peak, 0.0))
    return min(bounds) if bounds else 1e7


def _scip_model(s: "Scenario", gap: float, time_limit: float, with_options: bool = False):
    """The mixed-integer QP in SCIP, built from the raw scenario numbers: (model, volumes, option scales).

    With ``with_options`` each capacity option gets a scale z ∈ [0, 1] (binary for
    all-or-nothing options) that adds its amounts to the resources for its cost.
    """
    from pyscipopt import Model, quicksum

    m = Model("reference")
    m.hideOutput()
    m.setParam("limits/gap", gap)
    m.setParam("limits/time", time_limit)
    m.setParam("randomization/randomseedshift", 0)
    D, y, t, z = {}, {}, {}, {}
    for p in s.products:
        cap = _scip_upper(s, p)
        lo = max(p.min_volume, p.min_run) if (p.must_run or p.min_volume > 0) else 0.0
        D[p.name] = m.addVar(f"D_{p.name}", lb=0.0, ub=cap)
        choice = (p.fixed_cost > 0 or p.min_run > 0) and not p.must_run and p.min_volume == 0
        if choice:
            y[p.name] = m.addVar(f"y_{p.name}", vtype="B")
            m.addCons(D[p.name] <= cap * y[p.name])
            if p.min_run > 0:
                m.addCons(D[p.name] >= p.min_run * y[p.name])
        else:
            m.addCons(D[p.name] >= lo)
        t[p.name] = m.addVar(f"t_{p.name}", lb=None)
        m.addCons(t[p.name] <= (p.price_intercept - p.unit_cost) * D[p.name] - p.price_slope * D[p.name] * D[p.name])
    cost_terms = []
    for k, o in enumerate(s.options if with_options else []):
        whole = o.adds is not None
        z[o.name] = m.addVar(f"z_{k}", vtype="B" if whole else "C", lb=0.0, ub=1.0)
        per_scale = o.cost if whole else o.cost_per_unit * sum(o.adds_up_to.values())
        cost_terms.append(per_scale * z[o.name])
    for r in s.resources:
        terms = [amt * D[p.name] for p in s.products for res, amt in p.usage.items() if res == r.name]
        extra = [amt * z[o.name] for o in (s.options if with_options else [])
                 for res, amt in (o.adds or o.adds_up_to).items() if res == r.name]
        if terms:
            m.addCons(quicksum(terms) <= r.capacity + quicksum(extra))
    fixed_always = sum(p.fixed_cost for p in s.products if p.name not in y)
    m.setObjective(quicksum(t.values()) - quicksum(p.fixed_cost * y[p.name] for p in s.products if p.name in y)
                   - fixed_always - quicksum(cost_terms), sense="maximize")
    return m, D, z


def qp_relaxation(s: Scenario, solver: str = "choose") -> dict:
    """HiGHS's own continuous QP relaxation of the mixed-integer QP, built from the raw scenario numbers.

    The on/off variables y_i ∈ [0, 1] (continuous), D_i ≤ U_i·y_i with U_i the
    product's max_volume or, for a falling price line, the peak of its
    contribution (a − v)/(2b) (beyond it every extra unit loses money); the
    objective Σ (a − v)·D − b·D² − F·y.  Returns the seconds to build and to
    solve it in highspy, its status and value (an upper bound on the best plan).
    """
    import time

    import highspy
    import numpy as np

    t0 = time.perf_counter()
    prods, res = s.products, s.resources
    n, m = len(prods), len(res)
    row = {r.name: k for k, r in enumerate(res)}
    margin = np.array([p.price_intercept - p.unit_cost for p in prods])
    slope = np.array([p.price_slope for p in prods])
    peak = np.where(slope > 0, margin / (2 * np.where(slope > 0, slope, 1.0)), np.inf)
    cap = np.array([p.max_volume if p.max_volume is not None else np.inf for p in prods])
    U = np.maximum(np.minimum(cap, peak), 0.0)
    U = np.where(np.isfinite(U), U, 1e7)
    F = np.array([p.fixed_cost for p in prods])
    h = highspy.Highs()
    h.setOptionValue("output_flag", False)
    h.setOptionValue("threads", 1)
    if solver != "choose":
        h.setOptionValue("solver", solver)
    inf = highspy.kHighsInf
    # columns D_0..D_{n-1}, y_0..y_{n-1}; HiGHS minimises
    cost = np.r_[-margin, F]
    lower = np.zeros(2 * n)
    upper = np.r_[U, np.ones(n)]
    rows_i, cols_i, vals = [], [], []
    for i, p in enumerate(prods):
        for r, amt in p.usage.items():
            rows_i.append(row[r]); cols_i.append(i); vals.append(amt)
        rows_i += [m + i, m + i]; cols_i += [i, n + i]; vals += [1.0, -U[i]]
    rows_i, cols_i, vals = np.array(rows_i), np.array(cols_i), np.array(vals, dtype=float)
    order = np.lexsort((rows_i, cols_i))
    start = np.searchsorted(cols_i[order], np.arange(2 * n + 1)).astype(np.int32)
    rlo = np.full(m + n, -inf)
    rhi = np.r_[[r.capacity for r in res], np.zeros(n)]
    q = np.flatnonzero(slope > 0)
    q_start = np.searchsorted(q, np.arange(2 * n + 1)).astype(np.int32)
    status = h.passModel(2 * n, m + n, int(vals.size), int(q.size), 1, 1, 1, 0.0, cost, lower, upper, rlo, rhi, start,
                rows_i[order].astype(np.int32), vals[order], q_start, q.astype(np.int32), 2.0 * slope[q],
                np.zeros(2 * n, dtype=np.int32))
    assert status == highspy.HighsStatus.kOk, status
    t1 = time.perf_counter()
    h.run()
    t2 = time.perf_counter()
    value = -h.getInfo().objective_function_value
    return {"build_seconds": t1 - t0, "solve_seconds": t2 - t1, "seconds": t2 - t0,
            "status": h.modelStatusToString(h.getModelStatus()), "value": value}


# The slate enumeration lives in tests/enumeration.py; its names are offered here too.
from .enumeration import (REF_LIMIT_TOL, Enumeration, Numbers, SlateAnswer, dual_value,  # noqa: E402,F401
                          enumerate_plans, enumerate_slates, floors_fit, scenario_numbers, slate_qp)
