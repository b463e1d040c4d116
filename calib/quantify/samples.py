"""Reading the samples to quantify: unknowns and QCs, with their dilution factors.

A samples file is a long table, one row per injection, under a header row
that may have title lines above it::

    Sample ID | Analyte | Sample type | Response | IS response | Dilution factor | Replicate | Nominal

Only ``response`` is required, with at least one of ``sample_id``,
``analyte``, ``sample_type``, ``concentration`` (a QC's nominal) or
``dilution_factor`` beside it.  Headings are matched as the run importer
matches them (:mod:`calib.io.columns`); the dilution factor, which a run file
does not carry, is recognised here ("Dilution", "Dilution factor", "DF",
"Verdünnungsfaktor"...).  A blank dilution cell means 1.

The sample type comes from a type cell or the sample name (``QC-L``,
``LQC``); a row whose name says nothing is a QC when it gives a nominal
concentration and an unknown otherwise.  Standards, blanks and zero samples in
the file are left out (and listed in the notes).  A response that is a
non-detect marker, an error value or empty sets the injection aside with the
reason, as the run importer does.  The file's cells are read with the run
importer's cell rules (:mod:`calib.io.cells`); workbooks are read with
python-calamine after the same archive limits (:mod:`calib.io.limits`).
"""

from __future__ import annotations

import csv
import io
import math
import os
from dataclasses import dataclass, replace
from pathlib import Path

import python_calamine

from calib.errors import InputError
from calib.io.cells import Cell, CellError, is_blank, to_flag, to_integer, to_number, to_text
from calib.io.columns import column_letter, match_heading, split_unit, squash
from calib.io.csv_text import DELIMITERS, decode_text
from calib.io.files import RawFile, load_file
from calib.io.limits import check_sheet_size, check_text_rows, check_xls, inspect_archive
from calib.io.numbers import find_marker
from calib.io.sampletypes import SampleTyper, type_from_name
from calib.io.table import HEADER_SEARCH_ROWS, Grid
from calib.options import SampleType
from calib.run import Point, Run, SourceInfo

__all__ = ["DILUTION_HEADINGS", "Reading", "SampleSheet", "dilution_of", "read_samples",
           "readings_from_run"]

DILUTION_HEADINGS: tuple[str, ...] = (
    "dilution", "dilution factor", "dil factor", "dil", "df", "fold dilution", "dilution fold",
    "verdünnung", "verdünnungsfaktor", "vf", "facteur de dilution", "dilution (facteur)",
    "dilución", "factor de dilución",
)
"""Headings of the dilution factor column (compared after :func:`calib.io.columns.squash`)."""

_DILUTION = frozenset(squash(h) for h in DILUTION_HEADINGS)
_COLUMNS = ("analyte", "sample_type", "concentration", "response", "is_response", "replicate",
            "include", "exclusion_reason", "sample_id", "injection_order", "level",
            "dilution_factor")
_BESIDE = ("sample_id", "analyte", "sample_type", "concentration", "dilution_factor")
_TEXT = (".csv", ".tsv", ".txt")
_BOOKS = (".xlsx", ".xlsm", ".xls", ".ods")
_WHAT = "a samples table (.xlsx, .xlsm, .xls, .ods, .csv, .tsv or .txt)"


@dataclass(frozen=True)
class Reading:
    """One injection of a sample to quantify.

    Attributes
    ----------
    point : Point
        The injection as read (``sample_type`` unknown or QC; a QC's
        ``concentration`` is its nominal, an unknown's is ``nan``).
    dilution_factor : float
        Factor the measured concentration is multiplied by (1 = undiluted).
    """

    point: Point
    dilution_factor: float = 1.0


@dataclass(frozen=True)
class SampleSheet:
    """The samples read from one file.

    Attributes
    ----------
    source : SourceInfo
        The file (name, SHA-256, sheet).
    readings : tuple of Reading
        Unknowns and QCs in file order.
    units : dict
        ``{"concentration": unit}`` when the nominal heading gives one.
    notes : tuple of str
        Rows left out (standards, blanks), in plain words.
    """

    source: SourceInfo
    readings: tuple[Reading, ...]
    units: dict[str, str]
    notes: tuple[str, ...] = ()


def dilution_of(point: Point) -> float:
    """The dilution factor of a run-file point: its own when the importer gives one, else 1."""
    # A run importer that carries a dilution factor on the point is used as is.
    value = getattr(point, "dilution_factor", None)
    if isinstance(value, (int, float)) and not isinstance(value, bool) and value > 0 \
            and math.isfinite(value):
        return float(value)
    return 1.0


