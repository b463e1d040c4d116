"""Sample types from a type column or from sample names, in four languages."""

from __future__ import annotations

import pytest

from calib.io.cells import CellError
from calib.io.sampletypes import SampleTyper, type_from_name
from calib.options import SampleType

S, B, Z, Q, U = (SampleType.STANDARD, SampleType.BLANK, SampleType.ZERO, SampleType.QC,
                 SampleType.UNKNOWN)


@pytest.mark.parametrize(
    ("name", "kind"),
    [
        ("Std 3", S), ("STD-10", S), ("Cal-5", S), ("Cal 1", S), ("Calibrator 2", S),
        ("Kal 4", S), ("Étalon 2", S), ("Patrón 3", S), ("Standard 1", S),
        ("Blank", B), ("Reagent blank", B), ("Double blank", B), ("BLK-1", B), ("Leerwert", B),
        ("Blanc", B), ("Blanco", B), ("RB1", B),
        ("Zero", Z), ("Zero sample", Z), ("Blank+IS", Z), ("Blank with IS", Z),
        ("QC-L", Q), ("QC L", Q), ("QCH", Q), ("LQC", Q), ("MQC 2", Q), ("QC-LLOQ", Q),
        ("CCV", Q), ("Kontrolle 1", Q), ("Contrôle", Q),
    ],
)
def test_names_that_say_the_type(name, kind):
    assert type_from_name(name) is kind


@pytest.mark.parametrize("name", ["L3", "S1", "Level 4", "Subject 101", "Well 12", "Calcium"])
def test_names_that_do_not(name):
    assert type_from_name(name) is None


def test_the_concentration_decides_names_that_say_nothing():
    typer = SampleTyper()
    assert typer.from_name("L3", has_concentration=True) is S
    assert typer.from_name("Subject 101", has_concentration=False) is U
    assert typer.from_name(None, has_concentration=True) is S
    assert typer.from_name("QC-M", has_concentration=True) is Q


@pytest.mark.parametrize(
    ("cell", "kind"),
    [
        ("Standard", S), ("std", S), ("Cal", S), ("Calibration standard", S),
        ("Kalibrierstandard", S), ("Étalon", S), ("Patrón", S), ("Blank", B),
        ("Blindwert", B), ("Blanc", B), ("Zero", Z), ("QC", Q), ("Quality control", Q),
        ("Kontrolle", Q), ("Control de calidad", Q), ("Unknown", U), ("Sample", U),
        ("Probe", U), ("Échantillon", U), ("Muestra", U), ("Std 2", S), ("QC-H", Q),
    ],
)
def test_type_cells(cell, kind):
    assert SampleTyper().from_cell(cell) is kind


def test_unknown_type_cell_lists_the_words():
    with pytest.raises(CellError) as err:
        SampleTyper().from_cell("spike")
    assert str(err.value) == (
        "found the text 'spike'; expected a sample type: standard (standard, std, cal, "
        "calibrator, calibrant...); blank (blank, blk, reagent blank, method blank, solvent "
        "blank...); zero (zero, zero standard, zero sample, zero calibrator, blank with is...); "
        "qc (qc, quality control, qc sample, control, control sample...); unknown (unknown, "
        "unk, sample, unknown sample, analyte...)"
    )


def test_import_map_patterns_come_first():
    typer = SampleTyper({SampleType.QC: ("KS-*",), SampleType.STANDARD: ("P?",)})
    assert typer.from_cell("ks-3") is Q
    assert typer.from_name("P4", has_concentration=False) is S
    assert typer.from_name("Std 1", has_concentration=True) is S


@pytest.mark.parametrize(
    ("name", "kind"),
    [("Std QC", Q), ("Check Std 5", Q), ("QC Std 15", Q), ("Verification 12", Q), ("CRM 7", Q),
     ("Cal Check 2", Q), ("ICV-2", Q), ("LCS", Q), ("CCB 1", B), ("Blank", B), ("Std 3", S)],
)
def test_check_words_anywhere_in_a_name_make_a_qc(name, kind):
    # Issue 17: independent checks (check standards, verification standards, reference
    # materials) are judged by the QC rule; fitted as standards they would inflate the levels
    # and degrees of freedom of the curve they are meant to check (common practice).
    assert SampleTyper().from_name(name, has_concentration=True) is kind


@pytest.mark.parametrize(
    ("name", "why"),
    [("Cal Blank", "names both a calibration standard and a blank"),
     ("Spike 1", "names a spike, which may be a QC or a sample"),
     ("Std Spike", "names both a spike and a calibration standard"),
     ("QC Blank", "names both a QC or check sample and a blank")],
)
def test_names_of_two_types_are_refused_with_advice(name, why):
    with pytest.raises(CellError) as err:
        SampleTyper().from_name(name, has_concentration=True)
    assert str(err.value) == (
        f"found the sample name {name!r}, which {why}; calib does not guess whether it is a "
        "calibration point: add a sample type column (standard, blank, qc, unknown), or an "
        f"import map with [sample_types] patterns such as "
        f"{'blank' if 'blank' in why else 'qc'} = [{name!r}]"
    )


def test_an_import_map_pattern_settles_an_ambiguous_name():
    typer = SampleTyper({SampleType.BLANK: ("cal blank*",)})
    assert typer.from_name("Cal Blank 2", has_concentration=True) is B
