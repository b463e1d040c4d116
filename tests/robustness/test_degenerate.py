"""Degenerate statistics: each gives a named, explained result, and never NaN in a pass."""

from __future__ import annotations

import math

import pytest

from calib.checks import evaluate_run
from calib.checks.result import Verdict
from calib.fit import fit_curve
from calib.fit.variance import variance_levels
from tests.conftest import make_run

XS = [0.5, 0.5, 1, 1, 2, 2, 5, 5, 10, 10]
YS = [0.101, 0.099, 0.202, 0.198, 0.401, 0.403, 1.002, 0.997, 2.004, 1.995]


def _checks(curve) -> dict:
    return {c.id: c for c in curve.checks}


def _no_nan_passes(curve) -> None:
    for check in curve.checks:
        if check.verdict is Verdict.PASS:
            assert check.value is None or math.isfinite(check.value), check
            assert "nan" not in check.detail.casefold().split(), check


def test_exact_fit_is_named_and_its_noise_is_not_tested():
    curve = evaluate_run(make_run(XS, [0.25 * x for x in XS])).curves[0]
    assert curve.fit.exact
    checks = _checks(curve)
    assert checks["intercept-zero"].verdict is Verdict.NOT_EVALUATED
    assert "passes through every standard" in checks["intercept-zero"].detail
    assert checks["outliers"].verdict is Verdict.NOT_EVALUATED
    _no_nan_passes(curve)


def test_all_responses_equal_is_rejected_with_the_reason_and_no_noise_findings():
    curve = evaluate_run(make_run(XS, [0.25] * len(XS))).curves[0]
    checks = _checks(curve)
    assert curve.verdict.value == "rejected"
    assert checks["back-calculation"].verdict is Verdict.FAIL
    assert "0 of 10 standards within" in checks["back-calculation"].detail
    # Before the fix: t = 3.9e16 on rounding noise, and two "outliers" out of 1e-17 residuals.
    assert checks["intercept-zero"].verdict is Verdict.NOT_EVALUATED
    assert checks["outliers"].verdict is Verdict.NOT_EVALUATED
    _no_nan_passes(curve)


def test_singular_design_is_refused_by_name():
    # Source: from memory — a straight line through points at one x is not determined.
    with pytest.raises(ValueError, match=r"the design is singular \(rank 1 < 2 parameters\)"):
        fit_curve([1.0, 1.0, 1.0, 1.0], [1.0, 2.0, 3.0, 4.0])


def test_zero_standard_under_1_over_x_is_left_out_with_the_reason():
    xs, ys = [0, 0, *XS], [0.001, 0.002, *YS]
    curve = evaluate_run(make_run(xs, ys), weighting="1/x").curves[0]
    assert curve.fit.n_points == len(XS)
    assert all(x > 0 for x in curve.fit.x)
    assert "5 non-zero concentration levels" in _checks(curve)["min-levels"].detail
    zero = [s for s in curve.standards if s.point.concentration == 0]
    assert len(zero) == 2 and not any(s.used for s in zero)
    assert {s.exclusion_reason for s in zero} == {
        "weighting 1/x divides by the concentration, which is 0 here"}
    _no_nan_passes(curve)


def test_single_replicate_everywhere_has_no_pure_error():
    ys = [0.101, 0.199, 0.404, 0.996, 2.003, 2.998]
    curve = evaluate_run(make_run([0.5, 1, 2, 5, 10, 15], ys)).curves[0]
    lof = _checks(curve)["lack-of-fit"]
    assert lof.verdict is Verdict.NOT_EVALUATED
    assert "replicate" in lof.detail
    _no_nan_passes(curve)


def test_two_replicates_per_level_do_not_feed_brown_forsythe_rounding_noise():
    test = variance_levels(XS, YS)
    assert math.isnan(test.p_value)
    assert "with 2 replicates at every level" in test.reason
