"""Reading a record file (PDF or JSON) and finding the record in it, before anything is judged.

A record PDF carries the JSON of the version that was rendered as the
attached file ``calib-record.json``; key signatures added later are PDF
signatures (:mod:`calib.record.pades`) whose entries extend that JSON.
:func:`record_from_pdf` gives the current version.
"""

from __future__ import annotations

from dataclasses import dataclass
from pathlib import Path

from calib.errors import InputError

__all__ = ["RecordFile", "read_path_bytes", "read_record_bytes", "read_record_file",
           "record_from_pdf"]


@dataclass(frozen=True)
class RecordFile:
    """A record file as read, before anything is checked.

    Attributes
    ----------
    path : Path
        The file (or the name given to bytes).
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


def read_record_bytes(data: bytes, *, name: str = "record") -> RecordFile:
    """Find the record data in the bytes of a record PDF or record JSON.

    Raises
    ------
    InputError
        If the bytes are neither a PDF nor JSON, or a PDF without an attached
        ``calib-record.json`` (the message names ``name``).
    """
    from calib.record.pdfread import ATTACHMENT_NAME, read_back

    path = Path(name)
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


def read_record_file(path: str | Path) -> RecordFile:
    """Read a record PDF or record JSON file and find the record data in it.

    Raises
    ------
    InputError
        If the file is missing or unreadable, is neither a PDF nor JSON, or is
        a PDF without an attached ``calib-record.json``.
    """
    return read_record_bytes(read_path_bytes(path), name=str(path))


def read_path_bytes(path: str | Path) -> bytes:
    """The bytes of a file; InputError naming it when it is missing or unreadable."""
    path = Path(path)
    try:
        return path.read_bytes()
    except FileNotFoundError:
        raise InputError("file not found", file=str(path)) from None
    except OSError as exc:
        raise InputError(f"cannot be read ({exc.strerror})", file=str(path)) from None


def record_from_pdf(data: bytes):
    """The current version of the record in a record PDF: attached JSON plus PDF signature entries.

    For the archive and the web page: no judgement, only reading.  Use
    :func:`calib.record.verify.verify_bytes` to know whether it can be trusted.

    Raises
    ------
    InputError
        If the PDF holds no readable record.
    """
    from calib.record.pades import read_pdf_signatures
    from calib.record.record import Record

    file = read_record_bytes(data, name="record PDF")
    if file.attachment is None:
        raise InputError("the attached record data cannot be read", file="record PDF")
    try:
        record = Record.from_json(file.attachment)
    except (UnicodeDecodeError, ValueError) as exc:
        raise InputError(f"the attached record data is not a record ({exc})",
                         file="record PDF") from None
    signatures, _ = read_pdf_signatures(data)
    extra = [s.entry for s in signatures if s.entry and s.entry.get("role") != "prepared"]
    if not extra:
        return record
    return Record({**record.body, "signatures": [*record.body.get("signatures", []), *extra]})
