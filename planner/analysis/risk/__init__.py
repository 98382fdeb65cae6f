"""Monte Carlo risk of a plan under uncertain demand, costs and capacities (``planner risk``).

``run_risk(scenario, samples, seed)`` plans the point estimate, draws the samples
(:mod:`.sampling`), evaluates the plan under each (:mod:`.evaluate`) and re-optimises
each exactly with the engine on Dask (:mod:`.run`).
"""

from planner.analysis.risk.run import RiskResult, run_risk

__all__ = ["run_risk", "RiskResult"]
