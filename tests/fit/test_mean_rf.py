"""The mean-rf model (average response factor) and the rf-rsd rule.

US EPA SW-846 Method 8000D §11.5.1 (from memory): RFᵢ = yᵢ/xᵢ for each calibration standard,
the calibration uses the mean RF, and is allowed when the %RSD of the factors is ≤ 20 %.
Checked by hand, against numpy/scipy on the factors themselves, and against statsmodels' WLS
of y = b·x with weights 1/x² (whose slope is the mean factor).
"""

from __future__ import annotations

import math
import re

import numpy as np
import pytest
import statsmodels.api as sm
from scipy import stats

from calib.checks import Verdict, evaluate_run, parse_profile
from calib.fit.curve import fit_curve
from calib.fit.response_factor import response_factors
from calib.options import Model, Weighting
from tests.conftest import make_run

# Five standards with factors 2.00, 2.10, 1.95, 2.05, 1.90 (invented, worked by hand):
# mean 2.00, deviations 0, .10, −.05, .05, −.10 → Σd² = 0.025, s = √(0.025/4) = 0.0790569,
# %RSD 3.952847 %, SE = s/√5 = 0.0353553, t(0.975; 4) = 2.776 (handbook table).
X = np.array([1.0, 2.0, 4.0, 8.0, 16.0])
Y = X * np.array([2.00, 2.10, 1.95, 2.05, 1.90])


def test_mean_rf_by_hand() -> None:
    fit = fit_curve(X, Y, model="mean-rf")
    assert fit.names == ("slope",)
    assert fit.coefficients["slope"] == pytest.approx(2.0, rel=1e-14)
    assert fit.std_error("slope") == pytest.approx(math.sqrt(0.025 / 4) / math.sqrt(5), rel=1e-12)
    assert fit.residual_df == 4
    assert round(fit.t_critical(), 3) == 2.776
    rf = fit.response_factors
    assert rf.n == 5 and rf.df == 4
    assert rf.sd == pytest.approx(math.sqrt(0.025 / 4), rel=1e-12)
    assert round(rf.rsd_pct, 6) == 3.952847
    low, high = fit.confidence_interval("slope")
    assert (low + high) / 2 == pytest.approx(2.0, rel=1e-14)
    assert rf.confidence_interval(0.95) == pytest.approx((low, high), rel=1e-12)


def test_mean_rf_against_scipy_on_the_factors() -> None:
    rng = np.random.default_rng(5)
    x = np.repeat([0.5, 1, 2, 5, 10, 20], 2)
    y = 3.1 * x * (1 + rng.normal(0, 0.06, x.size))
    fit = fit_curve(x, y, model="mean-rf")
    factors = y / x
    ref = stats.ttest_1samp(factors, 0.0)
    assert fit.coefficients["slope"] == pytest.approx(factors.mean(), rel=1e-13)
    assert fit.std_error("slope") == pytest.approx(stats.sem(factors), rel=1e-12)
    assert fit.t_value("slope") == pytest.approx(ref.statistic, rel=1e-12)
    assert fit.p_value("slope") == pytest.approx(ref.pvalue, rel=1e-9)
    ci = ref.confidence_interval(0.95)
    assert fit.confidence_interval("slope") == pytest.approx((ci.low, ci.high), rel=1e-12)
    assert fit.response_factors.rsd_pct == pytest.approx(
        100 * np.std(factors, ddof=1) / factors.mean(), rel=1e-12)


def test_mean_rf_against_statsmodels_wls_with_inverse_square_weights() -> None:
    ref = sm.WLS(Y, X[:, None], weights=1 / X**2).fit(method="qr")
    fit = fit_curve(X, Y, model="mean-rf")
    assert fit.coefficients["slope"] == pytest.approx(ref.params[0], rel=1e-12)
    assert fit.std_error("slope") == pytest.approx(ref.bse[0], rel=1e-12)
    assert fit.p_value("slope", 2.1) == pytest.approx(
        float(ref.t_test((np.ones((1, 1)), np.array([2.1]))).pvalue), rel=1e-9)
    np.testing.assert_allclose(fit.fitted, ref.fittedvalues, rtol=1e-12)
    np.testing.assert_allclose(fit.residuals, ref.resid, rtol=1e-10, atol=1e-14)
    # The same curve as the origin line weighted 1/x², with the weighting made explicit.
    same = fit_curve(X, Y, model="origin", weighting="1/x2")
    assert fit.coefficients == pytest.approx(same.coefficients, rel=1e-14)
    assert fit.weight_basis is Weighting.INV_X2 and fit.weighting is Weighting.NONE


