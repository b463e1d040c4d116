"""Two-curve comparison and the slope against a reference value.

Outside references on the same invented data: statsmodels OLS/WLS by formula with a group
factor and the x:group interaction, nested-model ``anova_lm`` (equal slopes: parallel lines
against separate lines; equal intercepts: common line against parallel lines), the t-test of
the interaction coefficient (t² = F on 1 df), scipy's pooled two-sample t-test of the response
factors for mean-rf, and statsmodels' ``t_test`` for a slope against a reference.
"""

from __future__ import annotations

import re

import numpy as np
import pandas as pd
import pytest
import statsmodels.api as sm
import statsmodels.formula.api as smf
from scipy import stats
from statsmodels.stats.anova import anova_lm

from calib.fit.compare import compare_curves
from calib.fit.curve import fit_curve

RTOL = 1e-9


def two_days(shift=0.0, slope_b=2.0, cv=0.0, sd=0.03, seed=42):
    """Invented: the same 6 levels in duplicate on two days."""
    rng = np.random.default_rng(seed)
    x = np.repeat([0.5, 1.0, 2.0, 4.0, 7.0, 10.0], 2)
    ya = 0.05 + 2.0 * x
    yb = 0.05 + shift + slope_b * x
    ya = ya + rng.normal(0, sd + cv * ya)
    yb = yb + rng.normal(0, sd + cv * yb)
    return x, ya, yb


def frame(x, ya, yb, w=None):
    data = pd.DataFrame({"x": np.concatenate([x, x]), "y": np.concatenate([ya, yb]),
                         "g": ["a"] * x.size + ["b"] * x.size})
    if w is not None:
        data["w"] = w
    return data


@pytest.mark.parametrize(("shift", "slope_b"), [(0.0, 2.0), (0.2, 2.0), (0.0, 2.1), (0.3, 1.9)])
def test_unweighted_against_statsmodels_anova(shift: float, slope_b: float) -> None:
    x, ya, yb = two_days(shift, slope_b)
    cmp = compare_curves(fit_curve(x, ya), fit_curve(x, yb))
    data = frame(x, ya, yb)
    separate = smf.ols("y ~ x * C(g)", data).fit()
    parallel = smf.ols("y ~ x + C(g)", data).fit()
    common = smf.ols("y ~ x", data).fit()
    slopes = anova_lm(parallel, separate)
    intercepts = anova_lm(common, parallel)
    assert cmp.slopes.statistic == pytest.approx(slopes["F"].iloc[1], rel=RTOL)
    assert cmp.slopes.p_value == pytest.approx(slopes["Pr(>F)"].iloc[1], rel=RTOL)
    assert (cmp.slopes.df_num, cmp.slopes.df_den) == (1, 20)
    assert cmp.intercepts.statistic == pytest.approx(intercepts["F"].iloc[1], rel=RTOL)
    assert cmp.intercepts.p_value == pytest.approx(intercepts["Pr(>F)"].iloc[1], rel=RTOL)
    assert (cmp.intercepts.df_num, cmp.intercepts.df_den) == (1, 21)
    # The interaction coefficient's t-test is the same slopes test: t² = F.
    assert separate.tvalues["x:C(g)[T.b]"] ** 2 == pytest.approx(cmp.slopes.statistic, rel=RTOL)
    assert cmp.common_slope == pytest.approx(parallel.params["x"], rel=RTOL)
    assert cmp.intercept_b - cmp.intercept_a == pytest.approx(parallel.params["C(g)[T.b]"],
                                                              rel=RTOL)


def test_verdicts_follow_the_data() -> None:
    x, ya, yb = two_days()
    same = compare_curves(fit_curve(x, ya), fit_curve(x, yb))
    assert not same.slopes_differ() and not same.intercepts_differ() and same.same_line()
    x, ya, yb = two_days(shift=0.3)
    shifted = compare_curves(fit_curve(x, ya), fit_curve(x, yb))
    assert not shifted.slopes_differ() and shifted.intercepts_differ()
    x, ya, yb = two_days(slope_b=2.2)
    steeper = compare_curves(fit_curve(x, ya), fit_curve(x, yb))
    assert steeper.slopes_differ() and not steeper.same_line()
    assert steeper.slopes.critical(0.05) == pytest.approx(stats.f.ppf(0.95, 1, 20), rel=1e-12)


