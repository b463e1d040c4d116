"""What calib does, as library calls that return outcomes: the one path for CLI and web.

The command line and the web page only translate arguments or forms into these
calls and their outcomes into text, pages and exit codes; every assembly of a
result (which template, which files, what goes into the archive, in what
order) happens here, so both front doors issue the same records.

- :func:`check`: read a run file and judge its curves (nothing written);
- :func:`describe_import`: what the importer recognised in a run file;
- :func:`issue`: build the record, render its PDF, write the chosen files and
  optionally file it in the archive: all of it, or nothing;
- :func:`export`: write the results workbook / CSV of a check, without a record;
- :func:`file`: append an issued record to the archive;
- :func:`quantify`: samples against a checked curve; optional workbook and PDF;
- :func:`trend`: control charts of an analyte from the archive; optional PDF
  (in :mod:`calib.service_trend`, re-exported here);
- :func:`sign`, :func:`verify`: thin delegations to :mod:`calib.record` that
  find the template the record names (:func:`record_template`).

Files are written with :func:`calib.output.write_all`: each to a temporary
name, renamed only when every file is complete and the archive has accepted
the record, so a failure anywhere (an overflow while rendering, a full disk)
leaves no CSV, workbook, PDF or JSON behind.
"""

from __future__ import annotations

import os
from collections.abc import Sequence
from dataclasses import dataclass, field
from datetime import datetime
from pathlib import Path
from typing import TYPE_CHECKING, Any

from calib.output import Output, write_all
from calib.service_trend import Freeze, TrendOutcome, trend

if TYPE_CHECKING:
    from calib.checks.evaluate import Progress, RunAssessment
    from calib.checks.exclusions import Exclusion
    from calib.checks.narrowing import WorkingRange
    from calib.checks.profile import Profile
    from calib.io import ImportMap
    from calib.io.standards import Standards
    from calib.options import Model, Weighting
    from calib.record import Record
    from calib.report.template import ReportTemplate

__all__ = [
    "CheckOutcome", "Filed", "Freeze", "IssueOutcome", "QuantifyOutcome", "SignOutcome",
    "TrendOutcome", "check", "describe_import", "export", "file", "issue", "quantify",
    "record_template", "sign", "trend", "verify",
]


@dataclass(frozen=True)
class CheckOutcome:
    """A judged run: the assessment and its ``calib.check/1`` document.

    Attributes
    ----------
    assessment : RunAssessment
        Every curve with its fit and checks.
    document : dict
        The ``calib.check/1`` document of the assessment.
    """

    assessment: RunAssessment
    document: dict[str, Any]

    @property
    def verdict(self) -> str:
        """``accepted``, ``needs-review`` or ``rejected`` (the run's verdict)."""
        return str(self.document["verdict"])

    @property
    def accepted(self) -> bool:
        """Whether every curve was accepted."""
        return self.verdict == "accepted"


@dataclass(frozen=True)
class IssueOutcome:
    """An issued record: its data, PDF and template, and where it went.

    Attributes
    ----------
    record : Record
        The record (its ``template`` key names the template: file name and SHA-256).
    pdf : bytes
        The rendered PDF, the record JSON attached inside.
    template : ReportTemplate
        The template the pages were laid out with.
    written : tuple of Path
        Files written (record PDF, record JSON, exports), in the order asked.
    filed : ArchiveEntry or None
        The archive entry, when the record was filed.
    archive : str or None
        The archive filed in.
    """

    record: Record
    pdf: bytes
    template: ReportTemplate
    written: tuple[Path, ...] = ()
    filed: Any = None
    archive: str | None = None
    logbook: str = ""
    """The archive's new head, for the lab's logbook ("" when no head receipt is kept)."""


@dataclass(frozen=True)
class QuantifyOutcome:
    """A quantified batch: the report, its ``calib.quantify/1`` document, the files written."""

    report: Any
    document: dict[str, Any]
    written: tuple[Path, ...] = ()
    workbook: bytes | None = None
    """The results workbook's bytes, when asked for (``workbook=True`` or ``xlsx``)."""

    @property
    def accepted(self) -> bool:
        """Whether every curve was accepted and the QCs pass."""
        return self.document.get("verdict") == "accepted"


