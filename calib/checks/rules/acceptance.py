"""Acceptance figures labs write into their SOPs: r or r², RSE, intercept share, blanks.

The correlation coefficient alone never shows that a curve is linear (AMC
Technical Brief No. 3; Van Loco et al., Accred. Qual. Assur. 2002), so a
profile may use ``correlation`` only beside a relative-error or lack-of-fit
rule (:func:`calib.checks.profile.parse_profile` refuses it otherwise).
"""

from __future__ import annotations

import math
from collections.abc import Mapping
from typing import Any

from calib.checks.context import CurveContext
from calib.checks.result import CheckResult, Severity, Verdict
from calib.checks.rules.base import Param, Rule, as_shown, fmt, not_evaluated, result
from calib.options import Model, SampleType, Weighting
from calib.run import Point

__all__ = ["ACCEPTANCE_RULES"]

#: Rules that judge how well the curve reads back or fits, one of which must stand beside
#: ``correlation`` (AMC Technical Brief No. 3; Van Loco et al. 2002).
CORRELATION_COMPANIONS = ("back-calculation", "rse", "lack-of-fit")


def correlation(ctx: CurveContext, p: Mapping[str, Any], sev: Severity) -> CheckResult:
    """r or r² against a minimum.

    With both limits given, r is judged for an unweighted straight line with
    an intercept and r² for a weighted, through-origin or quadratic fit (the
    US EPA SW-846 8000D convention, from memory); with one limit, that one is
    judged for every curve.
    """
    fit = ctx.fit
    if fit is None:
        return not_evaluated("correlation", sev, ctx.unfitted_reason)
    min_r, min_r2 = p.get("min_r"), p.get("min_r_squared")
    plain = fit.model is Model.LINEAR and fit.weighting is Weighting.NONE
    use_r = min_r is not None and (plain or min_r2 is None)
    r, r2 = fit.r, fit.r_squared
    if not (math.isfinite(r) and math.isfinite(r2)):
        return not_evaluated("correlation", sev, "r cannot be computed for this curve")
    uncentred = (" (uncentred, as the curve has no intercept; it runs higher than a centred r²)"
                 if fit.model in (Model.ORIGIN, Model.MEAN_RF) else " (centred)")
    uncentred += (f", weighted {fit.weight_basis.value}" if fit.weight_basis is not Weighting.NONE
                  else ", unweighted")
    if fit.model is Model.MEAN_RF:
        # An average response factor has no correlation criterion: its uncentred 1/x²-weighted
        # r² equals 1 − RSD²(n − 1)/n, so a limit on it is a hidden, tighter RF %RSD limit.
        return result("correlation", sev, Verdict.PASS, r2, None, (
            f"Not applied to an average response factor: r² = {r2:.6f}{uncentred} is reported "
            "for information only; the mean-rf calibration is judged by the response-factor "
            "%RSD and the RSE (US EPA SW-846 8000D 11.5.1, from memory)."))
    if use_r:
        value, limit, name = abs(r), float(min_r), "|r|"
    else:
        value, limit, name = r2, float(min_r2), "r²"
    figures = f"{name} = {value:.6f}{uncentred}, at least {limit:g} required"
    caution = " A high r does not by itself show that the curve is linear."
    if as_shown(value, 6) >= limit:  # compared as printed, to six decimals
        return result("correlation", sev, Verdict.PASS, value, limit, f"{figures}.{caution}")
    return result("correlation", sev, Verdict.FAIL, value, limit,
                  f"{figures}: the standards scatter too much about the curve.")


def _relative_standard_error(x: list[float], x_back: list[float], n_params: int) -> float:
    """RSE = 100·√(Σ((x̂ᵢ − xᵢ)/xᵢ)² / (N − p)) of back-calculated concentrations.

    Parameters
    ----------
    x, x_back : list of float
        Nominal and back-calculated concentrations (non-zero nominal only).
    n_params : int
        p, the number of fitted coefficients.

    Returns
    -------
    float
        The RSE in percent; NaN when N ≤ p.

    References
    ----------
    US EPA SW-846 Method 8000D (2018), section 11.5.4.2 (from memory).

    Examples
    --------
    Deviations of +10 %, −10 %, +5 % and 0 % with p = 2: √(0.0225 / 2) = 10.607 %.

    >>> round(_relative_standard_error([1, 2, 4, 8], [1.1, 1.8, 4.2, 8.0], 2), 3)
    10.607
    """
    dof = len(x) - n_params
    if dof <= 0:
        return math.nan
    total = sum(((b - c) / c) ** 2 for c, b in zip(x, x_back))
    return 100 * math.sqrt(total / dof)


