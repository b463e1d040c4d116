"""Page furniture of the PDF record: header line, footer with record id and "page x of y".

The page count is only known once the story has been laid out, so the
canvas keeps every finished page aside and draws header and footer on all
of them when the document is saved (one layout pass, not two).
"""

from __future__ import annotations

from collections.abc import Callable
from dataclasses import dataclass
from typing import Any

from reportlab.lib.pagesizes import A4, LETTER
from reportlab.pdfbase.pdfmetrics import stringWidth
from reportlab.pdfgen.canvas import Canvas
from reportlab.platypus import Flowable

from calib.report.styles import BOLD, INK, LINE, MUTED, REGULAR

__all__ = ["PAGE_SIZES", "Furniture", "RecordCanvas", "SectionMark", "page_margins"]

PAGE_SIZES: dict[str, tuple[float, float]] = {"A4": A4, "Letter": LETTER}

_MM = 72 / 25.4


def page_margins() -> dict[str, float]:
    """Margins of the text frame in points (room for header and footer included)."""
    return {
        "leftMargin": 17 * _MM,
        "rightMargin": 17 * _MM,
        "topMargin": 20 * _MM,
        "bottomMargin": 18 * _MM,
    }


@dataclass(frozen=True)
class Furniture:
    """What the header and footer of every page say.

    Attributes
    ----------
    lab_name : str
        Left of the header.
    document_title : str
        Right of the header, followed by the section (analyte) on the page.
    record_id : str
        Record identifier, in the footer.
    digest : str
        Record digest; the footer shows its first 16 hex digits.
    """

    lab_name: str
    document_title: str
    record_id: str
    digest: str

    def footer_text(self, page: int, pages: int) -> str:
        """The footer line.

        Examples
        --------
        >>> Furniture("Lab", "Record", "CR-1", "ab" * 32).footer_text(1, 3)
        'Record CR-1 · digest abababababababab · page 1 of 3'
        """
        return f"Record {self.record_id} · digest {self.digest[:16]} · page {page} of {pages}"

    def header_title(self, section: str | None, room: float) -> str:
        """The right of the header: title and section, the section shortened to fit ``room``.

        A long analyte name (a spreadsheet allows thousands of characters) must not
        run over the lab's name on the left.

        Examples
        --------
        >>> from calib.report.styles import register_fonts
        >>> register_fonts()
        >>> f = Furniture("Lab", "Calibration record", "CR-1", "0" * 64)
        >>> f.header_title("Nitrate-N", 300)
        'Calibration record · Nitrate-N'
        >>> f.header_title("N" * 300, 150)
        'Calibration record · NNNNNNNNNNNN…'
        """
        title = self.document_title
        if not section:
            return title
        full = f"{title} · {section}"
        if stringWidth(full, REGULAR, 7.5) <= room:
            return full
        low, high = 0, len(section)  # the longest start of the name that fits, then "…"
        while low < high:
            mid = (low + high + 1) // 2
            if stringWidth(f"{title} · {section[:mid]}…", REGULAR, 7.5) <= room:
                low = mid
            else:
                high = mid - 1
        return f"{title} · {section[:low]}…"

    def draw(self, canvas: Canvas, page: int, pages: int, section: str | None) -> None:
        """Draw header and footer on the current page of ``canvas``."""
        width, height = canvas._pagesize
        margins = page_margins()
        left = margins["leftMargin"]
        right = width - margins["rightMargin"]
        canvas.saveState()
        top = height - 11 * _MM
        canvas.setFillColor(INK)
        canvas.setFont(BOLD, 7.5)
        canvas.drawString(left, top, self.lab_name)
        canvas.setFont(REGULAR, 7.5)
        room = right - left - stringWidth(self.lab_name, BOLD, 7.5) - 12
        canvas.drawRightString(right, top, self.header_title(section, room))
        canvas.setStrokeColor(LINE)
        canvas.setLineWidth(0.5)
        canvas.line(left, top - 3.5, right, top - 3.5)
        bottom = 10 * _MM
        canvas.line(left, bottom + 9, right, bottom + 9)
        canvas.setFillColor(MUTED)
        canvas.setFont(REGULAR, 7)
        canvas.drawString(left, bottom, self.footer_text(page, pages))
        canvas.restoreState()


class SectionMark(Flowable):
    """Invisible flowable that names the section (analyte) for the page headers that follow."""

    def __init__(self, name: str) -> None:
        super().__init__()
        self.name = name
        self.width = self.height = 0

    def wrap(self, availWidth: float, availHeight: float) -> tuple[float, float]:
        return 0, 0

    def draw(self) -> None:
        self.canv._calib_section = self.name


class RecordCanvas(Canvas):
    """A canvas that holds pages back until :meth:`save` so footers can say "page x of y".

    Parameters
    ----------
    *args, **kwargs
        As for :class:`reportlab.pdfgen.canvas.Canvas`.
    furniture : Furniture
        Header and footer wording.
    before_save : callable, optional
        Called with the canvas just before the document is written (used to
        embed the record JSON).
    """

    def __init__(self, *args: Any, furniture: Furniture,
                 before_save: Callable[[Canvas], None] | None = None, **kwargs: Any) -> None:
        super().__init__(*args, **kwargs)
        self._calib_furniture = furniture
        self._calib_before_save = before_save
        self._calib_pages: list[dict[str, Any]] = []
        self._calib_section: str | None = None

    def showPage(self) -> None:
        # Keep the finished page's state; a fresh page starts as Canvas.showPage would leave it.
        self._calib_pages.append(dict(self.__dict__))
        self._startPage()

    def save(self) -> None:
        """Draw the furniture on every held page, then write the document."""
        if self._code:
            self.showPage()
        pages = self._calib_pages
        total = len(pages)
        for number, state in enumerate(pages, start=1):
            self.__dict__.update(state)
            self._calib_furniture.draw(self, number, total, state.get("_calib_section"))
            Canvas.showPage(self)
        if self._calib_before_save is not None:
            self._calib_before_save(self)
        Canvas.save(self)
