"""The Python API: scenario in, Plan out (the CLI is a thin layer over this)."""

from __future__ import annotations

from pathlib import Path

import numpy as np

from models.data import MixData

from planner.scenario.demand import extrapolation_warnings
from models.economics import standalone
from planner.errors import PlannerError, SolverError
from planner.scenario.guard import check_extra_capacity, check_names, check_numbers, check_volumes
from planner.engine.infeasible import explain as explain_infeasible
from planner.scenario.loading import load_scenario
from planner.output.plan import Plan, ProductPlan, ResourcePlan, solver_versions
from planner.scenario.arrays import mix_data
from planner.engine.scaling import solve_scaled
from planner.scenario.schema import Scenario
from planner.engine.solve import DEFAULT_GAP, MixSolution, relative_gap

#: Relative tolerance for calling a limit binding and for checking a plan's limits.
LIMIT_TOL = 1e-7


def plan(scenario: Scenario | str | Path, rel_gap: float = DEFAULT_GAP, time_limit: float | None = None,
         solver: str | None = None, threads: int = 1, seed: int = 0,
         extra_capacity: dict[str, float] | None = None) -> Plan:
    """Plan the mix of a scenario (object or file path) to a certified relative gap."""
    warnings: list[str] = []
    if not isinstance(scenario, Scenario):
        scenario, warnings = load_scenario(scenario)
    check_names(scenario)  # a Scenario changed in code skips the validator: nothing unchecked reaches the solver
    check_extra_capacity(scenario, extra_capacity)
    d = mix_data(scenario, extra_capacity)
    check_numbers(scenario, d)
    explain_infeasible(scenario, d)  # commitments that cannot fit: named, in the scenario's units
    try:
        sol = solve_scaled(d, rel_gap=rel_gap, time_limit=time_limit, solver=solver, threads=threads, seed=seed)
    except PlannerError:
        raise
    except Exception as e:  # a solver library's own failure: a clear message, never a bare traceback
        raise SolverError(f"the solver failed ({type(e).__name__}: {e}); try --solver scip, or rerun with "
                          "--debug and report it") from e
    return build_plan(scenario, d, sol, warnings, threads, seed)


def build_plan(s: Scenario, d: MixData, sol: MixSolution, warnings: list[str] | None = None,
               threads: int = 1, seed: int = 0) -> Plan:
    """Assemble the Plan from the solution; checks every limit (a violated one is an error)."""
    vol = clean_volumes(sol.volume, d)
    check_volumes(d, vol, sol.running, LIMIT_TOL)
    econ = standalone(d.a, d.b, d.v, d.F, d.cap)
    products = []
    for k, p in enumerate(s.products):
        D = float(vol[k])
        if d.can_stop[k]:
            running = bool(sol.running[k])
        else:
            running = bool(d.must_run[k]) or D > 0
        price = float(d.a[k] - d.b[k] * D)
        revenue = price * D
        var_cost = float(d.v[k]) * D
        fixed = float(d.F[k]) if (running or d.must_run[k]) else 0.0
        products.append(ProductPlan(
            name=p.name, running=running, volume=D, price=price, revenue=revenue, variable_cost=var_cost,
            contribution=revenue - var_cost, fixed_cost=fixed, profit=revenue - var_cost - fixed,
            unit=p.unit, standalone=econ[k], must_run=bool(d.must_run[k])))
    used = d.used(vol)
    resources = []
    for r, res in enumerate(s.resources):
        cap = float(d.capacity[r])
        tol = LIMIT_TOL * max(abs(cap), 1.0)
        if used[r] > cap + tol:
            from planner.errors import SolverError

            raise SolverError(f"the solved plan uses {used[r]:.9g} of {res.name} but it has {cap:.9g}: "
                              "the solver's answer breaks a limit, so no plan is reported (try --solver scip)")
        shadow = float(sol.duals[r])
        binding = bool(used[r] >= cap - max(1e-6 * max(abs(cap), 1.0), tol)) and cap >= 0
        resources.append(ResourcePlan(name=res.name, capacity=cap, used=float(used[r]),
                                      utilisation=float(used[r] / cap) if cap > 0 else 0.0,
                                      shadow_price=shadow if binding or shadow > 1e-9 else 0.0,
                                      binding=binding, unit=res.unit))
    product_profit = sum(p.profit for p in products)
    profit = product_profit - s.plant_fixed_cost
    bound = max(float(sol.bound), product_profit) - s.plant_fixed_cost
    info = {"strategy": sol.strategy, "rounds": sol.rounds, "seconds": sol.seconds,
            "qp_method": sol.qp_method, "threads": threads, "random_seed": seed, "messages": sol.messages,
            "versions": solver_versions()}
    return Plan(scenario=s.name, status=sol.status, profit=profit, bound=bound,
                gap=relative_gap(bound, profit), products=products, resources=resources,
                currency=s.currency, period=s.period, plant_fixed_cost=s.plant_fixed_cost,
                solver=info, warnings=list(warnings or []) + extrapolation_warnings(s, products))


def write_model_file(scenario: Scenario | str | Path, path: str | Path) -> Path:
    """Write the scenario's mixed-integer QP (the model of record) as an LP file with readable names."""
    from models.mix import build_mix_model

    from planner.files import write_atomic

    if not isinstance(scenario, Scenario):
        scenario, _ = load_scenario(scenario)
    model = build_mix_model(mix_data(scenario))
    return write_atomic(path, lambda tmp: model.write(str(tmp), format="lp",
                                                      io_options={"symbolic_solver_labels": True}))


def clean_volumes(volume: np.ndarray, d: MixData) -> np.ndarray:
    """Volumes with solver noise below 1e-9 of each bound set to 0 (units)."""
    v = np.asarray(volume, dtype=float).copy()
    v[np.abs(v) <= 1e-9 * np.maximum(d.upper, 1.0)] = 0.0
    return v
