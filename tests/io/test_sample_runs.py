"""The invented exports in sample_runs/: each shape loads with the right points, units, metadata.

The figures come from the scenario the generator describes (levels, replicates,
the excluded standard and its reason); the files are also regenerated from
the fixed seed and must read back the same.
"""

from __future__ import annotations

import dataclasses
import math
from pathlib import Path

import pytest

from calib.io import read_run
from calib.options import SampleType
from sample_runs import make_import_examples as examples

FOLDER = Path(examples.__file__).parent


def _run(name):
    return read_run(FOLDER / name)


def _kinds(run, analyte):
    counts = {}
    for p in run.points:
        if p.analyte == analyte:
            counts[p.sample_type.value] = counts.get(p.sample_type.value, 0) + 1
    return counts


def test_anions_wide():
    run = _run("fernbrook_anions_wide_2026-12-01.xlsx")
    assert (run.source.layout, run.source.sheet) == ("wide", "Anions")
    assert run.analytes == tuple(examples.ANIONS)
    assert run.units == {"concentration": "mg/L", "response": "µS*min"}
    assert run.metadata["instrument"] == "IC-2 (conductivity)"
    for analyte, (levels, _) in examples.ANIONS.items():
        standards = run.standards(analyte)
        assert [p.concentration for p in standards] == [c for c in levels for _ in (1, 2)]
        assert [p.replicate for p in standards] == [1, 2] * 6
    blank = run.points[0]
    assert (blank.sample_type, blank.exclusion_reason) == (
        SampleType.BLANK, "response not detected ('n.d.' in the file)")


def test_cations_under_merged_analyte_names():
    run = _run("fernbrook_cations_grouped_2026-12-02.xlsx")
    assert run.source.layout == "wide"
    assert run.analytes == tuple(examples.CATIONS)
    assert [p.concentration for p in run.standards("Magnesium")][::2] == [0.5, 1, 2.5, 5, 10]


def test_metals_stacked_in_a_spanish_text_file():
    run = _run("fernbrook_metals_stacked_2026-12-03.csv")
    assert run.source.layout == "stacked"
    assert (run.source.encoding, run.source.delimiter) == ("utf-8", ",")
    assert run.analytes == tuple(examples.METALS)
    assert run.metadata == {"title": "Laboratorio Fernbrook (ficticio)",
                            "method": "FWL-MS-02 metales por ICP-MS", "instrument": "ICP-MS 1",
                            "run_date": "2026-12-03", "operator": "R. Okafor",
                            "Revisado por": "J. Marsh"}
    assert run.units == {"concentration": "µg/L", "response": "cps"}
    for analyte, (levels, slope) in examples.METALS.items():
        assert _kinds(run, analyte) == {"blank": 1, "standard": 10}
        top = run.standards(analyte)[-1]
        assert top.response == pytest.approx(slope * levels[-1] + 40, rel=0.08)


def test_anions_one_sheet_each_with_an_error_value():
    run = _run("fernbrook_anions_by_sheet_2026-12-04.ods")
    assert run.source.layout == "sheet-per-analyte"
    assert run.source.sheets == ("Fluoride", "Nitrate-N", "Sulfate")
    assert run.units == {"concentration": "mg/L"}
    excluded = [p for p in run.points if not p.included]
    assert [(p.source_cell, p.exclusion_reason) for p in excluded] == [
        ("Sulfate!D21", "response is the spreadsheet error value #DIV/0!")
    ]
    assert [p.level for p in run.standards("Fluoride")][:4] == ["L1", "L1", "L1", "L2"]


def test_german_export():
    run = _run("fernbrook_nitrat_2026-12-05.txt")
    assert (run.source.encoding, run.source.delimiter, run.source.decimal_mark) == (
        "cp1252", ";", ",")
    assert run.analytes == ("Nitrat-N",)
    assert run.metadata["instrument"] == "IC-2" and run.metadata["run_date"] == "05.12.2026"
    assert _kinds(run, "Nitrat-N") == {"blank": 1, "standard": 18, "qc": 1}
    # "8.420,123"-style areas: thousands points and decimal commas.
    top = run.standards("Nitrat-N")[-1]
    assert top.response == pytest.approx(8420, rel=0.05)
    assert run.points[-1].concentration == 3.0


