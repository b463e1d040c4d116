"""Reading a run from an ``.xlsx`` workbook with python-calamine.

calamine reads the cell values a spreadsheet program saved (formulas are never
evaluated) and is fast on large exports.  It reports error values such as
``#DIV/0!`` as empty cells, so when a needed cell looks empty the reader asks
openpyxl what the cell really holds, to say so in the message; that costs
time only on the way to an error.
"""

from __future__ import annotations

import io
import os
import warnings
from collections.abc import Iterator, Sequence
from contextlib import contextmanager
from pathlib import Path

import python_calamine

from calib.errors import InputError
from calib.io.cells import Cell
from calib.io.files import RawFile, load_file
from calib.io.table import HEADER_SEARCH_ROWS, Grid, build_run, find_header
from calib.run import Run, SourceInfo

__all__ = ["XlsxReader"]

_WHAT = "an .xlsx workbook"


@contextmanager
def _calamine_errors(raw: RawFile, sheet: str | None = None) -> Iterator[None]:
    """Turn whatever calamine raises into an InputError (no traceback reaches the user)."""
    try:
        yield
    except InputError:
        raise
    except python_calamine.PasswordError:
        raise InputError(
            f"the workbook is password-protected; expected {_WHAT} without a password "
            f"(save an unprotected copy)",
            file=raw.given,
            sheet=sheet,
        ) from None
    except Exception as exc:  # noqa: BLE001 - calamine also raises non-CalamineError types
        detail = str(exc).strip() or type(exc).__name__
        raise InputError(
            f"cannot be read as a workbook ({detail}); expected {_WHAT} saved by a "
            f"spreadsheet program",
            file=raw.given,
            sheet=sheet,
        ) from None


def _quoted(names: Sequence[str]) -> str:
    return ", ".join(repr(name) for name in names)


class _CellInspector:
    """Says what calamine's empty cells really hold, reading the workbook with openpyxl."""

    def __init__(self, raw: RawFile, sheet: str) -> None:
        self._raw = raw
        self._sheet = sheet

    def _value(self, row: int, column: int, *, data_only: bool) -> object:
        import openpyxl  # deferred: only needed on the way to an error message

        with warnings.catch_warnings():
            # openpyxl warns about workbook features it skips; they do not matter here.
            warnings.simplefilter("ignore")
            book = openpyxl.load_workbook(
                io.BytesIO(self._raw.data), read_only=True, data_only=data_only
            )
            try:
                return book[self._sheet].cell(row=row + 1, column=column + 1).value
            finally:
                book.close()

    def __call__(self, row: int, column: int) -> str | None:
        try:
            saved = self._value(row, column, data_only=True)
            if isinstance(saved, str) and saved.startswith("#"):
                return f"the spreadsheet error value {saved}"
            if saved is None:
                formula = self._value(row, column, data_only=False)
                if isinstance(formula, str) and formula.startswith("="):
                    return (
                        f"a formula with no saved result ({formula}; calib never evaluates "
                        f"formulas: open the workbook in a spreadsheet program and save it)"
                    )
        except Exception:  # noqa: BLE001 - an explanation is a courtesy, never an error
            return None
        return None


class XlsxReader:
    """Reader for ``.xlsx`` workbooks."""

    suffixes: tuple[str, ...] = (".xlsx",)

    def read(
        self,
        path: str | os.PathLike[str],
        *,
        sheet: str | int | None = None,
        analyte: str | None = None,
    ) -> Run:
        """Read the run in one sheet of a workbook.

        Parameters
        ----------
        path : str or path-like
            The workbook.
        sheet : str or int, optional
            Sheet name, or 0-based index in workbook order.  By default the
            first visible sheet that holds a table naming both a concentration
            and a response column.
        analyte : str, optional
            Analyte name for a table without an analyte column.

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
        raw = load_file(Path(path), what=_WHAT)
        with _calamine_errors(raw):
            book = _Book(python_calamine.CalamineWorkbook.from_filelike(io.BytesIO(raw.data)), raw)
        try:
            name = _choose(book, sheet)
            source = SourceInfo(file=raw.name, sha256=raw.sha256, sheet=name, layout="long")
            return build_run(book.grid(name), source=source, analyte=analyte)
        finally:
            book.close()


class _Book:
    """An open workbook whose sheets are parsed once, however often they are read."""

    def __init__(self, book: python_calamine.CalamineWorkbook, raw: RawFile) -> None:
        self.book = book
        self.raw = raw
        self.names: list[str] = list(book.sheet_names)
        self._sheets: dict[str, python_calamine.CalamineSheet] = {}

    def close(self) -> None:
        self.book.close()

    def grid(self, name: str, *, limit: int | None = None) -> Grid:
        """The first ``limit`` rows of a sheet (all by default) as a Grid."""
        with _calamine_errors(self.raw, name):
            if name not in self._sheets:
                self._sheets[name] = self.book.get_sheet_by_name(name)
            # skip_empty_area=False keeps row 0 = spreadsheet row 1, so source cells are right.
            rows: list[list[Cell]] = self._sheets[name].to_python(  # type: ignore[assignment]
                skip_empty_area=False, nrows=limit
            )
        return Grid(
            rows,
            file=self.raw.given,
            label=name,
            sheet=name,
            explain_empty=_CellInspector(self.raw, name),
        )

    def visible(self) -> list[str]:
        """Names of the visible worksheets (no chart sheets), in workbook order."""
        return [
            meta.name
            for meta in self.book.sheets_metadata
            if meta.visible == python_calamine.SheetVisibleEnum.Visible
            and meta.typ == python_calamine.SheetTypeEnum.WorkSheet
        ]


def _choose(book: _Book, sheet: str | int | None) -> str:
    """The name of the sheet to read: the one asked for, or the first holding a table."""
    names, file = book.names, book.raw.given
    if not names:
        raise InputError(f"the workbook has no sheets; expected {_WHAT}", file=file)
    if isinstance(sheet, int):
        if sheet >= len(names):
            raise InputError(
                f"found no sheet at index {sheet} (the workbook has {len(names)}: "
                f"{_quoted(names)}, counted from 0); expected an index from 0 to {len(names) - 1}",
                file=file,
            )
        return names[sheet]
    if isinstance(sheet, str):
        if sheet in names:
            return sheet
        folded = [n for n in names if n.casefold() == sheet.strip().casefold()]
        if len(folded) != 1:
            raise InputError(
                f"found no sheet named {sheet!r}; expected one of {_quoted(names)}", file=file
            )
        return folded[0]
    visible = book.visible()
    for name in visible:
        if find_header(book.grid(name, limit=HEADER_SEARCH_ROWS)) is not None:
            return name
    if len(visible) == 1:
        # One candidate: the table builder will say what it found there.
        return visible[0]
    raise InputError(
        f"no visible sheet holds a header row naming both a concentration and a response "
        f"column in its first {HEADER_SEARCH_ROWS} rows; sheets: {_quoted(names)}; expected "
        f"such a table, or a sheet chosen by name",
        file=file,
    )
