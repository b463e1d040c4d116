"""Write the PDF calibration record: one call, record dict in, PDF bytes out."""

from __future__ import annotations

import functools
import hashlib
import io
from collections.abc import Iterator, Mapping
from dataclasses import dataclass
from datetime import UTC, datetime
from typing import Any

from reportlab.lib.utils import TimeStamp
from reportlab.pdfbase import pdfdoc
from reportlab.pdfgen.canvas import Canvas
from reportlab.platypus import BaseDocTemplate, Flowable, Frame, PageTemplate

from calib.record.pdfread import ATTACHMENT_NAME
from calib.report.embed import embed_file
from calib.report.pages import PAGE_SIZES, Furniture, RecordCanvas, page_margins
from calib.report.story import story_sections
from calib.report.styles import REGULAR, register_fonts
from calib.report.template import ReportTemplate, load_template

__all__ = ["ATTACHMENT_NAME", "RecordPages", "record_pages", "write_pdf"]



@dataclass(frozen=True)
class RecordPages:
    """How the record versions of one template are drawn, for :mod:`calib.record`.

    Issuing, signing and verifying (:mod:`calib.record.signoff`,
    :mod:`calib.record.verify`) are handed this rather than importing the
    drawing, so the evidence layer never imports :mod:`calib.report`.
    """

    template: ReportTemplate

    def draw(self, record: Any) -> bytes:
        """The PDF of ``record`` (a :class:`calib.record.Record`), its JSON attached."""
        return write_pdf(record.body, digest=record.digest, record_id=record.record_id,
                         template=self.template, attachment=record.canonical)


def record_pages(template: ReportTemplate | None = None) -> RecordPages:
    """:class:`RecordPages` of ``template`` (the bundled template when None)."""
    return RecordPages(template or load_template())


def write_pdf(
    record: Mapping[str, Any],
    *,
    digest: str,
    record_id: str,
    template: ReportTemplate | None = None,
    attachment: bytes,
) -> bytes:
    """Render a calibration record as PDF, with the record JSON attached inside it.

    The output depends on the arguments only: the same record, digest, id,
    template and attachment give the same bytes on any run (reportlab's
    invariant mode; the PDF dates are the record's ``created_at``).

    Parameters
    ----------
    record : mapping
        The parsed ``calib.record/2`` (or ``/1``) JSON; never live fit objects, so a
        stored record renders again identically.
    digest : str
        SHA-256 (hex) of the canonical record JSON; the footer shows 16 digits.
    record_id : str
        Record identifier printed on every page.
    template : ReportTemplate, optional
        Lab details and wording; the bundled template when None.
    attachment : bytes
        The canonical record JSON, embedded as the file ``calib-record.json``.

    Returns
    -------
    bytes
        The PDF document.

    Examples
    --------
    >>> record = {"schema": "calib.record/1", "created_at": "2026-12-01T09:30:00Z",
    ...           "check": {"curves": []}}
    >>> pdf = write_pdf(record, digest="0" * 64, record_id="CR-000000000000",
    ...                 attachment=b"{}")
    >>> pdf[:5]
    b'%PDF-'
    """
    if not isinstance(attachment, (bytes, bytearray)):
        raise TypeError(f"attachment must be bytes; got {type(attachment).__name__}")
    template = template or load_template()
    register_fonts()
    furniture = Furniture(
        lab_name=template.lab.name,
        document_title=template.titles.document,
        record_id=record_id,
        digest=digest,
    )
    buffer = io.BytesIO()
    doc = _RecordDoc(
        buffer,
        pagesize=PAGE_SIZES[template.page_size],
        invariant=1,
        pageCompression=1,
        title=f"{template.titles.document} {record_id}",
        author=template.lab.name,
        subject=_subject(record),
        creator=_creator(record),
        # The template's fingerprint lets verification tell "laid out with another
        # template" from "altered".
        keywords=[record_id, digest, f"template {template.fingerprint[:16]}"],
        initialFontName=REGULAR,
        **page_margins(),
    )
    # No frame padding: tables are laid out to the exact width of the text block.
    frame = Frame(doc.leftMargin, doc.bottomMargin, doc.width, doc.height, leftPadding=0,
                  rightPadding=0, topPadding=0, bottomPadding=0, id="body")
    doc.addPageTemplates([PageTemplate(id="record", frames=[frame])])
    before_save = functools.partial(
        _finish, attachment=bytes(attachment), digest=digest, created_at=record.get("created_at")
    )
    doc.stream(story_sections(record, record_id=record_id, digest=digest, template=template,
                              width=doc.width))
    doc.build(doc.story, canvasmaker=functools.partial(RecordCanvas, furniture=furniture,
                                                       before_save=before_save))
    return buffer.getvalue()


