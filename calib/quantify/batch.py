"""Quantifying a batch: each sample's concentration, interval, flags and reported value.

For each sample (its replicate injections grouped by analyte, sample id, type
and dilution factor) the mean of the m usable readings is read back from the
analyte's curve (:func:`calib.quantify.inverse.inverse_predict`), then
multiplied by the dilution factor.  The calibrated range is the span of the
standards in the fit; the LLOQ is the lowest non-zero standard in the fit and
the ULOQ the highest (ICH M10, from memory).  calib never extrapolates:

=================  ===========================================================  ==============
flag               when (measured concentration x₀, before dilution)            reported
=================  ===========================================================  ==============
``above-uloq``     x₀ above the top standard: dilute and re-run                 ``> ULOQ``
``outside-range``  x₀ outside the calibrated range (with above-uloq or below)   —
``below-lloq``     x₀ below the LLOQ                                            ``< LLOQ``
``below-lod``      x₀ below the curve's LOD                                     ``< LOD``
``no-reading``     no usable reading (all set aside)                            ``no result``
``curve-rejected`` the curve was rejected, and quantifying was not forced       ``not reported``
``forced``         quantified against a rejected curve on request (``force``)   as above
``curve-needs-     read from a curve whose verdict is needs-review: the result  as above
review``           stands only once a reviewer has accepted the curve
=================  ===========================================================  ==============

Outside the calibrated range no concentration, standard error or interval is
given at all; a QC still gets its read-back value (``found``) and deviation,
because judging a QC is not reporting a result.  Comparisons with the range
ends allow for rounding (one part in 10⁹ of the range), so a response equal to
the top standard's fitted response is inside.
"""

from __future__ import annotations

import math
from collections.abc import Mapping, Sequence
from dataclasses import dataclass, field, replace
from enum import StrEnum
from functools import cached_property
from typing import TYPE_CHECKING, Any

import numpy as np

from calib.errors import InputError
from calib.fit.calcurve import CalibrationCurve
from calib.fit.inverse import InversePrediction, inverse_predict
from calib.fit.qc import QcRule, QcSummary, judge_qcs, sample_means
from calib.options import SampleType
from calib.quantify.results import ResultColumns, SampleResult, _finite, _side, quantify_rows
from calib.quantify.samples import Reading
from calib.quantify.sampletable import SampleRows
from calib.tabular import Tabular

if TYPE_CHECKING:
    import pandas as pd

__all__ = ["Batch", "Flag", "ReportingConvention", "SampleResult", "group_readings", "quantify",
           "quantify_sample"]


class Flag(StrEnum):
    """Why a sample's result needs attention."""

    BELOW_LOD = "below-lod"
    BELOW_LLOQ = "below-lloq"
    ABOVE_ULOQ = "above-uloq"
    OUTSIDE_RANGE = "outside-range"
    NO_READING = "no-reading"
    CURVE_REJECTED = "curve-rejected"
    FORCED = "forced"
    CURVE_NEEDS_REVIEW = "curve-needs-review"


@dataclass(frozen=True)
class ReportingConvention:
    """How the lab writes results that are not numbers, and how many digits it reports.

    Examples
    --------
    >>> ReportingConvention().number(12.3456), ReportingConvention(digits=4).number(0.0123456)
    ('12.3', '0.01235')
    """

    below_lod: str = "< LOD"
    below_lloq: str = "< LLOQ"
    above_uloq: str = "> ULOQ"
    no_reading: str = "no result"
    refused: str = "not reported"
    digits: int = 3

    def number(self, value: float) -> str:
        """``value`` rounded to :attr:`digits` significant digits, in fixed point."""
        if value == 0 or not math.isfinite(value):
            return "0" if value == 0 else "—"
        exponent = math.floor(math.log10(abs(float(f"{value:.{self.digits}g}"))))
        decimals = max(self.digits - 1 - exponent, 0)
        return f"{round(value, decimals):.{decimals}f}"

    def numbers(self, values: np.ndarray) -> list[str]:
        """:meth:`number` of every value, the exponents worked out a column at a time."""
        values = np.asarray(values, dtype=float)
        d = self.digits
        size = np.abs(values)
        with np.errstate(divide="ignore", invalid="ignore"):
            exponent = np.floor(np.log10(size))
            mantissa = size / 10.0 ** exponent
        # Where rounding to d digits may reach a power of ten (or log10 may be off by one
        # next to one), the value takes the one-at-a-time path.
        step = 10.0 ** (1 - d)
        clear = np.isfinite(mantissa) & (mantissa >= 1 + step) & (mantissa <= 10 - step) \
            & (size != 0)
        decimals = np.maximum(d - 1 - np.where(clear, exponent, 0), 0).astype(int).tolist()
        out = []
        for v, n, ok in zip(values.tolist(), decimals, clear.tolist(), strict=True):
            out.append(f"{round(v, n):.{n}f}" if ok else self.number(v))
        return out


