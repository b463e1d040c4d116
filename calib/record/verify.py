"""Verify a calibration record: from its PDF (or JSON) alone, with a keyring, with the archive.

What proves a record is its content and the bytes issued, never how this
release draws pages.  :func:`verify_bytes` (and :func:`verify_file`) check,
each finding one line in plain words:

data
    The record JSON is a ``calib.record/2`` (or ``/1``) document in canonical form (RFC
    8785 for records that say ``"canonicalization": "RFC 8785"``, calib
    0.1.0's form for older ones); the version digest the PDF states is the
    digest of its attached JSON; every signature's ``previous_digest`` matches
    the version rebuilt from the signature list.
pdf
    Every PDF signature (ISO 32000 / PAdES) is intact over the bytes it signed,
    carries the record signature entry made with the same certificate, and
    nothing but later signatures changed the file after it; the last one
    covers the whole file.
signatures
    Every key signature in the record verifies with the signer's certificate,
    that certificate was issued by a lab authority of the keyring and was
    valid then, and the printed name is its holder's.  Without a keyring, or
    when the authority is not in it, a key signature cannot be confirmed
    (``unchecked``).  A printed-name-only signature is never a key signature.
rules
    The sign-off rules (:mod:`calib.record.signing`) hold for every signature.
archive
    When an archive is given: this version is in it with the same JSON (and
    PDF) bytes, and the archive's hash chain verifies.

The report's :attr:`VerifyReport.verdict` is ``"verified"`` (no problem,
signed by its issuer and every signature key-verified), ``"intact"`` (no
problem found, but a draft not signed by an issuer or with printed-name-only
signatures: anyone with calib can make such a file, so its origin is not
verified) or ``"not verified"``.  Rendering the pages again is only a note
("this release draws the same pages", or not): layouts change between
releases, signatures and digests do not.
"""

from __future__ import annotations

import base64
import binascii
from collections.abc import Mapping
from dataclasses import dataclass, field
from pathlib import Path
from typing import Any

from calib import __version__
from calib.errors import ProfileError
from calib.record.keys import Keyring
from calib.record.record import Record
from calib.record.recordfile import (
    RecordFile,
    read_path_bytes,
    read_record_bytes,
    read_record_file,
)
from calib.record.signatures import SignatureCheck, check_signatures
from calib.record.signing import rule_problems
from calib.record.versions import chain_problems, signatures_of

__all__ = ["Finding", "RecordFile", "VerifyReport", "read_record_file", "verify_bytes",
           "verify_file"]

#: Kinds of finding, in the order a report lists them.
_AREAS = ("data", "pdf", "pages", "signatures", "unchecked", "rules", "archive")
_DRAFT_NOTE = "draft: not signed by an issuer"


