"""Delimited text: encodings, delimiters, decimal marks, the kept fixture, and text refusals."""

from __future__ import annotations

import hashlib
import math

import pandas as pd
import pytest

from calib.io import read_run
from calib.options import SampleType
from tests.io.conftest import message

SIMPLE = "Conc (mg/L),Area\n0.5,101\n1.0,203\n2.0,398\n5.0,1010\n"


# --- the kept fixture: BOM, semicolons, decimal commas, title lines ---------------------------


def test_semicolon_file_with_bom_and_decimal_commas(data_dir):
    path = data_dir / "nitrate_semicolon_bom.csv"
    run = read_run(path, analyte="Nitrate-N")
    assert run.source.file == "nitrate_semicolon_bom.csv"
    assert run.source.sha256 == hashlib.sha256(path.read_bytes()).hexdigest()
    assert (run.source.sheet, run.source.layout) == (None, "long")
    assert (run.source.encoding, run.source.delimiter) == ("utf-8-sig", ";")
    assert run.metadata == {
        "title": "Fernbrook Water Laboratory (fictional), nitrate-N export",
        "instrument": "IC-2 (conductivity detector)",
        "run_date": "2026-11-30",
    }
    assert run.units == {"concentration": "mg/L", "response": "µS·min"}
    assert run.analytes == ("Nitrate-N",)
    first, cal2b = run.points[0], run.points[4]
    assert first.sample_type is SampleType.BLANK
    assert first.concentration == 0.0  # a blank's empty nominal concentration is zero
    assert first.source_cell == "nitrate_semicolon_bom.csv!D6"
    # "1,000" here is 1.0 written with a decimal comma: the file's "0,5" settles the mark.
    assert (cal2b.concentration, cal2b.response, cal2b.replicate) == (1.0, 0.0851, 2)
    assert (cal2b.included, cal2b.exclusion_reason) == (False, "autosampler skipped the vial")
    assert cal2b.sample_id == "Cal-2"
    assert [p.sample_type for p in run.points[-2:]] == [SampleType.QC, SampleType.UNKNOWN]
    assert math.isnan(run.points[-1].concentration)
    assert len(run.standards("Nitrate-N")) == 6
    assert run.source.decimal_mark == ","


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


# --- encodings --------------------------------------------------------------------------------

GERMAN = (
    "Gerät;IC-2\r\nProbenname;Konz. (mg/l);Fläche\r\n"
    "Kal 1;0,5;101,5\r\nKal 2;1,0;203,25\r\nKal 3;2,0;398\r\nKal 4;5,0;1010\r\n"
)


@pytest.mark.parametrize(
    ("encoding", "prefix", "name"),
    [
        ("utf-8", b"", "utf-8"),
        ("utf-8", b"\xef\xbb\xbf", "utf-8-sig"),
        ("utf-16-le", b"\xff\xfe", "utf-16"),
        ("utf-16-be", b"\xfe\xff", "utf-16"),
        ("utf-16-le", b"", "utf-16-le"),  # no byte-order mark: told by its zero bytes
        ("utf-16-be", b"", "utf-16-be"),
        ("cp1252", b"", "cp1252"),  # Windows-1252, as office programs save "CSV"
    ],
)
def test_encodings(tmp_path, encoding, prefix, name):
    path = tmp_path / "nitrat.csv"
    path.write_bytes(prefix + GERMAN.encode(encoding))
    run = read_run(path)
    assert run.source.encoding == name
    assert run.metadata == {"instrument": "IC-2"}
    assert [p.response for p in run.points] == [101.5, 203.25, 398.0, 1010.0]
    assert run.points[0].source_cell == "nitrat.csv!C3"


def test_map_names_the_encoding(tmp_path):
    from calib.io import ImportMap

    path = tmp_path / "run.csv"
    path.write_bytes("Konz,Fläche\n1,10\n2,20\n3,30\n".encode("latin-1"))
    run = read_run(path, map=ImportMap(encoding="latin-1"))
    assert run.source.encoding == "latin-1"
    assert len(run.points) == 3


def test_bytes_that_no_encoding_reads(write_csv, tmp_path):
    path = tmp_path / "run.csv"
    path.write_bytes(b"Conc,Area\n1,2\n\x81\x8d,3\n")  # undefined in Windows-1252 too
    assert message(path) == (
        f"{path}, row 3: found the byte 0x81, which is not Windows-1252 text; expected a "
        f"delimited text file (CSV) in UTF-8, UTF-16 or Windows-1252 (or an import map naming "
        f"the encoding)"
    )


