"""Rules on variance: the ends of the range (ISO 8466-1), all levels, and the weighting advice."""

from __future__ import annotations

from collections.abc import Mapping
from typing import Any

import numpy as np

from calib.checks.context import CurveContext
from calib.checks.result import CheckResult, Severity, Verdict
from calib.checks.rules.base import Param, Rule, fmt, not_evaluated, result, with_test
from calib.checks.rules.base import result as _result
from calib.fit.curve import CurveFit
from calib.fit.design import fit_weights
from calib.fit.distributions import chi2_isf
from calib.fit.homogeneity import bartlett_levels
from calib.fit.variance import variance_ends, variance_levels
from calib.fit.weighting_test import VARIANCE_POWER, weighting_test
from calib.options import Model, Weighting

__all__ = ["VARIANCE_RULES"]


def _what(fit: CurveFit) -> str:
    """How the variances are described: of the responses, or of the weighted responses."""
    if fit.model is Model.MEAN_RF:
        return ("replicate variances scaled by 1/x² (s²·w; the mean response factor assumes "
                "a constant relative spread)")
    if fit.weighting is Weighting.NONE:
        return "replicate variances"
    return f"replicate variances of the weighted responses (s²·w, weighting {fit.weighting.value})"


def _name(fit: CurveFit) -> str:
    return "of the mean response factor" if fit.model is Model.MEAN_RF else fit.weighting.value


def ends(ctx: CurveContext, p: Mapping[str, Any], sev: Severity) -> CheckResult:
    """ISO 8466-1: replicate variances at the lowest and highest level, PG against F(0.99)."""
    fit = ctx.fit
    if fit is None:
        return not_evaluated("variance-ends", sev, ctx.unfitted_reason)
    weighting = fit.weight_basis
    weights = None if weighting is Weighting.NONE else fit.weights
    x, y = fit.x, fit.y
    if ctx.variance_only:
        # ISO 8466-1: the end replicates kept out of the regression serve this test.
        x = np.concatenate([x, [s.point.concentration for s in ctx.variance_only]])
        y = np.concatenate([y, [s.point.response for s in ctx.variance_only]])
        try:
            weights = None if weighting is Weighting.NONE else fit_weights(x, weighting, y=y)
        except ValueError as exc:
            return not_evaluated("variance-ends", sev, f"Variance test not made: {exc}.")
    test = variance_ends(x, y, weights=weights, confidence=p["confidence"])
    if test.reason:
        return not_evaluated("variance-ends", sev, f"Variance test not made: {test.reason}.")
    where = "highest" if test.larger_at_high else "lowest"
    figures = (f"{_what(fit)[0].upper()}{_what(fit)[1:]} at the lowest level ({test.low:g}, "
               f"{test.n_low} replicates, s² = {fmt(test.var_low)}) and the highest "
               f"({test.high:g}, {test.n_high} replicates, s² = {fmt(test.var_high)}): "
               f"PG = {fmt(test.statistic)} against F({test.confidence:g}; {test.df_num}, "
               f"{test.df_den}) = {fmt(test.critical)}")
    # PG puts the larger variance on top, so either end can make it large: the test is
    # two-sided and its size is 2·(1 − confidence) (2 % at ISO 8466-1's 0.99), its p-value
    # twice the upper tail.
    alpha_ends = round(2 * (1 - test.confidence), 12)
    p_two = min(1.0, 2 * test.p_value)
    figures += f" (two-sided: p = {p_two:.3g}, size {alpha_ends:g})"

    def result(rule_id: str, sev: Severity, verdict: Verdict, value: float | None,
               limit: float | None, detail: str) -> CheckResult:
        return with_test(_result(rule_id, sev, verdict, value, limit, detail),
                         statistic="F (PG = larger/smaller variance)",
                         statistic_value=test.statistic, p_value=p_two, alpha=alpha_ends,
                         critical_value=test.critical)

    if test.homogeneous:
        meaning = ("the variances do not differ significantly, so equal weights suit this range"
                   if weighting is Weighting.NONE else
                   f"the weighting {_name(fit)} evens them out")
        return result("variance-ends", sev, Verdict.PASS, test.statistic, test.critical,
                      f"{figures}; {meaning}.")
    meaning = (f"the variance is significantly larger at the {where} level: narrow the working "
               "range or weight the fit"
               if weighting is Weighting.NONE else
               f"they still differ significantly (larger at the {where} level) under the "
               f"weighting {_name(fit)}: consider another weighting or a narrower range")
    return result("variance-ends", sev, Verdict.FAIL, test.statistic, test.critical,
                  f"{figures}; {meaning}.")


