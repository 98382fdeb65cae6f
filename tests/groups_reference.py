"""Outside references for product groups and closable resources, from the raw scenario numbers.

Nothing here imports the planner or models/.  ``enumerate_best`` lists every slate of which
products run and which closable resources stay open; a group is paid exactly when a member runs
(paying a group no member needs only lowers profit, so listing the groups' choices too adds
nothing).  Each slate's volumes are a convex QP passed to highspy as arrays (Hessian diag(2b),
HiGHS's ½·xᵀQx convention).  ``scip_best`` states the same mixed-integer model in pyscipopt
(an epigraph variable per product for its concave contribution).  Both take the raw dict (the
YAML's numbers), with every product sloped (b > 0) so each slate's QP is bounded.
"""

from __future__ import annotations

import itertools

import highspy
import numpy as np


def numbers(raw: dict) -> dict:
    """The raw scenario as arrays: a, b, v, F, usage H (m × n), capacity, E, closable, groups (list of index lists), G."""
    P, R = raw["products"], raw.get("resources", [])
    rix = {r["name"]: k for k, r in enumerate(R)}
    pix = {p["name"]: k for k, p in enumerate(P)}
    H = np.zeros((len(R), len(P)))
    for i, p in enumerate(P):
        for name, amt in p.get("usage", {}).items():
            H[rix[name], i] = float(amt)
    groups = raw.get("product_groups", [])
    return dict(a=np.array([p["price_intercept"] for p in P], float), b=np.array([p["price_slope"] for p in P], float),
                v=np.array([p["unit_cost"] for p in P], float), F=np.array([p.get("fixed_cost", 0.0) for p in P], float),
                must=np.array([p.get("must_run", False) for p in P], bool), H=H,
                cap=np.array([r["capacity"] for r in R], float), E=np.array([r.get("fixed_cost", 0.0) for r in R], float),
                closable=np.array([r.get("closable", False) for r in R], bool),
                groups=[[pix[n] for n in g["products"]] for g in groups],
                G=np.array([g.get("fixed_cost", 0.0) for g in groups], float))


def slate_value(x: dict, run: np.ndarray, opened: np.ndarray) -> float:
    """Best profit of one slate (currency), or −inf if its QP has no answer."""
    n, m = x["a"].size, x["cap"].size
    on = np.flatnonzero(run)
    const = -float(x["F"][run].sum()) - float(x["E"][opened | ~x["closable"]].sum())
    const -= sum(float(G) for G, g in zip(x["G"], x["groups"]) if run[g].any())
    if not on.size:
        return const
    h = highspy.Highs()
    h.setOptionValue("output_flag", False)
    k = on.size
    A = x["H"][:, on]
    cap = np.where(opened, x["cap"], 0.0)
    starts, index, value = [0], [], []
    for j in range(k):
        nz = np.flatnonzero(A[:, j])
        index += nz.tolist()
        value += A[nz, j].tolist()
        starts.append(len(index))
    c = -(x["a"][on] - x["v"][on])
    h.passModel(k, m, len(index), k, 1, 1, 1, 0.0, c, np.zeros(k), np.full(k, 1e30), np.full(m, -1e30), cap,
                np.array(starts, np.int32), np.array(index, np.int32), np.array(value, float),
                np.arange(k + 1, dtype=np.int32), np.arange(k, dtype=np.int32), 2.0 * x["b"][on],
                np.zeros(k, np.int32))
    h.run()
    if h.getModelStatus() != highspy.HighsModelStatus.kOptimal:
        return -np.inf
    return const - float(h.getInfo().objective_function_value)


def enumerate_best(raw: dict) -> float:
    """Best profit over every product slate × open/closed closable resource (currency, before plant cost)."""
    x = numbers(raw)
    n = x["a"].size
    free = np.flatnonzero(~x["must"])
    shut = np.flatnonzero(x["closable"])
    best = -np.inf
    for ys in itertools.product((False, True), repeat=free.size):
        run = x["must"].copy()
        run[free] = ys
        for ws in itertools.product((False, True), repeat=shut.size):
            opened = np.ones(x["cap"].size, bool)
            opened[shut] = ws
            best = max(best, slate_value(x, run, opened))
    return best - float(raw.get("plant_fixed_cost", 0.0))


def scip_best(raw: dict, gap: float = 1e-9) -> float:
    """The same model in SCIP (pyscipopt): y_i ≤ z_g, capacity ≤ H_r·w_r, epigraph t_i ≤ (a−v)D − bD²."""
    from pyscipopt import Model, quicksum

    x = numbers(raw)
    n, m = x["a"].size, x["cap"].size
    md = Model()
    md.hideOutput()
    md.setParam("limits/gap", gap)
    big = [(x["a"][i] - x["v"][i]) / (2 * x["b"][i]) if x["b"][i] > 0 else 1e6 for i in range(n)]
    D = [md.addVar(lb=0, ub=max(big[i], 0.0)) for i in range(n)]
    y = [md.addVar(vtype="B", lb=1 if x["must"][i] else 0) for i in range(n)]
    t = [md.addVar(lb=-1e9) for i in range(n)]
    z = [md.addVar(vtype="B") for _ in x["groups"]]
    w = [md.addVar(vtype="B", lb=0 if x["closable"][r] else 1, ub=1) for r in range(m)]
    for i in range(n):
        md.addCons(D[i] <= max(big[i], 0.0) * y[i])
        md.addCons(t[i] <= (x["a"][i] - x["v"][i]) * D[i] - x["b"][i] * D[i] * D[i])
    for g, members in enumerate(x["groups"]):
        for i in members:
            md.addCons(y[i] <= z[g])
    for r in range(m):
        md.addCons(quicksum(x["H"][r, i] * D[i] for i in range(n) if x["H"][r, i]) <= x["cap"][r] * w[r])
    obj = md.addVar(lb=-1e12)
    md.addCons(obj <= quicksum(t) - quicksum(x["F"][i] * y[i] for i in range(n))
               - quicksum(x["G"][g] * z[g] for g in range(len(z))) - quicksum(x["E"][r] * w[r] for r in range(m)))
    md.setObjective(obj, "maximize")
    md.optimize()
    return float(md.getObjVal()) - float(raw.get("plant_fixed_cost", 0.0))
