"""The variance rules (variance-ends, variance-levels, weighting-advice) and method-sd as checks.

Figures are checked against scipy on the same replicates (scipy.stats.f, scipy.stats.bartlett,
scipy.stats.levene), statsmodels' het_breuschpagan for the weighting test, and the ISO 8466-1
critical value F(0.99; 9, 9) ≈ 5.35 (SPEC §10, any F table).
"""

from __future__ import annotations

import math

import numpy as np
import pytest
from scipy import stats

from calib.checks import CurveVerdict, Verdict, evaluate_run, parse_profile
from calib.record.document import check_document
from tests.conftest import make_run

PROFILE = """\
name = "variance-test"
version = "1"
[[rules]]
id = "variance-ends"
severity = "review"
confidence = 0.99        # ISO 8466-1 (from memory)
[[rules]]
id = "variance-levels"
severity = "review"
alpha = 0.05
[[rules]]
id = "weighting-advice"
severity = "info"
[[rules]]
id = "method-sd"
severity = "info"
"""


def replicated(levels, n, *, cv=0.0, sd=0.0, seed=5):
    """Invented responses 0.1 + 2x with SD = sd + cv·mean."""
    rng = np.random.default_rng(seed)
    x = np.repeat(np.asarray(levels, dtype=float), n)
    mean = 0.1 + 2.0 * x
    return x, mean + rng.normal(0.0, sd + cv * mean)


def checks(x, y, **options):
    curve = evaluate_run(make_run(x, y), profile=parse_profile(PROFILE), **options).curves[0]
    return curve, {c.id: c for c in curve.checks}


def test_homogeneous_ends_pass_with_the_iso_figures() -> None:
    x, y = replicated([1, 2, 4, 6, 8, 10], 10, sd=0.05)
    _, by_id = checks(x, y)
    check = by_id["variance-ends"]
    s2 = [np.var(y[x == c], ddof=1) for c in (1.0, 10.0)]
    assert check.verdict is Verdict.PASS
    assert check.value == pytest.approx(max(s2) / min(s2), rel=1e-12)
    assert round(check.limit, 2) == 5.35
    assert check.detail.startswith("Replicate variances at the lowest level (1, 10 replicates")
    assert "against F(0.99; 9, 9) = 5.35" in check.detail
    assert check.detail.endswith("the variances do not differ significantly, so equal weights "
                                 "suit this range.")


def test_growing_variance_fails_the_ends_and_levels_and_advice_warns() -> None:
    x, y = replicated([1, 2, 5, 10, 50, 100], 4, cv=0.05, sd=0.001)
    curve, by_id = checks(x, y)
    ends = by_id["variance-ends"]
    assert ends.verdict is Verdict.FAIL and ends.value > ends.limit
    assert "the variance is significantly larger at the highest level: narrow the working " \
           "range or weight the fit." in ends.detail
    levels = by_id["variance-levels"]
    groups = [y[x == c] for c in np.unique(x)]
    assert levels.verdict is Verdict.FAIL
    bartlett = stats.bartlett(*groups)
    assert levels.value == pytest.approx(bartlett.pvalue, rel=1e-10)
    assert levels.p_value == levels.value and levels.statistic == "chi2 (Bartlett T)"
    assert levels.statistic_value == pytest.approx(bartlett.statistic, rel=1e-10)
    assert levels.critical_value == pytest.approx(stats.chi2.isf(0.05, 5), rel=1e-12)
    assert levels.limit == 0.05
    assert (f"(Brown–Forsythe, for information: p = "
            f"{stats.levene(*groups, center='median').pvalue:.3g})") in levels.detail
    advice = by_id["weighting-advice"]
    assert advice.verdict is Verdict.WARN
    assert advice.detail.startswith("The fit uses weighting none; the advice is 1/x2 (Cook–"
                                    "Weisberg score test of the weighting none")
    assert advice.detail.endswith("The fit is not changed.")
    # The score test is statsmodels' original (non-robust) Breusch–Pagan LM on log x.
    from statsmodels.stats.diagnostic import het_breuschpagan

    lm, lm_p, _, _ = het_breuschpagan(curve.fit.residuals,
                                      np.column_stack([np.ones_like(x), np.log(x)]),
                                      robust=False)
    assert advice.statistic_value == pytest.approx(lm, rel=1e-9)
    assert advice.p_value == pytest.approx(lm_p, rel=1e-9)
    assert curve.fit.weighting.value == "none"  # advice never changes the fit
    assert curve.verdict is CurveVerdict.NEEDS_REVIEW


