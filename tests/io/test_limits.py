"""Untrusted files: decompression and row limits, XML entity protection, no formula evaluation."""

from __future__ import annotations

import io
import struct
import zipfile
from pathlib import Path

import openpyxl
import openpyxl.xml

from calib.io import limits, read_run
from tests.io.conftest import curve_rows, message


def test_openpyxl_parses_through_defusedxml():
    # calib depends on defusedxml so that openpyxl refuses entity-expansion attacks.
    assert openpyxl.xml.DEFUSEDXML is True


def test_archive_that_expands_past_the_limit(write_xlsx, monkeypatch):
    path = write_xlsx({"Run": [["Conc", "Area"], *curve_rows()]})
    monkeypatch.setattr(limits, "MAX_UNZIPPED_BYTES", 2_000)
    assert message(path) == (
        f"{path}: the workbook expands to more than 2,000 bytes when unzipped; calib refuses "
        f"larger archives (a damaged or malicious file?); expected an .xlsx workbook of "
        f"ordinary size"
    )


def test_bytes_are_counted_as_they_inflate(write_xlsx, monkeypatch, tmp_path):
    # A highly compressible member (5 MB of spaces in a few kB) is counted as it inflates,
    # not by the sizes the archive declares.
    path = write_xlsx({"Run": [["Conc", "Area"], *curve_rows()]})
    bomb = tmp_path / "bomb.xlsx"
    out = io.BytesIO()
    with zipfile.ZipFile(path) as source, zipfile.ZipFile(out, "w", zipfile.ZIP_DEFLATED) as z:
        for info in source.infolist():
            z.writestr(info, source.read(info))
        z.writestr("xl/padding.xml", b"<a/>" + b" " * 5_000_000)
    bomb.write_bytes(out.getvalue())
    monkeypatch.setattr(limits, "MAX_UNZIPPED_BYTES", 1_000_000)
    assert "expands to more than 1,000,000 bytes" in message(bomb)


def test_sheet_with_too_many_rows(write_xlsx, monkeypatch):
    path = write_xlsx({"Run": [["Conc", "Area"], *curve_rows()]})
    monkeypatch.setattr(limits, "MAX_ROWS", 3)
    assert message(path) == (
        f"{path}: a sheet of the workbook has 5 rows; calib reads at most 3 rows per sheet "
        f"(split the export)"
    )


def test_sheet_whose_used_range_is_too_large(write_xlsx, monkeypatch):
    rows = [["Conc", "Area"], *curve_rows()]
    path = write_xlsx({"Run": rows + [[None] * 2000 + ["stray"]]})
    monkeypatch.setattr(limits, "MAX_CELLS", 5_000)
    assert message(path) == (
        f"{path}: a sheet of the workbook reaches row 6 and column 2,001 (cell BXY6); calib reads "
        f"at most 5,000 cells per sheet (delete stray cells far from the table, or split the "
        f"export)"
    )


def test_one_stray_cell_in_the_last_row_and_column(tmp_path):
    # The reader would build a dense grid of 17 billion cells and the process would die
    # for want of memory; the archive scan refuses it first, with the default limits.
    book = openpyxl.Workbook()
    sheet = book.active
    for row in [["Conc", "Area"], *curve_rows()]:
        sheet.append(row)
    sheet["XFD1048576"] = "x"
    path = tmp_path / "stray.xlsx"
    book.save(path)
    assert message(path) == (
        f"{path}: a sheet of the workbook reaches row 1,048,576 and column 16,384 (cell "
        f"XFD1048576); calib reads at most 40,000,000 cells per sheet (delete stray cells far "
        f"from the table, or split the export)"
    )


def test_xls_cell_record_past_the_last_column(write_xls_file):
    path = write_xls_file({"Run": [["Conc", "Area"], *curve_rows()]})
    data = bytearray(path.read_bytes())
    number = data.find(struct.pack("<HH", 0x0203, 14))  # the first NUMBER record
    struct.pack_into("<H", data, number + 6, 20_000)  # its column
    path.write_bytes(bytes(data))
    assert message(path) == (
        f"{path}: a cell record names column 20,001, past the 256 columns an .xls sheet can "
        f"hold (the file is damaged); expected an .xls workbook saved by a spreadsheet program"
    )


def test_text_file_with_too_many_lines(write_csv, monkeypatch):
    path = write_csv("Conc,Area\n1,10\n2,20\n3,30\n")
    monkeypatch.setattr(limits, "MAX_ROWS", 2)
    assert message(path) == (
        f"{path}: the file has 4 lines; calib reads at most 2 rows (split the export)"
    )


def test_damaged_archive_member(write_xlsx):
    path = write_xlsx({"Run": [["Conc", "Area"], *curve_rows()]})
    data = bytearray(path.read_bytes())
    start = data.find(b"xl/worksheets/sheet1.xml") + 40
    data[start : start + 40] = b"\x00" * 40  # scramble the compressed sheet
    path.write_bytes(bytes(data))
    text = message(path)
    assert text.startswith(f"{path}: cannot be read as a workbook (")
    assert text.endswith("expected an .xlsx workbook saved by a spreadsheet program")


def test_formulas_are_never_evaluated(write_xlsx):
    # A formula with a saved value is read as that value; one without is refused (see
    # test_workbook.test_formula_without_saved_result), never computed by calib.
    rows = [["Conc", "Area"], *curve_rows(), [10, "=1+1"]]
    text = message(write_xlsx({"Run": rows}))
    assert "found a formula with no saved result (=1+1;" in text
    assert limits.MAX_UNZIPPED_BYTES == 500_000_000 and limits.MAX_ROWS == 2_000_000


def test_limits_do_not_stop_ordinary_files(write_xlsx):
    assert len(read_run(write_xlsx({"Run": [["Conc", "Area"], *curve_rows()]})).points) == 4


def test_xls_with_a_reversed_dimension_record(write_xls_file):
    path = write_xls_file({"Run": [["Conc", "Area"], *curve_rows()]})
    data = bytearray(path.read_bytes())
    dimensions = data.find(struct.pack("<HH", 0x0200, 14))
    struct.pack_into("<I", data, dimensions + 4, 80)  # first row after the last
    path.write_bytes(bytes(data))
    assert message(path) == (
        f"{path}: a sheet declares rows 80 to 5 and columns 0 to 2 (the file is damaged); "
        f"expected an .xls workbook saved by a spreadsheet program"
    )


def test_damaged_files_give_input_errors_only(tmp_path):
    # A small seeded fuzz: bytes of the sample exports flipped at random.  Every file must
    # be read or refused with an InputError; nothing else may escape, and nothing may abort.
    import random

    from calib.errors import InputError
    from sample_runs import make_import_examples as examples

    folder = Path(examples.__file__).parent
    sources = sorted(p for p in folder.iterdir()
                     if p.suffix in (".xlsx", ".xlsm", ".xls", ".ods"))
    rng = random.Random(20261201)
    for number in range(60):
        source = sources[number % len(sources)]
        data = bytearray(source.read_bytes())
        for _ in range(rng.randint(1, 5)):
            data[rng.randrange(len(data))] = rng.randrange(256)
        path = tmp_path / f"damaged{number}{source.suffix}"
        path.write_bytes(bytes(data))
        try:
            read_run(path)
        except InputError:
            pass
