"""Monte Carlo samples of a scenario's uncertain numbers, drawn up front from one seed.

All draws come from one ``numpy.random.Generator(PCG64(seed))`` in a fixed order
(one ``standard_normal((N, k))`` call, columns in the order of the scenario's
``uncertainty`` entries, a fitted entry taking two columns), so the samples,
and every result computed from them, are the same for a given seed however
many workers later solve them.

Marginals (per entry; the scenario's own value is the default centre):

- ``normal``: mean (default the scenario's value) + sd·z;
- ``triangular``: inverse CDF of (low, mode, high) at u = Φ(z);
- ``uniform``: low + (high − low)·Φ(z);
- ``fitted``: (intercept, slope) jointly normal around the scenario's line with the
  product's ``demand_fit`` standard errors and covariance:
  a = a₀ + se_a·z₁,  b = b₀ + (cov/se_a)·z₁ + √(se_b² − cov²/se_a²)·z₂  (Cholesky of the 2×2).

Correlation between products' demand: a Gaussian copula on the intercepts'
normal scores z (correlated normals z ← L·z with L·Lᵀ the correlation matrix).  For normal and fitted intercepts this is exactly the
correlation ρ; for triangular and uniform ones the rank correlation is
(6/π)·asin(ρ/2), close to ρ.

Truncation (a draw that would make a number invalid is moved to the nearest
valid value, and counted): intercepts, unit costs and capacities below 0 become
0; a slope drawn below 1 % of the scenario's slope becomes that 1 % (a
price–demand line never turns flat or rising, which would also unbound a
product with no cap); a product whose scenario slope is 0 keeps slope ≥ 0.

Coverage (:func:`coverage_warnings`): an entry whose distribution cannot produce
the scenario's own value (outside a uniform's or triangular's low..high), or
practically never comes near it (a normal whose mean lies more than ``FAR_SD``
standard deviations away, or with sd 0 at another value), is warned about: the
samples then describe other numbers than the ones the plan was made for.
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field

import numpy as np

from planner.scenario.guard import check_correlations
from planner.scenario.schema import Scenario

#: Fraction of the scenario's slope below which a drawn slope is truncated.
SLOPE_FLOOR_SHARE = 0.01
FIELDS = ("price_intercept", "price_slope", "unit_cost", "capacity")
#: A normal distribution centred more than this many standard deviations from the scenario's value is warned
#: about (a normal draw lies more than 4 sd above its mean about 3 times in 100,000: "practically never").
FAR_SD = 4.0


@dataclass
class Samples:
    """N draws of the uncertain numbers: for each field, the column indices it changes and the values.

    ``values[field]`` is an (N × len(index[field])) array; columns are products for the
    product fields and resources for ``capacity``.  Untouched numbers keep the scenario's value.
    """

    n: int
    seed: int
    index: dict[str, np.ndarray]
    values: dict[str, np.ndarray]
    truncated: dict[str, int] = field(default_factory=dict)

    def rows(self, lo: int, hi: int) -> "Samples":
        """Samples lo..hi−1 (a chunk for one worker)."""
        return Samples(hi - lo, self.seed, self.index, {k: v[lo:hi] for k, v in self.values.items()})

    def full(self, name: str, base: np.ndarray) -> np.ndarray:
        """(N × len(base)) array of field ``name``: the base values with the sampled columns replaced."""
        out = np.repeat(np.asarray(base, dtype=float)[None, :], self.n, axis=0)
        if name in self.index and self.index[name].size:
            out[:, self.index[name]] = self.values[name]
        return out


def _triangular(u: np.ndarray, low: float, mode: float, high: float) -> np.ndarray:
    """Inverse CDF of the triangular distribution (low ≤ mode ≤ high), scipy.stats.triang."""
    from scipy.stats import triang

    if high <= low:
        return np.full_like(u, low)
    return triang.ppf(u, (mode - low) / (high - low), loc=low, scale=high - low)


def draw_samples(s: Scenario, n: int, seed: int) -> Samples:
    """Draw ``n`` samples of the scenario's ``uncertainty`` entries (see the module docstring)."""
    products = {p.name: k for k, p in enumerate(s.products)}
    resources = {r.name: k for k, r in enumerate(s.resources)}
    entries = list(s.uncertainty)
    cols: list[int] = []
    col = 0
    for e in entries:
        cols.append(col)
        col += 2 if e.distribution == "fitted" else 1
    from scipy.stats import norm

    rng = np.random.Generator(np.random.PCG64(seed))
    z = rng.standard_normal((n, col)) if col else np.zeros((n, 0))
    z = _correlate(s, entries, cols, z)
    drawn: dict[tuple[str, int], np.ndarray] = {}
    for e, c in zip(entries, cols):
        if e.product is not None:
            p = s.products[products[e.product]]
            k = products[e.product]
            base = float(getattr(p, e.field))
        else:
            k = resources[e.resource]
            base = float(s.resources[k].capacity)
        if e.distribution == "normal":
            x = (base if e.mean is None else e.mean) + e.sd * z[:, c]
        elif e.distribution == "triangular":
            x = _triangular(norm.cdf(z[:, c]), e.low, e.mode, e.high)
        elif e.distribution == "uniform":
            x = e.low + (e.high - e.low) * norm.cdf(z[:, c])
        else:  # fitted: intercept and slope together
            fit = p.demand_fit
            se_a, se_b, cov = fit.intercept_se, fit.slope_se, fit.covariance
            x = p.price_intercept + se_a * z[:, c]
            if se_a > 0:
                rest = max(se_b * se_b - cov * cov / (se_a * se_a), 0.0)
                slope = p.price_slope + (cov / se_a) * z[:, c] + math.sqrt(rest) * z[:, c + 1]
            else:
                slope = p.price_slope + se_b * z[:, c + 1]
            drawn[("price_slope", k)] = slope
        drawn[(e.field, k)] = x
    index, values, truncated = {}, {}, {}
    for name in FIELDS:
        keys = sorted(k for f, k in drawn if f == name)
        if not keys:
            continue
        vals = np.column_stack([drawn[(name, k)] for k in keys])
        if name == "price_slope":
            floor = np.array([SLOPE_FLOOR_SHARE * s.products[k].price_slope for k in keys])
        else:
            floor = np.zeros(len(keys))
        low = vals < floor
        truncated[name] = int(np.count_nonzero(low))
        values[name] = np.where(low, floor, vals)
        index[name] = np.array(keys, dtype=np.int64)
    return Samples(n, seed, index, values, truncated)


