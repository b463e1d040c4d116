"""Points the analyst leaves out, named by their cell or sample, each with a reason.

A run file can exclude points itself (its ``include`` and ``exclusion_reason``
columns); the analyst can also exclude points when checking, naming each by
the cell its response came from (``Run!C7``, or ``C7`` when only one sheet
has that cell) or by its sample name (``Cal 3``).  A sample name that
several analytes share must say which (``Nitrate:Cal 3``, or ``*:Cal 3``
for all of them); a cell or name of an unknown sample is refused, since
unknowns are not fitted.  An exclusion always carries a reason, the record
keeps both, and the run's warnings say how many points of which analytes
each exclusion by name removed.
"""

from __future__ import annotations

import re
from collections.abc import Sequence
from dataclasses import dataclass, replace

from calib.errors import InputError
from calib.options import SampleType
from calib.run import Point, Run

__all__ = ["AppliedExclusion", "Exclusion", "apply_exclusions", "parse_exclusion"]

_CELL = re.compile(r"[a-z]{1,3}[0-9]+")


@dataclass(frozen=True)
class Exclusion:
    """One exclusion the analyst asks for: a cell or sample name, and the reason."""

    target: str
    reason: str


@dataclass(frozen=True)
class AppliedExclusion:
    """An exclusion as applied: what it named, why, and the points it left out.

    Attributes
    ----------
    target, reason : str
        As the analyst gave them.
    cells : tuple of str
        Source cells of the points excluded.
    analytes : tuple of str
        Their analytes.
    """

    target: str
    reason: str
    cells: tuple[str, ...]
    analytes: tuple[str, ...]


def parse_exclusion(text: str) -> Exclusion:
    """Read ``TARGET=REASON``; the reason is required.

    Raises
    ------
    ValueError
        If the ``=`` or either side is missing.

    Examples
    --------
    >>> parse_exclusion("Run!C7=vial cap not seated")
    Exclusion(target='Run!C7', reason='vial cap not seated')
    >>> parse_exclusion("Run!C7")
    Traceback (most recent call last):
    ...
    ValueError: exclusion 'Run!C7' has no reason: write CELL=REASON (every exclusion needs one)
    """
    target, sep, reason = text.partition("=")
    if not sep or not reason.strip():
        raise ValueError(f"exclusion {text!r} has no reason: write CELL=REASON "
                         "(every exclusion needs one)")
    if not target.strip():
        raise ValueError(f"exclusion {text!r} names no cell or sample before '='")
    return Exclusion(target.strip(), " ".join(reason.split()))


def _cell_key(text: str) -> tuple[str | None, str]:
    """(sheet or None, cell), lower case, without ``$`` and quotes."""
    text = text.strip().replace("$", "").lower()
    sheet, bang, cell = text.rpartition("!")
    if not bang:
        return None, cell.strip()
    return sheet.strip().strip("'\"").strip(), cell.strip()


def _matches(target: str, points: Sequence[Point]) -> list[int]:
    sheet, cell = _cell_key(target)
    if _CELL.fullmatch(cell):
        found = []
        for i, p in enumerate(points):
            p_sheet, p_cell = _cell_key(p.source_cell)
            if p_cell == cell and (sheet is None or p_sheet == sheet):
                found.append(i)
        if found:
            if sheet is None and len({_cell_key(points[i].source_cell)[0] for i in found}) > 1:
                shown = ", ".join(sorted({points[i].source_cell for i in found}))
                raise InputError(f"exclusion {target!r} is ambiguous: more than one sheet has "
                                 f"that cell ({shown}); name the sheet, e.g. "
                                 f"{points[found[0]].source_cell}")
            return found
    return _by_name(target, points)


