"""Outside reference for capacity options: the mixed-integer QP with option variables written
straight into SCIP (pyscipopt) from the raw scenario numbers, independently of models/."""

from __future__ import annotations

from planner.scenario.schema import Scenario

from .reference import _scip_model


def scip_plan_with_options(s: Scenario, gap: float = 1e-9, time_limit: float = 60.0) -> tuple[float, dict[str, float]]:
    """(optimal profit before plant-wide fixed cost and after option costs, option scales 0..1)."""
    m, _, z = _scip_model(s, gap, time_limit, with_options=True)
    m.optimize()
    assert m.getStatus() in ("optimal", "gaplimit"), m.getStatus()  # gaplimit: solved to the gap asked for
    return m.getObjVal(), {k: m.getVal(v) for k, v in z.items()}
