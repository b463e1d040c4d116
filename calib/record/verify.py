"""Verify a calibration record: from its PDF (or JSON) alone, with a keyring, with the archive.

What :func:`verify_file` checks, each finding one line in plain words:

data
    The attached ``calib-record.json`` is a ``calib.record/1`` document in
    canonical form; the version digest the PDF states (document keywords,
    and the footer of every page) is the digest of that data; every
    signature's ``previous_digest`` matches the version rebuilt from the
    signature list (:func:`calib.record.versions.chain_problems`).
pages
    The record rendered afresh from the attached data gives the very same
    bytes as the file.  When it does not, the pages are compared one by one
    to say which differ, and the template and calib version are compared to
    say when the difference may come from there rather than from an edit.
signatures
    Every key signature verifies with its key from the keyring; a signature
    whose key is not in the keyring, or made with a key while no keyring was
    given, cannot be confirmed and counts as a problem (``unchecked``).
rules
    The sign-off rules (:mod:`calib.record.signing`) hold for every signature.
archive
    When an archive is given: this version is in it with the same JSON (and
    PDF) bytes, and the archive's hash chain verifies.

A record JSON file is checked for data, signatures, rules and archive; it has
no pages.  A file that cannot be read as a record at all (missing, neither PDF
nor JSON, a PDF without the attached record) raises
:class:`~calib.errors.InputError`; damage found *inside* a record is a
finding, because it answers the question verification asks.
"""

from __future__ import annotations

from collections.abc import Mapping
from dataclasses import dataclass, field
from pathlib import Path
from typing import Any

from calib import __version__
from calib.errors import InputError, ProfileError
from calib.record.keys import Keyring
from calib.record.record import RECORD_SCHEMA, Record, canonical_json
from calib.record.signing import SignatureCheck, check_signatures, rule_problems
from calib.record.versions import chain_problems, signatures_of

__all__ = ["AREAS", "Finding", "RecordFile", "VerifyReport", "read_record_file", "verify_file"]

#: Kinds of finding, in the order a report lists them.
AREAS = ("data", "pages", "signatures", "unchecked", "rules", "archive")


@dataclass(frozen=True)
class Finding:
    """One problem found: its area (see :data:`AREAS`) and what is wrong, in plain words."""

    area: str
    message: str


@dataclass(frozen=True)
class RecordFile:
    """A record file as read from disk, before anything is checked.

    Attributes
    ----------
    path : Path
        The file.
    kind : str
        ``"pdf"`` or ``"json"``.
    data : bytes
        The file's bytes.
    attachment : bytes or None
        The record JSON: the attached ``calib-record.json`` of a PDF, the file
        itself for JSON; None when the PDF's attachments cannot be decoded.
    keywords : str
        The PDF's document keywords ("" for JSON).
    pages : tuple of str
        SHA-256 of each page's content (PDF only).
    extra_attachments : int
        Further files attached under the record's name (a doctored PDF).
    damage : tuple of str
        Parts of the PDF that could not be decoded.
    """

    path: Path
    kind: str
    data: bytes
    attachment: bytes | None
    keywords: str = ""
    pages: tuple[str, ...] = ()
    extra_attachments: int = 0
    damage: tuple[str, ...] = ()


@dataclass(frozen=True)
class VerifyReport:
    """What verification found.

    Attributes
    ----------
    file : str
        The file verified.
    kind : str
        ``"pdf"`` or ``"json"``.
    record : Record or None
        The record read from the file; None when its data could not be read.
    problems : tuple of Finding
        Empty when the record is intact.
    notes : tuple of str
        What was checked, and facts that are not problems.
    signatures : tuple of SignatureCheck
        Each signature's check against the keyring.
    """

    file: str
    kind: str
    record: Record | None
    problems: tuple[Finding, ...]
    notes: tuple[str, ...] = ()
    signatures: tuple[SignatureCheck, ...] = field(default=())

    @property
    def ok(self) -> bool:
        """True when nothing is wrong: the record is intact and every check could be made."""
        return not self.problems

    def to_json(self) -> dict[str, Any]:
        """The report as JSON-ready data (``calib verify --json``)."""
        record = self.record
        return {
            "schema": "calib.verify/1",
            "tool_version": __version__,
            "file": self.file,
            "kind": self.kind,
            "ok": self.ok,
            "record_id": record.record_id if record else None,
            "version_digest": record.digest if record else None,
            "content_digest": record.content_digest if record else None,
            "signatures": [
                {"position": s.index + 1, "role": s.role, "name": s.name,
                 "signed_at": s.signed_at, "key_id": s.key_id, "key_name": s.key_name,
                 "status": s.status, "message": s.message}
                for s in self.signatures
            ],
            "problems": [{"area": p.area, "message": p.message} for p in self.problems],
            "notes": list(self.notes),
        }


