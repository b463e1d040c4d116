"""How far a workbook's sheet XML reaches, read from its attributes before any reader allocates.

A spreadsheet reader builds a dense grid up to the farthest cell a sheet
names, so one stray cell written ``<c r="XFD1048576">`` in a 5 kB file would
ask for billions of cells.  The scanners here read the positions a sheet
declares, whatever the attribute order, quoting, spacing or namespace prefix
(``<x:c t="n" r='XFD1048576'>``), and whatever a repeat count says in an
OpenDocument sheet, so that :mod:`calib.io.limits` can refuse the sheet with
a clear message first.

* ``.xlsx``: every attribute named ``r`` (a cell or row position, with or
  without a namespace prefix) and the ``ref`` of ``<dimension>``.  The scan
  works on bytes with regular expressions, cut at tag boundaries, because a
  full XML parse of a 60,000-row sheet (expat, measured) costs more than the
  read itself.  A part spelt as spreadsheet programs write it (``<row r="7">``,
  ``<c r="B7">``, nothing else spelt ``r=``) is bounded with a few literal
  searches; any other spelling, or a bound close to the limits, is read
  exactly, a value holding an entity or character reference (``&#88;FD1``)
  decoded first.  The scan may over-count (a comment that looks like a cell),
  never let a sheet past the limits; the reader's memory limit stops the one
  case it leaves (a cell naming a row far below its own row element's).
* ``.ods``: ``content.xml`` is parsed with expat, streaming, with document
  type declarations (and so every entity definition) refused.  Only rows
  and cells holding content count, as the reader skips trailing empty ones.
"""

from __future__ import annotations

import re
import xml.parsers.expat
from dataclasses import dataclass
from html import unescape
from operator import itemgetter

__all__ = ["Extent", "OdsScanner", "XlsxScanner", "column_letters"]

XLSX_COLUMNS = 16_384
"""Columns an .xlsx sheet can hold (A to XFD)."""

# An attribute named r (any namespace prefix), its value up to the closing quote.
_LONGEST_TAG = 1_000_000
"""Longest tag (with its attributes) a sheet may hold; spreadsheet programs write short ones."""

# A complete tag: its closing > is outside every quoted attribute value.
_TAG = re.compile(rb'<[^"\'>]*(?:(?:"[^"]*"|\'[^\']*\')[^"\'>]*)*>')
# Written without a look-behind for the character before r (a literal first letter keeps the
# scan fast): an attribute whose name merely ends in r can only add to the count.
_R_VALUE = re.compile(rb'r\s*=\s*["\']\s*\$?([A-Za-z]*)\$?0*(\d{0,30})')
_R_WITH_REFERENCE = re.compile(rb'[\s:]r\s*=\s*["\']([^"\'<]*&[^"\'<]*)["\']')
# The plain spelling: r="..." right after <row or <c, nothing else anywhere spelt r=.
# Every "<row": the digits of a plain r="7" right after it, else nothing.
_PLAIN_ROWS = re.compile(rb'<row(?: r="0*(\d{1,30})")?')
# A plain cell whose reference is not one capital letter and a digit: its letters (none for
# a reference starting with a space or a $, which the plain scan leaves to the general one).
_PLAIN_OTHER = re.compile(rb'<c r="(?![A-Z][1-9])([A-Za-z]*)')
_ROW_ELEMENT = re.compile(rb"<(?:[A-Za-z_][\w.-]*:)?row[\s/>]")
_DIMENSION = re.compile(rb'<(?:[A-Za-z_][\w.-]*:)?dimension\b([^<]*)')
_REF = re.compile(rb'[\s:]ref\s*=\s*["\']([^"\'<]*)["\']')
_POSITION = re.compile(r"\s*\$?([A-Za-z]*)\$?(\d*)\s*")


def column_letters(number: int) -> str:
    """Spreadsheet letters of a 1-based column number.

    Examples
    --------
    >>> column_letters(1), column_letters(28), column_letters(16384)
    ('A', 'AB', 'XFD')
    """
    from calib.io.columns import column_letter

    return column_letter(number - 1)


def _plain(part: bytes, rows: int) -> bool:
    """Whether every r attribute of ``part`` is spelt plainly: ``<row r="7"`` or ``<c r="B7"``.

    ``rows`` is the number of ``<row r="digits"`` found.  Each of those and each ``<c r="``
    holds one ``r=``; when they account for every ``r=`` of the part, no r attribute is
    spelt otherwise (another attribute first is fine, a namespace prefix or single quotes
    are not), save one with white space before ``=`` or a character reference, excluded by
    a few searches (single bytes are found at memory speed).  Any other spelling takes the
    general scan.
    """
    if b"\t" in part or b"\n" in part or b"\r" in part or b"&" in part:
        return False
    if part.count(b"r=") != rows + part.count(b'<c r="'):
        return False
    return b" =" not in part


