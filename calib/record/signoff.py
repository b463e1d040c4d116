"""Signing a record file: check it, add the signature, render the new version, file it.

:func:`sign_file` is what ``calib sign`` runs.  It refuses to sign a record
that does not verify (a signature would vouch for altered data), so it first
runs :func:`calib.record.verify.verify_file`; key signatures of earlier
signers that cannot be confirmed for want of a keyring do not block signing
(that is the auditor's check), every other finding does.

:func:`file_versions` files the new version in an archive.  The version it
was signed from is filed first when the archive does not hold it yet, so the
archive keeps every version; and signing is refused when the archive already
holds a version the signed one does not continue (someone else signed
meanwhile): signing must continue the latest version, never fork the record.
"""

from __future__ import annotations

from dataclasses import dataclass
from datetime import datetime
from pathlib import Path
from typing import Any

from calib.record.keys import SigningKey
from calib.record.record import Record
from calib.record.signing import SignOffError, sign_record
from calib.record.verify import verify_file
from calib.record.versions import signatures_of, version_digests

__all__ = ["SignedVersion", "file_versions", "sign_file"]


@dataclass(frozen=True)
class SignedVersion:
    """The version a signature was added to, and the new one.

    Attributes
    ----------
    previous : Record
        The version signed (unchanged).
    previous_pdf : bytes
        Its PDF: the input file when that was a PDF, else rendered from it.
    record : Record
        The new version.
    pdf : bytes
        Its PDF.
    """

    previous: Record
    previous_pdf: bytes
    record: Record
    pdf: bytes


def _render(record: Record, template: Any) -> bytes:
    from calib.report import write_pdf

    return write_pdf(record.body, digest=record.digest, record_id=record.record_id,
                     template=template, attachment=record.canonical)


def sign_file(
    path: str | Path,
    *,
    role: str,
    name: str,
    meaning: str | None = None,
    key: SigningKey | None = None,
    template: Any = None,
    signed_at: datetime | None = None,
) -> SignedVersion:
    """Verify the record file at ``path``, sign it and render the new version.

    Parameters
    ----------
    path : str or Path
        Record PDF or record JSON.
    role, name, meaning, key, signed_at
        As for :func:`calib.record.signing.sign_record`; the meaning defaults
        to the template's wording of the role.
    template : ReportTemplate, optional
        The lab's template (the bundled one by default): used to check the
        input's pages and to lay out the new version.

    Raises
    ------
    InputError
        If the file cannot be read as a record.
    SignOffError
        If the record does not verify, or the sign-off rules refuse.
    """
    from calib.report import load_template

    template = template or load_template()
    report = verify_file(path, template=template)
    blocking = [p.message for p in report.problems if p.area != "unchecked"]
    if report.record is None or blocking:
        raise SignOffError("the record does not verify, so it was not signed: "
                           + "; ".join(blocking))
    previous = report.record
    if meaning is None:
        meaning = getattr(template.meanings, role, None)
    signed = sign_record(previous, role=role, name=name, meaning=meaning, key=key,
                         signed_at=signed_at)
    previous_pdf = Path(path).read_bytes() if report.kind == "pdf" else _render(previous,
                                                                                template)
    return SignedVersion(previous, previous_pdf, signed, _render(signed, template))


def file_versions(archive: Any, signed: SignedVersion) -> list[Any]:
    """Append the new version (and, when missing, the one it was signed from) to ``archive``.

    Parameters
    ----------
    archive : Archive
        An open :class:`calib.archive.Archive`.
    signed : SignedVersion
        From :func:`sign_file`.

    Returns
    -------
    list of ArchiveEntry
        The entries appended, oldest first.

    Raises
    ------
    SignOffError
        If the archive holds a later version of the record than the one signed.
    """
    previous = signed.previous
    latest = archive.latest(previous.record_id)
    # The archive's newest version must be the one signed or one of its earlier versions
    # (signed meanwhile without an archive); anything else would fork the record.
    if latest is not None and latest.version_digest not in version_digests(previous):
        roles = ", ".join(getattr(latest, "roles", ()) or ()) or "?"
        raise SignOffError(
            f"the archive holds a version of {previous.record_id} that the one given does not "
            f"continue (entry seq {latest.seq}: {roles}); sign the archived version instead")
    entries = []
    if archive.find_digest(previous.digest) is None:
        kind = "signed" if any(e.get("role") != "prepared" for e in signatures_of(previous)
                               if isinstance(e, dict)) else "issued"
        entries.append(archive.append(previous, signed.previous_pdf, kind=kind))
    entries.append(archive.append(signed.record, signed.pdf, kind="signed"))
    return entries
