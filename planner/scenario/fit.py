"""Price–demand lines estimated from sales history by ordinary least squares.

The planner's line is ``price = a − b·volume`` (a = ``price_intercept`` in
currency/unit, b = ``price_slope`` in currency/unit², b ≥ 0).

**Which way round.** By default the fit regresses *volume on price*,
``volume = α + β·price`` (β = dQ/dP, units per currency/unit), and turns it
into the planner's line: a = −α/β, b = −1/β.  Reason: in a plant's sales
history the firm set the prices and the market answered with volumes, so the
noise is in the volumes; least squares is unbiased for the variable that holds
the noise.  Regressing price on volume instead would flatten the line by the
factor R² (its b is R² times smaller), which overstates the profitable volume
exactly when the fit is poor.  ``method="price-on-volume"`` fits
``price = a − b·volume`` directly (right when volumes were fixed, e.g. by
contracts, and prices were negotiated); its standard errors are exact.

Uncertainty of (a, b) for the volume-on-price fit comes from the OLS
covariance of (α, β) by the delta method (first-order, stated as such).  The
confidence interval of b is exact (it inverts β's t-interval; b = −1/β is
monotone on either side of 0); the interval of a uses the delta-method
standard error.  Where β's interval reaches past 0 the confidence set of b is
two rays, (−∞, −1/β_hi] and [−1/β_lo, ∞); the one holding the estimate is
reported (an open end is None), so the interval always contains the estimate,
and a wrong-signed fit (β > 0, b < 0) reports a negative interval.

The t quantile is computed here (regularised incomplete beta function by its
continued fraction, Numerical Recipes §6.4, and bisection), so scipy is not a
runtime dependency; the tests compare it with ``scipy.stats.t.ppf``.
"""

from __future__ import annotations

import csv
import math
from dataclasses import asdict, dataclass, field
from pathlib import Path
from typing import Any

import numpy as np

from planner.errors import Problem
from planner.scenario.forms.csvdir import separator_message, separator_problem
from planner.scenario.numbers import number_or_problem

#: Fewer observations than this get a "too few points" warning (rule of thumb of this tool).
FEW_POINTS = 8
#: R² below this gets a "poor fit" warning (rule of thumb of this tool).
POOR_R2 = 0.5
METHODS = ("volume-on-price", "price-on-volume")


# ---------------------------------------------------------------- statistics

def t_quantile(p: float, df: float) -> float:
    """The Student t value with P(T ≤ t) = p (0 < p < 1) for ``df`` degrees of freedom (scipy.stats.t)."""
    from scipy.stats import t

    if not 0.0 < p < 1.0:
        raise ValueError("p must be in (0, 1)")
    return float(t.ppf(p, df))


@dataclass(frozen=True)
class OLS:
    """Simple least squares y = intercept + slope·x with its standard errors (nan when n < 3)."""

    intercept: float
    slope: float
    intercept_se: float
    slope_se: float
    covariance: float  # Cov(intercept, slope)
    r2: float
    n: int
    residual_sd: float


def ols(x: Any, y: Any) -> OLS:
    """Closed-form OLS of y on x (centred sums for accuracy); needs n ≥ 2 and x not all equal."""
    x = np.asarray(x, dtype=float)
    y = np.asarray(y, dtype=float)
    n = len(x)
    if n < 2:
        raise ValueError("need at least two observations")
    xm, ym = float(x.mean()), float(y.mean())
    dx, dy = x - xm, y - ym
    sxx = float(dx @ dx)
    if sxx <= 0.0:
        raise ValueError("the explanatory values are all equal")
    slope = float(dx @ dy) / sxx
    intercept = float(ym - slope * xm)
    resid = dy - slope * dx
    sse = float(resid @ resid)
    sst = float(dy @ dy)
    r2 = 1.0 - sse / sst if sst > 0 else 1.0
    if n > 2:
        s2 = sse / (n - 2)
        slope_se = math.sqrt(s2 / sxx)
        intercept_se = math.sqrt(s2 * (1.0 / n + xm * xm / sxx))
        cov = float(-xm * s2 / sxx)
        sd = math.sqrt(s2)
    else:
        slope_se = intercept_se = cov = sd = math.nan
    return OLS(intercept, slope, intercept_se, slope_se, cov, r2, n, sd)