def test_back_calculation_predict_and_residuals() -> None:
    fit = fit_curve(X, Y, model="mean-rf")
    np.testing.assert_allclose(fit.back_calculate(Y), Y / 2.0, rtol=1e-13)
    np.testing.assert_allclose(fit.predict(X), 2.0 * X, rtol=1e-13)
    np.testing.assert_allclose(fit.residuals, Y - 2.0 * X, atol=1e-12)
    # A factor 5 % above the mean reads back 5 % high.
    assert fit.back_calculate(2.1 * 3.0)[0] == pytest.approx(3.15, rel=1e-13)


@pytest.mark.parametrize(
    ("kwargs", "message"),
    [
        ({"weighting": "1/x"}, ("model mean-rf is fitted with weighting 1/x2 (each response "
                               "factor yᵢ/xᵢ counts alike) and takes no other; got weighting 1/x: "
                               "leave the weighting out, or choose another model")),
        ({"x": [0, 1, 2, 4]}, ("model mean-rf needs concentrations above 0 (each response is "
                              "divided by its concentration)")),
    ],
)
def test_mean_rf_refuses(kwargs: dict, message: str) -> None:
    args = {"x": [1, 2, 3, 4], "y": [2.0, 4.1, 6.2, 7.9], **kwargs}
    x, y = args.pop("x"), args.pop("y")
    with pytest.raises(ValueError, match=f"^{re.escape(message)}$"):
        fit_curve(x, y, model="mean-rf", **args)


def test_response_factors_skip_zero_standards() -> None:
    rf = response_factors([0, 0, 1, 2], [0.01, 0.02, 2.0, 4.4])
    assert rf.n == 2 and rf.factors.tolist() == [2.0, 2.2]
    empty = response_factors([0, 0], [0.1, 0.2])
    assert empty.n == 0 and math.isnan(empty.mean) and math.isnan(empty.rsd_pct)


def test_evaluate_leaves_zero_standard_out_of_mean_rf_with_reason() -> None:
    xs = [0, 1, 2, 4, 8, 16]
    ys = [0.03, 2.0, 4.2, 7.8, 16.4, 31.0]
    curve = evaluate_run(make_run(xs, ys), model="mean-rf").curves[0]
    zero = curve.standards[0]
    assert not zero.used
    assert zero.exclusion_reason == (
        "model mean-rf divides the response by the concentration, which is 0 here")
    assert curve.fit.model is Model.MEAN_RF and curve.fit.n_points == 5


PROFILE = """\
name = "epa-like"
version = "1"
[defaults]
model = "mean-rf"
[[rules]]
id = "rf-rsd"
severity = "reject"
max_rsd_pct = 20          # US EPA SW-846 8000D: %RSD of the RFs at most 20 % (from memory)
"""


def rf_check(xs, ys, **options):
    curve = evaluate_run(make_run(xs, ys), profile=parse_profile(PROFILE), **options).curves[0]
    (check,) = curve.checks
    return check


def test_rf_rsd_passes_and_fails_at_20_percent() -> None:
    check = rf_check(X, Y)
    assert check.verdict is Verdict.PASS
    assert check.value == pytest.approx(3.952847, abs=1e-6) and check.limit == 20
    assert "Response factors of 5 standards: mean 2, SD 0.07906, %RSD 3.95 %" in check.detail
    assert "the mean response factor may be used" in check.detail
    # Factors 1, 2, 3, 4, 5 (by hand): mean 3, s = 1.5811, %RSD 52.7 %: too variable.
    check = rf_check(X, X * np.array([1.0, 2.0, 3.0, 4.0, 5.0]))
    assert check.verdict is Verdict.FAIL
    assert check.value == pytest.approx(100 * math.sqrt(2.5) / 3, rel=1e-12)
    assert "vary too much for the mean response factor" in check.detail


def test_rf_rsd_is_for_information_under_another_model() -> None:
    check = rf_check(X, Y, model="linear")
    assert check.verdict is Verdict.NOT_EVALUATED
    assert check.detail.startswith("Applies to the mean-rf model; this curve is linear.")
    assert "%RSD 3.95 % (at most 20 % allowed): the mean response factor would be allowed" in (
        check.detail)
