"""Fixtures for the importer tests: tiny CSV and XLSX files written into tmp_path."""

from __future__ import annotations

from collections.abc import Callable, Sequence
from pathlib import Path

import openpyxl
import pytest

DATA = Path(__file__).parent.parent / "data" / "io"


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
    """write_xlsx({sheet: rows}, name="run.xlsx", hidden=(), origin="A1") -> path.

    ``origin`` places every sheet's first row and column, e.g. "C5" starts the
    rows at row 5, column C, to check source cells against an offset table.
    """

    def write(
        sheets: dict[str, Sequence[Sequence[object]]],
        name: str = "run.xlsx",
        hidden: Sequence[str] = (),
        origin: str = "A1",
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
        path = tmp_path / name
        book.save(path)
        return path

    return write