def quantify_sample(
    curve: CalibrationCurve | None,
    readings: Sequence[Reading],
    *,
    confidence: float | None = None,
    convention: ReportingConvention | None = None,
    refused: str | None = None,
    forced: bool = False,
    prediction: InversePrediction | None = None,
) -> SampleResult:
    """Quantify one sample from its readings (all of one analyte, type and dilution).

    Parameters
    ----------
    curve : CalibrationCurve or None
        The analyte's curve; None when there is none (then ``refused`` says why).
    readings : sequence of Reading
        The sample's injections.
    confidence : float, optional
        Interval level (the curve's own by default).
    convention : ReportingConvention, optional
        How non-numeric results are written.
    refused : str, optional
        Why the curve may not be used; the sample is then not quantified.
    forced : bool
        The curve was rejected and quantifying was forced: the result carries
        the ``forced`` flag.
    prediction : InversePrediction, optional
        The sample's read-back when already worked out for many samples at
        once (:func:`calib.fit.inverse.inverse_predict_many`, as :func:`quantify`
        does); worked out here otherwise.

    Returns
    -------
    SampleResult

    Examples
    --------
    A reading above the top standard is never reported as a number:

    >>> from calib.fit import fit_curve
    >>> from calib.quantify.samples import Reading
    >>> from calib.run import Point
    >>> curve = CalibrationCurve.from_fit(
    ...     fit_curve([1, 2, 4, 6, 8, 10], [2.0, 4.1, 7.9, 12.2, 15.8, 20.1]), analyte="A")
    >>> high = Reading(Point("A", float("nan"), 35.0, "S!C2", SampleType.UNKNOWN, sample_id="S1"))
    >>> result = quantify_sample(curve, [high])
    >>> result.reported, result.concentration, result.flags, result.note
    ('> ULOQ', None, ('above-uloq', 'outside-range'), 'dilute and re-run')
    """
    convention = convention or ReportingConvention()
    point = readings[0].point
    per_content = _content_factor(curve, readings[0]) if refused is None else None
    kind = point.sample_type
    dilution = readings[0].dilution_factor
    if prediction is not None:
        # Worked out already from these readings: m and ȳ₀ are the prediction's.
        n_usable, mean = prediction.m, prediction.response
    else:
        usable = _usable(readings)
        n_usable, mean = len(usable), _mean_response(usable)
    nominal = point.concentration if kind is SampleType.QC else None
    pred: InversePrediction | None = None
    shown: tuple[float | None, ...] = (None, None, None, None)
    found = deviation = content = None
    flags: list[str] = [Flag.FORCED.value] if forced else []
    if curve is not None and refused is None and curve.verdict == "needs-review":
        # A result is only as good as its curve: say so on every result read from it.
        flags.append(Flag.CURVE_NEEDS_REVIEW.value)
    note = ""
    if curve is None or refused is not None:
        flags = [Flag.CURVE_REJECTED.value]
        reported, note = convention.refused, refused or "no curve"
    elif mean is None:
        flags.append(Flag.NO_READING.value)
        reported = convention.no_reading
        note = "; ".join(dict.fromkeys(r.point.exclusion_reason or "no reading"
                                       for r in readings))
    else:
        pred = prediction if prediction is not None else inverse_predict(
            curve, mean, m=n_usable, confidence=confidence)
        x0 = pred.concentration
        side = _side(curve, x0, mean)
        if kind is SampleType.QC:
            found = _finite(dilution * x0)
            if found is not None and nominal:
                deviation = 100 * (found - nominal) / nominal
        if side == "above":
            flags += [Flag.ABOVE_ULOQ.value, Flag.OUTSIDE_RANGE.value]
            reported, note = convention.above_uloq, "dilute and re-run"
        else:
            below_lod = curve.lod is not None and (not math.isfinite(x0) or x0 < curve.lod)
            below_lloq = side == "below" or x0 < curve.lloq * (1 - 1e-9)
            if side == "below":
                flags.append(Flag.OUTSIDE_RANGE.value)
                note = "below the calibrated range"
            else:
                half = pred.half_width
                shown = (_finite(dilution * x0), _finite(dilution * pred.std_error),
                         _finite(dilution * (x0 - half)), _finite(dilution * (x0 + half)))
            if below_lloq:
                flags.append(Flag.BELOW_LLOQ.value)
            if below_lod:
                flags.append(Flag.BELOW_LOD.value)
            reported = (convention.below_lod if below_lod else convention.below_lloq
                        if below_lloq else convention.number(dilution * x0))
            if per_content is not None and shown[0] is not None:
                content = _finite(shown[0] * per_content[0])
                if not (below_lod or below_lloq) and content is not None:
                    reported = f"{convention.number(content)} {per_content[1]}"
                r0 = readings[0]
                note = "; ".join(filter(None, [note, (
                    f"content = C × V / m with V = {r0.volume_l:g} L, m = {r0.mass_kg:g} kg")]))
    return SampleResult(
        sample_id=point.sample_id or point.source_cell, analyte=point.analyte, sample_type=kind,
        readings=tuple(readings), n_replicates=n_usable, mean_response=mean,
        dilution_factor=dilution, prediction=pred, concentration=shown[0], std_error=shown[1],
        ci_low=shown[2], ci_high=shown[3], flags=tuple(flags), reported=reported, note=note,
        nominal=nominal, found=found, deviation_pct=deviation, content=content,
        content_unit=per_content[1] if per_content is not None else None,
    )