def rse(ctx: CurveContext, p: Mapping[str, Any], sev: Severity) -> CheckResult:
    """Relative standard error of the back-calculated standards against ``max_rse_pct``."""
    fit = ctx.fit
    if fit is None:
        return not_evaluated("rse", sev, ctx.unfitted_reason)
    judged = [s for s in ctx.used if s.point.concentration != 0]
    unreadable = [s.point.source_cell for s in judged if s.back_calculated is None]
    if unreadable:
        return not_evaluated("rse", sev, "these standards cannot be read back from the curve: "
                             + ", ".join(unreadable))
    n_params = len(fit.coefficients)
    value = _relative_standard_error([s.point.concentration for s in judged],
                                    [float(s.back_calculated or 0.0) for s in judged], n_params)
    if not math.isfinite(value):
        return not_evaluated("rse", sev, f"{len(judged)} non-zero standards and {n_params} "
                             "coefficients leave no degrees of freedom for the RSE")
    limit = p["max_rse_pct"]
    figures = (f"RSE = {value:.2f} % over {len(judged)} non-zero standards ({len(judged)} − "
               f"{n_params} degrees of freedom), at most {limit:g} % allowed")
    ok = as_shown(value, 2) <= limit  # compared as printed, to 0.01 %
    return result("rse", sev, Verdict.PASS if ok else Verdict.FAIL, value, float(limit),
                  figures + ("." if ok else ": the standards read back too far from nominal."))


def _intercept_fraction(ctx: CurveContext, p: Mapping[str, Any], sev: Severity) -> CheckResult:
    """|intercept| as a percentage of the fitted response at a chosen concentration.

    The concentration is ``concentration`` when given, else the ``level``-th
    lowest non-zero level of the fit, else the middle of the range.  The rule
    judges the size of the intercept: the estimate against ``max_pct``, or,
    with ``bound_confidence``, the farther end of the intercept's two-sided
    interval at that confidence (so that an imprecise intercept cannot pass on
    its point estimate).  A non-significant intercept is never a pass by
    itself: "not significant" may only mean the curve is too imprecise to tell
    (the issue with the old "or not significant" form of this common practice).
    The share is compared as printed, to three significant digits.
    """
    fit = ctx.fit
    if fit is None:
        return not_evaluated("intercept-fraction", sev, ctx.unfitted_reason)
    if "intercept" not in fit.coefficients:
        return not_evaluated("intercept-fraction", sev,
                             f"the {fit.model.value} model has no intercept")
    levels = sorted({s.point.concentration for s in ctx.used if s.point.concentration != 0})
    if not levels:
        return not_evaluated("intercept-fraction", sev, "no non-zero standard in the fit")
    if p.get("concentration") is not None:
        at, where = float(p["concentration"]), f"concentration {fmt(p['concentration'])}"
    elif p.get("level") is not None:
        k = p["level"]
        if k > len(levels):
            return not_evaluated("intercept-fraction", sev, (
                f"the profile names level {k}, but the fit has {len(levels)} non-zero levels"))
        at, where = levels[k - 1], f"level {k} ({fmt(levels[k - 1])})"
    else:
        at = (levels[0] + levels[-1]) / 2
        where = f"the middle of the range ({fmt(at)})"
    response = float(fit.predict(at)[0])
    if not math.isfinite(response) or response <= 0:
        return not_evaluated("intercept-fraction", sev,
                             f"the fitted response at {where} is {fmt(response)}, not positive")
    intercept = fit.coefficients["intercept"]
    share = 100 * abs(intercept) / response
    figures = (f"intercept {fmt(intercept)} is {share:.3g} % of the fitted response "
               f"{fmt(response)} at {where}")
    pval, alpha = fit.p_value("intercept"), 1 - fit.confidence
    if math.isfinite(pval):
        figures += (f" (it {'differs' if pval < alpha else 'does not differ'} significantly "
                    f"from zero at {100 * alpha:g} %, p = {pval:.3g})")
    limit = p.get("max_pct")
    if limit is None:
        return result("intercept-fraction", sev, Verdict.NOT_EVALUATED, share, None,
                      f"{figures[0].upper()}{figures[1:]}; no limit set in the profile "
                      "(reported for information).")
    judged, what = share, "the estimate"
    confidence = p.get("bound_confidence")
    if confidence is not None:
        low, high = fit.confidence_interval("intercept", confidence)
        if not (math.isfinite(low) and math.isfinite(high)):
            return not_evaluated("intercept-fraction", sev, (
                f"{figures[0].upper()}{figures[1:]}; the intercept's {100 * confidence:g} % "
                "interval cannot be worked out, so its size cannot be bounded"))
        judged = 100 * max(abs(low), abs(high)) / response
        what = f"the far end of its {100 * confidence:g} % interval ({fmt(low)} to {fmt(high)})"
        figures += f"; {what} is {judged:.3g} %"
    # Compared as printed, to three significant digits.
    if float(f"{judged:.3g}") <= limit:
        return result("intercept-fraction", sev, Verdict.PASS, judged, float(limit),
                      f"{figures[0].upper()}{figures[1:]}: {what} is within {limit:g} %.")
    return result("intercept-fraction", sev, Verdict.FAIL, judged, float(limit),
                  f"{figures[0].upper()}{figures[1:]}: {what} is more than the {limit:g} % "
                  "allowed. Whether or not it is significant, an intercept this large matters "
                  "at this level; look for blank contamination, an interference or curvature.")