def test_french_export_in_utf16():
    run = _run("fernbrook_phosphate_2026-12-06.tsv")
    assert (run.source.encoding, run.source.delimiter) == ("utf-16", "\t")
    assert run.analytes == ("Orthophosphate-P",)
    assert run.units == {"concentration": "mg/L", "response": "AU"}
    assert _kinds(run, "Orthophosphate-P") == {"blank": 1, "standard": 12, "qc": 1}


def test_macro_workbook_with_merged_analyte_and_a_hidden_row():
    run = _run("fernbrook_fluoride_macro_2026-12-07.xlsm")
    assert run.analytes == ("Fluoride",)
    assert run.warnings == (
        "the workbook carries macros; calib read the saved cell values and ran no macro",
    )
    hidden = [p for p in run.points if not p.included]
    assert [(p.source_cell, p.exclusion_reason) for p in hidden] == [
        ("'ISE run'!D11", "the row is hidden in the workbook")
    ]
    assert all(p.response < 0.6 for p in run.points)


@pytest.mark.parametrize("name", ["kestrel_kx214_plasma_2026-12-08.xlsx",
                                  "kestrel_kx214_plasma_2026-12-09.xls"])
def test_kestrel_internal_standard_run(name):
    run = _run(name)
    assert run.analytes == ("KX-214",)
    assert run.metadata["operator"] == "T. Vance"
    assert run.units["concentration"] == "ng/mL" and run.units["response"] == "ratio"
    assert _kinds(run, "KX-214") == {"blank": 1, "zero": 1, "standard": 16, "qc": 12,
                                     "unknown": 5}
    standards = run.standards("KX-214")
    assert sorted({p.concentration for p in standards}) == list(examples.KX214_LEVELS)
    excluded = [p for p in standards if not p.included]
    assert [p.exclusion_reason for p in excluded] == ["carry-over from the preceding injection"]
    for p in standards:
        assert p.response == pytest.approx(p.analyte_response / p.is_response, rel=1e-15)
    assert len(run.warnings) == 1 and "(Subject 105): the internal standard of KX-214" in \
        run.warnings[0]
    below = [p for p in run.points if p.sample_type is SampleType.UNKNOWN and not p.included]
    assert [p.exclusion_reason for p in below] == [
        "response below the quantifiable range ('<LLOQ' in the file)"]
    assert [p.injection_order for p in run.points] == list(range(1, 36))


def test_forty_analyte_screen():
    run = _run("multiresidue_screen_40_2026-12-10.xlsx")
    assert run.source.layout == "wide"
    assert run.analytes == tuple(examples.screen_names())
    assert run.units == {"concentration": "µg/L", "response": "ratio"}
    assert all(len(run.standards(a)) == 14 for a in run.analytes)
    assert run.points[0].source_cell == "Screen!E8"


def test_generator_reproduces_the_committed_files(tmp_path):
    written = examples.write_all(tmp_path)
    assert sorted(p.name for p in written) == sorted(
        p.name for p in FOLDER.iterdir() if p.name.startswith(
            ("fernbrook_anions", "fernbrook_cations", "fernbrook_metals", "fernbrook_nitrat_",
             "fernbrook_phosphate", "fernbrook_fluoride_macro", "kestrel_", "multiresidue"))
    )
    for path in written:
        fresh, kept = read_run(path), read_run(FOLDER / path.name)
        assert [_comparable(p) for p in fresh.points] == [_comparable(p) for p in kept.points]
        assert fresh.metadata == kept.metadata


def _comparable(point):
    values = dataclasses.asdict(point)
    return {k: ("nan" if isinstance(v, float) and math.isnan(v) else v) for k, v in values.items()}
