"""An analyte's calibration over time: is the instrument drifting?

A lab's accepted curves of one analyte, in run-date order, give three series:
the slope b (sensitivity), the intercept a (blank level) and the residual SD σ̂
(precision).  Each is an individuals control chart (:mod:`calib.archive.control`:
limits x̄ ± 2s and x̄ ± 3s, the common run rules).

Where the limits come from
    *Frozen baseline* (Phase II): limits fixed once from reviewed runs
    (:mod:`calib.archive.baseline`); every curve is judged against them.  A
    rule that fires on a curve the reviewer excluded from the baseline (with
    its reason) is shown but does not flag the trend: it was reviewed.
    *Screened* (the default without a frozen baseline): the first N accepted
    curves, each judged against the others so that a bad curve cannot widen
    its own limits (:func:`calib.archive.control.screened_limits`).
    *Plain* (``screen=False``): mean and SD of the first N, unscreened.

Which curves are charted
    One point per record (its signed versions do not count again), curves
    whose own verdict is ``accepted`` and whose record was not signed
    ``rejected`` at review.  The others are kept in :attr:`AnalyteTrend.left_out`.
    Points are in run-date order, then archive order.
Mixed series
    Slopes of different models or weightings, instruments or units are not
    comparable; the trend says so in :attr:`AnalyteTrend.notes` rather than
    guessing which to keep.
"""

from __future__ import annotations

import math
from collections import Counter
from collections.abc import Sequence
from dataclasses import dataclass
from pathlib import Path
from typing import Any

from calib.archive.baseline import FrozenBaseline
from calib.archive.control import (
    DEFAULT_BASELINE,
    MIN_BASELINE,
    RULES,
    ControlChart,
    check_baseline,
    control_chart,
)
from calib.archive.figures import CurveFigures

__all__ = [
    "QUANTITIES",
    "TREND_SCHEMA",
    "AnalyteTrend",
    "ArchivedCurve",
    "analyte_trend",
    "trend_document",
]

TREND_SCHEMA = "calib.trend/1"

#: Quantity key → label, in chart order.
QUANTITIES: dict[str, str] = {
    "slope": "Slope b",
    "intercept": "Intercept a",
    "residual_sd": "Residual SD σ̂",
}


@dataclass(frozen=True)
class ArchivedCurve:
    """One curve as the archive holds it: its figures and where they come from.

    Attributes
    ----------
    record_id : str
        Record the curve belongs to.
    seq : int
        Archive entry the figures were read from (the record's first version).
    run_date : str
        ``YYYY-MM-DD`` (see :mod:`calib.archive.figures`).
    instrument : str or None
        Instrument named in the run metadata.
    roles : tuple of str
        Signature roles of the record's latest version.
    figures : CurveFigures
        Slope, intercept, residual SD and verdict.
    """

    record_id: str
    seq: int
    run_date: str
    instrument: str | None
    roles: tuple[str, ...]
    figures: CurveFigures

    @property
    def accepted(self) -> bool:
        """Accepted by its checks and not rejected at sign-off."""
        return self.figures.verdict == "accepted" and "rejected" not in self.roles


