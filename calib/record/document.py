"""The ``calib.check/1`` document: a run's assessment as plain JSON-ready data."""

from __future__ import annotations

import math
from dataclasses import replace
from typing import Any

from calib import __version__
from calib.checks.evaluate import CurveAssessment, RunAssessment
from calib.checks.result import verdict_reasons
from calib.options import own_weighting
from calib.run import response_basis as basis_of

__all__ = ["CHECK_SCHEMA", "check_document", "finite_or_none", "response_basis"]

CHECK_SCHEMA = "calib.check/1"


def finite_or_none(value: float | None) -> float | None:
    """``value`` as a float, or None where it is missing, NaN or infinite (JSON has no NaN).

    Examples
    --------
    >>> finite_or_none(float("nan")) is None, finite_or_none(2)
    (True, 2.0)
    """
    if value is None:
        return None
    value = float(value)
    return value if math.isfinite(value) else None


def check_document(assessment: RunAssessment) -> dict[str, Any]:
    """Build the ``calib.check/1`` document of SPEC §7 for ``assessment``.

    Every number keeps full double precision; values that cannot be computed
    are ``None``.  Beyond the keys of SPEC §7 the document carries
    ``exclusions`` (what the analyst excluded when checking) and, per curve,
    ``reasons``, ``working_range``, ``refit`` and ``response_basis``, and ``standards``
    when the run names its reference materials (see ``calib/record/schemas/check-1.json``).
    """
    run, profile = assessment.run, assessment.profile
    document = {
        "schema": CHECK_SCHEMA,
        "tool_version": __version__,
        "source": {"file": run.source.file, "sha256": run.source.sha256, "sheet": run.source.sheet,
                   "layout": run.source.layout},
        "profile": {"name": profile.name, "version": profile.version, "sha256": profile.sha256},
        "curves": [_curve_document(c) for c in assessment.curves],
        "verdict": assessment.verdict.value,
        "exclusions": [
            {"target": e.target, "reason": e.reason, "cells": list(e.cells),
             "analytes": list(e.analytes)}
            for e in assessment.exclusions
        ],
    }
    if assessment.standards is not None:  # only when a standards file was given
        from calib.io.standards import standards_section

        document["standards"] = standards_section(assessment.standards)
    return document


def _curve_document(curve: CurveAssessment) -> dict[str, Any]:
    """One entry of ``curves`` in the ``calib.check/1`` document."""
    fit = curve.fit
    coefficients: dict[str, Any] = {}
    if fit is not None:
        for row in fit.coefficient_table():
            coefficients[row.name] = {
                "estimate": finite_or_none(row.estimate),
                "std_error": finite_or_none(row.std_error),
                "t_value": finite_or_none(row.t_value),
                "p_value": finite_or_none(row.p_value),
                "ci_low": finite_or_none(row.ci_low),
                "ci_high": finite_or_none(row.ci_high),
            }
    used = [s for s in curve.standards if s.used]
    return {
        "analyte": curve.analyte,
        # Samples must be read on the same basis (calib.quantify refuses another).
        "response_basis": response_basis(curve),
        "model": curve.model.value,
        # The one statement of the weighting: the fit's (mean-rf: its own 1/x2).
        "weighting": (own_weighting(curve.model) or curve.weighting).value,
        "confidence": curve.confidence,
        "n_points": len(used),
        "n_levels": len({s.point.concentration for s in used}),
        "residual_df": fit.residual_df if fit is not None else None,
        "coefficients": coefficients,
        "residual_sd": finite_or_none(fit.residual_sd) if fit is not None else None,
        "r_squared": finite_or_none(fit.r_squared) if fit is not None else None,
        "r": finite_or_none(fit.r) if fit is not None else None,
        "lod": _limit(curve.lod),
        "loq": _limit(curve.loq),
        "points": [
            {
                "source_cell": s.point.source_cell,
                "level": s.level,
                "concentration": s.point.concentration,
                "response": finite_or_none(s.point.response),
                "fitted": finite_or_none(s.fitted),
                "back_calculated": finite_or_none(s.back_calculated),
                "deviation_pct": finite_or_none(s.deviation_pct),
                "included": s.used,
                "exclusion_reason": s.exclusion_reason,
            }
            for s in curve.standards
        ],
        "checks": _checks(curve),
        "verdict": curve.verdict.value,
        "reasons": list(curve.reasons),
        "working_range": _working_range(curve),
        "refit": _refit(curve),
    }


