"""Header matching: synonyms in four languages, units, compound wide headings, duplicates."""

from __future__ import annotations

import pytest

from calib.io.cells import CellError
from calib.io.columns import (
    CANONICAL,
    SYNONYMS,
    Heading,
    column_letter,
    map_headings,
    match_heading,
    read_heading,
    split_unit,
)


@pytest.mark.parametrize(
    ("heading", "name", "unit"),
    [
        ("Analyte", "analyte", None),
        ("compound", "analyte", None),
        ("Component", "analyte", None),
        ("Name of analyte", "analyte", None),
        ("Conc. (mg/L)", "concentration", "mg/L"),
        ("CONC", "concentration", None),
        ("Nominal concentration [ng/mL]", "concentration", "ng/mL"),
        ("nominal", "concentration", None),
        ("Amount (µg)", "concentration", "µg"),
        ("Response [counts]", "response", "counts"),
        ("Peak Area", "response", None),
        ("peak_area", "response", None),
        ("PEAK-HEIGHT", "response", None),
        ("Absorbance (AU)", "response", "AU"),
        ("signal", "response", None),
        ("Counts", "response", None),
        ("Rep", "replicate", None),
        ("Injection", "replicate", None),
        ("Include?", "include", None),
        ("Include (y/n)", "include", None),
        ("used", "include", None),
        ("Exclusion reason", "exclusion_reason", None),
        ("exclusion_reason", "exclusion_reason", None),
        ("Comment", "exclusion_reason", None),
        ("Sample type", "sample_type", None),
        ("TYPE", "sample_type", None),
        ("Sample ID", "sample_id", None),
        ("Sample name", "sample_id", None),
        ("Sample", "sample_id", None),
        ("id", "sample_id", None),
        ("Area %", None, None),  # a share of the total area, not a response
        ("Retention time (min)", None, None),
        # German
        ("Konz. (mg/l)", "concentration", "mg/l"),
        ("Sollkonzentration", "concentration", None),
        ("Fläche", "response", None),
        ("Peakhöhe", "response", None),
        ("Probenname", "sample_id", None),
        ("Probenart", "sample_type", None),
        ("Bemerkung", "exclusion_reason", None),
        ("Injektionsreihenfolge", "injection_order", None),
        ("IS-Fläche", "is_response", None),
        ("Stufe", "level", None),
        # French
        ("Concentration nominale (µg/L)", "concentration", "µg/L"),
        ("Aire du pic", "response", None),
        ("Échantillon", "sample_id", None),
        ("Type d'échantillon", "sample_type", None),
        ("Étalon interne", "is_response", None),
        ("Réplique", "replicate", None),
        # Spanish
        ("Concentración (ng/mL)", "concentration", "ng/mL"),
        ("Área", "response", None),
        ("Muestra", "sample_id", None),
        ("Tipo de muestra", "sample_type", None),
        ("Analito", "analyte", None),
        # units written without brackets
        ("Konzentration in mg/l", "concentration", "mg/l"),
        ("Conc, ng/mL", "concentration", "ng/mL"),
        ("Conc ppb", "concentration", "ppb"),
        # internal standard, order, level
        ("IS Area", "is_response", None),
        ("ISTD response [counts]", "is_response", "counts"),
        ("Injection order", "injection_order", None),
        ("Cal level", "level", None),
        ("Analyte Peak Area", "response", None),
    ],
)
def test_headings(heading, name, unit):
    assert match_heading(heading) == (name, unit)


@pytest.mark.parametrize(
    ("heading", "name", "analyte", "unit"),
    [
        ("Nitrate area", "response", "Nitrate", None),
        ("Nitrate-N area (µS*min)", "response", "Nitrate-N", "µS*min"),
        ("Area: Fluoride", "response", "Fluoride", None),
        ("2,4-D area", "response", "2,4-D", None),
        ("KX-214 IS area", "is_response", "KX-214", None),
        ("Fluoride conc (mg/L)", "concentration", "Fluoride", "mg/L"),
        ("Konz. Nitrat (mg/l)", "concentration", "Nitrat", "mg/l"),
        ("Fläche Nitrat", "response", "Nitrat", None),
        ("Atrazine_Response", "response", "Atrazine", None),
        ("NitrateArea", "response", "Nitrate", None),
    ],
)
def test_compound_headings_name_the_analyte(heading, name, analyte, unit):
    assert read_heading(heading) == Heading(name, unit, analyte)


@pytest.mark.parametrize(
    "heading", ["Nitrate RT", "Nitrate calc conc", "Area ratio", "Accuracy (%)", "Vial"]
)
def test_columns_calib_does_not_use_are_marked(heading):
    assert read_heading(heading) == Heading(None, ignored=True)


@pytest.mark.parametrize("heading", ["Total area", "Peak", "Sample conc", "Fluoride"])
def test_unknown_headings(heading):
    assert read_heading(heading) == Heading(None)


def test_split_unit_keeps_names_that_end_in_response_words():
    assert split_unit("Nitrate counts") == ("Nitrate counts", None)
    assert split_unit("Absorbance [AU]") == ("Absorbance", "AU")


def test_every_canonical_column_has_its_own_name_as_a_synonym():
    assert set(CANONICAL) == set(SYNONYMS)
    for name in CANONICAL:
        assert match_heading(name)[0] == name


def test_map_keeps_units_only_for_measured_columns():
    columns = map_headings(["Vial", "Conc (mg/L)", "Area [counts]", "Include (y/n)", None, 3.5])
    assert sorted(columns) == ["concentration", "include", "response"]
    assert columns["concentration"].unit == "mg/L"
    assert columns["response"].unit == "counts"
    assert columns["include"].unit is None
    assert columns["response"].label == "C (Area [counts])"
    assert map_headings(["Conc", "IS area (counts)"])["is_response"].unit == "counts"


def test_two_headings_for_one_column_name_both():
    with pytest.raises(CellError) as err:
        map_headings(["Sample", "Conc", "Peak area", "Height"])
    assert str(err.value) == (
        "two columns name the response: C (Peak area) and D (Height); keep one, or rename the "
        "other so that only one heading names the response"
    )


def test_column_letters():
    # Spreadsheet column naming: A..Z, AA..AZ, ..., ZZ, AAA (XFD is the last column of .xlsx).
    assert [column_letter(i) for i in (0, 1, 25, 26, 51, 52, 701, 702, 16383)] == [
        "A", "B", "Z", "AA", "AZ", "BA", "ZZ", "AAA", "XFD"
    ]
    with pytest.raises(ValueError, match="index must be >= 0; got -1"):
        column_letter(-1)
