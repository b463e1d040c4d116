"""Workbooks through calamine: .xlsx, .xlsm, .ods, .xls; sheets, cell detail, refusals."""

from __future__ import annotations

import datetime as dt
import hashlib
import math

import openpyxl
import pytest

from calib.io import read_run
from calib.options import SampleType
from sample_runs.make_import_examples import ErrorValue, write_xlsx
from tests.io.conftest import curve_rows, message

HEADER = ["Analyte", "Sample", "Conc (ng/mL)", "Area", "Rep", "Include", "Reason"]
ROWS = [
    ["KX-214", "Cal-1", 1, 1520.5, 1, "yes", None],
    ["KX-214", "Cal-2", 10, 15130.0, 1, "no", "internal standard response dropped"],
    ["KX-214", "Cal-2", 10, 15011.0, 2, "yes", None],
    ["KX-214", "Cal-3", 100, 150210.0, 1, "yes", None],
    ["KX-215", "Cal-1", 1, 801.0, 1, True, None],
    ["KX-215", "Cal-2", 10, 8120.0, 1, False, "vial empty"],
    ["KX-215", "Cal-3", 100, 80950.0, 1, True, None],
]
TABLE = [["Conc", "Area"], *curve_rows()]


def test_multi_analyte_workbook(write_xlsx):
    path = write_xlsx({"Run": [HEADER, *ROWS]})
    run = read_run(path)
    assert run.source.file == "run.xlsx"
    assert (run.source.sheet, run.source.sheets, run.source.layout) == ("Run", ("Run",), "long")
    assert run.source.sha256 == hashlib.sha256(path.read_bytes()).hexdigest()
    assert run.analytes == ("KX-214", "KX-215")
    assert run.units == {"concentration": "ng/mL"}
    assert [p.source_cell for p in run.points[:3]] == ["Run!D2", "Run!D3", "Run!D4"]
    assert [p.included for p in run.points] == [True, False, True, True, True, False, True]
    assert run.points[1].exclusion_reason == "internal standard response dropped"
    assert [p.replicate for p in run.standards("KX-214")] == [1, 1, 2, 1]
    assert run.source.tables == ("Run!A1:G8",)


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
        assert sheet[point.source_cell.split("!")[1]].value == point.response
    assert run.points[0].source_cell == "Run!F9"
    assert run.metadata == {"title": "Kestrel Bioanalytical (fictional)",
                            "run_date": "2026-11-30"}


def test_default_sheet_is_the_first_visible_one_with_a_table(write_xlsx):
    path = write_xlsx({"Notes": [["Read me"]], "Hidden": TABLE, "Run": TABLE},
                      hidden=("Hidden",))
    assert read_run(path).source.sheet == "Run"


def test_sheet_by_name_index_and_folded_name(write_xlsx):
    path = write_xlsx({"Day 1": TABLE, "Day 2": TABLE})
    assert read_run(path, sheet="Day 2").source.sheet == "Day 2"
    assert read_run(path, sheet=1).source.sheet == "Day 2"
    assert read_run(path, sheet=" day 2 ").source.sheet == "Day 2"
    assert read_run(path, sheet="Day 2").points[0].source_cell == "'Day 2'!B2"


def test_unknown_sheet_lists_the_sheets(write_xlsx):
    path = write_xlsx({"Day 1": TABLE, "Day 2": TABLE})
    assert message(path, sheet="Day 3") == (
        f"{path}: found no sheet named 'Day 3'; expected one of 'Day 1', 'Day 2'"
    )
    assert message(path, sheet=5) == (
        f"{path}: found no sheet at index 5 (the workbook has 2: 'Day 1', 'Day 2', counted "
        f"from 0); expected an index from 0 to 1"
    )


def test_wrong_sheet_arguments(write_xlsx):
    path = write_xlsx({"Run": TABLE})
    with pytest.raises(ValueError, match="sheet index must be >= 0; got -1"):
        read_run(path, sheet=-1)
    with pytest.raises(TypeError, match="sheet must be a sheet name or a 0-based index; got 1.5"):
        read_run(path, sheet=1.5)


def test_numbers_stored_as_text(write_xlsx):
    rows = [["Conc", "Area"], ["0,5", " 1.5E+03 "], ["1", "3000"], [2.0, "6 010"]]
    run = read_run(write_xlsx({"Run": rows}))
    assert [(p.concentration, p.response) for p in run.points] == [
        (0.5, 1500.0), (1.0, 3000.0), (2.0, 6010.0)
    ]