def test_weighted_fit_is_judged_on_weighted_variances() -> None:
    # The same data fitted with 1/x²: the weighting evens out the variances.
    x, y = replicated([1, 2, 5, 10, 50, 100], 4, cv=0.05, sd=0.001)
    _, by_id = checks(x, y, weighting="1/x2")
    ends = by_id["variance-ends"]
    assert ends.verdict is Verdict.PASS
    assert ends.detail.startswith("Replicate variances of the weighted responses (s²·w, "
                                  "weighting 1/x2) at the lowest level")
    assert ends.detail.endswith("the weighting 1/x2 evens them out.")
    assert by_id["variance-levels"].verdict is Verdict.PASS
    advice = by_id["weighting-advice"]
    assert advice.verdict is Verdict.PASS
    assert advice.detail.startswith("The weighting 1/x2 is not contradicted (Cook–Weisberg")
    assert advice.detail.endswith("): no change advised.")
    assert advice.value is not None and advice.value >= advice.limit  # p ≥ α passes


def test_without_replicates_the_variance_checks_are_not_evaluated() -> None:
    _, by_id = checks([1, 2, 4, 6, 8], [2.1, 4.0, 8.2, 11.9, 16.1])
    assert by_id["variance-ends"].verdict is Verdict.NOT_EVALUATED
    assert by_id["variance-ends"].detail == (
        "Variance test not made: the lowest level (1) has 1 replicate; the test needs at least "
        "2 at each end (ISO 8466-1 uses 10).")
    assert by_id["variance-levels"].detail == (
        "Variance test not made: 0 levels with replicates; the test needs at least 2.")
    assert by_id["variance-levels"].value is None


def test_method_sd_reports_v_x0_for_information() -> None:
    # Worked by hand (see tests/fit/test_limits_iso.py): s_x0 = √0.012/1.98, V_x0 = 2.766 %.
    _, by_id = checks([0, 1, 2, 3, 4], [1.0, 3.1, 4.9, 7.1, 8.9])
    check = by_id["method-sd"]
    assert check.verdict is Verdict.NOT_EVALUATED and check.limit is None
    assert check.value == pytest.approx(100 * math.sqrt(0.012) / 1.98 / 2, rel=1e-12)
    assert check.detail == ("Method standard deviation s_x0 = σ̂/b = 0.1095/1.98 = 0.05533, "
                            "relative V_x0 = 2.77 % of the mean concentration 2; no limit set in "
                            "the profile (reported for information).")
    limited = PROFILE.replace('id = "method-sd"\nseverity = "info"',
                              'id = "method-sd"\nseverity = "review"\nmax_relative_pct = 2.5')
    curve = evaluate_run(make_run([0, 1, 2, 3, 4], [1.0, 3.1, 4.9, 7.1, 8.9]),
                         profile=parse_profile(limited)).curves[0]
    check = {c.id: c for c in curve.checks}["method-sd"]
    assert check.verdict is Verdict.FAIL and check.limit == 2.5
    assert check.detail.endswith("; at most 2.5 % allowed.")


