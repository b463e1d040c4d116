"""The main job as library calls: check a run file, issue its record.

The command line and any other front end call these and only render the result.
"""

from __future__ import annotations

import os
from collections.abc import Sequence
from datetime import datetime
from pathlib import Path
from typing import TYPE_CHECKING

from calib.checks.evaluate import Progress, RunAssessment, evaluate_run
from calib.checks.profile import Profile, load_profile
from calib.io import ImportMap, read_run
from calib.record.record import Record, build_record

if TYPE_CHECKING:
    from calib.checks.exclusions import Exclusion
    from calib.checks.history import SlopeHistory
    from calib.checks.narrowing import WorkingRange
    from calib.record.keys import SigningKey

__all__ = ["check_file", "issue_record", "record_pdf"]


def check_file(
    path: str | Path,
    *,
    sheet: str | int | None = None,
    profile: str | Path | Profile = "default",
    model: str | None = None,
    weighting: str | None = None,
    confidence: float | None = None,
    map: ImportMap | str | Path | None = None,
    exclusions: Sequence[Exclusion] = (),
    ranges: Sequence[WorkingRange] = (),
    archive: str | Path | None = None,
    progress: Progress | None = None,
) -> RunAssessment:
    """Read a run file and judge every curve in it.

    Parameters
    ----------
    path : str or Path
        The instrument export (any format :func:`calib.io.read_run` reads).
    sheet : str or int, optional
        Sheet name or 0-based index; default: the first sheet with a standards table.
    profile : str, Path or Profile
        Shipped profile name, profile file, or a loaded profile.
    model, weighting, confidence : optional
        Override the profile's defaults.
    map : ImportMap, str or Path, optional
        Import map for unusual exports.
    exclusions, ranges : sequences, optional
        The analyst's exclusions (each with its reason) and applied working ranges.
    archive : str or Path, optional
        Archive whose recent accepted slopes feed the ``slope-reference`` rule when the
        profile asks for them (``recent_curves``); only read, never written here.
    progress : callable, optional
        ``progress(done, total)`` after each curve.

    Raises
    ------
    InputError
        If the file cannot be read or used.
    ProfileError
        If the profile is malformed.
    """
    prof = profile if isinstance(profile, Profile) else load_profile(profile)
    run = read_run(path, sheet=sheet, map=map)
    history = _slope_history(archive, prof, run.analytes, model=model, weighting=weighting)
    return evaluate_run(
        run, profile=prof, model=model, weighting=weighting, confidence=confidence,
        exclusions=exclusions, ranges=ranges, slope_history=history, progress=progress,
    )


def _slope_history(archive: str | Path | None, profile: Profile, analytes: Sequence[str], *,
                   model: str | None, weighting: str | None) -> dict[str, SlopeHistory] | None:
    """Earlier accepted slopes from the archive, when the profile compares with them."""
    if archive is None or not os.path.isfile(archive) or not any(
            r.id == "slope-reference" and r.params.get("recent_curves") for r in profile.rules):
        return None
    from calib.archive import Archive
    from calib.checks.history import slope_history

    model, weighting = model or profile.model, weighting or profile.weighting
    with Archive(archive, create=False) as store:
        return {a: slope_history(store.curve_history(a), model=model, weighting=weighting,
                                 source=os.path.basename(archive)) for a in analytes}


def issue_record(
    assessment: RunAssessment, *, prepared_by: str | None = None,
    created_at: datetime | None = None, key: SigningKey | None = None,
    template: str | Path | None = None,
) -> tuple[Record, bytes]:
    """Build the record of ``assessment`` and render its PDF; returns both.

    With ``key`` (the issuing analyst's certified key, whose holder is then
    the preparer) the record is signed by its issuer, in its JSON and as the
    PDF's first digital signature; without, it is an unsigned draft, and every
    verification says so.
    """
    from calib.record.signing import issue_signed
    from calib.record.signoff import issue_pdf

    record = build_record(assessment, prepared_by=prepared_by or (key.holder if key else None),
                          created_at=created_at)
    if key is not None:
        record = issue_signed(record, key)
    from calib.report import load_template

    return record, issue_pdf(record, key=key,
                             template=load_template(template) if template is not None else None)


def record_pdf(record: Record, *, template: str | Path | None = None) -> bytes:
    """Render ``record`` as its PDF calibration record (the record JSON attached inside)."""
    import hashlib

    from calib.report import load_template, write_pdf

    canonical = record.canonical  # serialised once: the digest is of these bytes
    return write_pdf(
        record.body,
        digest=hashlib.sha256(canonical).hexdigest(),
        record_id=record.record_id,
        template=load_template(template) if template is not None else None,
        attachment=canonical,
    )
