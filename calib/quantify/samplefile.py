"""The samples file's table: its header row (detected, or named by an import map) and its grid.

:func:`find_header` finds the header row of a samples table as the run
importer finds a run's (headings compared after :func:`calib.io.columns.squash`),
with the samples-only columns beside: dilution factor, sample weight and
final volume.  :func:`text_grid` and :func:`book_grid` give the file's cells;
workbooks are parsed in the run importer's child process, with its time and
memory limits (:mod:`calib.io.sandbox`), text files with its column limit.
"""

from __future__ import annotations

import os
import tomllib
from collections.abc import Mapping
from dataclasses import dataclass
from pathlib import Path
from typing import Any

from calib.errors import InputError
from calib.io import limits
from calib.io.cells import Cell, to_text
from calib.io.columns import column_letter, match_heading, split_unit, squash
from calib.io.csv_text import decode_text, delimiters_for, split_rows
from calib.io.files import RawFile
from calib.io.importmap import ImportMap
from calib.io.limits import check_text_rows, check_xls, inspect_archive
from calib.io.sandbox import parse_workbook
from calib.io.table import HEADER_SEARCH_ROWS, Grid
from calib.io.workbook import checked_sheet, sheet_named
from calib.run import SourceInfo

__all__ = ["DILUTION_HEADINGS", "SAMPLE_MAP_COLUMNS", "VOLUME_HEADINGS", "WEIGHT_HEADINGS",
           "SamplesMap", "book_grid", "find_header", "load_samples_map", "no_header",
           "text_grid"]

DILUTION_HEADINGS: tuple[str, ...] = (
    "dilution", "dilution factor", "dil factor", "dil", "df", "fold dilution", "dilution fold",
    "verdünnung", "verdünnungsfaktor", "vf", "facteur de dilution", "dilution (facteur)",
    "dilución", "factor de dilución",
)
"""Headings of the dilution factor column (compared after :func:`calib.io.columns.squash`)."""

WEIGHT_HEADINGS: tuple[str, ...] = (
    "sample weight", "weight", "sample mass", "mass", "test portion", "portion", "weighed",
    "amount weighed", "einwaage", "masse", "prise d'essai", "peso", "peso muestra",
)
"""Headings of the sample weight column (its unit in the heading: ``Sample weight (g)``)."""

VOLUME_HEADINGS: tuple[str, ...] = (
    "final volume", "volume", "extract volume", "made up to", "made-up volume",
    "digest volume", "endvolumen", "volumen", "volume final", "volumen final",
)
"""Headings of the final volume column (its unit in the heading: ``Final volume (mL)``)."""

SAMPLE_MAP_COLUMNS: tuple[str, ...] = ("dilution_factor", "sample_weight", "final_volume")
"""Columns a samples file's import map may name beside those of a run file's map."""

_DILUTION = frozenset(squash(h) for h in DILUTION_HEADINGS)
_WEIGHT = frozenset(squash(h) for h in WEIGHT_HEADINGS)
_VOLUME = frozenset(squash(h) for h in VOLUME_HEADINGS)
_COLUMNS = ("analyte", "sample_type", "concentration", "response", "is_response", "replicate",
            "include", "exclusion_reason", "sample_id", "injection_order", "level",
            "dilution_factor", "sample_weight", "final_volume")
_BESIDE = ("sample_id", "analyte", "sample_type", "concentration", "dilution_factor")
_WHAT = "a samples table (.xlsx, .xlsm, .xls, .ods, .csv, .tsv or .txt)"


@dataclass(frozen=True)
class SamplesMap:
    """An import map for a samples file: a run file's map plus the samples-only columns.

    Attributes
    ----------
    base : ImportMap
        The map's run-file keys (sheet, header_row, analyte, decimal, delimiter,
        encoding, units, sample_types, and the columns a run file has).
    columns : dict of str to str
        Every column the map names, ``dilution_factor``, ``sample_weight`` and
        ``final_volume`` included: canonical name → heading as written.
    """

    base: ImportMap
    columns: Mapping[str, str]

    @property
    def header_row(self) -> int | None:
        """0-based header row, or None to search for it."""
        return self.base.header_row


