"""The first rules: number of levels, intercept against zero, slope, back-calculation."""

from __future__ import annotations

import math
from collections.abc import Mapping
from typing import Any

from calib.checks.context import CurveContext
from calib.checks.result import CheckResult, Severity, Verdict
from calib.checks.rules.base import Param, Rule, fmt, not_evaluated, result

__all__ = ["BASIC_RULES"]


def min_levels(ctx: CurveContext, p: Mapping[str, Any], sev: Severity) -> CheckResult:
    """At least ``min_levels`` non-zero concentration levels among the fitted standards."""
    n = ctx.n_nonzero_levels
    limit = p["min_levels"]
    verdict = Verdict.PASS if n >= limit else Verdict.FAIL
    detail = f"{n} non-zero concentration level{'s' if n != 1 else ''} in the fit; at least {limit} required"
    return result("min-levels", sev, verdict, float(n), float(limit), detail)


def intercept_zero(ctx: CurveContext, p: Mapping[str, Any], sev: Severity) -> CheckResult:
    """Two-sided t-test of H₀: intercept = 0 on ν = N − p degrees of freedom."""
    fit = ctx.fit
    if fit is None:
        return not_evaluated("intercept-zero", sev, ctx.unfitted_reason)
    if "intercept" not in fit.coefficients:
        return not_evaluated("intercept-zero", sev, f"the {fit.model.value} model has no intercept")
    alpha = p["alpha"]
    pval = fit.p_value("intercept")
    if not math.isfinite(pval):
        return not_evaluated("intercept-zero", sev, "the intercept's standard error is not available")
    level = 1 - alpha
    low, high = fit.confidence_interval("intercept", level)
    est = fit.coefficients["intercept"]
    figures = (f"intercept {fmt(est)}, t = {fit.t_value('intercept'):.3f} on {fit.residual_df} df, "
               f"p = {pval:.3g}; {100 * level:g} % interval {fmt(low)} to {fmt(high)}")
    if pval < alpha:
        detail = (f"The intercept differs significantly from zero ({figures}). Look for blank "
                  "contamination, an interference, or curvature.")
        return result("intercept-zero", sev, Verdict.FAIL, pval, alpha, detail)
    detail = f"The intercept does not differ significantly from zero ({figures})."
    return result("intercept-zero", sev, Verdict.PASS, pval, alpha, detail)


def slope_reference(ctx: CurveContext, p: Mapping[str, Any], sev: Severity) -> CheckResult:
    """Slope against the expected slope: t-test, or the % change against a tolerance."""
    fit = ctx.fit
    if fit is None:
        return not_evaluated("slope-reference", sev, ctx.unfitted_reason)
    slope = fit.coefficients["slope"]
    low, high = fit.confidence_interval("slope")
    interval = (f"slope {fmt(slope)}, {100 * fit.confidence:g} % interval "
                f"{fmt(low)} to {fmt(high)}")
    expected = p.get("expected")
    if expected is None:
        return not_evaluated(
            "slope-reference", sev,
            f"No expected slope in the profile; {interval} (reported for information).")
    change = 100 * (slope - expected) / expected
    tolerance = p.get("tolerance_pct")
    if tolerance is not None:
        ok = abs(change) <= tolerance
        detail = (f"{interval}; {change:+.2f} % from the expected {fmt(expected)} "
                  f"(tolerance ±{tolerance:g} %).")
        return result("slope-reference", sev, Verdict.PASS if ok else Verdict.FAIL,
                       change, float(tolerance), detail)
    alpha = p["alpha"]
    pval = fit.p_value("slope", reference=expected)
    ok = pval >= alpha
    detail = (f"{interval}; expected {fmt(expected)} ({change:+.2f} %), t = "
              f"{fit.t_value('slope', expected):.3f}, p = {pval:.3g}: the expected slope "
              f"{'lies inside' if ok else 'lies outside'} the interval.")
    return result("slope-reference", sev, Verdict.PASS if ok else Verdict.FAIL, pval, alpha, detail)


def back_calculation(ctx: CurveContext, p: Mapping[str, Any], sev: Severity) -> CheckResult:
    """Share of fitted standards whose back-calculated concentration is within tolerance."""
    if ctx.fit is None:
        return not_evaluated("back-calculation", sev, ctx.unfitted_reason)
    tol, low_tol, need = p["tolerance_pct"], p["lowest_level_tolerance_pct"], p["min_pass_pct"]
    judged = [s for s in ctx.standards if s.used and s.point.concentration != 0]
    if not judged:
        return not_evaluated("back-calculation", sev, "no non-zero standard in the fit")
    lowest = min(s.point.concentration for s in judged)
    outside = []
    for s in judged:
        allowed = low_tol if s.point.concentration == lowest else tol
        dev = s.deviation_pct
        if dev is None or not math.isfinite(dev) or abs(dev) > allowed:
            shown = "not readable" if dev is None or not math.isfinite(dev) else f"{dev:+.1f} %"
            outside.append(f"{s.point.source_cell} ({shown})")
    share = 100 * (len(judged) - len(outside)) / len(judged)
    verdict = Verdict.PASS if share >= need else Verdict.FAIL
    detail = (f"{len(judged) - len(outside)} of {len(judged)} standards within ±{tol:g} % "
              f"(±{low_tol:g} % at the lowest level); at least {need:g} % must be")
    if outside:
        detail += "; outside: " + ", ".join(outside)
    return result("back-calculation", sev, verdict, share, float(need), detail)


BASIC_RULES: tuple[Rule, ...] = (
    Rule("min-levels", "Number of concentration levels",
         {"min_levels": Param(int, low=2, default=5)}, min_levels),
    Rule("intercept-zero", "Intercept against zero (t-test)",
         {"alpha": Param(float, low=0, high=0.5, default=0.05, low_open=True)}, intercept_zero),
    Rule("slope-reference", "Slope and its confidence interval",
         {"expected": Param(float, nonzero=True), "tolerance_pct": Param(float, low=0, low_open=True),
          "alpha": Param(float, low=0, high=0.5, default=0.05, low_open=True)},
         slope_reference),
    Rule("back-calculation", "Back-calculated standards within tolerance",
         {"tolerance_pct": Param(float, low=0, high=100, default=15, low_open=True),
          "lowest_level_tolerance_pct": Param(float, low=0, high=100, default=20, low_open=True),
          "min_pass_pct": Param(float, low=0, high=100, default=75)},
         back_calculation),
)