def read_record_file(path: str | Path) -> RecordFile:
    """Read a record PDF or record JSON file and find the record data in it.

    Raises
    ------
    InputError
        If the file is missing or unreadable, is neither a PDF nor JSON, or is
        a PDF without an attached ``calib-record.json``.
    """
    from calib.report import ATTACHMENT_NAME
    from calib.report.embed import read_back

    path = Path(path)
    try:
        data = path.read_bytes()
    except FileNotFoundError:
        raise InputError("file not found", file=str(path)) from None
    except OSError as exc:
        raise InputError(f"cannot be read ({exc.strerror})", file=str(path)) from None
    if data.lstrip()[:5] == b"%PDF-":
        try:
            contents = read_back(data)
        except ValueError as exc:
            raise InputError(str(exc), file=str(path)) from None
        attached = contents.attachments.get(ATTACHMENT_NAME)
        if not attached and not contents.damage:
            raise InputError(f"not a calib record PDF: it has no attached {ATTACHMENT_NAME}",
                             file=str(path))
        return RecordFile(path, "pdf", data, attached[0] if attached else None,
                          contents.keywords, contents.pages,
                          max(len(attached or ()) - 1, 0), contents.damage)
    if data.lstrip(b"\xef\xbb\xbf \t\r\n")[:1] == b"{":
        return RecordFile(path, "json", data, data)
    raise InputError("neither a calib record PDF nor a record JSON file", file=str(path))


def _parse(file: RecordFile) -> tuple[Record | None, list[Finding]]:
    what = "attached record data" if file.kind == "pdf" else "file"
    if file.attachment is None:
        return None, [Finding("data", f"the {what} cannot be read: the PDF is damaged")]
    try:
        record = Record.from_json(file.attachment)
    except UnicodeDecodeError:
        return None, [Finding("data", f"the {what} is not UTF-8 text")]
    except ValueError as exc:
        return None, [Finding("data", f"the {what} is not a {RECORD_SCHEMA} document ({exc})")]
    problems = []
    try:
        canonical = canonical_json(record.body)
    except ValueError as exc:  # NaN or infinity in the data
        return None, [Finding("data", f"the {what} holds a value JSON cannot carry ({exc})")]
    if canonical != file.attachment:
        problems.append(Finding("data", f"the {what} is not in calib's canonical form: it was "
                                        "edited or written by other software"))
    return record, problems


def _record_findings(
    record: Record,
    *,
    keyring: Keyring | None,
    archive: Any,
    pdf: bytes | None,
) -> tuple[list[Finding], list[str], tuple[SignatureCheck, ...]]:
    """The checks that need only the record: links, rules, signatures, and the archive entry.

    ``archive`` is anything with ``find_digest``, ``latest`` and ``verify_chain``
    as :class:`calib.archive.Archive` has them; ``pdf`` is compared with the
    archived copy.
    """
    problems = [Finding("data", p) for p in chain_problems(record)]
    notes = []
    try:
        problems += [Finding("rules", p) for p in rule_problems(record)]
    except ProfileError as exc:
        problems.append(Finding("rules", f"the sign-off rules cannot be checked: {exc}"))
    checks = check_signatures(record, keyring)
    for check in checks:
        if check.status in ("no-keyring", "unknown-key"):
            problems.append(Finding("unchecked", check.message))
        elif not check.ok:
            problems.append(Finding("signatures", check.message))
        else:
            notes.append(check.message)
    if archive is not None:
        problems += _archive_findings(record, archive, pdf, notes)
    return problems, notes, checks


def _archive_findings(record: Record, archive: Any, pdf: bytes | None,
                      notes: list[str]) -> list[Finding]:
    where = f"the archive {getattr(archive, 'path', '')}".rstrip()
    problems = []
    entry = archive.find_digest(record.digest)
    if entry is None:
        problems.append(Finding("archive", f"this version (digest {record.digest[:16]}…) is not "
                                           f"in {where}"))
    else:
        if bytes(entry.json) != record.canonical:
            problems.append(Finding("archive", f"entry seq {entry.seq} of {where} holds other "
                                               "record data under this version digest"))
        if pdf is not None and bytes(entry.pdf) != pdf:
            problems.append(Finding("archive", f"the PDF differs from the copy in {where} "
                                               f"(entry seq {entry.seq})"))
        if not problems:
            notes.append(f"this version is entry seq {entry.seq} of {where}, byte for byte")
    latest = archive.latest(record.record_id)
    if latest is not None and latest.version_digest != record.digest:
        roles = ", ".join(getattr(latest, "roles", ()) or ()) or "?"
        notes.append(f"{where} holds a later version of {record.record_id}: entry seq "
                     f"{latest.seq} ({roles})")
    chain = archive.verify_chain()
    for problem in chain.problems:
        problems.append(Finding("archive", f"{where}: {problem}"))
    if chain.ok:
        notes.append(f"the hash chain of {where} verifies ({chain.entries} entries)")
    return problems


