"""Cross-checks of a scenario's ``uncertainty`` and ``correlations`` (for Monte Carlo risk), on the raw dict.

Names, fields, each distribution's parameters and their order, one
distribution per number, and correlations that can hold together: the
matrix of the correlations given (1 on the diagonal, 0 for pairs not given)
must be positive semi-definite, or no joint distribution has them.  The risk
analysis draws correlated normal scores with that matrix; validation checks
it once, here, for every command.
"""

from __future__ import annotations

from collections import Counter
from typing import Any

import numpy as np

from planner.errors import Problem
from planner.scenario.names import did_you_mean
from planner.scenario.numbers import Unusable
from planner.scenario.rawdict import clean_name, entries, indexed, number

#: Smallest eigenvalue a correlation matrix may have (rounding of a valid matrix stays above it).
PSD_TOLERANCE = -1e-10


_PRODUCT_FIELDS = ("price_intercept", "price_slope", "unit_cost")
_PARAMS = {"normal": ("sd",), "triangular": ("low", "mode", "high"), "uniform": ("low", "high"), "fitted": ()}


def uncertainty_problems(raw: dict[str, Any]) -> list[Problem]:
    """Cross-checks of ``uncertainty`` and ``correlations`` (names, fields, parameters, order)."""
    problems: list[Problem] = []
    products = {n: p for p in entries(raw, "products") if (n := clean_name(p.get("name"))) is not None}
    resources = {n for r in entries(raw, "resources") if (n := clean_name(r.get("name"))) is not None}
    targets: Counter = Counter()
    intercepts: set[str] = set()
    for i, u in indexed(raw, "uncertainty"):
        where = f"uncertainty[{i + 1}]"
        prod, res, fld, dist = u.get("product"), u.get("resource"), u.get("field"), u.get("distribution")
        if (prod is None) == (res is None):
            problems.append(Problem(where, "needs exactly one of 'product' or 'resource'"))
        elif prod is not None and _ref(prod) and str(prod).strip() not in products:
            hint = did_you_mean(str(prod), set(products)) or "name a product defined under products"
            problems.append(Problem(f"{where}.product", f"names a product that is not defined ({prod!r})", hint))
        elif res is not None and _ref(res) and str(res).strip() not in resources:
            hint = did_you_mean(str(res), resources) or "name a resource defined under resources"
            problems.append(Problem(f"{where}.resource", f"names a resource that is not defined ({res!r})", hint))
        if prod is not None and res is None and fld == "capacity":
            problems.append(Problem(f"{where}.field", "capacity belongs to a resource",
                                    "a product's uncertain field is price_intercept, price_slope or unit_cost"))
        if res is not None and prod is None and fld in _PRODUCT_FIELDS:
            problems.append(Problem(f"{where}.field", f"a resource's uncertain field is capacity (got {fld!r})",
                                    "use 'product:' for a product's field"))
        if dist in _PARAMS:
            for key in _PARAMS[dist]:
                if u.get(key) is None:
                    problems.append(Problem(f"{where}.{key}", f"is required with distribution {dist}"))
            for key in ("sd", "mean", "low", "mode", "high"):
                if u.get(key) is not None and key not in _PARAMS[dist] and not (dist == "normal" and key == "mean"):
                    problems.append(Problem(f"{where}.{key}", f"does not go with distribution {dist}",
                                            f"{dist} takes {', '.join(_PARAMS[dist]) or 'no parameters'}"))
        lo, mode, hi = number(u.get("low")), number(u.get("mode")), number(u.get("high"))
        if dist == "triangular" and None not in (lo, mode, hi) and not lo <= mode <= hi:
            problems.append(Problem(where, f"needs low <= mode <= high (got {lo:g}, {mode:g}, {hi:g})"))
        if dist == "uniform" and lo is not None and hi is not None and lo > hi:
            problems.append(Problem(where, f"needs low <= high (got {lo:g}, {hi:g})"))
        name = str(prod).strip() if prod is not None else None
        if dist == "fitted":
            if fld != "price_intercept":
                problems.append(Problem(f"{where}.field", "fitted moves intercept and slope together",
                                        "use field: price_intercept"))
            if name in products and not isinstance(products[name].get("demand_fit"), dict):
                problems.append(Problem(where, f"distribution fitted needs products[{name}].demand_fit",
                                        "fit the line from sales history first, or give sd / low, high"))
        single = (prod is None) != (res is None)
        if single and dist == "fitted":
            targets[(("product", name), "price_intercept")] += 1
            targets[(("product", name), "price_slope")] += 1
        elif single and fld in (_PRODUCT_FIELDS if prod is not None else ("capacity",)):
            targets[(("product", name) if prod is not None else ("resource", str(res).strip()), fld)] += 1
        if prod is not None and fld == "price_intercept":
            intercepts.add(name)
    for ((kind, name), fld), count in targets.items():
        if count > 1:
            problems.append(Problem("uncertainty", f"{fld} of {kind} {name!r} has {count} distributions",
                                    "give one entry per number (fitted covers price_slope too)"))
    pairs: Counter = Counter()
    for i, c in indexed(raw, "correlations"):
        where = f"correlations[{i + 1}]"
        names = c.get("products")
        if not isinstance(names, (list, tuple)) or len(names) != 2:
            continue  # the schema reports the shape
        if not all(_ref(x) for x in names):
            continue  # reported where it stands
        a, b = (str(x).strip() for x in names)
        for x in (a, b):
            if x not in products:
                hint = did_you_mean(x, set(products)) or "name a product defined under products"
                problems.append(Problem(f"{where}.products", f"names a product that is not defined ({x!r})", hint))
            elif x not in intercepts:
                problems.append(Problem(f"{where}.products", f"{x!r} has no uncertainty on price_intercept",
                                        "correlation links the products' demand: give each an intercept distribution"))
        if a == b:
            problems.append(Problem(f"{where}.products", "names the same product twice"))
        pairs[frozenset((a, b))] += 1
    for pair, count in pairs.items():
        if count > 1:
            problems.append(Problem("correlations", f"{' and '.join(sorted(pair))} are correlated {count} times",
                                    "give each pair once"))
    if not problems:
        given = [(str(c["products"][0]).strip(), str(c["products"][1]).strip(), number(c.get("rho")))
                 for _, c in indexed(raw, "correlations")
                 if isinstance(c.get("products"), (list, tuple)) and len(c["products"]) == 2]
        if all(r is not None and -1 <= r <= 1 for _, _, r in given):
            problems += correlation_problems(given)  # type: ignore[arg-type]
    return problems


