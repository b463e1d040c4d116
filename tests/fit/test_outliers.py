"""Outlier diagnostics against statsmodels influence measures and published Grubbs tables."""

from __future__ import annotations

import math
import tomllib

import numpy as np
import pytest
import statsmodels.api as sm
from scipy import stats
from statsmodels.stats.outliers_influence import OLSInfluence

from calib.fit.curve import fit_curve
from calib.fit.outliers import grubbs, grubbs_critical, influence
from tests.conftest import DATA, nist_xy

PUBLISHED = tomllib.loads((DATA / "diagnostics" / "published.toml").read_text(encoding="utf-8"))


def design(x: np.ndarray, model: str) -> np.ndarray:
    columns = {"linear": [np.ones_like(x), x], "origin": [x], "quadratic": [np.ones_like(x), x, x * x]}
    return np.column_stack(columns[model])


def assert_matches(ours, reference: OLSInfluence) -> None:
    # External studentized residuals, hat diagonal, Cook's distance, to 1e-9 relative.
    np.testing.assert_allclose(ours.studentized, reference.resid_studentized_external, rtol=1e-9)
    np.testing.assert_allclose(ours.standardized, reference.resid_studentized_internal, rtol=1e-9)
    np.testing.assert_allclose(ours.leverage, reference.hat_matrix_diag, rtol=1e-9)
    np.testing.assert_allclose(ours.cooks_distance, reference.cooks_distance[0], rtol=1e-9)


@pytest.mark.parametrize(("name", "model"), [("norris", "linear"), ("pontius", "quadratic"),
                                             ("noint1", "origin"), ("pontius", "linear")])
def test_unweighted_influence_matches_statsmodels_olsinfluence(name, model):
    # statsmodels OLS(...).get_influence() (OLSInfluence) on the NIST StRD data.  statsmodels
    # solves by pseudo-inverse, which loses digits on Pontius's x² (up to 1e13), so it gets x in
    # millions: the same column space, hence the same residuals, hat matrix and influence.
    x, y = map(np.array, nist_xy(name))
    ours = influence(fit_curve(x, y, model=model))
    scale = 1e-6 if name == "pontius" else 1.0
    assert_matches(ours, sm.OLS(y, design(x * scale, model)).fit().get_influence())


@pytest.mark.parametrize("weighting", ["1/x", "1/x2"])
def test_weighted_influence_matches_statsmodels(weighting):
    # statsmodels 0.15 has no get_influence() on WLS results; the weighted fit is the OLS fit of
    # √w·y on √w·X, whose OLSInfluence gives the weighted hat matrix and residual measures.
    # GLM (Gaussian) with var_weights is a second, independent route for leverage and Cook's D.
    x, y = map(np.array, nist_xy("norris"))
    fit = fit_curve(x, y, weighting=weighting)
    ours = influence(fit)
    sw = np.sqrt(fit.weights)
    X = design(x, "linear")
    assert_matches(ours, sm.OLS(y * sw, X * sw[:, None]).fit().get_influence())
    glm = sm.GLM(y, X, var_weights=fit.weights).fit().get_influence()
    np.testing.assert_allclose(ours.leverage, glm.hat_matrix_diag, rtol=1e-9)
    np.testing.assert_allclose(ours.cooks_distance, glm.cooks_distance[0], rtol=1e-9)


def test_bonferroni_critical_value_and_suggested_point():
    # Invented standards, the seventh reading 0.6 high: its studentized residual exceeds
    # t(1 − α/(2N), ν − 1) (scipy), the others do not.
    x = np.arange(1.0, 11.0)
    y = 2.0 * x + np.array([0.03, -0.05, 0.02, 0.04, -0.03, 0.01, 0.6, -0.02, 0.05, -0.04])
    ours = influence(fit_curve(x, y))
    assert ours.bonferroni_critical(0.05) == pytest.approx(stats.t.isf(0.05 / 20, 7), rel=1e-12)
    assert ours.suggested(0.05).tolist() == [6]
    assert ours.cooks_reference == pytest.approx(stats.f.ppf(0.5, 2, 8), rel=1e-12)


