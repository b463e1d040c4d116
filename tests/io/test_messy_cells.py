"""One test per kind of messy cell, each in a text file and in a workbook."""

from __future__ import annotations

import math

import pytest

from calib.io import read_run
from calib.options import SampleType
from tests.io.conftest import message


@pytest.fixture(params=["csv", "xlsx"])
def write(request, write_csv, write_xlsx):
    """write(rows) -> path: the same rows as a CSV file or as a one-sheet workbook."""

    def _write(rows, name="run"):
        if request.param == "csv":
            lines = [",".join(_csv_cell(v) for v in row) for row in rows]
            return write_csv("\n".join(lines) + "\n", name=f"{name}.csv")
        return write_xlsx({"Run": rows}, name=f"{name}.xlsx")

    return _write


def _csv_cell(value):
    text = "" if value is None else str(value)
    return f'"{text}"' if "," in text else text


def _place(path, cell):
    return f"{path.name}!{cell}" if path.suffix == ".csv" else f"Run!{cell}"


def _where(path, row, column):
    sheet = ", sheet Run" if path.suffix == ".xlsx" else ""
    return f"{path}{sheet}, row {row}, column {column}"


def test_numbers_stored_as_text(write):
    run = read_run(write([["Conc", "Area"], ["0.5", "101"], [" 1 ", "\u00a0203\u00a0"],
                          ["+2", "398.0"]]))
    assert [(p.concentration, p.response) for p in run.points] == [
        (0.5, 101.0), (1.0, 203.0), (2.0, 398.0)
    ]


def test_units_after_numbers_agree_with_the_heading(write):
    rows = [["Conc (ng/mL)", "Area"], ["1 ng/mL", 10], ["2.5ng/mL", 25], ["10 NG/ML", 100]]
    run = read_run(write(rows))
    assert [p.concentration for p in run.points] == [1.0, 2.5, 10.0]
    assert run.units == {"concentration": "ng/mL"}


def test_units_after_numbers_give_the_unit_a_heading_leaves_out(write):
    rows = [["Conc", "Area"], ["1 µg/L", "1 520 counts"], ["2 µg/L", "3 010 counts"],
            ["5 µg/L", "7 490 counts"]]
    run = read_run(write(rows))
    assert run.units == {"concentration": "µg/L", "response": "counts"}
    assert [p.response for p in run.points] == [1520.0, 3010.0, 7490.0]


def test_unit_that_disagrees_with_the_heading(write):
    path = write([["Conc (ng/mL)", "Area"], ["1 ng/mL", 10], ["2 µg/mL", 20], [5, 50]])
    assert message(path) == (
        f"{_where(path, 3, 'A (Conc (ng/mL))')}: found '2 µg/mL', in µg/mL; expected a value in "
        f"ng/mL as the heading says (calib does not convert units)"
    )


def test_units_that_disagree_down_a_column(write):
    path = write([["Conc", "Area"], ["1 mg/L", 10], ["2 mg/L", 20], ["5 µg/L", 50]])
    assert message(path) == (
        f"{_where(path, 4, 'A (Conc)')}: found '5 µg/L', in µg/L; expected mg/L as in row 2 "
        f"(calib does not convert units)"
    )


def test_scientific_notation(write):
    run = read_run(write([["Conc", "Area"], ["1E-3", "1.52E+04"], ["2e-3", "3.01e4"],
                          ["5.0E-03", 75100]]))
    assert [(p.concentration, p.response) for p in run.points] == [
        (0.001, 15200.0), (0.002, 30100.0), (0.005, 75100.0)
    ]


def test_decimal_commas(write):
    run = read_run(write([["Conc", "Area"], ["0,5", "10,25"], ["1,0", "20,5"], ["2,5", 51]]))
    assert [(p.concentration, p.response) for p in run.points] == [
        (0.5, 10.25), (1.0, 20.5), (2.5, 51.0)
    ]


def test_thousands_separators(write):
    run = read_run(write([["Conc", "Area"], ["0.5", "1,012.5"], ["1", "2,031,400"],
                          ["2", "4 070,25"]]))
    assert [p.response for p in run.points] == [1012.5, 2031400.0, 4070.25]


@pytest.mark.parametrize(
    ("marker", "reason"),
    [
        ("<LOD", "response below the quantifiable range ('<LOD' in the file)"),
        ("ND", "response not detected ('ND' in the file)"),
        ("n.d.", "response not detected ('n.d.' in the file)"),
        ("—", "response not given ('—' in the file)"),
        (">ULOQ", "response above the measuring range ('>ULOQ' in the file)"),
        ("#DIV/0!", "response is the spreadsheet error value #DIV/0!"),
        ("#N/A", "response is the spreadsheet error value #N/A"),
    ],
)
def test_markers_make_excluded_points_never_dropped_ones(write, marker, reason):
    path = write([["Sample", "Conc", "Area"], ["Std 1", 0.5, marker], ["Std 2", 1, 20],
                  ["Std 3", 2, 40], ["Std 4", 5, 100]])
    run = read_run(path)
    assert len(run.points) == 4
    point = run.points[0]
    assert (point.included, point.exclusion_reason, point.source_cell) == (
        False, reason, _place(path, "C2"))
    assert math.isnan(point.response)


def test_markers_in_the_concentrations_of_blanks_and_unknowns(write):
    rows = [["Sample", "Conc", "Area"], ["Blank", "—", 0.2], ["Std 1", 1, 10], ["Std 2", 2, 20],
            ["Std 3", 5, 50], ["Subject 7", "n/a", 31]]
    run = read_run(write(rows))
    blank, unknown = run.points[0], run.points[-1]
    assert (blank.sample_type, blank.concentration) == (SampleType.BLANK, 0.0)
    assert unknown.sample_type is SampleType.UNKNOWN and math.isnan(unknown.concentration)


def test_marker_in_a_standards_concentration_is_refused(write):
    path = write([["Sample", "Type", "Conc", "Area"], ["Std 1", "std", "ND", 10]])
    assert message(path) == (
        f"{_where(path, 2, 'C (Conc)')}: found the text 'ND'; expected the nominal "
        f"concentration of the standard (a number of 0 or more)"
    )


def test_blank_rows_are_skipped_and_rows_keep_their_numbers(write):
    path = write([["Conc", "Area"], [1, 10], [None, None], ["", "  "], [2, 20], [5, 50]])
    run = read_run(path)
    assert [p.source_cell for p in run.points] == [
        _place(path, "B2"), _place(path, "B5"), _place(path, "B6")
    ]


def test_excluded_row_may_leave_its_response_empty(write):
    rows = [["Conc", "Area", "Include", "Reason"], [1, 10, "yes", None],
            [2, None, "no", "injection failed"], [2, 20, None, None], [5, 50, None, None]]
    point = read_run(write(rows)).points[1]
    assert (point.included, point.exclusion_reason) == (False, "injection failed")
    assert math.isnan(point.response)
