"""Cell detail the fast reader does not give: hidden rows, error values, merges, formulas.

python-calamine reads saved cell values quickly but reports an error value
such as ``#DIV/0!`` as an empty cell in ``.xlsx`` (and as the formula's
numeric stand-in, often 0, in ``.ods``), and says nothing about hidden rows.
So that an error never becomes a number or a silent gap, and a row the
analyst hid is not used unseen, the workbook reader asks this module when
the archive scan (:func:`calib.io.limits.inspect_archive`) found such
features:

- ``.xlsx`` / ``.xlsm``: openpyxl (which parses through defusedxml when it
  is installed, as calib requires) gives hidden rows and columns, error
  values, and, on the way to an error message only, a formula that has no
  saved result;
- ``.ods``: the sheet XML is parsed with defusedxml for error cells, hidden
  rows and columns, and merged ranges.
"""

from __future__ import annotations

import io
import warnings
import zipfile
from collections.abc import Iterator
from dataclasses import dataclass, field

from calib.io.files import RawFile

__all__ = ["FormulaInspector", "SheetDetail", "ods_detail", "xlsx_detail"]


@dataclass
class SheetDetail:
    """What one sheet hides, merges or holds as errors (0-based rows and columns).

    Attributes
    ----------
    hidden_rows, hidden_columns : set of int
        Rows and columns the sheet hides.
    errors : dict of (int, int) to str
        Error value text by cell.
    merges : list of tuple
        ``(first_row, first_column, last_row, last_column)`` of each merged range.
    """

    hidden_rows: set[int] = field(default_factory=set)
    hidden_columns: set[int] = field(default_factory=set)
    errors: dict[tuple[int, int], str] = field(default_factory=dict)
    merges: list[tuple[int, int, int, int]] = field(default_factory=list)

    def apply(self, rows: list[list[object]]) -> None:
        """Write error texts into ``rows`` and copy merged values over their ranges."""
        for (row, column), text in self.errors.items():
            if row < len(rows) and column < len(rows[row]):
                rows[row][column] = text
        for first_row, first_column, last_row, last_column in self.merges:
            if first_row >= len(rows) or first_column >= len(rows[first_row]):
                continue
            value = rows[first_row][first_column]
            for row in range(first_row, min(last_row, len(rows) - 1) + 1):
                cells = rows[row]
                for column in range(first_column, min(last_column, len(cells) - 1) + 1):
                    if (row, column) != (first_row, first_column):
                        cells[column] = value


def _quiet_openpyxl(data: bytes, *, read_only: bool, data_only: bool):
    import openpyxl  # deferred: only workbooks with hidden rows or errors need it

    with warnings.catch_warnings():
        # openpyxl warns about workbook features it skips; they do not matter here.
        warnings.simplefilter("ignore")
        return openpyxl.load_workbook(io.BytesIO(data), read_only=read_only, data_only=data_only,
                                      keep_vba=False, keep_links=False)


def xlsx_detail(raw: RawFile, sheet: str, *, hidden: bool, errors: bool) -> SheetDetail:
    """Hidden rows and columns (``hidden``) and error values (``errors``) of one sheet."""
    from openpyxl.utils import column_index_from_string

    detail = SheetDetail()
    book = _quiet_openpyxl(raw.data, read_only=not hidden, data_only=True)
    try:
        ws = book[sheet]
        if hidden:
            for number, dimension in ws.row_dimensions.items():
                if dimension.hidden:
                    detail.hidden_rows.add(number - 1)
            for letter, dimension in ws.column_dimensions.items():
                if dimension.hidden:
                    first = dimension.min or column_index_from_string(letter)
                    last = dimension.max or first
                    detail.hidden_columns.update(range(first - 1, last))
        if errors:
            for row in ws.iter_rows():
                for cell in row:
                    if getattr(cell, "data_type", None) == "e" and isinstance(cell.value, str):
                        detail.errors[(cell.row - 1, cell.column - 1)] = cell.value.upper()
    finally:
        book.close()
    return detail


