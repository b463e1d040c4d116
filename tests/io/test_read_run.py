"""read_run: dispatch by extension, pluggable readers, the public names of calib.io."""

from __future__ import annotations

import dataclasses

import pytest

import calib.io
from calib.errors import InputError
from calib.io import read_run
from calib.run import Point, Run, SourceInfo

TABLE = [
    ["Analyte", "Sample", "Sample type", "Conc (mg/L)", "Area", "Rep", "Use", "Comment"],
    ["Nitrate-N", "B", "blank", "", "0.0004", "1", "", ""],
    ["Nitrate-N", "Cal-1", "std", "0.5", "0.0421", "1", "yes", ""],
    ["Nitrate-N", "Cal-2", "std", "1", "0.0851", "1", "no", "vial cracked"],
    ["Nitrate-N", "QC", "qc", "0.75", "0.0630", "1", "yes", ""],
]


def message(path, **kwargs) -> str:
    with pytest.raises(InputError) as err:
        read_run(path, **kwargs)
    return str(err.value)


def test_public_names_are_locked():
    assert calib.io.__all__ == ["READERS", "Reader", "read_run"]


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


def test_extension_is_matched_without_case(write_csv):
    assert len(read_run(write_csv("Conc,Area\n1,2\n", name="RUN.CSV")).points) == 1


def test_unsupported_extension(tmp_path):
    path = tmp_path / "run.pdf"
    path.write_bytes(b"%PDF-1.7")
    assert message(path) == f"{path}: found the file type '.pdf'; expected one of .xlsx, .csv"
    bare = tmp_path / "run"
    bare.write_text("Conc,Area\n1,2\n")
    assert message(bare) == (
        f"{bare}: found a file name without an extension; expected one of .xlsx, .csv"
    )


def test_missing_file_and_folder(tmp_path):
    assert message(tmp_path / "nope.csv") == (
        f"{tmp_path / 'nope.csv'}: no such file; expected a run file (.csv or .xlsx)"
    )
    assert message(tmp_path) == f"{tmp_path}: this is a folder; expected a run file (.csv or .xlsx)"


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
        f"{missing}: no such file; expected a run file (.csv or .xlsx)"
    )
    other = tmp_path / "run.csv"
    other.write_text("Conc,Area\n1,2\n")
    assert message(other, readers=[FakeReader()]) == (
        f"{other}: found the file type '.csv'; expected one of .fake"
    )
