"""Other ways to state a product's demand, all turned into the planner's line.

The model's line is ``price = price_intercept − price_slope·volume``.  Instead
of those two keys a product may give ``demand:`` in one of three forms::

    demand: {points: [[540, 1200], [600, 900]]}        # two observed (price, volume) points
    demand: {reference_price: 580, reference_volume: 1000, elasticity: -1.8}
    demand: {history: sales.csv}                       # fitted by least squares (planner.fit)

History options: ``product:`` (the product's name in the file, default its
own name) and ``regress:`` (``volume-on-price``, the default, or
``price-on-volume``; see :mod:`planner.fit`).  A history path is relative to
the folder holding the scenario file (a CSV folder counts as the file: paths
are relative to the folder that holds it, so siblings of any form share them).  A fitted line also fills
the product's ``demand_fit`` (standard errors, covariance, observed price
range) for the risk analysis and the extrapolation warning.

Point elasticity ε = (dQ/dP)·(P/Q).  On the line dQ/dP = −1/b, so at
(P, Q): ε = −P/(b·Q), hence b = −P/(ε·Q) and a = P + b·Q = P·(1 − 1/ε).
ε must be negative (demand falls as price rises).
"""

from __future__ import annotations

from pathlib import Path
from typing import Any

from planner.errors import Problem
from planner.scenario.fit import METHODS, DemandLine, fit_line, read_history
from planner.scenario.numbers import Unusable, number_or_problem

FORMS = {"points": ("points",), "elasticity": ("reference_price", "reference_volume", "elasticity"),
         "history": ("history",)}
KEYS = {"points", "reference_price", "reference_volume", "elasticity", "history", "product", "regress"}


def from_points(p1: float, q1: float, p2: float, q2: float) -> tuple[float, float]:
    """(intercept, slope) of the line through (price p1, volume q1) and (p2, q2); q1 ≠ q2."""
    b = (p1 - p2) / (q2 - q1)
    return p1 + b * q1, b


def from_elasticity(price: float, volume: float, elasticity: float) -> tuple[float, float]:
    """(intercept, slope) of the line with point elasticity ``elasticity`` (< 0) at (price, volume)."""
    b = -price / (elasticity * volume)
    return price * (1.0 - 1.0 / elasticity), b


def point_elasticity(intercept: float, slope: float, volume: float) -> float:
    """ε = (dQ/dP)·(P/Q) = −P/(b·Q) at ``volume`` on price = intercept − slope·volume."""
    price = intercept - slope * volume
    return -price / (slope * volume)


def _number(v: Any, where: str, problems: list[Problem], what: str = "") -> float | None:
    """``v`` by the number rule of :mod:`planner.scenario.numbers`, or None with a problem added."""
    value, message, fix = number_or_problem(v)
    if value is None:
        quoted = isinstance(v, Unusable) or message.startswith("must be a plain decimal number")
        shown = "" if quoted else f" (got {v!r})"
        place = f"{v.place()} ({where})" if isinstance(v, Unusable) and v.place() else where
        problems.append(Problem(place, f"{what}{message}{shown}", fix))
    return value


def _label(p: dict, i: int) -> str:
    name = p.get("name")
    return f"products[{name.strip()}]" if isinstance(name, str) and name.strip() else f"products[{i + 1}]"


class _Histories:
    """Each history file read once per validation."""

    def __init__(self, base: Path) -> None:
        self.base = base
        self.cache: dict[Path, tuple[dict, list[Problem]]] = {}
        self.reported: set[Path] = set()

    def get(self, path: str) -> tuple[Path, dict, list[Problem], bool]:
        """(full path, data, problems not yet reported, whether the file had problems)."""
        full = Path(path) if Path(path).is_absolute() else self.base / path
        if full not in self.cache:
            self.cache[full] = read_history(full)
        data, problems = self.cache[full]
        fresh = [] if full in self.reported else problems
        self.reported.add(full)
        return full, data, fresh, bool(problems)