class FormulaInspector:
    """Says when an apparently empty ``.xlsx`` cell is a formula without a saved result."""

    def __init__(self, raw: RawFile, sheet: str) -> None:
        self._raw = raw
        self._sheet = sheet
        self._formulas: dict[tuple[int, int], str] | None = None

    def _load(self) -> dict[tuple[int, int], str]:
        formulas: dict[tuple[int, int], str] = {}
        book = _quiet_openpyxl(self._raw.data, read_only=True, data_only=False)
        try:
            for row in book[self._sheet].iter_rows():
                for cell in row:
                    value = getattr(cell, "value", None)
                    if isinstance(value, str) and value.startswith("="):
                        formulas[(cell.row - 1, cell.column - 1)] = value
        finally:
            book.close()
        return formulas

    def __call__(self, row: int, column: int) -> str | None:
        try:
            if self._formulas is None:
                self._formulas = self._load()
        except Exception:  # noqa: BLE001 - an explanation is a courtesy, never an error
            self._formulas = {}
        formula = self._formulas.get((row, column))
        if formula is None:
            return None
        return (f"a formula with no saved result ({formula}; calib never evaluates formulas: "
                f"open the workbook in a spreadsheet program and save it)")


_TABLE = "{urn:oasis:names:tc:opendocument:xmlns:table:1.0}"
_CALCEXT = "{urn:org:documentfoundation:names:experimental:calc:xmlns:calcext:1.0}"
_TEXT_P = "{urn:oasis:names:tc:opendocument:xmlns:text:1.0}p"
_HIDDEN = ("collapse", "filter")


def _repeat(element: object, name: str) -> int:
    value = element.get(f"{_TABLE}{name}")  # type: ignore[attr-defined]
    try:
        return max(1, int(value)) if value else 1
    except ValueError:
        return 1


def _ods_events(data: bytes) -> Iterator[tuple[str, object]]:
    from defusedxml.ElementTree import iterparse

    return iterparse(io.BytesIO(data), events=("start", "end"))  # type: ignore[no-any-return]


def ods_detail(raw: RawFile) -> dict[str, SheetDetail]:
    """Error cells, hidden rows and columns and merged ranges of every sheet of an ``.ods``.

    Rows repeated with ``number-rows-repeated`` count as many times as they
    repeat, so indices match the sheet; the long runs of empty repeated rows
    that office programs write at the end of a sheet stop the count early.
    """
    with zipfile.ZipFile(io.BytesIO(raw.data)) as archive:
        content = archive.read("content.xml")
    details: dict[str, SheetDetail] = {}
    detail: SheetDetail | None = None
    row = column = 0
    pending_row_repeat = 1
    row_hidden = False
    cell_error = False
    cell_repeat = 1
    for event, element in _ods_events(content):
        tag = element.tag  # type: ignore[attr-defined]
        if event == "start":
            if tag == f"{_TABLE}table":
                detail = details.setdefault(element.get(f"{_TABLE}name", ""), SheetDetail())  # type: ignore[attr-defined]
                row = column = 0
            elif detail is None:
                continue
            elif tag == f"{_TABLE}table-column":
                repeat = _repeat(element, "number-columns-repeated")
                if element.get(f"{_TABLE}visibility") in _HIDDEN:  # type: ignore[attr-defined]
                    detail.hidden_columns.update(range(column, column + min(repeat, 16384)))
                column += repeat
            elif tag == f"{_TABLE}table-row":
                column = 0
                pending_row_repeat = _repeat(element, "number-rows-repeated")
                row_hidden = element.get(f"{_TABLE}visibility") in _HIDDEN  # type: ignore[attr-defined]
            elif tag in (f"{_TABLE}table-cell", f"{_TABLE}covered-table-cell"):
                cell_repeat = _repeat(element, "number-columns-repeated")
                cell_error = element.get(f"{_CALCEXT}value-type") == "error"  # type: ignore[attr-defined]
                rows_spanned = _repeat(element, "number-rows-spanned")
                columns_spanned = _repeat(element, "number-columns-spanned")
                if rows_spanned > 1 or columns_spanned > 1:
                    detail.merges.append((row, column, row + rows_spanned - 1,
                                          column + columns_spanned - 1))
        elif detail is not None:
            if tag in (f"{_TABLE}table-cell", f"{_TABLE}covered-table-cell"):
                if cell_error:
                    text = "".join(p.text or "" for p in element.iter(_TEXT_P)).strip()  # type: ignore[attr-defined]
                    detail.errors[(row, column)] = text.upper() or "#VALUE!"
                column += cell_repeat
                element.clear()  # type: ignore[attr-defined]
            elif tag == f"{_TABLE}table-row":
                if row_hidden:
                    detail.hidden_rows.update(range(row, row + min(pending_row_repeat, 1000)))
                row += pending_row_repeat
                element.clear()  # type: ignore[attr-defined]
            elif tag == f"{_TABLE}table":
                detail = None
    return details
