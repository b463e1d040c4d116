"""Attach a file to a PDF that reportlab is writing (the record JSON inside its PDF).

reportlab has no call for embedded files, but its document object model has
everything needed: an ``/EmbeddedFile`` stream, a file specification naming
it, and the ``/EmbeddedFiles`` name tree in the catalog's ``/Names``
(ISO 32000-1 §7.11.4 and §7.7.4).  Nothing here depends on the clock or on
memory addresses, so the output stays byte-reproducible.

Reading an attachment back (:func:`read_back`) goes through pypdf, a full
PDF parser, rather than a scan of our own layout: a record that comes back
for verification may have passed through other software (an editor saving an
incremental update, a tool rewriting objects into object streams), and
verification must read what a PDF viewer would show, then find the change.
"""

from __future__ import annotations

import hashlib
import io
import logging
import warnings
from dataclasses import dataclass

from reportlab.pdfbase import pdfdoc
from reportlab.pdfgen.canvas import Canvas

__all__ = ["PdfContents", "embed_file", "read_back"]


def _pdf_name(text: str) -> str:
    """A PDF name object; unlike reportlab's PDFName this also escapes ``/``."""
    out = []
    for ch in text:
        code = ord(ch)
        if code < 0x21 or code > 0x7E or ch in "%()<>{}[]#/":
            out.append(f"#{code:02X}")
        else:
            out.append(ch)
    return "/" + "".join(out)


def embed_file(
    canvas: Canvas,
    *,
    name: str,
    data: bytes,
    mime_type: str = "application/octet-stream",
    description: str = "",
) -> None:
    """Embed ``data`` as the attached file ``name`` of the document ``canvas`` is writing.

    Call before the canvas is saved.  One call per document (it sets the
    catalog's ``/Names`` dictionary).

    Parameters
    ----------
    canvas : reportlab Canvas
        The canvas of the document being written.
    name : str
        File name shown by PDF viewers.
    data : bytes
        File content, stored Flate-compressed.
    mime_type : str
        Media type of the content.
    description : str
        Shown by viewers beside the file name.

    Examples
    --------
    >>> import io
    >>> from pypdf import PdfReader
    >>> out = io.BytesIO()
    >>> canvas = Canvas(out, invariant=1)
    >>> canvas.drawString(72, 720, "See the attached file.")
    >>> embed_file(canvas, name="notes.txt", data=b"hello", mime_type="text/plain")
    >>> canvas.save()
    >>> PdfReader(out).attachments["notes.txt"]
    [b'hello']
    """
    doc = canvas._doc
    stream = pdfdoc.PDFStream(
        dictionary=pdfdoc.PDFDictionary(
            {
                "Type": "/EmbeddedFile",
                "Subtype": _pdf_name(mime_type),
                "Params": pdfdoc.PDFDictionary(
                    {
                        "Size": len(data),
                        "CheckSum": "<" + hashlib.md5(data, usedforsecurity=False).hexdigest()
                        + ">",
                    }
                ),
            }
        ),
        content=data,
        filters=[pdfdoc.PDFZCompress],
    )
    stream_ref = doc.Reference(stream, "calibEmbeddedFile")
    spec = pdfdoc.PDFDictionary(
        {
            "Type": "/Filespec",
            "F": pdfdoc.PDFString(name),
            "UF": pdfdoc.PDFString(name),
            "EF": pdfdoc.PDFDictionary({"F": stream_ref, "UF": stream_ref}),
            "Desc": pdfdoc.PDFString(description),
            "AFRelationship": "/Data",
        }
    )
    spec_ref = doc.Reference(spec, "calibFileSpec")
    tree = pdfdoc.PDFDictionary({"Names": pdfdoc.PDFArray([pdfdoc.PDFString(name), spec_ref])})
    doc.Catalog.Names = pdfdoc.PDFDictionary({"EmbeddedFiles": tree})


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
