r"""Internal scaling of the mix data, so numbers over many orders of magnitude reach HiGHS near 1.

A scenario may count one product in grams and another in pallets, one
resource in seconds and another in tonnes: usage rates from 1e-6 to 1e4 in
one matrix.  Solver tolerances are absolute (HiGHS: 1e-7 on feasibility), so
such a matrix can return plans that break a small limit by more than the
limit's own size.  Before solving, the planner measures each volume in units
of σ_i and each resource row in units of ρ_r:

.. math::

    D_i = \sigma_i x_i, \qquad
    a'_i = a_i \sigma_i,\; v'_i = v_i \sigma_i,\; b'_i = b_i \sigma_i^2,\;
    L'_i = L_i / \sigma_i,\; M'_i = M_i / \sigma_i,\; C'_i = C_i / \sigma_i,

    h'_{ri} = h_{ri} \sigma_i / \rho_r, \qquad H'_r = H_r / \rho_r.

Money is not scaled, so the objective, the bound and the relative gap are the
same numbers.  σ_i is the power of two nearest the volume's upper bound U_i
(its own cap, the resources' room, or the peak of its contribution) and ρ_r
the power of two nearest the capacity H_r (or, for H_r = 0, the row's largest
scaled coefficient), so after scaling volumes lie in [0, ~1] and each row's
capacity is ~1.  Powers of two make the scaling exact in binary floating
point: the scaled problem is the same problem, only the exponents move.
Back in scenario units: D = σ·x, shadow price λ_r = λ'_r / ρ_r (profit per
original resource unit).  The plan is then checked against every limit in
the scenario's own units (planner.api.build_plan).
"""

from __future__ import annotations

from dataclasses import dataclass, replace

import numpy as np

from models.data import MixData

from planner.engine.solve import MixSolution


def _pow2(x: np.ndarray) -> np.ndarray:
    """The power of two nearest each positive finite x; 1 elsewhere."""
    x = np.asarray(x, dtype=float)
    ok = np.isfinite(x) & (x > 0)
    out = np.ones_like(x)
    out[ok] = np.exp2(np.round(np.log2(x[ok])))
    return out


@dataclass(frozen=True)
class Scaling:
    """Column scales σ (units of volume per scaled unit) and row scales ρ (resource units per scaled unit)."""

    col: np.ndarray
    row: np.ndarray

    def unscale(self, sol: MixSolution) -> MixSolution:
        """The solution in the scenario's units: volumes σ·x, shadow prices λ'/ρ (objective unchanged)."""
        return replace(sol, volume=np.asarray(sol.volume) * self.col, duals=np.asarray(sol.duals) / self.row)


def scale(d: MixData) -> tuple[MixData, Scaling]:
    """The scaled data and its scales (see the module docstring)."""
    col = _pow2(d.upper)
    amt = d.use_amt * col[d.use_prod]
    row_max = np.zeros(len(d.resources))
    np.maximum.at(row_max, d.use_res, np.abs(amt))
    row = _pow2(np.where(d.capacity > 0, d.capacity, row_max))
    scaled = MixData(
        products=d.products, resources=d.resources,
        a=d.a * col, b=d.b * col * col, v=d.v * col, F=d.F,
        committed=d.committed / col, min_run=d.min_run / col, cap=d.cap / col, must_run=d.must_run,
        use_res=d.use_res, use_prod=d.use_prod, use_amt=amt / row[d.use_res], capacity=d.capacity / row,
    )
    return scaled, Scaling(col, row)


def solve_scaled(d: MixData, **solve_args) -> MixSolution:
    """solve_mix on the scaled data; the solution comes back in the scenario's units."""
    from planner.engine.solve import solve_mix

    scaled, sc = scale(d)
    return sc.unscale(solve_mix(scaled, **solve_args))
