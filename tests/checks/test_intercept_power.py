"""The intercept check: significance in words, the intercept it detects, relevance by profile.

Figures checked against statsmodels (OLS standard error of the intercept, TTestPower for the
80 % power noncentrality) on invented ICP-OES-like data (Fernbrook scenario).
"""

from __future__ import annotations

import math

import numpy as np
import pytest
import statsmodels.api as sm
from statsmodels.stats.power import TTestPower

from calib.checks import CurveVerdict, Verdict, evaluate_run, parse_profile
from calib.errors import ProfileError
from tests.conftest import make_run

RULE = ('name = "intercept-test"\nversion = "1"\n\n[[rules]]\nid = "intercept-zero"\n'
        'severity = "review"\nalpha = 0.05\n')


def _check(x, y, extra: str = ""):
    curve = evaluate_run(make_run(x, y), profile=parse_profile(RULE + extra)).curves[0]
    return curve, curve.checks[0]


def _precise_curve(intercept: float):
    # Invented: 6 levels 0.5–10 mg/L in triplicate, slope 1000, a very precise method.
    x = np.repeat([0.5, 1.0, 2.0, 4.0, 7.0, 10.0], 3)
    pattern = np.tile([-0.4, 0.1, 0.3], 6)
    return x, intercept + 1000.0 * x + pattern


def test_the_detectable_intercept_follows_the_noncentral_t() -> None:
    x, y = _precise_curve(0.0)
    _, check = _check(x, y)
    ref = sm.OLS(y, sm.add_constant(x)).fit()
    df = int(ref.df_resid)
    d = TTestPower().solve_power(effect_size=None, nobs=df + 1, alpha=0.05, power=0.8)
    expected = d * math.sqrt(df + 1) * ref.bse[0]
    figures = dict(check.detectable)
    assert figures["intercept_80pct_power"] == pytest.approx(expected, rel=1e-4)
    lowest = ref.params[0] + ref.params[1] * 0.5
    assert figures["intercept_80pct_power_pct_of_lowest"] == pytest.approx(
        100 * expected / lowest, rel=1e-4)
    assert check.statistic == "t" and check.p_value == pytest.approx(ref.pvalues[0], rel=1e-9)
    assert "With 80 % power this test detects an intercept of ±" in check.detail


def test_a_significant_but_negligible_intercept_is_stated_and_does_not_send_to_review() -> None:
    # Intercept 2 response units against 500 at the lowest standard (0.4 %): significant.
    x, y = _precise_curve(2.0)
    curve, check = _check(x, y)
    assert check.verdict is Verdict.FAIL and curve.verdict is CurveVerdict.NEEDS_REVIEW
    curve, check = _check(x, y, "negligible_pct = 1\n")
    assert check.verdict is Verdict.PASS and curve.verdict is CurveVerdict.ACCEPTED
    assert check.detail.startswith("The intercept differs significantly from zero (")
    assert "but it is negligible in practice: its whole 95 % interval lies within ±" in check.detail
    assert "inside the ±1 % the profile treats as negligible" in check.detail


def test_a_significant_relevant_intercept_still_sends_to_review() -> None:
    x, y = _precise_curve(20.0)  # 4 % of the lowest standard's response
    curve, check = _check(x, y, "negligible_pct = 1\n")
    assert check.verdict is Verdict.FAIL and curve.verdict is CurveVerdict.NEEDS_REVIEW
    assert "beyond the ±1 % the profile treats as negligible" in check.detail


def test_negligible_pct_is_validated() -> None:
    with pytest.raises(ProfileError, match="parameter 'negligible_pct' must be above 0, got -1"):
        parse_profile(RULE + "negligible_pct = -1\n")
