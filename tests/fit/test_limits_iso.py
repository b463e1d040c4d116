"""ISO 11843-2 critical value and minimum detectable value, ICH Q2 with the intercept's SE,
and ISO 8466-1's method standard deviation; the profile's ``lod_method`` in the JSON.

Outside references: a worked example derived by hand (below), statsmodels OLS on the same data
(intercept SE, one-sided prediction bound at concentration 0), scipy's non-central t
distribution, and Student's t from a handbook table (t(0.95; 3) = 2.353).
"""

from __future__ import annotations

import math
import re

import numpy as np
import pytest
import statsmodels.api as sm
from scipy import stats

from calib.checks import evaluate_run, parse_profile
from calib.errors import ProfileError
from calib.fit.curve import fit_curve
from calib.fit.limits import detection_limits, ich_limits, iso11843_limits, method_sd
from calib.record.document import check_document
from tests.conftest import make_run

# Worked by hand: x = 0..4, y = 1.0, 3.1, 4.9, 7.1, 8.9 (invented).  x̄ = 2, Sxx = 10, ȳ = 5,
# Sxy = 19.8 → b = 1.98, a = 1.04; residuals −0.04, 0.08, −0.10, 0.12, −0.06, SS = 0.036,
# ν = 3, σ̂² = 0.012.  √(1/L + 1/N + x̄²/Sxx) = √(1 + 0.2 + 0.4) = √1.6 with L = 1.
# t(0.95; 3) = 2.353 (table) → x_c = 2.353·√0.012·√1.6/1.98 = 0.16469, y_c = a + b·x_c = 1.3661;
# δ ≈ 2t → x_d = 0.32939.  ISO 8466-1: s_x0 = √0.012/1.98 = 0.055326, V_x0 = 2.7663 %.
X = [0.0, 1.0, 2.0, 3.0, 4.0]
Y = [1.0, 3.1, 4.9, 7.1, 8.9]
SD0 = math.sqrt(0.012 * 1.6)


def test_iso11843_worked_example_by_hand() -> None:
    fit = fit_curve(X, Y)
    assert fit.coefficients["slope"] == pytest.approx(1.98, rel=1e-13)
    assert fit.residual_sd**2 == pytest.approx(0.012, rel=1e-12)
    approx = iso11843_limits(fit, exact=False)
    assert round(approx.t_critical, 3) == 2.353 and approx.df == 3
    assert approx.sd_at_zero == pytest.approx(SD0, rel=1e-12)
    assert approx.critical == pytest.approx(approx.t_critical * SD0 / 1.98, rel=1e-12)
    assert round(approx.critical, 5) == 0.16469
    assert round(approx.response_critical, 4) == 1.3661
    assert approx.delta == pytest.approx(2 * approx.t_critical, rel=1e-14)
    assert round(approx.minimum_detectable, 5) == 0.32939


def test_iso11843_critical_response_is_statsmodels_one_sided_prediction_bound() -> None:
    # y_c is the upper one-sided 95 % prediction bound for one new reading at concentration 0,
    # i.e. statsmodels' two-sided 90 % obs_ci_upper at x = 0.
    rng = np.random.default_rng(17)
    x = np.repeat([0.0, 0.5, 1.0, 2.0, 4.0], 3)
    y = 0.05 + 1.3 * x + rng.normal(0, 0.02, x.size)
    ref = sm.OLS(y, sm.add_constant(x)).fit()
    frame = ref.get_prediction(np.array([[1.0, 0.0]])).summary_frame(alpha=0.10)
    iso = iso11843_limits(fit_curve(x, y))
    assert iso.response_critical == pytest.approx(frame["obs_ci_upper"].iloc[0], rel=1e-10)
    assert iso.critical == pytest.approx((iso.response_critical - ref.params[0]) / ref.params[1],
                                         rel=1e-10)
    # Two readings averaged: 1/L = 1/2 inside the root.
    two = iso11843_limits(fit_curve(x, y), readings=2)
    sd0 = math.sqrt(ref.scale / 2 + ref.bse[0] ** 2)
    assert two.sd_at_zero == pytest.approx(sd0, rel=1e-10)


@pytest.mark.parametrize(("alpha", "beta"), [(0.05, 0.05), (0.01, 0.05), (0.05, 0.10)])
def test_exact_delta_is_the_non_central_t_quantile(alpha: float, beta: float) -> None:
    # At x_d the statistic is non-central t with non-centrality δ; it stays below
    # t(1 − α; ν) with probability β (scipy.stats.nct).
    iso = iso11843_limits(fit_curve(X, Y), alpha=alpha, beta=beta)
    assert stats.nct.cdf(iso.t_critical, iso.df, iso.delta) == pytest.approx(beta, abs=1e-10)
    assert iso.minimum_detectable == pytest.approx(iso.delta * SD0 / 1.98, rel=1e-10)
    # The standard's approximation t(1 − α) + t(1 − β) is close, not equal, for ν = 3.
    approx = iso11843_limits(fit_curve(X, Y), alpha=alpha, beta=beta, exact=False)
    assert iso.delta == pytest.approx(approx.delta, rel=0.15)


def test_exact_delta_tends_to_the_normal_value_with_many_points() -> None:
    # For large ν, δ → z(0.95) + z(0.95) = 3.2897 (normal quantiles).
    rng = np.random.default_rng(1)
    x = np.repeat(np.linspace(0, 10, 50), 20)
    fit = fit_curve(x, 2 * x + rng.normal(0, 0.1, x.size))
    assert iso11843_limits(fit).delta == pytest.approx(2 * stats.norm.ppf(0.95), rel=2e-3)


