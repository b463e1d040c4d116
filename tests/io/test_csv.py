"""Reading long-layout CSV runs: delimiters, decimal commas, rules and every refusal."""

from __future__ import annotations

import hashlib
import math

import pandas as pd
import pytest

from calib.errors import InputError
from calib.io import read_run
from calib.options import SampleType

SIMPLE = "Conc (mg/L),Area\n0.5,101\n1.0,203\n2.0,398\n"


def message(path, **kwargs) -> str:
    with pytest.raises(InputError) as err:
        read_run(path, **kwargs)
    return str(err.value)


# --- the kept fixture: BOM, semicolons, decimal commas, title lines ---------------------------


def test_semicolon_file_with_bom_and_decimal_commas(data_dir):
    path = data_dir / "nitrate_semicolon_bom.csv"
    run = read_run(path, analyte="Nitrate-N")
    assert run.source.file == "nitrate_semicolon_bom.csv"
    assert run.source.sha256 == hashlib.sha256(path.read_bytes()).hexdigest()
    assert (run.source.sheet, run.source.layout) == (None, "long")
    assert run.metadata == {
        "title": "Fernbrook Water Laboratory (fictional), nitrate-N export",
        "Instrument": "IC-2 (conductivity detector)",
        "Run date": "2026-11-30",
    }
    assert run.units == {"concentration": "mg/L", "response": "µS·min"}
    assert run.analytes == ("Nitrate-N",)
    first, cal2b = run.points[0], run.points[4]
    assert first.sample_type is SampleType.BLANK
    assert first.concentration == 0.0  # a blank's empty nominal concentration is zero
    assert first.source_cell == "nitrate_semicolon_bom.csv!D6"
    # "1,000" in a semicolon file is 1.0 written with a decimal comma.
    assert (cal2b.concentration, cal2b.response, cal2b.replicate) == (1.0, 0.0851, 2)
    assert (cal2b.included, cal2b.exclusion_reason) == (False, "autosampler skipped the vial")
    assert cal2b.sample_id == "Cal-2"
    assert [p.sample_type for p in run.points[-2:]] == [SampleType.QC, SampleType.UNKNOWN]
    assert math.isnan(run.points[-1].concentration)
    assert len(run.standards("Nitrate-N")) == 6


def test_same_figures_as_pandas(data_dir):
    # Independent reader: pandas.read_csv told the layout explicitly (rows to skip, ";", ",").
    path = data_dir / "nitrate_semicolon_bom.csv"
    frame = pd.read_csv(path, sep=";", decimal=",", skiprows=4, encoding="utf-8-sig")
    run = read_run(path)
    assert len(run.points) == len(frame)
    assert [p.response for p in run.points] == frame["Area [µS·min]"].tolist()
    standards = frame["Type"] == "std"
    ours = [p.concentration for p in run.points if p.sample_type is SampleType.STANDARD]
    assert ours == frame.loc[standards, "Conc. (mg/L)"].tolist()
    assert [p.sample_id for p in run.points] == frame["Sample"].tolist()


# --- layouts and values ----------------------------------------------------------------------


def test_comma_file_with_quoted_decimal_comma(write_csv):
    run = read_run(write_csv('Conc,Area\n"12,5",100\n25,"200,5"\n'))
    assert [(p.concentration, p.response) for p in run.points] == [(12.5, 100.0), (25.0, 200.5)]


def test_tab_file(write_csv):
    run = read_run(write_csv("Amount\tPeak height\n1\t10.5\n2\t21.0\n"))
    assert [(p.concentration, p.response) for p in run.points] == [(1.0, 10.5), (2.0, 21.0)]
    assert run.points[1].source_cell == "run.csv!B3"


def test_numbers_stored_as_text_with_spaces_and_exponents(write_csv):
    run = read_run(write_csv("Conc,Area\n  1.0 , 1.5E+03 \n2,3e3\n"))
    assert [(p.concentration, p.response) for p in run.points] == [(1.0, 1500.0), (2.0, 3000.0)]


def test_title_lines_are_skipped_and_kept_as_metadata(write_csv):
    text = (
        "Fluoride calibration\n"
        "Operator: R. Okafor\n"
        "Method,FWL-IC-07\n"
        "\n"
        "Conc,Area\n"
        "0.1,0.034\n"
    )
    run = read_run(write_csv(text))
    assert run.metadata == {
        "title": "Fluoride calibration",
        "Operator": "R. Okafor",
        "Method": "FWL-IC-07",
    }
    assert run.points[0].source_cell == "run.csv!B6"