def _ref(x: Any) -> bool:
    """Whether a name used in a reference can be looked up (else its own problem is reported)."""
    if isinstance(x, str):
        return clean_name(x) is not None
    return not isinstance(x, Unusable)


def _smallest_eigenvalue(names: list[str], pairs: list[tuple[str, str, float]]) -> tuple[float, np.ndarray]:
    pos = {n: i for i, n in enumerate(names)}
    R = np.eye(len(names))
    for a, b, rho in pairs:
        if a in pos and b in pos:
            R[pos[a], pos[b]] = R[pos[b], pos[a]] = rho
    w, V = np.linalg.eigh(R)
    return float(w[0]), V[:, 0]


def conflicting_correlations(pairs: list[tuple[str, str, float]]) -> list[tuple[str, str, float]]:
    """The pairs (product, product, rho) that cannot hold together, a few as possible; [] if all can.

    The correlation matrix (1 on the diagonal, rho for each pair, 0 elsewhere)
    must be positive semi-definite (common practice: a correlation matrix is
    a covariance matrix of standardised variables).  If it is not, products
    are left out one at a time, least involved first (by the eigenvector of
    the most negative eigenvalue), while what remains still cannot hold
    together; the pairs among the rest are named.
    """
    names = list(dict.fromkeys(n for a, b, _ in pairs for n in (a, b)))
    if len(names) < 3:  # two products: any rho in [-1, 1] holds
        return []
    low, vec = _smallest_eigenvalue(names, pairs)
    if low >= PSD_TOLERANCE:
        return []
    keep = list(names)
    if len(names) <= 200:  # each try is one eigen-decomposition of a small matrix
        order = [names[k] for k in np.argsort(np.abs(vec))]
        for n in order:
            trial = [x for x in keep if x != n]
            if len(trial) >= 3 and _smallest_eigenvalue(trial, pairs)[0] < PSD_TOLERANCE:
                keep = trial
    else:
        big = np.abs(vec) >= 0.05 * np.abs(vec).max()
        keep = [n for n, b in zip(names, big) if b]
    inside = set(keep)
    return [(a, b, r) for a, b, r in pairs if a in inside and b in inside]


def correlation_problems(pairs: list[tuple[str, str, float]]) -> list[Problem]:
    """A problem naming the correlations that cannot hold together, or []."""
    bad = conflicting_correlations(pairs)
    if not bad:
        return []
    listed = ", ".join(f"{a}–{b} {r:g}" for a, b, r in bad[:12]) + (f" and {len(bad) - 12} more" if len(bad) > 12 else "")
    return [Problem("correlations", f"the correlations {listed} cannot hold together (the correlation matrix "
                    "is not positive semi-definite)",
                    "weaken some of them: for example, if A goes with B and B with C, A cannot go strongly "
                    "against C")]