def _by_name(target: str, points: Sequence[Point]) -> list[int]:
    """Points of a sample name, ``ANALYTE:NAME`` or ``*:NAME``; refuses a name of several."""
    analyte, colon, rest = target.partition(":")
    analytes = {" ".join(p.analyte.split()).casefold() for p in points}
    which = " ".join(analyte.split()).casefold()
    if colon and (which in analytes or which == "*"):
        target = rest
    else:
        which = ""
    name = " ".join(target.split()).casefold()
    found = [i for i, p in enumerate(points)
             if p.sample_id is not None and " ".join(p.sample_id.split()).casefold() == name
             and (which in ("", "*") or " ".join(p.analyte.split()).casefold() == which)]
    named = list(dict.fromkeys(points[i].analyte for i in found))
    if not which and len(named) > 1:
        raise InputError(
            f"exclusion {target.strip()!r} names a sample of {len(named)} analytes "
            f"({', '.join(named[:6])}{', ...' if len(named) > 6 else ''}); say which: "
            f"{named[0]}:{target.strip()}=REASON, or *:{target.strip()}=REASON for all of them")
    return found


def apply_exclusions(run: Run, exclusions: Sequence[Exclusion],
                     ) -> tuple[Run, tuple[AppliedExclusion, ...]]:
    """Mark the points each exclusion names as excluded, with its reason.

    A point the file already excludes keeps its reason, and the analyst's is
    added after it.

    Parameters
    ----------
    run : Run
        As read.
    exclusions : sequence of Exclusion
        What to leave out and why.

    Returns
    -------
    (Run, tuple of AppliedExclusion)
        The run with those points excluded, and what each exclusion did.

    Raises
    ------
    InputError
        If an exclusion names no point of the run, or a bare cell several sheets share.

    Examples
    --------
    >>> from calib.run import SourceInfo
    >>> pts = tuple(Point("A", c, r, f"Run!C{i + 2}") for i, (c, r) in
    ...             enumerate([(1, 1.0), (2, 2.1), (4, 3.9)]))
    >>> run = Run(SourceInfo("a.csv", "0" * 64), pts)
    >>> new, applied = apply_exclusions(run, [Exclusion("c3", "bubble in the syringe")])
    >>> new.points[1].included, new.points[1].exclusion_reason, applied[0].cells
    (False, 'bubble in the syringe', ('Run!C3',))
    """
    points = list(run.points)
    applied = []
    for exclusion in exclusions:
        found = _matches(exclusion.target, points)
        if not found:
            raise InputError(
                f"exclusion {exclusion.target!r} matches no point of the run: name the cell its "
                f"response was read from (such as {points[0].source_cell if points else 'Run!C7'}) "
                "or its sample name", file=run.source.file)
        unknowns = [points[i] for i in found if points[i].sample_type is SampleType.UNKNOWN]
        if len(unknowns) == len(found):
            who = f" ({unknowns[0].sample_id})" if unknowns[0].sample_id else ""
            raise InputError(
                f"exclusion {exclusion.target!r} names {unknowns[0].source_cell}, the response "
                f"of an unknown sample{who}, which is not fitted: exclusions leave calibration "
                f"points out; name a standard's cell or sample name", file=run.source.file)
        for i in found:
            p = points[i]
            reason = (exclusion.reason if p.included or not p.exclusion_reason
                      else f"{p.exclusion_reason}; {exclusion.reason}")
            points[i] = replace(p, included=False, exclusion_reason=reason)
        applied.append(AppliedExclusion(
            exclusion.target, exclusion.reason, tuple(points[i].source_cell for i in found),
            tuple(dict.fromkeys(points[i].analyte for i in found))))
    notes = []
    for done in applied:
        if not _CELL.fullmatch(_cell_key(done.target)[1]):
            counts = {a: sum(points[i].analyte == a for i in _matches(done.target, points))
                      for a in done.analytes}
            notes.append(f"exclusion {done.target!r} ({done.reason}) removed {len(done.cells)} "
                         f"point{'s' if len(done.cells) != 1 else ''}: " + ", ".join(
                             f"{n} of {a}" for a, n in counts.items()))
    return replace(run, points=tuple(points), warnings=(*run.warnings, *notes)), tuple(applied)
