"""Issuing and signing record files: check, sign, add the PDF signature, file.

:func:`issue_pdf` renders an issued record and, when the issuer signed it,
adds the issuer's PDF signature.  :func:`sign_bytes` / :func:`sign_file` are
what ``calib sign`` and the web page run: they refuse to sign a record that
does not verify (:class:`calib.errors.IntegrityError`: a signature would
vouch for altered data); key signatures of earlier signers that cannot be
confirmed for want of a keyring do not block signing (that is the auditor's
check), every other finding does.  A key signature becomes one incremental
update of the PDF signed as it is, so the issued bytes and every earlier
signature stay untouched.  A printed-name-only signature cannot be added to a
digitally signed PDF without breaking its signatures; it is refused there
(the record JSON can still take it), and a PDF without digital signatures is
drawn anew from the signed data.

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

from calib.errors import IntegrityError
from calib.record.keys import Keyring, SigningKey
from calib.record.record import Record
from calib.record.recordfile import read_path_bytes
from calib.record.signatures import parse_time
from calib.record.signing import SignOffError, sign_record
from calib.record.verify import verify_bytes
from calib.record.versions import signatures_of, version_digests

__all__ = ["SignedVersion", "file_versions", "issue_pdf", "sign_bytes", "sign_file"]


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
    pdf : bytes or None
        Its PDF; None when ``want_pdf`` was false.
    """

    previous: Record
    previous_pdf: bytes
    record: Record
    pdf: bytes | None


def _authority_name(key: SigningKey) -> str:
    from cryptography.x509.oid import NameOID

    names = key.certificate.issuer.get_attributes_for_oid(NameOID.COMMON_NAME)
    return str(names[0].value) if names else ""


def _pdf_signed(pdf: bytes, record: Record, key: SigningKey) -> bytes:
    from calib.record.pades import add_pdf_signature

    entry = signatures_of(record)[-1]
    when = parse_time(entry.get("signed_at"))
    assert when is not None  # sign_record / issue_signed wrote it
    return add_pdf_signature(pdf, key=key, entry=entry, record_id=record.record_id,
                             signed_at=when, authority=_authority_name(key))


def issue_pdf(record: Record, *, pages: Any, key: SigningKey | None = None) -> bytes:
    """The PDF of an issued record; with ``key``, the issuer's signature in it.

    Parameters
    ----------
    record : Record
        The issued record; with ``key`` already signed by it
        (:func:`calib.record.signing.issue_signed`).
    pages : RecordPages
        How the record is drawn, with the lab's report template
        (:func:`calib.report.record_pages`).
    key : SigningKey, optional
        The issuer's key, which signed the record's ``prepared`` entry.

    Raises
    ------
    ValueError
        If ``key`` is not the key that signed the record's ``prepared`` entry.
    """
    pdf = pages.draw(record)
    if key is None:
        return pdf
    entries = signatures_of(record)
    if len(entries) != 1 or entries[0].get("key_id") != key.key_id:
        raise ValueError("the record's prepared entry must be signed with this key first "
                         "(calib.record.signing.issue_signed)")
    return _pdf_signed(pdf, record, key)


def sign_bytes(
    data: bytes,
    *,
    role: str,
    name: str | None = None,
    meaning: str | None = None,
    pages: Any,
    key: SigningKey | None = None,
    signed_at: datetime | None = None,
    keyring: Keyring | None = None,
    file_name: str = "record",
    want_pdf: bool = True,
) -> SignedVersion:
    """Verify a record (PDF or JSON bytes), sign it and make the new version.

    Parameters
    ----------
    data : bytes
        Record PDF or record JSON.
    role, name, meaning, key, signed_at
        As for :func:`calib.record.signing.sign_record`; the meaning defaults
        to the template's wording of the role.
    pages : RecordPages
        How record versions are drawn, with the lab's template
        (:func:`calib.report.record_pages`): for the re-rendering note, the
        wording of the meaning, and to draw a PDF that has no digital signature.
    keyring : Keyring, optional
        Checks earlier key signatures before signing (recommended).
    file_name : str
        How messages name the input.
    want_pdf : bool
        Make the new version's PDF (else only the record).

    Raises
    ------
    InputError
        If the bytes cannot be read as a record.
    IntegrityError
        If the record does not verify.
    SignOffError
        If the sign-off rules refuse, or a printed-name-only signature is
        asked of a digitally signed PDF.
    """
    report = verify_bytes(data, name=file_name, keyring=keyring, pages=pages)
    blocking = [p.message for p in report.problems if p.area != "unchecked"]
    if report.record is None or blocking:
        raise IntegrityError("the record does not verify, so it was not signed: "
                             + "; ".join(blocking))
    previous = report.record
    if meaning is None:
        meaning = getattr(pages.template.meanings, role, None)
    signed = sign_record(previous, role=role, name=name, meaning=meaning, key=key,
                         signed_at=signed_at)
    previous_pdf = data if report.kind == "pdf" else pages.draw(previous)
    pdf = None
    if want_pdf:
        if key is not None:
            pdf = _pdf_signed(previous_pdf, signed, key)
        elif report.pdf_signatures:
            raise SignOffError(
                "this record's PDF carries digital signatures; a printed-name-only signature "
                "cannot be added to it without breaking them: sign with your key (--key), or "
                "write the record JSON only")
        else:
            pdf = pages.draw(signed)
    return SignedVersion(previous, previous_pdf, signed, pdf)


def sign_file(path: str | Path, **options: Any) -> SignedVersion:
    """:func:`sign_bytes` on the file at ``path`` (same options).

    Raises
    ------
    InputError
        If the file cannot be read as a record.
    IntegrityError, SignOffError
        As for :func:`sign_bytes`.
    """
    return sign_bytes(read_path_bytes(path), file_name=str(path), **options)


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
    if signed.pdf is None:
        raise ValueError("file_versions needs the new version's PDF (sign with want_pdf=True)")
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
