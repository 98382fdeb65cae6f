"""Every tolerance, limit and HiGHS option set of the engine, named once.

A re-solve inside an analysis (a sweep point, a range end, an option's value,
a risk sample) gets exactly the protection of the plan itself, because all of
them read these names.  Tolerances are relative unless the name says so.
"""

from __future__ import annotations

#: Default certified relative gap of a plan: (bound − profit) / max(|profit|, 1).
DEFAULT_GAP = 1e-4
#: Largest gap a caller may ask for: a plan within the gap is called optimal, so a looser one would
#: promise too little (a quick rough plan is what a time limit is for).
MAX_GAP = 0.1

# --- KKT polish and active-set classification (planner.engine.kkt, analysis.capacity.parametric)
#: A volume within this fraction of its bound's scale counts as at the bound.
AT_BOUND = 1e-7
#: A dual above this fraction of the largest unit margin counts as a binding row.
ACTIVE_DUAL = 1e-9
#: Primal feasibility of a polished point (fraction of each bound's or capacity's scale).
KKT_PRIMAL = 1e-9
#: Reduced-profit tolerance of a polished point (fraction of the largest unit margin).
KKT_REDUCED = 1e-7
#: A row with more slack than this fraction of its capacity is slack (its dual must be 0).
SLACK_ROW = 1e-7
#: Largest linear system the polish solves (active rows + free fixed-price columns).
KKT_MAX_SYSTEM = 3000
#: Corrections of the active set the polish may make before it gives up (each one linear solve).
KKT_REPAIRS = 8

# --- Fixed-slate QP (planner.engine.slateqp)
#: Running products from which HiGHS's interior-point QP ('hipo') is tried first (measured: the
#: active-set QP took 2.5 s on 100 products with some fixed prices, 'hipo' 0.01 s).
IPM_FROM = 60
#: Largest slate on which the active-set QP is tried when an interior-point answer cannot be polished.
ASM_RETRY_UP_TO = 300
#: An interior-point QP that stops with "no progress" (model status Unknown) is still used when HiGHS
#: calls its primal and dual solutions feasible and their relative objective gap is at most this
#: (seen on 200 products x 13 periods: stalled at 4e-8 after 25 iterations; the active-set QP took 30 s).
IPM_STALL_ACCEPT = 1e-7

# --- Outer approximation (planner.engine.search, planner.engine.cutmilp)
#: A MILP's contribution estimate above the true contribution by more than this fraction of the
#: product's scale (|a − v|·U) earns a new tangent cut at the MILP's volume.
CUT_VIOLATION = 1e-9
#: Safety cap on cut rounds in one solve (a solve that reaches it is reported, never called optimal).
MAX_ROUNDS = 500
#: HiGHS MIP options for these small, cut-heavy MILPs.  Measured on a 50-product case with fixed
#: costs near contributions (2 cores): one MILP took 2.4–3.2 s with the defaults, almost all in root
#: heuristics and restarts over 5 nodes, and 0.5 s with these (21 nodes, same bound).
LEAN_MIP = {"presolve": "off", "mip_allow_restart": False, "mip_heuristic_run_root_reduced_cost": False,
            "mip_heuristic_run_feasibility_jump": False, "mip_heuristic_run_rins": False,
            "mip_heuristic_run_rens": False, "mip_abs_gap": 1e-9}

# --- Lagrangian dual (planner.engine.dual)
#: Most recent points kept in the cutting-plane model (with the best one): bounds the LP and QP size.
BUNDLE_SIZE = 80
#: Largest number of multiplier steps in one minimisation.
DUAL_STEPS = 300
#: Longest a level-set projection (a QP with one column per resource) may take; where HiGHS cannot
#: project in that time (seen: its active-set QP stalling on a near-degenerate bundle), the step is
#: a plain cutting-plane step instead.
PROJECT_SECONDS = 0.5
#: Steps allowed to a quick "can any slate beat this profit?" check.
CHECK_STEPS = 60

# --- Exact bounding of every slate (planner.engine.enumerate)
#: Up to this many on/off choices, every slate is bounded at once by the Lagrangian at the
#: shadow prices met so far (2^k bounds per step, one matrix product).
ENUMERATE_UP_TO = 12
#: Slate QPs the enumeration may solve before handing over to the outer approximation.
ENUMERATE_QPS = 48

# --- Fixed-choice duals, flips and the branch-and-bound (slatedual, flips, branch)
#: Largest (products × resources) for which the products' usage is also kept dense (Newton steps,
#: node duals); beyond, those steps are skipped and the cut MILP closes the gap.
DENSE_USAGE_UP_TO = 20_000_000
#: Newton steps on one fixed-choice dual (planner.engine.slatedual); it is piecewise quadratic, so a
#: warm start from a neighbouring slate's multipliers ends in 2–5 steps where prices slope.
NEWTON_STEPS = 30
#: A fixed-choice dual counts as minimised when the Newton decrement is below this fraction of its value.
NEWTON_TOL = 1e-11
#: Rounds of the flip search (planner.engine.flips): each prices up to FLIP_TRIES ranked moves.
FLIP_ROUNDS = 40
FLIP_TRIES = 8
#: Pairs are ranked among this many best single flips.
FLIP_PAIRS_OF = 200
#: Branch-and-bound over the Lagrangian (planner.engine.branch): most shared rows for its dense
#: Newton steps, most nodes before it hands over to the cut MILP, Newton steps per smoothing level.
BRANCH_MAX_ROWS = 200
#: Before flips and branching the dual is minimised to this relative accuracy (resumed from its
#: bundle): measured on 1,000 products × 20 limits, 1e-9 instead of the gap's quarter left 465 nodes
#: to search instead of 1,409 (its bounds fix more choices, its slate flips to a better incumbent).
BRANCH_DUAL_TOL = 1e-9
BRANCH_NODES = 2_000
#: The search hands over to the cut MILP once this many nodes are open at once: a tree that wide means
#: the Lagrangian's gap is too wide for its bounds (measured on the hard synthetic catalogues, 2 cores:
#: 200 × 10 to 1,000 × 20, seeds 1–3, the branch-and-bound certified with at most 78 nodes open; 100
#: products × 20 limits, root gap 1e-2, had 2,461 open after 6,400 nodes without closing any of the
#: gap, where the cut MILP certifies in about 8 s).
BRANCH_OPEN_MAX = 120
BRANCH_NEWTON = 25
#: Huber smoothing of an open choice's max(on, 0), first and last, as fractions of the incumbent's
#: profit.  The node's bound is evaluated exactly, so the last level only sets how close to the node's
#: minimum it gets (within about (rows)·μ/2).
BRANCH_SMOOTH_FROM = 1e-6
BRANCH_SMOOTH = 1e-6
#: The quadratic model of the fixed part is rebuilt at a node's λ where it is off by more than this
#: fraction of the incumbent's profit (the node's bound is exact either way).
BRANCH_MODEL_TOL = 1e-8

# --- Checks of a solved plan (planner.engine.verify)
#: A limit broken by more than this fraction of max(|limit|, 1) is an error, not a plan.
LIMIT_TOL = 1e-7
#: Volumes below this fraction of max(bound, 1) are solver noise and reported as 0.
ZERO_VOLUME = 1e-9


def highs_base(threads: int, seed: int) -> dict:
    """The options every HiGHS instance of the engine gets (deterministic, silent)."""
    return {"output_flag": False, "threads": int(threads), "random_seed": int(seed)}
