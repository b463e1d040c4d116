"""Judge the curves of a run against an acceptance profile."""

from __future__ import annotations

import math
from collections.abc import Callable, Mapping, Sequence
from dataclasses import dataclass, replace
from typing import TYPE_CHECKING

import numpy as np

from calib.checks.batched import Precomputed, precompute
from calib.checks.context import VARIANCE_ONLY, CurveContext, StandardResult
from calib.checks.exclusions import AppliedExclusion, Exclusion, apply_exclusions
from calib.checks.family import apply_family
from calib.checks.history import SlopeHistory
from calib.checks.narrowing import (
    AppliedRange,
    RangeError,
    RangeProposal,
    WorkingRange,
    kept_levels,
    narrow_points,
    propose_range,
)
from calib.checks.overrides import given_options, settings_by_analyte, with_settings_line
from calib.checks.profile import Profile, load_profile
from calib.checks.refit import Refit, refit_without_rejected
from calib.checks.result import CheckResult, CurveVerdict, combine_verdicts, verdict_reasons, worst
from calib.checks.rules import RULES
from calib.errors import NotAcceptedError
from calib.fit.batch import fit_batch
from calib.fit.curve import CurveFit, fit_curve
from calib.fit.design import (
    COEFFICIENTS,
    model_refuses,
    variance_power_problem,
    weighting_refuses,
)
from calib.fit.limits import DetectionLimit, detection_limits
from calib.options import Model, SampleType, Weighting
from calib.run import Point, Run
from calib.tabular import Tabular

if TYPE_CHECKING:
    import pandas as pd

    from calib.io.standards import Standards

__all__ = ["CurveAssessment", "RunAssessment", "assess_curve", "evaluate_run"]

#: Called as progress(done, total) after each curve; the CLI may draw a bar with it.
Progress = Callable[[int, int], None]


@dataclass(frozen=True)
class CurveAssessment(Tabular):
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
    #: The working range the analyst set, when one was; ``original`` is then the curve
    #: on its full range, shown beside.
    working_range: AppliedRange | None = None
    #: A narrowed range calib proposes (never applied by itself), when the profile allows.
    proposal: RangeProposal | None = None
    original: CurveAssessment | None = None
    #: How the curve was refitted without standards its profile rejected, when it was.
    refit: Refit | None = None

    def to_frame(self) -> pd.DataFrame:
        """The standards, back-calculated, as a pandas DataFrame (shown as a table in Jupyter)."""
        from calib.tabular import curve_frame

        return curve_frame(self)

    @property
    def reasons(self) -> tuple[str, ...]:
        """Why the curve is not accepted, in plain words, the weightiest first."""
        return verdict_reasons(self.checks, unfitted_reason=self.unfitted_reason
                               if self.fit is None else "")

    @property
    def lloq(self) -> float | None:
        """Lowest non-zero nominal concentration in the fit."""
        levels = [s.point.concentration for s in self.standards if s.used and s.point.concentration]
        return min(levels) if levels else None

    @property
    def uloq(self) -> float | None:
        """Highest nominal concentration in the fit."""
        levels = [s.point.concentration for s in self.standards if s.used and s.point.concentration]
        return max(levels) if levels else None

    def raise_for_verdict(self) -> None:
        """Raise :class:`~calib.errors.NotAcceptedError` unless the curve was accepted."""
        if self.verdict is not CurveVerdict.ACCEPTED:
            failing = [c.id for c in self.checks if c.verdict.value in ("fail", "warn")]
            raise NotAcceptedError(
                f"{self.analyte}: curve {self.verdict.value}"
                + (f" ({', '.join(failing)})" if failing else "")
            )