def load_samples_map(path: str | os.PathLike[str]) -> SamplesMap:
    """Read the import map of a samples file (TOML; see the README, "Import maps").

    The format is a run file's import map; its ``[columns]`` table may also name
    ``dilution_factor``, ``sample_weight`` and ``final_volume``.

    Raises
    ------
    InputError
        When the file cannot be read, is not TOML, or holds an unknown key or value.

    Examples
    --------
    >>> import tempfile, pathlib
    >>> with tempfile.TemporaryDirectory() as folder:
    ...     path = pathlib.Path(folder, "lims.toml")
    ...     lines = ["[columns]", 'response = "Peak area"', 'dilution_factor = "Vf"']
    ...     _ = path.write_text(chr(10).join(lines), encoding="utf-8")
    ...     smap = load_samples_map(path)
    >>> dict(smap.columns)
    {'response': 'Peak area', 'dilution_factor': 'Vf'}
    """
    from calib.io.importmap import load_map

    path = Path(path)
    try:
        text = path.read_bytes().decode("utf-8-sig")
        data: dict[str, Any] = tomllib.loads(text)
    except (OSError, UnicodeDecodeError, tomllib.TOMLDecodeError):
        load_map(path)  # says what is wrong, in the run-file map's words
        raise  # pragma: no cover - load_map raised already
    columns = data.get("columns")
    extra: dict[str, str] = {}
    if isinstance(columns, dict):
        for key in SAMPLE_MAP_COLUMNS:
            if key in columns:
                value = columns.pop(key)
                if not isinstance(value, str) or not value.strip():
                    raise InputError(f"columns.{key}: found {value!r}; expected the heading as "
                                     f"written in the samples file, in quotes", file=path.name)
                extra[key] = value
    try:
        base = ImportMap.from_dict(data, file=path.name)
    except InputError as exc:
        if exc.message.startswith("unknown key 'columns."):
            # A samples file's map takes three columns more than a run file's.
            raise InputError(f"{exc.message}, {', '.join(SAMPLE_MAP_COLUMNS)}",
                             file=exc.file) from None
        raise
    return SamplesMap(base, {**dict(base.columns), **extra})


def _heading(cell: Cell) -> tuple[str | None, str | None]:
    text = to_text(cell) if isinstance(cell, str) else None
    if text is None:
        return None, None
    name, unit = split_unit(text)
    if squash(name) in _DILUTION or squash(text) in _DILUTION:
        return "dilution_factor", None
    if squash(name) in _WEIGHT:
        return "sample_weight", unit
    if squash(name) in _VOLUME:
        return "final_volume", unit
    found, unit = match_heading(text)
    return (found, unit) if found in _COLUMNS else (None, None)


def _mapped(grid: Grid, index: int, wanted: Mapping[str, str]
            ) -> dict[int, tuple[str, str | None]] | None:
    """Columns an import map names in this row (index → name, unit); None if one is missing."""
    found: dict[int, tuple[str, str | None]] = {}
    for name, heading in wanted.items():
        key = squash(heading)
        for col, cell in enumerate(grid.rows[index]):
            text = to_text(cell) if isinstance(cell, str) else None
            if text and key in (squash(text), squash(split_unit(text)[0])):
                found[col] = (name, split_unit(text)[1])
                break
        else:
            return None
    return found


def _header(grid: Grid, index: int, wanted: Mapping[str, str] | None = None
            ) -> dict[str, tuple[int, str, str | None]] | None:
    """Columns of a header row: name → (index, heading, unit); None if it is no header."""
    columns: dict[str, tuple[int, str, str | None]] = {}
    mapped = _mapped(grid, index, wanted) if wanted else {}
    if mapped is None:
        return None
    for col, cell in enumerate(grid.rows[index]):
        name, unit = mapped.get(col) or _heading(cell)
        if wanted and col not in mapped and name in wanted:
            continue  # the map puts this column elsewhere
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


