"""The solve engine: every HiGHS model the planner builds, behind one object.

``Engine(d)`` (:mod:`.engine`) is built once per scenario and re-solved by
every command: the plan, sweeps, shadow-price ranges, option values and risk
samples.  Inside: the blocks (:mod:`.blocks`), the Lagrangian bound
(:mod:`.dual`), the fixed-slate QP and its KKT polish (:mod:`.slateqp`,
:mod:`.kkt`), slate enumeration (:mod:`.enumerate`), the tangent-cut MILP
(:mod:`.cutmilp`), the search that ties them (:mod:`.search`), scaling,
the certificate, the fallback plan, the infeasibility LPs and the checks of
every solved plan.  Tolerances and HiGHS options are named once in :mod:`.settings`.
"""

from planner.engine.certificate import relative_gap
from planner.engine.engine import Engine, Solution
from planner.engine.highs import Status
from planner.engine.settings import DEFAULT_GAP

__all__ = ["DEFAULT_GAP", "Engine", "Solution", "Status", "relative_gap"]
