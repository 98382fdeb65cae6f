"""Standalone cost–volume economics of each product (no shared limits).

For a product with price p(D) = a − b·D (currency/unit, b ≥ 0), variable cost
v (currency/unit) and fixed cost F (currency/period):

- revenue R(D) = a·D − b·D², total cost C(D) = F + v·D, profit π(D) = R − C;
- maximum-revenue volume D_R = a / (2b);
- profit-maximising volume D* = (a − v) / (2b), price p(D*), profit π(D*);
- break-even volumes where π(D) = 0:
  D = [(a − v) ± √((a − v)² − 4·b·F)] / (2b); none if the root is imaginary.

A fixed-price product (b = 0) has linear revenue: profit rises with volume
when a > v, so the optimum is the cap (``max_volume``) and the only
break-even volume is F / (a − v).  Optima are capped by ``max_volume``;
commitments and shared limits are ignored here on purpose (that is the plan's
job).  Everything is vectorised over products with numpy.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np


@dataclass(frozen=True)
class Standalone:
    """One product's standalone economics; ``None`` where a value does not exist."""

    optimal_volume: float | None
    """Profit-maximising volume (units), capped by max_volume; None if unbounded."""
    optimal_price: float | None
    """Price at that volume (currency/unit)."""
    max_profit: float | None
    """Profit at that volume after the fixed cost (currency/period)."""
    max_revenue_volume: float | None
    """Volume of greatest revenue a/(2b) (units), capped; None for a fixed price with no cap."""
    break_even: tuple[float, ...]
    """(low, high) break-even volumes (units); high is None for a fixed price; () if it never breaks even."""
    profitable_within_cap: bool
    """True if some volume up to max_volume makes a profit after the fixed cost."""

    def to_dict(self) -> dict:
        return {
            "optimal_volume": self.optimal_volume,
            "optimal_price": self.optimal_price,
            "max_profit": self.max_profit,
            "max_revenue_volume": self.max_revenue_volume,
            "break_even": list(self.break_even),
            "profitable_within_cap": self.profitable_within_cap,
        }


def profit_at(a: np.ndarray, b: np.ndarray, v: np.ndarray, F: np.ndarray, D: np.ndarray) -> np.ndarray:
    """Profit (a − v)·D − b·D² − F at volume D (currency), elementwise."""
    return (a - v) * D - b * D * D - F


def standalone(a, b, v, F, cap) -> list[Standalone]:
    """Standalone economics for arrays of products; ``cap`` uses inf for 'no cap'."""
    a, b, v, F, cap = (np.asarray(x, dtype=float) for x in (a, b, v, F, cap))
    out = []
    for i in range(a.size):
        out.append(_one(a[i], b[i], v[i], F[i], cap[i]))
    return out


def _one(a: float, b: float, v: float, F: float, cap: float) -> Standalone:
    m = a - v  # unit margin at zero volume (currency/unit)
    if b > 0:
        d_rev = min(a / (2 * b), cap)
        d_opt = float(np.clip(m / (2 * b), 0.0, cap))
        disc = m * m - 4 * b * F
        if m > 0 and disc >= 0:
            root = np.sqrt(disc)
            be: tuple[float, ...] = ((m - root) / (2 * b), (m + root) / (2 * b))
        else:
            be = ()
    else:
        d_rev = cap if np.isfinite(cap) else None
        d_opt = (cap if np.isfinite(cap) else None) if m > 0 else 0.0
        be = (F / m, None) if m > 0 else ()
    if d_opt is None:
        price = a
        best = None
        profitable = m > 0
    else:
        price = a - b * d_opt
        best = m * d_opt - b * d_opt * d_opt - F
        profitable = bool(best > 0) or (F == 0 and best >= 0 and d_opt > 0)
    return Standalone(
        optimal_volume=None if d_opt is None else float(d_opt),
        optimal_price=float(price),
        max_profit=None if best is None else float(best),
        max_revenue_volume=None if d_rev is None else float(d_rev),
        break_even=tuple(None if x is None else float(x) for x in be),
        profitable_within_cap=bool(profitable),
    )


def capacity_value(shadow_prices: np.ndarray, capacity: np.ndarray) -> np.ndarray:
    """The value of one per cent more of each resource, 0.01 · λ_r · H_r (currency per period).

    Unlike the shadow price itself (currency per hour, per kg, per tonne), this does not
    depend on the unit a resource is counted in, so resources can be compared by it.
    """
    return 0.01 * np.asarray(shadow_prices, dtype=float) * np.maximum(np.asarray(capacity, dtype=float), 0.0)


def bottleneck(shadow_prices: np.ndarray, capacity: np.ndarray, tol: float = 1e-12) -> int | None:
    """Index of the bottleneck: the binding resource whose extra one per cent is worth most; None if none binds.

    A resource binds here when its shadow price is positive; ties (e.g. capacity 0) go to the
    higher shadow price.  The choice is the same whatever unit each resource is counted in.
    """
    lam = np.asarray(shadow_prices, dtype=float)
    if lam.size == 0 or np.max(lam, initial=0.0) <= tol:
        return None
    value = capacity_value(lam, capacity)
    order = np.lexsort((-lam, -value))
    k = int(order[0])
    return k if lam[k] > tol else None
