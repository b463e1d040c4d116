"""Building a :class:`~calib.run.Run` from a grid of raw cells (long layout).

Every reader ends here: it turns its file into a :class:`Grid` (rows of raw
cells, the file and sheet names) and :func:`build_run` does the rest, so a
CSV file and a workbook holding the same table give the same run.

The long layout has one row per injection under a header row.  The header
row is the first row naming both a concentration and a response column;
title and ``key: value`` lines above it go into ``Run.metadata``.  Blank rows
are skipped; every other row must be readable, or the run is refused with a
message naming the row and column.
"""

from __future__ import annotations

import math
import re
from collections.abc import Callable, Sequence
from dataclasses import dataclass
from pathlib import PurePath
from typing import TypeVar

from calib.errors import InputError
from calib.io.cells import (
    Cell,
    CellError,
    describe,
    is_blank,
    to_flag,
    to_integer,
    to_number,
    to_text,
)
from calib.io.columns import Column, column_letter, map_headings, match_heading, squash
from calib.options import SampleType
from calib.run import Point, Run, SourceInfo

__all__ = [
    "HEADER_SEARCH_ROWS",
    "SAMPLE_TYPE_WORDS",
    "Grid",
    "HeaderMatch",
    "build_run",
    "cell_reference",
    "find_header",
    "parse_sample_type",
]

HEADER_SEARCH_ROWS = 50
"""How many rows from the top are searched for the header row."""

SAMPLE_TYPE_WORDS: dict[SampleType, tuple[str, ...]] = {
    SampleType.STANDARD: (
        "standard", "std", "cal", "calibrator", "calibrant", "calibration",
        "calibration standard", "cal std",
    ),
    SampleType.BLANK: ("blank", "blk", "reagent blank", "method blank", "solvent blank"),
    SampleType.ZERO: ("zero", "zero standard", "zero sample"),
    SampleType.QC: ("qc", "quality control", "qc sample", "control"),
    SampleType.UNKNOWN: ("unknown", "unk", "sample", "unknown sample"),
}
"""Words accepted in a sample_type cell (compared after folding case and punctuation)."""

_T = TypeVar("_T")

_SAMPLE_TYPE_LOOKUP = {
    squash(word): kind for kind, words in SAMPLE_TYPE_WORDS.items() for word in words
}
# Headings named in the message when no header row is found.
_EXAMPLES = {"concentration": ("concentration", "conc", "amount"),
             "response": ("response", "area", "height")}
# Sheet or file names a spreadsheet writes without quotes in a reference.
_PLAIN_NAME = re.compile(r"[A-Za-z0-9_.]+")


@dataclass(frozen=True, eq=False)
class Grid:
    """A sheet or text file as rows of raw cells, with the names that place them.

    Attributes
    ----------
    rows : sequence of sequences of Cell
        Row 0 is spreadsheet row 1, column 0 is column A: readers must not trim
        leading empty rows or columns, or source cells would be wrong.
    file : str
        The file as the caller named it, for messages.
    label : str
        What source cells start with: the sheet name for a workbook, the file
        name for a text file.
    sheet : str or None
        Sheet name for workbooks, None for text files.
    decimal_comma : bool
        True when the file is known to use decimal commas (see
        :func:`~calib.io.cells.to_number`).
    explain_empty : callable or None
        ``explain_empty(row, column)`` (0-based) may say what an apparently
        empty cell really holds, for readers that report error values as
        empty; None when it has nothing to add.
    """

    rows: Sequence[Sequence[Cell]]
    file: str
    label: str
    sheet: str | None = None
    decimal_comma: bool = False
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


@dataclass(frozen=True)
class HeaderMatch:
    """The header row found in a grid.

    Attributes
    ----------
    row : int
        0-based row index of the header row.
    columns : dict of str to Column
        Matched columns by canonical name.
    """

    row: int
    columns: dict[str, Column]


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
    return f"{_reference_prefix(label)}{column_letter(column)}{row + 1}"


def _reference_prefix(label: str) -> str:
    if not _PLAIN_NAME.fullmatch(label):
        label = "'" + label.replace("'", "''") + "'"
    return f"{label}!"


def parse_sample_type(value: Cell) -> SampleType:
    """Read a sample_type cell; an empty cell is a standard.

    Examples
    --------
    >>> parse_sample_type("Std"), parse_sample_type(" QC "), parse_sample_type(None)
    (<SampleType.STANDARD: 'standard'>, <SampleType.QC: 'qc'>, <SampleType.STANDARD: 'standard'>)
    """
    text = to_text(value)
    if text is None:
        return SampleType.STANDARD
    kind = _SAMPLE_TYPE_LOOKUP.get(squash(text))
    if kind is None:
        accepted = "; ".join(
            f"{kind.value} ({', '.join(words)})" for kind, words in SAMPLE_TYPE_WORDS.items()
        )
        raise CellError(f"found {describe(value)}; expected a sample type: {accepted}")
    return kind


