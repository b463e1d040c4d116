"""Where the curve comes from: a run file (fitted and checked now) or an issued record.

A run file is read, fitted and judged with :func:`calib.workflow.check_file`,
exactly as ``calib check`` would.  An issued record, its JSON or its PDF with
the attached ``calib-record.json``, gives the curves from its stored figures:
nothing is refitted, so the samples are read against the curve that was
reviewed.  A record whose data is not in calib's canonical form (edited, or
written by other software) is refused: ``calib verify`` says what changed.

The QC acceptance rule is the profile's ``qc`` rule: the run's profile, the
record's stored profile, or the profile named on the command line; a profile
without one gives calib's defaults (ICH M10 figures) at severity ``review``,
and says so.
"""

from __future__ import annotations

import hashlib
from dataclasses import dataclass, field
from pathlib import Path
from typing import TYPE_CHECKING, Any

from calib.errors import InputError, OptionError, ProfileError
from calib.quantify.curve import CalibrationCurve, curve_from_assessment, curves_from_record
from calib.quantify.qc import QcRule

if TYPE_CHECKING:
    from calib.checks.evaluate import RunAssessment
    from calib.checks.profile import Profile
    from calib.options import Model, Weighting
    from calib.run import Run

__all__ = ["CurveSource", "is_record_file", "load_curves"]


@dataclass(frozen=True)
class CurveSource:
    """The curves to quantify against, and where they come from.

    Attributes
    ----------
    kind : str
        ``"run"`` (a run file fitted and checked now) or ``"record"`` (an issued record).
    file, sha256 : str
        The CURVE file's name and the SHA-256 of its bytes.
    curves : dict of analyte to CalibrationCurve
        The fitted curves, each with its verdict.
    unfitted : dict of analyte to str
        Analytes whose standards could not be fitted, with the reason.
    qc_rule : QcRule
        The QC acceptance rule to apply.
    profile : dict
        ``name``, ``version``, ``sha256`` of the profile the curves were judged with.
    record_id, digest : str or None
        The record's id and version digest (records only).
    run : Run or None
        The run read (run files only), whose unknowns and QCs are quantified
        when no samples file is given.
    notes : tuple of str
        Facts worth printing (the QC rule's origin, ...).
    """

    kind: str
    file: str
    sha256: str
    curves: dict[str, CalibrationCurve]
    unfitted: dict[str, str]
    qc_rule: QcRule
    profile: dict[str, Any]
    record_id: str | None = None
    digest: str | None = None
    run: Run | None = None
    notes: tuple[str, ...] = field(default=())
    digits: dict[str, int] = field(default_factory=dict)
    """Significant figures the profile's ``[[analyte]]`` entries set for reported results."""

    @property
    def label(self) -> str:
        """How outputs name the curve: ``record CR-…`` or ``run file NAME``."""
        return f"record {self.record_id}" if self.record_id else f"run file {self.file}"


def is_record_file(path: str | Path) -> bool:
    """Whether ``path`` looks like an issued record (a PDF, or a JSON document) by its bytes.

    Examples
    --------
    >>> import tempfile, pathlib
    >>> with tempfile.TemporaryDirectory() as folder:
    ...     p = pathlib.Path(folder, "r.json"); _ = p.write_text("{}")
    ...     q = pathlib.Path(folder, "run.csv"); _ = q.write_text("Conc,Area\\n")
    ...     is_record_file(p), is_record_file(q)
    (True, False)
    """
    try:
        with open(path, "rb") as fh:
            head = fh.read(1024).lstrip(b"\xef\xbb\xbf \t\r\n")
    except OSError:
        return Path(path).suffix.lower() in (".pdf", ".json")
    return head.startswith((b"%PDF-", b"{"))


def _qc_rule_of(profile: Profile) -> tuple[QcRule, str | None]:
    """The profile's ``qc`` rule, or the defaults and a note saying so."""
    where = f"profile {profile.name} v{profile.version}"
    for spec in profile.rules:
        if spec.id == "qc":
            origin = f"rule qc of {where}"
            note = spec.source
            return QcRule.from_params(spec.params, severity=spec.severity.value,
                                      source=f"{origin}: {note}" if note else origin), None
    return QcRule(), (f"The {where} names no qc rule; the QCs were judged with calib's defaults "
                      "(ICH M10 figures, from memory) at severity review.")