def find_header(grid: Grid, imap: SamplesMap | None = None
                 ) -> tuple[int, dict[str, tuple[int, str, str | None]]] | None:
    wanted = imap.columns if imap is not None else None
    if imap is not None and imap.header_row is not None:
        if imap.header_row >= len(grid.rows):
            return None
        rows: range = range(imap.header_row, imap.header_row + 1)
    else:
        rows = range(min(len(grid.rows), HEADER_SEARCH_ROWS))
    for index in rows:
        columns = _header(grid, index, wanted)
        if columns is not None:
            return index, columns
    return None


def no_header(grid: Grid, imap: SamplesMap | None = None) -> InputError:
    """The refusal of a file without a samples table (or without the map's headings)."""
    if imap is not None and imap.columns:
        return grid.error(
            f"no header row names every heading of the import map "
            f"({', '.join(repr(h) for h in imap.columns.values())}); expected them as "
            f"written in the file")
    return grid.error(
        f"no samples table found in the first {HEADER_SEARCH_ROWS} rows: expected a header row "
        "naming the response (Response, Area, Height...) and beside it the sample id, analyte, "
        "sample type, nominal concentration or dilution factor")


def text_grid(raw: RawFile, imap: SamplesMap | None) -> tuple[Grid, SourceInfo, str | None]:
    """The text file's cells, split at the first delimiter under which a samples header shows.

    The delimiters are tried in the run reader's order
    (:func:`calib.io.csv_text.delimiters_for`).
    """
    base = imap.base if imap is not None else None
    text, encoding = decode_text(raw, encoding=base.encoding if base else None)
    check_text_rows(text.count("\n"), file=raw.given)
    head = HEADER_SEARCH_ROWS if imap is None or imap.header_row is None else max(
        HEADER_SEARCH_ROWS, imap.header_row + 1)
    first: Grid | None = None
    for delimiter in delimiters_for(raw, text, given=base.delimiter if base else None):
        grid = Grid(split_rows(text, delimiter, raw=raw, limit=head), file=raw.given,
                    label=raw.name)
        first = first or grid
        if find_header(grid, imap) is not None:
            grid = Grid(split_rows(text, delimiter, raw=raw, limit=None), file=raw.given,
                        label=raw.name)
            source = SourceInfo(file=raw.name, sha256=raw.sha256, encoding=encoding,
                                delimiter=delimiter)
            decimal = base.decimal if base is not None and base.decimal else (
                "," if delimiter == ";" else None)
            return grid, source, decimal
    raise no_header(first, imap)  # type: ignore[arg-type]


def book_grid(raw: RawFile, sheet: str | int | None,
               imap: SamplesMap | None) -> tuple[Grid, SourceInfo]:
    what = f"a workbook ({raw.path.suffix.lower()})"

    def checks() -> None:
        if inspect_archive(raw, what=what) is None:
            check_xls(raw, what=what)

    # The run importer's reader: a child process with time and memory limits.
    book, _ = parse_workbook(raw, what=what, max_rows=limits.MAX_ROWS,
                             max_cells=limits.MAX_CELLS, checks=checks, sheet=sheet)
    # The run reader's sheet choice: a sheet named by index or name, else the visible ones.
    candidates = ([sheet_named(book.names, sheet, file=raw.given, what=what)]
                  if sheet is not None else book.worksheets)
    for name in candidates:
        data = checked_sheet(raw, book, name, what=what)
        grid = Grid(data.rows or [], file=raw.given, label=name, sheet=name)
        if find_header(grid, imap) is not None or sheet is not None:
            return grid, SourceInfo(file=raw.name, sha256=raw.sha256, sheet=name,
                                    sheets=(name,))
    raise InputError(f"no sheet holds a samples table: expected a header row naming the "
                     f"response and the sample id, analyte, sample type, nominal concentration "
                     f"or dilution factor (sheets: {', '.join(map(repr, book.names))})",
                     file=raw.given)


