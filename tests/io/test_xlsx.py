"""Reading long-layout .xlsx runs with calamine: sheets, source cells, refusals."""

from __future__ import annotations

import datetime as dt
import hashlib

import openpyxl
import pytest

from calib.errors import InputError
from calib.io import read_run
from calib.options import SampleType

HEADER = ["Analyte", "Sample", "Conc (ng/mL)", "Area", "Rep", "Include", "Reason"]
ROWS = [
    ["KX-214", "Cal-1", 1, 1520.5, 1, "yes", None],
    ["KX-214", "Cal-1", 1, 1498.0, 2, "yes", None],
    ["KX-214", "Cal-2", 10, 15130.0, 1, "no", "internal standard response dropped"],
    ["KX-214", "Cal-2", 10, 15011.0, 2, "yes", None],
    ["KX-215", "Cal-1", 1, 801.0, 1, True, None],
    ["KX-215", "Cal-2", 10, 8120.0, 1, False, "vial empty"],
]


def message(path, **kwargs) -> str:
    with pytest.raises(InputError) as err:
        read_run(path, **kwargs)
    return str(err.value)


def test_multi_analyte_workbook(write_xlsx):
    path = write_xlsx({"Run": [HEADER, *ROWS]})
    run = read_run(path)
    assert run.source.file == "run.xlsx"
    assert run.source.sheet == "Run"
    assert run.source.sha256 == hashlib.sha256(path.read_bytes()).hexdigest()
    assert run.analytes == ("KX-214", "KX-215")
    assert run.units == {"concentration": "ng/mL"}
    assert [p.source_cell for p in run.points[:3]] == ["Run!D2", "Run!D3", "Run!D4"]
    assert [p.included for p in run.points] == [True, True, False, True, True, False]
    assert run.points[2].exclusion_reason == "internal standard response dropped"
    assert [p.replicate for p in run.standards("KX-214")] == [1, 2, 1, 2]


def test_source_cells_match_openpyxl_for_an_offset_table(write_xlsx):
    # Independent reader: openpyxl looks up each point's source cell and finds the same
    # response; the table starts at C5 with title lines above it.
    rows = [["Kestrel Bioanalytical (fictional)"], ["Run date", dt.date(2026, 11, 30)], [],
            HEADER, *ROWS]
    path = write_xlsx({"Run": rows}, origin="C5")
    run = read_run(path)
    sheet = openpyxl.load_workbook(path)["Run"]
    for point in run.points:
        assert point.source_cell.startswith("Run!F")
        coordinate = point.source_cell.split("!")[1]
        assert sheet[coordinate].value == point.response
    first_row = openpyxl.utils.cell.coordinate_to_tuple(run.points[0].source_cell[4:])[0]
    assert first_row == 9
    concs = [sheet.cell(row=r, column=5).value for r in range(9, 9 + len(ROWS))]
    assert [p.concentration for p in run.points] == [float(c) for c in concs]
    assert run.metadata == {"title": "Kestrel Bioanalytical (fictional)", "Run date": "2026-11-30"}


def test_default_sheet_is_the_first_visible_one_with_a_table(write_xlsx):
    sheets = {
        "Notes": [["Prepared by the bench analyst"]],
        "Old": [["Conc", "Area"], [1, 999]],
        "Run": [["Conc", "Area"], [1, 10], [2, 20]],
    }
    run = read_run(write_xlsx(sheets, hidden=["Old"]))
    assert run.source.sheet == "Run"
    assert [p.source_cell for p in run.points] == ["Run!B2", "Run!B3"]


def test_sheet_by_name_index_and_folded_name(write_xlsx):
    sheets = {"Day 1": [["Conc", "Area"], [1, 10]], "Day 2": [["Conc", "Area"], [1, 11]]}
    path = write_xlsx(sheets)
    assert read_run(path).points[0].response == 10.0
    assert read_run(path, sheet="Day 2").points[0].response == 11.0
    assert read_run(path, sheet=1).points[0].source_cell == "'Day 2'!B2"
    assert read_run(path, sheet="day 2").source.sheet == "Day 2"
    hidden = write_xlsx(sheets, name="hidden.xlsx", hidden=["Day 1"])
    assert read_run(hidden, sheet="Day 1").points[0].response == 10.0


