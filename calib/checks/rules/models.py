"""Rules on the model's own figures: response factors (mean-rf) and the method standard deviation."""

from __future__ import annotations

import math
from collections.abc import Mapping
from typing import Any

from calib.checks.context import CurveContext
from calib.checks.result import CheckResult, Severity, Verdict
from calib.checks.rules.base import Param, Rule, as_shown, fmt, not_evaluated, result
from calib.fit.limits import method_sd
from calib.options import Model

__all__ = ["MODELS_RULES"]


def _rf_rsd(ctx: CurveContext, p: Mapping[str, Any], sev: Severity) -> CheckResult:
    """%RSD of the response factors against ``max_rsd_pct``; judged for the mean-rf model only.

    For another model the figure is still worked out from the fitted
    standards and given in the explanation, so the analyst sees whether the
    mean response factor would have been allowed; the verdict is then
    ``not-evaluated`` because the limit governs the mean-rf model alone
    (US EPA SW-846 Method 8000D §11.5.1, from memory).
    """
    fit = ctx.fit
    if fit is None:
        return not_evaluated("rf-rsd", sev, ctx.unfitted_reason)
    rf = fit.response_factors
    limit = p["max_rsd_pct"]
    if rf.n < 2 or not math.isfinite(rf.rsd_pct):
        return not_evaluated("rf-rsd", sev, f"{rf.n} response factor{'s' if rf.n != 1 else ''} "
                             "(standards above concentration 0); at least 2 are needed")
    figures = (f"response factors of {rf.n} standards: mean {fmt(rf.mean)}, SD {fmt(rf.sd)}, "
               f"%RSD {rf.rsd_pct:.2f} % (at most {limit:g} % allowed)")
    # Compared as printed, to 0.01 % (limits are inclusive at the reported precision).
    within = as_shown(rf.rsd_pct, 2) <= limit
    if fit.model is not Model.MEAN_RF:
        would = "would be" if within else "would not be"
        return not_evaluated("rf-rsd", sev, (
            f"Applies to the mean-rf model; this curve is {fit.model.value}. For information, "
            f"{figures}: the mean response factor {would} allowed."))
    if within:
        return result("rf-rsd", sev, Verdict.PASS, rf.rsd_pct, float(limit),
                      f"{figures[0].upper()}{figures[1:]}: the mean response factor may be used.")
    return result("rf-rsd", sev, Verdict.FAIL, rf.rsd_pct, float(limit),
                  f"{figures[0].upper()}{figures[1:]}: the factors vary too much for the mean response "
                  "factor; fit a line or a curve instead.")


def _method_sd_rule(ctx: CurveContext, p: Mapping[str, Any], sev: Severity) -> CheckResult:
    """ISO 8466-1 method standard deviation s_x0 = σ̂/b; value = relative V_x0 in %."""
    fit = ctx.fit
    if fit is None:
        return not_evaluated("method-sd", sev, ctx.unfitted_reason)
    m = method_sd(fit)
    if not math.isfinite(m.relative_pct):
        return not_evaluated("method-sd", sev, "the method standard deviation cannot be worked "
                             "out (zero slope or a mean concentration of 0)")
    at = ("" if fit.weight_basis.value == "none" else
          f" (σ of one reading at the mean concentration, σ̂/√w(x̄), weighting "
          f"{fit.weight_basis.value})")
    figures = (f"Method standard deviation s_x0 = σ̂/b{at} = {fmt(m.residual_sd)}/{fmt(m.sensitivity)} "
               f"= {fmt(m.value)}, relative V_x0 = {m.relative_pct:.3g} % of the mean "
               f"concentration {fmt(m.mean_concentration)}")
    limit = p.get("max_relative_pct")
    if limit is None:
        return result("method-sd", sev, Verdict.NOT_EVALUATED, m.relative_pct, None,
                      f"{figures}; no limit set in the profile (reported for information).")
    ok = m.relative_pct <= limit
    return result("method-sd", sev, Verdict.PASS if ok else Verdict.FAIL, m.relative_pct,
                  float(limit), f"{figures}; at most {limit:g} % allowed.")


MODELS_RULES: tuple[Rule, ...] = (
    Rule("rf-rsd", "Spread of the response factors (%RSD)",
         {"max_rsd_pct": Param(float, low=0, high=100, default=20, low_open=True)}, _rf_rsd),
    Rule("method-sd", "Method standard deviation (ISO 8466-1)",
         {"max_relative_pct": Param(float, low=0, high=100, low_open=True)}, _method_sd_rule),
)