@dataclass(frozen=True)
class Finding:
    """One problem found: its area (see :data:`_AREAS`) and what is wrong, in plain words."""

    area: str
    message: str


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
        The record's current version; None when its data could not be read.
    problems : tuple of Finding
        Empty when the record is intact.
    notes : tuple of str
        What was checked, and facts that are not problems.
    signatures : tuple of SignatureCheck
        Each signature's check.
    pdf_signatures : int
        How many PDF signatures the file carries.
    """

    file: str
    kind: str
    record: Record | None
    problems: tuple[Finding, ...]
    notes: tuple[str, ...] = ()
    signatures: tuple[SignatureCheck, ...] = field(default=())
    pdf_signatures: int = 0

    @property
    def ok(self) -> bool:
        """True when nothing is wrong: the record is intact and every check could be made."""
        return not self.problems and self.record is not None

    @property
    def issuer_signed(self) -> bool:
        """True when the issued content carries the issuer's key-verified signature."""
        return bool(self.signatures) and self.signatures[0].role == "prepared" and \
            self.signatures[0].keyed

    @property
    def unkeyed(self) -> tuple[SignatureCheck, ...]:
        """Signatures that are printed names only."""
        return tuple(s for s in self.signatures if s.status == "unkeyed")

    @property
    def verdict(self) -> str:
        """``"verified"``, ``"intact"`` (not signed throughout) or ``"not verified"``."""
        if not self.ok:
            return "not verified"
        if self.issuer_signed and not self.unkeyed:
            return "verified"
        return "intact"

    def summary(self) -> str:
        """The verdict in one line, saying what is not signed."""
        count = len(self.problems)
        if not self.ok:
            return f"NOT VERIFIED, {count} problem{'s' if count != 1 else ''}"
        if self.verdict == "verified":
            return ("verified: intact, signed by its issuer, every signature verified with a key "
                    "certified by the lab")
        gaps = [] if self.issuer_signed else [_DRAFT_NOTE]
        gaps += [f"signature {s.index + 1} ({s.role} by {s.name}) is a printed name only, not "
                 "key-verified" for s in self.unkeyed if s.role != "prepared"]
        return "intact, origin not verified throughout: " + "; ".join(gaps)

    def to_json(self) -> dict[str, Any]:
        """The report as JSON-ready data (``calib verify --json``)."""
        record = self.record
        return {
            "schema": "calib.verify/2",
            "tool_version": __version__,
            "file": self.file,
            "kind": self.kind,
            "ok": self.ok,
            "verdict": self.verdict,
            "summary": self.summary(),
            "issuer_signed": self.issuer_signed,
            "record_id": record.record_id if record else None,
            "version_digest": record.digest if record else None,
            "content_digest": record.content_digest if record else None,
            "canonicalization": ("RFC 8785" if record.jcs else "calib 0.1.0") if record else None,
            "pdf_signatures": self.pdf_signatures,
            "signatures": [
                {"position": s.index + 1, "role": s.role, "name": s.name,
                 "signed_at": s.signed_at, "key_id": s.key_id, "key_holder": s.key_name,
                 "status": s.status, "message": s.message}
                for s in self.signatures
            ],
            "problems": [{"area": p.area, "message": p.message} for p in self.problems],
            "notes": list(self.notes),
        }


def _parse(file: RecordFile) -> tuple[Record | None, list[Finding]]:
    what = "attached record data" if file.kind == "pdf" else "file"
    if file.attachment is None:
        return None, [Finding("data", f"the {what} cannot be read: the PDF is damaged")]
    try:
        record = Record.from_json(file.attachment)
    except UnicodeDecodeError:
        return None, [Finding("data", f"the {what} is not UTF-8 text")]
    except ValueError as exc:
        return None, [Finding("data", f"the {what} is not a calib record document ({exc})")]
    try:
        canonical = record.canonical
    except ValueError as exc:  # NaN, infinity or a number RFC 8785 cannot carry
        return None, [Finding("data", f"the {what} holds a value JSON cannot carry ({exc})")]
    if canonical != file.attachment:
        return record, [Finding("data", f"the {what} is not in calib's canonical form: it was "
                                        "edited or written by other software")]
    return record, []