@dataclass(frozen=True)
class RunAssessment(Tabular):
    """Every curve of a run, judged under one profile."""

    run: Run
    profile: Profile
    model: Model
    weighting: Weighting
    confidence: float
    curves: tuple[CurveAssessment, ...]
    #: Exclusions the analyst asked for when checking (beside those the run file makes).
    exclusions: tuple[AppliedExclusion, ...] = ()
    #: The reference materials and levels the standards came from (calib.io.standards),
    #: when a standards file was given; see calib.checks.traceability.
    standards: Standards | None = None

    def to_frame(self) -> pd.DataFrame:
        """One row per curve, as a pandas DataFrame (shown as a table in Jupyter)."""
        from calib.tabular import run_frame

        return run_frame(self)

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
    exclusions: Sequence[Exclusion] = (),
    ranges: Sequence[WorkingRange] = (),
    slope_history: Mapping[str, SlopeHistory] | None = None,
) -> RunAssessment:
    """Fit and check every analyte of ``run``.

    Parameters
    ----------
    run : Run
        As returned by :func:`calib.io.read_run`.
    profile : Profile, optional
        Acceptance rules; the shipped ``default`` profile when omitted.  Its
        ``[[analyte]]`` entries apply to the analytes they name: each such curve is
        judged under its own model, weighting and limits and carries an
        ``analyte-settings`` line saying so (:mod:`calib.checks.overrides`).
    model, weighting, confidence : optional
        Override the profile's defaults for every curve, the ``[[analyte]]`` entries'
        included (:meth:`calib.options.FitOptions.given`: a weighting not given stays
        the profile's, ``mean-rf`` takes its own ``1/x2``).
    progress : callable, optional
        ``progress(done, total)`` after each analyte (one pass over the run).
    exclusions : sequence of Exclusion
        Points the analyst leaves out, each with a reason.
    ranges : sequence of WorkingRange
        Working ranges the analyst sets (one per analyte, or one for all).
    slope_history : mapping of analyte to SlopeHistory, optional
        Earlier accepted slopes, for ``slope-reference`` with ``recent_curves``.

    Returns
    -------
    RunAssessment

    Raises
    ------
    OptionError
        If the model, weighting and confidence cannot be used together.
    InputError
        If an exclusion names no point of the run.
    RangeError
        If a range names no analyte of the run, or gives no reason and is not
        the range calib proposes.
    ProfileError
        If two ``[[analyte]]`` patterns match one analyte of the run.
    """
    profile = profile or load_profile("default")
    options = given_options(profile, model, weighting, confidence)
    run, applied = apply_exclusions(run, exclusions) if exclusions else (run, ())
    analytes = run.analytes
    wanted = _ranges_by_analyte(ranges, analytes)
    history = slope_history or {}
    by_analyte = _points_by_analyte(run.points)
    standards = {a: tuple(by_analyte[a]["standards"]) for a in analytes}
    # [[analyte]] entries: each curve judged under its own profile; --model and
    # --weighting, when given, apply to every curve.
    settings = {}
    for a, (own, entry) in settings_by_analyte(profile, analytes).items():
        mine = own.fit_options.given(model, weighting, confidence)
        settings[a] = (own, entry, mine.model, mine.weighting)
    confidence = options.confidence
    fits: dict[str, tuple[CurveFit | None, str]] = {}
    used: dict[str, list[Point]] = {}
    for (m, w), group in _fit_groups(settings).items():
        fits.update(_batched_fits({a: standards[a] for a in group}, model=m, weighting=w,
                                  confidence=confidence, profile=settings[group[0]][0],
                                  kept=used))
    # The diagnostics of curves sharing a design, worked out together (calib.checks.batched).
    shared = precompute({a: f for a, (f, _) in fits.items() if f is not None}, used)
    curves = []
    for done, analyte in enumerate(analytes, start=1):
        own, entry, m, w = settings[analyte]
        curve = _assess_analyte(analyte, standards[analyte], by_analyte[analyte], own,
                                model=m, weighting=w, confidence=confidence,
                                history=history.get(analyte), first=fits.get(analyte),
                                working=wanted.get(analyte), shared=shared.get(analyte))
        curves.append(curve if entry is None else with_settings_line(curve, entry))
        if progress is not None:
            progress(done, len(analytes))
    return RunAssessment(run, profile, options.model, options.weighting, confidence, tuple(curves),
                         applied)


def _fit_groups(settings: Mapping[str, tuple[Profile, object, Model, Weighting]]
                ) -> dict[tuple[Model, Weighting], list[str]]:
    """The analytes that share a model and weighting, fitted together (in run order)."""
    groups: dict[tuple[Model, Weighting], list[str]] = {}
    for analyte, (_, _, m, w) in settings.items():
        groups.setdefault((m, w), []).append(analyte)
    return groups