def _not_detected(point: Point) -> bool:
    return not math.isfinite(point.response) and "not detected" in (point.exclusion_reason or "")


def _left_out(point: Point, raw: bool) -> str | None:
    """Why a blank is not judged, or None.

    A blank without internal standard cannot give a response ratio, and the
    importer sets it aside for that; judged on its raw response, it still counts.
    """
    if point.included or not point.exclusion_reason:
        return None
    parts = [part for part in point.exclusion_reason.split("; ")
             if not (raw and ("ratio cannot be formed" in part or "internal-standard" in part))]
    return "; ".join(parts) or None


def blank(ctx: CurveContext, p: Mapping[str, Any], sev: Severity) -> CheckResult:
    """Blank and zero samples' responses as a percentage of the mean LLOQ response.

    The LLOQ is the lowest non-zero level in the fit.  Raw analyte responses
    are compared when the LLOQ standards have them (a run with an internal
    standard), else the fitted responses.  A blank reading "not detected"
    passes.  ``max_is_pct_of_lloq`` also limits the internal-standard response
    of blank samples (those without internal standard), against the mean at
    the LLOQ (ICH M10, from memory: 20 % and 5 %).
    """
    if not ctx.blanks:
        return not_evaluated("blank", sev, f"the run has no blank or zero sample for {ctx.analyte}")
    lloq_standards = [s.point for s in ctx.used if s.point.concentration != 0]
    if not lloq_standards:
        return not_evaluated("blank", sev, "no non-zero standard in the fit to compare with")
    lowest = min(pt.concentration for pt in lloq_standards)
    lloq = [pt for pt in lloq_standards if pt.concentration == lowest]
    raw = all(pt.analyte_response is not None for pt in lloq)

    def reading(pt: Point) -> float:
        value = pt.analyte_response if raw else pt.response
        return math.nan if value is None else float(value)

    reference = sum(reading(pt) for pt in lloq) / len(lloq)
    if not math.isfinite(reference) or reference <= 0:
        return not_evaluated("blank", sev, f"the mean LLOQ response is {fmt(reference)}, "
                             "not positive")
    limit, is_limit = p["max_pct_of_lloq"], p.get("max_is_pct_of_lloq")
    is_values = [pt.is_response for pt in lloq if pt.is_response is not None]
    is_reference = sum(is_values) / len(is_values) if is_values else None
    worst, shown, failing, unread = -math.inf, [], [], []
    for pt in ctx.blanks:
        kind = ("zero standard" if pt.sample_type is SampleType.STANDARD
                else pt.sample_type.value)
        if _not_detected(pt):
            shown.append(f"{pt.source_cell} ({kind}): not detected")
            continue
        value = reading(pt)
        if not math.isfinite(value):
            unread.append(f"{pt.source_cell} ({pt.exclusion_reason or 'no response'})")
            continue
        why = _left_out(pt, raw)
        if why:
            unread.append(f"{pt.source_cell} (excluded: {why})")
            continue
        share = 100 * value / reference
        worst = max(worst, share)
        text = f"{pt.source_cell} ({kind}): {share:.1f} %"
        if share > limit:
            failing.append(text)
        if (is_limit is not None and is_reference and pt.sample_type is SampleType.BLANK
                and pt.is_response is not None):
            is_share = 100 * pt.is_response / is_reference
            text += f", internal standard {is_share:.1f} %"
            if is_share > is_limit:
                failing.append(f"{pt.source_cell} internal standard {is_share:.1f} %")
        shown.append(text)
    if not shown:
        return not_evaluated("blank", sev, "no blank could be read: " + "; ".join(unread))
    basis = "analyte responses" if raw else "responses"
    allowed = f"at most {limit:g} %" + (f" (internal standard {is_limit:g} %)" if is_limit else "")
    detail = (f"Blank {basis} as a share of the mean LLOQ response {fmt(reference)} at "
              f"{fmt(lowest)}, {allowed} allowed: " + "; ".join(shown))
    if unread:
        detail += "; not judged: " + "; ".join(unread)
    value = worst if math.isfinite(worst) else 0.0
    if failing:
        detail += (f". Too high: {', '.join(failing)}; look for contamination or carry-over.")
        return result("blank", sev, Verdict.FAIL, value, float(limit), detail)
    return result("blank", sev, Verdict.PASS, value, float(limit), detail + ".")


