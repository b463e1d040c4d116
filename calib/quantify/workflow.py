"""The quantify job as one library call: curve file and samples file in, a quantified batch out.

The command line (``calib quantify``) and any other front end call
:func:`quantify_files` and only render its result.
"""

from __future__ import annotations

from dataclasses import dataclass, field
from datetime import UTC, datetime
from pathlib import Path

from calib.errors import InputError
from calib.io.columns import squash
from calib.quantify.batch import Batch, ReportingConvention, quantify
from calib.quantify.samples import Reading, read_samples, readings_from_run
from calib.quantify.source import CurveSource, load_curves
from calib.run import SourceInfo

__all__ = ["QuantifyReport", "quantify_files"]


@dataclass(frozen=True)
class QuantifyReport:
    """A quantified batch with where its curve and samples came from.

    Attributes
    ----------
    curve : CurveSource
        The curves and their origin.
    samples_source : SourceInfo
        The samples file (the run file itself when the samples came from it).
    samples_from_run : bool
        True when no samples file was given and the run's unknowns and QCs were used.
    batch : Batch
        The results.
    created_at : str
        UTC time stamp, ``2026-12-01T09:30:00Z``.
    notes : tuple of str
        Facts worth printing beside the results.
    """

    curve: CurveSource
    samples_source: SourceInfo
    samples_from_run: bool
    batch: Batch
    created_at: str
    notes: tuple[str, ...] = field(default=())


def _check_units(curve: CurveSource, units: dict[str, str], file: str) -> None:
    given = units.get("concentration")
    if not given:
        return
    for analyte, c in curve.curves.items():
        if c.unit and squash(c.unit) != squash(given):
            raise InputError(f"the nominal concentrations are in {given}, but the {analyte} "
                             f"curve is in {c.unit}; convert one of them", file=file)


def quantify_files(
    curve: str | Path,
    samples: str | Path | None = None,
    *,
    sheet: str | int | None = None,
    samples_sheet: str | int | None = None,
    profile: str | Path | None = None,
    model: str | None = None,
    weighting: str | None = None,
    confidence: float | None = None,
    force: bool = False,
    convention: ReportingConvention | None = None,
    created_at: datetime | None = None,
) -> QuantifyReport:
    """Quantify the samples of a batch against a run file's or a record's curves.

    Parameters
    ----------
    curve : str or Path
        A run file (its standards are fitted and checked first) or an issued
        record (JSON, or PDF with the attached record data).
    samples : str or Path, optional
        The unknowns and QCs (see :func:`calib.quantify.samples.read_samples`);
        without it, those inside the run file.
    sheet : str or int, optional
        Sheet of the run file.
    samples_sheet : str or int, optional
        Sheet of the samples file.
    profile : str or Path, optional
        Acceptance profile (see :func:`calib.quantify.source.load_curves`).
    model, weighting, confidence : optional
        As for ``calib check``; ``confidence`` also sets the sample intervals.
    force : bool
        Quantify against rejected curves too (flagged ``forced``).
    convention : ReportingConvention, optional
        How results that are not numbers are written.
    created_at : datetime, optional
        Time stamp of the batch (now when None).

    Returns
    -------
    QuantifyReport

    Raises
    ------
    InputError
        When a file cannot be read or used, or no samples are found.
    ProfileError
        When the profile is malformed.
    ValueError
        When a run-file option is given with a record.
    """
    source = load_curves(curve, sheet=sheet, profile=profile, model=model, weighting=weighting,
                         confidence=confidence)
    notes = list(source.notes)
    readings: tuple[Reading, ...]
    if samples is not None:
        single = next(iter(source.curves)) if len(source.curves) == 1 and not source.unfitted \
            else None
        sheet_read = read_samples(samples, sheet=samples_sheet, analyte=single)
        _check_units(source, sheet_read.units, str(samples))
        readings, samples_info, from_run = sheet_read.readings, sheet_read.source, False
        notes += sheet_read.notes
    elif source.run is not None:
        readings = readings_from_run(source.run)
        samples_info, from_run = source.run.source, True
    else:
        raise InputError("an issued record holds no samples; give the samples file after the "
                         "record", file=str(curve))
    if not readings:
        where = str(samples) if samples is not None else str(curve)
        raise InputError("no unknown or QC samples found to quantify (a run file's unknowns "
                         "and QCs are used when no samples file is given)", file=where)
    batch = quantify(source.curves, readings, confidence=confidence, force=force,
                     qc_rule=source.qc_rule, unfitted=source.unfitted, convention=convention,
                     digits=source.digits)
    when = (created_at or datetime.now(UTC)).astimezone(UTC).strftime("%Y-%m-%dT%H:%M:%SZ")
    return QuantifyReport(source, samples_info, from_run, batch, when, tuple(notes))