def _assess_analyte(analyte: str, standards: tuple[Point, ...],
                    points: Mapping[str, list[Point]], profile: Profile, *, model: Model,
                    weighting: Weighting, confidence: float, history: SlopeHistory | None,
                    first: tuple[CurveFit | None, str] | None,
                    working: WorkingRange | None,
                    shared: Precomputed | None = None) -> CurveAssessment:
    """One analyte's curve under its own profile, with its proposed and applied ranges."""
    blanks, qcs = tuple(points["blanks"]), tuple(points["qcs"])

    def assess(chosen: Sequence[Point]) -> CurveAssessment:
        return assess_curve(analyte, chosen, model=model, weighting=weighting,
                            confidence=confidence, profile=profile, blanks=blanks,
                            slope_history=history, qcs=qcs)

    def assess_first(chosen: Sequence[Point]) -> CurveAssessment:
        # The full-range curve takes its fit from the batch; narrowed trials refit alone.
        return _assess(analyte, chosen, model=model, weighting=weighting,
                       confidence=confidence, profile=profile, blanks=blanks,
                       slope_history=history, qcs=qcs, fitted=first, precomputed=shared)

    return _with_ranges(assess, standards, profile, working, first=assess_first)


def _ranges_by_analyte(ranges: Sequence[WorkingRange],
                       analytes: Sequence[str]) -> dict[str, WorkingRange]:
    by_name = {a.casefold(): a for a in analytes}
    wanted: dict[str, WorkingRange] = {}
    for working in ranges:
        if working.analyte is None:
            for analyte in analytes:
                wanted.setdefault(analyte, working)
            continue
        analyte = by_name.get(working.analyte.casefold())
        if analyte is None:
            raise RangeError(f"range {working.analyte}:{working.text} names no analyte of the "
                             f"run; its analytes are {', '.join(analytes)}")
        wanted[analyte] = working
    return wanted


def _with_ranges(assess: Callable[[Sequence[Point]], CurveAssessment],
                 standards: Sequence[Point], profile: Profile,
                 working: WorkingRange | None, *,
                 first: Callable[[Sequence[Point]], CurveAssessment] | None = None
                 ) -> CurveAssessment:
    """The curve, with calib's proposed range and the analyst's range when one is set.

    ``first`` assesses the full-range curve when given (the batched fit); ``assess`` the rest.
    """
    curve = (first or assess)(standards)
    proposal = None
    if profile.narrowing.propose:
        proposal = propose_range(curve, standards, assess,
                                 max_dropped=profile.narrowing.max_dropped_levels)
    if working is None:
        return replace(curve, proposal=proposal)
    as_proposed = (proposal is not None
                   and kept_levels(curve, working) == kept_levels(curve, proposal.range))
    reason = working.reason
    if reason is None:
        if proposal is None or not as_proposed:
            offered = (f"calib proposed {proposal.range.text}" if proposal is not None
                       else "calib proposed no narrowing of this curve")
            raise RangeError(f"range {working.text} for {curve.analyte} needs a reason ({offered})")
        reason = f"as calib proposed: {proposal.reason}"
    why = f"outside the working range {working.text} set by the analyst: {reason}"
    narrowed = assess(narrow_points(standards, working, why))
    left_out = tuple(s.point.source_cell for s, before in zip(narrowed.standards, curve.standards)
                     if before.used and not s.used)
    applied = AppliedRange(working.low, working.high, reason, as_proposed, left_out)
    return replace(narrowed, working_range=applied, proposal=proposal, original=curve)


def assess_curve(
    analyte: str,
    standards: Sequence[Point],
    *,
    model: Model,
    weighting: Weighting,
    confidence: float,
    profile: Profile,
    blanks: Sequence[Point] = (),
    slope_history: SlopeHistory | None = None,
    qcs: Sequence[Point] = (),
) -> CurveAssessment:
    """Fit one analyte's standards and apply the profile's rules to the curve.

    ``blanks`` are the analyte's blank and zero samples; its zero-concentration
    standards join them for the ``blank`` rule.  ``slope_history`` holds earlier
    accepted slopes for the ``slope-reference`` rule's archive form.  ``qcs`` are
    the analyte's QC samples, for the ``qc`` rule.
    """
    return _assess(analyte, standards, model=model, weighting=weighting, confidence=confidence,
                   profile=profile, blanks=blanks, slope_history=slope_history, qcs=qcs)