def _usable(readings: Sequence[Reading]) -> list[Reading]:
    return [r for r in readings if r.point.included and math.isfinite(r.point.response)]


def _mean_response(usable: Sequence[Reading]) -> float | None:
    """ȳ₀ of the usable readings (:func:`calib.fit.qc.sample_means`); None without one."""
    if not usable:
        return None
    response = np.array([r.point.response for r in usable], dtype=float)
    return float(sample_means(np.zeros(response.size, dtype=np.int64), response,
                              np.ones(response.size, dtype=bool), 1)[1][0])


def _content_factor(curve: CalibrationCurve | None, reading: Reading
                    ) -> tuple[float, str] | None:
    """V/m and the content unit when the sample has a weight and a final volume."""
    if curve is None or reading.mass_kg is None or reading.volume_l is None:
        return None
    point = reading.point
    return _amount_factor(curve.unit, reading.volume_l, reading.mass_kg,
                          f"{point.sample_id or point.source_cell} ({point.source_cell})")


def _amount_factor(unit: str | None, volume_l: float, mass_kg: float, sample: str
                   ) -> tuple[float, str]:
    from calib.quantify.amounts import content_factor

    try:
        return content_factor(unit, volume_l, mass_kg)
    except ValueError as exc:
        raise InputError(f"sample {sample} gives a sample weight and a final volume, but {exc}: "
                         f"the content cannot be worked out (give the curve's unit, for example "
                         f"with --map [units])") from None


def group_readings(readings: Sequence[Reading]) -> list[list[Reading]]:
    """Readings grouped into samples: same analyte, type, sample id, dilution, weight and volume.

    Replicates at another dilution (a sample diluted and re-run) make a sample
    of their own; without a sample id each injection is one sample.

    Examples
    --------
    >>> from calib.run import Point
    >>> def r(cell, name, d=1.0):
    ...     return Reading(Point("A", float("nan"), 1.0, cell, SampleType.UNKNOWN, sample_id=name), d)
    >>> [len(g) for g in group_readings([r("C2", "S1"), r("C3", "S1"), r("C4", "S1", 10.0),
    ...                                   r("C5", None)])]
    [2, 1, 1]
    """
    groups: dict[tuple[object, ...], list[Reading]] = {}
    for r in readings:
        p = r.point
        # Without a sample id every injection is a sample of its own.
        key = (p.analyte, p.sample_type.value, p.sample_id if p.sample_id else p.source_cell,
               r.dilution_factor, r.mass_kg, r.volume_l)
        groups.setdefault(key, []).append(r)
    return list(groups.values())


