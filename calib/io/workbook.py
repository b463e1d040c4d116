"""Reading a run from a workbook (``.xlsx``, ``.xlsm``, ``.xls``, ``.ods``) with python-calamine.

calamine reads the cell values a spreadsheet program saved (formulas are
never evaluated, macros never run) and is fast on large exports.  It runs in
a child process with a time and a memory limit (:mod:`calib.io.sandbox`)
while this process checks the archive (:mod:`calib.io.limits`).  Where it
gives less than calib needs (error values, hidden rows; see
:mod:`calib.io.detail`) the reader asks openpyxl or the ODS XML, but only
for workbooks whose archive scan found such features.

Without a sheet named, the reader takes the first visible sheet holding a
standards table.  When several visible sheets hold tables of different
analytes (one sheet per analyte), it reads them all.  When they hold the
same analytes (one sheet per run or day), it reads the first and says so in
the run's warnings.
"""

from __future__ import annotations

import os
import re
from collections.abc import Callable, Iterator, Sequence
from contextlib import contextmanager
from pathlib import Path

from calib.errors import InputError
from calib.io import limits
from calib.io.assemble import assemble
from calib.io.cells import Cell
from calib.io.detail import FormulaInspector, SheetDetail, ods_detail, xlsx_detail
from calib.io.files import RawFile, load_file
from calib.io.importmap import ImportMap
from calib.io.layout import find_first_header
from calib.io.limits import ArchiveFacts, check_sheet_size, check_xls, inspect_archive
from calib.io.sandbox import BookData, SheetData, failure_error, limits_for, parse_workbook
from calib.io.table import HEADER_SEARCH_ROWS, Grid
from calib.options import SampleType
from calib.run import Run, SourceInfo

__all__ = ["WorkbookReader", "checked_sheet", "sheet_named"]

_WHAT = {
    ".xlsx": "an .xlsx workbook", ".xlsm": "an .xlsm workbook", ".xls": "an .xls workbook",
    ".ods": "an .ods spreadsheet",
}
# Sheet names that say "another run of the same thing", never an analyte.
_RUN_SHEET = re.compile(
    r"(run|day|tag|jour|d[ií]a|batch|charge|seq(uence)?|sheet|tabelle|blatt|feuil(le)?|hoja|"
    r"page|tab)\s*[-_#]?\s*\d+",
    re.IGNORECASE,
)


def _what(raw: RawFile) -> str:
    return _WHAT.get(raw.path.suffix.lower(), "a workbook")


@contextmanager
def _reader_errors(raw: RawFile, sheet: str | None = None) -> Iterator[None]:
    """Turn whatever a cell-detail reader raises into an InputError (never a traceback)."""
    what = _what(raw)
    try:
        yield
    except InputError:
        raise
    except (KeyboardInterrupt, SystemExit):
        raise
    except BaseException as exc:  # noqa: BLE001 - a panic inside calamine is a BaseException
        detail = str(exc).strip() or type(exc).__name__
        raise InputError(
            f"cannot be read as a workbook ({detail}); expected {what} saved by a "
            f"spreadsheet program",
            file=raw.given,
            sheet=sheet,
        ) from None


def _quoted(names: Sequence[str]) -> str:
    return ", ".join(repr(name) for name in names)


