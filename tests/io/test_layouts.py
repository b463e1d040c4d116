"""Layouts: long, wide (shared or own concentrations, two header rows), stacked, sheet per analyte.

Round trips: a pandas DataFrame is written with openpyxl in each layout, read
back with calib, and every point compared with the frame it came from.
"""

from __future__ import annotations

import numpy as np
import pandas as pd
import pytest

from calib.io import read_run
from calib.options import SampleType
from tests.io.conftest import message

RNG = np.random.default_rng(20261201)
LEVELS = [0.5, 1.0, 2.0, 4.0, 8.0]
ANALYTES = {"Fluoride": 0.21, "Nitrate-N": 0.084, "Sulfate": 0.093}


def _responses(slope: float, n: int) -> np.ndarray:
    return np.round(slope * np.asarray(LEVELS * (n // len(LEVELS))) *
                    (1 + RNG.normal(0, 0.01, n)), 6)


def _excel(path, frames, *, lines=()):
    """Write {sheet: [(startrow, frame), ...]} with openpyxl; ``lines`` go above in every sheet."""
    with pd.ExcelWriter(path, engine="openpyxl") as writer:
        for sheet, placed in frames.items():
            for start, frame in placed:
                frame.to_excel(writer, sheet_name=sheet, startrow=start, index=False)
            for number, line in enumerate(lines, start=1):
                writer.sheets[sheet].cell(row=number, column=1, value=line)
    return path


# --- long ------------------------------------------------------------------------------------


def test_round_trip_long(tmp_path):
    rows = []
    for analyte, slope in ANALYTES.items():
        for rep, response in enumerate(_responses(slope, 10)):
            rows.append({"Analyte": analyte, "Sample": f"Cal-{rep % 5 + 1}", "Type": "Standard",
                         "Conc (mg/L)": LEVELS[rep % 5], "Area": response,
                         "Rep": rep // 5 + 1})
    frame = pd.DataFrame(rows)
    path = _excel(tmp_path / "long.xlsx", {"Run": [(3, frame)]},
                  lines=["Fernbrook Water Laboratory (fictional)", "Instrument: IC-2"])
    run = read_run(path)
    assert run.source.layout == "long"
    assert run.metadata == {"title": "Fernbrook Water Laboratory (fictional)",
                            "instrument": "IC-2"}
    got = pd.DataFrame({"Analyte": [p.analyte for p in run.points],
                        "Sample": [p.sample_id for p in run.points],
                        "Type": ["Standard" for p in run.points],
                        "Conc (mg/L)": [p.concentration for p in run.points],
                        "Area": [p.response for p in run.points],
                        "Rep": [p.replicate for p in run.points]})
    pd.testing.assert_frame_equal(got, frame)
    assert run.points[0].source_cell == "Run!E5"


# --- wide ------------------------------------------------------------------------------------


def test_round_trip_wide_with_a_shared_concentration(tmp_path):
    frame = pd.DataFrame({"Level": [f"L{i % 5 + 1}" for i in range(10)],
                          "Conc (mg/L)": LEVELS * 2})
    for analyte, slope in ANALYTES.items():
        frame[analyte] = _responses(slope, 10)
    run = read_run(_excel(tmp_path / "wide.xlsx", {"Screen": [(0, frame)]}))
    assert run.source.layout == "wide"
    assert run.analytes == tuple(ANALYTES)
    for analyte in ANALYTES:
        points = run.standards(analyte)
        assert [p.concentration for p in points] == frame["Conc (mg/L)"].tolist()
        assert [p.response for p in points] == frame[analyte].tolist()
        assert [p.level for p in points] == frame["Level"].tolist()
    # Each point's source cell is its analyte's response cell.
    assert [p.source_cell for p in run.points[:3]] == ["Screen!C2", "Screen!D2", "Screen!E2"]
    assert run.units == {"concentration": "mg/L"}


def test_round_trip_wide_with_a_concentration_per_analyte(tmp_path):
    frame = pd.DataFrame({"Sample": [f"Std {i % 5 + 1}" for i in range(10)]})
    for number, (analyte, slope) in enumerate(ANALYTES.items(), start=1):
        frame[f"{analyte} conc (mg/L)"] = [c * number for c in LEVELS * 2]
        frame[f"{analyte} area (µS*min)"] = _responses(slope, 10)
    run = read_run(_excel(tmp_path / "wide.xlsx", {"Anions": [(0, frame)]}))
    assert run.source.layout == "wide"
    for analyte in ANALYTES:
        points = run.standards(analyte)
        assert [p.concentration for p in points] == frame[f"{analyte} conc (mg/L)"].tolist()
        assert [p.response for p in points] == frame[f"{analyte} area (µS*min)"].tolist()
    assert run.units == {"concentration": "mg/L", "response": "µS*min"}


def test_wide_with_analyte_names_over_repeated_sub_headings(write_xlsx, write_csv):
    group = ["", "Sodium", "", "Calcium", ""]
    sub = ["Sample", "Conc (mg/L)", "Area", "Conc (mg/L)", "Area"]
    body = [[f"Cal {i}", c, 0.04 * c, 2 * c, 0.03 * c] for i, c in enumerate(LEVELS, start=1)]
    merged = write_xlsx({"Cations": [["IC-3 cations"], group, sub, *body]},
                        merges=("B2:C2", "D2:E2"))
    text = "\n".join(",".join(str(v) for v in row) for row in [group, sub, *body]) + "\n"
    for path in (merged, write_csv(text)):  # the CSV names each analyte once, no merge
        run = read_run(path)
        assert run.source.layout == "wide"
        assert run.analytes == ("Sodium", "Calcium")
        assert [p.concentration for p in run.standards("Calcium")] == [2 * c for c in LEVELS]
        assert [p.response for p in run.standards("Sodium")] == [0.04 * c for c in LEVELS]


def test_wide_rows_that_hold_no_such_analyte_give_no_point(write_csv):
    text = ("Sample,Lead conc,Lead counts,Copper conc,Copper counts\n"
            "Cal 1,1,2010,,\nCal 2,2,4020,5,7350\nCal 3,5,10100,10,14700\nCal 4,,,20,29400\n")
    run = read_run(write_csv(text))
    assert [p.sample_id for p in run.standards("Lead")] == ["Cal 1", "Cal 2", "Cal 3"]
    assert [p.sample_id for p in run.standards("Copper")] == ["Cal 2", "Cal 3", "Cal 4"]


def test_wide_analyte_without_a_response_column(write_csv):
    path = write_csv("Sample,Lead conc,Lead counts,Copper conc\nCal 1,1,2010,5\n")
    assert message(path) == (
        f"{path}, row 1: D (Copper conc) gives the concentration of Copper, but no column gives "
        f"its response; expected a heading such as 'Copper area'"
    )


def test_wide_without_concentrations(write_csv):
    path = write_csv("Sample,Level,Lead counts,Copper counts\nCal 1,1,2010,5\n")
    assert message(path) == (
        f"{path}, row 1: the wide table gives no concentration for Lead, Copper; expected a "
        f"shared concentration column or one per analyte (such as 'Lead conc')"
    )


# --- stacked ---------------------------------------------------------------------------------


def test_round_trip_stacked_tables(tmp_path):
    placed, start, frames = [], 2, {}
    for analyte, slope in ANALYTES.items():
        frame = pd.DataFrame({"Sample": [f"Cal-{i % 5 + 1}" for i in range(10)],
                              "Conc (µg/L)": LEVELS * 2, "Counts": _responses(slope, 10)})
        placed.append((start + 1, frame))
        frames[analyte] = (start, frame)
        start += len(frame) + 4
    path = _excel(tmp_path / "stacked.xlsx", {"Metals": placed},
                  lines=["Fernbrook Water Laboratory (fictional)"])
    book = __import__("openpyxl").load_workbook(path)
    for analyte, (row, _) in frames.items():
        book["Metals"].cell(row=row + 1, column=1, value=analyte)
    book.save(path)
    run = read_run(path)
    assert run.source.layout == "stacked"
    assert run.analytes == tuple(ANALYTES)
    assert len(run.source.tables) == 3
    assert run.metadata == {"title": "Fernbrook Water Laboratory (fictional)"}
    for analyte, (_, frame) in frames.items():
        points = run.standards(analyte)
        assert [p.response for p in points] == frame["Counts"].tolist()
        assert [p.sample_id for p in points] == frame["Sample"].tolist()


def test_stacked_tables_named_by_analyte_lines_or_columns(write_csv):
    body = "Sample,Conc,Area\nCal 1,1,10\nCal 2,2,20\nCal 3,4,40\n"
    text = ("Fernbrook Water Laboratory (fictional)\nInstrument: IC-2\n\nAnalyte: Fluoride\n"
            + body + "\nAnalyte: Chloride\n" + body + "\nApproved by: J. Marsh\n")
    run = read_run(write_csv(text))
    assert run.source.layout == "stacked"
    assert run.analytes == ("Fluoride", "Chloride")
    assert run.metadata == {"title": "Fernbrook Water Laboratory (fictional)",
                            "instrument": "IC-2", "Approved by": "J. Marsh"}
    assert run.standards("Chloride")[0].source_cell == "run.csv!C12"


def test_stacked_standards_and_qc_tables_of_one_analyte(write_csv):
    # Lines that name a sample type do not name an analyte: both tables are the file's.
    text = ("Standards\nSample,Conc,Area\nCal 1,1,10\nCal 2,2,20\nCal 3,4,40\n\n"
            "QC samples\nSample,Conc,Area\nQC-L,1.5,15\nQC-H,3,30\n")
    run = read_run(write_csv(text, name="nitrite.csv"))
    assert run.analytes == ("nitrite",)
    assert [p.sample_type for p in run.points].count(SampleType.QC) == 2


# --- one sheet per analyte -------------------------------------------------------------------


def test_round_trip_sheet_per_analyte(tmp_path):
    frames = {}
    for analyte, slope in ANALYTES.items():
        frames[analyte] = pd.DataFrame({"Sample": [f"Cal {i % 5 + 1}" for i in range(10)],
                                        "Conc": LEVELS * 2, "Area": _responses(slope, 10)})
    path = _excel(tmp_path / "sheets.xlsx", {a: [(2, f)] for a, f in frames.items()},
                  lines=["Units: mg/L"])
    run = read_run(path)
    assert run.source.layout == "sheet-per-analyte"
    assert (run.source.sheet, run.source.sheets) == (None, tuple(ANALYTES))
    assert run.analytes == tuple(ANALYTES)
    assert run.units == {"concentration": "mg/L"}
    for analyte, frame in frames.items():
        assert [p.response for p in run.standards(analyte)] == frame["Area"].tolist()
    assert run.points[0].source_cell == "Fluoride!C4"
    assert run.standards("Nitrate-N")[0].source_cell == "'Nitrate-N'!C4"


def test_sheets_of_the_same_analytes_are_runs_and_only_the_first_is_read(write_xlsx):
    table = [["Analyte", "Conc", "Area"], *[["Nitrate", c, 10 * c] for c in LEVELS]]
    run = read_run(write_xlsx({"Monday": table, "Tuesday": table}))
    assert run.source.sheet == "Monday"
    assert run.warnings == (
        ("sheets 'Tuesday' also hold standards tables; only sheet 'Monday' was read (choose "
        "another with --sheet)"),
    )


def test_sheets_named_as_runs_are_not_analytes(write_xlsx):
    table = [["Conc", "Area"], *[[c, 10 * c] for c in LEVELS]]
    run = read_run(write_xlsx({"Run 1": table, "Run 2": table}))
    assert (run.source.sheet, run.analytes) == ("Run 1", ("run",))
    assert run.warnings[0].startswith("sheets 'Run 2' also hold standards tables")


def test_units_of_each_analytes_own_sheet(write_xlsx):
    sheets = {
        "Lead": [["Conc (µg/L)", "Counts"], *[[c, 100 * c] for c in LEVELS]],
        "Iron": [["Conc (mg/L)", "Counts"], *[[c, 90 * c] for c in LEVELS]],
    }
    run = read_run(write_xlsx(sheets))
    assert run.units == {}
    assert run.analyte_units == {"Lead": {"concentration": "µg/L"},
                                 "Iron": {"concentration": "mg/L"}}
    assert run.units_of("Iron") == {"concentration": "mg/L"}


@pytest.mark.parametrize("layout", ["long", "wide"])
def test_layout_is_said_in_the_record_source(write_csv, layout):
    text = ("Conc,Area\n1,10\n2,20\n3,30\n" if layout == "long"
            else "Conc,Lead,Iron\n1,10,5\n2,20,10\n3,30,15\n")
    assert read_run(write_csv(text)).source.layout == layout
