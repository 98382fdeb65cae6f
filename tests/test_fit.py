"""The least-squares demand fit, checked against scipy, numpy and a published worked regression."""

from __future__ import annotations

import math

import numpy as np
import pytest

from planner.scenario.fit import fit_history, fit_line, ols, read_history, t_quantile

scipy_stats = pytest.importorskip("scipy.stats", reason="scipy (test extra) is the reference: pip install -e '.[test]'")

# Anscombe, F. J. (1973), "Graphs in statistical analysis", The American Statistician 27(1), 17–21:
# four data sets with the same regression summary.  Data and the published summary (n = 11,
# regression line y = 3 + 0.5 x, residual sum of squares 13.75 on 9 d.f., estimated standard
# error of the slope 0.118, R² 0.667) quoted from memory, at the paper's rounding.
ANSCOMBE_X = [10, 8, 13, 9, 11, 14, 6, 4, 12, 7, 5]
ANSCOMBE = {
    "I": (ANSCOMBE_X, [8.04, 6.95, 7.58, 8.81, 8.33, 9.96, 7.24, 4.26, 10.84, 4.82, 5.68]),
    "II": (ANSCOMBE_X, [9.14, 8.14, 8.74, 8.77, 9.26, 8.10, 6.13, 3.10, 9.13, 7.26, 4.74]),
    "III": (ANSCOMBE_X, [7.46, 6.77, 12.74, 7.11, 7.81, 8.84, 6.08, 5.39, 8.15, 6.42, 5.73]),
    "IV": ([8, 8, 8, 8, 8, 8, 8, 19, 8, 8, 8], [6.58, 5.76, 7.71, 8.84, 8.47, 7.04, 5.25, 12.50, 5.56, 7.91, 6.89]),
}


@pytest.mark.parametrize("name", list(ANSCOMBE))
def test_anscombe_published_summary(name):
    x, y = ANSCOMBE[name]
    f = ols(x, y)
    assert f.n == 11
    assert f.intercept == pytest.approx(3.0, abs=0.005)
    assert f.slope == pytest.approx(0.5, abs=0.0005)
    # the paper gives one residual sum of squares for all four (13.75); the sets differ from it by < 0.03
    assert f.residual_sd**2 * 9 == pytest.approx(13.75, abs=0.03)
    assert f.slope_se == pytest.approx(0.118, abs=0.0005)
    assert f.r2 == pytest.approx(0.667, abs=0.001)  # 0.6662 to 0.6667 across the four sets


@pytest.mark.parametrize("p,df,table", [(0.975, 1, 12.706), (0.975, 5, 2.571), (0.975, 30, 2.042),
                                        (0.95, 9, 1.833), (0.995, 3, 5.841), (0.025, 10, -2.228)])
def test_t_quantile_matches_the_printed_table(p, df, table):
    """Critical values of Student's t as printed in the NIST/SEMATECH e-Handbook of Statistical Methods,
    §1.3.6.7.2 (three decimals; values from memory of that table)."""
    assert t_quantile(p, df) == pytest.approx(table, abs=6e-4)


def seeded(n=25, seed=42, a=500.0, b=0.4, noise=0.06):
    """Prices set by the firm; volumes answer the line price = a − b·volume with multiplicative noise."""
    rng = np.random.default_rng(seed)
    price = rng.uniform(250, 400, n)
    volume = (a - price) / b * rng.normal(1, noise, n)
    return price, volume


@pytest.mark.parametrize("seed", [1, 2, 3])
def test_ols_matches_linregress_and_polyfit(seed):
    price, volume = seeded(seed=seed)
    f = ols(price, volume)
    ref = scipy_stats.linregress(price, volume)  # scipy reference
    assert f.slope == pytest.approx(ref.slope, rel=1e-10)
    assert f.intercept == pytest.approx(ref.intercept, rel=1e-10)
    assert f.slope_se == pytest.approx(ref.stderr, rel=1e-10)
    assert f.intercept_se == pytest.approx(ref.intercept_stderr, rel=1e-10)
    assert f.r2 == pytest.approx(ref.rvalue**2, rel=1e-10)
    _, cov = np.polyfit(price, volume, 1, cov=True)  # numpy reference for the covariance
    assert f.covariance == pytest.approx(cov[0, 1], rel=1e-8)


def test_volume_on_price_line_and_delta_method():
    price, volume = seeded(seed=7)
    line = fit_line("p", price, volume)  # default: volume on price
    ref = scipy_stats.linregress(price, volume)
    alpha, beta = ref.intercept, ref.slope
    assert line.dq_dp == pytest.approx(beta, rel=1e-12)
    assert line.slope == pytest.approx(-1 / beta, rel=1e-12)
    assert line.intercept == pytest.approx(-alpha / beta, rel=1e-12)
    # delta method: J Σ Jᵀ with Σ from numpy.polyfit and J by central differences of (a, b)(α, β)
    coef, cov = np.polyfit(price, volume, 1, cov=True)  # [β, α]
    sigma = np.array([[cov[1, 1], cov[0, 1]], [cov[0, 1], cov[0, 0]]])  # (α, β) order

    def ab(al, be):
        return np.array([-al / be, -1 / be])

    h = 1e-6
    J = np.column_stack([(ab(alpha + h * abs(alpha), beta) - ab(alpha - h * abs(alpha), beta)) / (2 * h * abs(alpha)),
                         (ab(alpha, beta + h * abs(beta)) - ab(alpha, beta - h * abs(beta))) / (2 * h * abs(beta))])
    V = J @ sigma @ J.T
    assert line.intercept_se == pytest.approx(math.sqrt(V[0, 0]), rel=1e-6)
    assert line.slope_se == pytest.approx(math.sqrt(V[1, 1]), rel=1e-6)
    assert line.covariance == pytest.approx(V[0, 1], rel=1e-6)
    # the slope's interval inverts β's t-interval exactly (b = −1/β is monotone for β < 0)
    t = scipy_stats.t.ppf(0.975, len(price) - 2)
    assert line.slope_ci[0] == pytest.approx(-1 / (beta - t * ref.stderr), rel=1e-10)
    assert line.slope_ci[1] == pytest.approx(-1 / (beta + t * ref.stderr), rel=1e-10)
    assert line.price_min == pytest.approx(price.min()) and line.price_max == pytest.approx(price.max())
    assert line.warnings == []


