"""The differential check of one scenario: the planner against the slate enumeration and SCIP.

``compare(raw)`` validates and plans the raw scenario at each gap asked for and
returns a list of findings (empty when all is well):

- a feasible scenario (every forced product's floor fits every capacity, summed
  exactly in :func:`tests.reference.floors_fit`, with a margin of 1e-9) must plan, with status
  ``optimal`` and a gap within the one asked for; an infeasible one must be
  refused with ``InfeasibleError`` (commitments short by more than 1e-7: the
  planner's limit tolerance; in between, either answer is right); a ``SolverError`` or any other error is a
  finding;
- profit ≥ reference − gap·max(|reference|, 1) and bound ≥ reference, where the
  reference is the enumeration's certified best plan (``enumerate_plans``) and,
  where asked, SCIP's optimum (``scip_plan``), both built from the raw numbers;
- the plan's own profit equals the profit of its volumes recomputed here, and it
  keeps every capacity, cap, commitment and minimum run (1e-7 relative, the
  README's tolerance for a limit).
"""

from __future__ import annotations

import math

import numpy as np

from .reference import enumerate_plans, floors_fit, scenario_numbers

#: Relative tolerance for a limit (README: "a limit broken beyond 1e-7 relative is an error").
LIMIT_REL = 1e-7
#: Relative slack for rounding when comparing profits that should agree (currency).
ROUND_REL = 1e-9


def check_limits(nums, p) -> list[str]:
    """Every limit of the scenario held by the plan's volumes; [] if so."""
    out = []
    vol = np.array([x.volume for x in p.products])
    run = np.array([x.running for x in p.products])
    for i, name in enumerate(nums.names):
        D = vol[i]
        if D < -1e-12:
            out.append(f"{name}: negative volume {D!r}")
        if D > nums.cap[i] * (1 + LIMIT_REL):
            out.append(f"{name}: volume {D!r} above its cap {nums.cap[i]!r}")
        if nums.forced[i] or (nums.choice[i] and run[i]):
            if D < nums.floor[i] * (1 - LIMIT_REL):
                out.append(f"{name}: volume {D!r} below its floor {nums.floor[i]!r}")
        if nums.forced[i] and not run[i]:
            out.append(f"{name}: must run but is shown stopped")
        if not run[i] and D != 0.0:
            out.append(f"{name}: stopped but makes {D!r}")
    used = nums.H @ vol
    for r, c in enumerate(nums.capacity):
        if used[r] > c * (1 + LIMIT_REL) + 1e-12 * max(float(np.max(nums.H[r] * np.abs(vol), initial=0.0)), 1.0):
            out.append(f"resource {r}: uses {used[r]!r} of {c!r}")
    return out


def own_profit(nums, p) -> float:
    """The plan's profit recomputed from its volumes and running flags (currency, after plant fixed cost)."""
    vol = np.array([x.volume for x in p.products])
    run = np.array([x.running for x in p.products])
    return nums.profit(vol, run) - nums.plant


