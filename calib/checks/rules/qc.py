"""The ``qc`` rule: the run's QC samples read back from the curve within tolerance of nominal.

ICH M10 (2022), section 4.4 (from memory): at least 2/3 of the QCs within
±15 % of nominal (±20 % at the LLOQ) and at least 50 % at each level.  Each
QC sample (its replicate injections averaged, the dilution factor applied)
is read back and judged by :mod:`calib.fit.qc` (grouping, mean and dilution
included), as ``calib quantify`` reads and judges it, so the check and the quantified batch
agree without either importing the other.  A QC that cannot be read back counts
as outside tolerance; so does a QC outside the curve's range (LLOQ to ULOQ of
the fit, after any narrowing or refit), which would be read by extrapolation.
``min_levels`` and ``min_per_level`` set the least QC design the rule judges
(ICH M10: low, medium and high QCs, at least in duplicate, from memory).
QCs are read against the curve the rule sees: after a refit without rejected
standards, the refitted one.
"""

from __future__ import annotations

from collections.abc import Mapping
from typing import Any

from calib.checks.context import CurveContext
from calib.checks.result import CheckResult, Severity, Verdict
from calib.checks.rules.base import Param, Rule, not_evaluated, result
from calib.fit.calcurve import CalibrationCurve
from calib.fit.qc import QcRule, judge_qcs, qc_found

__all__ = ["QC_RULES"]


def qc_rule(ctx: CurveContext, p: Mapping[str, Any], sev: Severity) -> CheckResult:
    """Share of QCs within tolerance (value) against the required share (limit)."""
    if ctx.fit is None:
        return not_evaluated("qc", sev, ctx.unfitted_reason)
    if not ctx.qcs:
        return not_evaluated("qc", sev, "The run has no QC samples of this analyte.")
    curve = CalibrationCurve.from_fit(ctx.fit, analyte=ctx.analyte)
    rule = QcRule.from_params(p, severity=sev.value, source="profile rule qc")
    summary = judge_qcs(qc_found(curve, ctx.qcs), lloq=curve.lloq, rule=rule,
                        analyte=ctx.analyte, unit=curve.unit, uloq=curve.uloq)
    verdict = Verdict.PASS if summary.verdict == "pass" else Verdict.FAIL
    return result("qc", sev, verdict, summary.share_pct, rule.min_pass_pct, summary.detail)


def _pct(default: float) -> Param:
    return Param(float, low=0, high=100, default=default, low_open=True)


QC_RULES: tuple[Rule, ...] = (
    Rule("qc", "QC samples within tolerance of nominal",
         {"tolerance_pct": _pct(15), "lloq_tolerance_pct": _pct(20),
          "min_pass_pct": _pct(66.7), "min_level_pass_pct": _pct(50),
          "min_levels": Param(int, low=1), "min_per_level": Param(int, low=1)},
         qc_rule),
)