def _refit(curve: CurveAssessment) -> dict[str, Any] | None:
    """The standards rejected and left out before the QCs were read, and the first fit."""
    refit = curve.refit
    if refit is None:
        return None
    first = refit.first_fit
    # The first fit's checks in the very form of the curve's own.
    checks = _checks(replace(curve, checks=refit.first_checks))
    return {
        "reason": refit.reason,
        "rounds": refit.rounds,
        "note": refit.note,
        "rejected": [{"source_cell": r.source_cell, "concentration": r.concentration,
                      "deviation_pct": finite_or_none(r.deviation_pct),
                      "allowed_pct": r.allowed_pct, "round": r.round}
                     for r in refit.rejected],
        "first_fit": {
            "n_points": int(first.x.size),
            "coefficients": {k: finite_or_none(v) for k, v in first.coefficients.items()},
            "residual_sd": finite_or_none(first.residual_sd),
            "r": finite_or_none(first.r),
            "verdict": refit.first_verdict.value,
            "reasons": list(verdict_reasons(refit.first_checks)),
            "checks": checks,
        },
    }


def response_basis(curve: CurveAssessment) -> str:
    """``ratio`` when the standards' responses are ratios to an internal standard, else ``raw``."""
    return basis_of(s.point for s in curve.standards)


def _checks(curve: CurveAssessment) -> list[dict[str, Any]]:
    out = []
    for c in curve.checks:
        entry: dict[str, Any] = {
            "id": c.id,
            "title": c.title,
            "verdict": c.verdict.value,
            "severity": c.severity.value,
            "value": finite_or_none(c.value),
            "limit": finite_or_none(c.limit),
            "detail": c.detail,
        }
        if c.statistic is not None:
            entry["test"] = _test(c)
        out.append(entry)
    return out


def _test(c: Any) -> dict[str, Any]:
    """A statistical check's test, named: statistic, raw and family-adjusted p, α, side."""
    return {
        "statistic": c.statistic,
        "statistic_value": finite_or_none(c.statistic_value),
        "p_value": finite_or_none(c.p_value),
        "alpha": finite_or_none(c.alpha),
        "critical_value": finite_or_none(c.critical_value),
        "passes_when": c.passes_when,
        "adjusted_p": finite_or_none(c.adjusted_p),
        "family_alpha": finite_or_none(c.family_alpha),
        "detectable": {k: finite_or_none(v) for k, v in c.detectable},
    }


def _outcome(curve: CurveAssessment) -> dict[str, Any]:
    """A curve's result on another range: verdict, reasons, range, checks."""
    return {
        "verdict": curve.verdict.value,
        "reasons": list(curve.reasons),
        "lloq": curve.lloq,
        "uloq": curve.uloq,
        "n_points": sum(s.used for s in curve.standards),
        "checks": _checks(curve),
    }


def _working_range(curve: CurveAssessment) -> dict[str, Any]:
    """The range of the fit, the analyst's range (full-range result beside) and calib's proposal."""
    applied = proposed = None
    if curve.working_range is not None and curve.original is not None:
        w = curve.working_range
        applied = {"low": w.low, "high": w.high, "reason": w.reason, "as_proposed": w.proposed,
                   "left_out": list(w.left_out), "original": _outcome(curve.original)}
    if curve.proposal is not None:
        proposal = curve.proposal
        proposed = {"lloq": proposal.lloq, "uloq": proposal.uloq,
                    "dropped_levels": list(proposal.dropped), "reason": proposal.reason,
                    **_outcome(proposal.assessment)}
    return {"lloq": curve.lloq, "uloq": curve.uloq, "applied": applied, "proposed": proposed}


def _limit(limit: Any) -> dict[str, Any] | None:
    if limit is None:
        return None
    return {"value": finite_or_none(limit.value), "method": limit.method}
