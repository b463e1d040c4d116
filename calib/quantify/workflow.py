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
from calib.options import Model, Weighting
from calib.quantify.batch import Batch, ReportingConvention, quantify
from calib.quantify.samples import (
    SampleSheet,
    load_samples_map,
    read_samples,
    readings_from_run,
)
from calib.quantify.sampletable import SampleRows
from calib.quantify.source import CurveSource, is_record_file, load_curves
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


def _basis(curve: CurveSource, sheet: SampleSheet, file: str, *,
           ignore_internal_standard: bool) -> tuple[bool, list[str]]:
    """Whether to read the samples again without ratios, and notes; refuse a mixed basis.

    The samples must be read as the curve's standards were: raw responses for a
    raw curve, ratios to the internal standard for a ratio curve.
    """
    analytes = list(dict.fromkeys(sheet.rows.analyte))
    notes: list[str] = []
    reread = False
    for analyte in analytes:
        c = curve.curves.get(analyte)
        if c is None:
            continue
        if c.response_basis == "ratio" and sheet.internal_standard is None:
            raise InputError(
                f"the {analyte} curve was fitted on ratios of its response to an internal "
                f"standard, but the samples file has no internal-standard response column; "
                f"expected that column (IS response, IS area...) so the samples are read on the "
                f"same basis", file=file)
        if c.response_basis == "ratio" and ignore_internal_standard:
            raise InputError(
                f"the {analyte} curve was fitted on ratios to an internal standard; "
                f"--ignore-internal-standard would read raw responses against it (leave it "
                f"out)", file=file)
        if c.response_basis != "ratio" and sheet.internal_standard is not None:
            if not ignore_internal_standard:
                basis = ("fitted on raw responses" if c.response_basis == "raw" else
                         "from a record that does not say whether it was fitted on raw "
                         "responses or on ratios")
                raise InputError(
                    f"the {analyte} curve is {basis}, but the samples file has an "
                    f"internal-standard response ({sheet.internal_standard}), which would "
                    f"turn the samples' responses into ratios; expected samples on the "
                    f"curve's basis: remove that column, or give --ignore-internal-standard "
                    f"to quantify the raw responses", file=file)
            reread = True
        if c.response_basis is None and sheet.internal_standard is None:
            notes.append(f"The {curve.label} does not say whether the {analyte} curve was "
                         f"fitted on raw responses or on ratios to an internal standard (it "
                         f"was issued before records stated it); the samples were read as raw "
                         f"responses: make sure the curve's standards were too.")
    if reread:
        notes.append("The samples file's internal-standard column was left aside "
                     "(--ignore-internal-standard): raw responses were quantified against "
                     "curves fitted on raw responses.")
    return reread, notes


def _check_content(curve: CurveSource, rows: SampleRows, file: str) -> list[str]:
    """Refuse weights and volumes an analyte's unit cannot take; say where they were applied."""
    from calib.quantify.amounts import content_factor

    applied: dict[str, str] = {}
    for analyte, mass, volume in zip(rows.analyte, rows.mass_kg, rows.volume_l, strict=True):
        c = curve.curves.get(analyte)
        if mass is None or volume is None or c is None:
            continue
        try:
            applied[analyte] = content_factor(c.unit, volume, mass)[1]
        except ValueError as exc:
            raise InputError(f"the samples give a sample weight and a final volume, but for "
                             f"{analyte} {exc}; expected a curve in a mass per volume "
                             f"(set its unit with the run's heading or an import map's "
                             f"[units])", file=file) from None
    return [f"Sample weights and final volumes were applied: {a} results are contents in "
            f"{u} (C × V / m), the concentration columns stay in the curve's unit."
            for a, u in applied.items()]


def quantify_files(
    curve: str | Path,
    samples: str | Path | None = None,
    *,
    sheet: str | int | None = None,
    samples_sheet: str | int | None = None,
    profile: str | Path | None = None,
    model: Model | str | None = None,
    weighting: Weighting | str | None = None,
    confidence: float | None = None,
    force: bool = False,
    convention: ReportingConvention | None = None,
    created_at: datetime | None = None,
    samples_map: str | Path | None = None,
    ignore_internal_standard: bool = False,
    dilution_below_one: bool = False,
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
    samples_map : str or Path, optional
        Import map of the samples file
        (:func:`calib.quantify.samples.load_samples_map`); without a samples
        file, the import map of the run file, whose unknowns and QCs are used.
    ignore_internal_standard : bool
        Read the samples' raw responses although the file has an internal-standard
        column (for curves fitted on raw responses); refused otherwise.
    dilution_below_one : bool
        Accept dilution factors below 1 (concentrated samples).

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
    # Without a samples file the samples come from the run file, so the map is the run's.
    run_map = samples_map if samples is None and not is_record_file(curve) else None
    source = load_curves(curve, sheet=sheet, profile=profile, model=model, weighting=weighting,
                         confidence=confidence, map=run_map)
    notes = list(source.notes)
    rows: SampleRows
    if samples is not None:
        single = next(iter(source.curves)) if len(source.curves) == 1 and not source.unfitted \
            else None
        smap = load_samples_map(samples_map) if samples_map is not None else None
        options = {"sheet": samples_sheet, "analyte": single, "map": smap,
                   "dilution_below_one": dilution_below_one}
        sheet_read = read_samples(samples, **options)
        reread, basis_notes = _basis(source, sheet_read, str(samples),
                                     ignore_internal_standard=ignore_internal_standard)
        if reread:
            sheet_read = read_samples(samples, internal_standard=False, **options)
        _check_units(source, sheet_read.units, str(samples))
        rows, samples_info, from_run = sheet_read.rows, sheet_read.source, False
        notes += [*sheet_read.notes, *basis_notes,
                  *_check_content(source, rows, str(samples))]
        below = sorted(set(rows.dilution[rows.dilution < 1].tolist()))
        if below:
            notes.append(f"Dilution factors below 1 ({', '.join(f'{d:g}' for d in below)}) were "
                         f"applied as confirmed (--dilution-below-one): those samples were "
                         f"concentrated before measuring.")
    elif source.run is not None:
        rows = SampleRows.from_readings(readings_from_run(source.run))
        samples_info, from_run = source.run.source, True
    else:
        raise InputError("an issued record holds no samples; give the samples file after the "
                         "record", file=str(curve))
    if not len(rows):
        where = str(samples) if samples is not None else str(curve)
        raise InputError("no unknown or QC samples found to quantify (a run file's unknowns "
                         "and QCs are used when no samples file is given)", file=where)
    batch = quantify(source.curves, rows, confidence=confidence, force=force,
                     qc_rule=source.qc_rule, unfitted=source.unfitted, convention=convention,
                     digits=source.digits)
    when = (created_at or datetime.now(UTC)).astimezone(UTC).strftime("%Y-%m-%dT%H:%M:%SZ")
    return QuantifyReport(source, samples_info, from_run, batch, when, tuple(notes))
