"""Seeded generator of realistic synthetic scenarios, for tests and the benchmark.

Each product gets a price–demand line with a positive margin, a sparse routing
over work centres and materials, and (optionally) a fixed cost drawn around
its best standalone contribution so that some are not covered.  Capacities
are set to a fraction of what the standalone optima would use, so limits bind.
Invented numbers only: this is not data about any real plant.
"""

from __future__ import annotations

from typing import Any

import numpy as np


def synthetic_scenario(n_products: int, n_resources: int, seed: int = 0, fixed_costs: str = "some",
                       density: float = 0.25, tightness: float = 0.6, price_slope: str = "all",
                       commitments: bool = False) -> dict[str, Any]:
    """A raw scenario dict (as read from YAML) with the given size.

    fixed_costs: "none", "some" (about half the products, 20–90 % of their best
    contribution), "near" (every product, 70–110 %: hard for bounds), "hard"
    (every product, 80–105 %: a product-range review) or "mixed" (every product,
    5–120 %).
    price_slope: "all" (every product has a falling line), "none" (fixed prices,
    with max_volume caps) or "mixed".
    tightness: capacity as a fraction of the standalone optima's use (0..1].
    """
    rng = np.random.default_rng(seed)
    n, m = n_products, n_resources
    a = rng.uniform(50.0, 500.0, n)
    v = a * rng.uniform(0.3, 0.7, n)
    vol_scale = rng.uniform(200.0, 2000.0, n)
    b = (a - v) / (2.0 * vol_scale)  # standalone optimum near vol_scale
    if price_slope == "none":
        b[:] = 0.0
    elif price_slope == "mixed":
        b[rng.random(n) < 0.3] = 0.0
    cap = np.where(b == 0, vol_scale, np.inf)
    d_opt = np.where(b > 0, (a - v) / (2 * np.where(b > 0, b, 1.0)), cap)
    best = (a - v) * d_opt - b * d_opt**2
    if fixed_costs == "none":
        F = np.zeros(n)
    elif fixed_costs == "near":
        F = best * rng.uniform(0.7, 1.1, n)
    elif fixed_costs == "hard":
        F = best * rng.uniform(0.8, 1.05, n)
    elif fixed_costs == "mixed":
        F = best * rng.uniform(0.05, 1.2, n)
    else:
        F = np.where(rng.random(n) < 0.5, best * rng.uniform(0.2, 0.9, n), 0.0)
    per = max(1, int(round(density * m)))
    names_r = [f"r{j:03d}" for j in range(m)]
    use = np.zeros((m, n))
    for i in range(n):
        cols = rng.choice(m, size=min(per, m), replace=False)
        use[cols, i] = rng.uniform(0.1, 2.0, cols.size)
    capacity = tightness * (use @ d_opt)
    capacity = np.where(capacity > 0, capacity, 1.0)
    products = []
    for i in range(n):
        p: dict[str, Any] = {
            "name": f"p{i:05d}",
            "price_intercept": round(float(a[i]), 4),
            "price_slope": round(float(b[i]), 6),
            "unit_cost": round(float(v[i]), 4),
            "fixed_cost": round(float(F[i]), 2),
            "usage": {names_r[j]: round(float(use[j, i]), 4) for j in np.flatnonzero(use[:, i])},
        }
        if np.isfinite(cap[i]):
            p["max_volume"] = round(float(cap[i]), 2)
        if commitments and rng.random() < 0.1:
            p["min_volume"] = round(float(0.05 * d_opt[i]), 2)
        products.append(p)
    resources = [{"name": names_r[j], "capacity": round(float(capacity[j]), 3), "unit": "h"} for j in range(m)]
    return {"name": f"synthetic {n}x{m} seed {seed}", "products": products, "resources": resources}
