"""Earlier accepted slopes of an analyte, for judging the drift of today's slope.

The ``slope-reference`` rule can compare a curve's slope with the mean slope
of the analyte's most recent accepted curves.  The checks never open the
archive themselves: a front end reads the archive (see
:meth:`calib.archive.Archive.curve_history`) and hands the figures over as a
:class:`SlopeHistory` built with :func:`slope_history`.
"""

from __future__ import annotations

import math
from collections.abc import Iterable
from dataclasses import dataclass
from typing import Any

from calib.options import Model, Weighting, recorded_weighting

__all__ = ["SlopeHistory", "slope_history"]


@dataclass(frozen=True)
class SlopeHistory:
    """Slopes of earlier accepted curves of one analyte, oldest first.

    Attributes
    ----------
    slopes : tuple of float
        The slopes, in run-date order.
    records : tuple of str
        The record id each slope comes from.
    source : str
        Where the figures were read (an archive file name).
    model, weighting : str
        The model and weighting the curves share with today's curve.
    """

    slopes: tuple[float, ...]
    records: tuple[str, ...]
    source: str
    model: str
    weighting: str

    def recent(self, n: int) -> SlopeHistory:
        """The ``n`` most recent slopes.

        Examples
        --------
        >>> h = SlopeHistory((1.0, 2.0, 3.0), ("a", "b", "c"), "x.sqlite", "linear", "none")
        >>> h.recent(2).slopes
        (2.0, 3.0)
        """
        return SlopeHistory(self.slopes[-n:], self.records[-n:], self.source, self.model,
                            self.weighting)


def slope_history(curves: Iterable[Any], *, model: Model | str, weighting: Weighting | str,
                  source: str) -> SlopeHistory:
    """The accepted slopes among archived curves of one analyte.

    Parameters
    ----------
    curves : iterable
        Archived curves, each with ``record_id``, ``seq``, ``run_date``, ``accepted`` and
        ``figures`` (``model``, ``weighting``, ``slope``), as
        :class:`calib.archive.ArchivedCurve` gives them.
    model, weighting : str
        Only curves fitted the same way are compared: a slope under another
        weighting or model is another quantity.
    source : str
        Where the curves were read, for the explanation.

    Returns
    -------
    SlopeHistory
        Accepted curves (not rejected at sign-off) with a finite slope, ordered
        by run date and then by archive order.

    Examples
    --------
    >>> from types import SimpleNamespace as NS
    >>> def c(seq, slope, verdict="accepted"):
    ...     f = NS(model="linear", weighting="none", slope=slope)
    ...     return NS(record_id=f"CR-{seq}", seq=seq, run_date=f"2026-01-0{seq}",
    ...               accepted=verdict == "accepted", figures=f)
    >>> h = slope_history([c(2, 1.02), c(1, 1.0), c(3, 0.5, "rejected")], model="linear",
    ...                   weighting="none", source="lab.sqlite")
    >>> h.slopes, h.records
    ((1.0, 1.02), ('CR-1', 'CR-2'))
    """
    model = str(model)
    # A mean-rf curve is weighted 1/x2 whatever its record says (calib.record/1 said none).
    weighting = recorded_weighting(model, str(weighting))
    chosen = [
        c for c in curves
        if c.accepted and c.figures.model == model
        and recorded_weighting(model, c.figures.weighting) == weighting
        and c.figures.slope is not None and math.isfinite(c.figures.slope)
    ]
    chosen.sort(key=lambda c: (c.run_date, c.seq))
    return SlopeHistory(tuple(float(c.figures.slope) for c in chosen),
                        tuple(c.record_id for c in chosen), source, model, weighting)
