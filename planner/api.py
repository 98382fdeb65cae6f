"""The Python API: scenario in, Plan out (the CLI is a thin layer over this).

``plan`` reads and validates the scenario (:mod:`planner.scenario`), turns it
into the model's arrays, checks that the commitments fit (naming the limits
if not), solves it with the engine (:class:`planner.engine.Engine`) and
assembles the :class:`planner.output.plan.Plan` that every output reads.
"""

from __future__ import annotations

import math
from pathlib import Path

import numpy as np

from models.data import MixData
from models.economics import capacity_value, standalone
from planner.engine import DEFAULT_GAP, Engine, Solution, relative_gap
from planner.engine.highs import has_ipm
from planner.engine.infeasible import explain as explain_infeasible
from planner.engine.settings import LIMIT_TOL, MAX_GAP
from planner.engine.verify import check_plan
from planner.errors import PlannerError, SolverError
from planner.output.plan import GroupPlan, Plan, ProductPlan, ResourcePlan, solver_versions
from planner.scenario.arrays import mix_data
from planner.output.periods import period_plan
from planner.engine.infeasible_periods import explain_periods
from planner.scenario.demand import extrapolation_warnings
from planner.scenario.guard import check_extra_capacity, check_names, check_numbers
from planner.scenario.loading import load_scenario
from planner.scenario.periods import refuse_periods
from planner.scenario.schema import Scenario


def engine_for(s: Scenario, d: MixData | None = None, threads: int = 1, seed: int = 0) -> Engine:
    """The engine of a validated scenario (its arrays ``d`` if already made), with its units for messages."""
    return Engine(mix_data(s) if d is None else d, threads, seed, units={r.name: r.unit for r in s.resources},
                  offset=s.plant_fixed_cost)


def check_gap(rel_gap: float) -> None:
    """Raise PlannerError (bad input) unless 0 ≤ rel_gap ≤ MAX_GAP."""
    if not isinstance(rel_gap, (int, float)) or not math.isfinite(rel_gap) or not 0 <= rel_gap <= MAX_GAP:
        raise PlannerError(f"the gap must be a number from 0 to {MAX_GAP} (got {rel_gap!r}): it is the largest "
                           "relative distance from the proven bound a plan may have to be called optimal")


def plan(scenario: Scenario | str | Path, rel_gap: float = DEFAULT_GAP, time_limit: float | None = None,
         solver: str | None = None, threads: int = 1, seed: int = 0,
         extra_capacity: dict[str, float] | None = None) -> Plan:
    """Plan the mix of a scenario (object or file path) to a certified relative gap."""
    check_gap(rel_gap)
    if time_limit is not None and not (math.isfinite(time_limit) and time_limit > 0):
        raise PlannerError(f"the time limit must be a positive number of seconds (got {time_limit!r})")
    warnings: list[str] = []
    if not isinstance(scenario, Scenario):
        scenario, warnings = load_scenario(scenario)
    check_names(scenario)  # a Scenario changed in code skips the validator: nothing unchecked reaches the solver
    check_extra_capacity(scenario, extra_capacity)
    if scenario.periods is not None and (solver or extra_capacity):
        refuse_periods(scenario, "--solver" if solver else "extra capacity", "leave it out: the planner's own "
                       "engine plans every period")
    d = mix_data(scenario, extra_capacity)
    if d.periods is None:
        check_numbers(scenario, d)
        explain_infeasible(scenario, d)  # commitments that cannot fit: named, in the scenario's units
    else:
        explain_periods(scenario, d)
    try:
        sol = engine_for(scenario, d, threads, seed).solve(rel_gap=rel_gap, time_limit=time_limit, solver=solver)
    except PlannerError:
        raise
    except Exception as e:  # a solver library's own failure: a clear message, never a bare traceback
        raise SolverError(f"the solver failed ({type(e).__name__}: {e}); try --solver scip, or rerun with "
                          "--debug and report it") from e
    if sol.status not in ("optimal", "time_limit"):
        raise SolverError(f"the plan could not be certified to the gap asked for ({'; '.join(sol.messages)}); "
                          f"the best plan found makes {sol.objective:,.2f} against a bound of {sol.bound:,.2f} "
                          f"(gap {sol.gap:.2e}): try a larger --gap, a --time-limit, or --solver scip")
    out = build_plan(scenario, d, sol, warnings, threads, seed)
    if d.n >= IPM_ADVICE_FROM and not has_ipm():
        out.warnings.append("HiGHS's interior-point QP (highspy-extras) is not installed: large plans are solved by "
                            "its active-set QP, which slows sharply with thousands of products inside their bounds "
                            "(pip install 'planner[ipm]', which pins highspy 1.15.1 beside it)")
    return out


#: Products from which a plan without HiGHS's interior-point QP carries a warning.
IPM_ADVICE_FROM = 1000