@dataclass(frozen=True)
class AnalyteTrend:
    """Control charts of slope, intercept and residual SD of one analyte.

    Attributes
    ----------
    analyte : str
        The analyte.
    points : tuple of ArchivedCurve
        The accepted curves charted, in run-date order (point i of every chart).
    left_out : tuple of ArchivedCurve
        Curves not charted: rejected, needing review, or rejected at sign-off.
    charts : tuple of ControlChart
        One per quantity of :data:`QUANTITIES`, in that order.
    baseline : int
        The baseline length asked for.
    notes : tuple of str
        Things to bear in mind (mixed models, instruments or units; a short baseline).
    frozen : FrozenBaseline or None
        The frozen baseline the limits come from; None when they were drawn from
        the first ``baseline`` curves.
    screened : bool
        Whether the first ``baseline`` curves were screened (leave-one-out).
    """

    analyte: str
    points: tuple[ArchivedCurve, ...]
    left_out: tuple[ArchivedCurve, ...]
    charts: tuple[ControlChart, ...]
    baseline: int
    notes: tuple[str, ...] = ()
    frozen: FrozenBaseline | None = None
    screened: bool = False

    @property
    def reviewed(self) -> frozenset[int]:
        """Points the frozen baseline's reviewer excluded with a reason."""
        if self.frozen is None:
            return frozenset()
        return frozenset(i for i, p in enumerate(self.points) if self.frozen.exclusion(p.record_id))

    @property
    def flagged(self) -> bool:
        """Whether a rule fired on any chart at a point not already reviewed."""
        return bool(self.flagged_points())

    def flagged_points(self) -> tuple[int, ...]:
        """Points where a rule fired on some chart, reviewed exclusions left out."""
        reviewed = self.reviewed
        return tuple(sorted({i for c in self.charts for i in c.flagged_points()} - reviewed))

    def phase(self, index: int) -> str:
        """``baseline``, ``excluded`` (from it, with reason), ``set aside`` or ``monitored``.

        For limits drawn from the first N curves, those N are the baseline and a
        curve set aside by the screening on any chart is ``set aside``.
        """
        p = self.points[index]
        if self.frozen is not None:
            if p.record_id in self.frozen.records:
                return "baseline"
            return "excluded" if self.frozen.exclusion(p.record_id) else "monitored"
        if any(o.index == index for c in self.charts for o in c.set_aside):
            return "set aside"
        return "baseline" if index < self.baseline_span[1] else "monitored"

    @property
    def baseline_span(self) -> tuple[int, int]:
        """First and one-past-last point index of the baseline period (for shading)."""
        if self.frozen is None:
            return 0, min(self.baseline, len(self.points))
        inside = [i for i, p in enumerate(self.points)
                  if p.record_id in self.frozen.records or self.frozen.exclusion(p.record_id)]
        return (min(inside), max(inside) + 1) if inside else (0, 0)

    @property
    def baseline_label(self) -> str:
        """What the shaded :attr:`baseline_span` is, for a chart's legend."""
        if self.frozen is not None:
            return "Frozen baseline period"
        shown = min(self.baseline, len(self.points))
        return f"Baseline: first {shown} curve{'s' if shown != 1 else ''}"

    def limits_text(self) -> str:
        """Where the limits come from, in one sentence."""
        if self.frozen is not None:
            b = self.frozen
            return (f"Limits from the frozen baseline {b.name()}: {len(b.curves)} curves, "
                    f"{b.selection}; reviewed by {b.reviewed_by} on {b.established_at[:10]}")
        base = min(self.baseline, len(self.points))
        text = f"Limits from the first {base} accepted curves"
        if self.screened:
            aside = sorted({self.points[o.index].record_id for c in self.charts
                            for o in c.set_aside})
            text += (", each judged against the others (no frozen baseline)"
                     + (f"; set aside as too far from the others: {', '.join(aside)}" if aside
                        else ""))
        return text

    @property
    def evaluated(self) -> bool:
        """Whether at least one chart has limits."""
        return any(c.evaluated for c in self.charts)

    def chart(self, quantity: str) -> ControlChart:
        """The chart of ``quantity`` (a key of :data:`QUANTITIES`)."""
        for chart in self.charts:
            if chart.quantity == quantity:
                return chart
        raise ValueError(f"quantity must be one of {', '.join(QUANTITIES)}; got {quantity!r}")


