"""Working ranges: proposing a narrowed range, and applying the one the analyst sets.

When a curve is not accepted and its profile allows it (``[narrowing]``),
calib tries dropping levels from the ends of the range (a failing LLOQ, a
high level that bends the curve) and proposes the smallest change that
improves the verdict, with the re-evaluated result beside the original.  It
never applies a proposal: the analyst sets a range explicitly
(:class:`WorkingRange`), the standards outside it leave the fit with the
reason, and the record shows the range, the reason and the original result.
"""

from __future__ import annotations

import math
import re
from collections.abc import Callable, Sequence
from dataclasses import dataclass, replace
from typing import TYPE_CHECKING

from calib.checks.result import CurveVerdict, Severity, Verdict
from calib.checks.rules.base import fmt
from calib.errors import RangeError
from calib.run import Point

if TYPE_CHECKING:
    from calib.checks.evaluate import CurveAssessment

__all__ = ["AppliedRange", "RangeError", "RangeProposal", "WorkingRange", "kept_levels",
           "narrow_points", "parse_range", "propose_range"]

_RANK = {CurveVerdict.ACCEPTED: 0, CurveVerdict.NEEDS_REVIEW: 1, CurveVerdict.REJECTED: 2}
_NUMBER = r"[0-9]*\.?[0-9]+(?:[eE][+-]?[0-9]+)?"
_RANGE = re.compile(
    rf"^\s*(?:(?P<analyte>.+):)?\s*(?P<low>{_NUMBER})\s*\.\.\s*(?P<high>{_NUMBER})\s*$")
# Concentrations read from a file and typed on a command line may differ in the last digit.
_SLACK = 1e-9


@dataclass(frozen=True)
class WorkingRange:
    """A working range the analyst sets: standards outside ``low`` to ``high`` leave the fit.

    Attributes
    ----------
    low, high : float
        Lowest and highest nominal concentration kept (inclusive).
    reason : str or None
        Why; None only when the range is the one calib proposed, whose reason is then used.
    analyte : str or None
        The analyte it applies to; None for every analyte of the run.
    """

    low: float
    high: float
    reason: str | None = None
    analyte: str | None = None

    def __post_init__(self) -> None:
        finite = math.isfinite(self.low) and math.isfinite(self.high)
        if not finite or not 0 <= self.low < self.high:
            raise ValueError(f"working range {self.low:g} to {self.high:g}: the low end must be "
                             "0 or more and below the high end")

    def contains(self, concentration: float) -> bool:
        """Whether a nominal concentration lies inside the range (a last-digit slack allowed)."""
        return (self.low * (1 - _SLACK) <= concentration <= self.high * (1 + _SLACK))

    @property
    def text(self) -> str:
        """``low..high`` as written on a command line."""
        return f"{self.low:g}..{self.high:g}"


def parse_range(text: str) -> WorkingRange:
    """Read ``[ANALYTE:]LOW..HIGH[=REASON]``.

    Raises
    ------
    ValueError
        If the text is not of that form or the range is empty.

    Examples
    --------
    >>> parse_range("2..1000")
    WorkingRange(low=2.0, high=1000.0, reason=None, analyte=None)
    >>> parse_range("KX-214:2..1000=LLOQ standards failed")
    WorkingRange(low=2.0, high=1000.0, reason='LLOQ standards failed', analyte='KX-214')
    >>> parse_range("2-1000")
    Traceback (most recent call last):
    ...
    ValueError: range '2-1000' is not of the form LOW..HIGH, ANALYTE:LOW..HIGH or LOW..HIGH=REASON
    """
    spec, sep, reason = text.partition("=")
    match = _RANGE.match(spec)
    if not match:
        raise ValueError(f"range {text!r} is not of the form LOW..HIGH, ANALYTE:LOW..HIGH or "
                         "LOW..HIGH=REASON")
    if sep and not reason.strip():
        raise ValueError(f"range {text!r} gives '=' but no reason after it")
    analyte = match.group("analyte")
    return WorkingRange(float(match.group("low")), float(match.group("high")),
                        " ".join(reason.split()) or None,
                        analyte.strip() if analyte and analyte.strip() else None)


@dataclass(frozen=True)
class RangeProposal:
    """A narrowed range calib proposes, and the curve re-evaluated on it.

    Attributes
    ----------
    lloq, uloq : float
        The lowest and highest level kept: the new LLOQ and ULOQ.
    dropped : tuple of float
        The levels dropped, lowest first.
    reason : str
        Why, in plain words.
    assessment : CurveAssessment
        The curve re-fitted and re-checked without the dropped levels.
    """

    lloq: float
    uloq: float
    dropped: tuple[float, ...]
    reason: str
    assessment: CurveAssessment

    @property
    def range(self) -> WorkingRange:
        """The proposal as the range the analyst would set to apply it."""
        return WorkingRange(self.lloq, self.uloq, self.reason)


