"""``--solver NAME``: the mixed-integer QP of record handed as it is to another Pyomo solver (e.g. SCIP).

The model is :func:`models.mix.build_mix_model` on the scenario's own
numbers.  The slate (and the all-or-nothing options) the solver picks is then
re-solved by the engine's fixed-slate QP for exact volumes and shadow prices;
the solver's own bound is the certificate.  A solver that stops early, or
reports no bound, is never called optimal.
"""

from __future__ import annotations

import numpy as np

from models.data import MixData
from planner.engine.highs import Status
from planner.errors import SolverError


def solve_other(engine, d: MixData, name: str, rel_gap: float, time_limit: float | None):
    """Solve ``d`` with the Pyomo solver ``name``; a :class:`planner.engine.engine.Solution`."""
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
    opts = {"limits/gap": float(rel_gap)} if name.startswith("scip") else {}
    if time_limit is not None and name.startswith("scip"):
        opts["limits/time"] = max(float(time_limit), 0.01)
    try:
        res = opt.solve(m, load_solutions=True, options=opts) if opts else opt.solve(m)
    except Exception as e:
        raise SolverError(f"solver '{name}' failed: {e}") from None
    tc = str(res.solver.termination_condition)
    running = np.ones(d.n, dtype=bool)
    for k, p in enumerate(d.products):
        if d.can_stop[k]:
            running[k] = (m.running[p].value or 0.0) > 0.5
    taken = None
    if d.n_options:
        taken = np.array([(m.option_scale[o].value or 0.0) > 0.5 for o in d.options]) & d.opt_whole
    sol = type(engine)(d, engine.threads, engine.seed, offset=engine.offset).slate(running, taken)  # d: this solve's changes
    if sol.status != "optimal":
        raise SolverError(f"the slate {name} chose could not be solved as a QP ({'; '.join(sol.messages)})")
    ub = getattr(res.problem, "upper_bound", None)
    try:
        bound = float(ub)
    except (TypeError, ValueError):
        bound = np.inf
    sol.strategy = f"solver:{name}"
    if np.isfinite(bound):
        sol.bound = max(bound, sol.objective)
    else:
        sol.bound = sol.objective
        sol.messages.append(f"{name} reported no bound; its own optimality claim is taken as the bound")
    if "optimal" not in tc.lower():
        sol.status = str(Status.TIME_LIMIT if "limit" in tc.lower() else Status.ERROR)
    elif sol.gap > max(rel_gap, 1e-6):
        sol.status = str(Status.TIME_LIMIT if time_limit is not None else Status.ERROR)
        sol.messages.append(f"{name} stopped at gap {sol.gap:.2e}")
    return sol