class _SectionEnd(Flowable):
    """Invisible marker after each section: its drawing asks for the next section."""

    def wrap(self, availWidth: float, availHeight: float) -> tuple[float, float]:
        return 0, 0

    def drawOn(self, canvas: Canvas, x: float, y: float, _sW: float = 0) -> None:
        pass  # nothing to draw, not even a saved and restored graphics state


class _RecordDoc(BaseDocTemplate):
    """A document laid out section by section (summary, then each analyte).

    The next section's flowables are made only once the previous section has
    been drawn, so a record of hundreds of analytes never holds all its tables
    and charts at once.  After :meth:`stream`, ``story`` is the list to :meth:`build`.
    """

    def stream(self, sections: Iterator[list[Flowable]]) -> None:
        """Take the sections to lay out; the first is made now, the others when wanted."""
        self._sections = sections
        self.story: list[Flowable] = []
        self._more()

    def _more(self) -> None:
        section = next(self._sections, None)
        if section is not None:
            self.story.extend([*section, _SectionEnd()])

    def afterFlowable(self, flowable: Flowable) -> None:
        if isinstance(flowable, _SectionEnd):
            self._more()


def _finish(canvas: Canvas, *, attachment: bytes, digest: str, created_at: Any) -> None:
    embed_file(canvas, name=ATTACHMENT_NAME, data=attachment, mime_type="application/json",
               description="Calibration record (canonical JSON); its SHA-256 is the record digest")
    doc = canvas._doc
    # Flate alone: reportlab's default ASCII85 layer makes streams a quarter larger and,
    # in pure Python, costs more time than laying the pages out.
    for page in doc.Pages.pages:
        if page.compression and page.stream and not page.Contents:
            page.Contents = pdfdoc.PDFStream(content=page.stream, filters=[pdfdoc.PDFZCompress])
    doc._timeStamp = _timestamp(created_at)
    # reportlab seeds the file identifier with its own clock (or SOURCE_DATE_EPOCH);
    # seed it with the record digest so the environment cannot change the bytes.
    doc.signature = hashlib.md5(b"calib record " + digest.encode("ascii", "replace"),
                                usedforsecurity=False)


def _timestamp(created_at: Any) -> TimeStamp:
    stamp = TimeStamp(invariant=1)
    try:
        when = datetime.fromisoformat(str(created_at))
    except ValueError:
        return stamp
    when = when.replace(tzinfo=UTC) if when.tzinfo is None else when.astimezone(UTC)
    stamp.t = when.timestamp()
    stamp.lt = when.timetuple()
    stamp.YMDhms = tuple(stamp.lt)[:6]
    stamp.dhh = stamp.dmm = 0
    stamp.tzname = "UTC"
    return stamp


def _subject(record: Mapping[str, Any]) -> str:
    run = record.get("run") if isinstance(record.get("run"), Mapping) else {}
    name = run.get("file") if isinstance(run, Mapping) else None
    return f"Calibration of {name}" if name else "Calibration record"


def _creator(record: Mapping[str, Any]) -> str:
    tool = record.get("tool") if isinstance(record.get("tool"), Mapping) else {}
    return f"{tool.get('name', 'calib')} {tool.get('version', '')}".strip()
