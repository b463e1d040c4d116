"""A sheet or text file as a grid of raw cells, and how its cells are named.

Every reader turns its file into a :class:`Grid` (rows of raw cells with the
names that place them); the layout, row and run builders in
:mod:`calib.io.layout`, :mod:`calib.io.rows` and :mod:`calib.io.assemble`
do the rest, so a CSV file and a workbook holding the same table give the
same run.
"""

from __future__ import annotations

import re
from collections.abc import Callable, Sequence
from dataclasses import dataclass, field

from calib.errors import InputError
from calib.io.cells import Cell
from calib.io.columns import column_letter
from calib.io.numbers import DecimalMark

__all__ = ["HEADER_SEARCH_ROWS", "Grid", "cell_reference", "reference_prefix"]

HEADER_SEARCH_ROWS = 50
"""How many rows from the top are searched for the first header row."""

# Sheet or file names a spreadsheet writes without quotes in a reference.
_PLAIN_NAME = re.compile(r"[A-Za-z0-9_.]+")


@dataclass(frozen=True, eq=False)
class Grid:
    """A sheet or text file as rows of raw cells, with the names that place them.

    Attributes
    ----------
    rows : sequence of sequences of Cell
        Row 0 is spreadsheet row 1, column 0 is column A: readers must not trim
        leading empty rows or columns, or source cells would be wrong.  Merged
        cells hold their value in every cell of the merge, and error values
        are written as their text (``"#DIV/0!"``).
    file : str
        The file as the caller named it, for messages.
    label : str
        What source cells start with: the sheet name for a workbook, the file
        name for a text file.
    sheet : str or None
        Sheet name for workbooks, None for text files.
    decimal : {".", ","} or None
        The decimal mark when it is known for certain (an import map says it).
    decimal_hint : {".", ","} or None
        The decimal mark to assume when the numbers themselves do not show it
        (a semicolon-separated text file is taken to write decimal commas).
    hidden_rows, hidden_columns : frozenset of int
        0-based rows and columns the workbook hides.
    explain_empty : callable or None
        ``explain_empty(row, column)`` (0-based) may say what an apparently
        empty cell really holds (a formula with no saved result); None when
        the reader has nothing to add.
    """

    rows: Sequence[Sequence[Cell]]
    file: str
    label: str
    sheet: str | None = None
    decimal: DecimalMark | None = None
    decimal_hint: DecimalMark | None = None
    hidden_rows: frozenset[int] = field(default_factory=frozenset)
    hidden_columns: frozenset[int] = field(default_factory=frozenset)
    explain_empty: Callable[[int, int], str | None] | None = None

    def error(self, message: str, *, row: int | None = None, column: str | None = None) -> InputError:
        """An InputError placed in this grid (``row`` 0-based, shown 1-based)."""
        return InputError(
            message,
            file=self.file,
            sheet=self.sheet,
            row=None if row is None else row + 1,
            column=column,
        )

    def reference(self, column: int, row: int) -> str:
        """The source cell of a 0-based column and row, ``Run!C7``."""
        return cell_reference(self.label, column, row)


def reference_prefix(label: str) -> str:
    """``label!`` quoted as spreadsheets quote sheet names with spaces or punctuation.

    Examples
    --------
    >>> reference_prefix("Run"), reference_prefix("Day 2"), reference_prefix("O'Neil")
    ('Run!', "'Day 2'!", "'O''Neil'!")
    """
    if not _PLAIN_NAME.fullmatch(label):
        label = "'" + label.replace("'", "''") + "'"
    return f"{label}!"


def cell_reference(label: str, column: int, row: int) -> str:
    """A cell as a spreadsheet shows it: ``Run!C7`` (``column`` and ``row`` 0-based).

    Names with spaces or other punctuation are quoted the way spreadsheets
    quote them.

    Examples
    --------
    >>> cell_reference("Run", 2, 6)
    'Run!C7'
    >>> cell_reference("run.csv", 27, 0)
    'run.csv!AB1'
    >>> cell_reference("Day 2", 0, 9)
    "'Day 2'!A10"
    """
    return f"{reference_prefix(label)}{column_letter(column)}{row + 1}"