def readings_from_run(run: Run) -> tuple[Reading, ...]:
    """The unknowns and QCs of a run file, as readings (dilution factor 1 unless the point has one).

    Examples
    --------
    >>> from calib.run import Point, Run, SourceInfo
    >>> run = Run(SourceInfo("r.csv", "0" * 64), (
    ...     Point("A", 1.0, 10.0, "r.csv!C2"),
    ...     Point("A", float("nan"), 12.0, "r.csv!C3", sample_type=SampleType.UNKNOWN)))
    >>> [(r.point.source_cell, r.dilution_factor) for r in readings_from_run(run)]
    [('r.csv!C3', 1.0)]
    """
    return tuple(Reading(p, dilution_of(p)) for p in run.points
                 if p.sample_type in (SampleType.UNKNOWN, SampleType.QC))


def _heading(cell: Cell) -> tuple[str | None, str | None]:
    text = to_text(cell) if isinstance(cell, str) else None
    if text is None:
        return None, None
    name, unit = split_unit(text)
    if squash(name) in _DILUTION or squash(text) in _DILUTION:
        return "dilution_factor", None
    found, unit = match_heading(text)
    return (found, unit) if found in _COLUMNS else (None, None)


def _header(grid: Grid, index: int) -> dict[str, tuple[int, str, str | None]] | None:
    """Columns of a header row: name → (index, heading, unit); None if it is no header."""
    columns: dict[str, tuple[int, str, str | None]] = {}
    for col, cell in enumerate(grid.rows[index]):
        name, unit = _heading(cell)
        if name is None:
            continue
        if name in columns:
            first = columns[name]
            raise grid.error(
                f"two columns name the {name.replace('_', ' ')}: {column_letter(first[0])} "
                f"({first[1]}) and {column_letter(col)} ({to_text(cell)}); keep one", row=index)
        columns[name] = (col, str(to_text(cell)), unit)
    if "response" in columns and any(k in columns for k in _BESIDE):
        return columns
    return None


def _find_header(grid: Grid) -> tuple[int, dict[str, tuple[int, str, str | None]]] | None:
    for index in range(min(len(grid.rows), HEADER_SEARCH_ROWS)):
        columns = _header(grid, index)
        if columns is not None:
            return index, columns
    return None


def _no_header(grid: Grid) -> InputError:
    return grid.error(
        f"no samples table found in the first {HEADER_SEARCH_ROWS} rows: expected a header row "
        "naming the response (Response, Area, Height...) and beside it the sample id, analyte, "
        "sample type, nominal concentration or dilution factor")


