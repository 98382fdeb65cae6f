"""Multi-product capacity-constrained production planner.

Public API::

    from planner import load_scenario, plan
    scenario, warnings = load_scenario("scenarios/demo.yaml")
    p = plan(scenario)            # a Plan: p.profit, p.products, p.resources, p.to_dict()
    p.products_frame()            # pandas DataFrames of the same numbers
"""

from .api import plan
from .errors import InfeasibleError, PlannerError, ScenarioError, SolverError
from .loading import load_scenario
from .plan import Plan, ProductPlan, ResourcePlan
from .schema import Scenario
from .validate import validate_scenario

__all__ = ["plan", "load_scenario", "validate_scenario", "Plan", "ProductPlan", "ResourcePlan", "Scenario",
           "PlannerError", "ScenarioError", "InfeasibleError", "SolverError"]
