"""Flowables of plain text and simple arrangement, drawn with :mod:`calib.report.text`.

``TextBlock`` stands in for reportlab's ``Paragraph`` for the record's plain
text (headings, notes, cautions, the verdict box): lines are broken once and
set as one text object.  ``SideBySide`` places flowables in columns (the two
plots) without the machinery of a general table.
"""

from __future__ import annotations

from collections.abc import Sequence

from reportlab.lib.colors import Color
from reportlab.lib.styles import ParagraphStyle
from reportlab.pdfgen.canvas import Canvas
from reportlab.platypus import Flowable

from calib.report.styles import INK, SHADE
from calib.report.text import Run, TextWriter, document_cache, wrap_runs

__all__ = ["SideBySide", "TextBlock", "plain"]

# Padding inside the verdict box, in points.
_BOX_X = 6.0
_BOX_TOP = 4.0
_BOX_BOTTOM = 5.0


class TextBlock(Flowable):
    """A block of plain text (no markup), broken into lines once, split between lines.

    Parameters
    ----------
    pieces : sequence of (text, face)
        The text; more than one piece when faces mix (a bold verdict, then its reasons).
    size, leading : float
        Font size and line spacing in points.
    color : Color
        Text colour.
    space_before, space_after : float
        Room above and below the block.
    keep_with_next : bool
        Keep the block on the page of the flowable after it (headings).
    boxed : bool
        Set the text in a shaded, ruled box (the verdict); a boxed block is never split.

    Examples
    --------
    >>> from calib.report.styles import REGULAR, register_fonts
    >>> register_fonts()
    >>> block = TextBlock([("Residuals are plotted unweighted.", REGULAR)], size=7, leading=9)
    >>> block.wrap(80, 100)
    (80, 18)
    """

    def __init__(self, pieces: Sequence[tuple[str, str]], *, size: float, leading: float,
                 color: Color = INK, space_before: float = 0.0, space_after: float = 0.0,
                 keep_with_next: bool = False, boxed: bool = False) -> None:
        super().__init__()
        self.boxed = boxed
        self.pieces = tuple(pieces)
        self.size = size
        self.leading = leading
        self.color = color
        self.spaceBefore = space_before
        self.spaceAfter = space_after
        self.keepWithNext = keep_with_next
        self._lines: Sequence[Sequence[Run]] | None = None
        self._wrapped_width: float | None = None

    def _break(self, width: float) -> Sequence[Sequence[Run]]:
        if self.boxed:
            width -= 2 * _BOX_X
        if self._lines is None or self._wrapped_width != width:
            self._lines = wrap_runs(self.pieces, self.size, width)
            self._wrapped_width = width
        return self._lines

    def wrap(self, availWidth: float, availHeight: float) -> tuple[float, float]:
        self.width = availWidth
        self.height = len(self._break(availWidth)) * self.leading
        if self.boxed:
            self.height += _BOX_TOP + _BOX_BOTTOM
        return self.width, self.height

    def split(self, availWidth: float, availHeight: float) -> list[Flowable]:
        if self.boxed:
            return []
        lines = self._break(availWidth)
        fit = int(availHeight // self.leading)
        if fit < 1 or fit >= len(lines):
            return []
        return [_Lines(self, lines[:fit], first=True), _Lines(self, lines[fit:], first=False)]

    def draw(self) -> None:
        lines = self._break(self.width)
        if not self.boxed:
            _draw_lines(self.canv, lines, self.size, self.leading, self.height, self.color)
            return
        canvas = self.canv
        canvas.saveState()
        canvas.setFillColor(SHADE)
        canvas.setStrokeColor(INK)
        canvas.setLineWidth(0.8)
        canvas.rect(0, 0, self.width, self.height, stroke=1, fill=1)
        canvas.restoreState()
        _draw_lines(canvas, lines, self.size, self.leading, self.height - _BOX_TOP, self.color,
                    x=_BOX_X)


class _Lines(Flowable):
    """Part of a split TextBlock: already broken lines."""

    def __init__(self, block: TextBlock, lines: Sequence[Sequence[Run]], *, first: bool) -> None:
        super().__init__()
        self.block = block
        self.lines = lines
        self.spaceBefore = block.spaceBefore if first else 0.0
        self.spaceAfter = 0.0 if first else block.spaceAfter

    def wrap(self, availWidth: float, availHeight: float) -> tuple[float, float]:
        self.width = availWidth
        self.height = len(self.lines) * self.block.leading
        return self.width, self.height

    def split(self, availWidth: float, availHeight: float) -> list[Flowable]:
        fit = int(availHeight // self.block.leading)
        if fit < 1 or fit >= len(self.lines):
            return []
        return [_Lines(self.block, self.lines[:fit], first=True),
                _Lines(self.block, self.lines[fit:], first=False)]

    def draw(self) -> None:
        b = self.block
        _draw_lines(self.canv, self.lines, b.size, b.leading, self.height, b.color)


def _draw_lines(canvas: Canvas, lines: Sequence[Sequence[Run]], size: float, leading: float,
                top: float, color: Color, *, x: float = 0.0) -> None:
    # Headings, notes and the cautions recur on every analyte's pages: their operators
    # are worked out once per document.
    cache = document_cache(canvas, "lines", limit=256)
    key = (tuple(lines), size, leading, top, color.hexval(), x)
    literal = cache.get(key)
    if literal is None:
        writer = TextWriter(canvas, size)
        # The first baseline sits one font size below the top, as in a paragraph.
        y = top - size
        for line in lines:
            writer.add_runs(line, x, y)
            y -= leading
        literal = cache[key] = writer.literal(color)
    if literal:
        canvas.addLiteral(literal)


class SideBySide(Flowable):
    """Columns of flowables next to each other, tops aligned; never split.

    Parameters
    ----------
    columns : sequence of sequences of Flowable
        What each column holds, top to bottom.
    widths : sequence of float
        Column widths in points.
    """

    def __init__(self, columns: Sequence[Sequence[Flowable]], widths: Sequence[float]) -> None:
        super().__init__()
        self.columns = [list(c) for c in columns]
        self.widths = list(widths)
        self._sizes: list[list[tuple[float, float]]] = []

    def wrap(self, availWidth: float, availHeight: float) -> tuple[float, float]:
        self._sizes = [[f.wrapOn(self.canv, w, availHeight) for f in column]
                       for column, w in zip(self.columns, self.widths)]
        self.width = sum(self.widths)
        self.height = max((sum(h for _, h in sizes) + sum(f.getSpaceAfter() for f in column)
                           for column, sizes in zip(self.columns, self._sizes)), default=0.0)
        return self.width, self.height

    def draw(self) -> None:
        x = 0.0
        for column, sizes, w in zip(self.columns, self._sizes, self.widths):
            y = self.height
            for flowable, (_, h) in zip(column, sizes):
                y -= h
                flowable.drawOn(self.canv, x, y)
                y -= flowable.getSpaceAfter()
            x += w


def plain(text: str, style: ParagraphStyle, *, keep_with_next: bool = False) -> TextBlock:
    """``text`` as a block in the face, size, leading, colour and spacing of a paragraph style.

    Examples
    --------
    >>> from calib.report.styles import get_styles
    >>> plain("Sign-off", get_styles().heading).size
    10
    """
    return TextBlock([(text, style.fontName)], size=style.fontSize, leading=style.leading,
                     color=style.textColor, space_before=style.spaceBefore,
                     space_after=style.spaceAfter, keep_with_next=keep_with_next)
