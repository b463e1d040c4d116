"""Plain text set straight on the canvas: measuring, line breaking and one text block per call.

The record's text is plain (names and reasons from spreadsheets are never
markup) and set in two faces of one font at a few sizes.  reportlab's
``Paragraph`` parses markup and re-breaks its lines whenever it is wrapped;
``TextObject.textOut`` measures every string again and encodes each one
character by character.  A 500-analyte record sets some 200,000 strings,
most of them repeated (headers, labels, check titles, verdict words), so here
widths are measured once per string and the encoded form of a string is kept
for the document, and a whole table or block is emitted as one text object
through :meth:`Canvas.addLiteral` with reportlab's documented subset-font calls
(``splitString`` / ``getSubsetInternalName``).
"""

from __future__ import annotations

import functools
from collections.abc import Sequence

from reportlab.lib.colors import Color
from reportlab.lib.rl_accel import escapePDF, fp_str
from reportlab.pdfbase.pdfmetrics import getFont, stringWidth
from reportlab.pdfgen.canvas import Canvas

from calib.report.styles import INK

__all__ = ["Run", "TextWriter", "document_cache", "measure", "rgb", "wrap_runs", "wrap_words"]

#: Printable ASCII, the characters of numbers and most labels.
_PRINTABLE = "".join(chr(c) for c in range(32, 127))

#: A piece of a line: its text, face and width in points.
Run = tuple[str, str, float]


@functools.lru_cache(maxsize=1 << 16)
def measure(text: str, font: str, size: float) -> float:
    """Width of ``text`` in points (cached: most strings of a record recur).

    Examples
    --------
    >>> from calib.report.styles import REGULAR, register_fonts
    >>> register_fonts()
    >>> measure("", REGULAR, 7)
    0.0
    """
    return stringWidth(text, font, size)


def wrap_words(text: str, font: str, size: float,
               width: float) -> tuple[tuple[str, float], ...]:
    """Break ``text`` into lines no wider than ``width`` points; each line with its width.

    Text that fits stays as written; otherwise words (runs of non-space) are
    filled greedily, a word wider than the line is broken between characters,
    and a newline always starts a new line.

    Examples
    --------
    >>> from calib.report.styles import REGULAR, register_fonts
    >>> register_fonts()
    >>> [line for line, _ in wrap_words("Air bubble in the sample loop", REGULAR, 7, 60)]
    ['Air bubble in the', 'sample loop']
    >>> [line for line, _ in wrap_words("Run!C7", REGULAR, 7, 60)]
    ['Run!C7']
    """
    if "\n" not in text:
        whole = measure(text, font, size)
        if whole <= width:
            return ((text, whole),)
    space = measure(" ", font, size)
    return tuple((" ".join(w for w, _, _ in line), sum(r[2] for r in line)
                  + space * (len(line) - 1))
                 for line in wrap_runs(((text, font),), size, width))


@functools.lru_cache(maxsize=4096)
def wrap_runs(pieces: tuple[tuple[str, str], ...], size: float,
              width: float) -> tuple[tuple[Run, ...], ...]:
    """Break text given as (text, face) pieces into lines of words no wider than ``width``.

    Each line is a tuple of words with their face and width; a newline in a
    piece starts a new line, and a word wider than the line is broken between
    characters.  Used for text that mixes faces (a verdict in bold, then the
    reasons).  Results are kept: the cautions and many notes recur on every
    analyte's pages.

    Examples
    --------
    >>> from calib.report.styles import BOLD, REGULAR, register_fonts
    >>> register_fonts()
    >>> lines = wrap_runs((("Rejected.", BOLD), (" Failed: intercept.", REGULAR)), 9, 90)
    >>> [[word for word, _, _ in line] for line in lines]
    [['Rejected.', 'Failed:'], ['intercept.']]
    """
    lines: list[tuple[Run, ...]] = []
    line: list[Run] = []
    used = 0.0
    for text, font in pieces:
        space = measure(" ", font, size)
        for n, paragraph in enumerate(text.split("\n")):
            if n:
                lines.append(tuple(line))
                line, used = [], 0.0
            for word in paragraph.split():
                w = measure(word, font, size)
                if line and used + space + w <= width:
                    line.append((word, font, w))
                    used += space + w
                    continue
                if line:
                    lines.append(tuple(line))
                if w <= width:
                    line, used = [(word, font, w)], w
                    continue
                *full, (last, last_width) = _break_word(word, font, size, width)
                lines.extend(((piece, font, pw),) for piece, pw in full)
                line, used = [(last, font, last_width)], last_width
    if line or not lines:
        lines.append(tuple(line))
    return tuple(lines)


def _break_word(word: str, font: str, size: float, width: float) -> list[tuple[str, float]]:
    """A word too long for one line, cut between characters (at least one per line)."""
    pieces: list[tuple[str, float]] = []
    start = 0
    while start < len(word):
        end = start + 1
        while end < len(word) and stringWidth(word[start:end + 1], font, size) <= width:
            end += 1
        pieces.append((word[start:end], stringWidth(word[start:end], font, size)))
        start = end
    return pieces