@dataclass(frozen=True)
class AppliedRange:
    """The working range applied to a curve, as the record shows it.

    Attributes
    ----------
    low, high : float
        The range the analyst set.
    reason : str
        The analyst's reason, or calib's proposal when the analyst applied it as proposed.
    proposed : bool
        Whether the range is the one calib proposed.
    left_out : tuple of str
        Source cells of the standards the range left out of the fit.
    """

    low: float
    high: float
    reason: str
    proposed: bool
    left_out: tuple[str, ...]


def narrow_points(standards: Sequence[Point], working: WorkingRange, why: str) -> list[Point]:
    """The standards with every non-zero one outside ``working`` excluded for ``why``.

    Zero-concentration standards are left as they are: the profile decides about them.

    Examples
    --------
    >>> pts = [Point("A", c, c, f"R!C{c}") for c in (1, 2, 5)]
    >>> [(p.concentration, p.included) for p in narrow_points(pts, WorkingRange(2, 5), "LLOQ")]
    [(1, False), (2, True), (5, True)]
    """
    out = []
    for p in standards:
        if p.concentration != 0 and p.included and not working.contains(p.concentration):
            p = replace(p, included=False, exclusion_reason=why)
        out.append(p)
    return out


def _levels(curve: CurveAssessment) -> list[float]:
    return sorted({s.point.concentration for s in curve.standards
                   if s.used and s.point.concentration != 0})


def _dropped_words(low: Sequence[float], high: Sequence[float]) -> str:
    parts = []
    if low:
        parts.append(f"the lowest level{'s' if len(low) > 1 else ''} "
                     f"({', '.join(fmt(c) for c in low)})")
    if high:
        parts.append(f"the highest level{'s' if len(high) > 1 else ''} "
                     f"({', '.join(fmt(c) for c in high)})")
    return " and ".join(parts)


def _troubles(curve: CurveAssessment) -> set[str]:
    return {c.id for c in curve.checks
            if c.verdict in (Verdict.FAIL, Verdict.WARN) and c.severity is not Severity.INFO}


def propose_range(curve: CurveAssessment, standards: Sequence[Point],
                  assess: Callable[[Sequence[Point]], CurveAssessment], *,
                  max_dropped: int) -> RangeProposal | None:
    """The narrowest drop of end levels that improves a curve's verdict, or None.

    Parameters
    ----------
    curve : CurveAssessment
        The curve as assessed on its full range.
    standards : sequence of Point
        Its standards as read.
    assess : callable
        Re-assesses the curve on a list of standards (some excluded).
    max_dropped : int
        Most levels dropped in all, from either end.

    Returns
    -------
    RangeProposal or None
        None when the curve is accepted, or no drop of end levels improves it.
        Among the drops that give the best verdict, the one dropping the fewest
        levels wins, then the one leaving the fewest failing checks, then the
        one that keeps the lower end (sensitivity is what a narrowed range
        usually costs).
    """
    if curve.verdict is CurveVerdict.ACCEPTED:
        return None
    levels = _levels(curve)
    found = []
    for total in range(1, max_dropped + 1):
        for k_low in range(total, -1, -1):
            k_high = total - k_low
            kept = levels[k_low:len(levels) - k_high]
            if len(kept) < 2:
                continue
            working = WorkingRange(kept[0], kept[-1])
            why = f"outside the range {fmt(kept[0])} to {fmt(kept[-1])} calib proposes"
            narrowed = assess(narrow_points(standards, working, why))
            found.append((_RANK[narrowed.verdict], total, len(_troubles(narrowed)), k_low,
                          kept, narrowed))
    if not found:
        return None
    rank, total, _, k_low, kept, narrowed = min(found, key=lambda f: f[:4])
    if rank >= _RANK[curve.verdict]:
        return None
    k_high = total - k_low
    low, high = levels[:k_low], levels[len(levels) - k_high:]
    now_pass = sorted(_troubles(curve) - _troubles(narrowed))
    fixed = (f"; then {', '.join(now_pass)} pass{'es' if len(now_pass) == 1 else ''}"
             if now_pass else "")
    reason = (f"Dropping {_dropped_words(low, high)} makes the curve {narrowed.verdict.value} "
              f"instead of {curve.verdict.value}{fixed}; new LLOQ {fmt(kept[0])}, "
              f"ULOQ {fmt(kept[-1])}.")
    return RangeProposal(kept[0], kept[-1], (*low, *high), reason, narrowed)


def kept_levels(curve: CurveAssessment, working: WorkingRange) -> list[float]:
    """The curve's levels inside ``working``."""
    return [c for c in _levels(curve) if working.contains(c)]
