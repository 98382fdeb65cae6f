"""Seeded generators of raw scenarios for the differential tests (invented numbers, no planner code).

``small_scenario(seed)``: 2–8 products on 1–4 resources, mixing fixed costs near
the contributions, minimum runs, commitments (some too big to fit), caps,
fixed-price products (b = 0), zero capacities and products that use no resource.

``wide_scenario(seed, kind)``: 8 products whose numbers span the documented
range (1e-12..1e15): fixed costs near 1e14, slopes 1e-8, usages 1e-4, or a
mixture of tiny and huge in one scenario; feasible by construction.

Both return plain dicts (the shape of a scenario file) and every number is
rounded to a few significant digits so a case prints as short YAML.
"""

from __future__ import annotations

import math

import numpy as np
import yaml


def _sig(x: float, digits: int = 4) -> float:
    """x rounded to ``digits`` significant digits (0 stays 0)."""
    if x == 0 or not math.isfinite(x):
        return float(x)
    return float(f"{x:.{digits - 1}e}")


def small_scenario(seed: int, edgy: bool = False) -> dict:
    """A small random scenario; valid, but its commitments may not fit (then it is infeasible).

    ``edgy`` raises the share of the corner cases: zero capacities, fixed prices,
    minimum runs, commitments that exactly fill a resource, products that must
    run with nothing committed, minimum runs equal to the room left.
    """
    rng = np.random.default_rng([17, int(edgy), seed])
    k = 2.0 if edgy else 1.0
    n, m = int(rng.integers(2, 9)), int(rng.integers(1, 5))
    res = [f"r{j}" for j in range(m)]
    resources = []
    for r in res:
        cap = 0.0 if rng.random() < 0.1 * k else _sig(rng.uniform(50, 2000), 3)
        resources.append({"name": r, "capacity": cap, "unit": "h"})
    products = []
    for i in range(n):
        a = _sig(rng.uniform(20, 300), 3)
        v = _sig(a * rng.uniform(0.0, 0.9), 3) if rng.random() < 0.9 else 0.0
        b = 0.0 if rng.random() < 0.25 * k else _sig(rng.uniform(0.005, 0.5), 3)
        usage = {} if rng.random() < 0.12 else {
            r: _sig(rng.uniform(0.1, 3.0), 3) for r in res if rng.random() < 0.6}
        peak = (a - v) / (2 * b) if b > 0 else float(rng.uniform(100, 1500))
        peak = max(peak, 1.0)
        p: dict = {"name": f"p{i}", "price_intercept": a, "price_slope": b, "unit_cost": v, "usage": usage}
        cap = None
        if (b == 0 and not usage) or rng.random() < 0.4:
            cap = _sig(peak * rng.uniform(0.3, 1.5), 3)
            p["max_volume"] = cap
        reach = min(peak, cap) if cap is not None else peak
        room = min([c["capacity"] / usage[c["name"]] for c in resources if c["name"] in usage] + [reach])
        best = (a - v) * reach - b * reach * reach
        if rng.random() < 0.5:
            p["fixed_cost"] = _sig(max(best, 1.0) * rng.uniform(0.2, 1.2), 3)
        if rng.random() < 0.25 * k:
            p["min_run"] = _sig(reach * rng.uniform(0.2, 0.9), 3)
            if edgy and rng.random() < 0.3 and room > 0:
                p["min_run"] = float(room)  # exactly what fits
        if rng.random() < 0.15 * k:
            p["min_volume"] = _sig(reach * rng.uniform(0.05, 0.4), 3)
            if edgy and rng.random() < 0.3:
                p["min_volume"] = float(room)  # fills a resource (or its cap) exactly
        if rng.random() < 0.1 * k:
            p["must_run"] = True
        products.append(p)
    return {"name": f"differential {seed}", "products": products, "resources": resources,
            "plant_fixed_cost": _sig(float(rng.uniform(0, 5000)), 3) if rng.random() < 0.3 else 0.0}


