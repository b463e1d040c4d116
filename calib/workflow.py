"""The main job as library calls: check a run file, issue its record.

The command line and any other front end call these and only render the result.
"""

from __future__ import annotations

from datetime import datetime
from pathlib import Path

from calib.checks.evaluate import Progress, RunAssessment, evaluate_run
from calib.checks.profile import load_profile
from calib.io import read_run
from calib.record.record import Record, build_record

__all__ = ["check_file", "issue_record", "record_pdf"]


def check_file(
    path: str | Path,
    *,
    sheet: str | int | None = None,
    profile: str | Path = "default",
    model: str | None = None,
    weighting: str | None = None,
    confidence: float | None = None,
    progress: Progress | None = None,
) -> RunAssessment:
    """Read a run file and judge every curve in it.

    Parameters
    ----------
    path : str or Path
        The instrument export (``.xlsx`` or ``.csv``).
    sheet : str or int, optional
        Sheet name or 0-based index; default: the first sheet with a standards table.
    profile : str or Path
        Shipped profile name or profile file.
    model, weighting, confidence : optional
        Override the profile's defaults.
    progress : callable, optional
        ``progress(done, total)`` after each curve.

    Raises
    ------
    InputError
        If the file cannot be read or used.
    ProfileError
        If the profile is malformed.
    """
    prof = load_profile(profile)
    run = read_run(path, sheet=sheet)
    return evaluate_run(
        run, profile=prof, model=model, weighting=weighting, confidence=confidence,
        progress=progress,
    )


def issue_record(
    assessment: RunAssessment, *, prepared_by: str | None = None,
    created_at: datetime | None = None,
) -> tuple[Record, bytes]:
    """Build the record of ``assessment`` and render its PDF; returns both."""
    record = build_record(assessment, prepared_by=prepared_by, created_at=created_at)
    return record, record_pdf(record)


def record_pdf(record: Record, *, template: str | Path | None = None) -> bytes:
    """Render ``record`` as its PDF calibration record (the record JSON attached inside)."""
    from calib.report import load_template, write_pdf

    return write_pdf(
        record.body,
        digest=record.digest,
        record_id=record.record_id,
        template=load_template(template) if template is not None else None,
        attachment=record.canonical,
    )
