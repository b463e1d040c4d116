"""Header matching: synonyms, units in brackets, duplicates."""

from __future__ import annotations

import pytest

from calib.io.cells import CellError
from calib.io.columns import CANONICAL, SYNONYMS, column_letter, map_headings, match_heading


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
    ],
)
def test_headings(heading, name, unit):
    assert match_heading(heading) == (name, unit)


def test_every_canonical_column_has_its_own_name_as_a_synonym():
    assert set(CANONICAL) == set(SYNONYMS)
    for name in CANONICAL:
        assert match_heading(name)[0] == name


def test_map_keeps_units_only_for_concentration_and_response():
    columns = map_headings(["Vial", "Conc (mg/L)", "Area [counts]", "Include (y/n)", None, 3.5])
    assert sorted(columns) == ["concentration", "include", "response"]
    assert columns["concentration"].unit == "mg/L"
    assert columns["response"].unit == "counts"
    assert columns["include"].unit is None
    assert columns["response"].label == "C (Area [counts])"


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
