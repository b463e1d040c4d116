"""Judge the curves of a run against an acceptance profile."""

from __future__ import annotations

import math
from collections.abc import Callable, Sequence
from dataclasses import dataclass

import numpy as np

from calib.checks.context import CurveContext, StandardResult
from calib.checks.profile import Profile, load_profile
from calib.checks.result import CheckResult, CurveVerdict, combine_verdicts, worst
from calib.checks.rules import RULES
from calib.errors import NotAcceptedError
from calib.fit.curve import CurveFit, fit_curve
from calib.fit.design import COEFFICIENTS, weighting_refuses
from calib.fit.limits import DetectionLimit, ich_limits
from calib.options import Model, Weighting, parse_option
from calib.run import Point, Run

__all__ = ["CurveAssessment", "RunAssessment", "assess_curve", "evaluate_run"]

#: Called as progress(done, total) after each curve; the CLI may draw a bar with it.
Progress = Callable[[int, int], None]


@dataclass(frozen=True)
class CurveAssessment:
    """One analyte's curve: the fit, every standard back-calculated, the checks, the verdict."""

    analyte: str
    model: Model
    weighting: Weighting
    confidence: float
    standards: tuple[StandardResult, ...]
    fit: CurveFit | None
    unfitted_reason: str
    lod: DetectionLimit | None
    loq: DetectionLimit | None
    checks: tuple[CheckResult, ...]
    verdict: CurveVerdict

    def raise_for_verdict(self) -> None:
        """Raise :class:`~calib.errors.NotAcceptedError` unless the curve was accepted."""
        if self.verdict is not CurveVerdict.ACCEPTED:
            failing = [c.id for c in self.checks if c.verdict.value in ("fail", "warn")]
            raise NotAcceptedError(
                f"{self.analyte}: curve {self.verdict.value}"
                + (f" ({', '.join(failing)})" if failing else "")
            )


@dataclass(frozen=True)
class RunAssessment:
    """Every curve of a run, judged under one profile."""

    run: Run
    profile: Profile
    model: Model
    weighting: Weighting
    confidence: float
    curves: tuple[CurveAssessment, ...]

    @property
    def verdict(self) -> CurveVerdict:
        """The worst curve verdict (a run is accepted only if every curve is)."""
        return worst(c.verdict for c in self.curves)


def evaluate_run(
    run: Run,
    *,
    profile: Profile | None = None,
    model: Model | str | None = None,
    weighting: Weighting | str | None = None,
    confidence: float | None = None,
    progress: Progress | None = None,
) -> RunAssessment:
    """Fit and check every analyte of ``run``.

    Parameters
    ----------
    run : Run
        As returned by :func:`calib.io.read_run`.
    profile : Profile, optional
        Acceptance rules; the shipped ``default`` profile when omitted.
    model, weighting, confidence : optional
        Override the profile's defaults.
    progress : callable, optional
        ``progress(done, total)`` after each analyte.

    Returns
    -------
    RunAssessment
    """
    profile = profile or load_profile("default")
    model = parse_option(Model, model or profile.model, name="model")
    weighting = parse_option(Weighting, weighting or profile.weighting, name="weighting")
    confidence = profile.confidence if confidence is None else confidence
    analytes = run.analytes
    curves = []
    for done, analyte in enumerate(analytes, start=1):
        curves.append(
            assess_curve(
                analyte, run.standards(analyte),
                model=model, weighting=weighting, confidence=confidence, profile=profile,
            )
        )
        if progress is not None:
            progress(done, len(analytes))
    return RunAssessment(run, profile, model, weighting, confidence, tuple(curves))


def assess_curve(
    analyte: str,
    standards: Sequence[Point],
    *,
    model: Model,
    weighting: Weighting,
    confidence: float,
    profile: Profile,
) -> CurveAssessment:
    """Fit one analyte's standards and apply the profile's rules to the curve."""
    levels = {c: i for i, c in enumerate(sorted({p.concentration for p in standards}), start=1)}
    reasons = [_exclusion_reason(p, weighting, profile) for p in standards]
    used = [p for p, r in zip(standards, reasons) if r is None]
    fit, unfitted = _try_fit(used, model=model, weighting=weighting, confidence=confidence)
    results = tuple(
        _standard_result(p, levels[p.concentration], reason, fit)
        for p, reason in zip(standards, reasons)
    )
    ctx = CurveContext(analyte, results, fit, unfitted)
    checks = tuple(RULES[spec.id].run(ctx, spec.params, spec.severity) for spec in profile.rules)
    lod, loq = ich_limits(fit) if fit is not None else (None, None)
    return CurveAssessment(
        analyte=analyte, model=model, weighting=weighting, confidence=confidence,
        standards=results, fit=fit, unfitted_reason=unfitted, lod=lod, loq=loq,
        checks=checks, verdict=combine_verdicts(checks, fitted=fit is not None),
    )


def _exclusion_reason(point: Point, weighting: Weighting, profile: Profile) -> str | None:
    if not point.included:
        return point.exclusion_reason or "excluded by the analyst"
    if point.concentration == 0 and profile.zero_standards == "exclude":
        return f"profile {profile.name} leaves zero-concentration standards out of the fit"
    return weighting_refuses(point.concentration, weighting)


def _try_fit(points: Sequence[Point], *, model: Model, weighting: Weighting,
             confidence: float) -> tuple[CurveFit | None, str]:
    p = len(COEFFICIENTS[model])
    n_levels = len({pt.concentration for pt in points})
    if len(points) <= p:
        return None, (f"the {model.value} model needs at least {p + 1} standards in the fit; "
                      f"{len(points)} available")
    if n_levels < p:
        return None, (f"the {model.value} model needs at least {p} concentration levels; "
                      f"{n_levels} available")
    x = np.array([pt.concentration for pt in points])
    y = np.array([pt.response for pt in points])
    try:
        return fit_curve(x, y, model=model, weighting=weighting, confidence=confidence), ""
    except ValueError as exc:
        return None, f"the curve could not be fitted: {exc}"


def _standard_result(point: Point, level: int, reason: str | None,
                     fit: CurveFit | None) -> StandardResult:
    fitted = back = dev = None
    if fit is not None:
        fitted = float(fit.predict(point.concentration)[0])
        value = float(fit.back_calculate(point.response)[0])
        back = value if math.isfinite(value) else None
        if back is not None and point.concentration != 0:
            dev = 100 * (back - point.concentration) / point.concentration
    return StandardResult(point, level, reason is None, reason, fitted, back, dev)