@dataclass(frozen=True)
class SignOutcome:
    """A new signed version and the archive entries filed for it."""

    signed: Any
    entries: tuple[Any, ...] = field(default=())

    @property
    def record(self) -> Record:
        """The signed record."""
        return self.signed.record


# ----------------------------------------------------------------------------- check

def check(
    path: str | os.PathLike[str],
    *,
    sheet: str | int | None = None,
    profile: str | os.PathLike[str] | Profile = "default",
    model: Model | str | None = None,
    weighting: Weighting | str | None = None,
    confidence: float | str | None = None,
    map: ImportMap | str | os.PathLike[str] | None = None,
    exclusions: Sequence[Exclusion] = (),
    ranges: Sequence[WorkingRange] = (),
    archive: str | os.PathLike[str] | None = None,
    progress: Progress | None = None,
    standards: Standards | str | os.PathLike[str] | None = None,
) -> CheckOutcome:
    """Read a run file and judge every curve in it; nothing is written.

    Parameters are those of :func:`calib.workflow.check_file`, and
    ``standards``: a standards file (:mod:`calib.io.standards`) or its parsed
    form, naming the reference materials the standards came from (default: the
    file a ``Standards file:`` line of the run names, if any); each curve then
    gets the ``standards-expiry`` check and the record a ``standards`` section.

    Raises
    ------
    InputError, ProfileError
        When the run file or profile cannot be used.
    """
    from calib.record import check_document
    from calib.workflow import check_file

    assessment = check_file(path, sheet=sheet, profile=profile, model=model,
                            weighting=weighting, confidence=confidence, map=map,
                            exclusions=exclusions, ranges=ranges, archive=archive,
                            progress=progress)
    from calib.io.standards import standards_for_run

    chosen = standards_for_run(path, assessment.run.metadata, standards)
    if chosen is not None:
        from calib.checks.traceability import with_standards

        assessment = with_standards(assessment, chosen)
    return CheckOutcome(assessment, check_document(assessment))


def describe_import(path: str | os.PathLike[str], *, sheet: str | int | None = None,
                    map: ImportMap | str | os.PathLike[str] | None = None) -> str:
    """What the importer recognised in a run file (sheet, layout, columns, units...), as text."""
    from calib.io import describe_import as describe
    from calib.io import read_run

    return describe(read_run(path, sheet=sheet, map=map))


# ----------------------------------------------------------------------------- issue

def issue(
    outcome: CheckOutcome | RunAssessment,
    *,
    prepared_by: str | None = None,
    template: Any = None,
    created_at: datetime | None = None,
    pdf: str | os.PathLike[str] | None = None,
    record_json: str | os.PathLike[str] | None = None,
    xlsx: str | os.PathLike[str] | None = None,
    csv: str | os.PathLike[str] | None = None,
    archive: str | os.PathLike[str] | None = None,
    replace: bool = False,
    key: Any = None,
) -> IssueOutcome:
    """Build the record, render its PDF, then write the files and file it: all, or nothing.

    Parameters
    ----------
    outcome : CheckOutcome or RunAssessment
        The judged run.
    prepared_by : str, optional
        Printed name of the analyst issuing the record.
    template : path or ReportTemplate, optional
        The report template; default: the lab's (``calib lab init``), else the
        bundled one, which says "Laboratory not configured".
    created_at : datetime, optional
        Issue time (UTC); now when omitted.
    pdf, record_json : path, optional
        Where to write the record PDF and the record JSON (never replaced unless
        ``replace``).
    xlsx, csv : path, optional
        Where to write the results workbook and CSV (replaced when they exist).
    archive : path, optional
        Archive to file the issued record in.
    replace : bool
        Replace an existing record PDF or JSON.
    key : SigningKey, optional
        The issuing analyst's certified key (:func:`calib.record.keys.load_signing_key`):
        the record is then signed by its issuer, in its JSON and as the PDF's first
        digital signature, and its holder is the preparer. Without a key the record
        is an unsigned draft, and every verification says so.

    Raises
    ------
    FileExistsError
        When ``pdf`` or ``record_json`` exists and ``replace`` is False.
    TemplateError
        When the template cannot be used.
    OSError
        When a file cannot be written (a full disk, ENOSPC); nothing is left behind.
    """
    from calib.report.template import resolve_template
    from calib.workflow import issue_record

    check_outcome = _as_outcome(outcome)
    chosen = resolve_template(template)
    record, rendered = issue_record(check_outcome.assessment, prepared_by=prepared_by,
                                    created_at=created_at, key=key, template=chosen)
    outputs = [Output(Path(p), data, replace) for p, data in
               ((pdf, rendered), (record_json, record.canonical)) if p is not None]
    outputs += _export_outputs(check_outcome.document, xlsx=xlsx, csv=csv)
    filed: list[Any] = []

    def file_it() -> None:
        if archive is not None:
            filed.append(file(archive, record, rendered))

    written = write_all(outputs, before_commit=file_it)
    if not filed:
        return IssueOutcome(record, rendered, chosen, tuple(written))
    done = filed[0]
    return IssueOutcome(record, rendered, chosen, tuple(written), done.entry, done.location,
                        done.logbook)