def compare(raw: dict, gaps=(1e-4, 1e-9), scip: bool = True, time_limit: float | None = None,
            rel_round: float = ROUND_REL) -> list[str]:
    """Findings for one raw scenario (see the module docstring); [] when the planner is right."""
    from planner import InfeasibleError, SolverError, plan, validate_scenario
    from planner import ScenarioError

    try:
        s, _ = validate_scenario(raw)
    except ScenarioError as e:
        return [f"valid scenario refused: {e}"]
    nums = scenario_numbers(s)
    # Commitments that fit with a margin must plan; ones short beyond the limit tolerance must be refused;
    # in between (rounding) either answer is right.
    feasible = floors_fit(nums, nums.forced)
    borderline = floors_fit(nums, nums.forced, rel=-1e-9) != floors_fit(nums, nums.forced, rel=LIMIT_REL)
    findings: list[str] = []
    ref = enumerate_plans(s) if feasible else None
    if ref is not None:
        width = ref.bound - ref.profit
        if width > 1e-7 * max(abs(ref.profit), 1.0):
            findings.append(f"reference: enumeration not certified (profit {ref.profit!r}, bound {ref.bound!r})")
    best = ref.profit if ref is not None else -math.inf
    if scip and feasible:
        findings += _against_scip(s, nums, ref)
    for gap in gaps:
        try:
            p = plan(s, rel_gap=gap, time_limit=time_limit)
        except InfeasibleError as e:
            if feasible and not borderline:
                findings.append(f"gap {gap:g}: feasible scenario called infeasible ({e})")
            continue
        except SolverError as e:
            findings.append(f"gap {gap:g}: SolverError on a {'feasible' if feasible else 'infeasible'} "
                            f"scenario: {e}")
            continue
        except Exception as e:  # noqa: BLE001  (anything else is a bug too)
            findings.append(f"gap {gap:g}: {type(e).__name__}: {e}")
            continue
        if not feasible and not borderline:
            findings.append(f"gap {gap:g}: infeasible scenario given a plan (profit {p.profit!r})")
            continue
        tag = f"gap {gap:g}"
        findings += [f"{tag}: {x}" for x in check_limits(nums, p)]
        mine = own_profit(nums, p)
        scale = max(abs(best), abs(mine), 1.0)
        if abs(mine - p.profit) > rel_round * scale:
            findings.append(f"{tag}: reported profit {p.profit!r} but its volumes earn {mine!r}")
        if time_limit is None and p.status != "optimal":
            findings.append(f"{tag}: status {p.status!r} with no time limit")
        if p.status == "optimal" and p.gap > gap * (1 + 1e-9):
            findings.append(f"{tag}: 'optimal' at gap {p.gap!r}")
        if ref is not None:
            target = best - nums.plant
            if p.status == "optimal" and p.profit < target - gap * max(abs(target), 1.0) - rel_round * scale:
                findings.append(f"{tag}: profit {p.profit!r} below the reference {target!r}")
            if p.bound < target - rel_round * scale:
                findings.append(f"{tag}: bound {p.bound!r} below the reference {target!r}")
            if mine > ref.bound - nums.plant + 1e-6 * scale:  # a limit may be kept to 1e-7 only
                findings.append(f"{tag}: plan earns {mine!r}, above the reference bound {ref.bound - nums.plant!r}")
    return findings


def _against_scip(s, nums, ref) -> list[str]:
    """SCIP's plan, its profit recomputed from its volumes, against the enumeration (reference check)."""
    from .reference import _scip_model

    m, D, _ = _scip_model(s, 1e-9, 60.0)
    m.optimize()
    if m.getStatus() not in ("optimal", "gaplimit"):
        return [f"reference: SCIP ended with {m.getStatus()}"]
    vol = np.array([max(m.getVal(D[n]), 0.0) for n in nums.names])
    y = {v.name: m.getVal(v) for v in m.getVars() if v.name.startswith("y_")}
    run = np.array([y.get(f"y_{n}", 1.0) > 0.5 for n in nums.names])  # SCIP's own on/off choice
    vol = np.where(run, vol, 0.0)  # a stopped product's leftover within SCIP's tolerance is dropped
    mine = nums.profit(vol, run)
    best = ref.profit
    out = []
    # SCIP holds its nonlinear rows to an absolute 1e-6, so its own objective can sit ~1e-6 relative
    # above what its volumes earn (seen: 49,935.242 for volumes earning 49,935.188): compare both.
    if abs(m.getObjVal() - best) > 1e-5 * max(abs(best), 1.0):
        out.append(f"reference: SCIP {m.getObjVal()!r} vs enumeration {best!r}")
    if mine < best - 1e-6 * max(abs(best), 1.0):
        out.append(f"reference: SCIP's volumes earn {mine!r}, below the enumeration's {best!r}")
    if mine > ref.bound + 1e-6 * max(abs(best), 1.0):
        out.append(f"reference: SCIP's volumes earn {mine!r}, above the enumeration's bound {ref.bound!r}")
    return out