def _mix_note(points: Sequence[ArchivedCurve]) -> list[str]:
    notes = []
    fits = Counter(f"{p.figures.model}/{p.figures.weighting}" for p in points)
    if len(fits) > 1:
        listed = ", ".join(f"{k} ×{n}" for k, n in fits.most_common())
        notes.append(f"the series mixes models or weightings ({listed}); coefficients of "
                     "different fits are not comparable")
    instruments = Counter(p.instrument or "not stated" for p in points)
    if len(instruments) > 1:
        listed = ", ".join(f"{k} ×{n}" for k, n in instruments.most_common())
        notes.append(f"the series mixes instruments ({listed}); chart one instrument at a time")
    units = {(p.figures.concentration_unit, p.figures.response_unit) for p in points}
    if len(units) > 1:
        notes.append("the series mixes units; coefficients in different units are not comparable")
    return notes


def _frozen_problem(frozen: FrozenBaseline, points: Sequence[ArchivedCurve]) -> str:
    """Why ``frozen`` does not belong to these curves; empty when it does."""
    by_id = {p.record_id: p for p in points}
    for c in frozen.curves:
        p = by_id.get(c.record_id)
        if p is None:
            return (f"the baseline names {c.record_id} ({c.run_date}), which is not among the "
                    f"accepted curves of {frozen.analyte} read from the archive")
        for q in QUANTITIES:
            mine, theirs = getattr(p.figures, q), getattr(c, q)
            if (mine is None) != (theirs is None) or (
                    mine is not None and not math.isclose(mine, theirs, rel_tol=1e-12)):
                return (f"the baseline's {q} of {c.record_id} ({theirs}) differs from the "
                        f"archived record's ({mine})")
    return ""


def analyte_trend(curves: Sequence[ArchivedCurve], *, analyte: str,
                  baseline: int = DEFAULT_BASELINE,
                  rules: Sequence[str] = tuple(RULES), screen: bool = True,
                  frozen: FrozenBaseline | None = None) -> AnalyteTrend:
    """Chart the accepted curves of one analyte over time.

    Parameters
    ----------
    curves : sequence of ArchivedCurve
        The analyte's archived curves, any order, one per record.
    analyte : str
        Name shown on the charts.
    baseline : int
        The first ``baseline`` accepted curves set the limits (all when fewer; at least 3).
    rules : sequence of str
        Rule ids to apply.
    screen : bool
        Judge each of the first ``baseline`` curves against the others and set
        aside those beyond 3s before drawing the limits (the default).
    frozen : FrozenBaseline, optional
        Fixed limits; then ``baseline`` and ``screen`` are not used.

    Returns
    -------
    AnalyteTrend

    Raises
    ------
    ValueError
        If ``frozen`` names a curve the series does not hold, or with other figures.

    Examples
    --------
    >>> def curve(i, slope, verdict="accepted"):
    ...     figures = CurveFigures(0, "Nitrate-N", "linear", "none", verdict, slope, 0.0, 0.01)
    ...     return ArchivedCurve(f"CR-{i}", i, f"2026-11-{i:02d}", "IC-2", ("prepared",), figures)
    >>> slopes = [0.250, 0.251, 0.249, 0.250, 0.252, 0.248, 0.251, 0.249, 0.250, 0.250, 0.240]
    >>> trend = analyte_trend([curve(i + 1, s) for i, s in enumerate(slopes)]
    ...                       + [curve(12, 0.1, "rejected")], analyte="Nitrate-N")
    >>> len(trend.points), len(trend.left_out), trend.chart("slope").flagged_points()
    (11, 1, (10,))
    """
    check_baseline(baseline)
    ordered = sorted(curves, key=lambda c: (c.run_date, c.seq, c.figures.position))
    points = tuple(c for c in ordered if c.accepted)
    left_out = tuple(c for c in ordered if not c.accepted)
    if frozen is not None:
        problem = _frozen_problem(frozen, points)
        if problem:
            raise ValueError(problem)
        charts = tuple(
            control_chart([getattr(p.figures, q) for p in points], quantity=q, rules=rules,
                          limits=frozen.limits[q]) if frozen.limits.get(q) is not None
            else ControlChart(q, tuple(math.nan if getattr(p.figures, q) is None
                                       else float(getattr(p.figures, q)) for p in points),
                              None, (), "the frozen baseline has no limits for it")
            for q in QUANTITIES)
        return AnalyteTrend(analyte, points, left_out, charts, len(frozen.curves),
                            tuple(_mix_note(points)), frozen=frozen)
    charts = tuple(
        control_chart([getattr(p.figures, q) for p in points], quantity=q, baseline=baseline,
                      rules=rules, screen=screen)
        for q in QUANTITIES
    )
    notes = _mix_note(points)
    if MIN_BASELINE <= len(points) < baseline:
        notes.append(f"the baseline has only {len(points)} accepted curves "
                     f"(fewer than the {baseline} asked for): the limits will move as curves "
                     "are added")
    if points:
        notes.append("the limits are not frozen: a reviewed, frozen baseline (calib trend "
                     "--freeze) keeps them fixed as curves are added")
    return AnalyteTrend(analyte, points, left_out, charts, baseline, tuple(notes),
                        screened=screen)


