"""The first set of checks on data with published or independently computed answers."""

from __future__ import annotations

import numpy as np
import pytest
import statsmodels.api as sm

from calib.checks import CurveVerdict, Verdict, evaluate_run, load_profile, parse_profile
from tests.conftest import make_run, nist_xy


def by_id(curve):
    return {c.id: c for c in curve.checks}


def test_norris_intercept_not_significant(norris_run):
    # NIST StRD Norris: intercept -0.262323073774029, SE 0.232818234301152, t ≈ -1.127 on 34 df
    # (SPEC §10): the intercept does not differ significantly from zero.
    curve = evaluate_run(norris_run).curves[0]
    check = by_id(curve)["intercept-zero"]
    assert check.verdict is Verdict.PASS
    assert check.limit == 0.05
    assert check.value == pytest.approx(0.2674, abs=5e-4)  # two-sided p of t = -1.1267, 34 df
    assert "does not differ significantly from zero" in check.detail
    assert "t = -1.127 on 34 df" in check.detail


def test_pontius_straight_line_intercept_is_significant():
    # NIST StRD Pontius fitted with a straight line: statsmodels OLS on the same data gives an
    # intercept p-value of about 1.8e-10, so the check must fail with that p-value.
    x, y = nist_xy("pontius")
    reference = sm.OLS(y, sm.add_constant(x)).fit()
    check = by_id(evaluate_run(make_run(x, y)).curves[0])["intercept-zero"]
    assert check.verdict is Verdict.FAIL
    assert check.value == pytest.approx(reference.pvalues[0], rel=1e-8)
    assert "differs significantly from zero" in check.detail
    assert "blank contamination" in check.detail
    # Its size is stated beside its significance: intercept / fitted response at the lowest
    # standard, both from the same statsmodels fit.
    a, b = reference.params
    share = 100 * abs(a) / abs(a + b * min(v for v in x if v > 0))
    assert f"the intercept is {share:.3g} % of the fitted response at the lowest standard" in (
        check.detail)


def test_origin_model_has_no_intercept_to_test(norris_run):
    curve = evaluate_run(norris_run, model="origin").curves[0]
    check = by_id(curve)["intercept-zero"]
    assert check.verdict is Verdict.NOT_EVALUATED
    assert check.detail == "the origin model has no intercept"


def test_back_calculation_tolerances_and_share():
    # Rule of the trade (ICH M10, from memory): ±15 % of nominal, ±20 % at the lowest level,
    # at least 75 % of standards within. Level 1 is 18 % high: inside its ±20 %.
    xs = [1, 2, 5, 10, 20, 50, 100, 200]
    ys = [1.18, 2.0, 5.0, 10.0, 20.0, 50.0, 100.0, 200.0]
    curve = evaluate_run(make_run(xs, ys), model="origin").curves[0]
    check = by_id(curve)["back-calculation"]
    assert check.verdict is Verdict.PASS and check.value == 100.0 and check.limit == 75.0
    # Three of eight standards 30 % off: 62.5 % pass, below 75 %: the curve is rejected.
    ys_bad = [1.0, 2.6, 5.0, 13.0, 20.0, 65.0, 100.0, 200.0]
    curve = evaluate_run(make_run(xs, ys_bad), model="origin").curves[0]
    check = by_id(curve)["back-calculation"]
    assert check.verdict is Verdict.FAIL
    assert check.value == pytest.approx(62.5)
    assert "5 of 8 standards within ±15 %" in check.detail
    assert "Run!C3" in check.detail
    assert curve.verdict is CurveVerdict.REJECTED


def test_zero_standard_is_fitted_but_skipped_by_percent_rules():
    xs = [0, 1, 2, 4, 6, 8]
    ys = [0.02, 1.01, 1.98, 4.03, 5.97, 8.01]
    curve = evaluate_run(make_run(xs, ys)).curves[0]
    zero = curve.standards[0]
    assert zero.used and zero.deviation_pct is None
    assert zero.deviation == pytest.approx(zero.back_calculated)
    assert "5 of 5 standards" in by_id(curve)["back-calculation"].detail
    assert curve.fit.n_points == 6


def test_weighting_refuses_zero_standard_with_reason():
    xs = [0, 1, 2, 4, 6, 8]
    ys = [0.02, 1.01, 1.98, 4.03, 5.97, 8.01]
    curve = evaluate_run(make_run(xs, ys), weighting="1/x").curves[0]
    zero = curve.standards[0]
    assert not zero.used
    assert zero.exclusion_reason == "weighting 1/x divides by the concentration, which is 0 here"
    assert curve.fit.n_points == 5


def test_min_levels_fails_and_unfittable_curve_is_rejected():
    curve = evaluate_run(make_run([1, 1, 2, 2], [1.0, 1.1, 2.0, 2.1])).curves[0]
    check = by_id(curve)["min-levels"]
    assert check.verdict is Verdict.FAIL and check.value == 2 and check.limit == 5
    assert curve.verdict is CurveVerdict.REJECTED

    curve = evaluate_run(make_run([1, 1, 1], [1.0, 1.1, 0.9])).curves[0]
    assert curve.fit is None
    assert curve.unfitted_reason == "the linear model needs at least 2 concentration levels; 1 available"
    assert by_id(curve)["intercept-zero"].verdict is Verdict.NOT_EVALUATED
    assert curve.verdict is CurveVerdict.REJECTED


def test_excluded_point_changes_nothing_but_is_shown():
    rng = np.random.default_rng(7)
    xs = [1, 2, 4, 6, 8, 10]
    ys = [2 * x + rng.normal(0, 0.05) for x in xs]
    base = evaluate_run(make_run(xs, ys)).curves[0]
    run = make_run([*xs, 5], [*ys, 40.0], excluded={6: "injection failed (air bubble)"})
    curve = evaluate_run(run).curves[0]
    assert curve.fit.coefficients == pytest.approx(base.fit.coefficients, rel=1e-12)
    assert curve.standards[-1].exclusion_reason == "injection failed (air bubble)"
    assert not curve.standards[-1].used


def test_slope_reference_with_expected_slope():
    text = load_profile("default").text.replace("# expected = 1250.0", "expected = 2.5")
    profile = parse_profile(text)
    xs = [1, 2, 4, 6, 8, 10]
    ys = [2.01 * x for x in xs]
    ys[0] += 0.01
    check = by_id(evaluate_run(make_run(xs, ys), profile=profile).curves[0])["slope-reference"]
    assert check.verdict is Verdict.FAIL
    assert "lies outside the interval" in check.detail


def test_raise_for_verdict_is_opt_in():
    from calib.errors import NotAcceptedError

    x, y = nist_xy("pontius")
    curve = evaluate_run(make_run(x, y)).curves[0]
    assert curve.verdict is CurveVerdict.NEEDS_REVIEW
    with pytest.raises(NotAcceptedError, match="curve needs-review"):
        curve.raise_for_verdict()