def _names_both(row: Sequence[Cell]) -> bool:
    found = set()
    for cell in row:
        if isinstance(cell, str) and cell.strip():
            name, _ = match_heading(cell)
            if name is not None:
                found.add(name)
    return "concentration" in found and "response" in found


def find_header(grid: Grid, *, limit: int = HEADER_SEARCH_ROWS) -> HeaderMatch | None:
    """Find the first row naming both a concentration and a response column.

    Returns None when none of the first ``limit`` rows does.

    Raises
    ------
    InputError
        When the header row names one canonical column twice.

    Examples
    --------
    >>> grid = Grid([["Nitrate run"], [], ["Conc (mg/L)", "Area"]], file="r.csv", label="r.csv")
    >>> find_header(grid).row
    2
    """
    for index, row in enumerate(grid.rows[:limit]):
        if _names_both(row):
            try:
                return HeaderMatch(index, map_headings(row))
            except CellError as exc:
                raise grid.error(str(exc), row=index) from None
    return None


def _no_header(grid: Grid, limit: int) -> InputError:
    searched = grid.rows[:limit]
    shown: tuple[int, Sequence[Cell]] | None = None
    for index, row in enumerate(searched):
        if any(isinstance(c, str) and match_heading(c)[0] in ("concentration", "response")
               for c in row):
            shown = (index, row)
            break
    if shown is None:
        shown = next(((i, r) for i, r in enumerate(searched) if not all(map(is_blank, r))), None)
    if shown is None:
        found = "found no cell with content"
    else:
        texts = [t for t in map(to_text, shown[1]) if t is not None][:8]
        found = f"found in row {shown[0] + 1}: " + ", ".join(repr(t) for t in texts)
    examples = " and ".join(
        ", ".join(repr(s) for s in _EXAMPLES[name]) for name in ("concentration", "response")
    )
    return grid.error(
        f"no header row naming both a concentration and a response column in the first "
        f"{limit} rows; {found}; expected headings such as {examples}"
    )


def _metadata(rows: Sequence[Sequence[Cell]]) -> dict[str, str]:
    """``key: value`` and two-cell ``key, value`` lines; the first lone line is the title."""
    metadata: dict[str, str] = {}
    for row in rows:
        texts = [t for t in map(to_text, row) if t is not None]
        key: str | None = None
        value = ""
        if len(texts) == 2:
            key, value = texts[0].rstrip(":").strip(), texts[1]
        elif len(texts) == 1 and ":" in texts[0]:
            key, _, value = texts[0].partition(":")
            key, value = key.strip(), value.strip()
        elif len(texts) == 1:
            key, value = "title", texts[0]
        if key and value and key not in metadata:
            metadata[key] = value
    return metadata


class _RowReader:
    """Reads the body rows of one grid against its matched columns.

    Written for speed (a large export has tens of thousands of rows): column
    indices are looked up once, and the few distinct texts of the sample_type
    and include columns are parsed once each.
    """

    def __init__(self, grid: Grid, columns: dict[str, Column], analyte: str | None) -> None:
        self.grid = grid
        self.columns = columns
        self.analyte = analyte
        self.index = {name: column.index for name, column in columns.items()}
        self.prefix = _reference_prefix(grid.label) + columns["response"].letter
        self.memo: dict[tuple[str, type, Cell], object] = {}

    def fail(self, row: int, name: str, message: str) -> InputError:
        return self.grid.error(message, row=row, column=self.columns[name].label)

    def raw(self, row: Sequence[Cell], name: str) -> Cell:
        index = self.index.get(name)
        return row[index] if index is not None and index < len(row) else None

    def number(self, row_index: int, row: Sequence[Cell], name: str) -> float:
        value = self.raw(row, name)
        if type(value) is float and math.isfinite(value):
            return value
        if is_blank(value):
            explained = None
            if self.grid.explain_empty is not None:
                explained = self.grid.explain_empty(row_index, self.index[name])
            found = explained or "an empty cell"
            raise self.fail(row_index, name, f"found {found}; expected a number")
        try:
            return to_number(value, decimal_comma=self.grid.decimal_comma)
        except CellError as exc:
            raise self.fail(row_index, name, str(exc)) from None

    def parse(
        self, name: str, row_index: int, row: Sequence[Cell], parser: Callable[[Cell], _T]
    ) -> _T:
        value = self.raw(row, name)
        key = (name, type(value), value)  # type() keeps True apart from 1
        try:
            return self.memo[key]  # type: ignore[return-value]
        except KeyError:
            pass
        try:
            result = parser(value)
        except CellError as exc:
            raise self.fail(row_index, name, str(exc)) from None
        self.memo[key] = result
        return result

    def point(self, row_index: int, row: Sequence[Cell]) -> Point:
        index = self.index
        kind = SampleType.STANDARD
        if "sample_type" in index:
            kind = self.parse("sample_type", row_index, row, parse_sample_type)
        analyte = self.analyte
        if analyte is None:
            analyte = to_text(self.raw(row, "analyte"))
            if analyte is None:
                raise self.fail(row_index, "analyte", "found an empty cell; expected the analyte name")
        if kind is not SampleType.STANDARD and kind is not SampleType.QC and is_blank(
            self.raw(row, "concentration")
        ):
            # An unknown's concentration is what the run measures; a blank's is zero.
            concentration = math.nan if kind is SampleType.UNKNOWN else 0.0
        else:
            concentration = self.number(row_index, row, "concentration")
        response = self.number(row_index, row, "response")
        replicate = None
        if "replicate" in index and not is_blank(self.raw(row, "replicate")):
            replicate = self.parse("replicate", row_index, row, to_integer)
        included = True
        if "include" in index:
            included = self.parse("include", row_index, row, to_flag)
        reason = to_text(self.raw(row, "exclusion_reason"))
        if not included and reason is None:
            flag = to_text(self.raw(row, "include"))
            raise self.fail(
                row_index,
                "include",
                f"the point is excluded (include is {flag!r}) but gives no exclusion_reason; "
                f"every exclusion needs a reason",
            )
        return Point(
            analyte=analyte,
            concentration=concentration,
            response=response,
            source_cell=f"{self.prefix}{row_index + 1}",
            sample_type=kind,
            replicate=replicate,
            included=included,
            exclusion_reason=reason,
            sample_id=to_text(self.raw(row, "sample_id")),
        )