def test_unknown_sheet_lists_the_sheets(write_xlsx):
    path = write_xlsx({"Day 1": [["Conc", "Area"], [1, 10]], "Day 2": [["Conc", "Area"], [1, 11]]})
    assert message(path, sheet="Day 3") == (
        f"{path}: found no sheet named 'Day 3'; expected one of 'Day 1', 'Day 2'"
    )
    assert message(path, sheet=2) == (
        f"{path}: found no sheet at index 2 (the workbook has 2: 'Day 1', 'Day 2', counted from "
        f"0); expected an index from 0 to 1"
    )


def test_wrong_sheet_arguments(write_xlsx):
    path = write_xlsx({"Run": [["Conc", "Area"], [1, 10]]})
    with pytest.raises(ValueError, match="sheet index must be >= 0; got -1"):
        read_run(path, sheet=-1)
    with pytest.raises(TypeError, match="sheet must be a sheet name or a 0-based index; got 1.5"):
        read_run(path, sheet=1.5)


def test_numbers_stored_as_text_and_decimal_comma_text(write_xlsx):
    path = write_xlsx({"Run": [["Conc", "Area"], ["12,5", " 1.5E+03 "], ["25", 3000]]})
    run = read_run(path)
    assert [(p.concentration, p.response) for p in run.points] == [(12.5, 1500.0), (25.0, 3000.0)]


def test_error_value_is_named(write_xlsx):
    path = write_xlsx({"Run": [["Conc", "Area"], [1, 10], [2, "#DIV/0!"]]})
    assert message(path) == (
        f"{path}, sheet Run, row 3, column B (Area): found the spreadsheet error value #DIV/0!; "
        f"expected a number"
    )


def test_formula_without_saved_result(write_xlsx):
    # openpyxl writes the formula but no cached value, as an unsaved generated file would.
    path = write_xlsx({"Run": [["Conc", "Area"], [1, 10], [2, "=B2*2"]]})
    assert message(path) == (
        f"{path}, sheet Run, row 3, column B (Area): found a formula with no saved result "
        f"(=B2*2; calib never evaluates formulas: open the workbook in a spreadsheet program and "
        f"save it); expected a number"
    )


def test_date_in_a_number_column(write_xlsx):
    path = write_xlsx({"Run": [["Conc", "Area"], [dt.date(2026, 11, 30), 10]]})
    assert message(path) == (
        f"{path}, sheet Run, row 2, column A (Conc): found the date 2026-11-30; expected a number"
    )


def test_sample_types_in_a_workbook(write_xlsx):
    rows = [["Type", "Conc", "Area"], ["blank", None, 0.1], ["std", 1, 10], ["unknown", None, 5]]
    run = read_run(write_xlsx({"Run": rows}))
    assert [p.sample_type for p in run.points] == [
        SampleType.BLANK, SampleType.STANDARD, SampleType.UNKNOWN
    ]


def test_no_sheet_holds_a_table(write_xlsx):
    path = write_xlsx({"Notes": [["Level", "Peak"]], "More": [["nothing here"]]})
    assert message(path) == (
        f"{path}: no visible sheet holds a header row naming both a concentration and a response "
        f"column in its first 50 rows; sheets: 'Notes', 'More'; expected such a table, or a "
        f"sheet chosen by name"
    )


def test_one_sheet_without_a_header_says_what_it_found(write_xlsx):
    path = write_xlsx({"Run": [["Level", "Peak"], [1, 10]]})
    assert message(path) == (
        f"{path}, sheet Run: no header row naming both a concentration and a response column in "
        f"the first 50 rows; found in row 1: 'Level', 'Peak'; expected headings such as "
        f"'concentration', 'conc', 'amount' and 'response', 'area', 'height'"
    )


def test_corrupt_workbook(tmp_path):
    path = tmp_path / "run.xlsx"
    path.write_text("Conc,Area\n1,10\n")
    assert message(path) == (
        f"{path}: cannot be read as a workbook (Cannot detect file format); expected an .xlsx "
        f"workbook saved by a spreadsheet program"
    )


def test_truncated_workbook(write_xlsx):
    path = write_xlsx({"Run": [["Conc", "Area"], [1, 10]]})
    path.write_bytes(path.read_bytes()[:300])
    assert message(path).startswith(f"{path}: cannot be read as a workbook (")
    assert message(path).endswith("); expected an .xlsx workbook saved by a spreadsheet program")


def test_empty_workbook_file(tmp_path):
    path = tmp_path / "run.xlsx"
    path.write_bytes(b"")
    assert message(path) == f"{path}: the file is empty (0 bytes); expected an .xlsx workbook"