def test_error_values_become_excluded_points(tmp_path):
    rows = [["Conc", "Area"], *curve_rows(), [10, ErrorValue("#DIV/0!")], [20, "#N/A"]]
    path = write_xlsx(tmp_path / "run.xlsx", {"Run": rows})
    run = read_run(path)
    errors = run.points[-2:]
    assert [p.exclusion_reason for p in errors] == [
        "response is the spreadsheet error value #DIV/0!",
        "response is the spreadsheet error value #N/A",
    ]
    assert all(math.isnan(p.response) and not p.included for p in errors)
    assert [p.source_cell for p in errors] == ["Run!B6", "Run!B7"]


def test_error_value_in_a_concentration_is_refused(tmp_path):
    rows = [["Conc", "Area"], *curve_rows(), [ErrorValue("#REF!"), 40.0]]
    path = write_xlsx(tmp_path / "run.xlsx", {"Run": rows})
    assert message(path) == (
        f"{path}, sheet Run, row 6, column A (Conc): found the spreadsheet error value #REF!; "
        f"expected the nominal concentration of the standard (a number of 0 or more)"
    )


def test_formula_without_saved_result(write_xlsx):
    # openpyxl writes the formula but no cached value, as an unsaved generated file would.
    path = write_xlsx({"Run": [["Conc", "Area"], *curve_rows(), [10, "=B2*2"]]})
    assert message(path) == (
        f"{path}, sheet Run, row 6, column B (Area): found a formula with no saved result "
        f"(=B2*2; calib never evaluates formulas: open the workbook in a spreadsheet program and "
        f"save it); expected the response (a number; a marker such as ND or <LOD sets the point "
        f"aside)"
    )


def test_date_in_a_number_column(write_xlsx):
    path = write_xlsx({"Run": [["Conc", "Area"], [dt.date(2026, 11, 30), 10]]})
    assert message(path) == (
        f"{path}, sheet Run, row 2, column A (Conc): found the date 2026-11-30; expected the "
        f"nominal concentration of the standard (a number of 0 or more)"
    )


def test_sample_types_in_a_workbook(write_xlsx):
    rows = [["Type", "Conc", "Area"], ["blank", None, 0.1], *[["std", *r] for r in curve_rows()],
            ["unknown", None, 5]]
    run = read_run(write_xlsx({"Run": rows}))
    assert [p.sample_type for p in run.points] == [
        SampleType.BLANK, *[SampleType.STANDARD] * 4, SampleType.UNKNOWN
    ]


def test_hidden_rows_are_excluded_saying_so(write_xlsx):
    rows = [["Sample", "Conc", "Area"], *[[f"Cal {i}", *r] for i, r in enumerate(curve_rows())],
            ["Cal 9", None, None]]
    path = write_xlsx({"Run": rows}, hidden_rows=(3, 6))
    run = read_run(path)
    assert [(p.sample_id, p.included) for p in run.points] == [
        ("Cal 0", True), ("Cal 1", False), ("Cal 2", True), ("Cal 3", True)
    ]
    assert run.points[1].exclusion_reason == "the row is hidden in the workbook"
    # A hidden row that cannot be read is left out, and the run says so.
    assert run.warnings == (
        ("row 6 is hidden in the workbook and cannot be read (found an empty cell; expected the "
        "nominal concentration of the standard (a number of 0 or more)); it was left out"),
    )


def test_merged_cells_give_their_value_to_every_cell(write_xlsx):
    rows = [["Fernbrook Water Laboratory (fictional)"], ["Analyte", "Conc", "Area"],
            ["Fluoride", 0.1, 0.55], [None, 0.5, 0.44], [None, 1.0, 0.33], ["Nitrate-N", 1, 10],
            [None, 2, 20], [None, 5, 50]]
    run = read_run(write_xlsx({"Run": rows}, merges=("A1:C1", "A3:A5", "A6:A8")))
    assert [p.analyte for p in run.points] == ["Fluoride"] * 3 + ["Nitrate-N"] * 3
    assert run.metadata == {"title": "Fernbrook Water Laboratory (fictional)"}