def _judge_qc_samples(results: Sequence[SampleResult], *, curve: CalibrationCurve | None,
                     rule: QcRule | None = None, analyte: str = "") -> QcSummary:
    """The QC rule applied to the QC results of one analyte."""
    qcs = [(r.sample_id, float(r.nominal or 0.0), r.found) for r in results
           if r.sample_type is SampleType.QC]
    return judge_qcs(qcs, lloq=curve.lloq if curve is not None else None, rule=rule,
                     analyte=analyte, unit=curve.unit if curve is not None else None,
                     uloq=curve.uloq if curve is not None else None)


@dataclass(frozen=True)
class Batch(Tabular):
    """A quantified batch.

    Attributes
    ----------
    curves : dict of analyte to CalibrationCurve
        The curves the samples were read against.
    table : ResultColumns
        Every sample, in order of first appearance, as columns (:attr:`samples`
        gives them as :class:`SampleResult` objects).
    qc : tuple of QcSummary
        One per analyte of the samples whose curve was used, in order of first appearance
        (``not-evaluated`` when it has no QCs).
    confidence : float or None
        The interval level asked for (None: each curve's own).
    forced : tuple of str
        Analytes quantified against a rejected curve because ``force`` was given.
    refused : dict of analyte to str
        Analytes whose samples were not quantified, with the reason.
    verdict : str
        ``accepted``, ``needs-review`` or ``rejected``; see :func:`quantify`.
    reasons : tuple of str
        Why the verdict is not ``accepted``, one line per cause.
    """

    curves: dict[str, CalibrationCurve]
    table: ResultColumns
    qc: tuple[QcSummary, ...]
    confidence: float | None
    forced: tuple[str, ...]
    refused: dict[str, str]
    verdict: str
    reasons: tuple[str, ...] = field(default=())

    @cached_property
    def samples(self) -> tuple[SampleResult, ...]:
        """Every sample, in order of first appearance (built from :attr:`table` on first use)."""
        return self.table.results()

    def to_frame(self) -> pd.DataFrame:
        """One row per sample, as a pandas DataFrame (shown as a table in Jupyter)."""
        from calib.tabular import batch_frame

        return batch_frame(self)


_RANK = {"accepted": 0, "needs-review": 1, "rejected": 2}


