"""read_run: dispatch by extension, pluggable readers, the public names of calib.io."""

from __future__ import annotations

import dataclasses

import calib.io
from calib.io import read_run
from calib.run import Point, Run, SourceInfo
from tests.io.conftest import message

TABLE = [
    ["Analyte", "Sample", "Sample type", "Conc (mg/L)", "Area", "Rep", "Use", "Comment"],
    ["Nitrate-N", "B", "blank", "", "0.0004", "1", "", ""],
    ["Nitrate-N", "Cal-1", "std", "0.5", "0.0421", "1", "yes", ""],
    ["Nitrate-N", "Cal-2", "std", "1", "0.0851", "1", "no", "vial cracked"],
    ["Nitrate-N", "Cal-3", "std", "2", "0.1702", "1", "yes", ""],
    ["Nitrate-N", "QC", "qc", "0.75", "0.0630", "1", "yes", ""],
]
SIMPLE = "Conc,Area\n1,2\n2,4\n3,6\n"


def test_public_names_are_locked():
    assert calib.io.__all__ == [
        "READERS", "ImportMap", "Reader", "describe_import", "load_map", "read_run"
    ]
    assert [sorted(r.suffixes) for r in calib.io.READERS] == [
        [".ods", ".xls", ".xlsm", ".xlsx"], [".csv", ".tsv", ".txt"]
    ]


def test_csv_and_xlsx_of_one_table_give_the_same_points(write_csv, write_xlsx):
    text = "\n".join(",".join(row) for row in TABLE) + "\n"
    from_csv = read_run(write_csv(text, name="run.csv"))
    from_xlsx = read_run(write_xlsx({"Sheet1": TABLE}, name="run.xlsx"))

    def without_cell(run: Run) -> list[Point]:
        return [dataclasses.replace(p, source_cell="") for p in run.points]

    assert without_cell(from_csv) == without_cell(from_xlsx)
    assert from_csv.points[2].source_cell == "run.csv!E4"
    assert from_xlsx.points[2].source_cell == "Sheet1!E4"
    assert from_csv.units == from_xlsx.units == {"concentration": "mg/L"}
    assert from_csv.metadata == from_xlsx.metadata == {}


def test_extension_is_matched_without_case(write_csv):
    assert len(read_run(write_csv(SIMPLE, name="RUN.CSV")).points) == 3


def test_unsupported_extension(tmp_path):
    path = tmp_path / "run.pdf"
    path.write_bytes(b"%PDF-1.7")
    assert message(path) == (
        f"{path}: found the file type '.pdf'; expected one of .xlsx, .xlsm, .xls, .ods, .csv, "
        f".tsv, .txt"
    )
    bare = tmp_path / "run"
    bare.write_text(SIMPLE)
    assert message(bare) == (
        f"{bare}: found a file name without an extension; expected one of .xlsx, .xlsm, .xls, "
        f".ods, .csv, .tsv, .txt"
    )


def test_missing_file_and_folder(tmp_path):
    files = "a run file (.xlsx, .xlsm, .xls, .ods, .csv, .tsv or .txt)"
    assert message(tmp_path / "nope.csv") == f"{tmp_path / 'nope.csv'}: no such file; expected {files}"
    assert message(tmp_path) == f"{tmp_path}: this is a folder; expected {files}"


def test_readers_can_be_substituted(tmp_path):
    class FakeReader:
        suffixes = (".fake",)

        def read(self, path, *, sheet=None, analyte=None) -> Run:
            point = Point("A", 1.0, 2.0, f"{path.name}!B2")
            return Run(SourceInfo(path.name, "0" * 64, sheet=sheet), (point,))

    path = tmp_path / "run.fake"
    path.write_text("anything")
    run = read_run(path, sheet="S", readers=[FakeReader()])
    assert (run.source.sheet, run.points[0].source_cell) == ("S", "run.fake!B2")
    missing = tmp_path / "nope.csv"
    assert message(missing, readers=[FakeReader()]) == (
        f"{missing}: no such file; expected a run file (.xlsx, .xlsm, .xls, .ods, .csv, .tsv "
        f"or .txt)"
    )
    other = tmp_path / "run.csv"
    other.write_text(SIMPLE)
    assert message(other, readers=[FakeReader()]) == (
        f"{other}: found the file type '.csv'; expected one of .fake"
    )
