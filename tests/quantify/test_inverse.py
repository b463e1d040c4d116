"""Inverse prediction against published worked examples, the CG 4 formula and statsmodels."""

from __future__ import annotations

import json
import math

import numpy as np
import pytest
import statsmodels.api as sm
from scipy import stats

from calib.fit import fit_curve
from calib.quantify.curve import CalibrationCurve
from calib.quantify.inverse import (
    CLOSED_FORM,
    DELTA_METHOD,
    cg4_std_error,
    delta_std_error,
    inverse_predict,
)
from tests.conftest import DATA

EXAMPLES = json.loads((DATA / "quantify" / "worked_examples.json").read_text(encoding="utf-8"))


def curve_of(x, y, **options) -> CalibrationCurve:
    return CalibrationCurve.from_fit(fit_curve(x, y, **options), analyte="A")


# -- published worked examples (from memory) --------------------------------------------------

def test_miller_fluorescence_example():
    # Miller & Miller, section 5.6 (from memory): a = 1.52, b = 1.93, s_y/x = 0.4329;
    # readings 2.9, 13.5, 23.0 give 0.72 ± 0.68, 6.21 ± 0.62, 11.13 ± 0.67 pg/mL (t = 2.57,
    # 5 df), and 13.5 as the mean of 4 readings gives s_x0 = 0.14.  Compared after rounding
    # to the printed digits.
    ex = EXAMPLES["miller_fluorescence"]
    curve = curve_of(ex["x"], ex["y"])
    assert round(curve.coefficients["intercept"], 2) == ex["intercept"]
    assert round(curve.coefficients["slope"], 2) == ex["slope"]
    # The book works the residuals from the rounded a and b; unrounded, σ̂ = 0.43285.
    assert curve.residual_sd == pytest.approx(ex["residual_sd"], abs=1e-4)
    for reading in ex["readings"]:
        p = inverse_predict(curve, reading["response"], m=reading["m"])
        assert p.method == CLOSED_FORM and p.df == 5
        assert round(p.concentration, 2) == reading["x0"]
        assert round(p.std_error, 2) == reading["s_x0"]
        if "half_width_95" in reading:
            # Within one unit of the last printed digit: the book rounds s_x0 and t = 2.57
            # before multiplying.
            assert p.half_width == pytest.approx(reading["half_width_95"], abs=0.01)


def test_quam_a5_cadmium_calibration_uncertainty():
    # EURACHEM/CITAC CG 4 example A5 (from memory): B1 = 0.2410, B0 = 0.0087,
    # S = 0.005486 over 15 standards; two readings at c0 = 0.26 mg/L give u(c0) = 0.018 mg/L.
    ex = EXAMPLES["quam_a5_cadmium"]
    curve = curve_of(ex["x"], ex["y"])
    assert round(curve.coefficients["slope"], 4) == ex["slope"]
    assert round(curve.coefficients["intercept"], 4) == ex["intercept"]
    assert round(curve.residual_sd, 6) == ex["residual_sd"]
    y0 = float(curve.predict(ex["c0"])[0])
    p = inverse_predict(curve, y0, m=ex["m"])
    assert p.concentration == pytest.approx(ex["c0"], rel=1e-12)
    assert round(p.std_error, 3) == ex["u_c0"]


# -- the CG 4 closed form ----------------------------------------------------------------------

def test_cg4_formula_term_by_term():
    # s(x0) = (σ̂/b)·√(1/m + 1/N + (ȳ0 − ȳ)²/(b²·Sxx)) written out by hand.
    sigma, b, m, n, y0, ybar, sxx = 0.012, 0.25, 3, 12, 0.61, 0.40, 42.0
    expected = (sigma / b) * math.sqrt(1 / m + 1 / n + (y0 - ybar) ** 2 / (b * b * sxx))
    got = cg4_std_error(residual_sd=sigma, slope=b, m=m, n=n, response=y0, response_mean=ybar,
                        sxx=sxx)
    assert float(got) == pytest.approx(expected, rel=1e-15)
    # A falling line gives the same positive standard error.
    assert float(cg4_std_error(residual_sd=sigma, slope=-b, m=m, n=n, response=y0,
                               response_mean=ybar, sxx=sxx)) == pytest.approx(expected)


@pytest.mark.parametrize("m", [1, 2, 5])
@pytest.mark.parametrize("response", [2.3, 9.0, 14.1, 24.9])
def test_closed_form_equals_delta_method_on_unweighted_line(m, response):
    ex = EXAMPLES["miller_fluorescence"]
    curve = curve_of(ex["x"], ex["y"])
    closed = inverse_predict(curve, response, m=m, method="closed-form")
    delta = inverse_predict(curve, response, m=m, method="delta")
    assert closed.method == CLOSED_FORM and delta.method == DELTA_METHOD
    assert delta.concentration == closed.concentration
    assert delta.std_error == pytest.approx(closed.std_error, rel=1e-12)
    assert (delta.ci_low, delta.ci_high) == pytest.approx((closed.ci_low, closed.ci_high),
                                                          rel=1e-12)