class _TableReader:
    """Turns the body rows under a header into readings."""

    def __init__(self, grid: Grid, header_row: int, columns: dict[str, tuple[int, str, str | None]],
                 *, analyte: str | None, decimal: str | None) -> None:
        self.grid = grid
        self.header_row = header_row
        self.columns = columns
        self.analyte = analyte
        self.decimal = decimal
        self.typer = SampleTyper()
        self.readings: list[Reading] = []
        self.notes: list[str] = []
        if "analyte" not in columns and analyte is None:
            raise grid.error("the samples table has no analyte column; add one, or quantify "
                             "against a curve of a single analyte", row=header_row)

    def cell(self, row: list[Cell], name: str) -> Cell:
        if name not in self.columns:
            return None
        index = self.columns[name][0]
        return row[index] if index < len(row) else None

    def fail(self, row_index: int, name: str, message: str) -> InputError:
        index, heading, _ = self.columns[name]
        return self.grid.error(message, row=row_index, column=f"{column_letter(index)} ({heading})")

    def number(self, row_index: int, row: list[Cell], name: str, expected: str) -> float | None:
        value = self.cell(row, name)
        if is_blank(value):
            return None
        try:
            return to_number(value, decimal=self.decimal)  # type: ignore[arg-type]
        except CellError as exc:
            found = str(exc).split("; expected", 1)[0]
            raise self.fail(row_index, name, f"{found}; expected {expected}") from None

    def text(self, row: list[Cell], name: str) -> str | None:
        return to_text(self.cell(row, name))

    def measured(self, row_index: int, row: list[Cell], name: str, what: str
                 ) -> tuple[float, str | None]:
        """A response cell: its value, or nan and the reason it is set aside."""
        value = self.cell(row, name)
        if is_blank(value):
            return math.nan, f"no {what} in the file"
        if isinstance(value, str):
            marker = find_marker(value)
            if marker is not None:
                return math.nan, marker.reason(what)
        number = self.number(row_index, row, name,
                             f"the {what} (a number; a marker such as ND sets it aside)")
        return float(number), None  # type: ignore[arg-type]

    def kind(self, row_index: int, row: list[Cell], name: str | None, nominal: float | None
             ) -> SampleType:
        text = self.text(row, "sample_type")
        if text is not None:
            try:
                found = self.typer.from_cell(text)
            except CellError as exc:
                raise self.fail(row_index, "sample_type", str(exc)) from None
            if found is not None:
                return found
        named = type_from_name(name)
        if named is not None:
            return named
        return SampleType.QC if nominal is not None else SampleType.UNKNOWN

    def row(self, row_index: int, row: list[Cell]) -> None:
        name = self.text(row, "sample_id")
        nominal = self.number(row_index, row, "concentration",
                              "the nominal concentration of the QC (a number of 0 or more)")
        kind = self.kind(row_index, row, name, nominal)
        if kind not in (SampleType.UNKNOWN, SampleType.QC):
            self.notes.append(f"row {row_index + 1}{f' ({name})' if name else ''} is a "
                              f"{kind.value} sample, not one to quantify; it was left out")
            return
        if kind is SampleType.QC and (nominal is None or nominal <= 0):
            found = "no nominal concentration" if nominal is None else f"the nominal {nominal:g}"
            column = "concentration" if "concentration" in self.columns else "sample_type"
            if column not in self.columns:
                column = "response"
            raise self.fail(row_index, column, f"found {found} for a QC; expected its nominal "
                                               "concentration, a number above 0")
        dilution = self.number(row_index, row, "dilution_factor",
                               "a dilution factor above 0 (an empty cell means 1)")
        if dilution is not None and not dilution > 0:
            raise self.fail(row_index, "dilution_factor", f"found the dilution factor "
                                                          f"{dilution:g}; expected a number above 0")
        reasons: list[str] = []
        response, why = self.measured(row_index, row, "response", "response")
        if why:
            reasons.append(why)
        analyte_response = is_response = None
        if "is_response" in self.columns and not why:
            is_value, is_why = self.measured(row_index, row, "is_response",
                                             "internal-standard response")
            analyte_response = response
            if is_why or not is_value > 0:
                reasons.append((is_why or f"internal-standard response is {is_value:g}")
                               + "; the ratio cannot be formed")
                response = math.nan
            else:
                is_response = is_value
                response = response / is_value
        included = True
        if "include" in self.columns:
            try:
                included = to_flag(self.cell(row, "include"))
            except CellError as exc:
                raise self.fail(row_index, "include", str(exc)) from None
        if not included:
            reasons.insert(0, self.text(row, "exclusion_reason") or "excluded by the analyst")
        replicate = order = None
        for key in ("replicate", "injection_order"):
            value = self.cell(row, key)
            if not is_blank(value):
                try:
                    number = to_integer(value)
                except CellError as exc:
                    raise self.fail(row_index, key, str(exc)) from None
                replicate, order = (number, order) if key == "replicate" else (replicate, number)
        point = Point(
            analyte=self.text(row, "analyte") or self.analyte or "",
            concentration=float(nominal) if kind is SampleType.QC else math.nan,
            response=response, source_cell=self.grid.reference(self.columns["response"][0],
                                                                 row_index),
            sample_type=kind, replicate=replicate, included=not reasons,
            exclusion_reason="; ".join(reasons) if reasons else None, sample_id=name,
            injection_order=order, is_response=is_response, analyte_response=analyte_response,
            level=self.text(row, "level"),
        )
        if not point.analyte:
            raise self.fail(row_index, "analyte", "found an empty cell; expected the analyte name")
        self.readings.append(Reading(point, 1.0 if dilution is None else float(dilution)))

    def read(self) -> None:
        seen_gap = False
        for row_index in range(self.header_row + 1, len(self.grid.rows)):
            row = list(self.grid.rows[row_index])
            if all(is_blank(c) for c in row):
                seen_gap = bool(self.readings) or seen_gap
                continue
            # Notes under the table, after a blank line, carry no response.
            if seen_gap and is_blank(self.cell(row, "response")):
                break
            self.row(row_index, row)


def _text_grid(raw: RawFile) -> tuple[Grid, SourceInfo, str | None]:
    text, encoding = decode_text(raw)
    check_text_rows(text.count("\n"), file=raw.given)
    order = list(DELIMITERS)
    if raw.path.suffix.lower() == ".tsv":
        order.remove("\t")
        order.insert(0, "\t")
    first: Grid | None = None
    for delimiter in order:
        try:
            rows: list[list[Cell]] = list(csv.reader(io.StringIO(text, newline=""),
                                                     delimiter=delimiter))
        except csv.Error as exc:
            raise InputError(f"cannot be split into cells ({exc}); expected {_WHAT}",
                             file=raw.given) from None
        grid = Grid(rows, file=raw.given, label=raw.name)
        first = first or grid
        if _find_header(grid) is not None:
            source = SourceInfo(file=raw.name, sha256=raw.sha256, encoding=encoding,
                                delimiter=delimiter)
            return grid, source, "," if delimiter == ";" else None
    raise _no_header(first)  # type: ignore[arg-type]


