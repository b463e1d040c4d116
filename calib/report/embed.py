"""Attach a file to a PDF that reportlab is writing (the record JSON inside its PDF).

reportlab has no call for embedded files, but its document object model has
everything needed: an ``/EmbeddedFile`` stream, a file specification naming
it, and the ``/EmbeddedFiles`` name tree in the catalog's ``/Names``
(ISO 32000-1 §7.11.4 and §7.7.4).  Nothing here depends on the clock or on
memory addresses, so the output stays byte-reproducible.

Reading an attachment back (:func:`read_back`) lives in
:mod:`calib.record.pdfread`, the evidence layer, and is re-exported here.
"""

from __future__ import annotations

import hashlib

from reportlab.pdfbase import pdfdoc
from reportlab.pdfgen.canvas import Canvas

from calib.record.pdfread import PdfContents, read_back

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