def test_blank_rows_are_skipped_and_rows_keep_their_numbers(write_csv):
    run = read_run(write_csv("Conc,Area\n1,10\n,\n\n2,20\n"))
    assert [p.source_cell for p in run.points] == ["run.csv!B2", "run.csv!B5"]


def test_file_name_with_spaces_is_quoted_in_source_cells(write_csv):
    run = read_run(write_csv(SIMPLE, name="day 2.csv"))
    assert run.points[0].source_cell == "'day 2.csv'!B2"


def test_single_analyte_is_named_after_the_file_or_the_caller(write_csv):
    path = write_csv(SIMPLE, name="fluoride_2026-11-30.csv")
    assert read_run(path).analytes == ("fluoride_2026-11-30",)
    assert read_run(path, analyte="Fluoride").analytes == ("Fluoride",)


def test_multi_analyte_file(write_csv):
    text = (
        "Compound,Conc,Area,Rep\n"
        "Nitrate-N,0.5,0.042,1\n"
        "Fluoride,0.1,0.034,1\n"
        "Nitrate-N,1.0,0.084,1\n"
        "Fluoride,0.2,0.058,1\n"
    )
    run = read_run(write_csv(text))
    assert run.analytes == ("Nitrate-N", "Fluoride")
    assert [p.concentration for p in run.standards("Fluoride")] == [0.1, 0.2]
    assert [p.source_cell for p in run.standards("Nitrate-N")] == ["run.csv!C2", "run.csv!C4"]


def test_include_column_and_reasons(write_csv):
    text = (
        "Conc,Area,Include,Exclusion reason\n"
        "1,10,x,\n"
        "2,20,,\n"
        "3,31,NO,carry-over from the previous injection\n"
        "4,40,Y,\n"
    )
    run = read_run(write_csv(text))
    assert [p.included for p in run.points] == [True, True, False, True]
    assert run.points[2].exclusion_reason == "carry-over from the previous injection"


def test_sample_types_and_unknowns(write_csv):
    text = (
        "Sample type,Sample name,Conc,Area\n"
        "Reagent blank,B1,,0.1\n"
        "Zero,Z1,0,0.2\n"
        "Calibrator,C1,1,10\n"
        ",C2,2,20\n"
        "QC,Q1,1.5,15\n"
        "Sample,U1,,12\n"
    )
    run = read_run(write_csv(text))
    assert [p.sample_type.value for p in run.points] == [
        "blank", "zero", "standard", "standard", "qc", "unknown"
    ]
    assert math.isnan(run.points[-1].concentration)
    assert run.points[0].concentration == 0.0


# --- refusals: each names the place and says what was expected --------------------------------


def test_excluded_row_without_reason(write_csv):
    path = write_csv("Conc,Area,Include,Reason\n1,10,yes,\n2,20,no,\n")
    assert message(path) == (
        f"{path}, row 3, column C (Include): the point is excluded (include is 'no') but gives "
        f"no exclusion_reason; every exclusion needs a reason"
    )


def test_unreadable_include_flag(write_csv):
    path = write_csv("Conc,Area,Use\n1,10,maybe\n")
    assert message(path) == (
        f"{path}, row 2, column C (Use): found the text 'maybe'; expected yes/no, y/n, "
        f"true/false, 1/0, x or an empty cell (included)"
    )


def test_unknown_sample_type(write_csv):
    path = write_csv("Type,Conc,Area\nspike,1,10\n")
    assert message(path).startswith(
        f"{path}, row 2, column A (Type): found the text 'spike'; expected a sample type: "
        f"standard (standard, std, cal,"
    )


def test_qc_needs_a_concentration(write_csv):
    path = write_csv("Type,Conc,Area\nstd,1,10\nqc,,12\n")
    assert message(path) == f"{path}, row 3, column B (Conc): found an empty cell; expected a number"


def test_empty_response(write_csv):
    path = write_csv("Conc,Area\n1,10\n2,\n")
    assert message(path) == f"{path}, row 3, column B (Area): found an empty cell; expected a number"


def test_error_value_and_text_in_number_columns(write_csv):
    path = write_csv("Conc,Area\n1,#DIV/0!\n")
    assert message(path) == (
        f"{path}, row 2, column B (Area): found the spreadsheet error value #DIV/0!; "
        f"expected a number"
    )
    path = write_csv("Conc,Area\n<LOD,10\n")
    assert message(path) == f"{path}, row 2, column A (Conc): found the text '<LOD'; expected a number"