def _finite(value: float | None) -> float | None:
    return value if value is not None and math.isfinite(value) else None


def trend_document(trend: AnalyteTrend) -> dict[str, Any]:
    """The trend as plain JSON-ready data (schema ``calib.trend/1``); missing values are None.

    Examples
    --------
    >>> doc = trend_document(analyte_trend([], analyte="Nitrate-N"))
    >>> doc["schema"], doc["flagged"], doc["charts"][0]["evaluated"]
    ('calib.trend/1', False, False)
    """
    charts = []
    reviewed = trend.reviewed
    for chart in trend.charts:
        lim = chart.limits
        charts.append({
            "quantity": chart.quantity,
            "evaluated": chart.evaluated,
            "reason": chart.reason or None,
            "mean": lim.mean if lim else None,
            "sd": lim.sd if lim else None,
            "baseline_points": lim.baseline if lim else None,
            "warning_limits": list(lim.warning) if lim else None,
            "action_limits": list(lim.action) if lim else None,
            "hits": [{"rule": h.rule, "index": h.index, "points": list(h.points),
                      "side": h.side, "description": h.description,
                      "reviewed": h.index in reviewed} for h in chart.hits],
            "set_aside": [{"index": o.index, "record_id": trend.points[o.index].record_id,
                           "z": o.z if math.isfinite(o.z) else None, "reason": o.reason}
                          for o in chart.set_aside],
            "warnings": list(chart.warnings()),
        })
    return {
        "schema": TREND_SCHEMA,
        "analyte": trend.analyte,
        "baseline": trend.baseline,
        "limits_from": {
            "method": ("frozen baseline" if trend.frozen else
                       "first curves, screened" if trend.screened else "first curves"),
            "text": trend.limits_text(),
            "file": Path(trend.frozen.file).name if trend.frozen and trend.frozen.file else None,
            "sha256": trend.frozen.sha256 or None if trend.frozen else None,
            "reviewed_by": trend.frozen.reviewed_by if trend.frozen else None,
            "established_at": trend.frozen.established_at if trend.frozen else None,
            "excluded": [{"record_id": c.record_id, "run_date": c.run_date, "reason": c.reason}
                         for c in trend.frozen.excluded] if trend.frozen else [],
        },
        "rules": dict(RULES),
        "points": [{
            "index": i, "record_id": p.record_id, "seq": p.seq, "run_date": p.run_date,
            "phase": trend.phase(i),
            "instrument": p.instrument, "model": p.figures.model,
            "weighting": p.figures.weighting,
            **{q: _finite(getattr(p.figures, q)) for q in QUANTITIES},
        } for i, p in enumerate(trend.points)],
        "left_out": [{"record_id": p.record_id, "seq": p.seq, "run_date": p.run_date,
                      "verdict": p.figures.verdict, "roles": list(p.roles)}
                     for p in trend.left_out],
        "charts": charts,
        "flagged": trend.flagged,
        "flagged_points": list(trend.flagged_points()),
        "notes": list(trend.notes),
    }