def expand_demand(raw: Any, base_dir: str | Path | None = None) -> tuple[Any, list[Problem], list[str]]:
    """Replace each product's ``demand:`` by price_intercept / price_slope (and demand_fit).

    Returns (new raw dict, problems, warnings); the input is not changed.  Problems
    name the product's ``demand`` key so spreadsheet readers can locate them.
    """
    if not isinstance(raw, dict) or not isinstance(raw.get("products"), list):
        return raw, [], []
    if not any(isinstance(p, dict) and "demand" in p for p in raw["products"]):
        return raw, [], []
    hist = _Histories(Path(base_dir) if base_dir is not None else Path.cwd())
    problems: list[Problem] = []
    warnings: list[str] = []
    products = []
    for i, p in enumerate(raw["products"]):
        if not isinstance(p, dict) or "demand" not in p:
            products.append(p)
            continue
        q = dict(p)
        spec = q.pop("demand")
        label = _label(p, i)
        where = f"{label}.demand"
        line = _expand_one(spec, q, label, hist, problems, warnings)
        if line is None:  # already reported: keep the validator from adding "price_intercept missing"
            q.setdefault("price_intercept", 0.0)
        else:
            if "price_intercept" in p or "price_slope" in p:
                problems.append(Problem(where, "is given together with price_intercept / price_slope",
                                        "give the line one way only: remove one of them"))
            q["price_intercept"], q["price_slope"] = line[0], line[1]
            if line[2] is not None:
                if "demand_fit" in p:
                    problems.append(Problem(f"{label}.demand_fit", "is filled in from the history",
                                            "remove demand_fit, or give the line by hand"))
                q["demand_fit"] = line[2]
        products.append(q)
    out = dict(raw)
    out["products"] = products
    return out, problems, warnings


def _expand_one(spec: Any, product: dict, label: str, hist: _Histories, problems: list[Problem],
                warnings: list[str]) -> tuple[float, float, dict | None] | None:
    where = f"{label}.demand"
    if not isinstance(spec, dict):
        problems.append(Problem(where, f"must be a mapping (got {spec!r})",
                                "use {points: ...}, {reference_price, reference_volume, elasticity} or {history: file}"))
        return None
    from planner.scenario.names import did_you_mean

    bad = [k for k in spec if k not in KEYS]
    for k in bad:
        problems.append(Problem(f"{where}.{k}", "unknown key", did_you_mean(str(k), KEYS) or
                                f"allowed keys: {', '.join(sorted(KEYS))}"))
    forms = [f for f, keys in FORMS.items() if any(k in spec for k in keys)]
    if len(forms) != 1:
        got = " and ".join(forms) if forms else "none"
        problems.append(Problem(where, f"needs exactly one form: points, elasticity (reference_price, "
                                       f"reference_volume, elasticity) or history (got {got})"))
        return None
    form = forms[0]
    if form != "history":
        for k in ("product", "regress"):
            if k in spec:
                problems.append(Problem(f"{where}.{k}", "goes only with 'history'"))
    if form == "points":
        return _points(spec["points"], where, problems)
    if form == "elasticity":
        return _elasticity(spec, where, problems)
    return _history(spec, product, label, hist, problems, warnings)


def _points(pts: Any, where: str, problems: list[Problem]):
    w = f"{where}.points"
    ok = (isinstance(pts, (list, tuple)) and len(pts) == 2
          and all(isinstance(x, (list, tuple)) and len(x) == 2 for x in pts))
    if not ok:
        problems.append(Problem(w, f"must be two [price, volume] pairs of numbers (got {pts!r})",
                                "e.g. points: [[540, 1200], [600, 900]]"))
        return None
    before = len(problems)
    read = [[_number(v, w, problems, f"point {k + 1}'s {('price', 'volume')[j]} ") for j, v in enumerate(x)]
            for k, x in enumerate(pts)]
    if len(problems) > before:
        return None
    pts = read
    (p1, q1), (p2, q2) = pts
    if min(p1, q1, p2, q2) < 0:
        problems.append(Problem(w, f"prices and volumes must be >= 0 (got {pts!r})"))
        return None
    if q1 == q2:
        problems.append(Problem(w, f"both points have volume {q1:g}: the slope is undefined",
                                "give two points with different volumes"))
        return None
    a, b = from_points(p1, q1, p2, q2)
    if b < 0:
        problems.append(Problem(w, f"price rises with volume between the points (slope {b:.6g})",
                                "a demand line falls: check the pairs are [price, volume]"))
        return None
    return a, b, None


