"""The linearity checks as a profile uses them: verdicts, values, limits and explanations."""

from __future__ import annotations

import tomllib
from dataclasses import replace

import numpy as np
import pytest

from calib.checks import CurveVerdict, Verdict, evaluate_run, parse_profile
from calib.errors import ProfileError
from calib.run import Run
from tests.conftest import DATA, make_run, nist_xy
from tests.fit.test_linearity import curved_and_straight, statsmodels_lack_of_fit

PUBLISHED = tomllib.loads((DATA / "diagnostics" / "published.toml").read_text(encoding="utf-8"))


def profile(*rules: str, extra: str = "") -> object:
    text = 'name = "linearity-test"\nversion = "1"\n'
    for rule in rules:
        text += f'\n[[rules]]\nid = "{rule}"\nseverity = "reject"\n'
    return parse_profile(text + extra)


ALL = profile("lack-of-fit", "mandel", "quadratic-term", "residual-runs", "drift")
SHAPE = profile("lack-of-fit", "mandel", "quadratic-term")


def checks(run: Run, prof=ALL, **options):
    curve = evaluate_run(run, profile=prof, **options).curves[0]
    return curve, {c.id: c for c in curve.checks}


def with_order(run: Run, order) -> Run:
    points = tuple(replace(p, injection_order=o) for p, o in zip(run.points, order))
    return replace(run, points=points)


def test_load_cell_straight_line_fails_every_shape_check():
    # NIST/SEMATECH e-Handbook §4.6.1 (Pontius data): lack-of-fit F ≈ 214.75 on (18, 20) df,
    # rejected; statsmodels anova_lm against y ~ C(x) gives the same F (tests/fit/test_linearity).
    x, y = nist_xy("pontius")
    curve, by_id = checks(make_run(x, y))
    lof = by_id["lack-of-fit"]
    assert lof.verdict is Verdict.FAIL and lof.limit == 0.05
    assert lof.value == pytest.approx(PUBLISHED["load_cell"]["line_f"], abs=0.005)
    assert lof.value == pytest.approx(statsmodels_lack_of_fit(x, y, "y ~ x")[0], rel=1e-9)
    assert lof.detail.startswith("Significant lack of fit (F = 214.7 on (18, 20) df, p = 5.5e-19, "
                                 "20 levels; p < 0.05)")
    assert by_id["mandel"].verdict is Verdict.FAIL
    assert "F(0.99; 1, 37) = 7.373" in by_id["mandel"].detail
    assert by_id["quadratic-term"].verdict is Verdict.FAIL
    assert by_id["quadratic-term"].detail.startswith("Curvature: the quadratic term is significant")
    assert by_id["residual-runs"].verdict is Verdict.FAIL
    assert "3 runs of the signs of the level-mean residuals in order of concentration" in by_id["residual-runs"].detail
    assert curve.verdict is CurveVerdict.REJECTED


def test_load_cell_quadratic_passes():
    # Same source: the quadratic gives F ≈ 0.81, p ≈ 0.67, not rejected.
    x, y = nist_xy("pontius")
    _, by_id = checks(make_run(x, y), model="quadratic")
    lof = by_id["lack-of-fit"]
    assert lof.verdict is Verdict.PASS
    assert lof.value == pytest.approx(PUBLISHED["load_cell"]["quadratic_f"], abs=0.005)
    assert "p = 0.666" in lof.detail and "the quadratic curve follows the level means" in lof.detail
    assert by_id["mandel"].verdict is Verdict.NOT_EVALUATED
    assert by_id["mandel"].detail == ("Mandel's test compares a straight line with a quadratic; "
                                      "the curve is fitted as quadratic.")
    assert by_id["quadratic-term"].verdict is Verdict.PASS
    assert by_id["quadratic-term"].detail.startswith("The quadratic term is significant")
    assert by_id["residual-runs"].verdict is Verdict.PASS


def test_visibly_curved_response_is_not_accepted_as_a_straight_line():
    # Invented: y = 1 + 10x − 0.4x² at 6 levels × 3 replicates, fitted as a straight line.
    x, curved, straight = curved_and_straight()
    curve, by_id = checks(make_run(x, curved), SHAPE)
    assert [by_id[i].verdict for i in ("lack-of-fit", "mandel", "quadratic-term")] == [Verdict.FAIL] * 3
    assert curve.verdict is CurveVerdict.REJECTED
    curve, by_id = checks(make_run(x, straight), SHAPE)
    assert [by_id[i].verdict for i in ("lack-of-fit", "mandel", "quadratic-term")] == [Verdict.PASS] * 3
    assert curve.verdict is CurveVerdict.ACCEPTED