def _correlation_params(p: Mapping[str, Any]) -> str | None:
    if "min_r" not in p and "min_r_squared" not in p:
        return "give min_r, min_r_squared or both"
    return None


def _fraction_params(p: Mapping[str, Any]) -> str | None:
    if "or_zero_alpha" in p:
        return ("or_zero_alpha is no longer accepted: a non-significant intercept is not a "
                "pass by itself (it may only mean the curve is imprecise); the rule judges the "
                "size of the intercept against max_pct, or the far end of its interval with "
                "bound_confidence")
    if "concentration" in p and "level" in p:
        return "give either concentration or level, not both"
    return None


ACCEPTANCE_RULES: tuple[Rule, ...] = (
    Rule("correlation", "Correlation coefficient r or r² (never alone)",
         {"min_r": Param(float, low=0, high=1, low_open=True),
          "min_r_squared": Param(float, low=0, high=1, low_open=True)},
         correlation, validate=_correlation_params),
    Rule("rse", "Relative standard error of the back-calculated standards (RSE)",
         {"max_rse_pct": Param(float, low=0, high=100, default=20, low_open=True)}, rse),
    Rule("intercept-fraction", "Intercept as a share of the response at a chosen level",
         {"max_pct": Param(float, low=0, high=100, low_open=True),
          "concentration": Param(float, low=0, low_open=True),
          "level": Param(int, low=1),
          "bound_confidence": Param(float, low=0.5, high=0.999),
          # Refused with the reason by _fraction_params; declared so the message says why.
          "or_zero_alpha": Param(float, low=0, high=0.5, low_open=True)},
         _intercept_fraction, validate=_fraction_params),
    Rule("blank", "Blank responses against the LLOQ response",
         {"max_pct_of_lloq": Param(float, low=0, high=100, default=20, low_open=True),
          "max_is_pct_of_lloq": Param(float, low=0, high=100, low_open=True)},
         blank),
)