def test_price_on_volume_is_plain_ols_with_t_intervals():
    price, volume = seeded(seed=9)
    line = fit_line("p", price, volume, method="price-on-volume", level=0.9)
    ref = scipy_stats.linregress(volume, price)
    assert line.intercept == pytest.approx(ref.intercept, rel=1e-10)
    assert line.slope == pytest.approx(-ref.slope, rel=1e-10)
    assert line.slope_se == pytest.approx(ref.stderr, rel=1e-10)
    t = scipy_stats.t.ppf(0.95, len(price) - 2)
    assert line.intercept_ci[0] == pytest.approx(ref.intercept - t * ref.intercept_stderr, rel=1e-10)
    assert line.slope_ci[1] == pytest.approx(-ref.slope + t * ref.stderr, rel=1e-10)
    # R² is the same whichever way the regression runs (it is the squared correlation)
    assert line.r2 == pytest.approx(fit_line("p", price, volume).r2, rel=1e-12)


def test_true_line_inside_its_intervals_on_seeded_data():
    price, volume = seeded(n=60, seed=11, noise=0.03)
    line = fit_line("p", price, volume)
    assert line.intercept_ci[0] < 500 < line.intercept_ci[1]
    assert line.slope_ci[0] < 0.4 < line.slope_ci[1]


def test_warnings_wrong_sign_poor_fit_few_points():
    rng = np.random.default_rng(0)
    p = np.linspace(10, 20, 12)
    rising = fit_line("p", p, 100 + 5 * p + rng.normal(0, 1, 12))
    assert rising.warnings[0].startswith("wrong sign: in this history volume rises as price rises")
    noisy = fit_line("p", p, 300 - 2 * p + rng.normal(0, 40, 12))
    assert any(w.startswith("poor fit: R² = ") for w in noisy.warnings)
    few = fit_line("p", [10, 12, 14, 16, 18], [90, 80, 71, 59, 50])
    assert few.warnings == ["few points: 5 observations (8 or more advised); the intervals are wide"]
    two = fit_line("p", [10, 12], [90, 80])
    assert two.slope == pytest.approx(0.2) and two.intercept == pytest.approx(28.0)  # 90 = (28 − 10)/0.2
    assert two.warnings[0].startswith("only 2 observations: no standard errors")
    assert two.demand_fit() is None and two.slope_ci == (None, None)
    with pytest.raises(ValueError, match="every observed price is 10"):
        fit_line("p", [10, 10, 10], [1, 2, 3])


def test_history_file_problems_name_row_and_column(tmp_path):
    path = tmp_path / "h.csv"
    path.write_text("Product,Price,Volume\nA,10,100\nA,ten,90\n\nA,12,-3\nB,5,5\n")
    data, problems = read_history(path)
    assert [str(p) for p in problems] == ["h.csv, row 3, column price: must be a number >= 0 (got 'ten')",
                                          "h.csv, row 5, column volume: must be a number >= 0 (got '-3')"]
    assert data["A"]["price"] == [10.0] and data["A"]["rows"] == [2]
    path.write_text("product,cost,volume\n")
    _, problems = read_history(path)
    assert [str(p) for p in problems] == ["h.csv, row 1: has no column 'price' (columns: product, cost, volume) "
                                          "(the header row must name product, price, volume (period optional))"]


def test_fit_history_per_product_and_periods(tmp_path):
    price, volume = seeded(n=10, seed=3)
    lines = ["product,period,price,volume"] + [f"X,2025-{k + 1:02d},{float(p)!r},{float(v)!r}" for k, (p, v) in enumerate(zip(price, volume))]
    lines += ["Y,2025-01,10,5", "Y,2025-02,12,4", "Y,2025-03,14,2"]
    (tmp_path / "h.csv").write_text("\n".join(lines) + "\n")
    fits, problems, unfit = fit_history(tmp_path / "h.csv")
    assert problems == [] and unfit == []
    x = next(f for f in fits if f.product == "X")
    assert x.n == 10 and x.periods == ("2025-01", "2025-10")
    assert x.slope == pytest.approx(-1 / scipy_stats.linregress(price, volume).slope, rel=1e-12)
    _, _, unfit = fit_history(tmp_path / "h.csv", products=["Z"])
    assert [str(p) for p in unfit] == ["h.csv: has no rows for product 'Z'"]
