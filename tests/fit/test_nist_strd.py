"""The fitter against the certified values of the NIST StRD linear least-squares datasets.

Source of data and certified values: NIST Statistical Reference Datasets, Linear Least Squares
Regression (public-domain data; certified values to 15 significant digits), copied into
``tests/data/nist_strd/`` (see ``SOURCE.md`` there).  Correct digits are counted with the log
relative error LRE = −log10(|computed − certified| / |certified|) as ``certified.toml`` defines
it.  Targets (SPEC §4): at least 12 digits on Norris, Pontius, NoInt1, NoInt2; at least 9 on the
estimates of Wampler1–2.
"""

from __future__ import annotations

import math
import tomllib
from pathlib import Path

import numpy as np
import pytest
from scipy import stats

from calib.fit.curve import CurveFit, fit_curve
from calib.fit.wls import solve_wls

DATA = Path(__file__).resolve().parent.parent / "data" / "nist_strd"
CERTIFIED = tomllib.loads((DATA / "certified.toml").read_text(encoding="utf-8"))

#: Dataset → calibration model that matches the NIST model.
CURVE_DATASETS = {
    "norris": "linear",
    "pontius": "quadratic",
    "noint1": "origin",
    "noint2": "origin",
}
CURVE_DIGITS = 12
WAMPLER_DIGITS = 9


def load(name: str) -> tuple[np.ndarray, np.ndarray]:
    data = np.loadtxt(DATA / f"{name}.csv", delimiter=",", skiprows=1, ndmin=2)
    return data[:, 0], data[:, 1]


def lre(computed: float, certified: float) -> float:
    """Log relative error as defined in certified.toml (absolute when certified is 0)."""
    error = abs(computed - certified)
    if error == 0:
        return math.inf
    if certified == 0:
        return -math.log10(error)
    return -math.log10(error / abs(certified))


def fit_dataset(name: str) -> CurveFit:
    x, y = load(name)
    return fit_curve(x, y, model=CURVE_DATASETS[name])


def f_statistic(fit: CurveFit) -> float:
    """Overall F from the fit: regression mean square over σ̂².

    The regression sum of squares is taken from the fitted values rather than from R²:
    with R² = 0.99999… the difference 1 − R² would throw away five or more digits.
    For a model without intercept the regression sum of squares is uncentred (Σŷ²),
    as NIST uses for NoInt1–2.
    """
    p = len(fit.coefficients)
    w = fit.weights
    if "intercept" in fit.coefficients:
        ybar = np.sum(w * fit.y) / np.sum(w)
        ss_reg = float(np.sum(w * (fit.fitted - ybar) ** 2))
        df_reg = p - 1
    else:
        ss_reg = float(np.sum(w * fit.fitted**2))
        df_reg = p
    return (ss_reg / df_reg) / fit.residual_sd**2


@pytest.fixture(scope="module", params=sorted(CURVE_DATASETS))
def dataset(request: pytest.FixtureRequest) -> tuple[str, CurveFit, dict]:
    name = request.param
    return name, fit_dataset(name), CERTIFIED[name]


def test_data_copy_matches_certified_sizes() -> None:
    # Guards the copy itself: every file holds the number of observations NIST states.
    for name, cert in CERTIFIED.items():
        x, y = load(name)
        assert x.size == y.size == cert["n"], name


def test_residual_df(dataset: tuple[str, CurveFit, dict]) -> None:
    name, fit, cert = dataset
    assert fit.residual_df == cert["residual_df"], name


def test_estimates(dataset: tuple[str, CurveFit, dict]) -> None:
    name, fit, cert = dataset
    for coef, certified in zip(fit.names, cert["estimates"], strict=True):
        digits = lre(fit.coefficients[coef], certified)
        assert digits >= CURVE_DIGITS, f"{name} {coef}: LRE {digits:.1f}"


def test_standard_errors(dataset: tuple[str, CurveFit, dict]) -> None:
    name, fit, cert = dataset
    for coef, certified in zip(fit.names, cert["std_errors"], strict=True):
        digits = lre(fit.std_error(coef), certified)
        assert digits >= CURVE_DIGITS, f"{name} SE({coef}): LRE {digits:.1f}"


def test_residual_sd(dataset: tuple[str, CurveFit, dict]) -> None:
    name, fit, cert = dataset
    digits = lre(fit.residual_sd, cert["residual_sd"])
    assert digits >= CURVE_DIGITS, f"{name} residual SD: LRE {digits:.1f}"


def test_r_squared(dataset: tuple[str, CurveFit, dict]) -> None:
    # NoInt1–2: the certified R² is the uncentred one, which the origin model reports.
    name, fit, cert = dataset
    digits = lre(fit.r_squared, cert["r_squared"])
    assert digits >= CURVE_DIGITS, f"{name} R²: LRE {digits:.1f}"


@pytest.mark.parametrize(
    "name", [n for n in sorted(CURVE_DATASETS) if "f_statistic" in CERTIFIED[n]]
)
def test_f_statistic(name: str) -> None:
    # Our copy certifies F for Norris, Pontius and NoInt2 (not NoInt1).
    fit = fit_dataset(name)
    digits = lre(f_statistic(fit), CERTIFIED[name]["f_statistic"])
    assert digits >= CURVE_DIGITS, f"{name} F: LRE {digits:.1f}"