def test_hidden_column_headings_are_not_read(write_xlsx, tmp_path):
    book = openpyxl.Workbook()
    sheet = book.active
    sheet.title = "Run"
    for row in [["Conc", "Area", "Area"], *[[c, r, -1] for c, r in curve_rows()]]:
        sheet.append(row)
    sheet.column_dimensions["C"].hidden = True
    path = tmp_path / "hidden-column.xlsx"
    book.save(path)
    assert [p.response for p in read_run(path).points] == [50.0, 100.0, 200.0, 500.0]


def test_macro_enabled_workbook_is_read_without_running_anything(tmp_path):
    path = write_xlsx(tmp_path / "run.xlsm", {"Run": TABLE}, macros=True)
    run = read_run(path)
    assert len(run.points) == 4
    assert run.warnings == (
        "the workbook carries macros; calib read the saved cell values and ran no macro",
    )


# --- OpenDocument and Excel 97-2003 -----------------------------------------------------------


def test_ods_workbook(write_ods_file):
    rows = [["Instrument: IC-2"], ["Sample", "Conc (mg/L)", "Area"],
            *[[f"Cal {i}", *r] for i, r in enumerate(curve_rows(), start=1)]]
    run = read_run(write_ods_file({"Nitrate run": rows}))
    assert run.source.sheet == "Nitrate run"
    assert run.points[0].source_cell == "'Nitrate run'!C3"
    assert run.metadata == {"instrument": "IC-2"}
    assert [p.response for p in run.points] == [50.0, 100.0, 200.0, 500.0]


def test_ods_error_hidden_row_and_merges(write_ods_file):
    # calamine reads an ODS error cell as the formula's numeric stand-in (0): the
    # ODS detail reader must turn it back into the error it is.
    rows = [["Fernbrook", None, None], ["Analyte", "Conc", "Area"], ["Sulfate", 2, 0.19],
            [None, 5, ErrorValue("#DIV/0!")], [None, 10, 0.93], [None, 25, 2.3]]
    path = write_ods_file({"Run": rows}, hidden_rows={"Run": [6]},
                          merges={"Run": ["A1:C1", "A3:A6"]})
    run = read_run(path)
    assert [p.analyte for p in run.points] == ["Sulfate"] * 4
    assert [p.exclusion_reason for p in run.points] == [
        None, "response is the spreadsheet error value #DIV/0!", None,
        "the row is hidden in the workbook",
    ]


def test_xls_workbook(write_xls_file):
    rows = [["Kestrel Bioanalytical (fictional)"], ["Sample", "Conc (ng/mL)", "Area"],
            *[[f"Cal {i}", *r] for i, r in enumerate(curve_rows(), start=1)]]
    run = read_run(write_xls_file({"Batch": rows, "Notes": [["nothing"]]}))
    assert (run.source.sheet, run.units) == ("Batch", {"concentration": "ng/mL"})
    assert [p.response for p in run.points] == [50.0, 100.0, 200.0, 500.0]
    assert run.points[-1].source_cell == "Batch!C6"


def test_xls_error_value_reads_as_empty_and_says_so(write_xls_file):
    rows = [["Conc", "Area"], *curve_rows(), [10, ErrorValue("#DIV/0!")]]
    path = write_xls_file({"Run": rows})
    assert message(path) == (
        f"{path}, sheet Run, row 6, column B (Area): found an empty cell (in an .xls workbook a "
        f"spreadsheet error value such as #DIV/0! also reads as empty); expected the response "
        f"(a number; a marker such as ND or <LOD sets the point aside)"
    )


# --- refusals ---------------------------------------------------------------------------------


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
    path = write_xlsx({"Run": TABLE})
    path.write_bytes(path.read_bytes()[:300])
    assert message(path).startswith(f"{path}: cannot be read as a workbook (")
    assert message(path).endswith("); expected an .xlsx workbook saved by a spreadsheet program")


@pytest.mark.parametrize(("name", "what"), [("run.xlsx", "an .xlsx workbook"),
                                            ("run.ods", "an .ods spreadsheet"),
                                            ("run.xls", "an .xls workbook")])
def test_empty_workbook_file(tmp_path, name, what):
    path = tmp_path / name
    path.write_bytes(b"")
    assert message(path) == f"{path}: the file is empty (0 bytes); expected {what}"
