"""``calib trend`` as a library call: an analyte's control charts from the archive.

Part of :mod:`calib.service` (which re-exports :func:`trend`, :class:`Freeze`
and :class:`TrendOutcome`): the limits come from a frozen baseline kept beside
the archive, or from the first accepted curves; a reviewed baseline can be
frozen first.  The PDF is written with :func:`calib.output.write_all`.
"""

from __future__ import annotations

import os
from collections.abc import Mapping
from dataclasses import dataclass, field, replace
from pathlib import Path
from typing import Any

from calib.output import Output, write_all

__all__ = ["Freeze", "TrendOutcome", "trend"]


@dataclass(frozen=True)
class TrendOutcome:
    """An analyte's control charts from the archive, and the PDF written (if any)."""

    trend: Any
    archive: str
    head: tuple[int, str] | None
    written: tuple[Path, ...] = ()
    note: str = ""
    """What was said about the frozen baseline used (e.g. that it was just frozen)."""

    @property
    def flagged(self) -> bool:
        """Whether a run rule fired."""
        return bool(self.trend.flagged)



def trend(
    archive: str | os.PathLike[str],
    analyte: str,
    *,
    baseline: int | None = None,
    instrument: str | None = None,
    pdf: str | os.PathLike[str] | None = None,
    template: Any = None,
    freeze: Freeze | None = None,
    baseline_file: str | os.PathLike[str] | None = None,
) -> TrendOutcome:
    """Control charts of an analyte's accepted curves; optionally their PDF.

    The limits come from the newest frozen baseline of the analyte (and
    instrument) kept beside the archive (Phase II), from ``baseline_file``, or,
    when none is frozen or ``baseline`` is given, from the first ``baseline``
    accepted curves (default 10), screened so one bad curve cannot widen its own
    limits. ``freeze`` establishes and freezes a reviewed baseline first (Phase I).

    Raises
    ------
    ArchiveError
        When the archive cannot be read, holds no curve of ``analyte``, or too
        few accepted curves to chart (the message says how many).
    BaselineError
        When a baseline cannot be frozen (a kept curve out of control) or read
        (edited, or not of this archive, analyte or instrument).
    """
    from calib.archive import Archive, ArchiveError
    from calib.archive.baseline import BaselineError
    from calib.archive.trend import analyte_trend

    path = os.fspath(archive)
    with Archive(path, create=False) as store:
        history = store.curve_history(analyte, instrument=instrument)
        head = store.head()
        known = store.analytes()
        if not history:
            raise ArchiveError(f"no curve of {analyte!r} in {path}; analytes archived: "
                               + (", ".join(known) or "none"))
        name = history[0].figures.analyte
        frozen, said = _frozen_baseline(path, store, history, name, instrument=instrument,
                                        baseline=baseline, freeze=freeze,
                                        baseline_file=baseline_file)
    if frozen is not None and (
            frozen.analyte.casefold() != name.casefold()
            or (frozen.instrument or "").casefold() != (instrument or "").casefold()):
        raise BaselineError(
            f"{frozen.file}: the baseline is for {frozen.analyte}"
            f"{' on ' + frozen.instrument if frozen.instrument else ''}, not for {name}"
            f"{' on ' + instrument if instrument else ''}")
    try:
        found = analyte_trend(history, analyte=name, baseline=baseline or 10, frozen=frozen)
    except ValueError as exc:
        raise BaselineError(f"{frozen.file if frozen else path}: {exc}") from None
    if said and frozen is None:
        found = replace(found, notes=(*found.notes, said))
    if not found.evaluated:
        raise ArchiveError(f"{found.analyte} in {path}: {_not_evaluated(found)}")
    written: list[Path] = []
    if pdf is not None:
        from calib.report.template import resolve_template
        from calib.report.trend_pdf import write_trend_pdf

        chosen = resolve_template(template)
        source = f"archive {Path(path).name}" + (
            f" up to seq {head[0]} (entry hash {head[1][:16]})" if head else "")
        written = write_all([Output(Path(pdf), write_trend_pdf(
            found, source=source, lab_name=chosen.lab.name, page_size=chosen.page_size))])
    return TrendOutcome(found, path, head, tuple(written),
                        said if frozen is not None else "")


@dataclass(frozen=True)
class Freeze:
    """A reviewed baseline to establish and freeze (Phase I of a control chart)."""

    reviewed_by: str
    exclude: Mapping[str, str] = field(default_factory=dict)
    start: Any = None
    note: str = ""


def _frozen_baseline(path: str, store: Any, history: list[Any], name: str, *,
                     instrument: str | None, baseline: int | None, freeze: Freeze | None,
                     baseline_file: str | os.PathLike[str] | None) -> tuple[Any, str]:
    """The frozen baseline to chart against (or None) and a note about the choice."""
    import datetime as dt

    from calib.archive.baseline import (
        BaselineError,
        baseline_document,
        baseline_folder,
        establish_baseline,
        latest_baseline_file,
        load_baseline,
        next_baseline_file,
    )
    from calib.output import write_atomic

    folder = baseline_folder(path)
    if freeze is not None:
        head = store.head()
        state = {"name": Path(path).name, "seq": head[0] if head else 0,
                 "entry_hash": head[1] if head else None}
        stamp = dt.datetime.now(dt.UTC).strftime("%Y-%m-%dT%H:%M:%SZ")
        made = establish_baseline(
            history, analyte=name, count=baseline or 10, reviewed_by=freeze.reviewed_by,
            established_at=stamp, exclude=dict(freeze.exclude), start=freeze.start,
            instrument=instrument, archive=state, note=freeze.note)
        target = next_baseline_file(folder, name, instrument)
        try:
            write_atomic(target, baseline_document(made), replace=False, private=True)
        except FileExistsError:
            raise BaselineError(f"{target} appeared while freezing; run again") from None
        return load_baseline(target), f"Baseline frozen: {target}"
    if baseline_file:
        return load_baseline(baseline_file), ""
    latest = latest_baseline_file(folder, name, instrument)
    if latest is None:
        return None, ""
    if baseline:
        return None, (f"the frozen baseline {latest.name} was not used: --baseline "
                      f"{baseline} asked for limits from the first {baseline} curves")
    return load_baseline(latest), ""


def _not_evaluated(found: Any) -> str:
    from calib.archive.control import MIN_BASELINE

    n = len(found.points)
    if n < MIN_BASELINE:
        return (f"{n} accepted curve{'s' if n != 1 else ''} ({len(found.left_out)} not "
                f"accepted); a control chart needs at least {MIN_BASELINE}")
    return "; ".join(f"{c.quantity}: {c.reason}" for c in found.charts)
