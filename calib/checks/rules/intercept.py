"""The intercept against zero: the user's headline test, with its power and its relevance.

The t-test keeps its conventional level and is always reported in words.  Beside it the
record gives the smallest intercept this curve's test would detect with 80 % power, in
response units and as a share of the fitted response at the lowest standard, so that a
passing test says how large an intercept it could have missed.  A profile may declare
an intercept that is significant but practically negligible — its whole confidence
interval within ``negligible_pct`` % of the lowest standard's fitted response (an
equivalence margin: a test of relevance, not of the estimate alone) — not to change the
verdict; the significance is still stated.
"""

from __future__ import annotations

import math
from collections.abc import Mapping
from typing import Any

import numpy as np

from calib.checks.context import CurveContext
from calib.checks.result import CheckResult, Severity, Verdict
from calib.checks.rules.base import Param, Rule, fmt, not_evaluated, result, with_test
from calib.fit.power import detectable_t_noncentrality

__all__ = ["INTERCEPT_RULES"]


def _lowest_response(ctx: CurveContext) -> float:
    """Fitted response at the lowest non-zero standard in the fit (NaN if none)."""
    fit = ctx.fit
    levels = [s.point.concentration for s in ctx.used if s.point.concentration > 0]
    if fit is None or not levels:
        return math.nan
    return float(np.asarray(fit.predict(min(levels))).reshape(-1)[0])


def _intercept_zero(ctx: CurveContext, p: Mapping[str, Any], sev: Severity) -> CheckResult:
    """Two-sided t-test of H₀: intercept = 0 on ν = N − p degrees of freedom.

    ``value`` is the p-value and ``limit`` α (as before); the test is named in the
    check's ``statistic`` fields and ``detectable`` gives the intercept found with 80 %
    power.
    """
    fit = ctx.fit
    if fit is None:
        return not_evaluated("intercept-zero", sev, ctx.unfitted_reason)
    if "intercept" not in fit.coefficients:
        return not_evaluated("intercept-zero", sev, f"the {fit.model.value} model has no intercept")
    if fit.exact:
        return not_evaluated("intercept-zero", sev,
                             "the curve passes through every standard, so the intercept's "
                             "standard error is rounding noise and there is nothing to test "
                             "against")
    alpha = p["alpha"]
    pval = fit.p_value("intercept")
    if not math.isfinite(pval):
        return not_evaluated("intercept-zero", sev, "the intercept's standard error is not available")
    df = fit.residual_df
    level = 1 - alpha
    low, high = fit.confidence_interval("intercept", level)
    est = fit.coefficients["intercept"]
    se = fit.std_error("intercept")
    t = fit.t_value("intercept")
    crit = fit.t_critical(level)
    lowest = _lowest_response(ctx)
    detect = detectable_t_noncentrality(df, alpha) * se
    share = 100 * detect / abs(lowest) if lowest else math.nan
    power_words = (f" With 80 % power this test detects an intercept of ±{fmt(detect)} "
                   f"(response units)"
                   + (f", {share:.3g} % of the fitted response at the lowest standard"
                      if math.isfinite(share) else "") + ".")
    figures = (f"intercept {fmt(est)}, t = {t:.3f} on {df} df, |t| against "
               f"t({1 - alpha / 2:g}; {df}) = {crit:.3f}, two-sided p = {pval:.3g}; "
               f"{100 * level:g} % interval {fmt(low)} to {fmt(high)}")
    detectable = (("intercept_80pct_power", detect), ("intercept_80pct_power_pct_of_lowest", share))

    def done(verdict: Verdict, detail: str) -> CheckResult:
        return with_test(result("intercept-zero", sev, verdict, pval, alpha, detail),
                         statistic="t", statistic_value=t, p_value=pval, alpha=alpha,
                         critical_value=crit, passes_when="p ≥ α", detectable=detectable)

    if pval >= alpha:
        return done(Verdict.PASS, f"The intercept does not differ significantly from zero "
                                  f"({figures}).{power_words}")
    significant = f"The intercept differs significantly from zero ({figures})"
    margin = p.get("negligible_pct")
    if margin is not None and math.isfinite(lowest) and lowest != 0:
        reach = 100 * max(abs(low), abs(high)) / abs(lowest)
        if reach <= margin:
            return done(Verdict.PASS, (
                f"{significant}, but it is negligible in practice: its whole {100 * level:g} % "
                f"interval lies within ±{reach:.3g} % of the fitted response at the lowest "
                f"standard, inside the ±{margin:g} % the profile treats as negligible, so it "
                f"does not change the verdict.{power_words}"))
        relevance = (f"; its {100 * level:g} % interval reaches {reach:.3g} % of the fitted "
                     f"response at the lowest standard, beyond the ±{margin:g} % the profile "
                     "treats as negligible")
    elif math.isfinite(lowest) and lowest != 0:
        # No margin in the profile: the size is still stated, so the reviewer sees whether
        # a significant intercept matters at the LLOQ.
        relevance = (f"; the intercept is {100 * abs(est) / abs(lowest):.3g} % of the fitted "
                     "response at the lowest standard")
    else:
        relevance = ""
    return done(Verdict.FAIL, f"{significant}{relevance}. Look for blank contamination, an "
                              f"interference, or curvature.{power_words}")


INTERCEPT_RULES: tuple[Rule, ...] = (
    Rule("intercept-zero", "Intercept against zero (t-test)",
         {"alpha": Param(float, low=0, high=0.5, default=0.05, low_open=True),
          "negligible_pct": Param(float, low=0, high=100, low_open=True)}, _intercept_zero),
)