def _assess(
    analyte: str,
    standards: Sequence[Point],
    *,
    model: Model,
    weighting: Weighting,
    confidence: float,
    profile: Profile,
    blanks: Sequence[Point] = (),
    slope_history: SlopeHistory | None = None,
    qcs: Sequence[Point] = (),
    fitted: tuple[CurveFit | None, str] | None = None,
    precomputed: Precomputed | None = None,
) -> CurveAssessment:
    """:func:`assess_curve`, taking the fit (or the reason there is none) when already made,
    and diagnostics worked out with the run's other curves (used for that fit only)."""
    levels = {c: i for i, c in enumerate(sorted({p.concentration for p in standards}), start=1)}
    reasons = _exclusion_reasons(standards, model, weighting, profile)
    if fitted is None:
        used = [p for p, r in zip(standards, reasons) if r is None]
        fitted = _try_fit(used, model=model, weighting=weighting, confidence=confidence)
    fit, unfitted = fitted
    results = _standard_results(standards, levels, reasons, fit)
    zero = tuple(p for p in standards if p.concentration == 0)

    def judged(results: tuple[StandardResult, ...],
               fit: CurveFit | None) -> tuple[CheckResult, ...]:
        ctx = CurveContext(analyte, results, fit, unfitted, blanks=(*blanks, *zero),
                           slope_history=slope_history, qcs=tuple(qcs), precomputed=precomputed)
        return tuple(apply_family([RULES[spec.id].run(ctx, spec.params, spec.severity)
                                   for spec in profile.rules], profile.review_family))

    refit = None
    rejecting = next((spec.params for spec in profile.rules if spec.id == "back-calculation"
                      and spec.params.get("refit_without_rejected")), None)
    if rejecting is not None and fit is not None:
        # Rejected standards leave the fit before anything (the QCs above all) is judged.
        refitted, _, last, rejected, note = refit_without_rejected(
            results, reasons, fit, rejecting,
            fitter=lambda kept: _try_fit([standards[i] for i in kept], model=model,
                                         weighting=weighting, confidence=confidence),
            reader=lambda why, on: _standard_results(standards, levels, why, on))
        if rejected:
            first = judged(results, fit)
            refit = Refit(tuple(rejected), fit, first, combine_verdicts(first), note)
            results, fit = refitted, last
    checks = judged(results, fit)
    lod, loq = detection_limits(fit, method=profile.lod_method) if fit is not None else (None, None)
    return CurveAssessment(
        analyte=analyte, model=model, weighting=weighting, confidence=confidence,
        standards=results, fit=fit, unfitted_reason=unfitted, lod=lod, loq=loq,
        checks=checks, verdict=combine_verdicts(checks, fitted=fit is not None), refit=refit,
    )


def _points_by_analyte(points: Sequence[Point]) -> dict[str, dict[str, list[Point]]]:
    """Each analyte's standards, blanks (and zeros) and QCs, in file order, in one pass."""
    kinds = {SampleType.STANDARD: "standards", SampleType.BLANK: "blanks",
             SampleType.ZERO: "blanks", SampleType.QC: "qcs"}
    grouped: dict[str, dict[str, list[Point]]] = {}
    for point in points:
        groups = grouped.setdefault(point.analyte, {"standards": [], "blanks": [], "qcs": []})
        kind = kinds.get(point.sample_type)
        if kind is not None:
            groups[kind].append(point)
    return grouped


def _batched_fits(standards: Mapping[str, Sequence[Point]], *, model: Model,
                  weighting: Weighting, confidence: float, profile: Profile,
                  kept: dict[str, list[Point]]) -> dict[str, tuple[CurveFit | None, str]]:
    """The full-range fit of every analyte, the fittable curves in one :func:`fit_batch` call.

    The curves of a run share model, weighting and confidence, so they form one group.
    A curve the batch cannot fit (or that fails the level and point counts) is left to
    the per-curve path, which gives the reason in its own words.  ``kept`` receives the
    standards in each batched fit, in the order of its points.
    """
    p = len(COEFFICIENTS[model])
    names, rows = [], []
    for analyte, points in standards.items():
        reasons = _exclusion_reasons(points, model, weighting, profile)
        used = [pt for pt, r in zip(points, reasons) if r is None]
        if (len(used) > p and len({pt.concentration for pt in used}) >= p
                and _s2_problem(used, weighting) is None):
            names.append(analyte)
            rows.append(used)
    if len(rows) < 2:
        return {}
    width = max(len(r) for r in rows)
    x = np.full((len(rows), width), np.nan)
    y = np.full((len(rows), width), np.nan)
    mask = np.zeros((len(rows), width), dtype=bool)
    for k, used in enumerate(rows):
        x[k, :len(used)] = [pt.concentration for pt in used]
        y[k, :len(used)] = [pt.response for pt in used]
        mask[k, :len(used)] = True
    batch = fit_batch(x, y, model=model, weighting=weighting, mask=mask, confidence=confidence)
    kept.update((analyte, rows[k]) for k, analyte in enumerate(names))
    return {analyte: (batch.curve(k), "") for k, analyte in enumerate(names)
            if batch.problems[k] is None}