def test_nul_bytes(tmp_path):
    path = tmp_path / "run.csv"
    path.write_bytes(b"Conc,Area\n1,\x002\n")
    assert message(path) == (
        f"{path}, row 2: found a NUL byte, which text does not hold (the file is not text); "
        f"expected a delimited text file (CSV)"
    )


# --- delimiters and suffixes ------------------------------------------------------------------


@pytest.mark.parametrize(("delimiter", "name"), [(",", "run.csv"), (";", "run.csv"),
                                                 ("\t", "run.tsv"), ("\t", "run.txt"),
                                                 ("|", "run.txt")])
def test_delimiters(write_csv, delimiter, name):
    text = "Instrument: IC-2, conductivity\n" + SIMPLE.replace(",", delimiter)
    run = read_run(write_csv(text, name=name))
    assert run.source.delimiter == delimiter
    assert [p.response for p in run.points] == [101.0, 203.0, 398.0, 1010.0]


def test_comma_file_with_quoted_decimal_commas(write_csv):
    run = read_run(write_csv('Conc,Area\n"12,5",100\n25,"200,5"\n50,400\n'))
    assert [(p.concentration, p.response) for p in run.points] == [
        (12.5, 100.0), (25.0, 200.5), (50.0, 400.0)
    ]


def test_thousands_commas_are_settled_by_the_files_decimal_points(write_csv):
    # "1,250" alone could be 1.25 or 1250; "0.5" and "12,345.5" show the file's decimal point.
    text = 'Conc,Area\n0.5,"1,250"\n1,"2,480"\n2,"4,990"\n5,"12,345.5"\n'
    run = read_run(write_csv(text))
    assert [p.response for p in run.points] == [1250.0, 2480.0, 4990.0, 12345.5]
    assert run.source.decimal_mark == "."


def test_semicolon_file_without_evidence_refuses_a_number_read_both_ways(write_csv):
    # Issue 17: a semicolon file is only assumed to write decimal commas; an assumption must
    # not settle 1,250 (1.25 or 1250), as the comma and tab paths already refuse it.
    path = write_csv("Conc;Area\n1;1,250\n2;2,500\n3;3,750\n")
    assert message(path) == (
        f"{path}, row 2, column B (Area): found the text '1,250', where the comma may be a "
        "decimal comma or a thousands separator (no number in the file shows which); expected "
        "a number whose decimal mark the file makes clear (for example 1250 or 1.250), or an "
        "import map naming the decimal mark"
    )


def test_semicolon_file_takes_decimal_commas_its_numbers_show(write_csv):
    run = read_run(write_csv("Conc;Area\n0,5;0,625\n1;1,250\n2;2,500\n3;3,750\n"))
    assert [p.response for p in run.points] == [0.625, 1.25, 2.5, 3.75]
    assert run.source.decimal_mark == ","


def test_ambiguous_thousands_comma_in_a_comma_file(write_csv):
    path = write_csv('Conc,Area\n1,"1,250"\n2,"2,500"\n3,"3,750"\n')
    assert message(path) == (
        f"{path}, row 2, column B (Area): found the text '1,250', where the comma may be a "
        f"decimal comma or a thousands separator; expected a number whose decimal mark the file "
        f"makes clear (for example 1250 or 1.250), or an import map naming the decimal mark"
    )


def test_map_settles_the_decimal_mark(write_csv):
    from calib.io import ImportMap

    path = write_csv('Conc,Area\n1,"1,250"\n2,"2,500"\n3,"3,750"\n')
    run = read_run(path, map=ImportMap(decimal="."))
    assert [p.response for p in run.points] == [1250.0, 2500.0, 3750.0]


def test_file_name_with_spaces_is_quoted_in_source_cells(write_csv):
    run = read_run(write_csv(SIMPLE, name="day 2 run.csv"))
    assert run.points[0].source_cell == "'day 2 run.csv'!B2"
    assert run.analytes == ("day 2 run",)


# --- refusals particular to text files -------------------------------------------------------


def test_empty_file(write_csv):
    path = write_csv("")
    assert message(path) == (
        f"{path}: the file is empty (0 bytes); expected a delimited text file (CSV)"
    )


def test_whitespace_only_file(write_csv):
    path = write_csv("\n \n\n")
    assert message(path) == (
        f"{path}: no header row naming both a concentration and a response column in the first "
        f"50 rows; found no cell with content; expected headings such as 'concentration', "
        f"'conc', 'amount' and 'response', 'area', 'height'"
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
        f"expected a delimited text file (CSV)"
    )