def _from_assessment(assessment: RunAssessment) -> CurveSource:
    run = assessment.run
    curves: dict[str, CalibrationCurve] = {}
    unfitted: dict[str, str] = {}
    for c in assessment.curves:
        unit = run.units_of(c.analyte).get("concentration")
        curve = curve_from_assessment(c, unit=unit)
        if curve is None:
            unfitted[c.analyte] = c.unfitted_reason
        else:
            curves[c.analyte] = curve
    rule, note = _qc_rule_of(assessment.profile)
    p = assessment.profile
    return CurveSource(
        kind="run", file=run.source.file, sha256=run.source.sha256, curves=curves,
        unfitted=unfitted, qc_rule=rule,
        profile={"name": p.name, "version": p.version, "sha256": p.sha256}, run=run,
        notes=(note,) if note else (), digits=_digits(p, [*curves, *unfitted]),
    )


def _digits(profile: Any, analytes: list[str]) -> dict[str, int]:
    from calib.checks.overrides import digits_by_analyte

    return digits_by_analyte(profile, analytes) if profile is not None else {}


def _record_source(path: str | Path, *, profile: str | Path | None) -> CurveSource:
    from calib.checks.profile import load_profile, parse_profile
    from calib.record.record import Record
    from calib.record.verify import read_record_file

    file = read_record_file(path)
    if file.attachment is None:
        raise InputError("the attached record data cannot be read: the PDF is damaged "
                         "(calib verify says more)", file=str(path))
    what = "attached record data" if file.kind == "pdf" else "file"
    try:
        record = Record.from_json(file.attachment)
    except (UnicodeDecodeError, ValueError) as exc:
        raise InputError(f"the {what} is not a calibration record ({exc})", file=str(path)) from None
    if record.canonical != file.attachment:
        raise InputError(f"the {what} is not in calib's canonical form: it was edited or written "
                         "by other software; run calib verify on it", file=str(path))
    label = f"record {record.record_id}"
    curves, unfitted = curves_from_record(record.body, label=label)
    stored = record.body.get("profile") if isinstance(record.body.get("profile"), dict) else {}
    notes: list[str] = []
    prof = None
    if profile is not None:
        prof = load_profile(profile)
        rule, note = _qc_rule_of(prof)
    else:
        try:
            prof = parse_profile(str(stored.get("text") or ""), origin=f"{label}, profile")
            rule, note = _qc_rule_of(prof)
        except ProfileError as exc:
            rule = QcRule()
            note = (f"The record's profile cannot be read by this calib ({exc}); the QCs were "
                    "judged with calib's defaults (ICH M10 figures, from memory) at severity "
                    "review.")
    if note:
        notes.append(note)
    return CurveSource(
        kind="record", file=Path(path).name, sha256=hashlib.sha256(file.data).hexdigest(),
        curves=curves, unfitted=unfitted,
        qc_rule=rule,
        profile={k: stored.get(k) for k in ("name", "version", "sha256")},
        record_id=record.record_id, digest=record.digest, notes=tuple(notes),
        digits=_digits(prof, [*curves, *unfitted]),
    )


def load_curves(
    path: str | Path,
    *,
    sheet: str | int | None = None,
    profile: str | Path | None = None,
    model: Model | str | None = None,
    weighting: Weighting | str | None = None,
    confidence: float | None = None,
    map: str | Path | None = None,
) -> CurveSource:
    """Read the curves of a run file or an issued record.

    Parameters
    ----------
    path : str or Path
        A run file (``.xlsx``, ``.csv``...), a record JSON or a record PDF.
    sheet : str or int, optional
        Run files only: the sheet to read.
    profile : str or Path, optional
        Acceptance profile (shipped name or file).  For a run file it judges the
        curves (``default`` when None); for a record it only supplies the QC
        rule (the record's own profile when None).
    model, weighting, confidence : optional
        Run files only: override the profile's defaults, as in ``calib check``.
    map : str or Path, optional
        Run files only: the import map of the run file.

    Returns
    -------
    CurveSource

    Raises
    ------
    OptionError
        When ``model``, ``weighting`` or ``sheet`` is given with a record, whose curve is
        fixed, or the model, weighting and confidence cannot be used together.
    InputError
        When the file cannot be read or used.
    ProfileError
        When the profile is malformed.
    """
    if is_record_file(path):
        given = [name for name, value in (("model", model), ("weighting", weighting),
                                          ("sheet", sheet), ("map", map)) if value is not None]
        if given:
            raise OptionError(f"{' and '.join(given)} apply to a run file; the curve of an "
                             "issued record is fixed (its model and weighting were reviewed)")
        return _record_source(path, profile=profile)
    from calib.workflow import check_file

    assessment = check_file(path, sheet=sheet, profile=profile or "default", model=model,
                            weighting=weighting, confidence=confidence, map=map)
    return _from_assessment(assessment)
