"""Fixtures for the importer tests: tiny CSV, XLSX, ODS and XLS files written into tmp_path."""

from __future__ import annotations

from collections.abc import Callable, Sequence
from pathlib import Path

import openpyxl
import pytest

from calib.errors import InputError
from calib.io import read_run
from sample_runs.make_import_examples import write_ods, write_xls

DATA = Path(__file__).parent.parent / "data" / "io"

LEVELS = (0.5, 1.0, 2.0, 5.0)
"""Four concentration levels: enough for a curve (calib asks for 3 or more)."""


def message(path, **kwargs) -> str:
    """The InputError message read_run gives for ``path``."""
    with pytest.raises(InputError) as err:
        read_run(path, **kwargs)
    return str(err.value)


def curve_rows(levels: Sequence[float] = LEVELS, slope: float = 100.0) -> list[list[object]]:
    """``[conc, response]`` rows of a clean straight line."""
    return [[c, slope * c] for c in levels]


@pytest.fixture
def data_dir() -> Path:
    """Small fixture files kept in tests/data/io."""
    return DATA


@pytest.fixture
def write_csv(tmp_path: Path) -> Callable[..., Path]:
    """write_csv(text, name="run.csv", encoding="utf-8") -> path of the written file."""

    def write(text: str, name: str = "run.csv", encoding: str = "utf-8") -> Path:
        path = tmp_path / name
        path.write_bytes(text.encode(encoding))
        return path

    return write


@pytest.fixture
def write_xlsx(tmp_path: Path) -> Callable[..., Path]:
    """write_xlsx({sheet: rows}, name="run.xlsx", hidden=(), origin="A1", ...) -> path.

    ``origin`` places every sheet's first row and column, e.g. "C5" starts the
    rows at row 5, column C, to check source cells against an offset table.
    ``hidden_rows`` (1-based) and ``merges`` (ranges) apply to every sheet.
    """

    def write(
        sheets: dict[str, Sequence[Sequence[object]]],
        name: str = "run.xlsx",
        hidden: Sequence[str] = (),
        origin: str = "A1",
        hidden_rows: Sequence[int] = (),
        merges: Sequence[str] = (),
    ) -> Path:
        book = openpyxl.Workbook()
        book.remove(book.active)
        start = openpyxl.utils.cell.coordinate_to_tuple(origin)
        for title, rows in sheets.items():
            sheet = book.create_sheet(title)
            for r, row in enumerate(rows):
                for c, value in enumerate(row):
                    if value is not None:
                        sheet.cell(row=start[0] + r, column=start[1] + c, value=value)
            if title in hidden:
                sheet.sheet_state = "hidden"
            for number in hidden_rows:
                sheet.row_dimensions[number].hidden = True
            for ref in merges:
                sheet.merge_cells(ref)
        path = tmp_path / name
        book.save(path)
        return path

    return write


@pytest.fixture
def write_ods_file(tmp_path: Path) -> Callable[..., Path]:
    """write_ods_file({sheet: rows}, name="run.ods", **options) -> path (hand-written ODS)."""

    def write(sheets, name: str = "run.ods", **options) -> Path:
        return write_ods(tmp_path / name, sheets, **options)

    return write


@pytest.fixture
def write_xls_file(tmp_path: Path) -> Callable[..., Path]:
    """write_xls_file({sheet: rows}, name="run.xls", **options) -> path (hand-written BIFF8)."""

    def write(sheets, name: str = "run.xls", **options) -> Path:
        return write_xls(tmp_path / name, sheets, **options)

    return write