def test_weighted_fit_says_so():
    x, y = nist_xy("pontius")
    _, by_id = checks(make_run(x, y), weighting="1/x")
    assert "; weighted sums, weighting 1/x" in by_id["lack-of-fit"].detail
    assert "both fits weighted 1/x" in by_id["mandel"].detail
    assert ", weighting 1/x, t = " in by_id["quadratic-term"].detail


def test_not_evaluated_reasons():
    # Five levels, no replicates: no pure error; 3 positive and 2 negative residuals cannot
    # reach p < 0.05 in the runs test (smallest p = 2/C(5, 2) = 0.2).
    run = make_run([1, 2, 3, 4, 5], [1.1, 1.9, 3.2, 3.9, 5.1])
    curve, by_id = checks(run)
    assert by_id["lack-of-fit"].verdict is Verdict.NOT_EVALUATED
    assert by_id["lack-of-fit"].detail == ("Lack of fit not tested: no concentration level has "
                                           "replicates, so there is no pure error to test against.")
    assert by_id["residual-runs"].verdict is Verdict.NOT_EVALUATED
    assert by_id["residual-runs"].detail.startswith("Too few residuals for the runs test: with ")
    assert "(2 runs) has p = 0.2 ≥ 0.05." in by_id["residual-runs"].detail
    assert by_id["drift"].detail == "The run gives no injection order."
    assert by_id["lack-of-fit"].value is None and by_id["lack-of-fit"].limit is None
    # A reject rule that cannot be evaluated sends the curve to review.
    assert curve.verdict is CurveVerdict.NEEDS_REVIEW


def test_unfitted_curve_and_other_models():
    _, by_id = checks(make_run([1, 1, 1], [1.0, 1.1, 0.9]))
    assert by_id["mandel"].detail == "the linear model needs at least 2 concentration levels; 1 available"
    x, y = nist_xy("pontius")
    _, by_id = checks(make_run(x, y), model="origin")
    assert by_id["quadratic-term"].detail == ("The quadratic-term test applies to linear and "
                                              "quadratic curves; the curve is fitted as origin.")
    assert by_id["mandel"].detail.endswith("the curve is fitted as origin.")


def test_quadratic_without_curvature_warns():
    # A straight response fitted as a quadratic: the quadratic term is not significant.
    x, _, straight = curved_and_straight()
    _, by_id = checks(make_run(x, straight), model="quadratic")
    term = by_id["quadratic-term"]
    assert term.verdict is Verdict.WARN and term.value > 0.05
    assert "prefer the simpler curve" in term.detail


def test_drift_with_injection_order():
    # The response creeps up by 0.01 per injection, in an order unrelated to concentration.
    x, _, straight = curved_and_straight()
    order = [3, 9, 15, 1, 7, 13, 5, 11, 17, 2, 8, 14, 4, 10, 16, 6, 12, 18]
    y = straight + 0.01 * np.array(order)
    _, by_id = checks(with_order(make_run(x, y), order))
    drift = by_id["drift"]
    assert drift.verdict is Verdict.FAIL and drift.limit == 0.05 and drift.value < 0.05
    assert drift.detail.startswith("The residuals trend with injection order (residuals change by ")
    assert "the response drifted during the run." in drift.detail
    _, by_id = checks(with_order(make_run(x, straight), order))
    assert by_id["drift"].verdict is Verdict.PASS


def test_drift_caution_when_injected_in_order_of_concentration():
    x, _, straight = curved_and_straight()
    _, by_id = checks(with_order(make_run(x, straight), range(1, 19)))
    assert "injected nearly in order of concentration (r = 0.99)" in by_id["drift"].detail


def test_drift_needs_every_injection_order():
    x, _, straight = curved_and_straight()
    run = with_order(make_run(x, straight), [*range(1, 16), None, None, None])
    _, by_id = checks(run)
    assert by_id["drift"].detail == ("The run gives no injection order for 3 of the 18 standards "
                                     "in the fit.")


def test_bad_parameters_are_refused_with_the_line():
    with pytest.raises(ProfileError, match=r"^profile, line 4: rule 'lack-of-fit' parameter "
                                           r"'alpha' must be above 0, got 0$"):
        parse_profile('name = "p"\nversion = "1"\n\n[[rules]]\nid = "lack-of-fit"\n'
                      'severity = "reject"\nalpha = 0\n')
    with pytest.raises(ProfileError, match=r"rule 'mandel' parameter 'confidence' must be at "
                                           r"most 0.9999, got 1.0$"):
        parse_profile('name = "p"\nversion = "1"\n[[rules]]\nid = "mandel"\n'
                      'severity = "reject"\nconfidence = 1.0\n')