def _column_number(letters: str) -> int:
    number = 0
    for letter in letters[:8].upper():  # eight letters already far exceed any sheet
        number = number * 26 + ord(letter) - 64
    return number


@dataclass(frozen=True)
class Extent:
    """The farthest row and column a sheet names (1-based; 0 when it names none).

    Attributes
    ----------
    rows, columns : int
        Farthest row and column.
    """

    rows: int = 0
    columns: int = 0

    @property
    def corner(self) -> str:
        """The far corner of the grid as a cell reference (``"XFD1048576"``)."""
        return f"{column_letters(self.columns)}{self.rows}"

    @property
    def cells(self) -> int:
        """Cells of the dense grid a reader would build."""
        return self.rows * self.columns


class XlsxScanner:
    """Feed an .xlsx sheet part in chunks; :meth:`close` says how far it reaches.

    Parts written as spreadsheet programs write them (``<row r="7">``, ``<c r="B7">``)
    are bounded with a few literal-prefixed searches; any other spelling, or a bound
    within reach of ``cells``, takes the general scan of every ``r`` attribute.  The
    extent returned is then exact; after the quick path it may fall short of the far
    corner only by cells that stay within ``rows`` and ``cells`` (the bound is checked
    here), or by a cell naming a row far beyond its row element's, which no spreadsheet
    program writes and which the reader's memory limit then stops.

    Examples
    --------
    >>> scan = XlsxScanner()
    >>> scan.feed(b'<row spans="1:1" r="7"><x:c t="n" r = \\'XFD7\\'><v>1</v></x:c></row>')
    >>> scan.close().corner
    'XFD7'
    """

    def __init__(self, *, rows: int = 2_000_000, cells: int = 40_000_000) -> None:
        self.rows = rows
        self.cells = cells
        self._carry = b""
        self._rows = 0
        self._columns = 0
        self._elements = 0  # row elements: a row written without r is the next one

    def feed(self, chunk: bytes) -> None:
        """Scan the complete tags of ``chunk`` (a tag cut at its end waits for the next).

        Raises
        ------
        ValueError
            When one tag runs past :data:`_LONGEST_TAG` bytes.
        """
        buffer = self._carry + chunk
        self._carry = b""
        cut = buffer.rfind(b"<")
        if cut < 0:
            return  # text between tags only
        if _TAG.match(buffer, cut):
            self._scan(buffer)
            return
        self._scan(buffer[:cut])
        self._carry = buffer[cut:]
        if len(self._carry) > _LONGEST_TAG:
            raise ValueError(f"one XML tag runs past {_LONGEST_TAG:,} bytes")

    def close(self) -> Extent:
        """Scan what is left and return the extent."""
        if self._carry:
            self._scan(self._carry)
            self._carry = b""
        return Extent(max(self._rows, self._elements), self._columns)

    def _note(self, letters: str, digits: str) -> None:
        if digits:
            self._rows = max(self._rows, int(digits[:30]))  # 30 digits already refuse
        if letters:
            self._columns = max(self._columns, _column_number(letters))

    def _scan(self, part: bytes) -> None:
        elements = _PLAIN_ROWS.findall(part)
        rows = [row for row in elements if row]
        if not (_plain(part, len(rows)) and self._plain_scan(part, rows, len(elements))):
            self._general_scan(part)
        for attributes in _DIMENSION.findall(part) if b"dimension" in part else ():
            for value in _REF.findall(attributes):
                for end in value.split(b":"):
                    self._position(end)

    def _plain_scan(self, part: bytes, rows: list[bytes], elements: int) -> bool:
        """Bound the reach of a plainly spelt part cheaply; False when the bound is too loose.

        Rows: the farthest ``<row r=``, rounded up to the next power of ten less one.
        Columns: the widest cell whose reference is not one letter and a digit, else at
        most 26 (Z).  A cell whose own row lies far beyond its row element's (no
        spreadsheet program writes that) is left to the reader's memory limit in its
        child process.
        """
        farthest = max(map(int, rows)) if rows else 0
        letters = set(_PLAIN_OTHER.findall(part))
        if b"" in letters:
            return False  # a reference spelt otherwise ($A$1, a space): count exactly
        wide = [_column_number(w.decode()) for w in letters]
        columns = max([*wide, 26 if b'<c r="' in part else 0])
        bound = max(10 ** len(str(farthest)) - 1, self._rows)
        if bound > self.rows or bound * max(columns, self._columns, 1) > self.cells:
            return False  # near a limit: count exactly
        self._rows = max(self._rows, farthest)
        self._columns = max(self._columns, *wide) if wide else self._columns
        self._elements += elements  # rows written without r count too
        return True

    def _general_scan(self, part: bytes) -> None:
        self._elements += len(_ROW_ELEMENT.findall(part))
        found = _R_VALUE.findall(part)
        if found:
            farthest = max(map(int, filter(None, map(itemgetter(1), found))), default=0)
            self._rows = max(self._rows, farthest)
            for letters in set(map(itemgetter(0), found)):
                self._note(letters.decode(), "")
        if b"&" in part:
            for value in _R_WITH_REFERENCE.findall(part):
                self._position(value)

    def _position(self, value: bytes) -> None:
        text = unescape(value.decode("utf-8", "replace"))
        match = _POSITION.fullmatch(text)
        if match:
            self._note(*match.groups())


