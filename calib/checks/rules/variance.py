"""Rules on variance: the ends of the range (ISO 8466-1), all levels, and the weighting advice."""

from __future__ import annotations

import math
from collections.abc import Mapping
from typing import Any

import numpy as np

from calib.checks.context import CurveContext
from calib.checks.result import CheckResult, Severity, Verdict
from calib.checks.rules.base import Param, Rule, fmt, not_evaluated, result
from calib.fit.curve import CurveFit
from calib.fit.design import fit_weights
from calib.fit.variance import recommend_weighting, variance_ends, variance_levels
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
    """Brown–Forsythe (median-centred Levene) test across the replicated levels; value = p."""
    fit = ctx.fit
    if fit is None:
        return not_evaluated("variance-levels", sev, ctx.unfitted_reason)
    weighting = fit.weight_basis
    weights = None if weighting is Weighting.NONE else fit.weights
    median = variance_levels(fit.x, fit.y, weights=weights, center="median")
    if median.reason:
        return not_evaluated("variance-levels", sev, f"Variance test not made: {median.reason}.")
    mean = variance_levels(fit.x, fit.y, weights=weights, center="mean")
    alpha = p["alpha"]
    figures = (f"Brown–Forsythe test of the {_what(fit)} across {len(median.levels)} "
               f"levels: W = {median.statistic:.3g} on ({median.df_num}, {median.df_den}) df, "
               f"p = {median.p_value:.3g}")
    if not mean.reason:
        figures += f" (Levene, mean-centred: p = {mean.p_value:.3g})"
    if median.left_out:
        shown = ", ".join(f"{v:g}" for v in median.left_out)
        figures += f"; left out for a single replicate: {shown}"
    if median.rejects(alpha):
        meaning = ("the variances differ significantly across the levels: weight the fit "
                   "(see the weighting advice) or narrow the range"
                   if weighting is Weighting.NONE else
                   f"they still differ significantly under the weighting {_name(fit)}")
        return result("variance-levels", sev, Verdict.FAIL, median.p_value, alpha,
                      f"{figures}; {meaning}.")
    return result("variance-levels", sev, Verdict.PASS, median.p_value, alpha,
                  f"{figures}; the variances do not differ significantly.")


def advice(ctx: CurveContext, p: Mapping[str, Any], sev: Severity) -> CheckResult:
    """The weighting recommendation, compared with the fit's weighting; never changes the fit."""
    fit = ctx.fit
    if fit is None:
        return not_evaluated("weighting-advice", sev, ctx.unfitted_reason)
    if fit.model is Model.MEAN_RF:
        return not_evaluated("weighting-advice", sev, "the mean-rf model averages the response "
                             "factors with equal weight; there is no weighting to choose")
    candidates = {Weighting.NONE, Weighting.INV_X, Weighting.INV_X2, fit.weighting}
    try:
        found = recommend_weighting(fit.x, fit.y, model=fit.model, candidates=candidates,
                                    alpha=p["alpha"], slack_pct=p["slack_pct"])
    except ValueError as exc:
        return not_evaluated("weighting-advice", sev, f"no advice: {exc}")
    if found.recommended is None:
        return not_evaluated("weighting-advice", sev, found.explanation)
    own = found.candidate(fit.weighting)
    value = own.spread if own.fit is not None else None
    limit = own.spread_limit if own.fit is not None else None
    if value is not None and not math.isfinite(value):
        # Residuals that all vanish leave no spread to compare: nothing to advise on.
        return not_evaluated("weighting-advice", sev, "the weighted residuals have no spread "
                             f"to compare ({found.explanation})")
    if found.recommended is fit.weighting:
        return result("weighting-advice", sev, Verdict.PASS, value, limit,
                      f"The fit's weighting {fit.weighting.value} is the one advised. "
                      f"{found.explanation}")
    return result("weighting-advice", sev, Verdict.WARN, value, limit,
                  f"The fit uses weighting {fit.weighting.value}; the advice is "
                  f"{found.recommended.value} (the fit is not changed). {found.explanation}")


VARIANCE_RULES: tuple[Rule, ...] = (
    Rule("variance-ends", "Equal variances at the lowest and highest level (ISO 8466-1)",
         {"confidence": Param(float, low=0.5, high=0.999, default=0.99)}, ends),
    Rule("variance-levels", "Equal variances across the levels (Brown–Forsythe)",
         {"alpha": Param(float, low=0, high=0.5, default=0.05, low_open=True)}, levels),
    Rule("weighting-advice", "Weighting advice",
         {"alpha": Param(float, low=0, high=0.5, default=0.05, low_open=True),
          "slack_pct": Param(float, low=0, high=100, default=10)}, advice),
)
