"""The main job as library calls: check a run file, issue its record.

:mod:`calib.service` builds on these (and writes, files and signs); front ends call it.
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
    from calib.options import FitOptions, Model, Weighting
    from calib.record.keys import SigningKey
    from calib.report.template import ReportTemplate

__all__ = ["build_issued_record", "check_file", "issue_record", "record_pdf", "render_record"]


def check_file(
    path: str | Path,
    *,
    sheet: str | int | None = None,
    profile: str | Path | Profile = "default",
    model: Model | str | None = None,
    weighting: Weighting | str | None = None,
    confidence: float | str | None = None,
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
        Override the profile's defaults; read and checked together (with each
        ``[[analyte]]`` entry's too) before the file is read.
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
    OptionError
        If the model, weighting and confidence cannot be used (together).
    """
    from calib.checks.overrides import given_options

    prof = profile if isinstance(profile, Profile) else load_profile(profile)
    options = given_options(prof, model, weighting, confidence)  # refused before any reading
    # Typed from here on; None still means "the profile's" (or an [[analyte]] entry's).
    model = None if model is None else options.model
    weighting = None if weighting is None else options.weighting
    confidence = None if confidence is None else options.confidence
    run = read_run(path, sheet=sheet, map=map)
    history = _slope_history(archive, prof, run.analytes, options)

    # [[analyte]] entries are applied inside, each curve under its own settings, in one pass.
    return evaluate_run(
        run, profile=prof, model=model, weighting=weighting, confidence=confidence,
        exclusions=exclusions, ranges=ranges, slope_history=history, progress=progress,
    )


def _slope_history(archive: str | Path | None, profile: Profile, analytes: Sequence[str],
                   options: FitOptions) -> dict[str, SlopeHistory] | None:
    """Earlier accepted slopes from the archive, when the profile compares with them."""
    if archive is None or not any(
            r.id == "slope-reference" and r.params.get("recent_curves") for r in profile.rules):
        return None
    from calib.archive.backends import is_database_url, redact

    if not (is_database_url(archive) or os.path.isfile(archive)):
        return None
    from calib.archive import Archive
    from calib.checks.history import slope_history

    source = redact(str(archive)) if is_database_url(archive) else os.path.basename(archive)
    with Archive(archive, create=False) as store:
        return {a: slope_history(store.curve_history(a), model=options.model,
                                 weighting=options.weighting,
                                 source=source) for a in analytes}


def issue_record(
    assessment: RunAssessment, *, prepared_by: str | None = None,
    created_at: datetime | None = None, key: SigningKey | None = None,
    template: str | Path | ReportTemplate | None = None,
) -> tuple[Record, bytes]:
    """Build the record of ``assessment`` and render its PDF; returns both (nothing written).

    ``template`` defaults to the lab's (see
    :func:`calib.report.template.resolve_template`); the record names it.
    With ``key`` (the issuing analyst's certified key, whose holder is then the
    preparer) the record is signed by its issuer, in its JSON and as the PDF's
    first digital signature; without, it is an unsigned draft, and every
    verification says so. :func:`calib.service.issue` does this and also writes
    and files the record.
    """
    from calib.record.signing import issue_signed
    from calib.record.signoff import issue_pdf
    from calib.report.pdf import record_pages
    from calib.report.template import resolve_template

    chosen = resolve_template(template)
    record = build_issued_record(assessment, prepared_by=prepared_by or (key.holder if key else None),
                                 created_at=created_at, template=chosen)
    if key is not None:
        record = issue_signed(record, key)
    return record, issue_pdf(record, pages=record_pages(chosen), key=key)


def build_issued_record(assessment: RunAssessment, *, prepared_by: str | None,
                        created_at: datetime | None, template: ReportTemplate) -> Record:
    """The record of ``assessment``, naming the template its pages are laid out with.

    The ``template`` section is part of the content: the digest and record id cover it.
    """
    from calib.report.template import template_section

    built = build_record(assessment, prepared_by=prepared_by, created_at=created_at)
    return Record({**built.body, "template": template_section(template)})


def render_record(record: Record, template: ReportTemplate) -> bytes:
    """Render ``record`` with ``template`` as its PDF (the record JSON attached inside)."""
    from calib.record.signoff import issue_pdf
    from calib.report.pdf import record_pages

    return issue_pdf(record, pages=record_pages(template))


def record_pdf(record: Record, *, template: str | Path | None = None) -> bytes:
    """Render ``record`` as its PDF calibration record (the record JSON attached inside).

    The template is ``template`` when given, else the one the record names,
    else the bundled one.
    """
    from calib.report import load_template
    from calib.report.template import template_for_record

    if template is not None:
        chosen = load_template(template)
    elif "template" in record.body:
        chosen = template_for_record(record.body)
    else:
        chosen = load_template()
    return render_record(record, chosen)
