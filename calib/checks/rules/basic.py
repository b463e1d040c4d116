"""The first rules: number of levels and the slope against a reference (the intercept: intercept.py)."""

from __future__ import annotations

import math
from collections.abc import Mapping
from typing import Any

from calib.checks.context import CurveContext
from calib.checks.result import CheckResult, Severity, Verdict
from calib.checks.rules.base import Param, Rule, fmt, not_evaluated, result
from calib.options import Model

__all__ = ["BASIC_RULES"]


def min_levels(ctx: CurveContext, p: Mapping[str, Any], sev: Severity) -> CheckResult:
    """At least ``min_levels`` non-zero concentration levels among the fitted standards.

    A quadratic has one coefficient more to fix, so ``quadratic_min_levels``
    may ask more of it (US EPA SW-846 8000D: 6 rather than 5, from memory).
    """
    n = ctx.n_nonzero_levels
    limit = p["min_levels"]
    if ctx.fit is not None and ctx.fit.model is Model.QUADRATIC and p.get("quadratic_min_levels"):
        limit = p["quadratic_min_levels"]
    verdict = Verdict.PASS if n >= limit else Verdict.FAIL
    detail = f"{n} non-zero concentration level{'s' if n != 1 else ''} in the fit; at least {limit} required"
    return result("min-levels", sev, verdict, float(n), float(limit), detail)


def _slope_reference(ctx: CurveContext, p: Mapping[str, Any], sev: Severity) -> CheckResult:
    """Slope against the expected slope: t-test, or the % change against a tolerance."""
    fit = ctx.fit
    if fit is None:
        return not_evaluated("slope-reference", sev, ctx.unfitted_reason)
    slope = fit.coefficients["slope"]
    low, high = fit.confidence_interval("slope")
    interval = (f"slope {fmt(slope)}, {100 * fit.confidence:g} % interval "
                f"{fmt(low)} to {fmt(high)}")
    if p.get("recent_curves") is not None:
        return _slope_drift(ctx, p, sev, slope, interval)
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


def _slope_drift(ctx: CurveContext, p: Mapping[str, Any], sev: Severity, slope: float,
                 interval: str) -> CheckResult:
    """The slope against the mean of the analyte's most recent accepted slopes (% change)."""
    wanted, least, tolerance = p["recent_curves"], p["min_curves"], p["tolerance_pct"]
    history = ctx.slope_history
    if history is None:
        return not_evaluated("slope-reference", sev, (
            f"The profile compares the slope with the {wanted} most recent accepted curves "
            f"in the archive, but no archive was searched; {interval}."))
    recent = history.recent(wanted)
    n = len(recent.slopes)
    same = f"{history.model} model, weighting {history.weighting}"
    if n < least:
        return not_evaluated("slope-reference", sev, (
            f"{n} earlier accepted curve{'s' if n != 1 else ''} of {ctx.analyte} ({same}) in "
            f"{history.source}; at least {least} needed to judge the drift; {interval}."))
    mean = sum(recent.slopes) / n
    if mean == 0:
        return not_evaluated("slope-reference", sev, "the mean archived slope is 0")
    spread = math.sqrt(sum((s - mean) ** 2 for s in recent.slopes) / (n - 1)) if n > 1 else 0.0
    change = 100 * (slope - mean) / mean
    ok = abs(change) <= tolerance
    detail = (f"{interval}; {change:+.2f} % from {fmt(mean)}, the mean slope of the {n} most "
              f"recent accepted curves in {history.source} ({same}; SD {fmt(spread)}; records "
              f"{recent.records[0]} to {recent.records[-1]}); tolerance ±{tolerance:g} %.")
    if not ok:
        detail += (" The sensitivity has drifted: check the standards' preparation and the "
                   "instrument before running samples.")
    return result("slope-reference", sev, Verdict.PASS if ok else Verdict.FAIL, change,
                  float(tolerance), detail)


def _slope_params(p: Mapping[str, Any]) -> str | None:
    if "recent_curves" in p and "expected" in p:
        return "give either expected or recent_curves, not both"
    if "recent_curves" in p and "tolerance_pct" not in p:
        return "recent_curves needs tolerance_pct (the % change allowed from the archive's mean)"
    return None


BASIC_RULES: tuple[Rule, ...] = (
    Rule("min-levels", "Number of concentration levels",
         {"min_levels": Param(int, low=2, default=5),
          "quadratic_min_levels": Param(int, low=3)}, min_levels),
    Rule("slope-reference", "Slope and its confidence interval",
         {"expected": Param(float, nonzero=True), "tolerance_pct": Param(float, low=0, low_open=True),
          "alpha": Param(float, low=0, high=0.5, default=0.05, low_open=True),
          "recent_curves": Param(int, low=2), "min_curves": Param(int, low=2, default=3)},
         _slope_reference, validate=_slope_params),
)