WIDE_KINDS = ("huge_fixed", "tiny_slopes", "tiny_usage", "mixed")


def wide_scenario(seed: int, kind: str) -> dict:
    """Eight products with numbers at the edges of the documented range; feasible by construction.

    - huge_fixed: slopes 1e-8, usages 1e-4, fixed costs near each product's best
      contribution (about 1e14), so the on/off choices are close calls;
    - tiny_slopes: slopes 1e-10..1e-8 with usages near 1, volumes ~1e10;
    - tiny_usage: usages 1e-6..1e-4 on capacities near 1e3, slopes near 1e-3;
    - mixed: one scenario holding all of these side by side with ordinary products.
    Commitments, where any, are a small share of what fits.
    """
    rng = np.random.default_rng([29, WIDE_KINDS.index(kind), seed])
    m = int(rng.integers(1, 4))
    res = [f"r{j}" for j in range(m)]
    products = []
    for i in range(8):
        style = kind if kind != "mixed" else str(rng.choice(["huge_fixed", "tiny_slopes", "tiny_usage", "plain"]))
        a = _sig(rng.uniform(1e3, 5e3), 3)
        v = _sig(a * rng.uniform(0.05, 0.6), 3)
        if style == "huge_fixed":
            b = _sig(1e-8 * rng.uniform(0.5, 2.0), 3)
            h = 1e-4 * rng.uniform(0.5, 2.0)
        elif style == "tiny_slopes":
            b = _sig(10 ** rng.uniform(-10, -8), 3)
            h = rng.uniform(0.5, 2.0)
        elif style == "tiny_usage":
            b = _sig(10 ** rng.uniform(-4, -2), 3)
            h = 10 ** rng.uniform(-6, -4)
        else:
            b = _sig(rng.uniform(0.01, 1.0), 3)
            h = rng.uniform(0.2, 3.0)
        peak = (a - v) / (2 * b)
        best = (a - v) ** 2 / (4 * b)
        usage = {r: _sig(h * rng.uniform(0.5, 1.5), 3) for r in res if rng.random() < 0.7}
        p: dict = {"name": f"w{i}", "price_intercept": a, "price_slope": b, "unit_cost": v, "usage": usage}
        if rng.random() < 0.6:
            p["fixed_cost"] = _sig(min(best * rng.uniform(0.3, 1.1), 9e14), 3)
        if rng.random() < 0.2:
            p["min_run"] = _sig(peak * rng.uniform(0.2, 0.7), 3)
        if rng.random() < 0.3:
            p["max_volume"] = _sig(peak * rng.uniform(0.5, 1.5), 3)
        products.append(p)
    # Capacities: a share of what the products' standalone peaks would use, so limits bind.
    resources = []
    for r in res:
        need = sum(p["usage"].get(r, 0.0) * min((p["price_intercept"] - p["unit_cost"]) / (2 * p["price_slope"]),
                                                  p.get("max_volume", math.inf)) for p in products)
        cap = min(max(need * rng.uniform(0.2, 0.7), 1.0), 9e14)
        resources.append({"name": r, "capacity": _sig(cap, 3), "unit": "h"})
    # A few commitments, kept far inside what fits (at most 5 % of any resource in total).
    for p in products:
        if rng.random() < 0.2 and "min_run" not in p:
            peak = (p["price_intercept"] - p["unit_cost"]) / (2 * p["price_slope"])
            room = min([c["capacity"] / p["usage"][c["name"]] for c in resources if c["name"] in p["usage"]]
                       + [p.get("max_volume", math.inf), peak])
            if math.isfinite(room):
                p["min_volume"] = _sig(room * 0.05 / 8, 3)
    return {"name": f"wide {kind} {seed}", "products": products, "resources": resources}


def as_yaml(raw: dict) -> str:
    """The raw scenario as YAML text (for a failure message or a report)."""
    return yaml.safe_dump(raw, sort_keys=False, width=120)
