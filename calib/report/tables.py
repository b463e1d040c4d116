"""Tables of the PDF record from plain text cells.

Cells are given as plain text.  A cell that fits on one line stays a plain
string (reportlab lays those out an order of magnitude faster than
paragraphs); a longer one becomes a wrapping paragraph.  Text is never
interpreted as markup, so names and reasons from a spreadsheet print as written.
"""

from __future__ import annotations

from collections.abc import Iterable, Sequence
from typing import Any
from xml.sax.saxutils import escape

from reportlab.lib.styles import ParagraphStyle
from reportlab.pdfbase.pdfmetrics import stringWidth
from reportlab.platypus import Flowable, Paragraph, Table

from calib.report.styles import BOLD, Styles, grid_style

__all__ = ["TableMaker"]

_PADDING = 6  # left + right cell padding of grid_style


class TableMaker:
    """Builds the record's tables at a given frame width.

    Parameters
    ----------
    styles : Styles
        Paragraph styles (cells, header cells).
    width : float
        Width of the text frame in points; column widths are fractions of it.
    """

    def __init__(self, styles: Styles, width: float) -> None:
        self.s = styles
        self.width = width

    def fit(self, text: str, width: float, style: ParagraphStyle) -> str | Paragraph:
        """``text`` as a plain cell when it fits on one line of ``width``, else a paragraph.

        Examples
        --------
        >>> from calib.report.styles import get_styles
        >>> maker = TableMaker(get_styles(), 480)
        >>> maker.fit("Run!C7", 60, get_styles().cell)
        'Run!C7'
        >>> type(maker.fit("Air bubble in the sample loop, re-injected", 60, get_styles().cell))
        <class 'reportlab.platypus.paragraph.Paragraph'>
        """
        if "\n" not in text and (
            stringWidth(text, style.fontName, style.fontSize) <= width - _PADDING
        ):
            return text
        return Paragraph(escape(text).replace("\n", "<br/>"), style)

    def grid(
        self,
        rows: Sequence[Sequence[str | Flowable]],
        fractions: Sequence[float],
        *,
        right: Iterable[int] = (),
        header: bool = True,
        bold: Iterable[tuple[int, int]] = (),
        extra: Iterable[tuple[Any, ...]] = (),
    ) -> Table:
        """A data table.

        Parameters
        ----------
        rows : sequence of rows
            Text cells (or ready flowables); the first row is the header when ``header``.
        fractions : sequence of float
            Column widths as fractions of the frame width.
        right : iterable of int
            Columns holding numbers, aligned right.
        header : bool
            Whether the first row is a header (bold, shaded, repeated on new pages).
        bold : iterable of (column, row)
            Plain-text cells set in bold (e.g. a failed verdict).
        extra : iterable of tuple
            Further reportlab table-style commands.
        """
        right = set(right)
        widths = [f * self.width for f in fractions]
        s = self.s
        cells: list[list[Any]] = []
        for r, row in enumerate(rows):
            is_head = header and r == 0
            out = []
            for c, value in enumerate(row):
                if isinstance(value, str):
                    if is_head:
                        style = s.head_right if c in right else s.head_cell
                    else:
                        style = s.cell_right if c in right else s.cell
                    value = self.fit(value, widths[c], style)
                out.append(value)
            cells.append(out)
        table = Table(cells, colWidths=widths, repeatRows=1 if header else 0)
        style = grid_style(header_rows=1 if header else 0)
        for c in sorted(right):
            style.add("ALIGN", (c, 0), (c, -1), "RIGHT")
        for c, r in bold:
            style.add("FONTNAME", (c, r), (c, r), BOLD)
        for command in extra:
            style.add(*command)
        table.setStyle(style)
        return table

    def pairs(self, items: Sequence[tuple[str, str, bool]]) -> Table:
        """A label/value grid, two pairs a row; an item with ``wide`` set takes a whole row."""
        rows: list[list[str]] = []
        spans: list[int] = []
        pending: list[str] = []
        for label, value, wide in items:
            if wide:
                if pending:
                    rows.append(pending + ["", ""])
                    pending = []
                spans.append(len(rows))
                rows.append([label, value, "", ""])
            else:
                pending += [label, value]
                if len(pending) == 4:
                    rows.append(pending)
                    pending = []
        if pending:
            rows.append(pending + ["", ""])
        label, value = 0.17, 0.33
        widths = [label * self.width, value * self.width] * 2
        wide_value = (1 - label) * self.width
        s = self.s
        cells: list[list[Any]] = []
        for r, row in enumerate(rows):
            value_width = wide_value if r in spans else widths[1]
            cells.append([
                self.fit(row[0], widths[0], s.head_cell),
                self.fit(row[1], value_width, s.cell),
                self.fit(row[2], widths[2], s.head_cell),
                self.fit(row[3], widths[3], s.cell),
            ])
        table = Table(cells, colWidths=widths)
        style = grid_style(header_rows=0)
        style.add("FONTNAME", (0, 0), (0, -1), BOLD)
        style.add("FONTNAME", (2, 0), (2, -1), BOLD)
        for r in spans:
            style.add("SPAN", (1, r), (3, r))
        table.setStyle(style)
        return table