class _Book:
    """An open workbook whose sheets are parsed once, however often they are read."""

    def __init__(self, raw: RawFile, facts: ArchiveFacts | None, data: BookData) -> None:
        self.raw = raw
        self.facts = facts
        self.suffix = raw.path.suffix.lower()
        self.names: list[str] = data.names
        self._data = data
        self._handed: set[str] = set()
        self._ods: dict[str, SheetDetail] | None = None
        self._details: dict[str, SheetDetail] = {}

    def _sheet(self, name: str) -> SheetData:
        return checked_sheet(self.raw, self._data, name, what=_what(self.raw))

    def _rows(self, name: str, limit: int | None) -> list[list[Cell]]:
        """The sheet's rows; the first full read gets the child's lists, later reads copies."""
        rows = self._sheet(name).rows or []
        if limit is None and name not in self._handed:
            self._handed.add(name)
            return rows  # type: ignore[return-value]
        return [list(row) for row in rows[:limit]]  # type: ignore[misc]

    def _detail(self, name: str) -> SheetDetail | None:
        facts = self.facts
        if facts is None or not (facts.hidden or facts.errors or facts.merged):
            return None
        if self.suffix == ".ods":
            if self._ods is None:
                self._ods = ods_detail(self.raw)
            return self._ods.get(name)
        if facts.hidden or facts.errors:
            return xlsx_detail(self.raw, name, hidden=facts.hidden, errors=facts.errors)
        return None

    def grid(self, name: str, *, limit: int | None = None) -> Grid:
        """The first ``limit`` rows of a sheet (all by default) as a Grid."""
        rows = self._rows(name, limit)
        merges = self._sheet(name).merges
        if name not in self._details:
            with _reader_errors(self.raw, name):
                detail = self._detail(name) or SheetDetail()
            for (first_row, first_column), (last_row, last_column) in merges:
                detail.merges.append((first_row, first_column, last_row, last_column))
            self._details[name] = detail
        detail = self._details[name]
        if detail.errors or detail.merges:
            detail.apply(rows)  # type: ignore[arg-type]
        explain: Callable[[int, int], str | None] | None = None
        if self.suffix in (".xlsx", ".xlsm"):
            explain = FormulaInspector(self.raw, name)
        elif self.suffix == ".xls":
            explain = _xls_empty
        return Grid(
            rows,
            file=self.raw.given,
            label=name,
            sheet=name,
            hidden_rows=frozenset(detail.hidden_rows),
            hidden_columns=frozenset(detail.hidden_columns),
            explain_empty=explain,
        )

    def visible(self) -> list[str]:
        """Names of the visible worksheets (no chart sheets), in workbook order."""
        return list(self._data.worksheets)


def checked_sheet(raw: RawFile, book: BookData, name: str, *, what: str) -> SheetData:
    """A sheet the workbook child read, once it is known to be readable and within the limits.

    Raises
    ------
    InputError
        When the child could not read the sheet, or it reaches past the size limits.
    """
    sheet = book.sheets[name]
    if sheet.failure is not None:
        raise failure_error(raw, what, sheet.failure, memory=limits_for(len(raw.data)).memory,
                            sheet=name)
    if sheet.end is not None:
        check_sheet_size(sheet.end[0] + 1, sheet.end[1] + 1, file=raw.given, sheet=name)
    return sheet


def _xls_empty(row: int, column: int) -> str:
    # calamine reads an .xls error value (#DIV/0!) as an empty cell; say so rather than guess.
    return ("an empty cell (in an .xls workbook a spreadsheet error value such as #DIV/0! "
            "also reads as empty)")


def _named(book: _Book, sheet: str | int) -> str:
    return sheet_named(book.names, sheet, file=book.raw.given, what=_what(book.raw))


def sheet_named(names: Sequence[str], sheet: str | int, *, file: str, what: str) -> str:
    """The sheet a caller names: by 0-based index, by name, or by name ignoring case.

    Raises
    ------
    InputError
        When no sheet (or more than one, ignoring case) answers to ``sheet``.
    """
    if not names:
        raise InputError(f"the workbook has no sheets; expected {what}", file=file)
    if isinstance(sheet, int):
        if sheet >= len(names):
            raise InputError(
                f"found no sheet at index {sheet} (the workbook has {len(names)}: "
                f"{_quoted(names)}, counted from 0); expected an index from 0 to {len(names) - 1}",
                file=file,
            )
        return names[sheet]
    if sheet in names:
        return sheet
    folded = [n for n in names if n.casefold() == sheet.strip().casefold()]
    if len(folded) != 1:
        raise InputError(
            f"found no sheet named {sheet!r}; expected one of {_quoted(names)}", file=file
        )
    return folded[0]


def _candidates(book: _Book, imap: ImportMap | None) -> list[str]:
    """Visible sheets whose first rows hold a header row."""
    names, file = book.names, book.raw.given
    if not names:
        raise InputError(f"the workbook has no sheets; expected {_what(book.raw)}", file=file)
    visible = book.visible()
    found = []
    for name in visible:
        grid = book.grid(name, limit=HEADER_SEARCH_ROWS)
        if find_first_header(grid, imap=imap) is not None:
            found.append(name)
    if found:
        return found
    if len(visible) == 1:
        # One candidate: the table builder will say what it found there.
        return visible
    raise InputError(
        f"no visible sheet holds a header row naming both a concentration and a response "
        f"column in its first {HEADER_SEARCH_ROWS} rows; sheets: {_quoted(names)}; expected "
        f"such a table, or a sheet chosen by name",
        file=file,
    )


def _standard_analytes(run: Run) -> set[str]:
    standard = SampleType.STANDARD
    return {analyte for analyte, kind in zip(run.column("analyte"), run.column("sample_type"))
            if kind is standard}