def _elasticity(spec: dict, where: str, problems: list[Problem]):
    vals = {}
    for k in FORMS["elasticity"]:
        v = spec.get(k)
        if v is None:
            problems.append(Problem(f"{where}.{k}", "is required with the elasticity form", "add it"))
        elif (x := _number(v, f"{where}.{k}", problems)) is not None:
            vals[k] = x
    if len(vals) < 3:
        return None
    P, Q, e = vals["reference_price"], vals["reference_volume"], vals["elasticity"]
    bad = False
    for k, v in (("reference_price", P), ("reference_volume", Q)):
        if v <= 0:
            problems.append(Problem(f"{where}.{k}", f"must be > 0 (got {v:g})"))
            bad = True
    if e >= 0:
        problems.append(Problem(f"{where}.elasticity", f"must be < 0: demand falls as price rises (got {e:g})",
                                "price elasticities are negative: write e.g. -1.5"))
        bad = True
    if bad:
        return None
    a, b = from_elasticity(P, Q, e)
    return a, b, None


def _history(spec: dict, product: dict, label: str, hist: _Histories, problems: list[Problem],
             warnings: list[str]):
    where = f"{label}.demand"
    path = spec.get("history")
    if not isinstance(path, str) or not path.strip():
        problems.append(Problem(f"{where}.history", f"must be the path of a CSV file (got {path!r})"))
        return None
    method = spec.get("regress", "volume-on-price")
    if method not in METHODS:
        problems.append(Problem(f"{where}.regress", f"must be one of {', '.join(METHODS)} (got {method!r})"))
        return None
    full, data, file_problems, troubled = hist.get(path.strip())
    problems += [Problem(f"{where}.history", f"{p.where}: {p.message}", p.fix) for p in file_problems]
    name = spec.get("product", product.get("name"))
    if troubled and not data:
        return None
    if name not in data:
        from planner.scenario.names import did_you_mean

        problems.append(Problem(f"{where}.history", f"{full.name} has no rows for product {name!r}",
                                did_you_mean(str(name), list(data)) or "add its rows, or set demand.product"))
        return None
    d = data[name]
    try:
        line: DemandLine = fit_line(str(name), d["price"], d["volume"], method, periods=d["period"] or None,
                                    source=path.strip())
    except ValueError as e:
        problems.append(Problem(f"{where}.history", f"{full.name}, product {name!r}: {e}"))
        return None
    if line.slope is None or line.slope < 0 or line.dq_dp >= 0:
        problems.append(Problem(f"{where}.history", f"{full.name}: {line.warnings[0]}"))
        return None
    if line.intercept is None or line.intercept < 0:
        problems.append(Problem(f"{where}.history", f"{full.name}: the fitted price at zero volume is negative "
                                                    f"({line.intercept!r})", "the history cannot give a usable line"))
        return None
    for w in line.warnings:
        warnings.append(f"{label}: demand fitted from {full.name}: {w}")
    return line.intercept, line.slope, line.demand_fit()


def extrapolation_warnings(scenario: Any, products: list[Any]) -> list[str]:
    """Warnings for running products planned at a price outside the range seen in their sales history.

    ``products`` are the plan's ProductPlan rows (name, running, volume, price), in scenario order.
    """
    out = []
    for sp, pp in zip(scenario.products, products):
        fit = sp.demand_fit
        if fit is None or fit.price_min is None or fit.price_max is None or not pp.running or pp.volume <= 0:
            continue
        tol = 1e-9 * max(abs(fit.price_max), 1.0)
        if pp.price < fit.price_min - tol or pp.price > fit.price_max + tol:
            side = "below" if pp.price < fit.price_min else "above"
            out.append(f"products[{sp.name}]: planned price {pp.price:,.2f} is {side} the prices in its sales "
                       f"history ({fit.price_min:,.2f} to {fit.price_max:,.2f}): the fitted line is extrapolated "
                       "there; check that the planned volume is believable")
    return out
