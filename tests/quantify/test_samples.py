"""Reading samples files: unknowns, QCs, dilution factors, and clear messages for bad cells."""

from __future__ import annotations

import math

import pytest
from openpyxl import Workbook

from calib.errors import InputError
from calib.io import read_run
from calib.options import SampleType
from calib.quantify.samples import read_samples, readings_from_run
from tests.quantify.helpers import write_run_csv, write_samples_csv


def write_csv(path, text: str, encoding: str = "utf-8"):
    path.write_text(text, encoding=encoding)
    return path


def test_samples_csv_with_title_lines_dilution_and_a_non_detect(tmp_path):
    sheet = read_samples(write_samples_csv(tmp_path / "batch.csv"))
    got = [(r.point.sample_id, r.point.sample_type.value, r.dilution_factor, r.point.included)
           for r in sheet.readings]
    assert got == [("FB-101", "unknown", 1.0, True), ("FB-101", "unknown", 1.0, True),
                   ("FB-102", "unknown", 5.0, True), ("FB-103", "unknown", 1.0, True),
                   ("FB-104", "unknown", 1.0, False), ("QC-M", "qc", 1.0, True),
                   ("QC-M", "qc", 1.0, True)]
    nd = sheet.readings[4].point
    assert math.isnan(nd.response) and nd.exclusion_reason == "response not detected ('ND' in the file)"
    assert sheet.readings[5].point.concentration == 4.0
    assert math.isnan(sheet.readings[0].point.concentration)
    assert sheet.readings[0].point.source_cell == "batch.csv!D4"
    assert sheet.units == {"concentration": "mg/L"}
    assert sheet.source.file == "batch.csv" and len(sheet.source.sha256) == 64


def test_semicolon_file_with_decimal_commas_and_german_headings(tmp_path):
    text = ("Probe;Analyt;Fläche;Verdünnungsfaktor\n"
            "FB-201;Nitrat-N;0,5123;\n"
            "FB-202;Nitrat-N;1,2031;2,5\n")
    sheet = read_samples(write_csv(tmp_path / "charge.csv", text, "cp1252"))
    assert [(r.point.analyte, r.point.response, r.dilution_factor) for r in sheet.readings] == [
        ("Nitrat-N", 0.5123, 1.0), ("Nitrat-N", 1.2031, 2.5)]
    assert sheet.source.delimiter == ";" and sheet.source.encoding == "cp1252"


def test_workbook_with_internal_standard_on_its_second_sheet(tmp_path):
    book = Workbook()
    notes = book.active
    notes.title = "Notes"
    notes.append(["Kestrel Bioanalytical (fictional): study samples"])
    batch = book.create_sheet("Batch")
    batch.append(["Sample", "Type", "Area", "IS area", "Dilution", "Nominal (ng/mL)"])
    batch.append(["Subject 101", "Unknown", 1520.0, 95000.0, None, None])
    batch.append(["LQC", "QC", 330.0, 96000.0, None, 3])
    path = tmp_path / "samples.xlsx"
    book.save(path)
    sheet = read_samples(path, analyte="KX-214")
    first, qc = (r.point for r in sheet.readings)
    assert first.response == pytest.approx(1520 / 95000) and first.analyte_response == 1520
    assert first.is_response == 95000 and first.source_cell == "Batch!C2"
    assert qc.sample_type is SampleType.QC and qc.concentration == 3.0
    assert sheet.source.sheet == "Batch"


def test_standards_and_blanks_in_a_samples_file_are_left_out_with_a_note(tmp_path):
    text = ("Sample,Area,Nominal\nCal-1,0.101,0.5\nBlank,0.0004,\nFB-1,0.44,\n")
    sheet = read_samples(write_csv(tmp_path / "s.csv", text), analyte="Nitrate-N")
    assert [r.point.sample_id for r in sheet.readings] == ["FB-1"]
    assert sheet.notes == (("row 2 (Cal-1) is a standard sample, not one to quantify; it was left "
                           "out"), ("row 3 (Blank) is a blank sample, not one to quantify; it was "
                                  "left out"))


def test_a_named_row_with_a_nominal_is_a_qc(tmp_path):
    text = "Sample,Area,Nominal (mg/L)\nCheck 4,0.81,4.0\nFB-1,0.44,\n"
    sheet = read_samples(write_csv(tmp_path / "s.csv", text), analyte="Nitrate-N")
    assert [r.point.sample_type.value for r in sheet.readings] == ["qc", "unknown"]


def test_notes_below_the_table_end_it(tmp_path):
    text = "Sample,Area\nFB-1,0.44\nFB-2,0.52\n\nChecked by R. Okafor\n"
    sheet = read_samples(write_csv(tmp_path / "s.csv", text), analyte="Nitrate-N")
    assert [r.point.sample_id for r in sheet.readings] == ["FB-1", "FB-2"]