def test_ambiguous_thousands_comma_in_a_comma_file(write_csv):
    path = write_csv('Conc,Area\n1,"1,250"\n')
    assert message(path) == (
        f"{path}, row 2, column B (Area): found the text '1,250', where the comma may be a "
        f"decimal comma or a thousands separator; expected a number written without thousands "
        f"separators (for example 1250 or 1.250)"
    )


def test_bad_replicate(write_csv):
    path = write_csv("Conc,Area,Replicate\n1,10,first\n")
    assert message(path) == (
        f"{path}, row 2, column C (Replicate): found the text 'first'; expected a whole number"
    )


def test_empty_analyte_cell(write_csv):
    path = write_csv("Analyte,Conc,Area\nNitrate-N,1,10\n,2,20\n")
    assert message(path) == (
        f"{path}, row 3, column A (Analyte): found an empty cell; expected the analyte name"
    )


def test_analyte_given_for_a_file_with_an_analyte_column(write_csv):
    path = write_csv("Analyte,Conc,Area\nNitrate-N,1,10\n")
    assert message(path, analyte="Fluoride") == (
        f"{path}, row 1: the table has an analyte column A (Analyte); the analyte name given "
        f"('Fluoride') is only for tables without one"
    )


def test_two_response_columns(write_csv):
    path = write_csv("Conc,Area,Height\n1,10,5\n")
    assert message(path) == (
        f"{path}, row 1: two columns name the response: B (Area) and C (Height); keep one, or "
        f"rename the other so that only one heading names the response"
    )


def test_no_header_row(write_csv):
    path = write_csv("Nitrate run\nLevel,Peak\n1,10\n")
    assert message(path) == (
        f"{path}: no header row naming both a concentration and a response column in the first "
        f"50 rows; found in row 1: 'Nitrate run'; expected headings such as 'concentration', "
        f"'conc', 'amount' and 'response', 'area', 'height'"
    )


def test_no_header_row_shows_the_half_matched_row(write_csv):
    path = write_csv("Nitrate run\nConc,Peak\n1,10\n")
    assert "found in row 2: 'Conc', 'Peak';" in message(path)


def test_header_without_rows(write_csv):
    path = write_csv("Conc,Area\n\n")
    assert message(path) == (
        f"{path}: the table under the header in row 1 has no rows; expected at least one "
        f"calibration standard"
    )


def test_no_standards(write_csv):
    path = write_csv("Type,Conc,Area\nblank,,1\nunknown,,5\n")
    assert message(path) == (
        f"{path}: found no calibration standard among the 2 rows (sample types: blank, unknown); "
        f"expected at least one standard (a row with an empty sample_type is a standard)"
    )


def test_empty_file(write_csv):
    path = write_csv("")
    assert message(path) == f"{path}: the file is empty (0 bytes); expected a CSV text file (UTF-8)"


def test_whitespace_only_file(write_csv):
    path = write_csv("\n  \n")
    assert "in the first 50 rows; found no cell with content;" in message(path)


def test_not_utf8(write_csv):
    path = write_csv("Conc,Area\n1,10\nmétodo,2\n", encoding="cp1252")
    assert message(path) == (
        f"{path}, row 3: found the byte 0xE9, which is not UTF-8 text; expected a CSV text file "
        f"(UTF-8): save it as UTF-8 (CSV UTF-8)"
    )


def test_utf16(write_csv):
    path = write_csv(SIMPLE, encoding="utf-16")  # Python writes a byte-order mark
    assert message(path) == (
        f"{path}: the file is UTF-16 text; expected a CSV text file (UTF-8): save it as UTF-8 "
        f"(CSV UTF-8)"
    )


def test_nul_bytes(write_csv):
    path = write_csv("Conc,Area\n1,1\x000\n")
    assert message(path) == (
        f"{path}, row 2: found a NUL byte, which text does not hold (the file is UTF-16 without "
        f"a byte-order mark, or not text at all); expected a CSV text file (UTF-8)"
    )


def test_sheet_for_a_text_file(write_csv):
    path = write_csv(SIMPLE)
    assert message(path, sheet="Run") == (
        f"{path}: a text file has no sheets; got sheet 'Run' (leave the sheet out)"
    )


def test_csv_module_error_is_wrapped(write_csv):
    # The csv module refuses fields over 131,072 characters (csv.field_size_limit()).
    path = write_csv('Conc,Area\n1,"' + "9" * 200_000 + '"\n')
    assert message(path) == (
        f"{path}, row 2: cannot be split into cells (field larger than field limit (131072)); "
        f"expected a CSV text file (UTF-8)"
    )