def _pdf_findings(file: RecordFile, attached: Record, keyring: Keyring | None
                  ) -> tuple[Record, list[Finding], list[str], int]:
    """The PDF signatures checked, and the current version they make of the attached record."""
    from calib.record.pades import read_pdf_signatures

    roots = [a.certificate for a in keyring.authorities] if keyring else []
    pdf_sigs, damage = read_pdf_signatures(file.data, trust_roots=roots)
    problems = [Finding("pdf", f"the PDF is damaged: {d}") for d in damage]
    notes: list[str] = []
    entries = list(signatures_of(attached))
    for number, sig in enumerate(pdf_sigs, start=1):
        label = f"PDF signature {number} (field {sig.field}, by {sig.signer})"
        if not sig.intact or not sig.valid:
            problems.append(Finding("pdf", f"{label} does not verify: the bytes it signed were "
                                           "changed after signing, or it was not made with the "
                                           "signer's key"))
        if not sig.changes_ok:
            problems.append(Finding("pdf", f"the PDF was changed after {label} in a way only "
                                           f"later signatures may change it ({sig.changes_after})"))
        entry = sig.entry
        if entry is None:
            problems.append(Finding("pdf", f"{label} carries no record signature entry: it was "
                                           "not made by calib, and the record does not count it"))
            continue
        if _cert_der(entry) != sig.signer_der:
            problems.append(Finding("pdf", f"{label} was made with another certificate than the "
                                           "record signature entry it carries names"))
        if entry.get("role") == "prepared":
            if not entries or entries[0] != entry:
                problems.append(Finding("pdf", f"{label} is the issuer's, but its entry differs "
                                               "from the issued record's preparer entry"))
            continue
        entries.append(entry)
        notes.append(f"{label}: intact, signs {entry.get('role')} by {entry.get('name')}")
    if pdf_sigs and not pdf_sigs[-1].whole_file:
        problems.append(Finding("pdf", "the file was changed after its last signature: it holds "
                                       "bytes that no signature covers (an edit saved as an "
                                       "incremental update)"))
    record = attached if len(entries) == len(signatures_of(attached)) else Record(
        {**attached.body, "signatures": entries})
    return record, problems, notes, len(pdf_sigs)


def _cert_der(entry: Mapping[str, Any]) -> bytes | None:
    try:
        return base64.b64decode(str(entry.get("certificate")), validate=True)
    except (binascii.Error, ValueError):
        return None


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


def _stated_findings(file: RecordFile, attached: Record) -> list[Finding]:
    stated = _stated(file.keywords)
    problems = []
    if "digest" not in stated:
        problems.append(Finding("data", "the PDF does not state a version digest in its "
                                        "document keywords, as every calib record does"))
    elif stated["digest"] != attached.digest:
        problems.append(Finding("data", f"the PDF states version digest {stated['digest'][:16]}…, "
                                        f"but its attached record data has digest "
                                        f"{attached.digest[:16]}…: the attached data was changed"))
    if stated.get("record_id") not in (None, attached.record_id):
        problems.append(Finding("data", f"the PDF states record id {stated['record_id']}, but "
                                        f"its attached record data is {attached.record_id}"))
    return problems


def _render_note(file: RecordFile, attached: Record, pages: Any, signed: bool) -> list[str]:
    """Informational: would this release draw the same pages?  Never a problem."""
    from calib.record.pdfread import read_back

    template = pages.template
    try:
        fresh = pages.draw(attached)
    except Exception as exc:  # noqa: BLE001 - a note must never turn into a failure
        return [f"note: this release cannot draw the record's pages again ({type(exc).__name__}); "
                "that does not affect verification"]
    if file.data == fresh or (signed and file.data.startswith(fresh)):
        return ["note: this release draws the same pages from the record data, byte for byte"]
    theirs, ours = file.pages, read_back(fresh).pages
    differing = [i + 1 for i, (a, b) in enumerate(zip(theirs, ours)) if a != b]
    tool = attached.body.get("tool")
    made_with = tool.get("version") if isinstance(tool, Mapping) else "?"
    detail = (f"pages {', '.join(map(str, differing))}" if differing
              else "the file around the pages")
    text = (f"note: this release (calib {__version__}, template {template.source}) would draw "
            f"the record differently ({detail} differ from the issued file, made with calib "
            f"{made_with}): page layout changes between releases are not a problem")
    if not signed:
        text += ("; this PDF has no digital signature, so its pages are protected only by "
                 "comparison with the archived copy")
    stated = _stated(file.keywords).get("template")
    if stated not in (None, template.fingerprint[:16]):
        text += f"; the PDF names report template {stated}"
    return [text]


