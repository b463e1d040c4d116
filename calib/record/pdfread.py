"""Reading a record PDF back: its attached files, keywords and page contents.

Reading goes through pypdf, a full PDF parser, rather than a scan of our own
layout: a record that comes back for verification may have passed through
other software (an editor saving an incremental update, a tool rewriting
objects into object streams), and verification must read what a PDF viewer
would show, then find the change.  Attaching a file while drawing is
:func:`calib.report.embed.embed_file`.
"""

from __future__ import annotations

import hashlib
import io
import logging
import warnings
from dataclasses import dataclass

__all__ = ["ATTACHMENT_NAME", "PdfContents", "read_back"]

#: Name of the record JSON attached inside every record PDF.
ATTACHMENT_NAME = "calib-record.json"


@dataclass(frozen=True)
class PdfContents:
    """What :func:`read_back` found in a PDF.

    Attributes
    ----------
    attachments : dict of str to list of bytes
        Attached files by name (a name may occur more than once in a doctored file).
    keywords : str
        The document information ``/Keywords`` entry ("" when there is none).
    pages : tuple of str
        SHA-256 (hex) of each page's decoded content stream, in page order, so
        two files can be compared page by page; ``"damaged"`` for a page whose
        content cannot be decoded.
    damage : tuple of str
        Parts of the file that could not be read (an altered byte inside a
        compressed stream makes it undecodable), in plain words.
    """

    attachments: dict[str, list[bytes]]
    keywords: str
    pages: tuple[str, ...] = ()
    damage: tuple[str, ...] = ()


def read_back(pdf: bytes) -> PdfContents:
    """Read the attached files and keywords of a PDF.

    Parameters
    ----------
    pdf : bytes
        A PDF document.

    Returns
    -------
    PdfContents

    Raises
    ------
    ValueError
        If the bytes are not a PDF that can be parsed at all; the message says
        why.  Damage to a part of the file is reported in
        :attr:`PdfContents.damage` instead, so that the rest can still be read.

    Examples
    --------
    >>> from reportlab.pdfgen.canvas import Canvas
    >>> from calib.report.embed import embed_file
    >>> out = io.BytesIO()
    >>> canvas = Canvas(out, invariant=1)
    >>> embed_file(canvas, name="notes.txt", data=b"hello", mime_type="text/plain")
    >>> canvas.save()
    >>> read_back(out.getvalue()).attachments
    {'notes.txt': [b'hello']}
    >>> read_back(b"GIF89a")
    Traceback (most recent call last):
    ...
    ValueError: not a PDF document (it does not start with %PDF-)
    """
    if not bytes(pdf[:1024]).lstrip().startswith(b"%PDF-"):
        raise ValueError("not a PDF document (it does not start with %PDF-)")
    from pypdf import PdfReader

    log = logging.getLogger("pypdf")
    quiet = logging.NullHandler()
    # pypdf reports repairs it makes to a damaged file through logging and warnings; here a
    # damaged file is reported by what verification finds, not by pypdf's console noise.
    log.addHandler(quiet)
    propagate, log.propagate = log.propagate, False
    damage: list[str] = []
    attachments: dict[str, list[bytes]] = {}
    keywords = ""
    # pypdf raises many kinds of exception on a malformed file, hence the blind excepts.
    try:
        with warnings.catch_warnings():
            warnings.simplefilter("ignore")
            try:
                reader = PdfReader(io.BytesIO(bytes(pdf)))
                page_list = list(reader.pages)
            except Exception as exc:  # noqa: BLE001
                raise ValueError(f"not a readable PDF ({type(exc).__name__}: {exc})") from None
            try:
                attachments = {str(k): [bytes(v) for v in values]
                               for k, values in reader.attachments.items()}
            except Exception as exc:  # noqa: BLE001
                damage.append(f"the attached files cannot be read ({type(exc).__name__}: {exc})")
            try:
                info = reader.metadata
                keywords = str(info.get("/Keywords", "")) if info is not None else ""
            except Exception as exc:  # noqa: BLE001
                damage.append(f"the document information cannot be read ({exc})")
            pages = []
            for number, page in enumerate(page_list, start=1):
                try:
                    contents = page.get_contents()
                    data = contents.get_data() if contents is not None else b""
                    pages.append(hashlib.sha256(data).hexdigest())
                except Exception as exc:  # noqa: BLE001
                    damage.append(f"the content of page {number} cannot be decoded ({exc})")
                    pages.append("damaged")
    finally:
        log.removeHandler(quiet)
        log.propagate = propagate
    return PdfContents(attachments, keywords, tuple(pages), tuple(damage))
