r"""Internal scaling, so numbers over many orders of magnitude reach HiGHS near 1.

A scenario may count one product in grams and another in pallets, one
resource in seconds and another in tonnes, fixed costs in the billions beside
unit costs in cents.  Solver tolerances are absolute (HiGHS: 1e-7 on
feasibility), so such data can return plans that break a small limit by more
than the limit's own size.  The engine therefore measures each volume in
units of σ_i, each resource row in units of ρ_r and money in units of μ:

.. math::

    D_i = \sigma_i x_i, \qquad
    a'_i = a_i \sigma_i / \mu,\; v'_i = v_i \sigma_i / \mu,\; b'_i = b_i \sigma_i^2 / \mu,\;
    F'_i = F_i / \mu,\; L'_i = L_i / \sigma_i,\; M'_i = M_i / \sigma_i,\; C'_i = C_i / \sigma_i,

    h'_{ri} = h_{ri} \sigma_i / \rho_r, \quad H'_r = H_r / \rho_r, \quad
    A'_{ro} = A_{ro} / \rho_r, \quad c'_o = c_o / \mu.

σ_i is the power of two nearest the volume's upper bound U_i (its own cap,
the resources' room, or the peak of its contribution), ρ_r the power of two
nearest the capacity H_r (or, for H_r = 0, the row's largest scaled
coefficient), so volumes lie in [0, ~1] and each row's capacity is ~1.  Money
is left as it is (μ = 1) while the largest standalone contribution or fixed
cost lies in ``MONEY_PLAIN``; beyond, μ is the power of two that brings it to
about ``MONEY_TARGET``.  Money is not brought down to ~1: the solvers'
tolerances are absolute, so profits of order 1e6 keep a relative precision of
about 1e-13, which certificates as tight as 1e-9 need.  Powers of two make the scaling exact in binary floating point: the
scaled problem is the same problem, only the exponents move.  The scales are
fixed when an engine is built, so every re-solve of it (other capacities,
prices, samples) is measured alike and multipliers carry over.  Back in
scenario units: D = σ·x, profit = μ·profit', shadow price λ_r = μ·λ'_r / ρ_r.
"""

from __future__ import annotations

from dataclasses import dataclass, replace

import numpy as np

from models.data import MixData, peak_contribution

#: Largest money amounts (currency) left unscaled.
MONEY_PLAIN = (1.0, 1e8)
#: Size the largest money amount is scaled to where it lies outside ``MONEY_PLAIN``.
MONEY_TARGET = 1e6


def pow2(x: np.ndarray) -> np.ndarray:
    """The power of two nearest each positive finite x; 1 elsewhere."""
    x = np.asarray(x, dtype=float)
    ok = np.isfinite(x) & (x > 0)
    out = np.ones_like(x)
    out[ok] = np.exp2(np.round(np.log2(x[ok])))
    return out


@dataclass(frozen=True)
class Scales:
    """Column scales σ (units per scaled unit), row scales ρ (resource units per scaled unit), money μ (currency)."""

    col: np.ndarray
    row: np.ndarray
    money: float

    @classmethod
    def of(cls, d: MixData) -> "Scales":
        """The scales of ``d`` (see the module docstring)."""
        col = pow2(d.upper)
        amt = d.use_amt * col[d.use_prod]
        row_max = np.zeros(len(d.resources))
        if amt.size:
            np.maximum.at(row_max, d.use_res, np.abs(amt))
        row = pow2(np.where(d.capacity > 0, d.capacity, row_max))
        sizes = np.r_[np.abs(peak_contribution(d)), np.abs(d.F), np.abs(d.opt_cost), d.grp_cost, d.res_fixed]
        sizes = sizes[np.isfinite(sizes) & (sizes > 0)]
        top = float(sizes.max()) if sizes.size else 1.0
        money = 1.0 if MONEY_PLAIN[0] <= top <= MONEY_PLAIN[1] else float(pow2(np.array([top / MONEY_TARGET]))[0])
        return cls(col, row, money)

    @classmethod
    def identity(cls, d: MixData) -> "Scales":
        """No scaling (every scale 1)."""
        return cls(np.ones(d.n), np.ones(len(d.resources)), 1.0)

    def apply(self, d: MixData) -> MixData:
        """``d`` in the scaled units (every field kept, bounds recomputed)."""
        s, r, mu = self.col, self.row, self.money
        return replace(d, a=d.a * s / mu, b=d.b * s * s / mu, v=d.v * s / mu, F=d.F / mu,
                       committed=d.committed / s, min_run=d.min_run / s, cap=d.cap / s,
                       use_amt=d.use_amt * s[d.use_prod] / r[d.use_res], capacity=d.capacity / r,
                       opt_amount=d.opt_amount / r[None, :], opt_cost=d.opt_cost / mu,
                       buy_cost=d.buy_cost * s / mu, buy_max=d.buy_max / s,
                       grp_cost=d.grp_cost / mu, res_fixed=d.res_fixed / mu)

    def volumes(self, x: np.ndarray) -> np.ndarray:
        """Scaled volumes in the scenario's units."""
        return np.asarray(x, dtype=float) * self.col

    def prices_out(self, lam: np.ndarray) -> np.ndarray:
        """Scaled multipliers as shadow prices in currency per resource unit."""
        return np.asarray(lam, dtype=float) * self.money / self.row

    def prices_in(self, lam: np.ndarray) -> np.ndarray:
        """Shadow prices (currency per resource unit) as scaled multipliers."""
        return np.asarray(lam, dtype=float) * self.row / self.money