def export(outcome: CheckOutcome, *, xlsx: str | os.PathLike[str] | None = None,
           csv: str | os.PathLike[str] | None = None) -> tuple[Path, ...]:
    """Write the results workbook and/or CSV of a check (no record): both, or neither."""
    return tuple(write_all(_export_outputs(outcome.document, xlsx=xlsx, csv=csv)))


@dataclass(frozen=True)
class Filed:
    """An issued record appended to the archive."""

    entry: Any
    location: str
    """The archive's location as it may be shown (a database password hidden)."""
    logbook: str = ""
    """The archive's new head, for the lab's logbook ("" when no head receipt is kept)."""


def file(archive: str | os.PathLike[str], record: Record, pdf: bytes) -> Filed:
    """Append an issued record (JSON and PDF) to the archive; returns its entry and new head."""
    from calib.archive import Archive

    with Archive(os.fspath(archive)) as store:
        entry = store.append(record, pdf, kind="issued")
        receipt = store.last_receipt
        return Filed(entry, str(store.location),
                     f"For the logbook: {receipt.logbook_line()}" if receipt else "")


def _as_outcome(outcome: CheckOutcome | RunAssessment) -> CheckOutcome:
    if isinstance(outcome, CheckOutcome):
        return outcome
    from calib.record import check_document

    return CheckOutcome(outcome, check_document(outcome))


def _export_outputs(document: dict[str, Any], *, xlsx: Any, csv: Any) -> list[Output]:
    outputs = []
    if xlsx is not None:
        from calib.export import results_xlsx

        outputs.append(Output(Path(xlsx), results_xlsx(document)))
    if csv is not None:
        from calib.export import results_csv

        outputs.append(Output(Path(csv), results_csv(document)))
    return outputs


# ----------------------------------------------------------------------------- quantify

def quantify(
    curve: str | os.PathLike[str],
    samples: str | os.PathLike[str] | None = None,
    *,
    template: Any = None,
    xlsx: str | os.PathLike[str] | None = None,
    pdf: str | os.PathLike[str] | None = None,
    workbook: bool = False,
    sample_entries: bool = True,
    **options: Any,
) -> QuantifyOutcome:
    """Quantify samples against a checked curve; write the workbook and PDF (both, or neither).

    ``options`` are those of :func:`calib.quantify.workflow.quantify_files`
    (sheet, samples_sheet, profile, model, weighting, confidence, force...).
    The PDF is laid out with ``template`` (default: the lab's, see :func:`issue`).
    With ``workbook`` the results workbook is returned as bytes (for a download)
    even when no ``xlsx`` file is written.  ``sample_entries=False`` leaves the
    document's ``samples`` empty when nothing is written (for the JSON text only:
    :func:`calib.quantify.document.quantify_json` writes them from the batch).
    """
    from calib.quantify.document import quantify_document
    from calib.quantify.workflow import quantify_files

    report = quantify_files(curve, samples, **options)
    document = quantify_document(report, samples=sample_entries or workbook or xlsx is not None
                                 or pdf is not None)
    outputs = []
    book = None
    if xlsx is not None or workbook:
        from calib.report.quantify_xlsx import write_quantify_xlsx

        book = write_quantify_xlsx(document)
    if xlsx is not None:
        outputs.append(Output(Path(xlsx), book))
    if pdf is not None:
        from calib.report.quantify_pdf import write_quantify_pdf
        from calib.report.template import resolve_template

        outputs.append(Output(Path(pdf), write_quantify_pdf(
            document, template=resolve_template(template))))
    return QuantifyOutcome(report, document, tuple(write_all(outputs)), book)