def _stated(keywords: str) -> dict[str, str]:
    """Record id, digest and template fingerprint prefix from the PDF's keywords."""
    out: dict[str, str] = {}
    for word in (w.strip() for w in keywords.split(",")):
        if word.startswith("CR-"):
            out["record_id"] = word
        elif word.startswith("template "):
            out["template"] = word.removeprefix("template ")
        elif len(word) == 64 and all(c in "0123456789abcdef" for c in word):
            out["digest"] = word
    return out


def _page_findings(file: RecordFile, record: Record, template: Any) -> tuple[list[Finding],
                                                                             list[str]]:
    from calib.report import write_pdf
    from calib.report.embed import read_back

    stated = _stated(file.keywords)
    problems, notes = [], []
    if "digest" not in stated:
        problems.append(Finding("data", "the PDF does not state a version digest in its "
                                        "document keywords, as every calib record does"))
    elif stated["digest"] != record.digest:
        problems.append(Finding("data", f"the PDF states version digest {stated['digest'][:16]}…, "
                                        f"but its attached record data has digest "
                                        f"{record.digest[:16]}…: the attached data was changed"))
    if stated.get("record_id") not in (None, record.record_id):
        problems.append(Finding("data", f"the PDF states record id {stated['record_id']}, but "
                                        f"its attached record data is {record.record_id}"))
    fresh = write_pdf(record.body, digest=record.digest, record_id=record.record_id,
                      template=template, attachment=record.canonical)
    if fresh == file.data:
        notes.append("the PDF is byte for byte the rendering of its attached record data")
        return problems, notes
    theirs, ours = file.pages, read_back(fresh).pages
    differing = [i + 1 for i, (a, b) in enumerate(zip(theirs, ours)) if a != b]
    if len(theirs) != len(ours):
        detail = f"it has {len(theirs)} pages where a fresh rendering has {len(ours)}"
    elif differing:
        detail = ("the content of page" + ("s " if len(differing) > 1 else " ")
                  + ", ".join(map(str, differing)) + " differs")
    else:
        detail = "the page content is the same, but the file around it differs"
    problems.append(Finding("pages", f"the PDF does not match a fresh rendering of its attached "
                                     f"record data: {detail}"))
    if stated.get("template") not in (None, template.fingerprint[:16]):
        notes.append(f"the PDF names report template {stated['template']}, but it was rendered "
                     f"here with template {template.fingerprint[:16]} ({template.source}): if the "
                     "record was issued with a lab template, verify with that template")
    tool = record.body.get("tool")
    made_with = tool.get("version") if isinstance(tool, Mapping) else None
    if made_with and made_with != __version__:
        notes.append(f"the record was issued with calib {made_with} and is checked with calib "
                     f"{__version__}: another version may lay pages out differently")
    return problems, notes


def verify_file(
    path: str | Path,
    *,
    keyring: Keyring | None = None,
    archive: Any = None,
    template: Any = None,
) -> VerifyReport:
    """Verify a record PDF or record JSON file.

    Parameters
    ----------
    path : str or Path
        The record PDF, or its JSON.
    keyring : Keyring, optional
        The lab keyring (:func:`calib.record.keys.load_keyring`).
    archive : Archive, optional
        An open archive to look the version up in.
    template : ReportTemplate, optional
        The template the record was issued with; the bundled one by default.

    Returns
    -------
    VerifyReport

    Raises
    ------
    InputError
        If the file cannot be read as a record at all.
    """
    from calib.report import load_template

    file = read_record_file(path)
    record, problems = _parse(file)
    problems += [Finding("pages", f"the PDF is damaged: {d}") for d in file.damage]
    notes: list[str] = []
    if file.extra_attachments:
        problems.append(Finding("data", f"the PDF holds {file.extra_attachments + 1} attached "
                                        "files named as the record; a calib record has one"))
    if record is None:
        return VerifyReport(str(path), file.kind, None, tuple(problems))
    count = len(signatures_of(record))
    roles = ", ".join(str(e.get("role")) for e in signatures_of(record)
                      if isinstance(e, Mapping)) or "no signatures"
    notes.append(f"record {record.record_id}, version {count} ({roles}), version digest "
                 f"{record.digest}")
    if file.kind == "pdf":
        page_problems, page_notes = _page_findings(file, record, template or load_template())
        problems += page_problems
        notes += page_notes
    else:
        notes.append("a JSON record has no pages to compare; verify its PDF to check those")
    found, more_notes, checks = _record_findings(
        record, keyring=keyring, archive=archive, pdf=file.data if file.kind == "pdf" else None)
    problems += found
    notes += more_notes
    problems.sort(key=lambda p: AREAS.index(p.area))
    return VerifyReport(str(path), file.kind, record, tuple(problems), tuple(notes), checks)