def levels(ctx: CurveContext, p: Mapping[str, Any], sev: Severity) -> CheckResult:
    """Bartlett's test across the replicated levels; value = p (see calib.fit.homogeneity)."""
    fit = ctx.fit
    if fit is None:
        return not_evaluated("variance-levels", sev, ctx.unfitted_reason)
    weighting = fit.weight_basis
    weights = None if weighting is Weighting.NONE else fit.weights
    test = ctx.shared("bartlett", lambda: bartlett_levels(fit.x, fit.y, weights=weights))
    if test.reason:
        return not_evaluated("variance-levels", sev, f"Variance test not made: {test.reason}.")
    alpha = p["alpha"]
    crit = float(chi2_isf(alpha, test.df))
    figures = (f"Bartlett's test of the {_what(fit)} across {len(test.levels)} levels: "
               f"T = {test.statistic:.3g} on {test.df} df against χ²({1 - alpha:g}; {test.df}) "
               f"= {crit:.3g}, p = {test.p_value:.3g}; largest/smallest variance "
               f"{max(test.variances) / min(test.variances):.3g}")
    robust = variance_levels(fit.x, fit.y, weights=weights, center="median")
    if not robust.reason:
        figures += f" (Brown–Forsythe, for information: p = {robust.p_value:.3g})"
    if test.left_out:
        shown = ", ".join(f"{v:g}" for v in test.left_out)
        figures += f"; left out for a single replicate: {shown}"

    def done(verdict: Verdict, detail: str) -> CheckResult:
        return with_test(result("variance-levels", sev, verdict, test.p_value, alpha, detail),
                         statistic="chi2 (Bartlett T)", statistic_value=test.statistic,
                         p_value=test.p_value, alpha=alpha, critical_value=crit)

    if test.rejects(alpha):
        meaning = ("the variances differ significantly across the levels: weight the fit "
                   "(see the weighting advice) or narrow the range"
                   if weighting is Weighting.NONE else
                   f"they still differ significantly under the weighting {_name(fit)}")
        return done(Verdict.FAIL, f"{figures}; {meaning}.")
    smallest = min(len(set(np.flatnonzero(fit.x == v))) for v in test.levels)
    note = (" With so few replicates only a large difference would show." if smallest <= 3
            else "")
    return done(Verdict.PASS, f"{figures}; no significant difference between the variances "
                f"at α = {alpha:g}.{note}")


def advice(ctx: CurveContext, p: Mapping[str, Any], sev: Severity) -> CheckResult:
    """Weighting advice as a score test of the fit's weighting; never changes the fit.

    The fit's weighting is the null hypothesis; the advice differs from it only when the
    Cook–Weisberg test rejects at ``alpha`` (see :mod:`calib.fit.weighting_test`), so a
    correct weighting is advised against at most α of the time.  ``slack_pct`` is kept
    for old profiles and no longer used.
    """
    fit = ctx.fit
    if fit is None:
        return not_evaluated("weighting-advice", sev, ctx.unfitted_reason)
    if fit.model is Model.MEAN_RF:
        return not_evaluated("weighting-advice", sev, "the mean-rf model averages the response "
                             "factors with equal weight; there is no weighting to choose")
    test = weighting_test(fit.x, fit.residuals, fit.weights, fit.weighting)
    if test.reason:
        return not_evaluated("weighting-advice", sev, f"no advice: {test.reason}")
    alpha = p["alpha"]
    crit = float(chi2_isf(alpha, 1))
    trend = "grows" if test.gamma > 0 else "shrinks"
    figures = (f"Cook–Weisberg score test of the weighting {fit.weighting.value} against a "
               f"variance that changes as a power of the concentration: S = "
               f"{test.statistic:.3g} on 1 df against χ²({1 - alpha:g}; 1) = {crit:.3g}, "
               f"p = {test.p_value:.3g}; the weighted scatter {trend} as x^{test.gamma:.2g}")

    def done(verdict: Verdict, detail: str) -> CheckResult:
        return with_test(result("weighting-advice", sev, verdict, test.p_value, alpha, detail),
                         statistic="chi2 (score S)", statistic_value=test.statistic,
                         p_value=test.p_value, alpha=alpha, critical_value=crit)

    if not test.rejects(alpha):
        return done(Verdict.PASS, f"The weighting {fit.weighting.value} is not contradicted "
                    f"({figures}; p ≥ {alpha:g}): no change advised.")
    if fit.weighting not in VARIANCE_POWER:
        return done(Verdict.WARN, f"The weighted residuals still change with concentration "
                    f"({figures}; p < {alpha:g}): reconsider the weighting (the fit is not "
                    "changed).")
    advised = test.advised(alpha)
    return done(Verdict.WARN, f"The fit uses weighting {fit.weighting.value}; the advice is "
                f"{advised.value} ({figures}; p < {alpha:g}). The fit is not changed.")


VARIANCE_RULES: tuple[Rule, ...] = (
    Rule("variance-ends", "Equal variances at the lowest and highest level (ISO 8466-1)",
         {"confidence": Param(float, low=0.5, high=0.999, default=0.99)}, ends),
    Rule("variance-levels", "Equal variances across the levels (Bartlett)",
         {"alpha": Param(float, low=0, high=0.5, default=0.05, low_open=True)}, levels),
    Rule("weighting-advice", "Weighting advice (score test of the weighting)",
         {"alpha": Param(float, low=0, high=0.5, default=0.05, low_open=True),
          "slack_pct": Param(float, low=0, high=100, default=10)}, advice),
)