def test_closed_form_refuses_weighted_curves():
    curve = curve_of([1, 2, 4, 8, 16], [1.1, 2.0, 4.2, 7.7, 16.5], weighting="1/x")
    with pytest.raises(ValueError, match="the closed form covers the unweighted straight line "
                                         "only; this curve is linear, weighting 1/x"):
        inverse_predict(curve, 5.0, method="closed-form")
    assert inverse_predict(curve, 5.0).method == DELTA_METHOD


def test_bad_arguments_name_the_parameter():
    curve = curve_of([1, 2, 3, 4], [1.0, 2.1, 2.9, 4.2])
    with pytest.raises(ValueError, match="m must be a whole number of at least 1; got 0"):
        inverse_predict(curve, 2.0, m=0)
    with pytest.raises(ValueError, match="method must be one of auto, closed-form, delta; "
                                         "got 'fieller'"):
        inverse_predict(curve, 2.0, method="fieller")
    with pytest.raises(ValueError, match="confidence must be a number from 0.5 to below 1; "
                                         "got 1.5"):
        inverse_predict(curve, 2.0, confidence=1.5)


# -- the delta method against statsmodels on the same data ------------------------------------

X = np.array([1, 1, 2, 2, 5, 5, 10, 10, 20, 20, 50, 50], dtype=float)
Y_LINE = np.array([0.52, 0.49, 1.03, 0.98, 2.61, 2.45, 5.02, 5.21, 10.4, 9.8, 25.9, 24.6])
Y_CURVED = 0.05 + 0.52 * X - 0.0021 * X**2 + np.array(
    [0.01, -0.02, 0.015, -0.01, 0.03, -0.04, 0.05, -0.03, 0.08, -0.07, 0.2, -0.15])


def test_weighted_line_delta_method_against_statsmodels_wls():
    # statsmodels WLS (weights 1/x², the same scaling) gives the mean response's SE at x0
    # and the residual scale; Var(reading) = scale/(m·w(x0)).  s(x0) = √(both)/|b|.
    curve = curve_of(X, Y_LINE, weighting="1/x2")
    w = 1 / X**2
    w = w / w.mean()
    model = sm.WLS(Y_LINE, sm.add_constant(X), weights=w).fit()
    y0, m = 7.7, 2
    p = inverse_predict(curve, y0, m=m)
    a, b = model.params
    x0 = (y0 - a) / b
    se_mean = model.get_prediction(np.array([[1.0, x0]])).se_mean[0]
    w0 = (1 / x0**2) / (1 / X**2).mean()
    expected = math.sqrt(se_mean**2 + model.scale / (m * w0)) / abs(b)
    assert p.concentration == pytest.approx(x0, rel=1e-10)
    assert p.std_error == pytest.approx(expected, rel=1e-9)
    assert p.t_critical == pytest.approx(stats.t.ppf(0.975, model.df_resid), rel=1e-12)


def test_quadratic_delta_method_against_statsmodels_ols():
    curve = curve_of(X, Y_CURVED, model="quadratic")
    design = np.column_stack([np.ones_like(X), X, X**2])
    model = sm.OLS(Y_CURVED, design).fit()
    y0, m = 15.0, 3
    p = inverse_predict(curve, y0, m=m)
    a, b, c = model.params
    # The root of a + b·x + c·x² = y0 inside the calibrated range 1–50.
    roots = np.roots([c, b, a - y0]).real
    x0 = float(roots[(roots >= 1) & (roots <= 50)][0])
    se_mean = model.get_prediction(np.array([[1.0, x0, x0 * x0]])).se_mean[0]
    expected = math.sqrt(se_mean**2 + model.scale / m) / abs(b + 2 * c * x0)
    assert p.method == DELTA_METHOD
    assert p.concentration == pytest.approx(x0, rel=1e-10)
    assert p.std_error == pytest.approx(expected, rel=1e-9)


def test_quadratic_root_is_the_one_inside_the_range():
    # y = x² on 1–5: a response of 16 is read back as 4, never as −4.
    curve = curve_of([1, 2, 3, 4, 5], [1.0, 4.0, 9.0, 16.0, 25.0], model="quadratic")
    assert inverse_predict(curve, 16.0).concentration == pytest.approx(4.0, rel=1e-9)


def test_delta_std_error_broadcasts_over_curves():
    # Two curves at once give what each gives alone.
    fits = [fit_curve(X, Y_LINE), fit_curve(X, Y_LINE * 1.1)]
    beta = np.array([list(f.coefficients.values()) for f in fits])
    cov = np.array([f.covariance for f in fits])
    sd = np.array([f.residual_sd for f in fits])
    both = delta_std_error("linear", beta, cov, np.array([7.0, 7.0]), m=2, residual_sd=sd)
    one = [float(delta_std_error("linear", beta[k], cov[k], 7.0, m=2, residual_sd=sd[k]))
           for k in range(2)]
    assert both.tolist() == pytest.approx(one, rel=1e-14)