@pytest.mark.parametrize(
    ("kwargs", "message"),
    [
        ({"model": "origin"}, ("ISO 11843-2 limits need an unweighted straight line with an "
                              "intercept; got model origin, weighting none")),
        ({"weighting": "1/x"}, ("ISO 11843-2 limits need an unweighted straight line with an "
                               "intercept; got model linear, weighting 1/x")),
    ],
)
def test_iso11843_refuses_other_fits(kwargs, message) -> None:
    fit = fit_curve([1, 2, 3, 4], [2.0, 4.1, 5.9, 8.2], **kwargs)
    with pytest.raises(ValueError, match=f"^{re.escape(message)}$"):
        iso11843_limits(fit)


def test_iso11843_wrong_arguments() -> None:
    fit = fit_curve(X, Y)
    with pytest.raises(ValueError, match=r"^alpha must be between 0 and 0.5; got 0.7$"):
        iso11843_limits(fit, alpha=0.7)
    with pytest.raises(ValueError, match=r"^readings must be a whole number of at least 1; got 0$"):
        iso11843_limits(fit, readings=0)


def test_ich_with_the_intercept_standard_error_against_statsmodels() -> None:
    # ICH Q2(R2), from memory: σ may be the SD of the y-intercepts of regression lines; the
    # SE of the intercept is that figure for one line (statsmodels bse[0]).
    rng = np.random.default_rng(23)
    x = np.repeat([1.0, 2.0, 4.0, 6.0, 8.0], 2)
    y = 0.1 + 0.9 * x + rng.normal(0, 0.03, x.size)
    ref = sm.OLS(y, sm.add_constant(x)).fit()
    lod, loq = ich_limits(fit_curve(x, y), sigma="intercept-se")
    assert lod.value == pytest.approx(3.3 * ref.bse[0] / ref.params[1], rel=1e-10)
    assert loq.value == pytest.approx(10 * ref.bse[0] / ref.params[1], rel=1e-10)
    assert lod.method == "ICH Q2: 3.3·σ/S, σ = SE of the intercept, S = slope"
    with pytest.raises(ValueError, match=r"^sigma must be one of residual-sd, intercept-se; got 'sd'$"):
        ich_limits(fit_curve(x, y), sigma="sd")


def test_method_standard_deviation_by_hand() -> None:
    m = method_sd(fit_curve(X, Y))
    assert m.value == pytest.approx(math.sqrt(0.012) / 1.98, rel=1e-12)
    assert m.mean_concentration == 2.0
    assert m.relative_pct == pytest.approx(100 * math.sqrt(0.012) / 1.98 / 2, rel=1e-12)
    assert round(m.relative_pct, 4) == 2.7663
    # Quadratic: the sensitivity is the slope at x̄, b + 2c·x̄ (ISO 8466-2, from memory).
    q = fit_curve([1, 2, 3, 4, 5, 6], [1.1, 2.3, 3.2, 4.1, 4.8, 5.6], model="quadratic")
    mq = method_sd(q)
    c = q.coefficients
    assert mq.sensitivity == pytest.approx(c["slope"] + 2 * c["quadratic"] * 3.5, rel=1e-12)


def test_detection_limits_dispatch_and_wording() -> None:
    fit = fit_curve(X, Y)
    assert detection_limits(fit) == ich_limits(fit)
    assert detection_limits(fit, method="ich-intercept-se") == ich_limits(fit, sigma="intercept-se")
    lod, loq = detection_limits(fit, method="iso-11843")
    assert lod.value == pytest.approx(iso11843_limits(fit).minimum_detectable, rel=1e-14)
    assert lod.method.startswith("ISO 11843-2 minimum detectable value (α = β = 0.05, one reading)")
    assert loq.value == ich_limits(fit)[1].value
    assert loq.method.endswith("(ISO 11843-2 defines no quantitation limit)")
    lod, _ = detection_limits(fit_curve(X[1:], Y[1:], model="origin"), method="iso-11843")
    assert math.isnan(lod.value)
    assert lod.method == ("ISO 11843-2 minimum detectable value: not available, it needs an "
                          "unweighted straight line with an intercept (this curve: origin, "
                          "weighting none)")
    lod, _ = detection_limits(fit_curve(X[1:], Y[1:], model="origin"), method="ich-intercept-se")
    assert math.isnan(lod.value) and "the origin model has no intercept" in lod.method


PROFILE = """\
name = "iso-lab"
version = "1"
[defaults]
lod_method = "{method}"
[[rules]]
id = "min-levels"
severity = "reject"
min_levels = 5
"""


def test_profile_lod_method_reaches_the_json() -> None:
    run = make_run(X, Y)
    profile = parse_profile(PROFILE.format(method="iso-11843"))
    assessment = evaluate_run(run, profile=profile)
    curve = check_document(assessment)["curves"][0]
    assert set(curve["lod"]) == {"value", "method"}
    assert curve["lod"]["value"] == pytest.approx(iso11843_limits(fit_curve(X, Y)).minimum_detectable)
    assert curve["lod"]["method"].startswith("ISO 11843-2 minimum detectable value")
    default = check_document(evaluate_run(run, profile=parse_profile(
        PROFILE.replace('lod_method = "{method}"\n', ""))))["curves"][0]
    assert default["lod"]["method"] == "ICH Q2: 3.3·σ/S, σ = residual SD, S = slope"


def test_profile_refuses_an_unknown_lod_method() -> None:
    with pytest.raises(ProfileError) as info:
        parse_profile(PROFILE.format(method="3-sigma"), origin="lab.toml")
    assert str(info.value) == ("lab.toml, line 4: lod_method must be one of ich-sd, "
                               "ich-intercept-se, iso-11843, got '3-sigma'")