# ----------------------------------------------------------------------------- sign, verify

def record_template(path: str | os.PathLike[str]) -> ReportTemplate | None:
    """The template a record file names (None when it names none or cannot be read here).

    Verification reports an unreadable file itself, so this never raises for one.
    """
    from calib.errors import CalibError
    from calib.record.verify import read_record_file
    from calib.report.template import template_for_record

    try:
        data = read_record_file(path).attachment
        if data is None:
            return None
        import json

        body = json.loads(data)
        if not isinstance(body, dict) or "template" not in body:
            return None
        return template_for_record(body)
    except (CalibError, ValueError):
        return None


def sign(path: str | os.PathLike[str], *, role: str, name: str | None = None,
         meaning: str | None = None, key: Any = None, keyring: Any = None, template: Any = None,
         archive: str | os.PathLike[str] | None = None, signed_at: datetime | None = None,
         want_pdf: bool = True, out: str | os.PathLike[str] | None = None) -> SignOutcome:
    """Sign a record file (delegates to :func:`calib.record.signoff.sign_file`); file it.

    The template is the one the record names unless ``template`` is given.
    With ``out`` the new version is written there (``.json``: the record JSON;
    else the PDF; an existing file is never replaced) and filed in ``archive``
    as one step: both, or neither. Without ``out`` nothing is written to disk.
    With ``archive`` the PDF is always made (the archive keeps it).
    """
    from calib.record.keys import load_keyring
    from calib.record.signoff import file_versions, sign_file
    from calib.report.pdf import record_pages
    from calib.report.template import load_template

    if isinstance(keyring, (str, os.PathLike)):
        keyring = load_keyring(keyring)
    chosen = (load_template(template) if isinstance(template, (str, os.PathLike))
              else template or record_template(path))
    signed = sign_file(path, role=role, name=name, meaning=meaning, key=key,
                       pages=record_pages(chosen),
                       signed_at=signed_at, keyring=keyring,
                       want_pdf=want_pdf or archive is not None)
    entries: list[Any] = []

    def file_it() -> None:
        if archive is not None:
            from calib.archive import Archive

            with Archive(os.fspath(archive)) as store:
                entries.extend(file_versions(store, signed))

    if out is None:
        file_it()
    else:
        # The new version's file (never replacing one) and its archive entry: both, or neither.
        target = Path(out)
        data = signed.record.canonical if target.suffix.lower() == ".json" else signed.pdf
        write_all([Output(target, data, replace=False)], before_commit=file_it)
    return SignOutcome(signed, tuple(entries))


def verify(path: str | os.PathLike[str], *, keyring: Any = None,
           archive: str | os.PathLike[str] | None = None, template: Any = None) -> Any:
    """Verify a record file (delegates to :func:`calib.record.verify.verify_file`).

    ``keyring`` is a :class:`~calib.record.keys.Keyring` or a folder of public
    keys; ``archive`` a path (never created).  The template is the one the
    record names unless ``template`` is given.
    """
    from calib.record.keys import load_keyring
    from calib.record.verify import verify_file
    from calib.report.pdf import record_pages
    from calib.report.template import load_template

    if isinstance(keyring, (str, os.PathLike)):
        keyring = load_keyring(keyring)
    chosen = (load_template(template) if isinstance(template, (str, os.PathLike))
              else template or record_template(path))
    pages = record_pages(chosen)
    if archive is None:
        return verify_file(path, keyring=keyring, pages=pages)
    from calib.archive import Archive

    with Archive(os.fspath(archive), create=False) as store:
        return verify_file(path, keyring=keyring, archive=store, pages=pages)
