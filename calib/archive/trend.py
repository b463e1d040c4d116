"""An analyte's calibration over time: is the instrument drifting?

A lab's accepted curves of one analyte, in run-date order, give three series:
the slope b (sensitivity), the intercept a (blank level) and the residual SD σ̂
(precision).  Each is an individuals control chart (:mod:`calib.archive.control`:
limits x̄ ± 2s and x̄ ± 3s from the first N accepted curves, the common run rules).

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
from typing import Any

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
    """

    analyte: str
    points: tuple[ArchivedCurve, ...]
    left_out: tuple[ArchivedCurve, ...]
    charts: tuple[ControlChart, ...]
    baseline: int
    notes: tuple[str, ...] = ()

    @property
    def flagged(self) -> bool:
        """Whether a rule fired on any chart."""
        return any(c.flagged for c in self.charts)

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


def analyte_trend(curves: Sequence[ArchivedCurve], *, analyte: str,
                  baseline: int = DEFAULT_BASELINE,
                  rules: Sequence[str] = tuple(RULES)) -> AnalyteTrend:
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

    Returns
    -------
    AnalyteTrend

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
    charts = tuple(
        control_chart([getattr(p.figures, q) for p in points], quantity=q, baseline=baseline,
                      rules=rules)
        for q in QUANTITIES
    )
    notes = _mix_note(points)
    if MIN_BASELINE <= len(points) < baseline:
        notes.append(f"the baseline has only {len(points)} accepted curves "
                     f"(fewer than the {baseline} asked for): the limits will move as curves "
                     "are added")
    return AnalyteTrend(analyte, points, left_out, charts, baseline, tuple(notes))


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
                      "side": h.side, "description": h.description} for h in chart.hits],
            "warnings": list(chart.warnings()),
        })
    return {
        "schema": TREND_SCHEMA,
        "analyte": trend.analyte,
        "baseline": trend.baseline,
        "rules": dict(RULES),
        "points": [{
            "index": i, "record_id": p.record_id, "seq": p.seq, "run_date": p.run_date,
            "instrument": p.instrument, "model": p.figures.model,
            "weighting": p.figures.weighting,
            **{q: _finite(getattr(p.figures, q)) for q in QUANTITIES},
        } for i, p in enumerate(trend.points)],
        "left_out": [{"record_id": p.record_id, "seq": p.seq, "run_date": p.run_date,
                      "verdict": p.figures.verdict, "roles": list(p.roles)}
                     for p in trend.left_out],
        "charts": charts,
        "flagged": trend.flagged,
        "notes": list(trend.notes),
    }