def rgb(color: Color) -> str:
    """The operands of a PDF ``rg``/``RG`` colour operator.

    Examples
    --------
    >>> from reportlab.lib.colors import Color
    >>> rgb(Color(1, 0.5, 0))
    '1 .5 0'
    """
    return fp_str(color.red, color.green, color.blue)


def document_cache(canvas: Canvas, name: str, *, limit: int = 0) -> dict:
    """A dictionary kept with ``canvas`` for its current document (a new one for a new document).

    Encoded text names the document's font subsets, so what is cached for one
    document must never reach another.  With ``limit``, the dictionary is
    emptied when it grows past that many entries (for caches of whole blocks
    that recur page after page, not over the whole document).

    Examples
    --------
    >>> import io
    >>> c = Canvas(io.BytesIO())
    >>> document_cache(c, "demo") is document_cache(c, "demo")
    True
    """
    caches = getattr(canvas, "_calib_caches", None)
    if caches is None or caches[0] is not canvas._doc:
        caches = (canvas._doc, {})
        canvas._calib_caches = caches
    cache = caches[1].setdefault(name, {})
    if limit and len(cache) > limit:
        cache.clear()
    return cache


class TextWriter:
    """Collects strings at positions and turns them into one PDF text object.

    Parameters
    ----------
    canvas : Canvas
        The canvas (its document owns the font subsets the text is encoded in).
    size : float
        Font size of strings added without one.
    """

    def __init__(self, canvas: Canvas, size: float) -> None:
        self.canvas = canvas
        self.size = size
        self._code: list[str] = []
        self._font: tuple[str, float] | None = None
        self._color: Color | None = None
        self._encoded: dict[tuple[str, str], list[tuple[str, str]]] = document_cache(
            canvas, "encoded")

    def _encode(self, text: str, font: str) -> list[tuple[str, str]]:
        if text.isascii() and text.isprintable():
            # Numbers and most labels: printable ASCII keeps its own codes (checked once per
            # document and font), so there is nothing to look up or to keep.
            subset0 = self._ascii_subset(font)
            if subset0 is not None:
                return [(subset0, escapePDF(text))]
        key = (text, font)
        found = self._encoded.get(key)
        if found is None:
            face = getFont(font)
            doc = self.canvas._doc
            found = [(face.getSubsetInternalName(subset, doc), escapePDF(chunk))
                     for subset, chunk in face.splitString(text, doc)]
            self._encoded[key] = found
        return found

    def _ascii_subset(self, font: str) -> str | None:
        """The name of the font's first subset if printable ASCII keeps its own codes there.

        reportlab sets fonts up so by default (``ttfAsciiReadable``); asked once
        per document and font through the font's own encoder, so a font set up
        otherwise takes the general path (None).
        """
        answers = document_cache(self.canvas, "ascii subset")
        if font not in answers:
            face, doc = getFont(font), self.canvas._doc
            as_is = face.splitString(_PRINTABLE, doc) == [(0, _PRINTABLE.encode("ascii"))]
            answers[font] = face.getSubsetInternalName(0, doc) if as_is else None
        return answers[font]

    def add(self, text: str, font: str, x: float, y: float, *, size: float | None = None,
            matrix: tuple[float, float, float, float] | None = None,
            color: Color | None = None) -> None:
        """Set ``text`` in ``font`` with its baseline starting at (x, y).

        ``matrix`` (a, b, c, d) turns the text (a quarter turn for a y-axis title);
        ``color`` sets the colour of this string and those after it.
        """
        if not text:
            return
        code = self._code
        if color is not None and color != self._color:
            code.append(f"{rgb(color)} rg")
            self._color = color
        if matrix is None:
            code.append(f"1 0 0 1 {fp_str(x, y)} Tm")
        else:
            code.append(f"{fp_str(*matrix, x, y)} Tm")
        size = size or self.size
        for name, chunk in self._encode(text, font):
            if (name, size) != self._font:
                code.append(f"{name} {fp_str(size)} Tf")
                self._font = (name, size)
            code.append(f"({chunk}) Tj")

    def add_runs(self, line: Sequence[Run], x: float, y: float) -> None:
        """Set a line of words (as from :func:`wrap_runs`), one space apart, from (x, y).

        Words of one face go out as one string: without kerning a space-joined
        string is exactly as wide as its words and spaces.
        """
        start = 0
        while start < len(line):
            font = line[start][1]
            end = start
            while end < len(line) and line[end][1] == font:
                end += 1
            words = line[start:end]
            space = measure(" ", font, self.size)
            self.add(" ".join(w for w, _, _ in words), font, x, y)
            x += sum(w for _, _, w in words) + space * len(words)
            start = end

    def literal(self, color: Color = INK) -> str:
        """The collected text as PDF operators (empty when there is none), in ``color``
        unless a string set its own; the graphics state is saved around it."""
        if not self._code:
            return ""
        head = f"q {rgb(color)} rg BT "
        return head + " ".join(self._code) + " ET Q"

    def write(self, color: Color = INK) -> None:
        """Emit the collected text onto the canvas and start afresh."""
        literal = self.literal(color)
        if literal:
            self.canvas.addLiteral(literal)
        self._code = []
        self._font = None
        self._color = None