def test_a_point_with_leverage_one_has_no_residual_diagnostics():
    # The quadratic through three levels, one level a single standard: the curve must pass
    # through that standard (h = 1), so its residual says nothing.
    x = np.array([1.0, 1.0, 1.0, 2.0, 2.0, 2.0, 5.0])
    y = np.array([1.0, 1.1, 0.9, 2.1, 1.9, 2.0, 4.0])
    ours = influence(fit_curve(x, y, model="quadratic"))
    assert ours.leverage[-1] == pytest.approx(1.0, abs=1e-12)
    assert math.isnan(ours.studentized[-1]) and math.isnan(ours.cooks_distance[-1])
    assert ours.suggested(0.05).size == 0


def test_influence_refuses_what_it_cannot_judge():
    with pytest.raises(ValueError, match=r"^studentized residuals need at least 2 residual "
                                         r"degrees of freedom; the fit has 1$"):
        influence(fit_curve([1, 2, 3], [1.0, 2.1, 2.9]))
    with pytest.raises(ValueError, match=r"^the curve passes through every standard, so there "
                                         r"is no residual scatter to judge outliers against$"):
        influence(fit_curve([1, 2, 3, 4, 5], [3.0, 5.0, 7.0, 9.0, 11.0]))


@pytest.mark.parametrize("n", [3, 5, 10, 15])
def test_grubbs_critical_values_match_the_published_table(n):
    # Harvey, Analytical Chemistry 2.1, appendix table (SPEC §10), two-sided α = 0.05, printed to
    # three decimals; allowed: one unit of the last printed digit (the n = 3 entry 1.155 is the
    # bound (n − 1)/√n = 1.1547 printed to three decimals).
    table = PUBLISHED["grubbs"]
    assert grubbs_critical(n, table["alpha"]) == pytest.approx(table["critical"][str(n)], abs=1e-3)


def test_grubbs_statistic_by_hand():
    # Worked by hand: 10.0, 10.2, 10.1, 9.9, 12.0 have mean 10.44 and s = 0.8792 (n − 1);
    # G = (12.0 − 10.44)/0.8792 = 1.774 > 1.715 (n = 5, table above): an outlier.
    result = grubbs([10.0, 10.2, 10.1, 9.9, 12.0], alpha=0.05)
    assert result.mean == pytest.approx(10.44, abs=1e-12)
    assert result.sd == pytest.approx(np.std([10.0, 10.2, 10.1, 9.9, 12.0], ddof=1), rel=1e-12)
    assert result.statistic == pytest.approx(1.56 / result.sd, rel=1e-12)
    assert round(result.statistic, 3) == 1.774
    assert result.index == 4 and result.outlier
    assert not grubbs([10.0, 10.2, 10.1, 9.9, 10.3], alpha=0.05).outlier


def test_grubbs_on_equal_values_and_bad_arguments():
    equal = grubbs([5.0, 5.0, 5.0, 5.0])
    assert math.isnan(equal.statistic) and not equal.outlier
    with pytest.raises(ValueError, match=r"^Grubbs' test needs a whole number of at least 3 "
                                         r"values; got 2$"):
        grubbs([1.0, 2.0])
    with pytest.raises(ValueError, match=r"^Grubbs' test needs finite values$"):
        grubbs([1.0, 2.0, float("nan")])
    with pytest.raises(ValueError, match=r"^alpha must be a number between 0 and 1; got 0$"):
        grubbs_critical(5, 0)


def test_mean_response_factor_curve_is_the_weighted_origin_line():
    # The mean of yᵢ/xᵢ is the least-squares slope of y = RF·x with weights 1/x²; statsmodels
    # OLS of y/x on x/x (a column of ones) is that fit, and its OLSInfluence the reference.
    x, y = map(np.array, nist_xy("noint1"))
    ours = influence(fit_curve(x, y, model="mean-rf"))
    assert_matches(ours, sm.OLS(y / x, np.ones((x.size, 1))).fit().get_influence())