def test_mean_rf_curve_gets_no_weighting_advice() -> None:
    x, y = replicated([1, 2, 5, 10, 20], 3, cv=0.03)
    _, by_id = checks(x, y, model="mean-rf")
    assert by_id["weighting-advice"].verdict is Verdict.NOT_EVALUATED
    assert by_id["weighting-advice"].detail == (
        "the mean-rf model averages the response factors with equal weight; there is no "
        "weighting to choose")
    assert "scaled by 1/x²" in by_id["variance-ends"].detail


def test_unfitted_curve_reports_the_reason() -> None:
    _, by_id = checks([1, 1, 1], [1.0, 1.1, 0.9])
    for check in by_id.values():
        assert check.verdict is Verdict.NOT_EVALUATED
        assert check.detail == "the linear model needs at least 2 concentration levels; 1 available"


def test_checks_reach_the_json_with_their_ids() -> None:
    x, y = replicated([1, 2, 4, 6, 8, 10], 3, sd=0.05)
    assessment = evaluate_run(make_run(x, y), profile=parse_profile(PROFILE))
    entries = check_document(assessment)["curves"][0]["checks"]
    assert [c["id"] for c in entries] == ["variance-ends", "variance-levels", "weighting-advice",
                                          "method-sd"]
    base = {"id", "title", "verdict", "severity", "value", "limit", "detail"}
    # Statistical tests add their named test; method-sd is a figure against a limit.
    assert [set(c) - base for c in entries] == [{"test"}, {"test"}, {"test"}, set()]
    ends = entries[0]["test"]
    # PG = larger/smaller: two-sided, size 2·(1 − 0.99) = 0.02 (closed form).
    assert ends["statistic"] == "F (PG = larger/smaller variance)"
    assert ends["alpha"] == pytest.approx(0.02)
    assert ends["critical_value"] == pytest.approx(stats.f.isf(0.01, 2, 2), rel=1e-12)
    assert ends["passes_when"] == "p ≥ α" and ends["adjusted_p"] is None


def test_rule_parameters_are_validated() -> None:
    from calib.errors import ProfileError

    bad = PROFILE.replace("confidence = 0.99", "confidence = 1.5")
    with pytest.raises(ProfileError) as info:
        parse_profile(bad, origin="lab.toml")
    assert "rule 'variance-ends' parameter 'confidence' must be at most 0.999, got 1.5" in str(
        info.value)


def test_bartlett_has_power_at_triplicates_where_brown_forsythe_has_none() -> None:
    # Six levels × 3 replicates with SDs growing 50-fold (a 2,500-fold variance range):
    # Bartlett (scipy.stats.bartlett on the same groups) rejects, while the Brown–Forsythe
    # p-value (scipy.stats.levene, center="median") stays large because one of the three
    # deviations from each median is always 0.
    x = np.repeat([1.0, 2, 5, 10, 20, 50], 3)
    unit = np.tile([-1.0, 0.2, 0.8], 6)
    y = 2.0 * x + unit * x * 0.05
    _, by_id = checks(x, y)
    levels = by_id["variance-levels"]
    groups = [y[x == c] for c in np.unique(x)]
    assert levels.verdict is Verdict.FAIL
    assert levels.p_value == pytest.approx(stats.bartlett(*groups).pvalue, rel=1e-10)
    assert stats.levene(*groups, center="median").pvalue > 0.05


def test_equal_variances_give_a_bartlett_statistic_of_zero() -> None:
    # Identical replicate patterns at every level: T = 0 exactly (scipy gives ~0 too).
    x = np.repeat([1.0, 2, 3, 4, 5], 3)
    y = 2.0 * x + np.tile([-0.1, 0.0, 0.1], 5)
    _, by_id = checks(x, y)
    levels = by_id["variance-levels"]
    assert levels.verdict is Verdict.PASS and levels.statistic_value == 0.0
    assert levels.p_value == pytest.approx(1.0)
    assert abs(stats.bartlett(*[y[x == c] for c in np.unique(x)]).statistic) < 1e-9
