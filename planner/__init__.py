"""Multi-product capacity-constrained production planner.

Public API::

    from planner import load_scenario, plan
    scenario, warnings = load_scenario("scenarios/demo.yaml")
    p = plan(scenario)            # a Plan: p.profit, p.products, p.resources, p.to_dict()
    p.products_frame()            # pandas DataFrames of the same numbers
"""

from planner.api import plan
from planner.errors import InfeasibleError, PlannerError, ScenarioError, SolverError
from planner.scenario.loading import load_scenario
from planner.output.plan import Plan, ProductPlan, ResourcePlan
from planner.scenario.schema import Scenario
from planner.scenario.validate import validate_scenario

__all__ = ["plan", "load_scenario", "validate_scenario", "Plan", "ProductPlan", "ResourcePlan", "Scenario",
           "PlannerError", "ScenarioError", "InfeasibleError", "SolverError"]