# ---------------------------------------------------------------- the demand fit

@dataclass
class DemandLine:
    """A fitted price–demand line ``price = intercept − slope·volume`` with its uncertainty.

    intercept in currency/unit, slope in currency/unit² (≥ 0 when the sign is right);
    ``*_ci`` are two-sided intervals at ``level``; None where undefined.
    """

    product: str
    intercept: float | None
    slope: float | None
    intercept_se: float | None
    slope_se: float | None
    covariance: float | None
    intercept_ci: tuple[float | None, float | None]
    slope_ci: tuple[float | None, float | None]
    r2: float
    n: int
    price_min: float
    price_max: float
    volume_min: float
    volume_max: float
    method: str
    level: float
    dq_dp: float  # volume change per unit price rise, from the fit (units per currency/unit)
    elasticity_at_mean: float | None  # (dQ/dP)·(P̄/Q̄) at the mean observed price and volume
    periods: tuple[str, str] | None = None
    source: str = ""
    warnings: list[str] = field(default_factory=list)

    def to_dict(self) -> dict[str, Any]:
        d = asdict(self)
        d["intercept_ci"] = list(self.intercept_ci)
        d["slope_ci"] = list(self.slope_ci)
        d["periods"] = list(self.periods) if self.periods else None
        return {k: (None if isinstance(v, float) and not math.isfinite(v) else v) for k, v in d.items()}

    def demand_fit(self) -> dict[str, Any] | None:
        """The scenario's ``demand_fit`` entry (None when standard errors are undefined)."""
        vals = (self.intercept_se, self.slope_se, self.covariance)
        if any(v is None or not math.isfinite(v) for v in vals):
            return None
        return {"intercept_se": self.intercept_se, "slope_se": self.slope_se, "covariance": self.covariance,
                "n": self.n, "r2": self.r2, "price_min": self.price_min, "price_max": self.price_max,
                "source": self.source}


def _fin(x: float) -> float | None:
    return x if math.isfinite(x) else None