@pytest.mark.parametrize("text, message", [
    ("Sample,Area,Dilution factor\nFB-1,0.44,0\n",
     ("s.csv, row 2, column C (Dilution factor): found the dilution factor 0; expected a number "
     "above 0")),
    ("Sample,Area,Dilution factor\nFB-1,0.44,ten\n",
     ("s.csv, row 2, column C (Dilution factor): found the text 'ten'; expected a dilution factor "
     "above 0 (an empty cell means 1)")),
    ("Sample,Area\nFB-1,broken vial\n",
     ("s.csv, row 2, column B (Area): found the text 'broken vial'; expected the response (a "
     "number; a marker such as ND sets it aside)")),
    ("Sample,Type,Area,Nominal\nQC-M,QC,0.8,\n",
     ("s.csv, row 2, column D (Nominal): found no nominal concentration for a QC; expected its "
     "nominal concentration, a number above 0")),
    ("Sample,Type,Area\nFB-1,sludge,0.8\n",
     "s.csv, row 2, column B (Type): found the text 'sludge'; expected a sample type: standard"),
    ("Sample,Notes\nFB-1,fine\n",
     ("s.csv: no samples table found in the first 50 rows: expected a header row naming the "
     "response (Response, Area, Height...) and beside it the sample id, analyte, sample type, "
     "nominal concentration or dilution factor")),
    ("Sample,Area,Height\nFB-1,0.4,0.2\n",
     "s.csv, row 1: two columns name the response: B (Area) and C (Height); keep one"),
])
def test_bad_cells_are_named_with_their_place(tmp_path, text, message):
    path = write_csv(tmp_path / "s.csv", text)
    with pytest.raises(InputError) as caught:
        read_samples(path, analyte="Nitrate-N")
    # Messages name the file as it was given.
    assert str(caught.value).startswith(str(tmp_path / message))


def test_a_table_without_analyte_column_needs_one_analyte(tmp_path):
    with pytest.raises(InputError, match="s.csv, row 1: the samples table has no analyte column; "
                                         "add one, or quantify against a curve of a single "
                                         "analyte"):
        read_samples(write_csv(tmp_path / "s.csv", "Sample,Area\nFB-1,0.4\n"))


def test_file_types_and_sheets_are_checked(tmp_path):
    with pytest.raises(InputError, match=r"s.pdf: found the file type '.pdf'; expected a samples "
                                         r"table \(.xlsx, .xlsm, .xls, .ods, .csv, .tsv or .txt\)"):
        read_samples(tmp_path / "s.pdf")
    path = write_csv(tmp_path / "s.csv", "Sample,Area\nFB-1,0.4\n")
    with pytest.raises(InputError, match="a text file has no sheets; got sheet 'Batch'"):
        read_samples(path, sheet="Batch", analyte="A")


def test_the_unknowns_and_qcs_of_a_run_file(tmp_path):
    run = read_run(write_run_csv(tmp_path / "run.csv"))
    readings = readings_from_run(run)
    kinds = [r.point.sample_type.value for r in readings]
    assert kinds == ["qc"] * 6 + ["unknown"] * 6
    assert {r.dilution_factor for r in readings} == {1.0}
    assert readings[0].point.concentration == 1.5 and readings[0].point.sample_id == "QC-L"


@pytest.mark.parametrize(("sep", "first", "expected"), [
    # A decimal comma file: "1.250" is one thousand two hundred and fifty (common practice in
    # decimal-comma locales: the point groups thousands), as calib.io.cells.to_number reads it.
    (";", "0,5034", [0.5034, 1250.0, 2.0, -3.5]),
    # A decimal point file: the same text is one and a quarter.
    (",", "0.5034", [0.5034, 1.25, 2.0, -3.5]),
])
def test_plain_numbers_read_as_the_files_decimal_mark_says(tmp_path, sep, first, expected):
    path = tmp_path / "s.csv"
    minus = "-3,5" if sep == ";" else "-3.5"
    rows = [["Sample ID", "Analyte", "Sample type", "Peak area"],
            ["A1", "Nitrate-N", "unknown", first], ["A2", "Nitrate-N", "unknown", "1.250"],
            ["A3", "Nitrate-N", "unknown", "2"], ["A4", "Nitrate-N", "unknown", minus]]
    path.write_text("\n".join(sep.join(r) for r in rows) + "\n", encoding="utf-8")
    got = [r.point.response for r in read_samples(path).readings]
    assert got == pytest.approx(expected, rel=1e-15)