def _g(x: float) -> str:
    return f"{x:,.6g}"


def coverage_warnings(s: Scenario) -> list[str]:
    """One sentence per ``uncertainty`` entry whose distribution cannot produce the scenario's own value.

    Uniform and triangular: the value lies outside low..high.  Normal with its own ``mean``: the
    value lies more than FAR_SD standard deviations from it (or sd is 0 and the mean differs).
    Fitted entries are centred on the scenario's line, so they always cover it.
    """
    out = []
    for i, e in enumerate(s.uncertainty, start=1):
        if e.product is not None:
            p = next(x for x in s.products if x.name == e.product)
            base, owner = float(getattr(p, e.field)), f"products[{e.product}].{e.field}"
        else:
            r = next(x for x in s.resources if x.name == e.resource)
            base, owner = float(r.capacity), f"resources[{e.resource}].capacity"
        where = f"uncertainty[{i}] ({owner} = {_g(base)})"
        fix = (f"centre the distribution on {_g(base)}, or change {owner} to the value you expect, so that the "
               "risk is that of the plan you are shown")
        if e.distribution in ("uniform", "triangular") and not e.low <= base <= e.high:
            out.append(f"{where}: the scenario's value {_g(base)} lies outside the range the {e.distribution} "
                       f"distribution covers ({_g(e.low)} to {_g(e.high)}), so no sample takes it and the risk "
                       f"figures describe other numbers than the plan's ({fix})")
        elif e.distribution == "normal" and e.mean is not None and e.mean != base:
            if e.sd == 0:
                out.append(f"{where}: the normal distribution has sd 0 at mean {_g(e.mean)}, so every sample "
                           f"takes {_g(e.mean)} and none the scenario's value {_g(base)} ({fix})")
            elif abs(base - e.mean) > FAR_SD * e.sd:
                out.append(f"{where}: the scenario's value {_g(base)} lies {abs(base - e.mean) / e.sd:,.1f} sd "
                           f"from the normal distribution's mean {_g(e.mean)} (sd {_g(e.sd)}), more than "
                           f"{FAR_SD:g} sd, so practically no sample comes near it ({fix})")
    return out


def _correlate(s: Scenario, entries: list, cols: list[int], z: np.ndarray) -> np.ndarray:
    """Apply the scenario's correlations to the intercepts' normal scores (Gaussian copula)."""
    if not s.correlations:
        return z
    check_correlations(s)  # the validator's rule, once more for a Scenario changed in code
    where = {e.product: c for e, c in zip(entries, cols) if e.product is not None and e.field == "price_intercept"}
    names = sorted({n for c in s.correlations for n in c.products}, key=lambda n: where[n])
    pos = {n: i for i, n in enumerate(names)}
    R = np.eye(len(names))
    for c in s.correlations:
        i, j = pos[c.products[0]], pos[c.products[1]]
        R[i, j] = R[j, i] = c.rho
    w, V = np.linalg.eigh(R)  # R = V·diag(w)·Vᵀ; L = V·√w works for ρ = ±1 too, unlike Cholesky
    L = V * np.sqrt(np.maximum(w, 0.0))
    idx = [where[n] for n in names]
    out = z.copy()
    out[:, idx] = z[:, idx] @ L.T
    return out