def _repeat(attributes: dict[str, str], name: str) -> int:
    value = attributes.get(name, "1")
    try:
        return max(int(value), 1)
    except ValueError:
        return 1


_VALUE_ATTRIBUTES = (
    "urn:oasis:names:tc:opendocument:xmlns:office:1.0 value-type",
    "urn:org:documentfoundation:names:experimental:calc:xmlns:calcext:1.0 value-type",
    "urn:oasis:names:tc:opendocument:xmlns:table:1.0 formula",
)


class OdsScanner:
    """Feed an .ods ``content.xml`` in chunks; :attr:`extent` is its largest table's reach.

    Raises
    ------
    ValueError
        From :meth:`feed` or :meth:`close` when the XML is not well formed or
        declares a document type (entities); the message says where.

    Examples
    --------
    >>> scan = OdsScanner()
    >>> scan.feed(b'<t:table xmlns:t="urn:oasis:names:tc:opendocument:xmlns:table:1.0">'
    ...           b'<t:table-row t:number-rows-repeated="3"><t:table-cell '
    ...           b't:number-columns-repeated="4"><p>x</p></t:table-cell></t:table-row>'
    ...           b'<t:table-row t:number-rows-repeated="1000000"><t:table-cell/>'
    ...           b'</t:table-row></t:table>')
    >>> scan.close()
    Extent(rows=3, columns=4)
    """

    _TABLE = "urn:oasis:names:tc:opendocument:xmlns:table:1.0"

    def __init__(self) -> None:
        parser = xml.parsers.expat.ParserCreate(namespace_separator=" ")
        parser.StartElementHandler = self._start
        parser.EndElementHandler = self._end
        parser.StartDoctypeDeclHandler = self._doctype
        parser.EntityDeclHandler = self._doctype
        parser.buffer_text = True
        self._parser = parser
        self._rows = self._columns = 0
        self._row = 0  # rows seen in the current table
        self._row_repeat = 1
        self._column = 0
        self._cell: tuple[int, int] | None = None  # (column, repeat) of an open cell
        self._row_last_column = 0
        self._depth_in_cell = 0

    def _doctype(self, *_args: object) -> None:
        raise ValueError("the XML declares a document type or entities, which calib refuses")

    def _start(self, name: str, attributes: dict[str, str]) -> None:
        table = self._TABLE + " "
        if self._cell is not None:
            self._depth_in_cell += 1
            self._content()
            return
        if name == table + "table":
            self._row = 0
        elif name == table + "table-row":
            self._row_repeat = _repeat(attributes, table + "number-rows-repeated")
            self._column = 0
            self._row_last_column = 0
        elif name in (table + "table-cell", table + "covered-table-cell"):
            repeat = _repeat(attributes, table + "number-columns-repeated")
            self._cell = (self._column, repeat)
            if any(name in attributes for name in _VALUE_ATTRIBUTES):
                self._content()

    def _content(self) -> None:
        if self._cell is None:
            return
        column, repeat = self._cell
        self._row_last_column = max(self._row_last_column, column + repeat)

    def _end(self, name: str) -> None:
        table = self._TABLE + " "
        if self._cell is not None:
            if self._depth_in_cell:
                self._depth_in_cell -= 1
                return
            column, repeat = self._cell
            self._column = column + repeat
            self._cell = None
            return
        if name == table + "table-row":
            if self._row_last_column:
                self._rows = max(self._rows, self._row + self._row_repeat)
                self._columns = max(self._columns, self._row_last_column)
            self._row += self._row_repeat

    def _fail(self, exc: xml.parsers.expat.ExpatError) -> ValueError:
        what = xml.parsers.expat.errors.messages[exc.code]
        return ValueError(f"the XML is not well formed ({what} at line {exc.lineno}, "
                          f"column {exc.offset})")

    def feed(self, chunk: bytes) -> None:
        """Parse the next part of the document."""
        try:
            self._parser.Parse(chunk, False)
        except xml.parsers.expat.ExpatError as exc:
            raise self._fail(exc) from None

    def close(self) -> Extent:
        """End the document and return the extent of its largest table."""
        try:
            self._parser.Parse(b"", True)
        except xml.parsers.expat.ExpatError as exc:
            raise self._fail(exc) from None
        return Extent(self._rows, self._columns)