def quantify(
    curves: Mapping[str, CalibrationCurve],
    readings: Sequence[Reading] | SampleRows,
    *,
    confidence: float | None = None,
    force: bool = False,
    qc_rule: QcRule | None = None,
    unfitted: Mapping[str, str] | None = None,
    convention: ReportingConvention | None = None,
    digits: Mapping[str, int] | None = None,
) -> Batch:
    """Quantify every sample against its analyte's curve and judge the QCs.

    Parameters
    ----------
    curves : mapping of analyte to CalibrationCurve
        The curves, each with its verdict.
    readings : sequence of Reading, or SampleRows
        The unknowns' and QCs' injections (a samples file's columns,
        :attr:`calib.quantify.samples.SampleSheet.rows`, are read a column at a time).
    confidence : float, optional
        Interval level; each curve's own when None.
    force : bool
        Quantify against rejected curves too (every such result is flagged
        ``forced``, and the batch says so).
    qc_rule : QcRule, optional
        The QC acceptance rule (the profile's); defaults when None.
    unfitted : mapping of analyte to str, optional
        Analytes without a fitted curve, with the reason.
    convention : ReportingConvention, optional
        How results that are not numbers are written.
    digits : mapping of analyte to int, optional
        Significant figures reported for these analytes (the profile's
        ``[[analyte]]`` entries), instead of the convention's.

    Returns
    -------
    Batch
        Verdict ``rejected`` when a curve the samples need was rejected (quantified
        or not) or the QC rule fails at severity ``reject``; ``needs-review`` when
        a curve needs review or the QC rule fails at severity ``review``;
        ``accepted`` otherwise.

    Raises
    ------
    InputError
        When a reading's analyte has no curve at all.
    """
    unfitted = dict(unfitted or {})
    rows = readings if isinstance(readings, SampleRows) else SampleRows.from_readings(readings)
    for analyte in dict.fromkeys(rows.analyte):
        if analyte not in curves and analyte not in unfitted:
            r = rows.analyte.index(analyte)
            sid, cell = rows.sample_id[r], rows.source_cell[r]
            known = ", ".join(list(curves) + list(unfitted)) or "none"
            raise InputError(f"sample {sid or cell} ({cell}) is of analyte {analyte!r}, which "
                             f"has no curve (curves: {known})")
    refused: dict[str, str] = {a: f"no fitted curve: {why}" for a, why in unfitted.items()}
    forced: list[str] = []
    for analyte, curve in curves.items():
        if curve.verdict == "rejected":
            if force:
                forced.append(analyte)
            else:
                refused[analyte] = ("the curve was rejected; its samples are not quantified "
                                    "(force quantifies them anyway, flagged)")
    conventions: dict[str, ReportingConvention] = {}

    def convention_of(analyte: str) -> ReportingConvention:
        if analyte not in conventions:
            conventions[analyte] = _convention(convention, digits, analyte) \
                or ReportingConvention()
        return conventions[analyte]

    def content_of(curve: CalibrationCurve, r: int) -> tuple[float, str] | None:
        mass, volume = rows.mass_kg[r], rows.volume_l[r]
        if mass is None or volume is None:
            return None
        key = (curve.unit, volume, mass)
        if key not in factors:
            sid, cell = rows.sample_id[r], rows.source_cell[r]
            factors[key] = _amount_factor(curve.unit, volume, mass, f"{sid or cell} ({cell})")
        return factors[key]

    factors: dict[tuple[Any, ...], tuple[float, str]] = {}
    table = quantify_rows(curves, rows, refused=refused, forced=forced, confidence=confidence,
                          convention_of=convention_of, content_factor=content_of)
    needed = list(dict.fromkeys(table.rows.analyte[r] for r in table.first.tolist()))
    qcs: dict[str, list[tuple[str, float, float | None]]] = {}
    ids = table.sample_ids()
    for g, r in enumerate(table.first.tolist()):
        if rows.sample_type[r] is SampleType.QC:
            qcs.setdefault(rows.analyte[r], []).append(
                (ids[g], float(rows.nominal[r]), table.found[g]))
    summaries = []
    verdict, reasons = "accepted", []
    for analyte in needed:
        curve = curves.get(analyte)
        if curve is None or analyte in refused:
            verdict = "rejected"
            reasons.append(f"{analyte}: {refused.get(analyte, 'no curve')}")
            continue
        if curve.verdict != "accepted":
            verdict = max(verdict, curve.verdict, key=_RANK.__getitem__)
            state = "was rejected (quantified on request)" if analyte in forced else "needs review"
            reasons.append(f"{analyte}: the curve {state}")
        summary = judge_qcs(qcs.get(analyte, []), lloq=curve.lloq, rule=qc_rule,
                            analyte=analyte, unit=curve.unit, uloq=curve.uloq)
        summaries.append(summary)
        if summary.verdict == "fail" and summary.rule.severity in ("reject", "review"):
            verdict = max(verdict, "rejected" if summary.rule.severity == "reject"
                          else "needs-review", key=_RANK.__getitem__)
            reasons.append(f"{analyte}: the QC rule failed")
        elif summary.verdict == "not-evaluated" and summary.rule.severity == "reject":
            verdict = max(verdict, "needs-review", key=_RANK.__getitem__)
            reasons.append(f"{analyte}: the QC rule could not be evaluated (no QC samples)")
    return Batch(dict(curves), table, tuple(summaries), confidence, tuple(forced),
                 {a: refused[a] for a in needed if a in refused}, verdict, tuple(reasons))


def _convention(convention: ReportingConvention | None, digits: Mapping[str, int] | None,
                analyte: str) -> ReportingConvention | None:
    """The convention with the analyte's own reporting digits, when the profile sets them."""
    if not digits or analyte not in digits:
        return convention
    return replace(convention or ReportingConvention(), digits=digits[analyte])