class WorkbookReader:
    """Reader for workbooks: ``.xlsx``, ``.xlsm``, ``.xls`` and ``.ods``."""

    suffixes: tuple[str, ...] = (".xlsx", ".xlsm", ".xls", ".ods")

    def read(
        self,
        path: str | os.PathLike[str],
        *,
        sheet: str | int | None = None,
        analyte: str | None = None,
        map: ImportMap | None = None,
    ) -> Run:
        """Read the run in one sheet of a workbook, or in its sheets of one analyte each.

        Parameters
        ----------
        path : str or path-like
            The workbook.
        sheet : str or int, optional
            Sheet name, or 0-based index in workbook order.  By default the
            first visible sheet holding a standards table, or every such sheet
            when each holds other analytes.
        analyte : str, optional
            Analyte name for a table without an analyte column.
        map : ImportMap, optional
            How this kind of export is laid out.

        Returns
        -------
        Run

        Raises
        ------
        InputError
            When the workbook or the sheet cannot be read or used.
        TypeError
            When ``sheet`` is neither a name nor an index.
        ValueError
            When ``sheet`` is a negative index.
        """
        if isinstance(sheet, bool) or not isinstance(sheet, (str, int, type(None))):
            raise TypeError(f"sheet must be a sheet name or a 0-based index; got {sheet!r}")
        if isinstance(sheet, int) and sheet < 0:
            raise ValueError(f"sheet index must be >= 0; got {sheet}")
        if sheet is None and map is not None:
            sheet = map.sheet
        raw = load_file(Path(path), what=_what_for(path))

        def checks() -> ArchiveFacts | None:
            facts = inspect_archive(raw, what=_what(raw))
            if facts is None:
                check_xls(raw, what=_what(raw))
            return facts

        data, facts = parse_workbook(raw, what=_what(raw), max_rows=limits.MAX_ROWS,
                                     max_cells=limits.MAX_CELLS, checks=checks, sheet=sheet)
        warnings = []
        if facts is not None and facts.macros:
            warnings.append("the workbook carries macros; calib read the saved cell values and "
                            "ran no macro")
        book = _Book(raw, facts, data)
        base = SourceInfo(file=raw.name, sha256=raw.sha256)
        if sheet is not None:
            name = _named(book, sheet)
            return self._one(book, name, base, analyte, map, warnings)
        names = _candidates(book, map)
        if len(names) == 1:
            return self._one(book, names[0], base, analyte, map, warnings)
        return self._several(book, names, base, analyte, map, warnings)

    @staticmethod
    def _one(book: _Book, name: str, base: SourceInfo, analyte: str | None,
             imap: ImportMap | None, warnings: list[str]) -> Run:
        source = SourceInfo(base.file, base.sha256, sheet=name, sheets=(name,))
        return assemble([book.grid(name)], source=source, analyte=analyte, imap=imap,
                        warnings=warnings)

    def _several(self, book: _Book, names: list[str], base: SourceInfo, analyte: str | None,
                 imap: ImportMap | None, warnings: list[str]) -> Run:
        first = names[0]
        if analyte is not None or any(_RUN_SHEET.fullmatch(n.strip()) for n in names):
            return self._others_left(book, first, names[1:], base, analyte, imap, warnings)
        runs = {}
        for name in names:
            source = SourceInfo(base.file, base.sha256, sheet=name, sheets=(name,))
            try:
                runs[name] = assemble([book.grid(name)], source=source, imap=imap,
                                      per_sheet=True)
            except InputError:
                if name == first:
                    raise
                return self._others_left(book, first, names[1:], base, analyte, imap, warnings)
        seen: set[str] = set()
        for run in runs.values():
            own = _standard_analytes(run)
            if own & seen:
                return self._others_left(book, first, names[1:], base, analyte, imap, warnings)
            seen |= own
        source = SourceInfo(base.file, base.sha256, sheet=None, sheets=tuple(names))
        return assemble([book.grid(n) for n in names], source=source, imap=imap, per_sheet=True,
                        warnings=warnings)

    def _others_left(self, book: _Book, first: str, others: list[str], base: SourceInfo,
                     analyte: str | None, imap: ImportMap | None, warnings: list[str]) -> Run:
        note = (f"sheets {_quoted(others)} also hold standards tables; only sheet {first!r} was "
                f"read (choose another with --sheet)")
        return self._one(book, first, base, analyte, imap, [*warnings, note])


def _what_for(path: str | os.PathLike[str]) -> str:
    return _WHAT.get(Path(path).suffix.lower(), "a workbook")