def fit_line(product: str, prices: Any, volumes: Any, method: str = "volume-on-price", level: float = 0.95,
             periods: list[str] | None = None, source: str = "") -> DemandLine:
    """Fit one product's line from observed (price, volume) pairs; ValueError if it cannot be fitted."""
    if method not in METHODS:
        raise ValueError(f"method must be one of {', '.join(METHODS)}")
    p = np.asarray(prices, dtype=float)
    q = np.asarray(volumes, dtype=float)
    n = len(p)
    if n < 2:
        raise ValueError(f"has {n} observation{'s' if n != 1 else ''}; a line needs at least 2")
    if method == "volume-on-price":
        if np.ptp(p) == 0:
            raise ValueError(f"every observed price is {p[0]:g}: the history says nothing about how volume answers price")
        f = ols(p, q)
        alpha, beta = f.intercept, f.slope
        dq_dp = beta
        if beta != 0:
            a, b = -alpha / beta, -1.0 / beta
            va, vb, cab = f.intercept_se ** 2, f.slope_se ** 2, f.covariance
            var_a = va / beta**2 - 2 * alpha * cab / beta**3 + alpha**2 * vb / beta**4
            var_b = vb / beta**4
            cov = -cab / beta**3 + alpha * vb / beta**4
            a_se, b_se = math.sqrt(max(var_a, 0.0)), math.sqrt(var_b)
        else:
            a = b = a_se = b_se = cov = math.nan
        t = t_quantile(0.5 + level / 2, n - 2) if n > 2 else math.nan
        a_ci = (_fin(a - t * a_se), _fin(a + t * a_se))
        lo_beta, hi_beta = beta - t * f.slope_se, beta + t * f.slope_se
        if not (math.isfinite(lo_beta) and math.isfinite(hi_beta)) or beta == 0:
            b_ci = (None, None)  # fewer than 3 points: no interval
        elif hi_beta < 0 or lo_beta > 0:  # b = -1/beta is increasing on either side of 0: ends map to ends
            b_ci = (-1.0 / lo_beta, -1.0 / hi_beta)  # (both negative for a wrong-signed beta > 0)
        elif beta < 0:  # beta's interval reaches past 0: the ray holding the estimate, no upper limit
            b_ci = (-1.0 / lo_beta, None)
        else:  # wrong sign (beta > 0) and reaching past 0: the ray holding the negative estimate
            b_ci = (None, _fin(-1.0 / hi_beta))
    else:
        if np.ptp(q) == 0:
            raise ValueError(f"every observed volume is {q[0]:g}: the history says nothing about how price answers volume")
        f = ols(q, p)
        a, b = f.intercept, -f.slope
        a_se, b_se, cov = f.intercept_se, f.slope_se, -f.covariance
        dq_dp = -1.0 / b if b != 0 else math.nan
        t = t_quantile(0.5 + level / 2, n - 2) if n > 2 else math.nan
        a_ci = (_fin(a - t * a_se), _fin(a + t * a_se))
        b_ci = (_fin(b - t * b_se), _fin(b + t * b_se))
    qm = float(q.mean())
    elast = dq_dp * float(p.mean()) / qm if qm > 0 and math.isfinite(dq_dp) else None
    line = DemandLine(
        product=product, intercept=_fin(a), slope=_fin(b), intercept_se=_fin(a_se), slope_se=_fin(b_se),
        covariance=_fin(cov), intercept_ci=a_ci, slope_ci=b_ci, r2=f.r2, n=n,
        price_min=float(p.min()), price_max=float(p.max()), volume_min=float(q.min()), volume_max=float(q.max()),
        method=method, level=level, dq_dp=dq_dp, elasticity_at_mean=elast,
        periods=(min(periods), max(periods)) if periods else None, source=source)
    line.warnings = fit_warnings(line)
    return line


def fit_warnings(f: DemandLine) -> list[str]:
    """Sentences about a fit the planner should read before trusting it."""
    out = []
    if f.slope is None or f.slope < 0 or f.dq_dp >= 0:
        out.append(f"wrong sign: in this history volume rises as price rises (dQ/dP = {f.dq_dp:+.4g}); "
                   "something else moved the volumes (season, promotion, a new customer), so this line "
                   "cannot be used — state the line by hand or use a history where prices were varied")
    if f.n < 3:
        out.append(f"only {f.n} observations: no standard errors or confidence intervals (need at least 3, "
                   f"{FEW_POINTS} or more advised)")
    elif f.n < FEW_POINTS:
        out.append(f"few points: {f.n} observations ({FEW_POINTS} or more advised); the intervals are wide")
    if f.n >= 3 and f.r2 < POOR_R2:
        out.append(f"poor fit: R² = {f.r2:.2f}, price explains little of the variation in volume")
    lo, hi = f.slope_ci
    if f.n >= 3 and f.slope is not None and f.slope > 0 and (lo is None or hi is None or lo <= 0):
        out.append(f"the slope is not clearly different from zero at {100 * f.level:g}% confidence")
    if f.intercept is not None and f.intercept < 0:
        out.append(f"the fitted price at zero volume is negative ({f.intercept:.4g})")
    return out


# ---------------------------------------------------------------- reading history

