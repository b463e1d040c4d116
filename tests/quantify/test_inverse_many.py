"""Many samples read back at once: the vectorised pass against statsmodels and the CG 4 formula.

:func:`inverse_predict_many` takes Sxx, ȳ, the t quantile and the covariance
once per curve; each sample's figures must still be the textbook ones.
"""

from __future__ import annotations

import math

import numpy as np
import pytest
import statsmodels.api as sm
from scipy import stats

from calib.fit import fit_curve
from calib.fit.calcurve import CalibrationCurve
from calib.fit.inverse import CLOSED_FORM, DELTA_METHOD, inverse_predict, inverse_predict_many

X = np.array([1, 1, 2, 2, 5, 5, 10, 10, 20, 20, 50, 50], dtype=float)
Y_LINE = np.array([0.52, 0.49, 1.03, 0.98, 2.61, 2.45, 5.02, 5.21, 10.4, 9.8, 25.9, 24.6])
Y_CURVED = 0.05 + 0.52 * X - 0.0021 * X**2 + np.array(
    [0.01, -0.02, 0.015, -0.01, 0.03, -0.04, 0.05, -0.03, 0.08, -0.07, 0.2, -0.15])
RESPONSES = np.array([0.6, 3.3, 7.7, 12.0, 21.5, 24.0])
M = np.array([1, 2, 3, 1, 2, 4])
#: Inside the quadratic's range (it reaches about 20.8 at the top standard, 50).
RESPONSES_Q = np.array([0.6, 3.3, 7.7, 12.0, 16.0, 20.0])


def curve_of(y, **options) -> CalibrationCurve:
    return CalibrationCurve.from_fit(fit_curve(X, y, **options), analyte="A")


def test_unweighted_line_against_cg4_with_statsmodels_figures():
    # EURACHEM/CITAC CG 4, appendix E3 (from memory): s(x0) = (s/b)·√(1/m + 1/N +
    # (y0 − ȳ)²/(b²·Sxx)), with a, b and s taken from statsmodels OLS on the same data.
    many = inverse_predict_many(curve_of(Y_LINE), RESPONSES, M)
    ols = sm.OLS(Y_LINE, sm.add_constant(X)).fit()
    a, b = ols.params
    s = math.sqrt(ols.scale)
    sxx = float(((X - X.mean()) ** 2).sum())
    x0 = (RESPONSES - a) / b
    se = s / abs(b) * np.sqrt(1 / M + 1 / X.size + (RESPONSES - Y_LINE.mean()) ** 2
                              / (b * b * sxx))
    assert many.method == CLOSED_FORM
    np.testing.assert_allclose(many.concentration, x0, rtol=1e-12)
    np.testing.assert_allclose(many.std_error, se, rtol=1e-11)
    assert many.t_critical == pytest.approx(stats.t.ppf(0.975, ols.df_resid), rel=1e-12)
    assert many.df == ols.df_resid


def test_weighted_quadratic_against_statsmodels_wls():
    # Delta method with the full covariance: Var(x0) = (se_mean(x0)² + scale/(m·w(x0)))/ŷ'(x0)²,
    # se_mean and scale from statsmodels WLS (weights 1/x, scaled to a mean of 1).
    many = inverse_predict_many(curve_of(Y_CURVED, model="quadratic", weighting="1/x"),
                                RESPONSES_Q, M)
    w = (1 / X) / (1 / X).mean()
    design = np.column_stack([np.ones_like(X), X, X**2])
    wls = sm.WLS(Y_CURVED, design, weights=w).fit()
    a, b, c = wls.params
    assert many.method == DELTA_METHOD
    for y0, m, x_got, se_got in zip(RESPONSES_Q, M, many.concentration, many.std_error,
                                    strict=True):
        roots = np.roots([c, b, a - y0]).real
        x0 = float(roots[(roots >= 1) & (roots <= 50)][0])
        se_mean = wls.get_prediction(np.array([[1.0, x0, x0 * x0]])).se_mean[0]
        w0 = (1 / x0) / (1 / X).mean()
        expected = math.sqrt(se_mean**2 + wls.scale / (m * w0)) / abs(b + 2 * c * x0)
        assert x_got == pytest.approx(x0, rel=1e-9)
        assert se_got == pytest.approx(expected, rel=1e-8)


@pytest.mark.parametrize("options", [{}, {"weighting": "1/x2"}, {"model": "quadratic"}])
def test_each_sample_as_when_read_alone(options):
    # One engine: inverse_predict is the vectorised pass with one sample, so the figures
    # agree to the last bit with a sample read in a batch of six.
    y = Y_CURVED if options.get("model") else Y_LINE
    curve = curve_of(y, **options)
    many = inverse_predict_many(curve, RESPONSES, M, confidence=0.99)
    for i, (y0, m) in enumerate(zip(RESPONSES, M, strict=True)):
        alone = inverse_predict(curve, float(y0), m=int(m), confidence=0.99)
        assert many.at(i) == alone
    assert many.predictions() == [many.at(i) for i in range(len(many))]


def test_unreachable_response_gives_nan_not_an_error():
    # y = x² on 1–5 never reaches −3: no concentration and no standard error.
    curve = CalibrationCurve.from_fit(fit_curve([1, 2, 3, 4, 5], [1.0, 4.0, 9.0, 16.0, 25.0],
                                                model="quadratic", weighting="1/x"),
                                      analyte="A")
    many = inverse_predict_many(curve, np.array([-3.0, 16.0]), np.array([1, 1]))
    assert math.isnan(many.concentration[0]) and math.isnan(many.std_error[0])
    assert many.concentration[1] == pytest.approx(4.0, rel=1e-9)


def test_refusals_name_the_problem():
    curve = curve_of(Y_LINE)
    with pytest.raises(ValueError, match=r"m has 2 entries for 3 responses"):
        inverse_predict_many(curve, np.array([1.0, 2.0, 3.0]), np.array([1, 2]))
    with pytest.raises(ValueError, match=r"m must be whole numbers of at least 1; got \[0\]"):
        inverse_predict_many(curve, np.array([1.0, 2.0]), np.array([1, 0]))
    with pytest.raises(ValueError, match=r"m must be whole numbers of at least 1; got \[1.5\]"):
        inverse_predict_many(curve, np.array([1.0, 2.0]), np.array([1.5, 2.0]))
    with pytest.raises(ValueError, match="method must be one of auto, closed-form, delta; "
                                         "got 'fieller'"):
        inverse_predict_many(curve, RESPONSES, M, method="fieller")
    with pytest.raises(ValueError, match="the closed form covers the unweighted straight line "
                                         "only; this curve is linear, weighting 1/x2"):
        inverse_predict_many(curve_of(Y_LINE, weighting="1/x2"), RESPONSES, M,
                             method="closed-form")


def test_no_samples_is_an_empty_result():
    many = inverse_predict_many(curve_of(Y_LINE), np.array([]), np.array([], dtype=int))
    assert len(many) == 0 and many.predictions() == []