def _record_findings(record: Record, *, keyring: Keyring | None, archive: Any,
                     pdf: bytes | None) -> tuple[list[Finding], list[str],
                                                 tuple[SignatureCheck, ...]]:
    """The checks that need only the record: links, rules, signatures, and the archive entry."""
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
    if entry is None:
        return problems
    # This entry, its links to its neighbours, the append-only triggers and the head
    # receipt: a few indexed reads, not a pass over the whole chain (calib archive verify).
    checked = archive.verify_entry(record.digest)
    for problem in checked.problems:
        problems.append(Finding("archive", f"{where}: {problem}"))
    if checked.ok:
        notes.append(f"entry seq {entry.seq} of {where} is linked to its neighbours in the hash "
                     f"chain (head seq {checked.head_seq}"
                     + ("; head receipt matches)" if checked.receipt else ")"))
    return problems


def verify_bytes(data: bytes, *, name: str = "record", keyring: Keyring | None = None,
                 archive: Any = None, pages: Any = None) -> VerifyReport:
    """Verify the bytes of a record PDF or record JSON (see the module text).

    Parameters
    ----------
    data : bytes
        The record PDF, or its JSON.
    name : str
        How the report names it (a file name).
    keyring : Keyring, optional
        The lab keyring (:func:`calib.record.keys.load_keyring`).
    archive : Archive, optional
        An open archive to look the version up in.
    pages : RecordPages, optional
        How this release draws a record with the lab's template
        (:func:`calib.report.record_pages`): used only for the informational
        note on whether the pages would be drawn the same; no note when None.

    Returns
    -------
    VerifyReport

    Raises
    ------
    InputError
        If the bytes cannot be read as a record at all.
    """
    file = read_record_bytes(data, name=name)
    attached, problems = _parse(file)
    problems += [Finding("pdf", f"the PDF is damaged: {d}") for d in file.damage]
    notes: list[str] = []
    if file.extra_attachments:
        problems.append(Finding("data", f"the PDF holds {file.extra_attachments + 1} attached "
                                        "files named as the record; a calib record has one"))
    if attached is None:
        return VerifyReport(name, file.kind, None, tuple(problems))
    record, pdf_count = attached, 0
    if file.kind == "pdf":
        problems += _stated_findings(file, attached)
        record, pdf_problems, pdf_notes, pdf_count = _pdf_findings(file, attached, keyring)
        problems += pdf_problems
    count = len(signatures_of(record))
    roles = ", ".join(str(e.get("role")) for e in signatures_of(record)
                      if isinstance(e, Mapping)) or "no signatures"
    notes.append(f"record {record.record_id}, version {count} ({roles}), version digest "
                 f"{record.digest}, content digest {record.content_digest}")
    notes.append("canonical JSON per RFC 8785 (JCS)" if record.jcs else
                 "a record of calib 0.1.0: its digests use that release's canonical JSON "
                 "(sorted keys, no spaces, UTF-8)")
    if file.kind == "pdf":
        notes += pdf_notes
        if not pdf_count:
            notes.append("the PDF carries no digital signature")
    else:
        notes.append("a JSON record has no pages; verify its PDF to check the issued file")
    found, more_notes, checks = _record_findings(
        record, keyring=keyring, archive=archive, pdf=file.data if file.kind == "pdf" else None)
    problems += found
    notes += more_notes
    if not (checks and checks[0].role == "prepared" and checks[0].keyed):
        notes.insert(0, _DRAFT_NOTE + " (anyone with calib could have made this file)")
    if file.kind == "pdf" and pages is not None:
        notes += _render_note(file, attached, pages, pdf_count > 0)
    problems.sort(key=lambda p: _AREAS.index(p.area))
    return VerifyReport(name, file.kind, record, tuple(problems), tuple(notes), checks, pdf_count)


def verify_file(path: str | Path, *, keyring: Keyring | None = None, archive: Any = None,
                pages: Any = None) -> VerifyReport:
    """Verify a record PDF or record JSON file: :func:`verify_bytes` on the file's bytes.

    Raises
    ------
    InputError
        If the file cannot be read as a record at all.
    """
    return verify_bytes(read_path_bytes(path), name=str(path), keyring=keyring,
                        archive=archive, pages=pages)