def test_norris_sums_of_squares() -> None:
    # Norris is the one dataset in our copy with certified residual and regression SS.
    fit = fit_dataset("norris")
    cert = CERTIFIED["norris"]
    ss_res = fit.residual_sd**2 * fit.residual_df
    ss_reg = float(np.sum((fit.fitted - fit.y.mean()) ** 2))
    assert lre(ss_res, cert["residual_ss"]) >= CURVE_DIGITS
    assert lre(ss_reg, cert["regression_ss"]) >= CURVE_DIGITS
    # The residuals the fit reports must add up to the same residual SS.
    assert lre(float(np.sum(fit.residuals**2)), cert["residual_ss"]) >= CURVE_DIGITS


def test_norris_intercept_not_significant() -> None:
    # SPEC §10: Norris intercept −0.262323073774029 (SE 0.232818234301152),
    # t ≈ −1.127 on 34 df, so the intercept does not differ significantly from zero.
    fit = fit_dataset("norris")
    cert = CERTIFIED["norris"]
    t = fit.t_value("intercept")
    assert fit.residual_df == 34
    assert round(t, 3) == -1.127
    assert lre(t, cert["estimates"][0] / cert["std_errors"][0]) >= CURVE_DIGITS
    p = fit.p_value("intercept")
    assert p > 0.05
    # The p-value is the two-sided Student's t tail on 34 df (scipy on the certified t).
    certified_t = cert["estimates"][0] / cert["std_errors"][0]
    assert p == pytest.approx(2 * stats.t.sf(abs(certified_t), 34), rel=1e-10)
    low, high = fit.confidence_interval("intercept", 0.95)
    assert low < 0 < high


def test_norris_slope_against_one() -> None:
    # From the certified values: slope 1.00211681802045, SE 0.000429796848199937, so
    # t against a reference slope of 1 is about 4.93 and 1 lies outside the 95 % interval.
    fit = fit_dataset("norris")
    cert = CERTIFIED["norris"]
    expected_t = (cert["estimates"][1] - 1.0) / cert["std_errors"][1]
    assert lre(fit.t_value("slope", reference=1.0), expected_t) >= 10
    low, high = fit.confidence_interval("slope")
    assert not (low <= 1.0 <= high)
    assert fit.p_value("slope", reference=1.0) < 0.001


def test_t_critical_from_nist_fit() -> None:
    # NoInt1 has 11 points and one parameter: ν = 10.  Student's t two-sided 95 %,
    # ν = 10 → 2.228 (any statistics handbook table, SPEC §10).
    fit = fit_dataset("noint1")
    assert fit.residual_df == 10
    assert round(fit.t_critical(0.95), 3) == 2.228


@pytest.mark.parametrize(("n_points", "nu", "table"), [(7, 5, 2.571), (12, 10, 2.228)])
def test_t_critical_handbook(n_points: int, nu: int, table: float) -> None:
    # Student's t two-sided 95 %: ν = 5 → 2.571, ν = 10 → 2.228 (handbook tables, SPEC §10).
    x = np.arange(1.0, n_points + 1)
    y = 2.0 * x + 0.1 * np.cos(x)  # any non-degenerate data: the quantile depends on ν only
    fit = fit_curve(x, y)
    assert fit.residual_df == nu
    assert round(fit.t_critical(0.95), 3) == table
    assert round(fit.t_critical(), 3) == table  # the fit's default confidence is 0.95


# Wampler1–2: exact fifth-degree polynomials, so the certified SEs, residual SD are 0 and
# R² is 1; fitted through the general solver with the degree-5 (Vandermonde) design.


def solve_wampler(name: str) -> tuple[np.ndarray, np.ndarray, object]:
    x, y = load(name)
    X = np.vander(x, 6, increasing=True)
    return x, y, solve_wls(X, y)


@pytest.mark.parametrize("name", ["wampler1", "wampler2"])
def test_wampler_estimates(name: str) -> None:
    _, _, sol = solve_wampler(name)
    assert sol.rank == 6
    for j, (computed, certified) in enumerate(
        zip(sol.beta, CERTIFIED[name]["estimates"], strict=True)
    ):
        digits = lre(float(computed), certified)
        assert digits >= WAMPLER_DIGITS, f"{name} B{j}: LRE {digits:.1f}"


@pytest.mark.parametrize("name", ["wampler1", "wampler2"])
def test_wampler_zero_spread(name: str) -> None:
    # Certified values are exactly 0 (SE, residual SD) and 1 (R²).  An absolute error of
    # 1e-9 is scaled to the size of what it is compared with: the residual SD to the
    # spread of y, each SE to its own certified coefficient, R² is already unit-free.
    x, y, sol = solve_wampler(name)
    cert = CERTIFIED[name]
    nu = x.size - 6
    assert nu == cert["residual_df"]
    sigma = math.sqrt(sol.weighted_ss / nu)
    assert sigma <= 1e-9 * float(np.std(y))
    se = sigma * np.sqrt(np.diag(sol.unscaled_covariance))
    for j, (s, b) in enumerate(zip(se, cert["estimates"], strict=True)):
        assert s <= 1e-9 * abs(b), f"{name} SE(B{j}) = {s:.3g}"
    r_squared = 1.0 - sol.weighted_ss / float(np.sum((y - y.mean()) ** 2))
    assert abs(r_squared - cert["r_squared"]) <= 1e-9
