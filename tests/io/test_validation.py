"""Validation of a run: every refusal's message in full, and points set aside with reasons."""

from __future__ import annotations

from calib.io import read_run
from tests.io.conftest import message

GOOD = "Cal 1,1,10\nCal 2,2,20\nCal 3,5,50\n"


def test_negative_concentration(write_csv):
    path = write_csv("Sample,Conc (mg/L),Area\nCal 0,-0.5,3\n" + GOOD)
    assert message(path) == (
        f"{path}, row 2, column B (Conc (mg/L)): found the negative concentration -0.5; "
        f"expected the nominal concentration of the standard (a number of 0 or more)"
    )


def test_non_numeric_concentration(write_csv):
    path = write_csv("Sample,Conc,Area\n" + GOOD + "Cal 4,ten,100\n")
    assert message(path) == (
        f"{path}, row 5, column B (Conc): found the text 'ten'; expected the nominal "
        f"concentration of the standard (a number of 0 or more)"
    )


def test_qc_needs_a_concentration(write_csv):
    path = write_csv("Sample,Conc,Area\n" + GOOD + "QC-L,,14\n")
    assert message(path) == (
        f"{path}, row 5, column B (Conc): found an empty cell; expected the nominal "
        f"concentration of the QC (a number of 0 or more)"
    )


def test_standard_without_response(write_csv):
    path = write_csv("Sample,Conc,Area\n" + GOOD + "Cal 4,10,\n")
    assert message(path) == (
        f"{path}, row 5, column C (Area): found an empty cell; expected the response (a number; "
        f"a marker such as ND or <LOD sets the point aside)"
    )


def test_text_in_the_response(write_csv):
    path = write_csv("Sample,Conc,Area\n" + GOOD + "Cal 4,10,see note\n")
    assert message(path) == (
        f"{path}, row 5, column C (Area): found the text 'see note'; expected the response (a "
        f"number; a marker such as ND or <LOD sets the point aside)"
    )


def test_standard_without_internal_standard_response(write_csv):
    path = write_csv("Sample,Conc,Area,IS area\nCal 1,1,10,\n")
    assert message(path) == (
        f"{path}, row 2, column D (IS area): found an empty cell; expected the internal-standard "
        f"response (a number; a marker such as ND or <LOD sets the point aside)"
    )


def test_fewer_than_three_levels(write_csv):
    path = write_csv("Sample,Conc (mg/L),Area\nCal 1,1,10\nCal 1,1,11\nCal 2,2,20\nBlank,,0\n")
    assert message(path) == (
        f"{path}: run has standards at 2 concentrations only (1, 2 mg/L; cells run.csv!C2 to "
        f"run.csv!C4); expected standards at 3 or more distinct concentrations for a calibration "
        f"curve (a row is a standard when its sample type says so, or when it has a "
        f"concentration and its name says no other type)"
    )


def test_analyte_without_standards(write_csv):
    text = "Analyte,Sample,Conc,Area\n" + "".join(f"Lead,{r}" for r in GOOD.splitlines(True))
    path = write_csv(text + "Iron,QC-L,2,20\nIron,Subject 1,,31\n")
    assert message(path) == (
        f"{path}: Iron has no calibration standard among its 2 rows (sample types: qc, "
        f"unknown); expected standards at 3 or more distinct concentrations for a calibration "
        f"curve (a row is a standard when its sample type says so, or when it has a "
        f"concentration and its name says no other type)"
    )


def test_duplicated_rows_are_set_aside_as_copies(write_csv):
    text = "Sample,Conc,Area,Rep\nCal 1,1,10,1\nCal 2,2,20,1\nCal 2,2,20,1\nCal 3,5,50,1\n"
    run = read_run(write_csv(text))
    copy = run.points[2]
    reason = ("repeats the row of run.csv!C3 exactly (same sample, concentration and response): "
              "a copied row")
    assert (copy.included, copy.exclusion_reason) == (False, reason)
    assert run.warnings == (f"run.csv!C4: {reason}; set aside",)


def test_replicates_that_agree_to_few_digits_are_not_copies(write_csv):
    run = read_run(write_csv("Conc,Absorbance\n1,0.213\n1,0.213\n2,0.425\n5,1.06\n"))
    assert all(p.included for p in run.points) and run.warnings == ()


def test_excluded_row_without_reason(write_csv):
    path = write_csv("Conc,Area,Include\n1,10,yes\n2,20,no\n")
    assert message(path) == (
        f"{path}, row 3, column C (Include): the point is excluded (include is 'no') but gives "
        f"no exclusion_reason; every exclusion needs a reason"
    )


def test_unreadable_include_flag(write_csv):
    path = write_csv("Conc,Area,Include\n1,10,maybe\n")
    assert message(path) == (
        f"{path}, row 2, column C (Include): found the text 'maybe'; expected yes/no, y/n, "
        f"true/false, 1/0 or an empty cell (included)"
    )


def test_bad_replicate(write_csv):
    path = write_csv("Conc,Area,Rep\n1,10,first\n")
    assert message(path) == (
        f"{path}, row 2, column C (Rep): found the text 'first'; expected a whole number"
    )


def test_empty_analyte_cell(write_csv):
    path = write_csv("Analyte,Conc,Area\nLead,1,10\n,2,20\n")
    assert message(path) == (
        f"{path}, row 3, column A (Analyte): found an empty cell; expected the analyte name"
    )


def test_analyte_given_for_a_file_with_an_analyte_column(write_csv):
    path = write_csv("Analyte,Conc,Area\nLead,1,10\n")
    assert message(path, analyte="Iron") == (
        f"{path}, row 1: the table has an analyte column A (Analyte); the analyte name given "
        f"('Iron') is only for tables without one"
    )


def test_two_response_columns(write_csv):
    path = write_csv("Conc,Area,Height\n1,10,5\n")
    assert message(path) == (
        f"{path}, row 1: two columns name the response: B (Area) and C (Height); keep one, or "
        f"rename the other so that only one heading names the response"
    )


def test_no_header_row_shows_the_half_matched_row(write_csv):
    path = write_csv("Fernbrook\nConc,Peak\n1,2\n")
    assert message(path) == (
        f"{path}: no header row naming both a concentration and a response column in the first "
        f"50 rows; found in row 2: 'Conc', 'Peak'; expected headings such as 'concentration', "
        f"'conc', 'amount' and 'response', 'area', 'height'"
    )


def test_header_without_rows(write_csv):
    path = write_csv("Conc,Area\n\n\n")
    assert message(path) == (
        f"{path}: the table under the header in row 1 has no rows; expected at least one "
        f"calibration standard"
    )


def test_unknown_sample_type(write_csv):
    path = write_csv("Type,Conc,Area\nspike,1,10\n")
    assert message(path).startswith(
        f"{path}, row 2, column A (Type): found the text 'spike'; expected a sample type: "
        f"standard (standard, std, cal, calibrator, calibrant...); blank ("
    )