def build_plan(s: Scenario, d: MixData, sol: Solution, warnings: list[str] | None = None,
               threads: int = 1, seed: int = 0) -> Plan:
    """Assemble the Plan from a solution; a solution that breaks a limit is an error (SolverError), not a plan."""
    if d.periods is not None:  # several periods: the months beside the horizon's totals
        info = {"strategy": sol.strategy, "rounds": sol.rounds, "seconds": sol.seconds, "qp_method": sol.qp_method,
                "threads": threads, "random_seed": seed, "messages": sol.messages, "versions": solver_versions()}
        return period_plan(s, d, sol, info, list(warnings or []))
    vol = np.asarray(sol.volume, dtype=float)
    bought = None if sol.bought is None else np.asarray(sol.bought, dtype=float)
    check_plan(d, vol, sol.running, sol.option_scale, bought=bought)
    econ = standalone(d.a, d.b, d.v, d.F, d.cap)
    products = []
    for k, p in enumerate(s.products):
        D = float(vol[k])
        running = bool(sol.running[k]) if d.can_stop[k] else bool(d.must_run[k]) or D > 0
        price = float(d.a[k] - d.b[k] * D)
        revenue = price * D
        B = 0.0 if bought is None else float(bought[k])
        var_cost = float(d.v[k]) * (D - B) + float(d.buy_cost[k]) * B
        fixed = float(d.F[k]) if (running or d.must_run[k]) else 0.0
        products.append(ProductPlan(
            name=p.name, running=running, volume=D, price=price, revenue=revenue, variable_cost=var_cost,
            contribution=revenue - var_cost, fixed_cost=fixed, profit=revenue - var_cost - fixed,
            unit=p.unit, standalone=econ[k], must_run=bool(d.must_run[k]),
            forced="must_run" if p.must_run else ("min_volume" if p.min_volume > 0 else ""),
            bought=None if bought is None or d.buy_max[k] <= 0 else B))
    used = d.used(vol if bought is None else vol - bought)
    value = capacity_value(sol.duals, d.capacity)
    resources = []
    opened = sol.opened if sol.opened.size else np.ones(len(s.resources), dtype=bool)
    show_fixed = bool(s.product_groups) or any(r.fixed_cost > 0 or r.closable for r in s.resources)
    for r, res in enumerate(s.resources):
        cap = float(d.capacity[r])
        tol = LIMIT_TOL * max(abs(cap), 1.0)
        shadow = float(sol.duals[r]) if opened[r] else 0.0  # a closed resource has no marginal value to show
        binding = bool(used[r] >= cap - max(1e-6 * max(abs(cap), 1.0), tol)) and cap >= 0 and bool(opened[r])
        shown = shadow if binding or shadow > 1e-9 else 0.0
        resources.append(ResourcePlan(name=res.name, capacity=cap, used=float(used[r]),
                                      utilisation=float(used[r] / cap) if cap > 0 else 0.0,
                                      shadow_price=shown, binding=binding, unit=res.unit,
                                      value_of_one_percent=float(value[r]) if shown else 0.0,
                                      open=bool(opened[r]), fixed_cost=float(res.fixed_cost),
                                      closable=bool(res.closable), show_fixed=show_fixed))
    on = sol.group_on if sol.group_on.size else np.zeros(len(s.product_groups), dtype=bool)
    groups = [GroupPlan(g.name, bool(on[k]), float(g.fixed_cost), list(g.products))
              for k, g in enumerate(s.product_groups)]
    product_profit = sum(p.profit for p in products) - sum(g.fixed_cost for g in groups if g.running) \
        - sum(r.fixed_cost for r in resources if r.open)
    profit = product_profit - s.plant_fixed_cost
    bound = max(float(sol.bound), product_profit) - s.plant_fixed_cost
    info = {"strategy": sol.strategy, "rounds": sol.rounds, "seconds": sol.seconds,
            "qp_method": sol.qp_method, "threads": threads, "random_seed": seed, "messages": sol.messages,
            "versions": solver_versions()}
    return Plan(scenario=s.name, status=sol.status, profit=profit, bound=bound,
                gap=relative_gap(bound, profit), products=products, resources=resources,
                currency=s.currency, period=s.period, plant_fixed_cost=s.plant_fixed_cost,
                solver=info, warnings=list(warnings or []) + extrapolation_warnings(s, products), groups=groups)


def write_model_file(scenario: Scenario | str | Path, path: str | Path) -> Path:
    """Write the scenario's mixed-integer QP (the model of record) as an LP file with readable names."""
    from models.mix import build_mix_model
    from planner.files import write_atomic

    if not isinstance(scenario, Scenario):
        scenario, _ = load_scenario(scenario)
    model = build_mix_model(mix_data(scenario))
    return write_atomic(path, lambda tmp: model.write(str(tmp), format="lp",
                                                      io_options={"symbolic_solver_labels": True}))