def read_history(path: str | Path) -> tuple[dict[str, dict[str, list]], list[Problem]]:
    """Read a sales-history CSV (columns product, price, volume, optional period; any order, any case).

    Returns ``{product: {"price": [...], "volume": [...], "period": [...], "rows": [...]}}`` and
    the problems found (each naming file, row and column).  Blank lines are skipped.
    """
    p = Path(path)
    try:
        text = p.read_text(encoding="utf-8-sig")
    except OSError as e:
        return {}, [Problem(str(p), f"cannot be read: {e.strerror or e}", "check the history file's path")]
    first = text.split("\n", 1)[0].rstrip("\r")
    odd = separator_problem(first)
    if odd:
        message, fix = separator_message(odd)
        return {}, [Problem(p.name, message, fix)]
    rows = list(csv.reader(text.splitlines()))
    if not rows:
        return {}, [Problem(str(p), "is empty", "give a header row: product,price,volume[,period]")]
    header = [h.strip().lower() for h in rows[0]]
    problems = []
    for need in ("product", "price", "volume", "period"):
        where = [i + 1 for i, h in enumerate(header) if h == need]
        if len(where) > 1:
            shown = " and ".join(f"{_letter(i - 1)} ({rows[0][i - 1].strip()!r})" for i in where)
            problems.append(Problem(f"{p.name}, row 1", f"has the heading '{need}' {len(where)} times: columns {shown}",
                                    "keep one of the columns, or rename the others"))
    for need in ("product", "price", "volume"):
        if need not in header:
            from planner.scenario.names import did_you_mean

            hint = did_you_mean(need, header) or "the header row must name product, price, volume (period optional)"
            problems.append(Problem(f"{p.name}, row 1", f"has no column '{need}' (columns: {', '.join(header)})", hint))
    if problems:
        return {}, problems
    col = {h: i for i, h in enumerate(header)}
    out: dict[str, dict[str, list]] = {}
    for r, row in enumerate(rows[1:], start=2):
        if not any(c.strip() for c in row):
            continue
        cell = lambda k: row[col[k]].strip() if col[k] < len(row) else ""  # noqa: E731
        name = cell("product")
        if not name:
            problems.append(Problem(f"{p.name}, row {r}, column product", "is empty", "name the product"))
            continue
        vals = {}
        for k in ("price", "volume"):
            v, message, fix = number_or_problem(cell(k))  # the scenario's number rule (planner.scenario.numbers)
            if v is None and message.startswith(("must be a plain decimal", "is too")):
                problems.append(Problem(f"{p.name}, row {r}, column {k}", f"{message} (got {cell(k)!r})", fix))
            elif v is None or v < 0:
                problems.append(Problem(f"{p.name}, row {r}, column {k}", f"must be a number >= 0 (got {cell(k)!r})"))
            else:
                vals[k] = v
        if len(vals) < 2:
            continue
        d = out.setdefault(name, {"price": [], "volume": [], "period": [], "rows": []})
        d["price"].append(vals["price"])
        d["volume"].append(vals["volume"])
        d["rows"].append(r)
        if "period" in col and cell("period"):
            d["period"].append(cell("period"))
    return out, problems


def _letter(i: int) -> str:
    """Spreadsheet column letter of 0-based column ``i`` (A, B, ..., Z, AA ...)."""
    s = ""
    i += 1
    while i:
        i, rem = divmod(i - 1, 26)
        s = chr(65 + rem) + s
    return s


def fit_history(path: str | Path, method: str = "volume-on-price", level: float = 0.95,
                products: list[str] | None = None) -> tuple[list[DemandLine], list[Problem], list[Problem]]:
    """Fit every product in a history file (or only ``products``).

    Returns (lines, problems with the file itself, products that could not be fitted and why).
    """
    data, problems = read_history(path)
    lines, unfit = [], []
    name_ = Path(path).name
    for name, d in data.items():
        if products and name not in products:
            continue
        try:
            lines.append(fit_line(name, d["price"], d["volume"], method, level, d["period"] or None, source=name_))
        except ValueError as e:
            unfit.append(Problem(f"{name_}, product {name}", str(e)))
    for name in products or []:
        if name not in data and not problems:
            unfit.append(Problem(name_, f"has no rows for product '{name}'"))
    return lines, problems, unfit