def _exclusion_reasons(standards: Sequence[Point], model: Model, weighting: Weighting,
                       profile: Profile) -> list[str | None]:
    reasons = [_exclusion_reason(p, model, weighting, profile) for p in standards]
    if profile.fit_replicates == "first":
        reasons = _first_per_level(standards, reasons)
    if weighting is Weighting.INV_S2:
        # A level's replicate variance is judged on the standards still in the fit.
        replicates: dict[float, list[float]] = {}
        for p, r in zip(standards, reasons):
            if r is None:
                replicates.setdefault(p.concentration, []).append(p.response)
        reasons = [
            r if r is not None else weighting_refuses(
                p.concentration, weighting, replicates=replicates[p.concentration])
            for p, r in zip(standards, reasons)
        ]
    return reasons


def _first_per_level(standards: Sequence[Point],
                     reasons: list[str | None]) -> list[str | None]:
    """One value per level in the fit, the first injected (file order without injection order).

    ISO 8466-1 (from memory) fits ten standards, one value each; the replicates of the
    lowest and highest standard serve the variance test alone.
    """
    levels: dict[float, list[int]] = {}
    for i, (p, r) in enumerate(zip(standards, reasons)):
        if r is None:
            levels.setdefault(p.concentration, []).append(i)
    out = list(reasons)
    for members in levels.values():
        if all(standards[i].injection_order is not None for i in members):
            members = sorted(members, key=lambda i: (standards[i].injection_order, i))
        for i in members[1:]:
            out[i] = VARIANCE_ONLY
    return out


def _exclusion_reason(point: Point, model: Model, weighting: Weighting,
                      profile: Profile) -> str | None:
    if not point.included:
        return point.exclusion_reason or "excluded by the analyst"
    if point.concentration == 0 and profile.zero_standards == "exclude":
        return f"profile {profile.name} leaves zero-concentration standards out of the fit"
    return (model_refuses(point.concentration, model)
            or weighting_refuses(point.concentration, weighting, response=point.response))


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
    problem = _s2_problem(points, weighting)
    if problem is not None:
        return None, problem
    try:
        return fit_curve(x, y, model=model, weighting=weighting, confidence=confidence), ""
    except ValueError as exc:
        return None, f"the curve could not be fitted: {exc}"


def _s2_problem(points: Sequence[Point], weighting: Weighting) -> str | None:
    """Why ``1/s2`` cannot weight these standards' fit for the checks, or None."""
    if weighting is not Weighting.INV_S2:
        return None
    return variance_power_problem(np.array([pt.concentration for pt in points]),
                                  np.array([pt.response for pt in points]))


def _standard_results(standards: Sequence[Point], levels: Mapping[float, int],
                      reasons: Sequence[str | None],
                      fit: CurveFit | None) -> tuple[StandardResult, ...]:
    """Every standard with its level, fitted response and back-calculated concentration."""
    n = len(standards)
    fitted: list[float | None] = [None] * n
    back: list[float | None] = [None] * n
    if fit is not None:
        # The whole curve at once: per standard, the call overhead outweighed the arithmetic.
        fitted = fit.predict(np.array([p.concentration for p in standards])).tolist()
        values = fit.back_calculate(np.array([p.response for p in standards])).tolist()
        back = [v if math.isfinite(v) else None for v in values]
    results = []
    for point, reason, fitted_response, read_back in zip(standards, reasons, fitted, back):
        dev = None
        if read_back is not None and point.concentration != 0:
            dev = 100 * (read_back - point.concentration) / point.concentration
        results.append(StandardResult(point, levels[point.concentration], reason is None, reason,
                                      fitted_response, read_back, dev))
    return tuple(results)
