"""A lean table flowable for the record's data tables: plain text cells drawn straight on the canvas.

A multi-analyte record has thousands of small tables.  reportlab's general
``Table`` re-measures every cell and interprets a style command list for each
one when it is laid out and again when it is drawn, which made table layout
most of the time of a 500-analyte record.  Our tables need little of that
generality: text cells of one size, a bold or regular face, left or right
alignment, a shaded header repeated on a new page, hairlines between rows and
cells that may span to the end of their row.  So the lines of every cell are
measured and broken once, when the table is made, and drawing is a single
text object and a few rules.  Text is never markup: it prints as written.
"""

from __future__ import annotations

import functools
from collections.abc import Sequence
from typing import NamedTuple

from reportlab.lib.rl_accel import fp_str
from reportlab.platypus import Flowable

from calib.report.styles import BOLD, INK, LINE, REGULAR, SHADE
from calib.report.text import TextWriter, document_cache, rgb, wrap_words

__all__ = ["Cell", "Grid", "GridRow", "grid_row", "layout_cell"]

FONT_SIZE = 7.0
LEADING = 8.5
PAD_X = 3.0
PAD_TOP = 1.6
PAD_BOTTOM = 1.8
_RULE = 0.25  # hairline between rows
_FRAME = 0.6  # lines above and below the table and below the header
_TALL_ROW = 300.0  # rows taller than this may be split between their lines


class Cell(NamedTuple):
    """One laid-out cell: its lines (with their widths), face, alignment and span."""

    lines: tuple[tuple[str, float], ...]
    bold: bool = False
    right: bool = False
    span: int = 1


class GridRow(NamedTuple):
    """One row of cells, its padding and height (padding plus the tallest cell's lines)."""

    cells: tuple[Cell, ...]
    pad_top: float
    pad_bottom: float
    height: float


def grid_row(cells: Sequence[Cell], *, pad_top: float = PAD_TOP,
             pad_bottom: float = PAD_BOTTOM) -> GridRow:
    """A row of ``cells``; its height follows from the tallest cell.

    Examples
    --------
    >>> round(grid_row([Cell((("Yes", 10.0),)), Cell((("a", 3.0), ("b", 3.0)))]).height, 2)
    20.4
    """
    tallest = max((len(c.lines) for c in cells), default=1) or 1
    return GridRow(tuple(cells), pad_top, pad_bottom, pad_top + tallest * LEADING + pad_bottom)


def _split_row(row: GridRow, lines: int) -> tuple[GridRow, GridRow]:
    """``row`` cut after its first ``lines`` lines: the two parts keep their cells' columns."""
    top = [cell._replace(lines=cell.lines[:lines]) for cell in row.cells]
    rest = [cell._replace(lines=cell.lines[lines:]) for cell in row.cells]
    return (grid_row(top, pad_top=row.pad_top, pad_bottom=row.pad_bottom),
            grid_row(rest, pad_top=row.pad_top, pad_bottom=row.pad_bottom))


@functools.lru_cache(maxsize=1 << 15)
def layout_cell(text: str, width: float, bold: bool = False, right: bool = False,
                span: int = 1) -> Cell:
    """A cell of ``text`` broken into lines for a column ``width`` points wide (padding included).

    Kept once made: labels, check titles and verdict words recur on every analyte's pages.

    Examples
    --------
    >>> from calib.report.styles import register_fonts
    >>> register_fonts()
    >>> layout_cell("Yes", 40).lines[0][0]
    'Yes'
    """
    face = BOLD if bold else REGULAR
    return Cell(wrap_words(text, face, FONT_SIZE, max(width - 2 * PAD_X, 1.0)), bold, right, span)


class Grid(Flowable):
    """A table of laid-out rows, split between rows across pages with its header repeated.

    Parameters
    ----------
    rows : sequence of GridRow
        The rows, header first when ``header`` is set.
    widths : sequence of float
        Column widths in points.
    header : bool
        Whether the first row is a header: shaded, ruled below, repeated after a page break.
    """

    def __init__(self, rows: Sequence[GridRow], widths: Sequence[float], *,
                 header: bool = True) -> None:
        super().__init__()
        self.rows = tuple(rows)
        self.widths = tuple(widths)
        self.header = header and bool(self.rows)
        self.width = sum(self.widths)
        self.height = sum(r.height for r in self.rows)

    def wrap(self, availWidth: float, availHeight: float) -> tuple[float, float]:
        return self.width, self.height

    def split(self, availWidth: float, availHeight: float) -> list[Flowable]:
        """Two tables: the rows that fit in ``availHeight`` and the rest (header repeated)."""
        head = self.rows[:1] if self.header else ()
        body = self.rows[len(head):]
        used = sum(r.height for r in head)
        fit = 0
        for row in body:
            if used + row.height > availHeight:
                break
            used += row.height
            fit += 1
        if fit == len(body):
            return []  # no split needed
        if fit == 0:
            row = body[0]
            lines = int((availHeight - used - row.pad_top - row.pad_bottom) // LEADING)
            if row.height <= _TALL_ROW or lines < 1:
                return []  # let the frame move on: the row starts on the next page
            # A row taller than a page (a reason or a note of thousands of characters)
            # could never be placed whole: it continues on the next page, line by line.
            top, rest = _split_row(row, lines)
            return [Grid((*head, top), self.widths, header=self.header),
                    Grid((*head, rest, *body[1:]), self.widths, header=self.header)]
        return [Grid((*head, *body[:fit]), self.widths, header=self.header),
                Grid((*head, *body[fit:]), self.widths, header=self.header)]

    def draw(self) -> None:
        # The same table recurs on every analyte's pages (run details, sign-off): its
        # operators are worked out once per document.
        cache = document_cache(self.canv, "grid", limit=256)
        key = (self.rows, self.widths, self.header)
        literal = cache.get(key)
        if literal is None:
            literal = cache[key] = self._operators()
        self.canv.addLiteral(literal)

    def _operators(self) -> str:
        """The table as PDF operators, relative to its lower left corner."""
        edges = [0.0]
        for w in self.widths:
            edges.append(edges[-1] + w)
        tops = [self.height]
        for row in self.rows:
            tops.append(tops[-1] - row.height)
        ops = []
        if self.header:
            ops.append(f"q {rgb(SHADE)} rg {fp_str(0, tops[1], self.width, self.rows[0].height)}"
                       " re f Q")
        text = TextWriter(self.canv, FONT_SIZE)
        n = len(self.widths)
        for r, row in enumerate(self.rows):
            column = 0
            for cell in row.cells:
                x0, x1 = edges[column], edges[min(column + cell.span, n)]
                column += cell.span
                face = BOLD if cell.bold else REGULAR
                y = tops[r] - row.pad_top - FONT_SIZE
                for line, w in cell.lines:
                    text.add(line, face, x1 - PAD_X - w if cell.right else x0 + PAD_X, y)
                    y -= LEADING
        ops.append(text.literal(INK))
        first_rule = 2 if self.header else 1
        rules = [f"0 {fp_str(y)} m {fp_str(self.width, y)} l" for y in tops[first_rule:-1]]
        if rules:
            ops.append(f"q {rgb(LINE)} RG {fp_str(_RULE)} w {' '.join(rules)} S Q")
        frame = [tops[0], tops[-1]] + ([tops[1]] if self.header and len(self.rows) > 1 else [])
        ops.append(f"q {rgb(INK)} RG {fp_str(_FRAME)} w "
                   + " ".join(f"0 {fp_str(y)} m {fp_str(self.width, y)} l" for y in frame)
                   + " S Q")
        return "\n".join(ops)

