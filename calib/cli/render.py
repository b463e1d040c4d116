"""Plain-text rendering of results for the terminal."""

from __future__ import annotations

import math
import textwrap

from calib.cautions import CAUTIONS
from calib.checks.evaluate import CurveAssessment, RunAssessment
from calib.verdict_words import VERDICT_WORDS

# The order the run summary counts verdicts in.
_VERDICT_WORDS = {code: VERDICT_WORDS[code] for code in ("accepted", "rejected", "needs-review")}
_CHECK_WORDS = {"pass": "pass", "fail": "FAIL", "warn": "warn", "not-evaluated": "n/e"}


def num(value: float | None, digits: int = 4) -> str:
    """A number in ``digits`` significant digits; an em dash where there is none.

    Examples
    --------
    >>> num(0.000123456), num(None), num(float("nan")), num(1234567.0)
    ('0.0001235', '—', '—', '1.235e+06')
    """
    if value is None or not math.isfinite(value):
        return "—"
    return f"{value:.{digits}g}"


def assessment_text(assessment: RunAssessment) -> str:
    """The whole run: a header line, each curve, the run verdict."""
    src = assessment.run.source
    head = (f"{src.file}{f' [{src.sheet}]' if src.sheet else ''} · profile "
            f"{assessment.profile.name} v{assessment.profile.version} · model "
            f"{assessment.model.value}, weighting {assessment.weighting.value}, "
            f"{100 * assessment.confidence:g} % intervals")
    parts = [head]
    if assessment.run.warnings:
        parts.append("\n".join(textwrap.fill(f"Import note: {w}", width=100,
                                              subsequent_indent="  ")
                                for w in assessment.run.warnings))
    for curve in assessment.curves:
        parts.append(curve_text(curve, unit=assessment.run.units.get("concentration")))
    n = len(assessment.curves)
    counts = {v: sum(c.verdict.value == v for c in assessment.curves) for v in _VERDICT_WORDS}
    summary = ", ".join(f"{k} {counts[k]}" for k in _VERDICT_WORDS if counts[k])
    parts.append(f"Run verdict: {_VERDICT_WORDS[assessment.verdict.value]} "
                 f"({n} curve{'s' if n != 1 else ''}: {summary})")
    return "\n\n".join(parts)


def curve_text(curve: CurveAssessment, *, unit: str | None = None) -> str:
    """One curve: verdict first, then the fit table, the checks, the standards outside tolerance."""
    failing = [c.id for c in curve.checks
               if c.verdict.value in ("fail", "warn") and c.severity.value != "info"]
    lines = [f"{curve.analyte}: {_VERDICT_WORDS[curve.verdict.value]}"
             + (f" ({', '.join(failing)})" if failing else "")]
    if curve.refit is not None:
        lines.append(textwrap.fill(_refit_words(curve), width=100, initial_indent="  ",
                                   subsequent_indent="  "))
    fit = curve.fit
    if fit is None:
        lines.append(f"  not fitted: {curve.unfitted_reason}")
    else:
        level = f"{100 * fit.confidence:g} % interval"
        lines.append(f"  {'coefficient':<12}{'estimate':>12}{'SE':>12}{'t':>10}{'p':>11}   {level}")
        for row in fit.coefficient_table():
            lines.append(f"  {row.name:<12}{num(row.estimate, 6):>12}{num(row.std_error):>12}"
                         f"{num(row.t_value):>10}{num(row.p_value, 3):>11}   "
                         f"{num(row.ci_low, 5)} to {num(row.ci_high, 5)}")
        u = f" {unit}" if unit else ""
        lod = f"   LOD {num(curve.lod.value, 3)}{u}  LOQ {num(curve.loq.value, 3)}{u}" if curve.lod else ""
        lines.append(f"  N = {fit.n_points}, levels = {len({*fit.x.tolist()})}, df = {fit.residual_df}"
                     f"   residual SD {num(fit.residual_sd)}   R² {num(fit.r_squared, 6)}"
                     f"   r {num(fit.r, 6)}{lod}")
    lines.append("  checks:")
    for check in curve.checks:
        detail = textwrap.fill(check.detail, width=100, initial_indent=" " * 6,
                               subsequent_indent=" " * 6)
        lines.append(f"    {_CHECK_WORDS[check.verdict.value]:<5} {check.severity.value:<7}"
                     f"{check.id}: {check.title}\n{detail}")
    excluded = [s for s in curve.standards if not s.used]
    for s in excluded:
        lines.append(f"  excluded {s.point.source_cell} ({num(s.point.concentration)}): "
                     f"{s.exclusion_reason}")
    return "\n".join(lines)


def _refit_words(curve: CurveAssessment) -> str:
    """Why the curve was refitted, and the first fit's key figures beside the refit's."""
    refit = curve.refit
    if refit is None:
        return ""
    first = refit.first_fit
    figures = ", ".join(f"{k} {num(v, 6)}" for k, v in first.coefficients.items())
    return (f"Refitted: {refit.reason} First fit ({first.n_points} standards): {figures}, "
            f"r {num(first.r, 6)}, residual SD {num(first.residual_sd)}.")


def cautions_text() -> str:
    """The cautions, wrapped for a terminal."""
    return textwrap.fill("Caution: " + CAUTIONS, width=100)