def test_weighted_against_statsmodels_wls_with_raw_weights() -> None:
    # Both curves weighted 1/x²: the pooled fits use the raw weights, as statsmodels gets them.
    x, ya, yb = two_days(shift=0.02, slope_b=2.05, cv=0.03, sd=0.0, seed=7)
    cmp = compare_curves(fit_curve(x, ya, weighting="1/x2"), fit_curve(x, yb, weighting="1/x2"))
    data = frame(x, ya, yb, w=1 / np.concatenate([x, x]) ** 2)
    separate = smf.wls("y ~ x * C(g)", data, weights=data["w"]).fit()
    parallel = smf.wls("y ~ x + C(g)", data, weights=data["w"]).fit()
    common = smf.wls("y ~ x", data, weights=data["w"]).fit()
    assert cmp.slopes.statistic == pytest.approx(anova_lm(parallel, separate)["F"].iloc[1],
                                                 rel=RTOL)
    assert cmp.intercepts.statistic == pytest.approx(anova_lm(common, parallel)["F"].iloc[1],
                                                     rel=RTOL)


def test_lines_through_the_origin_compare_slopes_only() -> None:
    x, ya, yb = two_days(slope_b=2.04)
    cmp = compare_curves(fit_curve(x, ya, model="origin"), fit_curve(x, yb, model="origin"))
    data = frame(x, ya, yb)
    separate = smf.ols("y ~ 0 + x:C(g)", data).fit()
    common = smf.ols("y ~ 0 + x", data).fit()
    ref = anova_lm(common, separate)
    assert cmp.slopes.statistic == pytest.approx(ref["F"].iloc[1], rel=RTOL)
    assert (cmp.slopes.df_num, cmp.slopes.df_den) == (1, 22)
    assert cmp.intercepts is None and cmp.intercepts_differ() is None


def test_mean_rf_comparison_is_the_two_sample_t_test_of_the_factors() -> None:
    x, ya, yb = two_days(slope_b=2.06, cv=0.02, sd=0.0, seed=3)
    cmp = compare_curves(fit_curve(x, ya, model="mean-rf"), fit_curve(x, yb, model="mean-rf"))
    ref = stats.ttest_ind(ya / x, yb / x)
    assert cmp.slopes.statistic == pytest.approx(ref.statistic**2, rel=RTOL)
    assert cmp.slopes.p_value == pytest.approx(ref.pvalue, rel=RTOL)


@pytest.mark.parametrize(
    ("a", "b", "message"),
    [
        ({"model": "linear"}, {"model": "origin"},
         ("compare_curves needs two fits of the same model and weighting; got linear (none) and "
         "origin (none)")),
        ({"weighting": "1/x"}, {"weighting": "none"},
         ("compare_curves needs two fits of the same model and weighting; got linear (1/x) and "
         "linear (none)")),
        ({"model": "quadratic"}, {"model": "quadratic"},
         "compare_curves compares straight lines; got model quadratic"),
    ],
)
def test_compare_refuses_unlike_fits(a, b, message) -> None:
    x, ya, yb = two_days()
    with pytest.raises(ValueError, match=f"^{re.escape(message)}$"):
        compare_curves(fit_curve(x, ya, **a), fit_curve(x, yb, **b))


@pytest.mark.parametrize("weighting", ["none", "1/x2"])
def test_slope_against_a_reference_against_statsmodels_t_test(weighting: str) -> None:
    x, ya, _ = two_days(cv=0.02, seed=11)
    fit = fit_curve(x, ya, weighting=weighting)
    w = np.ones_like(x) if weighting == "none" else 1 / x**2
    ref = sm.WLS(ya, sm.add_constant(x), weights=w).fit()
    reference = 2.03
    expected = ref.t_test((np.array([[0.0, 1.0]]), np.array([reference])))
    test = fit.coefficient_test("slope", reference)
    assert test.t_value == pytest.approx(float(expected.tvalue[0, 0]), rel=RTOL)
    assert test.p_value == pytest.approx(float(expected.pvalue), rel=RTOL)
    assert test.df == 10 and test.reference == reference
    low, high = ref.conf_int(0.05)[1]
    assert (test.ci_low, test.ci_high) == pytest.approx((low, high), rel=RTOL)
    # The reference lies inside the 95 % interval exactly when p ≥ 0.05.
    assert test.reference_inside == (not test.differs(0.05))
    assert test.change_pct == pytest.approx(100 * (ref.params[1] - reference) / reference,
                                            rel=RTOL)