def build_run(
    grid: Grid,
    *,
    source: SourceInfo,
    analyte: str | None = None,
    header: HeaderMatch | None = None,
) -> Run:
    """Build the run held in a grid of raw cells (long layout).

    Parameters
    ----------
    grid : Grid
        The sheet or text file as rows of raw cells.
    source : SourceInfo
        File name, SHA-256 and sheet of the file, stored in the run.
    analyte : str, optional
        Analyte name for a table with no analyte column; by default the file
        name without its extension.  Refused when the table has an analyte
        column, since the two could disagree.
    header : HeaderMatch, optional
        The header row if the caller has already found it.

    Returns
    -------
    Run
        One point per non-blank row below the header, in file order.

    Raises
    ------
    InputError
        When no header row is found, a cell cannot be read, an excluded point
        gives no reason, or the table holds no calibration standard.

    Notes
    -----
    A row with no sample_type is a standard.  An unknown may leave its
    concentration empty (read as NaN); a blank or zero sample with an empty
    concentration has concentration 0.  ``include`` accepts yes/no, y/n,
    true/false, 1/0 and ``x`` (included); an empty cell means included.

    Examples
    --------
    >>> rows = [
    ...     ["Fernbrook Water Laboratory"],
    ...     ["Method:", "Nitrate-N by IC"],
    ...     ["Sample", "Conc (mg/L)", "Peak area", "Include", "Reason"],
    ...     ["S1", 0.5, 1010.0, "yes", ""],
    ...     ["S2", "1,0", 2032.0, "no", "vial cracked"],
    ... ]
    >>> grid = Grid(rows, file="nitrate.csv", label="nitrate.csv")
    >>> run = build_run(grid, source=SourceInfo("nitrate.csv", "0" * 64))
    >>> run.metadata
    {'title': 'Fernbrook Water Laboratory', 'Method': 'Nitrate-N by IC'}
    >>> run.units, run.analytes
    ({'concentration': 'mg/L'}, ('nitrate',))
    >>> p = run.points[1]
    >>> p.concentration, p.source_cell, p.included, p.exclusion_reason
    (1.0, 'nitrate.csv!C5', False, 'vial cracked')
    """
    if header is None:
        header = find_header(grid)
        if header is None:
            raise _no_header(grid, HEADER_SEARCH_ROWS)
    columns = header.columns
    if analyte is not None and "analyte" in columns:
        raise grid.error(
            f"the table has an analyte column {columns['analyte'].label}; the analyte name "
            f"given ({analyte!r}) is only for tables without one",
            row=header.row,
        )
    if analyte is None and "analyte" not in columns:
        analyte = PurePath(source.file).stem
    reader = _RowReader(grid, columns, analyte)
    points = []
    rows = grid.rows
    for index in range(header.row + 1, len(rows)):
        row = rows[index]
        if all(map(is_blank, row)):
            continue
        points.append(reader.point(index, row))
    if not points:
        raise grid.error(
            f"the table under the header in row {header.row + 1} has no rows; expected at least "
            f"one calibration standard",
        )
    if not any(p.sample_type is SampleType.STANDARD for p in points):
        kinds = ", ".join(dict.fromkeys(p.sample_type.value for p in points))
        rows = f"{len(points)} row" + ("" if len(points) == 1 else "s")
        raise grid.error(
            f"found no calibration standard among the {rows} (sample types: {kinds}); "
            f"expected at least one standard (a row with an empty sample_type is a standard)"
        )
    units = {name: column.unit for name, column in columns.items() if column.unit is not None}
    return Run(
        source=source,
        points=tuple(points),
        metadata=_metadata(grid.rows[: header.row]),
        units=units,
    )