def _book_grid(raw: RawFile, sheet: str | int | None) -> tuple[Grid, SourceInfo]:
    what = f"a workbook ({raw.path.suffix.lower()})"
    if inspect_archive(raw, what=what) is None:
        check_xls(raw, what=what)
    try:
        book = python_calamine.CalamineWorkbook.from_filelike(io.BytesIO(raw.data))
    except Exception as exc:  # noqa: BLE001 - calamine raises several unrelated types
        raise InputError(f"cannot be read as a workbook ({exc}); expected {what} saved by a "
                         "spreadsheet program", file=raw.given) from None
    names = list(book.sheet_names)
    if sheet is not None:
        if isinstance(sheet, int):
            if not 0 <= sheet < len(names):
                raise InputError(f"the workbook has {len(names)} sheet(s); sheet index {sheet} "
                                 "does not exist (indexes start at 0)", file=raw.given)
            candidates = [names[sheet]]
        elif sheet not in names:
            raise InputError(f"no sheet named {sheet!r}; the sheets are "
                             f"{', '.join(map(repr, names))}", file=raw.given)
        else:
            candidates = [sheet]
    else:
        candidates = names
    for name in candidates:
        try:
            data = book.get_sheet_by_name(name)
            end = data.end
            if end is not None:
                check_sheet_size(end[0] + 1, end[1] + 1, file=raw.given, sheet=name)
            rows = data.to_python(skip_empty_area=False)
        except InputError:
            raise
        except Exception as exc:  # noqa: BLE001
            raise InputError(f"cannot be read ({exc})", file=raw.given, sheet=name) from None
        grid = Grid(rows, file=raw.given, label=name, sheet=name)
        if _find_header(grid) is not None or sheet is not None:
            return grid, SourceInfo(file=raw.name, sha256=raw.sha256, sheet=name,
                                    sheets=(name,))
    raise InputError(f"no sheet holds a samples table: expected a header row naming the "
                     f"response and the sample id, analyte, sample type, nominal concentration "
                     f"or dilution factor (sheets: {', '.join(map(repr, names))})",
                     file=raw.given)


def read_samples(path: str | os.PathLike[str], *, sheet: str | int | None = None,
                 analyte: str | None = None) -> SampleSheet:
    """Read the unknowns and QCs of a samples file.

    Parameters
    ----------
    path : str or path-like
        ``.xlsx``, ``.xlsm``, ``.xls``, ``.ods``, ``.csv``, ``.tsv`` or ``.txt``.
    sheet : str or int, optional
        Workbook sheet by name or 0-based index; by default the first sheet
        holding a samples table.
    analyte : str, optional
        Analyte of every row when the table has no analyte column.

    Returns
    -------
    SampleSheet

    Raises
    ------
    InputError
        When the file cannot be read or a cell cannot be used; the message
        names the file, sheet, row and column.

    Examples
    --------
    >>> import tempfile, pathlib
    >>> text = ("Fernbrook Water Laboratory\\nSample,Area,Dilution factor,Nominal (mg/L)\\n"
    ...         "FW-101,5230,,\\nFW-102,18800,10,\\nQC-M,8110,,4.0\\n")
    >>> with tempfile.TemporaryDirectory() as folder:
    ...     path = pathlib.Path(folder, "batch.csv")
    ...     _ = path.write_text(text, encoding="utf-8")
    ...     sheet = read_samples(path, analyte="Nitrate-N")
    >>> [(r.point.sample_id, r.point.sample_type.value, r.dilution_factor)
    ...  for r in sheet.readings]
    [('FW-101', 'unknown', 1.0), ('FW-102', 'unknown', 10.0), ('QC-M', 'qc', 1.0)]
    >>> sheet.readings[2].point.concentration, sheet.units
    (4.0, {'concentration': 'mg/L'})
    """
    suffix = Path(path).suffix.lower()
    if suffix not in _TEXT + _BOOKS:
        found = f"the file type {suffix!r}" if suffix else "a file name without an extension"
        raise InputError(f"found {found}; expected {_WHAT}", file=str(path))
    raw = load_file(path, what=_WHAT)
    decimal: str | None = None
    if suffix in _TEXT:
        if sheet is not None:
            raise InputError(f"a text file has no sheets; got sheet {sheet!r} (leave the sheet "
                             "out)", file=raw.given)
        grid, source, decimal = _text_grid(raw)
    else:
        grid, source = _book_grid(raw, sheet)
    found = _find_header(grid)
    if found is None:
        raise _no_header(grid)
    header_row, columns = found
    reader = _TableReader(grid, header_row, columns, analyte=analyte, decimal=decimal)
    reader.read()
    units = {}
    if "concentration" in columns and columns["concentration"][2]:
        units["concentration"] = str(columns["concentration"][2])
    return SampleSheet(replace(source, layout="long"), tuple(reader.readings), units,
                       tuple(reader.notes))
